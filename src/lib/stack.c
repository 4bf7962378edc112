/* strandecho: repeated shots found, aligned on their outgoing pulses, screened and stacked
 * (see stack.h). */
#include "strandecho/stack.h"

#include <fftw3.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/detect.h"
#include "strandecho/xcorr.h"

#define SE_STACK_CLIP_RUN 5
#define SE_STACK_MARGIN 64 /* samples of margin around a segment for the phase ramp */

static int se_dbl_cmp(const void *a, const void *b);
static double se_median_copy(const double *v, size_t n, double *scratch);
static int se_segment_clipped(const double *x, size_t n, size_t b, size_t e, double vmax,
                              double vmin);

void se_stack_config_init(se_stack_config *cfg)
{
    memset(cfg, 0, sizeof *cfg);
    cfg->pre = SIZE_MAX;
    cfg->mode = SE_STACK_MEAN;
}

void se_stack_result_free(se_stack_result *res)
{
    if (res == NULL)
        return;
    free(res->onsets);
    free(res->amplitudes);
    free(res->status);
    free(res->stacked);
    memset(res, 0, sizeof *res);
}

const char *se_shot_status_name(se_shot_status s)
{
    switch (s) {
    case SE_SHOT_USED:
        return "used";
    case SE_SHOT_CLIPPED:
        return "clipped";
    case SE_SHOT_AMPLITUDE:
        return "amplitude";
    case SE_SHOT_LATE:
        return "late";
    case SE_SHOT_MISFIT:
        return "misfit";
    }
    return "unknown";
}

static int se_dbl_cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static double se_median_copy(const double *v, size_t n, double *scratch)
{
    memcpy(scratch, v, n * sizeof *v);
    qsort(scratch, n, sizeof *scratch, se_dbl_cmp);
    return n % 2 ? scratch[n / 2] : 0.5 * (scratch[n / 2 - 1] + scratch[n / 2]);
}

static int se_segment_clipped(const double *x, size_t n, size_t b, size_t e, double vmax,
                              double vmin)
{
    size_t i, j;
    if (e > n)
        e = n;
    for (i = b; i < e; i = j) {
        j = i + 1;
        if (x[i] != vmax && x[i] != vmin)
            continue;
        while (j < n && x[j] == x[i])
            j++;
        /* the run may start before b */
        {
            size_t s = i;
            while (s > 0 && x[s - 1] == x[i])
                s--;
            if (j - s >= SE_STACK_CLIP_RUN)
                return 1;
        }
    }
    return 0;
}

/* ---- Trigger search, fed in pieces ---- */

/* A local maximum of s r (s = +1 or -1) that may still become a trigger. */
typedef struct se_shot_cand {
    size_t lag;
    double r;
    int sign;
} se_shot_cand;

struct se_shot_finder {
    size_t n, hi, mi, seen, ncand, capcand;
    double frac, g, rbest, rm2, rm1; /* g = |rbest|: largest |r| over [0, hi) so far (its first
                                        lag); rm2, rm1: r[seen-2], r[seen-1] */
    se_shot_cand *cand;
};

se_shot_finder *se_shot_finder_create(size_t n, size_t pulse_length, const se_stack_config *cfg,
                                      se_error *err)
{
    se_shot_finder *f;
    if (cfg == NULL || pulse_length < 1 || pulse_length > n) {
        se_fail(err, SE_ERR_ARG, "stack: a %zu-sample pulse for %zu lags", pulse_length, n);
        return NULL;
    }
    f = se_calloc(1, sizeof *f, "shot finder", err);
    if (f == NULL)
        return NULL;
    f->n = n;
    f->hi = n - pulse_length + 1;
    f->mi = cfg->min_interval ? cfg->min_interval : 4 * pulse_length;
    f->frac = cfg->trigger_fraction > 0.0 ? cfg->trigger_fraction : 0.5;
    f->capcand = 64;
    f->cand = se_calloc(f->capcand, sizeof *f->cand, "shot finder", err);
    if (f->cand == NULL) {
        free(f);
        return NULL;
    }
    return f;
}

void se_shot_finder_destroy(se_shot_finder *f)
{
    if (f == NULL)
        return;
    free(f->cand);
    free(f);
}

/* Lag i (< hi) with r[i-1] (valid when i > 0), r[i] and r[i+1] (valid when i + 1 < n) known:
 * keep it when it is a local maximum of +r or -r (the tests of the whole-record search) that
 * reaches frac of the largest |r| so far (the final largest can only be larger). */
static se_status se_shot_consider(se_shot_finder *f, size_t i, double rp, double rc, double rn,
                                  se_error *err)
{
    int s;
    for (s = 1; s >= -1; s -= 2) {
        double v = s * rc;
        if (v < f->frac * f->g || (i > 0 && s * rp > v) || (i + 1 < f->n && s * rn >= v))
            continue;
        if (f->ncand == f->capcand) {
            size_t a, q = 0;
            for (a = 0; a < f->ncand; a++) /* drop what the larger maximum now excludes */
                if (!(f->cand[a].sign * f->cand[a].r < f->frac * f->g))
                    f->cand[q++] = f->cand[a];
            f->ncand = q;
            if (q > f->capcand / 2) {
                se_shot_cand *t = realloc(f->cand, 2 * f->capcand * sizeof *t);
                if (t == NULL)
                    return se_fail(err, SE_ERR_NOMEM, "stack: cannot keep %zu trigger candidates",
                                   2 * f->capcand);
                f->cand = t;
                f->capcand *= 2;
            }
        }
        f->cand[f->ncand].lag = i;
        f->cand[f->ncand].r = rc;
        f->cand[f->ncand].sign = s;
        f->ncand++;
    }
    return SE_OK;
}

se_status se_shot_finder_push(se_shot_finder *f, const double *r, size_t count, se_error *err)
{
    size_t a;
    if (f == NULL || (r == NULL && count > 0))
        return se_fail(err, SE_ERR_ARG, "stack: no shot finder or no values");
    if (count > f->n - f->seen)
        return se_fail(err, SE_ERR_ARG, "stack: %zu lags pushed to a finder of %zu", f->seen + count,
                       f->n);
    for (a = 0; a < count; a++) {
        size_t i = f->seen; /* r[i] arrives: lag i - 1 can be judged */
        double v = r[a];
        if (i < f->hi && fabs(v) > f->g) {
            f->g = fabs(v);
            f->rbest = v;
        }
        if (i >= 1 && i - 1 < f->hi) {
            se_status st = se_shot_consider(f, i - 1, f->rm2, f->rm1, v, err);
            if (st != SE_OK)
                return st;
        }
        f->rm2 = f->rm1;
        f->rm1 = v;
        f->seen++;
    }
    return SE_OK;
}

se_status se_shot_finder_finish(se_shot_finder *f, size_t **idx_out, size_t *k_out, se_error *err)
{
    size_t *idx, cap, k = 0, a;
    double *keep_v, sg;
    if (idx_out == NULL || k_out == NULL || f == NULL)
        return se_fail(err, SE_ERR_ARG, "stack: no shot finder or no output");
    *idx_out = NULL;
    *k_out = 0;
    if (f->seen != f->n)
        return se_fail(err, SE_ERR_ARG, "stack: %zu of %zu lags pushed", f->seen, f->n);
    if (f->n - 1 < f->hi) { /* the last lag has no right neighbour */
        se_status st = se_shot_consider(f, f->n - 1, f->rm2, f->rm1, 0.0, err);
        if (st != SE_OK)
            return st;
    }
    if (!(f->g > 0.0))
        return se_fail(err, SE_ERR_NOTFOUND, "stack: no shot found (the trigger channel is silent)");
    cap = f->n / f->mi + 2;
    idx = se_calloc(cap, sizeof *idx, "stack triggers", err);
    keep_v = se_calloc(cap, sizeof *keep_v, "stack triggers", err);
    if (idx == NULL || keep_v == NULL) {
        free(idx);
        free(keep_v);
        return SE_ERR_NOMEM;
    }
    /* the sign of the largest (the first lag reaching it), then the local maxima of that sign
     * above frac of it, thinned greedily to one per min_interval, in time order */
    sg = f->rbest >= 0.0 ? 1.0 : -1.0;
    for (a = 0; a < f->ncand; a++) {
        const se_shot_cand *c = &f->cand[a];
        double v = sg * c->r;
        if ((double)c->sign != sg || v < f->frac * f->g)
            continue;
        if (k > 0 && c->lag - idx[k - 1] < f->mi) {
            if (v > sg * keep_v[k - 1]) {
                idx[k - 1] = c->lag;
                keep_v[k - 1] = c->r;
            }
            continue;
        }
        if (k == cap)
            break;
        idx[k] = c->lag;
        keep_v[k] = c->r;
        k++;
    }
    if (k == 0) {
        free(idx);
        free(keep_v);
        return se_fail(err, SE_ERR_NOTFOUND, "stack: no shot found (the trigger channel is silent)");
    }
    /* An echo of a strong shot can reach the trigger level: a trigger less than half the median
     * interval after a stronger one is not a shot. */
    if (k >= 3) {
        double *iv = se_calloc(2 * k, sizeof *iv, "stack intervals", err), half;
        size_t q = 1, i;
        if (iv == NULL) {
            free(idx);
            free(keep_v);
            return SE_ERR_NOMEM;
        }
        for (i = 1; i < k; i++)
            iv[i - 1] = (double)(idx[i] - idx[i - 1]);
        half = 0.5 * se_median_copy(iv, k - 1, iv + k);
        free(iv);
        for (i = 1; i < k; i++) {
            if ((double)(idx[i] - idx[q - 1]) < half && fabs(keep_v[i]) < fabs(keep_v[q - 1]))
                continue;
            idx[q] = idx[i];
            keep_v[q] = keep_v[i];
            q++;
        }
        k = q;
    }
    free(keep_v);
    *idx_out = idx;
    *k_out = k;
    return SE_OK;
}

/* ---- Segments and screening ---- */

se_status se_stack_layout(const double *onsets, size_t k, size_t n, size_t pre_in,
                          size_t pulse_length, size_t *pre_out, size_t *len_out, se_error *err)
{
    size_t pre = pre_in == SIZE_MAX ? pulse_length : pre_in, len, i;
    double *iv = se_calloc(2 * k, sizeof *iv, "stack intervals", err);
    if (iv == NULL)
        return SE_ERR_NOMEM;
    /* Segment length: the median interval between consecutive shots (a shot triggered off its
     * rhythm then carries its neighbour in its segment and fails the misfit test). */
    for (i = 1; i < k; i++)
        iv[i - 1] = onsets[i] - onsets[i - 1];
    len = (size_t)floor(se_median_copy(iv, k - 1, iv + k));
    free(iv);
    for (i = 0; i < k; i++)
        if (onsets[i] < (double)pre)
            pre = (size_t)floor(onsets[i]);
    /* a last shot cut by the end of the record by less than a tenth of the segment still counts:
     * the segment is shortened to what it has */
    {
        double o = floor(onsets[k - 1]);
        size_t avail = o >= (double)pre && (size_t)o - pre + 1 < n ? n - ((size_t)o - pre) - 1 : 0;
        if (avail < len && (double)avail >= 0.9 * (double)len)
            len = avail;
    }
    len = len > 2 * SE_STACK_MARGIN ? len : 2 * SE_STACK_MARGIN;
    if (len > n)
        len = n;
    *pre_out = pre;
    *len_out = len;
    return SE_OK;
}

se_status se_stack_screen(const double *onsets, const double *amplitudes, const unsigned char *clipped,
                          size_t k, size_t n, size_t pre, size_t len, se_shot_status *status,
                          se_error *err)
{
    double *tmp = se_calloc(2 * k + 2, sizeof *tmp, "stack scratch", err), amed;
    size_t i;
    if (tmp == NULL)
        return SE_ERR_NOMEM;
    for (i = 0; i < k; i++)
        tmp[i] = fabs(amplitudes[i]);
    amed = se_median_copy(tmp, k, tmp + k + 1);
    free(tmp);
    for (i = 0; i < k; i++) {
        double o = floor(onsets[i]);
        size_t b = (size_t)o - pre;
        status[i] = SE_SHOT_USED;
        if (b + len + 1 > n)
            status[i] = SE_SHOT_LATE;
        else if (clipped[i])
            status[i] = SE_SHOT_CLIPPED;
        else if (fabs(amplitudes[i]) > 1.5 * amed || fabs(amplitudes[i]) < amed / 1.5)
            status[i] = SE_SHOT_AMPLITUDE;
    }
    return SE_OK;
}

/* ---- Alignment ---- */

static size_t se_align_points(size_t len)
{
    size_t P = 64;
    while (P < len + 2 * SE_STACK_MARGIN)
        P *= 2;
    return P;
}

void se_stack_align_span(double onset, size_t pre, size_t len, size_t n, size_t *begin, size_t *end)
{
    long base = (long)floor(onset) - (long)pre - SE_STACK_MARGIN;
    long top = base + (long)se_align_points(len);
    *begin = base < 0 ? 0 : (size_t)base;
    *end = top < 0 ? 0 : ((size_t)top > n ? n : (size_t)top);
    if (*begin > *end)
        *begin = *end;
}

/* out[j] = x(onset - pre + j), j < len, by integer offset and a phase ramp for the fraction:
 * X(w) e^{i w d} on a zero-padded window with SE_STACK_MARGIN tapered samples either side. */
se_status se_stack_align(const double *xw, size_t off, size_t nw, size_t n, double onset, size_t pre,
                         size_t len, double *out, se_error *err)
{
    double fl = floor(onset), d = onset - fl;
    long base = (long)fl - (long)pre - SE_STACK_MARGIN;
    size_t P = se_align_points(len), i, nb, sb, se;
    double *buf;
    fftw_complex *spec;
    fftw_plan pf, pb;

    se_stack_align_span(onset, pre, len, n, &sb, &se);
    if (xw == NULL || out == NULL || (sb < se && (sb < off || se > off + nw)))
        return se_fail(err, SE_ERR_ARG, "stack: samples %zu..%zu of the record are not in the window",
                       sb, se);
    buf = fftw_malloc(P * sizeof *buf);
    spec = fftw_malloc((P / 2 + 1) * sizeof *spec);
    if (buf == NULL || spec == NULL) {
        fftw_free(buf);
        fftw_free(spec);
        return se_fail(err, SE_ERR_NOMEM, "stack: cannot allocate a %zu-point alignment", P);
    }
    pf = fftw_plan_dft_r2c_1d((int)P, buf, spec, FFTW_ESTIMATE);
    pb = fftw_plan_dft_c2r_1d((int)P, spec, buf, FFTW_ESTIMATE);
    if (pf == NULL || pb == NULL) {
        if (pf)
            fftw_destroy_plan(pf);
        if (pb)
            fftw_destroy_plan(pb);
        fftw_free(buf);
        fftw_free(spec);
        return se_fail(err, SE_ERR_NOMEM, "stack: FFT planning failed");
    }
    /* the margins are tapered (raised cosine) so that whatever the window cuts through (the
     * next shot, the record's ends) does not ring into the kept part when shifted */
    for (i = 0; i < P; i++) {
        long t = base + (long)i;
        double v = (t >= 0 && (size_t)t < n) ? xw[(size_t)t - off] : 0.0, wgt = 1.0;
        if (i < SE_STACK_MARGIN)
            wgt = 0.5 - 0.5 * cos(SE_PI * (double)i / SE_STACK_MARGIN);
        else if (i >= SE_STACK_MARGIN + len && i < len + 2 * SE_STACK_MARGIN)
            wgt = 0.5 + 0.5 * cos(SE_PI * (double)(i - SE_STACK_MARGIN - len) / SE_STACK_MARGIN);
        else if (i >= len + 2 * SE_STACK_MARGIN)
            wgt = 0.0;
        buf[i] = v * wgt;
    }
    fftw_execute(pf);
    nb = P / 2 + 1;
    /* advance by d samples: y[j] = x[j + d]  <->  Y_k = X_k e^{+2 pi i k d / P} */
    for (i = 0; i < nb; i++) {
        double w = 2.0 * SE_PI * (double)i / (double)P * d;
        double c = cos(w), s = sin(w), re = spec[i][0], im = spec[i][1];
        if (i == P / 2) { /* Nyquist: keep it real */
            spec[i][0] = re * c;
            spec[i][1] = 0.0;
            continue;
        }
        spec[i][0] = re * c - im * s;
        spec[i][1] = re * s + im * c;
    }
    fftw_execute(pb);
    for (i = 0; i < len; i++)
        out[i] = buf[i + SE_STACK_MARGIN] / (double)P;
    fftw_destroy_plan(pf);
    fftw_destroy_plan(pb);
    fftw_free(buf);
    fftw_free(spec);
    return SE_OK;
}

/* ---- Misfit, stack and gain, lag piece by lag piece ---- */

se_status se_stack_misfit_part(const double *seg, size_t k, size_t w, const se_shot_status *status,
                               double *misfit, se_error *err)
{
    double *tmp = se_calloc(2 * k + 2, sizeof *tmp, "stack scratch", err), *sc;
    size_t i, j;
    if (tmp == NULL)
        return SE_ERR_NOMEM;
    sc = tmp + k + 1;
    for (j = 0; j < w; j++) {
        size_t q = 0;
        double med;
        for (i = 0; i < k; i++)
            if (status[i] == SE_SHOT_USED)
                tmp[q++] = seg[i * w + j];
        if (q == 0)
            break;
        med = se_median_copy(tmp, q, sc);
        for (i = 0; i < k; i++)
            if (status[i] == SE_SHOT_USED) {
                double d = seg[i * w + j] - med;
                misfit[i] += d * d;
            }
    }
    free(tmp);
    return SE_OK;
}

se_status se_stack_misfit_screen(const double *misfit, size_t k, se_shot_status *status,
                                 se_error *err)
{
    double *tmp = se_calloc(2 * k + 2, sizeof *tmp, "stack scratch", err), mm;
    size_t i, nu = 0;
    if (tmp == NULL)
        return SE_ERR_NOMEM;
    for (i = 0; i < k; i++)
        if (status[i] == SE_SHOT_USED)
            tmp[nu++] = misfit[i];
    if (nu >= 3) {
        mm = se_median_copy(tmp, nu, tmp + k + 1);
        for (i = 0; i < k; i++)
            if (status[i] == SE_SHOT_USED && misfit[i] > 3.0 * mm)
                status[i] = SE_SHOT_MISFIT;
    }
    free(tmp);
    return SE_OK;
}

void se_stack_acc_free(se_stack_acc *a)
{
    if (a == NULL)
        return;
    free(a->stacked);
    free(a->alt);
    free(a->dsamp);
    free(a->used);
    memset(a, 0, sizeof *a);
}

se_status se_stack_acc_init(se_stack_acc *a, const se_shot_status *status, size_t k, size_t len,
                            se_stack_mode mode, se_error *err)
{
    size_t i, count, maxs = (size_t)1 << 20; /* se_noise_mad's default sample */
    memset(a, 0, sizeof *a);
    for (i = 0; i < k; i++)
        a->nu += status[i] == SE_SHOT_USED;
    if (a->nu < 2 || len == 0)
        return se_fail(err, SE_ERR_ARG, "stack: %zu shots of %zu lags to stack", a->nu, len);
    a->len = len;
    a->k = k;
    a->mode = mode;
    a->ne = a->nu - a->nu % 2;
    count = len * (a->nu - 1);
    a->stride = count / maxs + (count % maxs != 0);
    a->nd = (count + a->stride - 1) / a->stride;
    a->stacked = se_calloc(len, sizeof *a->stacked, "stack", err);
    a->alt = se_calloc(len, sizeof *a->alt, "stack", err);
    a->dsamp = se_calloc(a->nd, sizeof *a->dsamp, "stack differences", err);
    a->used = se_calloc(a->nu, sizeof *a->used, "stack", err);
    if (a->stacked == NULL || a->alt == NULL || a->dsamp == NULL || a->used == NULL) {
        se_stack_acc_free(a);
        return SE_ERR_NOMEM;
    }
    a->nu = 0;
    for (i = 0; i < k; i++)
        if (status[i] == SE_SHOT_USED)
            a->used[a->nu++] = i;
    return SE_OK;
}

se_status se_stack_acc_part(se_stack_acc *a, const double *seg, size_t j0, size_t w, se_error *err)
{
    double *tmp = se_calloc(a->nu + 1, sizeof *tmp, "stack scratch", err);
    size_t j, p;
    if (tmp == NULL)
        return SE_ERR_NOMEM;
    for (j = 0; j < w; j++) {
        size_t q;
        for (q = 0; q < a->nu; q++)
            tmp[q] = seg[a->used[q] * w + j];
        if (a->mode == SE_STACK_TRIMMED && a->nu >= 5) {
            size_t cut = (size_t)floor(0.2 * (double)a->nu), b;
            double s = 0.0;
            qsort(tmp, a->nu, sizeof *tmp, se_dbl_cmp);
            for (b = cut; b < a->nu - cut; b++)
                s += tmp[b];
            a->stacked[j0 + j] = s / (double)(a->nu - 2 * cut);
        } else {
            double s = 0.0;
            for (q = 0; q < a->nu; q++)
                s += tmp[q];
            a->stacked[j0 + j] = s / (double)a->nu;
        }
        {
            double s = 0.0;
            for (p = 0; p < a->ne; p++)
                s += (p % 2 ? -1.0 : 1.0) * seg[a->used[p] * w + j];
            a->alt[j0 + j] = s / (double)a->ne;
        }
    }
    /* the consecutive differences d[p len + j] = (x_p - x_{p+1})[j] / sqrt 2 that se_noise_mad
     * samples: positions 0, stride, 2 stride, ... */
    for (p = 0; p + 1 < a->nu; p++) {
        size_t at0 = p * a->len + j0, at = (at0 + a->stride - 1) / a->stride * a->stride;
        for (; at < at0 + w; at += a->stride) {
            size_t jj = at - at0;
            a->dsamp[at / a->stride] =
                (seg[a->used[p] * w + jj] - seg[a->used[p + 1] * w + jj]) / sqrt(2.0);
        }
    }
    free(tmp);
    return SE_OK;
}

se_status se_stack_acc_shot(se_stack_acc *a, size_t q, const double *seg, const double *prev,
                            se_error *err)
{
    size_t j;
    if (a->mode != SE_STACK_MEAN || q != a->next || q >= a->nu || (q > 0 && prev == NULL))
        return se_fail(err, SE_ERR_ARG, "stack: shot %zu of %zu out of order, or not a mean", q,
                       a->nu);
    for (j = 0; j < a->len; j++)
        a->stacked[j] += seg[j];
    if (q < a->ne) {
        double sgn = q % 2 ? -1.0 : 1.0;
        for (j = 0; j < a->len; j++)
            a->alt[j] += sgn * seg[j];
    }
    if (q > 0) { /* the differences of the pair (q - 1, q): positions (q - 1) len + j */
        size_t at0 = (q - 1) * a->len, at = (at0 + a->stride - 1) / a->stride * a->stride;
        for (; at < at0 + a->len; at += a->stride)
            a->dsamp[at / a->stride] = (prev[at - at0] - seg[at - at0]) / sqrt(2.0);
    }
    a->next++;
    return SE_OK;
}

void se_stack_acc_shot_end(se_stack_acc *a)
{
    size_t j;
    for (j = 0; j < a->len; j++) {
        a->stacked[j] = a->stacked[j] / (double)a->nu;
        a->alt[j] = a->alt[j] / (double)a->ne;
    }
}

se_status se_stack_acc_gain(const se_stack_acc *a, se_stack_result *res, se_error *err)
{
    se_noise nz1, nzn;
    se_status st;
    /* Gain: sigma_1 from consecutive differences, sigma_N from the alternating-sign mean (an even
     * number of shots, so the signal cancels exactly). The MAD of the sampled differences is the
     * MAD se_noise_mad takes of the whole array of differences (the same values). */
    st = se_noise_mad(a->dsamp, 0, a->nd, a->nd, &nz1, err);
    if (st == SE_OK)
        st = se_noise_mad(a->alt, 0, a->len, 0, &nzn, err);
    if (st != SE_OK)
        return st;
    res->noise_single = nz1.sigma;
    /* the alternating mean of ne shots has the noise of an ne-shot mean: scale to nu */
    res->noise_stacked = nzn.sigma * sqrt((double)a->ne / (double)a->nu);
    res->gain_db = (nzn.sigma > 0.0 && nz1.sigma > 0.0)
                       ? 20.0 * log10(res->noise_single / res->noise_stacked)
                       : INFINITY;
    res->expected_gain_db = 10.0 * log10((double)a->nu);
    return SE_OK;
}

/* ---- The whole record ---- */

se_status se_stack_shots(const double *x, size_t n, const se_stack_config *cfg, se_stack_result *res,
                         se_error *err)
{
    const double *src;
    double *r = NULL, *seg = NULL, *misfit = NULL;
    size_t *idx = NULL, k = 0, i, m, pre, len, nu, first;
    unsigned char *clip = NULL;
    se_xcorr *xc = NULL;
    se_xcorr_work *xw = NULL;
    se_shot_finder *fd = NULL;
    se_stack_acc acc;
    se_status st = SE_OK;
    double vmax, vmin;

    memset(&acc, 0, sizeof acc);
    if (res == NULL)
        return se_fail(err, SE_ERR_ARG, "stack: no result record");
    memset(res, 0, sizeof *res);
    res->gain_db = res->expected_gain_db = NAN;
    if (x == NULL || cfg == NULL || cfg->pulse == NULL)
        return se_fail(err, SE_ERR_ARG, "stack: no trace, configuration or pulse");
    m = cfg->pulse_length;
    if (m < 3 || m >= n)
        return se_fail(err, SE_ERR_ARG, "stack: pulse of %zu samples for a %zu-sample trace", m, n);
    src = cfg->pilot != NULL ? cfg->pilot : x;
    for (i = 0; i < n; i++)
        if (!isfinite(x[i]) || !isfinite(src[i]))
            return se_fail(err, SE_ERR_DATA, "stack: sample %zu is not finite", i);
    pre = cfg->pre == SIZE_MAX ? m : cfg->pre;

    r = se_calloc(n, sizeof *r, "stack correlation", err);
    if (r == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    xc = se_xcorr_create(cfg->pulse, m, 0, err);
    xw = xc ? se_xcorr_work_create(xc, err) : NULL;
    if (xw == NULL) {
        st = err ? err->code : SE_ERR_NOMEM;
        goto done;
    }
    st = se_xcorr_run(xc, xw, src, n, r, err);
    if (st != SE_OK)
        goto done;
    fd = se_shot_finder_create(n, m, cfg, err);
    if (fd == NULL) {
        st = err ? err->code : SE_ERR_NOMEM;
        goto done;
    }
    st = se_shot_finder_push(fd, r, n, err);
    if (st == SE_OK)
        st = se_shot_finder_finish(fd, &idx, &k, err);
    if (st != SE_OK)
        goto done;
    res->n_found = k;
    res->onsets = se_calloc(k, sizeof *res->onsets, "shots", err);
    res->amplitudes = se_calloc(k, sizeof *res->amplitudes, "shots", err);
    res->status = se_calloc(k, sizeof *res->status, "shots", err);
    clip = se_calloc(k, sizeof *clip, "shots", err);
    if (res->onsets == NULL || res->amplitudes == NULL || res->status == NULL || clip == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    for (i = 0; i < k; i++) {
        st = se_refine_peak(r, n, idx[i], 0, &res->onsets[i], &res->amplitudes[i], err);
        if (st != SE_OK)
            goto done;
    }
    res->pre = pre;
    if (k < 2) {
        res->n_used = 1;
        goto done;
    }
    st = se_stack_layout(res->onsets, k, n, cfg->pre, m, &pre, &len, err);
    if (st != SE_OK)
        goto done;
    res->pre = pre;
    res->length = len;

    /* Screening: clipping, trigger amplitude, the end of the record. */
    vmax = vmin = x[0];
    for (i = 1; i < n; i++) {
        vmax = fmax(vmax, x[i]);
        vmin = fmin(vmin, x[i]);
    }
    for (i = 0; i < k; i++) {
        size_t b = (size_t)floor(res->onsets[i]) - pre;
        clip[i] = (unsigned char)(b + len + 1 <= n &&
                                  se_segment_clipped(x, n, b, b + len + 1, vmax, vmin));
    }
    st = se_stack_screen(res->onsets, res->amplitudes, clip, k, n, pre, len, res->status, err);
    if (st != SE_OK)
        goto done;

    /* Align the candidates. */
    seg = se_calloc(k * len, sizeof *seg, "stack segments", err);
    misfit = se_calloc(k, sizeof *misfit, "stack", err);
    if (seg == NULL || misfit == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    for (i = 0; i < k; i++)
        if (res->status[i] == SE_SHOT_USED) {
            st = se_stack_align(x, 0, n, n, res->onsets[i], pre, len, seg + i * len, err);
            if (st != SE_OK)
                goto done;
        }
    /* Misfit to the sample-wise median of the candidates. */
    nu = 0;
    for (i = 0; i < k; i++)
        nu += res->status[i] == SE_SHOT_USED;
    if (nu >= 3) {
        st = se_stack_misfit_part(seg, k, len, res->status, misfit, err);
        if (st == SE_OK)
            st = se_stack_misfit_screen(misfit, k, res->status, err);
        if (st != SE_OK)
            goto done;
    }
    nu = 0;
    first = SIZE_MAX;
    for (i = 0; i < k; i++)
        if (res->status[i] == SE_SHOT_USED) {
            if (first == SIZE_MAX)
                first = i;
            nu++;
        }
    res->n_used = nu;
    res->first_used = first == SIZE_MAX ? 0 : first;
    if (nu < 2)
        goto done;

    /* Stack and gain. */
    st = se_stack_acc_init(&acc, res->status, k, len, cfg->mode, err);
    if (st == SE_OK)
        st = se_stack_acc_part(&acc, seg, 0, len, err);
    if (st == SE_OK)
        st = se_stack_acc_gain(&acc, res, err);
    if (st != SE_OK)
        goto done;
    res->stacked = acc.stacked;
    acc.stacked = NULL;

done:
    se_stack_acc_free(&acc);
    se_shot_finder_destroy(fd);
    free(r);
    free(idx);
    free(seg);
    free(clip);
    free(misfit);
    se_xcorr_work_destroy(xw);
    se_xcorr_destroy(xc);
    return st;
}
