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
static size_t se_find_triggers(const double *r, size_t n, size_t lo, size_t hi, double frac,
                               size_t min_interval, size_t *idx, size_t cap);
static int se_segment_clipped(const double *x, size_t n, size_t b, size_t e, double vmax,
                              double vmin);
static se_status se_align(const double *x, size_t n, double onset, size_t pre, size_t len,
                          double *out, se_error *err);

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

/* Local maxima of |r| with the sign of the largest, >= frac of it, thinned to one per
 * min_interval (greedy, largest first in each interval, in time order). */
static size_t se_find_triggers(const double *r, size_t n, size_t lo, size_t hi, double frac,
                               size_t min_interval, size_t *idx, size_t cap)
{
    double g = 0.0, sg;
    size_t i, best = lo, k = 0;
    for (i = lo; i < hi; i++)
        if (fabs(r[i]) > g) {
            g = fabs(r[i]);
            best = i;
        }
    if (!(g > 0.0))
        return 0;
    sg = r[best] >= 0.0 ? 1.0 : -1.0;
    for (i = lo; i < hi; i++) {
        double v = sg * r[i];
        if (v < frac * g || (i > 0 && sg * r[i - 1] > v) || (i + 1 < n && sg * r[i + 1] >= v))
            continue;
        if (k > 0 && i - idx[k - 1] < min_interval) {
            if (v > sg * r[idx[k - 1]])
                idx[k - 1] = i;
            continue;
        }
        if (k == cap)
            break;
        idx[k++] = i;
    }
    return k;
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

/* out[j] = x(onset - pre + j), j < len, by integer offset and a phase ramp for the fraction:
 * X(w) e^{i w d} on a zero-padded window with SE_STACK_MARGIN tapered samples either side. */
static se_status se_align(const double *x, size_t n, double onset, size_t pre, size_t len,
                          double *out, se_error *err)
{
    double fl = floor(onset), d = onset - fl;
    long base = (long)fl - (long)pre - SE_STACK_MARGIN;
    size_t P = 64, i, nb;
    double *buf;
    fftw_complex *spec;
    fftw_plan pf, pb;

    while (P < len + 2 * SE_STACK_MARGIN)
        P *= 2;
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
        double v = (t >= 0 && (size_t)t < n) ? x[t] : 0.0, wgt = 1.0;
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

se_status se_stack_shots(const double *x, size_t n, const se_stack_config *cfg, se_stack_result *res,
                         se_error *err)
{
    const double *src;
    double *r = NULL, *seg = NULL, *tmp = NULL, *misfit = NULL, *med = NULL, *sc = NULL;
    size_t *idx = NULL, cap, k, i, j, m, mi, pre, len, nu, first;
    se_xcorr *xc = NULL;
    se_xcorr_work *xw = NULL;
    se_status st = SE_OK;
    double frac, vmax, vmin, amed;

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
    mi = cfg->min_interval ? cfg->min_interval : 4 * m;
    frac = cfg->trigger_fraction > 0.0 ? cfg->trigger_fraction : 0.5;
    pre = cfg->pre == SIZE_MAX ? m : cfg->pre;

    r = se_calloc(n, sizeof *r, "stack correlation", err);
    cap = n / mi + 2;
    idx = se_calloc(cap, sizeof *idx, "stack triggers", err);
    if (r == NULL || idx == NULL) {
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
    k = se_find_triggers(r, n, 0, n - m + 1, frac, mi, idx, cap);
    if (k == 0) {
        st = se_fail(err, SE_ERR_NOTFOUND, "stack: no shot found (the trigger channel is silent)");
        goto done;
    }
    /* An echo of a strong shot can reach the trigger level: a trigger less than half the median
     * interval after a stronger one is not a shot. */
    if (k >= 3) {
        double *iv = se_calloc(2 * k, sizeof *iv, "stack intervals", err), half;
        size_t q = 1;
        if (iv == NULL) {
            st = SE_ERR_NOMEM;
            goto done;
        }
        for (i = 1; i < k; i++)
            iv[i - 1] = (double)(idx[i] - idx[i - 1]);
        half = 0.5 * se_median_copy(iv, k - 1, iv + k);
        free(iv);
        for (i = 1; i < k; i++) {
            if ((double)(idx[i] - idx[q - 1]) < half && fabs(r[idx[i]]) < fabs(r[idx[q - 1]]))
                continue;
            idx[q++] = idx[i];
        }
        k = q;
    }
    res->n_found = k;
    res->onsets = se_calloc(k, sizeof *res->onsets, "shots", err);
    res->amplitudes = se_calloc(k, sizeof *res->amplitudes, "shots", err);
    res->status = se_calloc(k, sizeof *res->status, "shots", err);
    tmp = se_calloc(k + 1, sizeof *tmp, "stack scratch", err);
    if (res->onsets == NULL || res->amplitudes == NULL || res->status == NULL || tmp == NULL) {
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
    /* Segment length: the median interval between consecutive shots (a shot triggered off its
     * rhythm then carries its neighbour in its segment and fails the misfit test). */
    {
        double *iv = se_calloc(2 * k, sizeof *iv, "stack intervals", err);
        if (iv == NULL) {
            st = SE_ERR_NOMEM;
            goto done;
        }
        for (i = 1; i < k; i++)
            iv[i - 1] = res->onsets[i] - res->onsets[i - 1];
        len = (size_t)floor(se_median_copy(iv, k - 1, iv + k));
        free(iv);
    }
    for (i = 0; i < k; i++)
        if (res->onsets[i] < (double)pre)
            pre = (size_t)floor(res->onsets[i]);
    res->pre = pre;
    /* a last shot cut by the end of the record by less than a tenth of the segment still counts:
     * the segment is shortened to what it has */
    {
        double o = floor(res->onsets[k - 1]);
        size_t avail = o >= (double)pre && (size_t)o - pre + 1 < n ? n - ((size_t)o - pre) - 1 : 0;
        if (avail < len && (double)avail >= 0.9 * (double)len)
            len = avail;
    }
    len = len > 2 * SE_STACK_MARGIN ? len : 2 * SE_STACK_MARGIN;
    if (len > n)
        len = n;
    res->length = len;

    /* Screening: clipping, trigger amplitude, the end of the record. */
    vmax = vmin = x[0];
    for (i = 1; i < n; i++) {
        vmax = fmax(vmax, x[i]);
        vmin = fmin(vmin, x[i]);
    }
    for (i = 0; i < k; i++)
        tmp[i] = fabs(res->amplitudes[i]);
    misfit = se_calloc(k, sizeof *misfit, "stack", err);
    sc = se_calloc(k + 1, sizeof *sc, "stack scratch", err);
    if (misfit == NULL || sc == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    amed = se_median_copy(tmp, k, sc);
    for (i = 0; i < k; i++) {
        double o = floor(res->onsets[i]);
        size_t b = (size_t)o - pre;
        if (b + len + 1 > n)
            res->status[i] = SE_SHOT_LATE;
        else if (se_segment_clipped(x, n, b, b + len + 1, vmax, vmin))
            res->status[i] = SE_SHOT_CLIPPED;
        else if (fabs(res->amplitudes[i]) > 1.5 * amed || fabs(res->amplitudes[i]) < amed / 1.5)
            res->status[i] = SE_SHOT_AMPLITUDE;
    }

    /* Align the candidates. */
    seg = se_calloc(k * len, sizeof *seg, "stack segments", err);
    med = se_calloc(len, sizeof *med, "stack median", err);
    if (seg == NULL || med == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    for (i = 0; i < k; i++)
        if (res->status[i] == SE_SHOT_USED) {
            st = se_align(x, n, res->onsets[i], pre, len, seg + i * len, err);
            if (st != SE_OK)
                goto done;
        }
    /* Misfit to the sample-wise median of the candidates. */
    nu = 0;
    for (i = 0; i < k; i++)
        nu += res->status[i] == SE_SHOT_USED;
    if (nu >= 3) {
        double mm;
        for (j = 0; j < len; j++) {
            size_t q = 0;
            for (i = 0; i < k; i++)
                if (res->status[i] == SE_SHOT_USED)
                    tmp[q++] = seg[i * len + j];
            med[j] = se_median_copy(tmp, q, sc);
        }
        for (i = 0, nu = 0; i < k; i++) {
            double s2 = 0.0;
            if (res->status[i] != SE_SHOT_USED)
                continue;
            for (j = 0; j < len; j++) {
                double d = seg[i * len + j] - med[j];
                s2 += d * d;
            }
            misfit[nu++] = s2;
        }
        mm = se_median_copy(misfit, nu, sc);
        for (i = 0, j = 0; i < k; i++) {
            if (res->status[i] != SE_SHOT_USED)
                continue;
            if (misfit[j++] > 3.0 * mm)
                res->status[i] = SE_SHOT_MISFIT;
        }
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

    /* Stack. */
    res->stacked = se_calloc(len, sizeof *res->stacked, "stack", err);
    if (res->stacked == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    for (j = 0; j < len; j++) {
        size_t q = 0;
        for (i = 0; i < k; i++)
            if (res->status[i] == SE_SHOT_USED)
                tmp[q++] = seg[i * len + j];
        if (cfg->mode == SE_STACK_TRIMMED && q >= 5) {
            size_t cut = (size_t)floor(0.2 * (double)q), a;
            double s = 0.0;
            qsort(tmp, q, sizeof *tmp, se_dbl_cmp);
            for (a = cut; a < q - cut; a++)
                s += tmp[a];
            res->stacked[j] = s / (double)(q - 2 * cut);
        } else {
            double s = 0.0;
            size_t a;
            for (a = 0; a < q; a++)
                s += tmp[a];
            res->stacked[j] = s / (double)q;
        }
    }
    /* Gain: sigma_1 from consecutive differences, sigma_N from the alternating-sign mean (an even
     * number of shots, so the signal cancels exactly). */
    {
        size_t *u = se_calloc(nu, sizeof *u, "stack", err), q = 0, ne = nu - nu % 2, p;
        double *d = se_calloc(len * (nu - 1), sizeof *d, "stack differences", err);
        double *alt = se_calloc(len, sizeof *alt, "stack", err);
        se_noise nz1, nzn;
        if (u == NULL || d == NULL || alt == NULL) {
            free(u);
            free(d);
            free(alt);
            st = SE_ERR_NOMEM;
            goto done;
        }
        for (i = 0; i < k; i++)
            if (res->status[i] == SE_SHOT_USED)
                u[q++] = i;
        for (p = 0; p + 1 < nu; p++)
            for (j = 0; j < len; j++)
                d[p * len + j] = (seg[u[p] * len + j] - seg[u[p + 1] * len + j]) / sqrt(2.0);
        for (j = 0; j < len; j++) {
            double s = 0.0;
            for (p = 0; p < ne; p++)
                s += (p % 2 ? -1.0 : 1.0) * seg[u[p] * len + j];
            alt[j] = s / (double)ne;
        }
        st = se_noise_mad(d, 0, len * (nu - 1), 0, &nz1, err);
        if (st == SE_OK)
            st = se_noise_mad(alt, 0, len, 0, &nzn, err);
        free(u);
        free(d);
        free(alt);
        if (st != SE_OK)
            goto done;
        res->noise_single = nz1.sigma;
        /* the alternating mean of ne shots has the noise of an ne-shot mean: scale to nu */
        res->noise_stacked = nzn.sigma * sqrt((double)ne / (double)nu);
        res->gain_db = (nzn.sigma > 0.0 && nz1.sigma > 0.0)
                           ? 20.0 * log10(res->noise_single / res->noise_stacked)
                           : INFINITY;
        res->expected_gain_db = 10.0 * log10((double)nu);
    }

done:
    free(r);
    free(idx);
    free(seg);
    free(tmp);
    free(misfit);
    free(sc);
    free(med);
    se_xcorr_work_destroy(xw);
    se_xcorr_destroy(xc);
    return st;
}
