/* strandecho: sliding-window robust noise profile of the matched-filter output, for thresholds
 * that follow non-stationary noise (see detect.h). Block MAD sigmas (Rousseeuw & Croux, JASA 88,
 * 1993), grouped into runs of one level so that each level is measured on many lags; a change
 * of level keeps the larger level on both sides of it, so the false-alarm rate holds there. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/detect.h"

#define SE_NOISE_BLOCK_MIN 4096
#define SE_NOISE_BLOCK_PER_SAMPLE 256
#define SE_NOISE_RUN_REACH 4 /* blocks each side averaged within a run */
#define SE_NOISE_SUBBLOCKS 8 /* parts of a block whose MADs show a change inside it */

_Static_assert(SE_NOISE_BLOCK_TAPS == SE_NOISE_BLOCK_SAMPLES + SE_NOISE_SUBBLOCKS * SE_NOISE_PART_SAMPLES,
               "SE_NOISE_BLOCK_TAPS counts the block's and its parts' strided samples");

static int se_same_level(double a, double b);
static size_t se_strided_taps(size_t a, size_t e, size_t max, size_t *idx);

/* Two block sigmas of one level: within SE_NOISE_RUN_RATIO of each other. */
static int se_same_level(double a, double b)
{
    double hi = fmax(a, b), lo = fmin(a, b);
    return lo > 0.0 && hi < SE_NOISE_RUN_RATIO * lo;
}

size_t se_noise_block_length(size_t m)
{
    size_t l = SE_NOISE_BLOCK_PER_SAMPLE;
    if (m > SIZE_MAX / l)
        return SIZE_MAX;
    l *= m;
    return l < SE_NOISE_BLOCK_MIN ? SE_NOISE_BLOCK_MIN : l;
}

size_t se_noise_block_count(size_t start, size_t end, size_t block)
{
    if (block == 0 || end <= start)
        return 0;
    return (end - start) / block;
}

/* Offsets [0, len) that se_noise_mad reads for the values (not the differences) of the block
 * (at most SE_NOISE_BLOCK_SAMPLES, strided) and of each of its parts (SE_NOISE_PART_SAMPLES). */
static size_t se_strided_taps(size_t a, size_t e, size_t max, size_t *idx)
{
    size_t count = e - a, stride = count / max + (count % max != 0), used, i;
    used = (count + stride - 1) / stride;
    for (i = 0; idx != NULL && i < used; i++)
        idx[i] = a + i * stride;
    return used;
}

size_t se_noise_block_taps(size_t len, size_t *idx, size_t *first)
{
    size_t q, part = len / SE_NOISE_SUBBLOCKS, nt;
    if (len == 0)
        return 0;
    nt = se_strided_taps(0, len, SE_NOISE_BLOCK_SAMPLES, idx);
    for (q = 0; q <= SE_NOISE_SUBBLOCKS; q++) {
        size_t a = q * part, e = q + 1 == SE_NOISE_SUBBLOCKS ? len : a + part;
        if (first != NULL)
            first[q] = nt;
        if (q < SE_NOISE_SUBBLOCKS && part >= 16)
            nt += se_strided_taps(a, e, SE_NOISE_PART_SAMPLES, idx != NULL ? idx + nt : NULL);
    }
    return nt;
}

se_status se_noise_block_sigma_taps(const double *vals, size_t len, double *sigma, double *hi,
                                    se_error *err)
{
    size_t first[SE_NOISE_SUBBLOCKS + 1], nt, q, i;
    se_noise nz;
    se_status st;
    if (sigma == NULL || hi == NULL || vals == NULL)
        return se_fail(err, SE_ERR_ARG, "noise block: NULL %s", vals == NULL ? "values" : "result");
    if (len == 0)
        return se_fail(err, SE_ERR_ARG, "noise block: empty block");
    nt = se_noise_block_taps(len, NULL, first);
    for (i = 0; i < nt; i++)
        if (!isfinite(vals[i])) {
            size_t *idx = malloc(nt * sizeof *idx), at = SIZE_MAX;
            if (idx != NULL) {
                se_noise_block_taps(len, idx, NULL);
                at = idx[i];
                free(idx);
            }
            return se_fail(err, SE_ERR_DATA, "noise block: lag %zu of the block is not finite", at);
        }
    /* every value once, stride 1: se_noise_mad's sigma of the block's strided values, bit for bit
     * (its beta, from differences of these values, is not used) */
    st = se_noise_mad(vals, 0, first[0], first[0], &nz, err);
    if (st != SE_OK)
        return st;
    *sigma = nz.sigma;
    *hi = nz.sigma;
    /* the MAD ignores a loud minority of the block: its parts show it */
    for (q = 0; q < SE_NOISE_SUBBLOCKS && first[q + 1] > first[q]; q++) {
        st = se_noise_mad(vals + first[q], 0, first[q + 1] - first[q], first[q + 1] - first[q], &nz,
                          err);
        if (st != SE_OK)
            return st;
        if (nz.sigma > *hi)
            *hi = nz.sigma;
    }
    return SE_OK;
}

se_status se_noise_block_sigma(const double *r_block, size_t len, double *sigma, double *hi,
                               se_error *err)
{
    size_t *idx, nt, i;
    double *vals;
    se_status st;
    if (sigma == NULL || hi == NULL || r_block == NULL)
        return se_fail(err, SE_ERR_ARG, "noise block: NULL %s", r_block == NULL ? "data" : "result");
    if (len == 0)
        return se_fail(err, SE_ERR_ARG, "noise block: empty block");
    /* strided samples, not every lag: 2^10 values give the block's sigma to about 3.6 %, far
     * inside the factor 2 that decides whether the noise varies; every lag cost as much as the
     * correlation itself */
    idx = malloc(SE_NOISE_BLOCK_TAPS * sizeof *idx);
    vals = malloc(SE_NOISE_BLOCK_TAPS * sizeof *vals);
    if (idx == NULL || vals == NULL) {
        free(idx);
        free(vals);
        return se_fail(err, SE_ERR_NOMEM, "noise block: cannot allocate %d samples",
                       (int)SE_NOISE_BLOCK_TAPS);
    }
    nt = se_noise_block_taps(len, idx, NULL);
    for (i = 0; i < nt; i++)
        vals[i] = r_block[idx[i]];
    st = se_noise_block_sigma_taps(vals, len, sigma, hi, err);
    free(idx);
    free(vals);
    return st;
}

se_status se_noise_profile_from_blocks(const double *raw, const double *hi, size_t nb, size_t start,
                                       size_t block, size_t guard, double floor,
                                       se_noise_profile *out, int *varies, se_error *err)
{
    size_t b, r0, r1;
    double mn = INFINITY, mx = 0.0;
    double *lv, *rw;
    if (out == NULL || varies == NULL || raw == NULL || hi == NULL)
        return se_fail(err, SE_ERR_ARG, "noise profile: NULL %s",
                       raw == NULL || hi == NULL ? "block sigmas" : "result");
    memset(out, 0, sizeof *out);
    *varies = 0;
    if (nb == 0 || block == 0)
        return se_fail(err, SE_ERR_ARG, "noise profile: %zu blocks of %zu lags", nb, block);
    if (!(floor >= 0.0))
        floor = 0.0;
    for (b = 0; b < nb; b++) {
        double s = raw[b] > floor ? raw[b] : floor;
        if (!isfinite(s) || !isfinite(hi[b]))
            return se_fail(err, SE_ERR_DATA, "noise profile: block %zu sigma is not finite", b);
        mn = fmin(mn, s);
        mx = fmax(mx, fmax(s, hi[b]));
    }
    if (nb < 3 || !(mn > 0.0) || mx < SE_NOISE_VARY_RATIO * mn)
        return SE_OK; /* stationary: the global threshold holds */
    lv = se_calloc(nb, sizeof *lv, "noise profile", err);
    rw = se_calloc(nb, sizeof *rw, "noise profile", err);
    if (lv == NULL || rw == NULL) {
        free(lv);
        free(rw);
        return SE_ERR_NOMEM;
    }
    for (b = 0; b < nb; b++)
        rw[b] = raw[b] > floor ? raw[b] : floor;
    for (r0 = 0; r0 < nb; r0 = r1) {
        for (r1 = r0 + 1; r1 < nb && se_same_level(rw[r1 - 1], rw[r1]); r1++) {
        }
        if (r1 - r0 == 1 || rw[r0] * SE_NOISE_RUN_RATIO < hi[r0]) {
            /* alone: a change of level inside it (or an outlier): the larger side */
            double s = rw[r0];
            if (r0 > 0)
                s = fmax(s, rw[r0 - 1]);
            if (r0 + 1 < nb)
                s = fmax(s, rw[r0 + 1]);
            lv[r0] = fmax(s, hi[r0]);
            r1 = r0 + 1;
            continue;
        }
        /* a run ends before a block whose parts are louder than the block: a change inside it */
        for (b = r0 + 1; b < r1; b++)
            if (rw[b] * SE_NOISE_RUN_RATIO < hi[b]) {
                r1 = b;
                break;
            }
        for (b = r0; b < r1; b++) {
            size_t a = b > r0 + SE_NOISE_RUN_REACH ? b - SE_NOISE_RUN_REACH : r0;
            size_t e = b + SE_NOISE_RUN_REACH + 1 < r1 ? b + SE_NOISE_RUN_REACH + 1 : r1, q;
            double sum = 0.0;
            for (q = a; q < e; q++)
                sum += rw[q];
            lv[b] = sum / (double)(e - a);
        }
    }
    out->start = start;
    out->block = block;
    out->n_blocks = nb;
    out->guard = guard;
    out->sigma = lv;
    out->raw = rw;
    out->min_sigma = INFINITY;
    out->max_sigma = 0.0;
    for (b = 0; b < nb; b++) {
        out->min_sigma = fmin(out->min_sigma, lv[b]);
        out->max_sigma = fmax(out->max_sigma, lv[b]);
    }
    *varies = 1;
    return SE_OK;
}

se_status se_noise_profile_estimate(const double *r, size_t start, size_t end, size_t block,
                                    size_t guard, double floor, se_noise_profile *out, int *varies,
                                    se_error *err)
{
    size_t nb = se_noise_block_count(start, end, block), b;
    double *raw, *hi;
    se_status st;
    if (out == NULL || varies == NULL || r == NULL)
        return se_fail(err, SE_ERR_ARG, "noise profile: NULL %s", r == NULL ? "data" : "result");
    memset(out, 0, sizeof *out);
    *varies = 0;
    if (nb < 3)
        return SE_OK;
    raw = se_calloc(nb, sizeof *raw, "noise blocks", err);
    hi = se_calloc(nb, sizeof *hi, "noise blocks", err);
    if (raw == NULL || hi == NULL) {
        free(raw);
        free(hi);
        return SE_ERR_NOMEM;
    }
    for (b = 0; b < nb; b++) {
        size_t a = start + b * block, e = b + 1 == nb ? end : a + block;
        st = se_noise_block_sigma(r + a, e - a, &raw[b], &hi[b], err);
        if (st != SE_OK) {
            free(raw);
            free(hi);
            return st;
        }
    }
    st = se_noise_profile_from_blocks(raw, hi, nb, start, block, guard, floor, out, varies, err);
    free(raw);
    free(hi);
    return st;
}

double se_noise_profile_sigma(const se_noise_profile *p, double lag)
{
    size_t b, a;
    double s, off;
    if (p == NULL || p->n_blocks == 0 || p->sigma == NULL)
        return NAN;
    if (!(lag >= (double)p->start))
        return p->sigma[0];
    off = lag - (double)p->start;
    b = off >= (double)(p->n_blocks * p->block) ? p->n_blocks - 1 : (size_t)(off / (double)p->block);
    if (b >= p->n_blocks)
        b = p->n_blocks - 1;
    s = p->sigma[b];
    a = p->start + b * p->block;
    if (b > 0 && lag - (double)a < (double)p->guard)
        s = fmax(s, p->sigma[b - 1]);
    if (b + 1 < p->n_blocks && (double)(a + p->block) - lag <= (double)p->guard)
        s = fmax(s, p->sigma[b + 1]);
    return s;
}

void se_noise_profile_free(se_noise_profile *p)
{
    if (p == NULL)
        return;
    free(p->sigma);
    free(p->raw);
    memset(p, 0, sizeof *p);
}
