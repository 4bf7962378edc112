/* strandecho: robust noise, Rice thresholds and CLEAN peak search on the matched-filter output. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/detect.h"

#define SE_PI 3.14159265358979323846
#define SE_MAD_SCALE 1.4826              /* 1 / Phi^-1(3/4): MAD -> sigma for Gaussian noise */
#define SE_NOISE_DEFAULT_SAMPLES ((size_t)1 << 20)
#define SE_DETECT_DEFAULT_PEAKS 256
#define SE_DETECT_REFINE_LEVEL 1e-6      /* refinement window: acf extent at this level */
#define SE_DETECT_SWEEPS 8               /* back-fitting sweeps over overlapping echoes */
#define SE_DETECT_CELL 512               /* block size of the running maxima */

static double se_select(double *v, size_t n, size_t k);
static double se_median(double *v, size_t n);
static double se_mad(double *v, size_t n, double *median);
static int se_peak_cmp(const void *a, const void *b);
static void se_subtract(double *res, size_t base, size_t len, const se_acf *acf, double lag,
                        double amp);
static void se_cell_max(const double *res, size_t lo, size_t start, size_t end, size_t s0, size_t s1,
                        const se_noise_profile *prof, double k, double *cmax, size_t *carg);
static void se_backfit(double *res, size_t base, size_t len, const se_acf *acf, size_t win, se_peak *list,
                       size_t found, double *lmin, double *lmax);

/* k-th smallest (0-based) of v [size: n], quickselect with a median-of-three pivot and a
 * three-way partition (runs of equal values cost nothing); v is reordered. Expected O(n). */
static double se_select(double *v, size_t n, size_t k)
{
    size_t lo = 0, hi = n - 1;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2, lt = lo, gt = hi, i = lo;
        double a = v[lo], b = v[mid], c = v[hi], pivot, t;
        pivot = (a < b) ? ((b < c) ? b : (a < c ? c : a)) : ((a < c) ? a : (b < c ? c : b));
        /* v[lo..lt) < pivot, v[lt..i) == pivot, v(gt..hi] > pivot */
        while (i <= gt) {
            if (v[i] < pivot) {
                t = v[i];
                v[i] = v[lt];
                v[lt] = t;
                lt++;
                i++;
            } else if (v[i] > pivot) {
                t = v[i];
                v[i] = v[gt];
                v[gt] = t;
                if (gt == 0) /* unreachable: the pivot itself is in the range */
                    break;
                gt--;
            } else {
                i++;
            }
        }
        if (k < lt)
            hi = lt - 1;
        else if (k <= gt)
            return pivot;
        else
            lo = gt + 1;
    }
    return v[k];
}

/* Median of v [size: n >= 1] (mean of the two middle values for even n); v is reordered. */
static double se_median(double *v, size_t n)
{
    size_t h = n / 2, i;
    double upper = se_select(v, n, h), lower;
    if (n % 2 == 1)
        return upper;
    lower = v[0]; /* after selection v[0..h) <= v[h]: the lower middle is their maximum */
    for (i = 1; i < h; i++)
        if (v[i] > lower)
            lower = v[i];
    return 0.5 * (lower + upper);
}

/* 1.4826 * median |v - median v|; v is overwritten. */
static double se_mad(double *v, size_t n, double *median)
{
    size_t i;
    double med = se_median(v, n);
    for (i = 0; i < n; i++)
        v[i] = fabs(v[i] - med);
    if (median != NULL)
        *median = med;
    return SE_MAD_SCALE * se_median(v, n);
}

se_status se_noise_mad(const double *r, size_t start, size_t end, size_t max_samples, se_noise *out,
                       se_error *err)
{
    size_t count, stride, used, nd, i;
    double *v, *d, sd;
    if (r == NULL || out == NULL)
        return se_fail(err, SE_ERR_ARG, "noise: NULL %s", r == NULL ? "data" : "result");
    if (end <= start)
        return se_fail(err, SE_ERR_ARG, "noise: empty range [%zu, %zu)", start, end);
    if (max_samples == 0)
        max_samples = SE_NOISE_DEFAULT_SAMPLES;
    count = end - start;
    stride = count / max_samples + (count % max_samples != 0);
    used = (count + stride - 1) / stride;
    v = malloc(used * sizeof *v);
    d = malloc(used * sizeof *d);
    if (v == NULL || d == NULL) {
        free(v);
        free(d);
        return se_fail(err, SE_ERR_NOMEM, "noise: cannot allocate %zu samples", used);
    }
    nd = 0;
    for (i = 0; i < used; i++) {
        size_t at = start + i * stride;
        if (!isfinite(r[at])) {
            free(v);
            free(d);
            return se_fail(err, SE_ERR_DATA, "noise: sample %zu is not finite", at);
        }
        v[i] = r[at];
        if (at + 1 < end) {
            if (!isfinite(r[at + 1])) {
                free(v);
                free(d);
                return se_fail(err, SE_ERR_DATA, "noise: sample %zu is not finite", at + 1);
            }
            d[nd++] = r[at + 1] - r[at];
        }
    }
    out->n_used = used;
    out->sigma = se_mad(v, used, &out->median);
    out->beta = 0.0;
    if (nd >= 1 && out->sigma > 0.0) {
        /* var(r[i+1] - r[i]) = 2 sigma^2 (1 - rho(1)) ~ beta^2 sigma^2 for an oversampled process */
        sd = se_mad(d, nd, NULL);
        out->beta = sd / out->sigma;
    }
    free(v);
    free(d);
    return SE_OK;
}

double se_rice_k(double n_lags, double beta, double false_alarms)
{
    double arg, k;
    if (!(n_lags > 0.0 && isfinite(n_lags) && beta > 0.0 && isfinite(beta) && false_alarms > 0.0 &&
          isfinite(false_alarms)))
        return NAN;
    /* n beta / pi exp(-k^2/2) = false_alarms */
    arg = n_lags * beta / (SE_PI * false_alarms);
    k = arg > 1.0 ? sqrt(2.0 * log(arg)) : 0.0;
    return k < 3.0 ? 3.0 : k;
}

static int se_peak_cmp(const void *a, const void *b)
{
    double la = ((const se_peak *)a)->lag, lb = ((const se_peak *)b)->lag;
    return (la > lb) - (la < lb);
}

/* res[j - base] -= amp acf(j - lag) for record indices j in [base, base + len) within the acf
 * support (base: the record index of res[0]; lag a record lag) */
static void se_subtract(double *res, size_t base, size_t len, const se_acf *acf, double lag,
                        double amp)
{
    double ext = (double)se_acf_half_length(acf);
    double a = ceil(lag - ext), b = floor(lag + ext);
    size_t j0, j1, j;
    if (b < (double)base || a > (double)(base + len) - 1.0)
        return;
    j0 = a < (double)base ? base : (size_t)a;
    j1 = b > (double)(base + len) - 1.0 ? base + len - 1 : (size_t)b;
    for (j = j0; j <= j1; j++)
        res[j - base] -= amp * se_acf_value(acf, (double)j - lag);
}

/* Maxima of |res| in the cells covering [s0, s1): cell c is [start + c CELL, start + (c+1) CELL)
 * cut at end; res holds the residual from absolute index lo. With a noise profile, of
 * |res| / (k sigma(j)): each lag against its own threshold (then the threshold is 1). */
static void se_cell_max(const double *res, size_t lo, size_t start, size_t end, size_t s0, size_t s1,
                        const se_noise_profile *prof, double k, double *cmax, size_t *carg)
{
    size_t c, c0 = (s0 - start) / SE_DETECT_CELL, c1 = (s1 - 1 - start) / SE_DETECT_CELL;
    for (c = c0; c <= c1; c++) {
        size_t j, a = start + c * SE_DETECT_CELL, b = a + SE_DETECT_CELL;
        double best = -1.0;
        size_t arg = a;
        if (b > end)
            b = end;
        for (j = a; j < b; j++) {
            double v = fabs(res[j - lo]);
            if (prof != NULL)
                v /= k * se_noise_profile_sigma(prof, (double)j);
            if (v > best) {
                best = v;
                arg = j;
            }
        }
        cmax[c] = best;
        carg[c] = arg;
    }
}

/* Back-fitting after the newest echo list[found-1]: echoes whose acf supports overlap it are put
 * back into the residual, re-refined and subtracted again, in sweeps, until lags move less than
 * 1e-7 sample (at most SE_DETECT_SWEEPS). Greedy CLEAN alone refines each echo on a residual that
 * still holds the overlapping neighbours' lobes, and the error would come back as false peaks.
 * res holds the residual from record index base, len values; lags are record lags.
 * [*lmin, *lmax] is widened to the lags touched. */
static void se_backfit(double *res, size_t base, size_t len, const se_acf *acf, size_t win, se_peak *list,
                       size_t found, double *lmin, double *lmax)
{
    double reach = 2.0 * (double)se_acf_half_length(acf);
    double newest = list[found - 1].lag;
    size_t sweep, i, near = 0;
    for (i = 0; i + 1 < found; i++)
        near += fabs(list[i].lag - newest) <= reach;
    if (near == 0)
        return;
    for (sweep = 0; sweep < SE_DETECT_SWEEPS; sweep++) {
        double moved = 0.0;
        for (i = 0; i < found; i++) {
            double lag, amp, at = list[i].lag, tau;
            size_t k, kp;
            if (fabs(at - newest) > reach || at < (double)base || at >= (double)(base + len))
                continue;
            se_subtract(res, base, len, acf, at, -list[i].amplitude); /* put it back */
            k = (size_t)floor(at + 0.5);
            if (k >= base + len)
                k = base + len - 1;
            if (se_refine_peak_at(res, len, k - base, win, &kp, &tau, &amp, NULL) == SE_OK) {
                lag = (double)(base + kp) + tau;
            } else {
                lag = at;
                amp = list[i].amplitude;
            }
            if (fabs(lag - at) > moved)
                moved = fabs(lag - at);
            list[i].lag = lag;
            list[i].amplitude = amp;
            se_subtract(res, base, len, acf, lag, amp);
            if (lag < *lmin)
                *lmin = lag;
            if (lag > *lmax)
                *lmax = lag;
        }
        if (moved < 1e-7)
            break;
    }
}

se_status se_detect(const double *r, size_t n, const se_detect_config *cfg, se_peak **peaks,
                    size_t *npeaks, se_error *err)
{
    size_t ext, win, margin, lo, hi, i, ncell, maxp, found = 0, cap = 0;
    double *res = NULL, *cmax = NULL;
    size_t *carg = NULL;
    se_peak *list = NULL;
    se_status st = SE_OK;
    const se_noise_profile *prof;
    double thr;

    if (peaks != NULL)
        *peaks = NULL;
    if (npeaks != NULL)
        *npeaks = 0;
    if (r == NULL || cfg == NULL || peaks == NULL || npeaks == NULL)
        return se_fail(err, SE_ERR_ARG, "detect: NULL %s",
                       r == NULL ? "data" : cfg == NULL ? "config" : "result pointer");
    if (cfg->acf == NULL)
        return se_fail(err, SE_ERR_ARG, "detect: the pulse autocorrelation (acf) is required");
    if (cfg->start >= cfg->end || cfg->end > n)
        return se_fail(err, SE_ERR_ARG, "detect: range [%zu, %zu) empty or beyond %zu samples",
                       cfg->start, cfg->end, n);
    if (!(cfg->threshold > 0.0) || !isfinite(cfg->threshold))
        return se_fail(err, SE_ERR_ARG, "detect: threshold %g must be positive and finite", cfg->threshold);
    if (cfg->n_known > 0 && cfg->known == NULL)
        return se_fail(err, SE_ERR_ARG, "detect: %zu known echoes but a NULL list", cfg->n_known);
    for (i = 0; i < cfg->n_known; i++)
        if (!isfinite(cfg->known[i].lag) || !isfinite(cfg->known[i].amplitude))
            return se_fail(err, SE_ERR_ARG, "detect: known echo %zu has a non-finite lag or amplitude", i);

    prof = cfg->profile;
    thr = cfg->threshold;
    maxp = cfg->max_peaks != 0 ? cfg->max_peaks : SE_DETECT_DEFAULT_PEAKS;
    ext = se_acf_half_length(cfg->acf);
    /* refinement window scales with the pulse: where its acf has decayed to 1e-6 */
    win = se_acf_extent(cfg->acf, SE_DETECT_REFINE_LEVEL);
    if (win < 16)
        win = 16;
    margin = ext + win + 2;
    lo = cfg->start > margin ? cfg->start - margin : 0;
    hi = n - cfg->end > margin ? cfg->end + margin : n;
    res = malloc((hi - lo) * sizeof *res);
    ncell = (cfg->end - cfg->start + SE_DETECT_CELL - 1) / SE_DETECT_CELL;
    cmax = malloc(ncell * sizeof *cmax);
    carg = malloc(ncell * sizeof *carg);
    if (res == NULL || cmax == NULL || carg == NULL) {
        st = se_fail(err, SE_ERR_NOMEM, "detect: cannot allocate a residual of %zu samples", hi - lo);
        goto done;
    }
    for (i = lo; i < hi; i++) {
        if (!isfinite(r[i])) {
            st = se_fail(err, SE_ERR_DATA, "detect: sample %zu of r is not finite", i);
            goto done;
        }
        res[i - lo] = r[i];
    }
    for (i = 0; i < cfg->n_known; i++)
        se_subtract(res, cfg->origin + lo, hi - lo, cfg->acf, cfg->known[i].lag,
                    cfg->known[i].amplitude);
    /* cells are aligned on start: cell c covers [start + c CELL, start + (c+1) CELL) */
    if (prof != NULL) {
        if (!(cfg->profile_sigmas > 0.0) || !isfinite(cfg->profile_sigmas) || prof->n_blocks == 0 ||
            prof->sigma == NULL) {
            st = se_fail(err, SE_ERR_ARG, "detect: noise profile without levels or with %g sigmas",
                         cfg->profile_sigmas);
            goto done;
        }
        thr = 1.0;
    }
    se_cell_max(res, lo, cfg->start, cfg->end, cfg->start, cfg->end, prof, cfg->profile_sigmas, cmax,
                carg);

    while (found < maxp) {
        size_t c, best = 0, k, a, b, kp, base = cfg->origin + lo;
        double lag, amp, lmin, lmax, tau;
        for (c = 1; c < ncell; c++)
            if (cmax[c] > cmax[best])
                best = c;
        if (!(cmax[best] >= thr))
            break;
        k = carg[best];
        if (se_refine_peak_at(res, hi - lo, k - lo, win, &kp, &tau, &amp, NULL) == SE_OK) {
            lag = (double)(base + kp) + tau;
        } else { /* keep the integer peak rather than lose the echo */
            lag = (double)(cfg->origin + k);
            amp = res[k - lo];
        }
        if (found == cap) {
            size_t ncap = cap == 0 ? 16 : 2 * cap;
            se_peak *nl;
            if (ncap > maxp)
                ncap = maxp;
            nl = realloc(list, ncap * sizeof *nl);
            if (nl == NULL) {
                st = se_fail(err, SE_ERR_NOMEM, "detect: cannot grow the peak list to %zu", ncap);
                goto done;
            }
            list = nl;
            cap = ncap;
        }
        list[found].lag = lag;
        list[found].amplitude = amp;
        list[found].index = cfg->origin + k;
        found++;
        se_subtract(res, base, hi - lo, cfg->acf, lag, amp);
        lmin = lmax = lag;
        se_backfit(res, base, hi - lo, cfg->acf, win, list, found, &lmin, &lmax);
        /* refresh the cells the subtractions touched (in r's indices) */
        lmin -= (double)cfg->origin;
        lmax -= (double)cfg->origin;
        a = lmin - (double)ext - 1.0 < (double)cfg->start ? cfg->start : (size_t)(lmin - (double)ext - 1.0);
        b = lmax + (double)ext + 2.0 > (double)cfg->end ? cfg->end : (size_t)(lmax + (double)ext + 2.0);
        if (a < b)
            se_cell_max(res, lo, cfg->start, cfg->end, a, b, prof, cfg->profile_sigmas, cmax, carg);
    }
    if (found > 0) {
        qsort(list, found, sizeof *list, se_peak_cmp);
        *peaks = list;
        *npeaks = found;
        list = NULL;
    }

done:
    free(res);
    free(cmax);
    free(carg);
    free(list);
    return st;
}
