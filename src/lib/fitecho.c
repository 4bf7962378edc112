/* strandecho: model-based least squares of overlapping echoes (see fitecho.h). */
#include "strandecho/fitecho.h"

#include <fftw3.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_blas.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_multifit_nlinear.h>
#include <gsl/gsl_vector.h>

#include "internal.h"

#define SE_FIT_OVERSAMPLE 16
#define SE_FIT_GRID_LIMIT ((size_t)1 << 22)
#define SE_FIT_MAX_ITER 200

struct se_echo_model {
    size_t m;      /* pulse length */
    size_t period; /* P: the interpolant is P-periodic; P >= 4 m */
    size_t over;   /* grid points per sample U */
    double *val;   /* s(i/U), i = 0..P U - 1 */
    double *der;   /* s'(i/U) per sample */
    double *raw;   /* the samples themselves [size: m] */
    double *acf;   /* R[d] = sum_j s[j] s[j + d], d = 0..m-1 [size: m] */
    double energy; /* sum s^2 */
};

/* What one least-squares problem needs. */
typedef struct se_fit_problem {
    const se_echo_model *mdl;
    const double *x;   /* x + begin */
    size_t nwin;       /* window length N */
    double begin;      /* first sample of the window */
} se_fit_problem;

/* A candidate model: K echoes and its score. */
typedef struct se_fit_state {
    se_echo *e;  /* [size: k] */
    size_t k;
    double rss;
    double bic;
    int ok;
} se_fit_state;

/* What the searches of one call share. */
typedef struct se_fit_work {
    const se_fit_problem *pr;
    double sigma;   /* cfg->sigma */
    double min_amp; /* cfg->min_amplitude */
    double min_sep;
    size_t maxk;
    se_echo *trial; /* scratch [size: maxk + 1] */
    double *res;    /* scratch [size: nwin] */
} se_fit_work;

static int se_fit_f(const gsl_vector *p, void *data, gsl_vector *f);
static int se_fit_df(const gsl_vector *p, void *data, gsl_matrix *J);
static int se_fit_run(const se_fit_problem *pr, const se_echo *init, size_t k, double sigma,
                      double min_sep, se_fit_state *out, se_error *err);
static double se_fit_bic(double rss, size_t n, size_t k, double sigma);
static int se_echo_cmp(const void *a, const void *b);
static void se_state_free(se_fit_state *s);
static int se_fit_search(const se_fit_work *wk, se_fit_state *cur, se_error *err);
static double se_fit_residual_peak(const se_fit_work *wk, const se_fit_state *cur, long *lag);
static int se_fit_best_pair(const se_fit_work *wk, double lo_lag, double hi_lag, se_echo pair[2]);
static int se_fit_start(const se_fit_work *wk, se_echo *init, size_t k, double gate,
                        se_fit_state *cur, se_error *err);
static int se_fit_same(const se_echo *a, size_t ka, const se_echo *b, size_t kb);

se_echo_model *se_echo_model_create(const double *pulse, size_t m, se_error *err)
{
    se_echo_model *mdl;
    size_t P = 64, U = SE_FIT_OVERSAMPLE, F, i, nb, nf;
    double *tin = NULL, *tout = NULL, energy = 0.0;
    fftw_complex *spec = NULL, *fspec = NULL;
    fftw_plan pf = NULL, pg = NULL, pa = NULL;

    if (pulse == NULL || m < 2) {
        se_fail(err, SE_ERR_ARG, "echo model: the pulse has fewer than 2 samples");
        return NULL;
    }
    for (i = 0; i < m; i++) {
        if (!isfinite(pulse[i])) {
            se_fail(err, SE_ERR_DATA, "echo model: pulse sample %zu is not finite", i);
            return NULL;
        }
        energy += pulse[i] * pulse[i];
    }
    if (!(energy > 0.0)) {
        se_fail(err, SE_ERR_DATA, "echo model: the pulse has zero energy");
        return NULL;
    }
    while (P < 4 * m) {
        if (P > SE_FIT_GRID_LIMIT) {
            se_fail(err, SE_ERR_ARG, "echo model: pulse of %zu samples is too long", m);
            return NULL;
        }
        P *= 2;
    }
    while (U > 1 && P * U > SE_FIT_GRID_LIMIT)
        U /= 2;
    F = P * U;
    mdl = se_calloc(1, sizeof *mdl, "echo model", err);
    if (mdl == NULL)
        return NULL;
    mdl->m = m;
    mdl->period = P;
    mdl->over = U;
    mdl->energy = energy;
    mdl->val = se_calloc(F, sizeof *mdl->val, "echo model table", err);
    mdl->der = se_calloc(F, sizeof *mdl->der, "echo model table", err);
    mdl->raw = se_calloc(m, sizeof *mdl->raw, "echo model pulse", err);
    mdl->acf = se_calloc(m, sizeof *mdl->acf, "echo model pulse", err);
    tin = fftw_malloc(P * sizeof *tin);
    tout = fftw_malloc(F * sizeof *tout);
    spec = fftw_malloc((P / 2 + 1) * sizeof *spec);
    fspec = fftw_malloc((F / 2 + 1) * sizeof *fspec);
    if (mdl->val == NULL || mdl->der == NULL || mdl->raw == NULL || mdl->acf == NULL ||
        tin == NULL || tout == NULL ||
        spec == NULL || fspec == NULL) {
        se_fail(err, SE_ERR_NOMEM, "echo model: cannot allocate the %zu-point tables", F);
        goto fail;
    }
    memcpy(mdl->raw, pulse, m * sizeof *pulse);
    pf = fftw_plan_dft_r2c_1d((int)P, tin, spec, FFTW_ESTIMATE);
    pg = fftw_plan_dft_c2r_1d((int)F, fspec, tout, FFTW_ESTIMATE);
    pa = fftw_plan_dft_c2r_1d((int)P, spec, tin, FFTW_ESTIMATE);
    if (pf == NULL || pg == NULL || pa == NULL) {
        se_fail(err, SE_ERR_NOMEM, "echo model: FFT planning failed");
        goto fail;
    }
    memset(tin, 0, P * sizeof *tin);
    memcpy(tin, pulse, m * sizeof *pulse);
    fftw_execute(pf);
    nb = P / 2 + 1;
    nf = F / 2 + 1;
    /* s(t) = (1/P) sum_k S_k e^{2 pi i k t / P}: zero-padding the spectrum to F = P U points
     * evaluates it at t = i/U; the Nyquist bin is split between +-P/2 (so the interpolant is
     * real). ds/dt: multiply S_k by i 2 pi k / P (the split Nyquist pair cancels). */
    for (i = 0; i < 2; i++) {
        size_t k;
        memset(fspec, 0, nf * sizeof *fspec);
        for (k = 0; k < nb; k++) {
            double re = spec[k][0] / (double)P, im = spec[k][1] / (double)P;
            if (k == P / 2 && U > 1) {
                re *= 0.5;
                im *= 0.5;
                if (i == 1)
                    re = im = 0.0;
            }
            if (i == 0) {
                fspec[k][0] = re;
                fspec[k][1] = im;
            } else {
                double w = 2.0 * SE_PI * (double)k / (double)P;
                fspec[k][0] = -w * im;
                fspec[k][1] = w * re;
            }
        }
        if (U == 1 && i == 1) {
            fspec[P / 2][0] = fspec[P / 2][1] = 0.0;
        }
        fftw_execute(pg);
        memcpy(i == 0 ? mdl->val : mdl->der, tout, F * sizeof *tout);
    }
    /* R[d] = (1/P) sum_k |S_k|^2 e^{2 pi i k d / P}: P >= 4 m, so no wrap-around for d < m */
    for (i = 0; i < nb; i++) {
        spec[i][0] = spec[i][0] * spec[i][0] + spec[i][1] * spec[i][1];
        spec[i][1] = 0.0;
    }
    fftw_execute(pa);
    for (i = 0; i < m; i++)
        mdl->acf[i] = tin[i] / (double)P;
    fftw_destroy_plan(pf);
    fftw_destroy_plan(pg);
    fftw_destroy_plan(pa);
    fftw_free(tin);
    fftw_free(tout);
    fftw_free(spec);
    fftw_free(fspec);
    return mdl;
fail:
    if (pf != NULL)
        fftw_destroy_plan(pf);
    if (pg != NULL)
        fftw_destroy_plan(pg);
    if (pa != NULL)
        fftw_destroy_plan(pa);
    fftw_free(tin);
    fftw_free(tout);
    fftw_free(spec);
    fftw_free(fspec);
    se_echo_model_destroy(mdl);
    return NULL;
}

void se_echo_model_destroy(se_echo_model *mdl)
{
    if (mdl == NULL)
        return;
    free(mdl->val);
    free(mdl->der);
    free(mdl->raw);
    free(mdl->acf);
    free(mdl);
}

size_t se_echo_model_length(const se_echo_model *mdl)
{
    return mdl != NULL ? mdl->m : 0;
}

double se_echo_model_value(const se_echo_model *mdl, double t, double *deriv)
{
    double P = (double)mdl->period, margin = 0.5 * (P - (double)mdl->m), g, u, h;
    double v0, v1, d0, d1, u2, u3;
    size_t i0, i1, F = mdl->period * mdl->over;

    if (deriv != NULL)
        *deriv = 0.0;
    if (!(t >= -margin && t <= (double)mdl->m - 1.0 + margin))
        return 0.0;
    if (t < 0.0)
        t += P;
    g = t * (double)mdl->over;
    i0 = (size_t)floor(g);
    u = g - (double)i0;
    if (i0 >= F)
        i0 -= F;
    i1 = i0 + 1 < F ? i0 + 1 : 0;
    h = 1.0 / (double)mdl->over;
    v0 = mdl->val[i0];
    v1 = mdl->val[i1];
    d0 = mdl->der[i0] * h;
    d1 = mdl->der[i1] * h;
    u2 = u * u;
    u3 = u2 * u;
    /* cubic Hermite on the grid */
    if (deriv != NULL)
        *deriv = ((6.0 * u2 - 6.0 * u) * v0 + (3.0 * u2 - 4.0 * u + 1.0) * d0 +
                  (-6.0 * u2 + 6.0 * u) * v1 + (3.0 * u2 - 2.0 * u) * d1) /
                 h;
    return (2.0 * u3 - 3.0 * u2 + 1.0) * v0 + (u3 - 2.0 * u2 + u) * d0 + (-2.0 * u3 + 3.0 * u2) * v1 +
           (u3 - u2) * d1;
}

void se_fitecho_config_init(se_fitecho_config *cfg)
{
    memset(cfg, 0, sizeof *cfg);
}

/* f_i -= a s(begin + i - lag) over the window [size: nwin], where the pulse is not zero: the
 * residual of one echo, shared by the independent and the layered models. */
static void se_fit_sub_echo(gsl_vector *f, const se_echo_model *mdl, double begin, size_t nwin,
                            double a, double lag)
{
    double t0 = begin - lag;
    size_t i;
    for (i = 0; i < nwin; i++) {
        double t = t0 + (double)i;
        if (t < -2.0 || t > (double)mdl->m + 1.0)
            continue;
        gsl_vector_set(f, i, gsl_vector_get(f, i) - a * se_echo_model_value(mdl, t, NULL));
    }
}

/* f_i = x_i - sum_k a_k s(i - tau_k) */
static int se_fit_f(const gsl_vector *p, void *data, gsl_vector *f)
{
    const se_fit_problem *pr = data;
    size_t k, i, K = p->size / 2;
    for (i = 0; i < pr->nwin; i++)
        gsl_vector_set(f, i, pr->x[i]);
    for (k = 0; k < K; k++)
        se_fit_sub_echo(f, pr->mdl, pr->begin, pr->nwin, gsl_vector_get(p, 2 * k),
                        gsl_vector_get(p, 2 * k + 1));
    return GSL_SUCCESS;
}

/* df/da = -s(i - tau), df/dtau = a s'(i - tau) */
static int se_fit_df(const gsl_vector *p, void *data, gsl_matrix *J)
{
    const se_fit_problem *pr = data;
    size_t k, i, K = p->size / 2;
    gsl_matrix_set_zero(J);
    for (k = 0; k < K; k++) {
        double a = gsl_vector_get(p, 2 * k), tau = gsl_vector_get(p, 2 * k + 1);
        double t0 = pr->begin - tau;
        for (i = 0; i < pr->nwin; i++) {
            double t = t0 + (double)i, d, v;
            if (t < -2.0 || t > (double)pr->mdl->m + 1.0)
                continue;
            v = se_echo_model_value(pr->mdl, t, &d);
            gsl_matrix_set(J, i, 2 * k, -v);
            gsl_matrix_set(J, i, 2 * k + 1, a * d);
        }
    }
    return GSL_SUCCESS;
}

static double se_fit_bic(double rss, size_t n, size_t k, double sigma)
{
    double pen = 2.0 * (double)k * log((double)n);
    if (sigma > 0.0)
        return rss / (sigma * sigma) + pen;
    return (double)n * log(fmax(rss, 1e-300) / (double)n) + pen;
}

static int se_echo_cmp(const void *a, const void *b)
{
    double x = ((const se_echo *)a)->lag, y = ((const se_echo *)b)->lag;
    return (x > y) - (x < y);
}

static void se_state_free(se_fit_state *s)
{
    free(s->e);
    s->e = NULL;
    s->k = 0;
}

/* One Levenberg-Marquardt fit of k echoes from init. out->ok = 0 when the fit failed, ran out
 * of the window or merged two echoes. Returns 0, or -1 on allocation failure (err filled). */
/* One Levenberg-Marquardt solve (GSL trust region, at most SE_FIT_MAX_ITER iterations, xtol and
 * gtol 1e-10) of the n residuals f with Jacobian df (params passed on) from p0 [size: np], shared
 * by the echo fit and the layered fit. lm receives the workspace (position, residual, Jacobian)
 * and a covariance matrix to fill; free both with se_lm_free. Returns 1 when the solve ran
 * (converged or at the iteration limit), 0 when GSL refused it, -1 on allocation failure (err
 * names what). */
typedef struct se_lm {
    gsl_multifit_nlinear_workspace *w;
    gsl_matrix *cov;
} se_lm;

static void se_lm_free(se_lm *lm)
{
    gsl_matrix_free(lm->cov);
    if (lm->w != NULL)
        gsl_multifit_nlinear_free(lm->w);
    lm->w = NULL;
    lm->cov = NULL;
}

static int se_lm_solve(se_lm *lm, int (*f)(const gsl_vector *, void *, gsl_vector *),
                       int (*df)(const gsl_vector *, void *, gsl_matrix *), void *params, size_t n,
                       const double *p0v, size_t np, const char *what, se_error *err)
{
    gsl_multifit_nlinear_parameters par = gsl_multifit_nlinear_default_parameters();
    gsl_multifit_nlinear_fdf fdf;
    gsl_vector *p0 = gsl_vector_alloc(np);
    size_t i;
    int info = 0, status;
    lm->cov = gsl_matrix_alloc(np, np);
    lm->w = gsl_multifit_nlinear_alloc(gsl_multifit_nlinear_trust, &par, n, np);
    if (p0 == NULL || lm->cov == NULL || lm->w == NULL) {
        gsl_vector_free(p0);
        se_lm_free(lm);
        se_fail(err, SE_ERR_NOMEM, "%s: cannot allocate the %zu x %zu problem", what, n, np);
        return -1;
    }
    for (i = 0; i < np; i++)
        gsl_vector_set(p0, i, p0v[i]);
    memset(&fdf, 0, sizeof fdf);
    fdf.f = f;
    fdf.df = df;
    fdf.n = n;
    fdf.p = np;
    fdf.params = params;
    status = gsl_multifit_nlinear_init(p0, &fdf, lm->w);
    if (status == GSL_SUCCESS)
        status = gsl_multifit_nlinear_driver(SE_FIT_MAX_ITER, 1e-10, 1e-10, 0.0, NULL, NULL, &info,
                                             lm->w);
    gsl_vector_free(p0);
    return status == GSL_SUCCESS || status == GSL_EMAXITER;
}

static int se_fit_run(const se_fit_problem *pr, const se_echo *init, size_t k, double sigma,
                      double min_sep, se_fit_state *out, se_error *err)
{
    se_lm lm = {NULL, NULL};
    gsl_matrix *cov;
    double *p0v;
    size_t i, np = 2 * k;
    int ran;
    double rss, s2;

    memset(out, 0, sizeof *out);
    if (pr->nwin < 2 * np)
        return 0;
    out->e = se_calloc(k, sizeof *out->e, "fitted echoes", err);
    p0v = se_calloc(np, sizeof *p0v, "fitted echoes", err);
    if (out->e == NULL || p0v == NULL) {
        free(p0v);
        se_state_free(out);
        return -1;
    }
    for (i = 0; i < k; i++) {
        p0v[2 * i] = init[i].amplitude;
        p0v[2 * i + 1] = init[i].lag;
    }
    ran = se_lm_solve(&lm, se_fit_f, se_fit_df, (void *)pr, pr->nwin, p0v, np, "echo fit", err);
    free(p0v);
    if (ran < 0) {
        se_state_free(out);
        return -1;
    }
    cov = lm.cov;
    if (ran) {
        gsl_vector *f = gsl_multifit_nlinear_residual(lm.w);
        gsl_vector *p = gsl_multifit_nlinear_position(lm.w);
        gsl_matrix *J = gsl_multifit_nlinear_jac(lm.w);
        gsl_blas_ddot(f, f, &rss);
        s2 = sigma > 0.0 ? sigma * sigma
                         : (pr->nwin > np ? rss / (double)(pr->nwin - np) : rss);
        out->ok = gsl_multifit_nlinear_covar(J, 0.0, cov) == GSL_SUCCESS && isfinite(rss);
        for (i = 0; i < k && out->ok; i++) {
            double va = gsl_matrix_get(cov, 2 * i, 2 * i) * s2;
            double vt = gsl_matrix_get(cov, 2 * i + 1, 2 * i + 1) * s2;
            double c = gsl_matrix_get(cov, 2 * i, 2 * i + 1) * s2;
            se_echo *e = &out->e[i];
            e->amplitude = gsl_vector_get(p, 2 * i);
            e->lag = gsl_vector_get(p, 2 * i + 1);
            e->amplitude_sd = sqrt(fmax(va, 0.0));
            e->lag_sd = sqrt(fmax(vt, 0.0));
            e->corr = (va > 0.0 && vt > 0.0) ? c / sqrt(va * vt) : 0.0;
            /* the echo must still overlap the window */
            if (!isfinite(e->lag) || !isfinite(e->amplitude) ||
                e->lag < pr->begin - (double)pr->mdl->m ||
                e->lag > pr->begin + (double)pr->nwin)
                out->ok = 0;
        }
        if (out->ok) {
            qsort(out->e, k, sizeof *out->e, se_echo_cmp);
            for (i = 1; i < k; i++)
                if (out->e[i].lag - out->e[i - 1].lag < min_sep)
                    out->ok = 0;
        }
        out->k = k;
        out->rss = rss;
        out->bic = se_fit_bic(rss, pr->nwin, k, sigma);
    }
    se_lm_free(&lm);
    if (!out->ok) {
        se_state_free(out);
        out->ok = 0;
    }
    return 0;
}


/* The largest correlation of the residual of cur (x itself when cur has no echo) with the pulse
 * at an integer lag, in amplitude units (c / E_s); *lag receives that lag. */
static double se_fit_residual_peak(const se_fit_work *wk, const se_fit_state *cur, long *lag)
{
    const se_fit_problem *pr = wk->pr;
    const se_echo_model *mdl = pr->mdl;
    size_t i, m = mdl->m, nw = pr->nwin;
    long b = (long)pr->begin, e = b + (long)nw, lo, hi, kk;
    double best = 0.0;

    for (i = 0; i < nw; i++)
        wk->res[i] = pr->x[i];
    for (i = 0; i < cur->k; i++) {
        double a = cur->e[i].amplitude, t0 = pr->begin - cur->e[i].lag;
        size_t j;
        for (j = 0; j < nw; j++) {
            double t = t0 + (double)j;
            if (t < -2.0 || t > (double)m + 1.0)
                continue;
            wk->res[j] -= a * se_echo_model_value(mdl, t, NULL);
        }
    }
    lo = b - (long)(m / 2);
    hi = e - (long)(m / 2);
    *lag = lo;
    for (kk = lo; kk < hi; kk++) {
        double c = 0.0;
        size_t j;
        for (j = 0; j < m; j++) {
            long t = kk + (long)j;
            if (t >= b && t < e)
                c += wk->res[t - b] * mdl->raw[j];
        }
        c /= mdl->energy;
        if (fabs(c) > fabs(best)) {
            best = c;
            *lag = kk;
        }
    }
    return best;
}

/* The two echoes at integer lags in [lo_lag - m/2, hi_lag + m/2] (whole pulse inside the window)
 * that explain most of x by linear least squares: with c_t = <x, s_t>, R = R[|t1 - t2|] and
 * E = R[0], the residual falls by (E c1^2 + E c2^2 - 2 R c1 c2) / (E^2 - R^2). Exhaustive over
 * the pairs closer than a pulse length: a global start that no greedy pick can mislead (two
 * same-sign echoes whose side lobes add up between them). Returns 1 and pair[] (sorted), or 0. */
static int se_fit_best_pair(const se_fit_work *wk, double lo_lag, double hi_lag, se_echo pair[2])
{
    const se_fit_problem *pr = wk->pr;
    const se_echo_model *mdl = pr->mdl;
    long m = (long)mdl->m, b = (long)pr->begin, e = b + (long)pr->nwin, t0, t1, t, d, L;
    double E = mdl->acf[0], best = 0.0, *c;
    int found = 0;

    t0 = (long)floor(lo_lag - 0.5 * (double)m);
    t1 = (long)ceil(hi_lag + 0.5 * (double)m);
    if (t0 < b)
        t0 = b;
    if (t1 > e - m)
        t1 = e - m;
    if (t1 - t0 < 1)
        return 0;
    L = t1 - t0 + 1;
    if ((size_t)L > pr->nwin)
        return 0;
    c = wk->res; /* scratch: c_t for t = t0..t1 */
    for (t = 0; t < L; t++) {
        long j;
        double acc = 0.0;
        const double *xs = pr->x + (t0 + t - b);
        for (j = 0; j < m; j++)
            acc += xs[j] * mdl->raw[j];
        c[t] = acc;
    }
    for (t = 0; t < L; t++)
        for (d = 1; d < m && t + d < L; d++) {
            double R = mdl->acf[d], det = E * E - R * R, c1 = c[t], c2 = c[t + d], q;
            if (!(det > 1e-6 * E * E))
                continue;
            q = (E * (c1 * c1 + c2 * c2) - 2.0 * R * c1 * c2) / det;
            if (q > best) {
                best = q;
                pair[0].lag = (double)(t0 + t);
                pair[1].lag = (double)(t0 + t + d);
                pair[0].amplitude = (E * c1 - R * c2) / det;
                pair[1].amplitude = (E * c2 - R * c1) / det;
                found = 1;
            }
        }
    if (found) {
        pair[0].lag_sd = pair[1].lag_sd = pair[0].amplitude_sd = pair[1].amplitude_sd = 0.0;
        pair[0].corr = pair[1].corr = 0.0;
    }
    return found;
}

/* Fit from init [size: k] (sorted here) and run the stepwise search, unless the first fit's BIC
 * is above gate (then cur->ok = 0: not worth searching from). cur->ok = 0 also when the first fit
 * fails. Returns 0, or -1 on allocation failure. */
static int se_fit_start(const se_fit_work *wk, se_echo *init, size_t k, double gate,
                        se_fit_state *cur, se_error *err)
{
    qsort(init, k, sizeof *init, se_echo_cmp);
    if (se_fit_run(wk->pr, init, k, wk->sigma, wk->min_sep, cur, err) != 0)
        return -1;
    if (!cur->ok)
        return 0;
    if (cur->bic > gate) {
        se_state_free(cur);
        cur->ok = 0;
        return 0;
    }
    return se_fit_search(wk, cur, err);
}

/* 1 when the echoes a [size: ka] and b [size: kb] (both sorted by lag) are the same start: as
 * many, each pair of the same sign and within a sample (the fit from one converges to the other's) */
static int se_fit_same(const se_echo *a, size_t ka, const se_echo *b, size_t kb)
{
    size_t i;
    if (ka != kb)
        return 0;
    for (i = 0; i < ka; i++)
        if (!(fabs(a[i].lag - b[i].lag) <= 1.0) || a[i].amplitude * b[i].amplitude <= 0.0)
            return 0;
    return 1;
}

/* From the fitted cur: add an echo where the residual correlates best with the pulse, or remove
 * the echo whose removal is best, while BIC falls; then drop echoes failing the amplitude tests.
 * cur keeps ok = 1 with k >= 0 echoes (k = 0: e NULL, rss and bic of the empty model).
 * Returns 0, or -1 on allocation failure (cur freed). */
static int se_fit_search(const se_fit_work *wk, se_fit_state *cur, se_error *err)
{
    const se_fit_problem *pr = wk->pr;
    se_echo *trial = wk->trial;
    se_fit_state cand;
    int improved;
    size_t i;

    do {
        improved = 0;
        if (cur->k < wk->maxk) {
            long kb;
            double best = se_fit_residual_peak(wk, cur, &kb);
            if (best != 0.0) {
                memcpy(trial, cur->e, cur->k * sizeof *trial);
                trial[cur->k].lag = (double)kb;
                trial[cur->k].amplitude = best;
                qsort(trial, cur->k + 1, sizeof *trial, se_echo_cmp);
                if (se_fit_run(pr, trial, cur->k + 1, wk->sigma, wk->min_sep, &cand, err) != 0)
                    goto nomem;
                if (cand.ok && cand.bic < cur->bic) {
                    se_state_free(cur);
                    *cur = cand;
                    improved = 1;
                } else {
                    se_state_free(&cand);
                }
            }
        }
        if (!improved && cur->k > 1) {
            se_fit_state best;
            size_t drop;
            memset(&best, 0, sizeof best);
            for (drop = 0; drop < cur->k; drop++) {
                size_t j, q = 0;
                for (j = 0; j < cur->k; j++)
                    if (j != drop)
                        trial[q++] = cur->e[j];
                if (se_fit_run(pr, trial, cur->k - 1, wk->sigma, wk->min_sep, &cand, err) != 0) {
                    se_state_free(&best);
                    goto nomem;
                }
                if (cand.ok && (!best.ok || cand.bic < best.bic)) {
                    se_state_free(&best);
                    best = cand;
                } else {
                    se_state_free(&cand);
                }
            }
            if (best.ok && best.bic < cur->bic) {
                se_state_free(cur);
                *cur = best;
                improved = 1;
            } else {
                se_state_free(&best);
            }
        }
    } while (improved);

    /* Amplitude tests: drop the weakest failing echo and refit, until all pass. */
    for (;;) {
        size_t worst = SIZE_MAX, j, q = 0;
        double wz = INFINITY;
        for (j = 0; j < cur->k; j++) {
            double a = fabs(cur->e[j].amplitude), zz = a / fmax(cur->e[j].amplitude_sd, 1e-300);
            if ((a < wk->min_amp || zz < 3.0) && zz < wz) {
                wz = zz;
                worst = j;
            }
        }
        if (worst == SIZE_MAX)
            break;
        if (cur->k > 1) {
            for (j = 0; j < cur->k; j++)
                if (j != worst)
                    trial[q++] = cur->e[j];
            if (se_fit_run(pr, trial, q, wk->sigma, wk->min_sep, &cand, err) != 0)
                goto nomem;
            se_state_free(cur);
            if (cand.ok) {
                *cur = cand;
                continue;
            }
        } else {
            se_state_free(cur);
        }
        break;
    }
    if (cur->k == 0) {
        double rss = 0.0;
        for (i = 0; i < pr->nwin; i++)
            rss += pr->x[i] * pr->x[i];
        cur->e = NULL;
        cur->rss = rss;
        cur->bic = se_fit_bic(rss, pr->nwin, 0, wk->sigma);
    }
    cur->ok = 1;
    return 0;
nomem:
    se_state_free(cur);
    cur->ok = 0;
    return -1;
}

se_status se_fitecho(const se_echo_model *mdl, const double *x, size_t n,
                     const se_fitecho_config *cfg, const se_echo *init, size_t n_init,
                     se_echo **out, size_t *n_out, double *bic, double *sigma_used, se_error *err)
{
    se_fit_problem pr;
    se_fit_work wk;
    se_fit_state cur, cand;
    se_echo *trial = NULL, *ini = NULL, pair[2];
    double *res = NULL, lo_lag, hi_lag;
    size_t b, e, i, maxk, m, s, hw;

    if (mdl == NULL || x == NULL || cfg == NULL || init == NULL || out == NULL || n_out == NULL)
        return se_fail(err, SE_ERR_ARG, "echo fit: missing argument");
    *out = NULL;
    *n_out = 0;
    if (n_init == 0)
        return se_fail(err, SE_ERR_ARG, "echo fit: no starting echo");
    m = mdl->m;
    maxk = cfg->max_echoes ? cfg->max_echoes : 6;
    if (n_init > maxk)
        maxk = n_init;
    lo_lag = hi_lag = init[0].lag;
    for (i = 0; i < n_init; i++) {
        if (!isfinite(init[i].lag) || !isfinite(init[i].amplitude))
            return se_fail(err, SE_ERR_ARG, "echo fit: starting echo %zu is not finite", i);
        lo_lag = fmin(lo_lag, init[i].lag);
        hi_lag = fmax(hi_lag, init[i].lag);
    }
    if (cfg->begin == 0 && cfg->end == 0) {
        double bb = floor(lo_lag - 0.5 * (double)m), ee = ceil(hi_lag + 1.5 * (double)m);
        b = bb > 0.0 ? (size_t)bb : 0;
        e = ee < (double)n ? (size_t)ee : n;
    } else {
        b = cfg->begin;
        e = cfg->end;
    }
    if (e > n || b >= e || e - b < 4 * n_init + 4)
        return se_fail(err, SE_ERR_ARG, "echo fit: window [%zu, %zu) does not fit a %zu-sample trace",
                       b, e, n);
    for (i = b; i < e; i++)
        if (!isfinite(x[i]))
            return se_fail(err, SE_ERR_DATA, "echo fit: sample %zu is not finite", i);
    pr.mdl = mdl;
    pr.x = x + b;
    pr.nwin = e - b;
    pr.begin = (double)b;

    trial = se_calloc(maxk + 2, sizeof *trial, "echo fit", err);
    res = se_calloc(e - b, sizeof *res, "echo fit residual", err);
    if (trial == NULL || res == NULL) {
        free(trial);
        free(res);
        return SE_ERR_NOMEM;
    }
    wk.pr = &pr;
    wk.sigma = cfg->sigma;
    wk.min_amp = cfg->min_amplitude;
    wk.min_sep = cfg->min_separation > 0.0 ? cfg->min_separation : 0.1;
    wk.maxk = maxk;
    wk.trial = trial;
    wk.res = res;

    /* Three starts, each followed by the same stepwise search; the lowest BIC wins (a later start
     * only when strictly lower, so the greedy start keeps its answer on ties):
     *  0. the given (greedy, CLEAN) echoes;
     *  1. one echo at the largest matched-filter output of the window;
     *  2. the best pair of integer lags by linear least squares (se_fit_best_pair).
     * Costs stay near one search: an extra start is skipped when it repeats the given echoes or
     * the model chosen so far, and searched from only when its first fit's BIC is within two
     * echoes' penalty (4 ln N) of that model's (the searches add one echo at a time). */
    memset(&cur, 0, sizeof cur);
    ini = se_calloc(n_init, sizeof *ini, "echo fit", err);
    if (ini == NULL)
        goto nomem;
    memcpy(ini, init, n_init * sizeof *init);
    /* main-lobe half width of the pulse (integer lags): the first zero or local minimum of R */
    for (hw = 1; hw + 1 < m && mdl->acf[hw] > 0.0 && mdl->acf[hw + 1] < mdl->acf[hw]; hw++)
        ;
    for (s = 0; s < 3; s++) {
        size_t k;
        long kb;
        if (s == 0) {
            /* sorts ini, kept for the comparisons below */
            if (se_fit_start(&wk, ini, n_init, INFINITY, &cand, err) != 0)
                goto nomem;
        } else {
            if (s == 1) {
                se_fit_state none;
                memset(&none, 0, sizeof none);
                memset(pair, 0, sizeof pair);
                pair[0].amplitude = se_fit_residual_peak(&wk, &none, &kb);
                pair[0].lag = (double)kb;
                k = 1;
                if (pair[0].amplitude == 0.0)
                    continue;
            } else {
                if (maxk < 2 || !se_fit_best_pair(&wk, lo_lag, hi_lag, pair))
                    continue;
                k = 2;
            }
            qsort(pair, k, sizeof *pair, se_echo_cmp);
            if (se_fit_same(pair, k, ini, n_init) || (cur.ok && se_fit_same(pair, k, cur.e, cur.k)))
                continue;
            if (se_fit_start(&wk, pair, k,
                             cur.ok ? cur.bic + 4.0 * log((double)pr.nwin) : INFINITY, &cand,
                             err) != 0)
                goto nomem;
        }
        if (!cand.ok)
            continue;
        /* a lone given echo (CLEAN saw one) is split by another start only into echoes at least a
         * main-lobe half width apart: closer, at high SNR, a small error of the pulse shape (a
         * reference cut from the record) is fitted as well by two echoes as by a second one */
        if (s > 0 && n_init == 1) {
            size_t q;
            for (q = 1; q < cand.k; q++)
                if (cand.e[q].lag - cand.e[q - 1].lag < (double)hw)
                    break;
            if (cand.k > 1 && q < cand.k) {
                se_state_free(&cand);
                continue;
            }
        }
        if (!cur.ok || cand.bic < cur.bic - 1e-9 * fmax(1.0, fabs(cur.bic))) {
            se_state_free(&cur);
            cur = cand;
        } else {
            se_state_free(&cand);
        }
    }
    free(ini);
    free(trial);
    free(res);
    if (!cur.ok)
        return se_fail(err, SE_ERR_NUMERIC,
                       "echo fit: no fit of the %zu echoes near lag %.1f converged", n_init, lo_lag);
    *out = cur.e;
    *n_out = cur.k;
    if (bic != NULL)
        *bic = cur.e != NULL ? cur.bic : NAN;
    if (sigma_used != NULL)
        *sigma_used = cfg->sigma > 0.0 ? cfg->sigma
                                       : (cur.k > 0 && pr.nwin > 2 * cur.k
                                              ? sqrt(cur.rss / (double)(pr.nwin - 2 * cur.k))
                                              : NAN);
    if (cur.e == NULL)
        *n_out = 0;
    return SE_OK;
nomem:
    se_state_free(&cur);
    free(ini);
    free(trial);
    free(res);
    return err ? err->code : SE_ERR_NOMEM;
}

/* ---- Layered fit (se_layerfit) ---- */

#define SE_LAYER_MAX_MULT 400

/* What the layered least-squares problem needs. p = (tau1, tau2, r1, r2[, g]). */
typedef struct se_layer_problem {
    const se_echo_model *mdl;
    const double *x; /* x + begin */
    size_t nwin;
    double begin;
    double frac;     /* multiples kept down to frac of the larger primary */
    double gain;     /* g when fixed */
    int free_gain;
} se_layer_problem;

/* Arrival j of the model at p (j = 0: first primary, j = 1 + n: second primary and its n-th
 * multiple), with its amplitude A, lag L, dA/dp and dL/dp [size: 5]. Returns 0 past the last one
 * kept (below frac of the larger primary, beyond the window, or SE_LAYER_MAX_MULT multiples). */
static int se_layer_arrival(const se_layer_problem *pr, const double *p, size_t j, double *A,
                            double *L, double dA[5], double dL[5])
{
    double t1 = p[0], t2 = p[1], r1 = p[2], r2 = p[3], g = pr->free_gain ? p[4] : pr->gain;
    double big = fmax(fabs(g * r1), fabs(g * (1.0 - r1 * r1) * r2)), q = -r1 * r2, qn, sr;
    size_t n, i;

    for (i = 0; i < 5; i++)
        dA[i] = dL[i] = 0.0;
    if (j == 0) {
        *A = g * r1;
        *L = t1;
        dL[0] = 1.0;
        dA[2] = g;
        dA[4] = r1;
        return 1;
    }
    n = j - 1;
    if (n > SE_LAYER_MAX_MULT)
        return 0;
    *L = t2 + (double)n * (t2 - t1);
    if (n > 0 && *L > pr->begin + (double)pr->nwin + 2.0)
        return 0;
    qn = pow(q, (double)n);
    *A = g * (1.0 - r1 * r1) * r2 * qn;
    if (n > 0 && !(fabs(*A) >= pr->frac * big))
        return 0;
    dL[0] = -(double)n;
    dL[1] = (double)n + 1.0;
    /* A = g (-1)^n (1 - r1^2) r1^n r2^(n+1) */
    sr = (n % 2 ? -1.0 : 1.0) * pow(r2, (double)n + 1.0); /* (-1)^n r2^(n+1) */
    dA[2] = g * sr * ((double)n * (n > 0 ? pow(r1, (double)n - 1.0) : 0.0) -
                      ((double)n + 2.0) * pow(r1, (double)n + 1.0));
    dA[3] = g * (1.0 - r1 * r1) * ((double)n + 1.0) * qn;
    dA[4] = (1.0 - r1 * r1) * r2 * qn;
    return 1;
}

/* f_i = x_i - sum_j A_j s(i - L_j) */
static int se_layer_f(const gsl_vector *pv, void *data, gsl_vector *f)
{
    const se_layer_problem *pr = data;
    double p[5], A, L, dA[5], dL[5];
    size_t i, j, np = pv->size;

    for (i = 0; i < 5; i++)
        p[i] = i < np ? gsl_vector_get(pv, i) : 0.0;
    for (i = 0; i < pr->nwin; i++)
        gsl_vector_set(f, i, pr->x[i]);
    for (j = 0; se_layer_arrival(pr, p, j, &A, &L, dA, dL); j++)
        se_fit_sub_echo(f, pr->mdl, pr->begin, pr->nwin, A, L);
    return GSL_SUCCESS;
}

/* df_i/dp = -sum_j (dA_j/dp s(t) - A_j s'(t) dL_j/dp),  t = i - L_j */
static int se_layer_df(const gsl_vector *pv, void *data, gsl_matrix *J)
{
    const se_layer_problem *pr = data;
    double p[5], A, L, dA[5], dL[5];
    size_t i, j, c, np = pv->size;

    for (i = 0; i < 5; i++)
        p[i] = i < np ? gsl_vector_get(pv, i) : 0.0;
    gsl_matrix_set_zero(J);
    for (j = 0; se_layer_arrival(pr, p, j, &A, &L, dA, dL); j++) {
        double t0 = pr->begin - L;
        for (i = 0; i < pr->nwin; i++) {
            double t = t0 + (double)i, v, d;
            if (t < -2.0 || t > (double)pr->mdl->m + 1.0)
                continue;
            v = se_echo_model_value(pr->mdl, t, &d);
            for (c = 0; c < np; c++)
                gsl_matrix_set(J, i, c, gsl_matrix_get(J, i, c) - (dA[c] * v - A * d * dL[c]));
        }
    }
    return GSL_SUCCESS;
}

void se_layerfit_config_init(se_layerfit_config *cfg)
{
    memset(cfg, 0, sizeof *cfg);
}

/* One Levenberg-Marquardt fit from p0 [size: np]. Returns 1 and fills *out (and *rss) for a
 * valid fit (converged, |r| < 1, tau1 < tau2, both primaries overlapping the window), 0 when not,
 * -1 on allocation failure. */
static int se_layer_run(const se_layer_problem *pr, const double *p0v, size_t np, double sigma,
                        se_layerfit_result *out, se_error *err)
{
    se_lm lm = {NULL, NULL};
    gsl_matrix *cov;
    size_t i, j;
    int ran, ok = 0;

    if (pr->nwin <= np + 2)
        return 0;
    ran = se_lm_solve(&lm, se_layer_f, se_layer_df, (void *)pr, pr->nwin, p0v, np, "layered fit",
                      err);
    if (ran < 0)
        return -1;
    cov = lm.cov;
    if (ran) {
        gsl_vector *f = gsl_multifit_nlinear_residual(lm.w);
        gsl_vector *pv = gsl_multifit_nlinear_position(lm.w);
        gsl_matrix *J = gsl_multifit_nlinear_jac(lm.w);
        double rss, s2, p[5], C[5][5], A, L, dA[5], dL[5], ga[2][5];
        gsl_blas_ddot(f, f, &rss);
        s2 = sigma > 0.0 ? sigma * sigma : rss / (double)(pr->nwin - np);
        for (i = 0; i < 5; i++)
            p[i] = i < np ? gsl_vector_get(pv, i) : 0.0;
        ok = isfinite(rss) && gsl_multifit_nlinear_covar(J, 0.0, cov) == GSL_SUCCESS;
        for (i = 0; i < np && ok; i++)
            ok = isfinite(p[i]);
        ok = ok && fabs(p[2]) < 1.0 && fabs(p[3]) < 1.0 && p[1] > p[0] &&
             p[0] > pr->begin - (double)pr->mdl->m && p[1] < pr->begin + (double)pr->nwin;
        if (ok) {
            memset(C, 0, sizeof C);
            for (i = 0; i < np; i++)
                for (j = 0; j < np; j++)
                    C[i][j] = gsl_matrix_get(cov, i, j) * s2;
            memset(out, 0, sizeof *out);
            /* the seen amplitudes' gradients: the two primaries' arrivals */
            for (i = 0; i < 2; i++) {
                double va = 0.0, c = 0.0, vt;
                size_t a, b, lt = i; /* lag parameter of primary i */
                se_layer_arrival(pr, p, i, &A, &L, dA, dL);
                for (a = 0; a < 5; a++)
                    ga[i][a] = a < np ? dA[a] : 0.0;
                for (a = 0; a < np; a++) {
                    c += ga[i][a] * C[a][lt];
                    for (b = 0; b < np; b++)
                        va += ga[i][a] * C[a][b] * ga[i][b];
                }
                vt = C[lt][lt];
                out->primary[i].lag = L;
                out->primary[i].amplitude = A;
                out->primary[i].lag_sd = sqrt(fmax(vt, 0.0));
                out->primary[i].amplitude_sd = sqrt(fmax(va, 0.0));
                out->primary[i].corr = (va > 0.0 && vt > 0.0) ? c / sqrt(va * vt) : 0.0;
                out->r[i] = p[2 + i];
                out->r_sd[i] = sqrt(fmax(C[2 + i][2 + i], 0.0));
            }
            out->gain = pr->free_gain ? p[4] : pr->gain;
            out->gain_sd = pr->free_gain ? sqrt(fmax(C[4][4], 0.0)) : 0.0;
            for (j = 0; se_layer_arrival(pr, p, j, &A, &L, dA, dL); j++)
                ;
            out->n_arrivals = j;
            out->rss = rss;
            out->sigma = sqrt(s2);
        }
    }
    se_lm_free(&lm);
    return ok;
}

se_status se_layerfit(const se_echo_model *mdl, const double *x, size_t n,
                      const se_layerfit_config *cfg, const se_echo init[2],
                      se_layerfit_result *out, double *resid, se_error *err)
{
    se_layer_problem pr;
    se_layerfit_result best, cand;
    se_echo e0, e1;
    double p0[5], g, r1, r2, hw, centre, wsum;
    size_t i, np, m, s;
    int found = 0, rc;

    if (mdl == NULL || x == NULL || cfg == NULL || init == NULL || out == NULL)
        return se_fail(err, SE_ERR_ARG, "layered fit: missing argument");
    memset(out, 0, sizeof *out);
    m = mdl->m;
    if (cfg->end > n || cfg->begin >= cfg->end || cfg->end - cfg->begin < 16)
        return se_fail(err, SE_ERR_ARG,
                       "layered fit: window [%zu, %zu) does not fit a %zu-sample trace",
                       cfg->begin, cfg->end, n);
    for (i = 0; i < 2; i++)
        if (!isfinite(init[i].lag) || !isfinite(init[i].amplitude))
            return se_fail(err, SE_ERR_ARG, "layered fit: starting echo %zu is not finite", i);
    for (i = cfg->begin; i < cfg->end; i++)
        if (!isfinite(x[i]))
            return se_fail(err, SE_ERR_DATA, "layered fit: sample %zu is not finite", i);
    pr.mdl = mdl;
    pr.x = x + cfg->begin;
    pr.nwin = cfg->end - cfg->begin;
    pr.begin = (double)cfg->begin;
    pr.frac = cfg->min_fraction > 0.0 ? cfg->min_fraction : 1e-4;
    pr.gain = cfg->gain != 0.0 ? cfg->gain : 1.0;
    pr.free_gain = !cfg->fix_gain;
    np = pr.free_gain ? 5 : 4;
    e0 = init[0].lag <= init[1].lag ? init[0] : init[1];
    e1 = init[0].lag <= init[1].lag ? init[1] : init[0];
    /* main-lobe half width of the pulse (integer lags), as in se_fitecho */
    for (s = 1; s + 1 < m && mdl->acf[s] > 0.0 && mdl->acf[s + 1] < mdl->acf[s]; s++)
        ;
    hw = (double)s;
    /* the coefficients from the seen amplitudes with the gain of the start */
    g = pr.gain;
    r1 = fmax(-0.95, fmin(0.95, e0.amplitude / g));
    r2 = fmax(-0.95, fmin(0.95, e1.amplitude / (g * (1.0 - r1 * r1))));
    wsum = fabs(e0.amplitude) + fabs(e1.amplitude);
    centre = wsum > 0.0 ? (fabs(e0.amplitude) * e0.lag + fabs(e1.amplitude) * e1.lag) / wsum
                        : 0.5 * (e0.lag + e1.lag);
    /* start 0: the given echoes; 1..8: separations hw/8 .. hw about their centre */
    for (s = 0; s <= 8; s++) {
        if (s == 0) {
            p0[0] = e0.lag;
            p0[1] = e1.lag > e0.lag ? e1.lag : e0.lag + 1.0;
        } else {
            double d = hw * (double)s / 8.0;
            p0[0] = centre - 0.5 * d;
            p0[1] = centre + 0.5 * d;
        }
        p0[2] = r1;
        p0[3] = r2;
        p0[4] = g;
        rc = se_layer_run(&pr, p0, np, cfg->sigma, &cand, err);
        if (rc < 0)
            return SE_ERR_NOMEM;
        if (rc == 1 && (!found || cand.rss < best.rss)) {
            best = cand;
            found = 1;
        }
        if (s == 0 && found)
            break; /* the given start converged: the grid is the fallback */
    }
    if (!found)
        return se_fail(err, SE_ERR_NUMERIC,
                       "layered fit: no fit of two interfaces near lag %.1f converged", e0.lag);
    *out = best;
    if (resid != NULL) {
        double p[5], A, L, dA[5], dL[5];
        size_t j;
        p[0] = best.primary[0].lag;
        p[1] = best.primary[1].lag;
        p[2] = best.r[0];
        p[3] = best.r[1];
        p[4] = best.gain;
        for (i = 0; i < pr.nwin; i++)
            resid[i] = pr.x[i];
        for (j = 0; se_layer_arrival(&pr, p, j, &A, &L, dA, dL); j++)
            for (i = 0; i < pr.nwin; i++) {
                double t = pr.begin - L + (double)i;
                if (t < -2.0 || t > (double)m + 1.0)
                    continue;
                resid[i] -= A * se_echo_model_value(mdl, t, NULL);
            }
    }
    return SE_OK;
}
