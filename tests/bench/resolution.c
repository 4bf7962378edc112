/* strandecho benchmark: two-echo resolution versus separation and SNR, CLEAN alone (se_detect)
 * against CLEAN followed by the least-squares fit with BIC (fitecho.h).
 *
 * Ricker pulse f0 = 0.05 cycle/sample (main-lobe half width hw from se_acf_mainlobe_half_width,
 * main-lobe width 2 hw); echoes a1 = 1 at a random fractional lag and a2 at separation
 * s * 2 hw, opposite (a2 = -0.7), same sign (a2 = +1) or same sign unequal (a2 = +0.5). The SNR is the energy SNR of the weaker
 * echo. Resolved: exactly two echoes, right signs, each within 4 of its standard uncertainty
 * (CLEAN: the Cramer-Rao bound at its SNR; fit: its covariance) plus 0.05 sample of the truth.
 * Then the false-split check: a single echo a = 1, fraction of trials giving exactly one echo of
 * the right sign within the same tolerance, for CLEAN, the fit with the true sigma and the fit with
 * sigma from its own residual (fc.sigma = 0, as the locator calls it).
 *
 * Usage: bench_resolution [--trials N]  (default 100) */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/detect.h"
#include "strandecho/fitecho.h"
#include "strandecho/xcorr.h"

#define BR_PI 3.14159265358979323846
#define BR_HALF 40
#define BR_M (2 * BR_HALF + 1)
#define BR_N 1024

static double br_ricker(double t);
static int br_one(const se_echo *fit, size_t no, double lag);

static double br_ricker(double t)
{
    double u = BR_PI * 0.05 * t;
    return (1.0 - 2.0 * u * u) * exp(-u * u);
}

/* exactly one positive echo within 4 sd + 0.05 of lag */
static int br_one(const se_echo *fit, size_t no, double lag)
{
    return no == 1 && fit[0].amplitude > 0.0 && fabs(fit[0].lag - lag) <= 4.0 * fit[0].lag_sd + 0.05;
}

int main(int argc, char **argv)
{
    static const double seps[8] = {0.3, 0.4, 0.5, 0.6, 0.8, 1.0, 1.2, 1.5};
    static const double snrs[3] = {20.0, 30.0, 40.0};
    size_t trials = 100, si, qi, sg, t, j;
    double s[BR_M], es = 0.0, hw, beta, x[BR_N], r[BR_N];
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    se_error err;
    se_acf *acf;
    se_echo_model *mdl;
    se_xcorr *xc;
    se_xcorr_work *xw;
    int a;
    for (a = 1; a < argc; a++) {
        if (strcmp(argv[a], "--trials") == 0 && a + 1 < argc)
            trials = (size_t)strtoul(argv[++a], NULL, 10);
        else {
            fprintf(stderr, "usage: bench_resolution [--trials N]\n");
            return 2;
        }
    }
    for (j = 0; j < BR_M; j++) {
        s[j] = br_ricker((double)j - BR_HALF);
        es += s[j] * s[j];
    }
    acf = se_acf_create(s, BR_M, &err);
    mdl = se_echo_model_create(s, BR_M, &err);
    xc = se_xcorr_create(s, BR_M, 0, &err);
    xw = xc ? se_xcorr_work_create(xc, &err) : NULL;
    if (rng == NULL || acf == NULL || mdl == NULL || xw == NULL || trials == 0)
        return 1;
    gsl_rng_set(rng, 2001);
    hw = se_acf_mainlobe_half_width(acf);
    beta = se_acf_rms_bandwidth(acf);
    printf("# command: bench_resolution --trials %zu\n", trials);
    printf("# Ricker f0 = 0.05: main-lobe half width %.3f samples; separation in main-lobe widths (2 hw)\n", hw);
    printf("%-9s %6s %6s %12s %12s\n", "signs", "SNR_dB", "sep", "CLEAN", "CLEAN+fit");
    for (sg = 0; sg < 3; sg++)
        for (qi = 0; qi < 3; qi++)
            for (si = 0; si < 8; si++) {
                double a2 = sg == 0 ? -0.7 : (sg == 1 ? 1.0 : 0.5), weak = fmin(1.0, fabs(a2));
                double sigma = weak * sqrt(es) / pow(10.0, snrs[qi] / 20.0);
                size_t ok_clean = 0, ok_fit = 0;
                for (t = 0; t < trials; t++) {
                    double lag[2], amp[2];
                    se_detect_config dc;
                    se_peak *pk = NULL;
                    size_t np = 0, no = 0, q;
                    se_echo init[8], *fit = NULL;
                    se_fitecho_config fc;
                    lag[0] = 400.0 + gsl_rng_uniform(rng);
                    lag[1] = lag[0] + seps[si] * 2.0 * hw;
                    amp[0] = 1.0;
                    amp[1] = a2;
                    for (j = 0; j < BR_N; j++)
                        x[j] = amp[0] * br_ricker((double)j - lag[0] - BR_HALF) +
                               amp[1] * br_ricker((double)j - lag[1] - BR_HALF) +
                               gsl_ran_gaussian(rng, sigma);
                    se_xcorr_run(xc, xw, x, BR_N, r, &err);
                    memset(&dc, 0, sizeof dc);
                    dc.start = 100;
                    dc.end = BR_N - BR_M;
                    dc.threshold = 6.0 * sigma / sqrt(es);
                    dc.acf = acf;
                    if (se_detect(r, BR_N, &dc, &pk, &np, &err) != SE_OK)
                        continue;
                    if (np == 2) {
                        int good = 1;
                        for (q = 0; q < 2; q++) {
                            double sd = sigma / sqrt(es) / (fabs(amp[q]) * beta);
                            if (pk[q].amplitude * amp[q] <= 0.0 ||
                                fabs(pk[q].lag - lag[q]) > 4.0 * sd + 0.05)
                                good = 0;
                        }
                        ok_clean += good;
                    }
                    for (q = 0; q < np && q < 8; q++) {
                        init[q].lag = pk[q].lag;
                        init[q].amplitude = pk[q].amplitude;
                    }
                    se_fitecho_config_init(&fc);
                    fc.sigma = sigma;
                    fc.min_amplitude = dc.threshold;
                    if (np > 0 &&
                        se_fitecho(mdl, x, BR_N, &fc, init, np < 8 ? np : 8, &fit, &no, NULL, NULL,
                                   &err) == SE_OK &&
                        no == 2) {
                        int good = 1;
                        for (q = 0; q < 2; q++)
                            if (fit[q].amplitude * amp[q] <= 0.0 ||
                                fabs(fit[q].lag - lag[q]) > 4.0 * fit[q].lag_sd + 0.05)
                                good = 0;
                        ok_fit += good;
                    }
                    free(fit);
                    free(pk);
                }
                printf("%-9s %6.0f %6.2f %12.3f %12.3f\n", sg == 0 ? "opposite" : (sg == 1 ? "same" : "unequal"),
                       snrs[qi], seps[si], (double)ok_clean / (double)trials,
                       (double)ok_fit / (double)trials);
            }
    printf("\n# single echo a = 1: fraction of trials with exactly one echo (no false split)\n");
    printf("%6s %12s %12s %12s\n", "SNR_dB", "CLEAN", "fit_sigma", "fit_resid");
    for (qi = 0; qi < 3; qi++) {
        double sigma = sqrt(es) / pow(10.0, snrs[qi] / 20.0);
        size_t ok_clean = 0, ok_fit = 0, ok_res = 0;
        for (t = 0; t < trials; t++) {
            double lag = 400.0 + gsl_rng_uniform(rng);
            se_detect_config dc;
            se_peak *pk = NULL;
            size_t np = 0, no = 0, q, pass;
            se_echo init[8], *fit = NULL;
            se_fitecho_config fc;
            for (j = 0; j < BR_N; j++)
                x[j] = br_ricker((double)j - lag - BR_HALF) + gsl_ran_gaussian(rng, sigma);
            se_xcorr_run(xc, xw, x, BR_N, r, &err);
            memset(&dc, 0, sizeof dc);
            dc.start = 100;
            dc.end = BR_N - BR_M;
            dc.threshold = 6.0 * sigma / sqrt(es);
            dc.acf = acf;
            if (se_detect(r, BR_N, &dc, &pk, &np, &err) != SE_OK)
                continue;
            if (np == 1 && pk[0].amplitude > 0.0 &&
                fabs(pk[0].lag - lag) <= 4.0 * sigma / sqrt(es) / beta + 0.05)
                ok_clean++;
            for (q = 0; q < np && q < 8; q++) {
                init[q].lag = pk[q].lag;
                init[q].amplitude = pk[q].amplitude;
            }
            for (pass = 0; pass < 2 && np > 0; pass++) {
                se_fitecho_config_init(&fc);
                fc.sigma = pass == 0 ? sigma : 0.0;
                fc.min_amplitude = dc.threshold;
                if (se_fitecho(mdl, x, BR_N, &fc, init, np < 8 ? np : 8, &fit, &no, NULL, NULL,
                               &err) == SE_OK &&
                    br_one(fit, no, lag)) {
                    if (pass == 0)
                        ok_fit++;
                    else
                        ok_res++;
                }
                free(fit);
                fit = NULL;
            }
            free(pk);
        }
        printf("%6.0f %12.3f %12.3f %12.3f\n", snrs[qi], (double)ok_clean / (double)trials,
               (double)ok_fit / (double)trials, (double)ok_res / (double)trials);
    }
    se_xcorr_work_destroy(xw);
    se_xcorr_destroy(xc);
    se_echo_model_destroy(mdl);
    se_acf_destroy(acf);
    gsl_rng_free(rng);
    return 0;
}
