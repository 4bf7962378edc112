/* strandecho: autocorrelation of the reference pulse, tabulated for band-limited fractional lags. */
#include <fftw3.h>
#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/detect.h"

#define SE_PI 3.14159265358979323846
#define SE_ACF_OVERSAMPLE 32          /* grid points per sample */
#define SE_ACF_GRID_LIMIT ((size_t)1 << 22) /* cap on the fine FFT length */
#define SE_ACF_MONOTONE_FLOOR 1e-3    /* main lobe end for a lobe without zero or minimum */

struct se_acf {
    size_t m;        /* pulse length */
    double *lags;    /* acf(k), k = 0..m-1 */
    size_t over;     /* grid points per sample U */
    size_t ngrid;    /* grid values for t = i/U, i = 0..ngrid-1 (covers [0, m-1] plus 2) */
    double *val;     /* acf(i/U) */
    double *der;     /* acf'(i/U), per sample */
    double beta;     /* rms bandwidth, rad/sample */
    double half;     /* main-lobe half width, samples */
};

static double se_acf_beta(const double *a, size_t m);
static double se_acf_half_width(const se_acf *a);
static se_status se_acf_tabulate(se_acf *a, const double *pulse, double energy, se_error *err);

/* -acf''(0) = (1/2pi) int w^2 A(w) dw, A(w) = sum_k acf(k) e^{-iwk};
 * (1/2pi) int_{-pi}^{pi} w^2 cos(wk) dw = pi^2/3 (k = 0), 2 (-1)^k / k^2 (k != 0). */
static double se_acf_beta(const double *a, size_t m)
{
    double b2 = SE_PI * SE_PI / 3.0 * a[0];
    size_t k;
    for (k = 1; k < m; k++)
        b2 += 4.0 * ((k & 1) ? -a[k] : a[k]) / ((double)k * (double)k);
    return b2 > 0.0 ? sqrt(b2) : 0.0;
}

static double se_acf_half_width(const se_acf *a)
{
    size_t i, last = (a->m - 1) * a->over;
    double h = 1.0 / (double)a->over;
    for (i = 1; i <= last; i++) {
        double v0 = a->val[i - 1], v1 = a->val[i];
        if (v1 <= 0.0) /* zero crossing: linear between the grid points */
            return ((double)(i - 1) + v0 / (v0 - v1)) * h;
        if (v1 >= v0) /* first local minimum */
            return (double)(i - 1) * h;
        if (v1 < SE_ACF_MONOTONE_FLOOR)
            return ((double)(i - 1) + (v0 - SE_ACF_MONOTONE_FLOOR) / (v0 - v1)) * h;
    }
    return (double)(a->m - 1);
}

/* Integer lags from |S|^2 (P-point FFT, P >= 4m so no circular wrap), then the P-periodic
 * trigonometric interpolant and its derivative on a grid of step 1/U by zero-padding the spectrum
 * to P U (the Nyquist bin split between +-P/2). */
static se_status se_acf_tabulate(se_acf *a, const double *pulse, double energy, se_error *err)
{
    size_t m = a->m, P = 64, F, q, i;
    double *tin = NULL, *tout = NULL;
    fftw_complex *spec = NULL, *fspec = NULL;
    double *pow2 = NULL;
    fftw_plan pf = NULL, pi = NULL, pg = NULL;
    se_status st = SE_OK;

    while (P < 4 * m) {
        if (P > SIZE_MAX / 4 || P > (size_t)INT_MAX / 2)
            return se_fail(err, SE_ERR_NOMEM, "acf: pulse of %zu samples is too long", m);
        P <<= 1;
    }
    a->over = SE_ACF_OVERSAMPLE;
    while (a->over > 4 && P * a->over > SE_ACF_GRID_LIMIT)
        a->over /= 2;
    F = P * a->over;
    if (F > (size_t)INT_MAX)
        return se_fail(err, SE_ERR_NOMEM, "acf: grid FFT of %zu points is too long", F);
    a->ngrid = (m - 1) * a->over + 3;

    tin = fftw_malloc(F * sizeof *tin);
    tout = fftw_malloc(F * sizeof *tout);
    spec = fftw_malloc((P / 2 + 1) * sizeof *spec);
    fspec = fftw_malloc((F / 2 + 1) * sizeof *fspec);
    pow2 = malloc((P / 2 + 1) * sizeof *pow2);
    a->lags = malloc(m * sizeof *a->lags);
    a->val = malloc(a->ngrid * sizeof *a->val);
    a->der = malloc(a->ngrid * sizeof *a->der);
    if (!tin || !tout || !spec || !fspec || !pow2 || !a->lags || !a->val || !a->der) {
        st = se_fail(err, SE_ERR_NOMEM, "acf: cannot allocate FFT arrays of %zu points", F);
        goto done;
    }
    pf = fftw_plan_dft_r2c_1d((int)P, tin, spec, FFTW_ESTIMATE);
    pi = fftw_plan_dft_c2r_1d((int)P, spec, tout, FFTW_ESTIMATE);
    pg = fftw_plan_dft_c2r_1d((int)F, fspec, tout, FFTW_ESTIMATE);
    if (pf == NULL || pi == NULL || pg == NULL) {
        st = se_fail(err, SE_ERR_NOMEM, "acf: FFTW could not plan transforms of %zu and %zu points", P, F);
        goto done;
    }
    memset(tin, 0, P * sizeof *tin);
    memcpy(tin, pulse, m * sizeof *tin);
    fftw_execute(pf);
    for (q = 0; q <= P / 2; q++) /* A_q = |S_q|^2 / E_s: real and even */
        pow2[q] = (spec[q][0] * spec[q][0] + spec[q][1] * spec[q][1]) / energy;
    for (q = 0; q <= P / 2; q++) {
        spec[q][0] = pow2[q];
        spec[q][1] = 0.0;
    }
    fftw_execute(pi);
    for (i = 0; i < m; i++)
        a->lags[i] = tout[i] / (double)P;

    /* values: y(t) = (1/P) sum_q A_q e^{2 pi i q t / P} */
    memset(fspec, 0, (F / 2 + 1) * sizeof *fspec);
    for (q = 0; q < P / 2; q++)
        fspec[q][0] = pow2[q];
    fspec[P / 2][0] = 0.5 * pow2[P / 2];
    fftw_execute(pg);
    for (i = 0; i < a->ngrid; i++)
        a->val[i] = tout[i] / (double)P;
    /* derivative: multiply by i 2 pi q / P (the split Nyquist pair differentiates to -pi A sin) */
    memset(fspec, 0, (F / 2 + 1) * sizeof *fspec);
    for (q = 0; q < P / 2; q++)
        fspec[q][1] = 2.0 * SE_PI * (double)q / (double)P * pow2[q];
    fspec[P / 2][1] = SE_PI * 0.5 * pow2[P / 2];
    fftw_execute(pg);
    for (i = 0; i < a->ngrid; i++)
        a->der[i] = tout[i] / (double)P;

done:
    if (pf != NULL)
        fftw_destroy_plan(pf);
    if (pi != NULL)
        fftw_destroy_plan(pi);
    if (pg != NULL)
        fftw_destroy_plan(pg);
    fftw_free(tin);
    fftw_free(tout);
    fftw_free(spec);
    fftw_free(fspec);
    free(pow2);
    return st;
}

se_acf *se_acf_create(const double *pulse, size_t m, se_error *err)
{
    se_acf *a;
    double e = 0.0;
    size_t i;
    if (pulse == NULL || m == 0) {
        se_fail(err, SE_ERR_ARG, "acf: pulse is %s", pulse == NULL ? "NULL" : "empty (m = 0)");
        return NULL;
    }
    for (i = 0; i < m; i++) {
        if (!isfinite(pulse[i])) {
            se_fail(err, SE_ERR_DATA, "acf: pulse sample %zu is not finite", i);
            return NULL;
        }
        e += pulse[i] * pulse[i];
    }
    if (!(e > 0.0) || !isfinite(e)) {
        se_fail(err, SE_ERR_DATA, "acf: pulse of %zu samples has %s energy", m, e > 0.0 ? "infinite" : "zero");
        return NULL;
    }
    a = se_calloc(1, sizeof *a, "acf", err);
    if (a == NULL)
        return NULL;
    a->m = m;
    if (se_acf_tabulate(a, pulse, e, err) != SE_OK) {
        se_acf_destroy(a);
        return NULL;
    }
    a->beta = se_acf_beta(a->lags, m);
    a->half = se_acf_half_width(a);
    return a;
}

void se_acf_destroy(se_acf *a)
{
    if (a == NULL)
        return;
    free(a->lags);
    free(a->val);
    free(a->der);
    free(a);
}

size_t se_acf_half_length(const se_acf *a)
{
    return a == NULL ? 0 : a->m - 1;
}

/* Cubic Hermite between grid points i and i+1 (error ~ h^4 |acf''''| / 384, h = 1/U). */
double se_acf_value(const se_acf *a, double lag)
{
    double t, u, f, h, f2, f3;
    size_t i;
    if (a == NULL || isnan(lag))
        return 0.0;
    t = fabs(lag);
    if (t > (double)(a->m - 1))
        return 0.0;
    u = t * (double)a->over;
    i = (size_t)u;
    if (i + 1 >= a->ngrid)
        i = a->ngrid - 2;
    f = u - (double)i;
    h = 1.0 / (double)a->over;
    f2 = f * f;
    f3 = f2 * f;
    return (2.0 * f3 - 3.0 * f2 + 1.0) * a->val[i] + (f3 - 2.0 * f2 + f) * h * a->der[i] +
           (-2.0 * f3 + 3.0 * f2) * a->val[i + 1] + (f3 - f2) * h * a->der[i + 1];
}

double se_acf_rms_bandwidth(const se_acf *a)
{
    return a == NULL ? 0.0 : a->beta;
}

double se_acf_mainlobe_half_width(const se_acf *a)
{
    return a == NULL ? 0.0 : a->half;
}

size_t se_acf_extent(const se_acf *a, double level)
{
    size_t k;
    if (a == NULL || !(level > 0.0 && level < 1.0))
        return 0;
    for (k = a->m - 1; k > 0; k--)
        if (fabs(a->lags[k]) >= level)
            return k;
    return 0;
}
