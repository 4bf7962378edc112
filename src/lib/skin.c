/* strandecho: skin-effect loss H(s) = exp(-a sqrt(s)) (Wigington & Nahman 1957): loss-shaped
 * templates, correction of located echoes and estimation of K from the echoes' shapes. */
#include <fftw3.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_min.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/detect.h"
#include "strandecho/skin.h"

#define SE_SKIN_ALIAS_TERMS 4       /* explicit periodic images of the tail subtracted */
#define SE_SKIN_ALIAS_STEP 64       /* samples between exact evaluations of that correction */
#define SE_SKIN_TOL 1e-6            /* lag change that ends the iteration, samples */
#define SE_SKIN_MAX_ITER 50
#define SE_SKIN_GRID_MAX 48         /* grid points of a^2 fs for the K bracket */
#define SE_SKIN_BRENT_ITER 60

/* What the correction and the estimate share. */
typedef struct se_skin_ctx {
    const double *x;
    size_t n;
    const double *p;
    size_t m;
    double fs, lag0;
} se_skin_ctx;

/* One echo during the estimate: its window and current fit. */
typedef struct se_skin_fit {
    size_t idx;          /* into the caller's echoes */
    double lag_in, sign;
    size_t lo, hi;       /* residual window [lo, hi) of x */
    double lag, amp, a;
    size_t iters;
    double *T;           /* its fitted template (shifted by the lag's fraction), subtracted */
    size_t L;
    long base;           /* T[0] sits at x[base] */
    double d2;           /* sum of T'^2 */
} se_skin_fit;

/* Brent's objective: the summed residual of the fitted echoes at kappa. */
typedef struct se_skin_obj {
    const se_skin_ctx *c;
    double *xw;          /* [size: n] scratch: x minus the fitted echoes */
    se_skin_fit *fits;
    size_t nfit;
    se_status st;
    se_error *err;
} se_skin_obj;

static size_t se_skin_pow2(size_t n);
static se_status se_skin_fit_one(const se_skin_ctx *c, double kappa, double lag_start, double sign,
                                 double *lag, double *amp, double *a_out, size_t *iters,
                                 se_error *err);
static se_status se_skin_sweeps(const se_skin_ctx *c, double *xw, se_skin_fit *f, size_t nf,
                                double kappa, se_error *err);
static void se_skin_fits_free(se_skin_fit *f, size_t nf);
static double se_skin_window_ss(const double *xw, const se_skin_fit *f);
static se_status se_skin_objective(se_skin_obj *o, double kappa, double *s);
static double se_skin_brent_f(double kappa, void *params);
static int se_skin_cmp_amp(const void *a, const void *b);
static void se_skin_windows(se_skin_fit *f, size_t nf, double lag0, size_t m, size_t n);
static double se_skin_plain_r(const double *xw, size_t n, const double *p, size_t m, double lag);

static size_t se_skin_pow2(size_t n)
{
    size_t p = 64;
    while (p < n)
        p <<= 1;
    return p;
}

double se_skin_impulse(double t_samples, double a_sqrt_s, double rate_hz)
{
    double t;
    if (!(t_samples > 0.0) || !(rate_hz > 0.0))
        return 0.0;
    t = t_samples / rate_hz;
    return a_sqrt_s / (2.0 * sqrt(SE_PI)) * pow(t, -1.5) * exp(-a_sqrt_s * a_sqrt_s / (4.0 * t)) /
           rate_hz;
}

/* What the circular transform of length N adds at sample k for a unit-area pulse of centroid c:
 * sum_{j >= 1} h(k + j N - c), four images and the rest as the integral erf(a / (2 sqrt T)) / N. */
static double se_skin_alias(size_t k, size_t N, double c, double a, double fs)
{
    double al = 0.0, t;
    int j;
    for (j = 1; j <= SE_SKIN_ALIAS_TERMS; j++)
        al += se_skin_impulse((double)k + (double)j * (double)N - c, a, fs);
    t = ((double)k + (SE_SKIN_ALIAS_TERMS + 0.5) * (double)N - c) / fs;
    return al + erf(a / (2.0 * sqrt(t))) / (double)N;
}

void se_skin_unwrap(double *y, size_t len, size_t n_fft, double centroid, double area,
                    double a_sqrt_s, double rate_hz)
{
    /* the correction varies on the scale of n_fft >= 2 len: exact at every SE_SKIN_ALIAS_STEP-th
     * sample and at the last, linear between (relative error ~ (step / n_fft)^2) */
    double lo_v, hi_v;
    size_t lo_k = 0, hi_k = 0, k;
    if (y == NULL || len == 0 || n_fft == 0)
        return;
    lo_v = hi_v = se_skin_alias(0, n_fft, centroid, a_sqrt_s, rate_hz);
    for (k = 0; k < len; k++) {
        if (k > hi_k || (k == 0 && len > 1)) {
            lo_k = hi_k;
            lo_v = hi_v;
            hi_k = lo_k + SE_SKIN_ALIAS_STEP < len - 1 ? lo_k + SE_SKIN_ALIAS_STEP : len - 1;
            hi_v = se_skin_alias(hi_k, n_fft, centroid, a_sqrt_s, rate_hz);
        }
        y[k] -= area * (hi_k > lo_k ? lo_v + (hi_v - lo_v) * (double)(k - lo_k) / (double)(hi_k - lo_k)
                                    : lo_v);
    }
}

void se_skin_config_init(se_skin_config *cfg)
{
    if (cfg == NULL)
        return;
    memset(cfg, 0, sizeof *cfg);
    cfg->k_s05_per_m = NAN;
    cfg->noise_rms = NAN;
}

size_t se_skin_template_length(size_t m, double rate_hz, double a_sqrt_s)
{
    double tail;
    if (m == 0 || !isfinite(rate_hz) || !(rate_hz > 0.0) || !isfinite(a_sqrt_s) || a_sqrt_s < 0.0)
        return 0;
    if (a_sqrt_s == 0.0)
        return m <= SE_SKIN_MAX_TEMPLATE ? m : 0;
    tail = ceil(SE_SKIN_TAIL_FACTOR * a_sqrt_s * a_sqrt_s * rate_hz) + 2.0;
    if (!(tail + (double)m <= (double)SE_SKIN_MAX_TEMPLATE))
        return 0;
    return m + (size_t)tail;
}

se_status se_skin_template(const double *pulse, size_t m, double rate_hz, double a_sqrt_s,
                           double shift, double **out, size_t *n_out, double *d2, se_error *err)
{
    size_t L, N, nb, k;
    double *buf = NULL, *y = NULL, s0 = 0.0, s1 = 0.0, sabs = 0.0, acc = 0.0;
    fftw_complex *spec = NULL;
    fftw_plan pf = NULL, pb = NULL;
    se_status st = SE_OK;

    if (out == NULL || n_out == NULL)
        return se_fail(err, SE_ERR_ARG, "skin: template output pointers are NULL");
    *out = NULL;
    *n_out = 0;
    if (pulse == NULL || m == 0)
        return se_fail(err, SE_ERR_ARG, "skin: the pulse is empty");
    if (!isfinite(rate_hz) || !(rate_hz > 0.0))
        return se_fail(err, SE_ERR_ARG, "skin: sample rate %g Hz is not finite > 0", rate_hz);
    if (!isfinite(shift) || shift < 0.0 || shift >= 1.0)
        return se_fail(err, SE_ERR_ARG, "skin: template shift %g samples is not in [0, 1)", shift);
    if (!isfinite(a_sqrt_s) || a_sqrt_s < 0.0)
        return se_fail(err, SE_ERR_RANGE, "skin: loss a = %g s^0.5 is not finite >= 0", a_sqrt_s);
    for (k = 0; k < m; k++) {
        if (!isfinite(pulse[k]))
            return se_fail(err, SE_ERR_DATA, "skin: pulse sample %zu is not finite", k);
        s0 += pulse[k];
        s1 += (double)k * pulse[k];
        sabs += fabs(pulse[k]);
    }
    L = se_skin_template_length(m, rate_hz, a_sqrt_s);
    if (L == 0)
        return se_fail(err, SE_ERR_RANGE,
                       "skin: a = %g s^0.5 at %g Hz needs a template longer than %zu samples", a_sqrt_s,
                       rate_hz, SE_SKIN_MAX_TEMPLATE);
    if (shift > 0.0)
        L++;
    if (a_sqrt_s == 0.0 && shift == 0.0 && d2 == NULL) {
        /* H = 1: the pulse itself, exactly */
        y = se_calloc(m, sizeof *y, "skin: template", err);
        if (y == NULL)
            return SE_ERR_NOMEM;
        memcpy(y, pulse, m * sizeof *y);
        *out = y;
        *n_out = m;
        return SE_OK;
    }
    N = se_skin_pow2(2 * L);
    nb = N / 2 + 1;
    buf = fftw_malloc(N * sizeof *buf);
    spec = fftw_malloc(nb * sizeof *spec);
    y = se_calloc(L, sizeof *y, "skin: template", err);
    if (buf == NULL || spec == NULL || y == NULL) {
        st = y == NULL ? SE_ERR_NOMEM : se_fail(err, SE_ERR_NOMEM, "skin: cannot allocate %zu-point transform", N);
        goto done;
    }
    pf = fftw_plan_dft_r2c_1d((int)N, buf, spec, FFTW_ESTIMATE);
    pb = fftw_plan_dft_c2r_1d((int)N, spec, buf, FFTW_ESTIMATE);
    if (pf == NULL || pb == NULL) {
        st = se_fail(err, SE_ERR_NOMEM, "skin: cannot plan a %zu-point transform", N);
        goto done;
    }
    memset(buf, 0, N * sizeof *buf);
    memcpy(buf, pulse, m * sizeof *buf);
    fftw_execute(pf);
    for (k = 0; k < nb; k++) {
        /* H(j w) = exp(-a sqrt(w/2) (1 + j)) exp(-j w shift): w in rad/s for the loss, rad/sample
         * for the delay */
        const double w = 2.0 * SE_PI * (double)k / (double)N;
        const double q = a_sqrt_s * sqrt(0.5 * w * rate_hz);
        const double g = exp(-q), ph = -(q + w * shift);
        const double hr = g * cos(ph), hi = g * sin(ph);
        const double re = spec[k][0] * hr - spec[k][1] * hi, im = spec[k][0] * hi + spec[k][1] * hr;
        spec[k][0] = re;
        spec[k][1] = im;
        /* Parseval of the derivative j w Y (bins 1 .. N/2-1 stand for two) */
        acc += (k == 0 || 2 * k == N ? 1.0 : 2.0) * w * w * (re * re + im * im);
    }
    fftw_execute(pb);
    for (k = 0; k < L; k++)
        y[k] = buf[k] / (double)N;
    if (a_sqrt_s > 0.0 && fabs(s0) > 1e-12 * sabs) {
        /* the circular transform adds y(k + j N) for j >= 1: far in the tail y(t) = s0 h(t - c),
         * c the centroid; four images and the rest as an integral, erf(a / (2 sqrt T)) / N */
        se_skin_unwrap(y, L, N, s1 / s0 + shift, s0, a_sqrt_s, rate_hz);
    }
    if (d2 != NULL)
        *d2 = acc / (double)N;
    *out = y;
    *n_out = L;
    y = NULL;
done:
    if (pf != NULL)
        fftw_destroy_plan(pf);
    if (pb != NULL)
        fftw_destroy_plan(pb);
    fftw_free(buf);
    fftw_free(spec);
    free(y);
    return st;
}

/* Fit one echo with the template for a = kappa (lag - lag0) / fs: correlate around the lag,
 * refine band-limited, rebuild until the lag moves < SE_SKIN_TOL. */
static se_status se_skin_fit_one(const se_skin_ctx *c, double kappa, double lag_start, double sign,
                                 double *lag, double *amp, double *a_out, size_t *iters,
                                 se_error *err)
{
    double tau = lag_start, A = 0.0, a = 0.0;
    size_t it;
    int settled = 0;
    se_status st = SE_OK;
    for (it = 1; it <= SE_SKIN_MAX_ITER && !settled; it++) {
        double *T = NULL, *seg = NULL, *cr = NULL, et = 0.0, u, best = -HUGE_VAL, lg = 0.0, amp_i = 0.0;
        fftw_complex *xs = NULL, *ts = NULL;
        fftw_plan pf = NULL, pb = NULL;
        size_t L = 0, H, W, N, nb, j, ib = 0, len;
        long kc;
        a = kappa * (tau - c->lag0) / c->fs;
        if (!(a > 0.0))
            a = 0.0;
        st = se_skin_template(c->p, c->m, c->fs, a, 0.0, &T, &L, NULL, err);
        if (st != SE_OK)
            return st;
        kc = (long)floor(tau + 0.5);
        /* the template's energy inside the record (x is taken as 0 beyond it) */
        for (j = 0; j < L; j++)
            if (kc + (long)j >= 0 && (size_t)(kc + (long)j) < c->n)
                et += T[j] * T[j];
        u = a * a * c->fs; /* the loss's time scale, samples */
        H = c->m + (size_t)ceil(2.0 * u);
        if (H < 16)
            H = 16;
        W = 2 * H + (size_t)ceil(1.5 * u) + 8;
        len = 2 * W + 1;
        N = se_skin_pow2(2 * W + L);
        nb = N / 2 + 1;
        seg = fftw_malloc(N * sizeof *seg);
        xs = fftw_malloc(nb * sizeof *xs);
        ts = fftw_malloc(nb * sizeof *ts);
        cr = se_calloc(len, sizeof *cr, "skin: local correlation", err);
        if (seg == NULL || xs == NULL || ts == NULL || cr == NULL || !(et > 0.0)) {
            st = cr == NULL ? SE_ERR_NOMEM
                 : !(et > 0.0) ? se_fail(err, SE_ERR_NOTFOUND,
                                         "skin: the echo fitted from lag %.3f moved to lag %.3f, "
                                         "outside the record of %zu samples", lag_start, tau, c->n)
                               : se_fail(err, SE_ERR_NOMEM, "skin: cannot allocate a %zu-point transform", N);
            goto next;
        }
        pf = fftw_plan_dft_r2c_1d((int)N, seg, xs, FFTW_ESTIMATE);
        pb = fftw_plan_dft_c2r_1d((int)N, xs, seg, FFTW_ESTIMATE);
        if (pf == NULL || pb == NULL) {
            st = se_fail(err, SE_ERR_NOMEM, "skin: cannot plan a %zu-point transform", N);
            goto next;
        }
        /* template spectrum first (seg is scratch), then the segment of x from lag kc - W */
        memset(seg, 0, N * sizeof *seg);
        memcpy(seg, T, L * sizeof *seg);
        fftw_execute(pf);
        memcpy(ts, xs, nb * sizeof *ts);
        memset(seg, 0, N * sizeof *seg);
        for (j = 0; j < 2 * W + L && j < N; j++) {
            long g = kc - (long)W + (long)j;
            if (g >= 0 && (size_t)g < c->n)
                seg[j] = c->x[g];
        }
        fftw_execute(pf);
        /* correlation c[i] = sum_j seg[i + j] T[j]: X conj(T), no wrap for i <= 2W */
        for (j = 0; j < nb; j++) {
            const double re = xs[j][0] * ts[j][0] + xs[j][1] * ts[j][1];
            const double im = xs[j][1] * ts[j][0] - xs[j][0] * ts[j][1];
            xs[j][0] = re;
            xs[j][1] = im;
        }
        fftw_execute(pb);
        for (j = 0; j < len; j++) {
            cr[j] = seg[j] / ((double)N * et);
            if (sign * cr[j] > best) {
                best = sign * cr[j];
                ib = j;
            }
        }
        st = se_refine_peak(cr, len, ib, H, &lg, &amp_i, err);
        if (st == SE_OK) {
            double tn = (double)(kc - (long)W) + lg;
            A = amp_i;
            settled = fabs(tn - tau) < SE_SKIN_TOL;
            tau = tn;
        }
    next:
        if (pf != NULL)
            fftw_destroy_plan(pf);
        if (pb != NULL)
            fftw_destroy_plan(pb);
        fftw_free(seg);
        fftw_free(xs);
        fftw_free(ts);
        free(cr);
        free(T);
        if (st != SE_OK)
            return st;
    }
    if (!settled)
        return se_fail(err, SE_ERR_NUMERIC,
                       "skin: the echo at lag %.3f did not settle within %d template rebuilds "
                       "(last lag %.6f)", lag_start, SE_SKIN_MAX_ITER, tau);
    *lag = tau;
    *amp = A;
    *a_out = a;
    *iters = it - 1;
    return SE_OK;
}

/* Gauss-Seidel over the echoes: xw = x minus every fitted echo; each echo in turn is put back,
 * fitted alone (se_skin_fit_one, from its input lag on the first sweep) and taken out again with its
 * sub-sample shifted template, so the slow tails of the others do not bias it. Two sweeps. */
static se_status se_skin_sweeps(const se_skin_ctx *c0, double *xw, se_skin_fit *f, size_t nf,
                                double kappa, se_error *err)
{
    se_skin_ctx c = *c0;
    size_t s, i, k;
    se_status st;
    memcpy(xw, c0->x, c0->n * sizeof *xw);
    se_skin_fits_free(f, nf);
    c.x = xw;
    for (s = 0; s < 2; s++)
        for (i = 0; i < nf; i++) {
            se_skin_fit *e = &f[i];
            double base;
            if (e->T != NULL) {
                for (k = 0; k < e->L; k++)
                    if (e->base + (long)k >= 0 && (size_t)(e->base + (long)k) < c.n)
                        xw[e->base + (long)k] += e->amp * e->T[k];
                free(e->T);
                e->T = NULL;
            }
            st = se_skin_fit_one(&c, kappa, s == 0 ? e->lag_in : e->lag, e->sign, &e->lag, &e->amp,
                                 &e->a, &e->iters, err);
            if (st != SE_OK)
                return st;
            base = floor(e->lag);
            st = se_skin_template(c.p, c.m, c.fs, e->a, e->lag - base, &e->T, &e->L, &e->d2, err);
            if (st != SE_OK)
                return st;
            e->base = (long)base;
            for (k = 0; k < e->L; k++)
                if (e->base + (long)k >= 0 && (size_t)(e->base + (long)k) < c.n)
                    xw[e->base + (long)k] -= e->amp * e->T[k];
        }
    return SE_OK;
}

static void se_skin_fits_free(se_skin_fit *f, size_t nf)
{
    size_t i;
    for (i = 0; f != NULL && i < nf; i++) {
        free(f[i].T);
        f[i].T = NULL;
    }
}

/* Squared residual over an echo's window. */
static double se_skin_window_ss(const double *xw, const se_skin_fit *f)
{
    double acc = 0.0;
    size_t k;
    for (k = f->lo; k < f->hi; k++)
        acc += xw[k] * xw[k];
    return acc;
}

static se_status se_skin_objective(se_skin_obj *o, double kappa, double *s)
{
    size_t i;
    double acc = 0.0;
    se_status st = se_skin_sweeps(o->c, o->xw, o->fits, o->nfit, kappa, o->err);
    if (st != SE_OK)
        return st;
    for (i = 0; i < o->nfit; i++)
        acc += se_skin_window_ss(o->xw, &o->fits[i]);
    *s = acc;
    return SE_OK;
}

static double se_skin_brent_f(double kappa, void *params)
{
    se_skin_obj *o = params;
    double s = HUGE_VAL;
    if (o->st != SE_OK)
        return HUGE_VAL;
    o->st = se_skin_objective(o, kappa < 0.0 ? 0.0 : kappa, &s);
    if (o->st == SE_ERR_NOTFOUND) /* the fit left the record: not this K */
        o->st = SE_OK;
    return o->st == SE_OK ? s : HUGE_VAL;
}

static int se_skin_cmp_amp(const void *a, const void *b)
{
    const se_skin_fit *x = a, *y = b;
    double ax = fabs(x->amp), ay = fabs(y->amp);
    return (ax < ay) - (ax > ay);
}

/* Residual windows of the echoes f among themselves: from half-way to the previous one (or the
 * end of the direct pulse) to half-way to the next (or the record end), at most 16 m + 256
 * samples before the echo and m + that after it. */
static void se_skin_windows(se_skin_fit *f, size_t nf, double lag0, size_t m, size_t n)
{
    const double cap = (double)(16 * m + 256);
    size_t i, j;
    for (i = 0; i < nf; i++) {
        double lo = lag0 + (double)m, hi = (double)n, lg = f[i].lag_in;
        for (j = 0; j < nf; j++) {
            double o = f[j].lag_in;
            if (j == i)
                continue;
            if (o < lg && 0.5 * (o + lg) > lo)
                lo = 0.5 * (o + lg);
            if (o > lg && 0.5 * (o + lg) < hi)
                hi = 0.5 * (o + lg);
        }
        lo = fmax(lo, lg - cap);
        hi = fmin(hi, lg + (double)m + cap);
        if (lo < 0.0)
            lo = 0.0;
        if (hi <= lo)
            hi = fmin((double)n, lo + 1.0);
        f[i].lo = (size_t)ceil(lo);
        f[i].hi = (size_t)ceil(hi);
    }
}

/* Plain matched filter of xw at the integer lags around lag: the largest |sum xw[k+j] p[j] / E_p|
 * over round(lag) - 1 .. round(lag) + 1, signed. */
static double se_skin_plain_r(const double *xw, size_t n, const double *p, size_t m, double lag)
{
    double ep = 0.0, best = 0.0;
    long k0 = (long)floor(lag + 0.5), k;
    size_t j;
    for (j = 0; j < m; j++)
        ep += p[j] * p[j];
    for (k = k0 - 1; k <= k0 + 1; k++) {
        double acc = 0.0;
        for (j = 0; j < m; j++)
            if (k + (long)j >= 0 && (size_t)(k + (long)j) < n)
                acc += xw[k + (long)j] * p[j];
        if (fabs(acc) > fabs(best))
            best = acc;
    }
    return ep > 0.0 ? best / ep : 0.0;
}

se_status se_skin_correct(const double *x, size_t n, const double *pulse, size_t m,
                          const se_skin_config *cfg, se_skin_echo *echoes, size_t n_echoes,
                          se_skin_result *res, se_error *err)
{
    se_skin_ctx c;
    se_skin_fit *all = NULL, *fits = NULL, *alt = NULL;
    se_skin_echo *out = NULL;
    double *xw = NULL;
    size_t i, j, nfit = 0, nall = 0, cap;
    double kappa, kappa_sd = NAN, smin = 0.0, v;
    int estimate;
    se_status st = SE_OK;
    se_skin_result r0;

    memset(&r0, 0, sizeof r0);
    r0.k_sd = NAN;
    if (res != NULL)
        *res = r0;
    if (x == NULL || pulse == NULL || cfg == NULL || (echoes == NULL && n_echoes > 0))
        return se_fail(err, SE_ERR_ARG, "skin: NULL response, pulse, configuration or echoes");
    if (n < 2 || m == 0)
        return se_fail(err, SE_ERR_ARG, "skin: response of %zu samples, pulse of %zu", n, m);
    if (!isfinite(cfg->rate_hz) || !(cfg->rate_hz > 0.0))
        return se_fail(err, SE_ERR_ARG, "skin: sample rate %g Hz is not finite > 0", cfg->rate_hz);
    if (!isfinite(cfg->speed_m_s) || !(cfg->speed_m_s > 0.0))
        return se_fail(err, SE_ERR_ARG, "skin: speed %g m/s is not finite > 0", cfg->speed_m_s);
    if (!isfinite(cfg->lag0) || cfg->lag0 < 0.0 || cfg->lag0 >= (double)n)
        return se_fail(err, SE_ERR_ARG, "skin: direct-arrival lag %g is not inside the record of %zu samples",
                       cfg->lag0, n);
    estimate = isnan(cfg->k_s05_per_m);
    if (!estimate && !(cfg->k_s05_per_m >= 0.0 && isfinite(cfg->k_s05_per_m)))
        return se_fail(err, SE_ERR_ARG, "skin: K = %g s^0.5/m is not finite >= 0 (NaN: estimate)",
                       cfg->k_s05_per_m);
    for (i = 0; i < n; i++)
        if (!isfinite(x[i]))
            return se_fail(err, SE_ERR_DATA, "skin: response sample %zu is not finite", i);
    for (i = 0; i < n_echoes; i++)
        if (!isfinite(echoes[i].lag) || !isfinite(echoes[i].amplitude))
            return se_fail(err, SE_ERR_ARG, "skin: echo %zu has a non-finite lag or amplitude", i);
    c.x = x;
    c.n = n;
    c.p = pulse;
    c.m = m;
    c.fs = cfg->rate_hz;
    c.lag0 = cfg->lag0;
    v = cfg->speed_m_s;
    kappa = estimate ? 0.0 : cfg->k_s05_per_m * v;

    /* windows of every echo after the direct arrival: half-way to the neighbours, within cap */
    all = se_calloc(n_echoes ? n_echoes : 1, sizeof *all, "skin: echoes", err);
    alt = all ? se_calloc(n_echoes ? n_echoes : 1, sizeof *alt, "skin: echoes", err) : NULL;
    out = alt ? se_calloc(n_echoes ? n_echoes : 1, sizeof *out, "skin: echoes", err) : NULL;
    xw = out ? se_calloc(n, sizeof *xw, "skin: residual", err) : NULL;
    if (xw == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    cap = 16 * m + 256;
    if (!(cfg->threshold >= 0.0) || !isfinite(cfg->threshold)) {
        st = se_fail(err, SE_ERR_ARG, "skin: threshold %g is not finite >= 0", cfg->threshold);
        goto done;
    }
    for (i = 0; i < n_echoes; i++) {
        out[i] = echoes[i];
        out[i].lag_plain = echoes[i].lag;
        out[i].a_sqrt_s = 0.0;
        out[i].lag_sd = NAN;
        out[i].noise_rms = NAN;
        out[i].iterations = 0;
        out[i].corrected = 0;
        out[i].explained = 0;
        if (echoes[i].lag > cfg->lag0 + 0.5) {
            const double lg = echoes[i].lag;
            all[nall].idx = i;
            all[nall].lag_in = lg;
            all[nall].sign = echoes[i].amplitude < 0.0 ? -1.0 : 1.0;
            all[nall].amp = echoes[i].amplitude;
            nall++;
        }
    }

    if (estimate && nall > 0) {
        /* the strongest echoes, fitted jointly over one K */
        se_skin_obj o;
        double dtmax = 0.0, grid_k[SE_SKIN_GRID_MAX + 1], grid_s[SE_SKIN_GRID_MAX + 1];
        size_t ng = 0, b = 0, rises = 0, npts = 0;
        size_t want = cfg->max_fit_echoes ? cfg->max_fit_echoes : 4;
        fits = se_calloc(nall, sizeof *fits, "skin: fitted echoes", err);
        if (fits == NULL) {
            st = SE_ERR_NOMEM;
            goto done;
        }
        memcpy(fits, all, nall * sizeof *fits);
        qsort(fits, nall, sizeof *fits, se_skin_cmp_amp);
        /* the strongest, each more than the window cap from those already taken (pieces of one
         * distorted echo that detection split are not fitted as echoes of their own) */
        for (i = 0; i < nall && nfit < want; i++) {
            int near = 0;
            for (j = 0; j < nfit; j++)
                if (fabs(fits[j].lag_in - fits[i].lag_in) <= (double)cap)
                    near = 1;
            if (!near)
                fits[nfit++] = fits[i];
        }
        se_skin_windows(fits, nfit, cfg->lag0, m, n);
        for (i = 0; i < nfit; i++) {
            double dt = (fits[i].lag_in - cfg->lag0) / c.fs;
            if (dt > dtmax)
                dtmax = dt;
            npts += fits[i].hi - fits[i].lo;
        }
        o.c = &c;
        o.xw = xw;
        o.fits = fits;
        o.nfit = nfit;
        o.st = SE_OK;
        o.err = err;
        /* grid over u = a^2 fs at the farthest fitted echo: 0, then 0.05 x 2^j samples, up to a
         * bias as large as the delay itself, stopped 3 points past the lowest */
        for (ng = 0; ng <= SE_SKIN_GRID_MAX; ng++) {
            double u = ng == 0 ? 0.0 : 0.05 * pow(2.0, (double)(ng - 1));
            double s;
            if (ng > 0 && u > 0.5 * dtmax * c.fs)
                break;
            grid_k[ng] = sqrt(u / c.fs) / dtmax;
            if (se_skin_template_length(m, c.fs, grid_k[ng] * dtmax * 1.5) == 0)
                break;
            st = se_skin_objective(&o, grid_k[ng], &s);
            if (st == SE_ERR_NOTFOUND) { /* the fit left the record: not this K */
                st = SE_OK;
                s = HUGE_VAL;
            }
            if (st != SE_OK)
                goto done;
            grid_s[ng] = s;
            if (s < grid_s[b] || ng == 0) {
                b = ng;
                rises = 0;
            } else if (++rises >= 3) {
                ng++;
                break;
            }
        }
        kappa = grid_k[b];
        smin = grid_s[b];
        if (b > 0 && b + 1 < ng && grid_s[b] < grid_s[b - 1] && grid_s[b] < grid_s[b + 1]) {
            gsl_min_fminimizer *mz = gsl_min_fminimizer_alloc(gsl_min_fminimizer_brent);
            gsl_function F;
            int gs, iter = 0;
            if (mz == NULL) {
                st = se_fail(err, SE_ERR_NOMEM, "skin: cannot allocate the minimiser");
                goto done;
            }
            F.function = se_skin_brent_f;
            F.params = &o;
            gs = gsl_min_fminimizer_set_with_values(mz, &F, grid_k[b], grid_s[b], grid_k[b - 1],
                                                     grid_s[b - 1], grid_k[b + 1], grid_s[b + 1]);
            while (gs == GSL_SUCCESS && iter++ < SE_SKIN_BRENT_ITER) {
                gs = gsl_min_fminimizer_iterate(mz);
                if (o.st != SE_OK)
                    break;
                if (gs != GSL_SUCCESS)
                    break;
                gs = gsl_min_test_interval(gsl_min_fminimizer_x_lower(mz), gsl_min_fminimizer_x_upper(mz),
                                           0.0, 1e-6);
                if (gs == GSL_SUCCESS)
                    break;
                gs = GSL_SUCCESS;
            }
            if (o.st == SE_OK) {
                kappa = gsl_min_fminimizer_x_minimum(mz);
                smin = gsl_min_fminimizer_f_minimum(mz);
            }
            gsl_min_fminimizer_free(mz);
            if (o.st != SE_OK) {
                st = o.st;
                goto done;
            }
            /* curvature of the profile residual: var(kappa) = 2 s^2 / S'' */
            {
                double h = 0.01 * kappa, sp, sm, s2, dof;
                st = se_skin_objective(&o, kappa + h, &sp);
                if (st == SE_OK)
                    st = se_skin_objective(&o, kappa - h, &sm);
                if (st != SE_OK)
                    goto done;
                s2 = (sp - 2.0 * smin + sm) / (h * h);
                dof = (double)npts - 2.0 * (double)nfit - 1.0;
                if (s2 > 0.0 && dof > 0.0)
                    kappa_sd = sqrt(2.0 * (smin / dof) / s2);
            }
        }
    }

    /* detections explained by the loss-shaped tails of stronger echoes: strongest first, each kept
     * echo fitted and taken out of the residual; one whose plain matched filter on the residual is
     * below the threshold is not an echo of its own */
    if (kappa > 0.0 && nall > 0 && cfg->threshold > 0.0) {
        size_t nk = 0;
        memcpy(alt, all, nall * sizeof *alt);
        qsort(alt, nall, sizeof *alt, se_skin_cmp_amp);
        memcpy(xw, x, n * sizeof *xw);
        for (i = 0; i < nall; i++) {
            se_skin_fit *f = &alt[i];
            double base, *T = NULL;
            size_t L = 0, k;
            if (fabs(se_skin_plain_r(xw, n, pulse, m, f->lag_in)) < cfg->threshold) {
                out[f->idx].explained = 1;
                continue;
            }
            st = se_skin_fit_one(&c, kappa, f->lag_in, f->sign, &f->lag, &f->amp, &f->a, &f->iters, err);
            if (st == SE_ERR_NOTFOUND) { /* fitted out of the record: keep it uncorrected */
                st = SE_OK;
                out[f->idx].explained = 0;
                continue;
            }
            base = floor(f->lag);
            if (st == SE_OK)
                st = se_skin_template(pulse, m, c.fs, f->a, f->lag - base, &T, &L, NULL, err);
            if (st != SE_OK)
                goto done;
            for (k = 0; k < L; k++)
                if ((long)base + (long)k >= 0 && (size_t)((long)base + (long)k) < n)
                    xw[(long)base + (long)k] -= f->amp * T[k];
            free(T);
            nk++;
        }
        /* keep the rest in lag order */
        for (i = 0, j = 0; i < nall; i++)
            if (!out[all[i].idx].explained)
                all[j++] = all[i];
        nall = j;
        (void)nk;
    }
    se_skin_windows(all, nall, cfg->lag0, m, n);

    /* correct every echo after the direct arrival with kappa, all fitted together */
    if (kappa > 0.0 && nall > 0) {
        double h = 0.0;
        st = se_skin_sweeps(&c, xw, all, nall, kappa, err);
        if (st != SE_OK)
            goto done;
        for (i = 0; i < nall; i++) {
            se_skin_fit *f = &all[i];
            se_skin_echo *e = &out[f->idx];
            size_t w = f->hi > f->lo ? f->hi - f->lo : 1;
            double ss = se_skin_window_ss(xw, f), sx;
            sx = (isfinite(cfg->noise_rms) && cfg->noise_rms > 0.0) ? cfg->noise_rms
                                                                    : sqrt(ss / (w > 2 ? (double)(w - 2) : 1.0));
            e->lag = f->lag;
            e->amplitude = f->amp;
            e->a_sqrt_s = f->a;
            e->iterations = f->iters;
            e->noise_rms = sx;
            /* delay bound of the template: var = s^2 / (A^2 sum T'^2) */
            e->lag_sd = (f->amp != 0.0 && f->d2 > 0.0) ? sx / (fabs(f->amp) * sqrt(f->d2)) : INFINITY;
            e->corrected = 1;
        }
        if (estimate && isfinite(kappa_sd) && kappa_sd > 0.0) {
            /* the estimated K's share: dlag/dkappa by central differences over the joint fit */
            double *lp = se_calloc(nall, sizeof *lp, "skin: lags", err);
            if (lp == NULL) {
                st = SE_ERR_NOMEM;
                goto done;
            }
            h = fmin(kappa_sd, 0.5 * kappa);
            memcpy(alt, all, nall * sizeof *alt);
            for (i = 0; i < nall; i++)
                alt[i].T = NULL;
            st = se_skin_sweeps(&c, xw, alt, nall, kappa + h, err);
            for (i = 0; st == SE_OK && i < nall; i++)
                lp[i] = alt[i].lag;
            if (st == SE_OK)
                st = se_skin_sweeps(&c, xw, alt, nall, kappa - h, err);
            for (i = 0; st == SE_OK && i < nall; i++) {
                se_skin_echo *e = &out[all[i].idx];
                const double dd = (lp[i] - alt[i].lag) / (2.0 * h);
                e->lag_sd = sqrt(e->lag_sd * e->lag_sd + dd * dd * kappa_sd * kappa_sd);
            }
            free(lp);
            se_skin_fits_free(alt, nall);
            if (st != SE_OK)
                goto done;
        }
    }
    memcpy(echoes, out, n_echoes * sizeof *echoes);
    if (res != NULL) {
        res->k_s05_per_m = kappa / v;
        res->k_sd = isfinite(kappa_sd) ? kappa_sd / v : NAN;
        res->estimated = estimate && nall > 0;
        res->fit_echoes = nfit;
        res->residual = smin;
        if (estimate && nall == 0)
            res->k_s05_per_m = NAN;
    }
done:
    se_skin_fits_free(all, nall);
    se_skin_fits_free(fits, nfit);
    free(all);
    free(alt);
    free(fits);
    free(out);
    free(xw);
    return st;
}
