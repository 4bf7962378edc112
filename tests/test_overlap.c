/* strandecho tests: overlapping echoes by model-based least squares (fitecho.h).
 *
 * - The echo model's band-limited interpolant reproduces an almost band-limited pulse (Ricker,
 *   f0 = 0.05 cycle/sample) between its samples (oracle: the analytic pulse).
 * - Two opposite-sign echoes 0.6 of the main-lobe width apart (main lobe = twice the half width of
 *   se_acf_mainlobe_half_width) at 40 dB energy SNR come out as two echoes with the right signs,
 *   delays within 4 of their own standard uncertainties of the truth (20 seeds, all must pass).
 * - One echo alone at 40 dB stays one echo (BIC does not split it), and its reported lag
 *   uncertainty agrees with the Cramer-Rao bound 1/sqrt(eta beta^2) (Kay 1993, ch. 3, REFERENCE.md
 *   2) within 10 %.
 * The issue (#4) sets the 0.6 main-lobe and 40 dB case; the 4-sigma and 10 % tolerances are
 * common practice, no source. */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/detect.h"
#include "strandecho/fitecho.h"
#include "strandecho/xcorr.h"
#include "testutil.h"

#define OV_PI 3.14159265358979323846
#define OV_F0 0.05   /* Ricker peak frequency, cycle/sample */
#define OV_HALF 40   /* reference support: centre +- OV_HALF samples */
#define OV_N 1024

static double ov_ricker(double t);
static void ov_reference(double *s, size_t m);
static void ov_echoes(double *x, size_t n, const double *lag, const double *amp, size_t k);
static void test_model(void);
static void test_two_echoes(void);
static void test_one_echo(void);

/* Ricker wavelet (1 - 2 (pi f0 t)^2) exp(-(pi f0 t)^2), t in samples. */
static double ov_ricker(double t)
{
    double u = OV_PI * OV_F0 * t;
    return (1.0 - 2.0 * u * u) * exp(-u * u);
}

static void ov_reference(double *s, size_t m)
{
    size_t j;
    for (j = 0; j < m; j++)
        s[j] = ov_ricker((double)j - OV_HALF);
}

/* x = sum amp_k s(i - lag_k) with the analytic pulse (lag = start of the reference window). */
static void ov_echoes(double *x, size_t n, const double *lag, const double *amp, size_t k)
{
    size_t i, q;
    for (i = 0; i < n; i++)
        for (q = 0; q < k; q++)
            x[i] += amp[q] * ov_ricker((double)i - lag[q] - OV_HALF);
}

static void test_model(void)
{
    double s[2 * OV_HALF + 1], worst = 0.0, worstd = 0.0;
    se_error err;
    se_echo_model *mdl;
    size_t m = 2 * OV_HALF + 1;
    int i;
    ov_reference(s, m);
    mdl = se_echo_model_create(s, m, &err);
    if (!CHECK(mdl != NULL))
        return;
    for (i = 0; i < 400; i++) {
        double t = 10.0 + 0.1537 * i, d, v = se_echo_model_value(mdl, t, &d);
        double u = OV_PI * OV_F0 * (t - OV_HALF), h = 1e-5;
        double dv = (ov_ricker(t - OV_HALF + h) - ov_ricker(t - OV_HALF - h)) / (2 * h);
        (void)u;
        worst = fmax(worst, fabs(v - ov_ricker(t - OV_HALF)));
        worstd = fmax(worstd, fabs(d - dv));
    }
    /* Ricker f0 = 0.05 carries < 1e-6 of its amplitude above Nyquist [calc: exp(-(0.5/0.05)^2)] */
    CHECK_CLOSE(worst, 0.0, 1e-5, "echo model value against the analytic Ricker");
    CHECK_CLOSE(worstd, 0.0, 1e-4, "echo model derivative against the analytic Ricker");
    CHECK(se_echo_model_value(mdl, -500.0, NULL) == 0.0);
    CHECK(se_echo_model_length(mdl) == m);
    se_echo_model_destroy(mdl);
    CHECK(se_echo_model_create(NULL, 5, &err) == NULL && err.code == SE_ERR_ARG);
}

static void test_two_echoes(void)
{
    double s[2 * OV_HALF + 1], es = 0.0, hw, sep, sigma;
    double *x = malloc(OV_N * sizeof *x), *r = malloc(OV_N * sizeof *r);
    size_t m = 2 * OV_HALF + 1, j, resolved = 0, trials = 20, t;
    se_error err;
    se_acf *acf;
    se_echo_model *mdl;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    se_xcorr *xc;
    se_xcorr_work *xw;

    if (!CHECK(x != NULL && r != NULL && rng != NULL))
        goto out0;
    ov_reference(s, m);
    for (j = 0; j < m; j++)
        es += s[j] * s[j];
    acf = se_acf_create(s, m, &err);
    mdl = se_echo_model_create(s, m, &err);
    xc = se_xcorr_create(s, m, 0, &err);
    xw = xc ? se_xcorr_work_create(xc, &err) : NULL;
    if (!CHECK(acf != NULL && mdl != NULL && xw != NULL))
        goto out;
    hw = se_acf_mainlobe_half_width(acf);
    sep = 0.6 * 2.0 * hw;
    /* 40 dB energy SNR for the weaker echo (|a| = 0.7): eta = a^2 E_s / sigma^2 */
    sigma = 0.7 * sqrt(es) / pow(10.0, 40.0 / 20.0);
    gsl_rng_set(rng, 4242);
    for (t = 0; t < trials; t++) {
        double lag[2], amp[2] = {1.0, -0.7};
        se_detect_config dc;
        se_peak *pk = NULL;
        size_t np = 0, no = 0, q;
        se_echo init[8], *fit = NULL;
        se_fitecho_config fc;
        int ok;
        lag[0] = 400.0 + 0.37 * (double)t;
        lag[1] = lag[0] + sep;
        memset(x, 0, OV_N * sizeof *x);
        ov_echoes(x, OV_N, lag, amp, 2);
        for (j = 0; j < OV_N; j++)
            x[j] += gsl_ran_gaussian(rng, sigma);
        if (!CHECK(se_xcorr_run(xc, xw, x, OV_N, r, &err) == SE_OK))
            break;
        memset(&dc, 0, sizeof dc);
        dc.start = 100;
        dc.end = OV_N - m;
        dc.threshold = 6.0 * sigma / sqrt(es);
        dc.acf = acf;
        if (!CHECK(se_detect(r, OV_N, &dc, &pk, &np, &err) == SE_OK) || np == 0) {
            free(pk);
            continue;
        }
        for (q = 0; q < np && q < 8; q++) {
            init[q].lag = pk[q].lag;
            init[q].amplitude = pk[q].amplitude;
        }
        se_fitecho_config_init(&fc);
        fc.sigma = sigma;
        fc.min_amplitude = dc.threshold;
        ok = se_fitecho(mdl, x, OV_N, &fc, init, np < 8 ? np : 8, &fit, &no, NULL, NULL, &err) ==
             SE_OK;
        CHECK(ok);
        if (ok && no == 2 && fit[0].amplitude > 0.0 && fit[1].amplitude < 0.0 &&
            fabs(fit[0].lag - lag[0]) < 4.0 * fit[0].lag_sd + 0.01 &&
            fabs(fit[1].lag - lag[1]) < 4.0 * fit[1].lag_sd + 0.01)
            resolved++;
        else if (ok)
            for (q = 0; q < no; q++)
                fprintf(stderr, "  trial %zu: echo %zu of %zu (CLEAN %zu): lag %.3f sd %.3f amp %.4f"
                        " (true %.3f, %.3f)\n", t, q, no, np, fit[q].lag, fit[q].lag_sd,
                        fit[q].amplitude, lag[0], lag[1]);
        free(fit);
        free(pk);
    }
    printf("two echoes %.2f samples apart (main-lobe half width %.2f): resolved %zu/%zu\n", sep, hw,
           resolved, trials);
    CHECK(resolved == trials);
out:
    se_xcorr_work_destroy(xw);
    se_xcorr_destroy(xc);
    se_acf_destroy(acf);
    se_echo_model_destroy(mdl);
out0:
    gsl_rng_free(rng);
    free(x);
    free(r);
}

static void test_one_echo(void)
{
    double s[2 * OV_HALF + 1], es = 0.0, sigma, beta, crb;
    double x[OV_N];
    size_t m = 2 * OV_HALF + 1, j, single = 0, trials = 20, t;
    se_error err;
    se_acf *acf;
    se_echo_model *mdl;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    ov_reference(s, m);
    for (j = 0; j < m; j++)
        es += s[j] * s[j];
    acf = se_acf_create(s, m, &err);
    mdl = se_echo_model_create(s, m, &err);
    if (!CHECK(acf != NULL && mdl != NULL && rng != NULL))
        goto out;
    beta = se_acf_rms_bandwidth(acf);
    sigma = sqrt(es) / pow(10.0, 40.0 / 20.0);
    crb = 1.0 / (pow(10.0, 40.0 / 20.0) * beta);
    gsl_rng_set(rng, 77);
    for (t = 0; t < trials; t++) {
        double lag = 300.25 + 0.11 * (double)t, amp = 1.0;
        se_echo init, *fit = NULL;
        size_t no = 0;
        se_fitecho_config fc;
        memset(x, 0, sizeof x);
        ov_echoes(x, OV_N, &lag, &amp, 1);
        for (j = 0; j < OV_N; j++)
            x[j] += gsl_ran_gaussian(rng, sigma);
        init.lag = floor(lag);
        init.amplitude = 0.9;
        se_fitecho_config_init(&fc);
        fc.sigma = sigma;
        if (CHECK(se_fitecho(mdl, x, OV_N, &fc, &init, 1, &fit, &no, NULL, NULL, &err) == SE_OK) &&
            no == 1) {
            single++;
            if (t == 0)
                CHECK_CLOSE(fit[0].lag_sd / crb, 1.0, 0.10, "lag uncertainty / Cramer-Rao bound");
        }
        free(fit);
    }
    CHECK(single == trials);
out:
    gsl_rng_free(rng);
    se_acf_destroy(acf);
    se_echo_model_destroy(mdl);
}

int main(void)
{
    test_model();
    test_two_echoes();
    test_one_echo();
    return se_test_done("test_overlap");
}
