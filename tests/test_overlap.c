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
 * - Through se_locate: a splice (r = +0.2) right next to a clamp (r = -0.8) on a simulated
 *   tether (lattice model, simulate.h), 0.6 of the main-lobe width apart, at 40 dB: two primary
 *   events, right signs, anything after them labelled a multiple, each within 4 of its reported standard uncertainties (plus the simulator's time
 *   quantum) of its true distance.
 * - Dead zone: a reflector (r = +0.4) at half the dead-zone distance is reported in
 *   dead_zone_events (flagged, low confidence, sign right, within 4 reported sd plus a lattice cell),
 *   not in events; a line with nothing there reports no dead-zone event.
 * - The survey of issue #4's "done when": four taps of the splice-beside-clamp line with a
 *   reverberating source end (r_s = +0.5, not told to se_locate) at 30 dB, the pulse channel as
 *   pilot: the taps stacked (at least 3 used), r_s estimated within 0.1 of 0.5 (from the clamp's
 *   multiple at twice its delay; paths through the splice shift it, tolerance common practice),
 *   exactly the two primaries reported as such, every later event labelled a multiple.
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
#include "strandecho/locate.h"
#include "strandecho/pulse.h"
#include "strandecho/simulate.h"
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
static void test_splice_clamp(void);
static void test_dead_zone(void);
static void test_survey(void);
static void test_max_events(void);

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

/* One locate run of a simulated tether (hann:4ms, 48 kHz, v = 141.4 m/s) at 40 dB. */
static int ov_locate(const se_sim_reflector *refl, size_t nr, size_t max_events, se_locate_result *res)
{
    const double v = 141.4, fs = 48000.0;
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_locate_config cfg;
    se_error err;
    double *resp = NULL, *inj = NULL, *p = NULL, energy = 0.0;
    size_t n, np = 0, i, b, e;
    int ok = 0;
    memset(&rec, 0, sizeof rec);
    memset(res, 0, sizeof *res);
    if (!CHECK(se_pulse_parse("hann:4ms", &rec.pulse, &err) == SE_OK) ||
        !CHECK(se_sim_uniform_line(v, refl, nr, 100.0, 0.0, 0.0, 0.0, &ifs, &line, &err) == SE_OK))
        return 0;
    rec.rate_hz = fs;
    rec.duration_s = 0.8;
    rec.pulse_start_s = 8e-3;
    rec.seed = 11;
    if (CHECK(se_pulse_render(&rec.pulse, fs, &p, &np, &err) == SE_OK))
        for (i = 0; i < np; i++)
            energy += p[i] * p[i];
    free(p);
    rec.noise_rms = sqrt(energy) / pow(10.0, 40.0 / 20.0);
    n = se_sim_frames(&rec);
    resp = malloc(n * sizeof *resp);
    inj = malloc(n * sizeof *inj);
    if (CHECK(resp != NULL && inj != NULL) &&
        CHECK(se_simulate(&line, &rec, resp, inj, n, &err) == SE_OK) &&
        CHECK(se_pulse_support(inj, n, &b, &e, &err) == SE_OK)) {
        se_locate_config_init(&cfg);
        cfg.speed_m_s = v;
        cfg.reference = inj + b;
        cfg.reference_length = e - b;
        cfg.reference_offset = b;
        cfg.reference_kind = SE_REF_CHANNEL;
        cfg.max_events = max_events;
        ok = CHECK(se_locate(resp, n, fs, &cfg, res, &err) == SE_OK);
        if (!ok)
            fprintf(stderr, "  %s\n", err.message);
    }
    free(resp);
    free(inj);
    free(ifs);
    return ok;
}

static void test_splice_clamp(void)
{
    se_sim_reflector one = {40.0, -0.8}, two[2];
    se_locate_result res;
    double sep, q = 0.5 * 141.4 / 48000.0 * 0.5; /* half a lattice cell of the simulator, m [calc] */
    size_t i;
    if (!ov_locate(&one, 1, 0, &res))
        return;
    sep = 0.6 * 2.0 * res.resolution_m;
    se_locate_result_free(&res);
    two[0].distance_m = 40.0;
    two[0].reflection = 0.2;
    two[1].distance_m = 40.0 + sep;
    two[1].reflection = -0.8;
    if (!ov_locate(two, 2, 0, &res))
        return;
    printf("splice at 40 m, clamp %.3f m further (resolution %.3f m): %zu events\n", sep,
           res.resolution_m, res.n_events);
    for (i = 0; i < res.n_events; i++)
        printf("  %.4f m +- %.4f (1 sd %.4f m), r %+.3f%s%s\n", res.events[i].distance_m,
               res.events[i].distance_uncertainty_m,
               0.5 * 141.4 * res.events[i].delay_uncertainty_s, res.events[i].reflection,
               res.events[i].fitted ? ", fitted" : "", res.events[i].multiple ? ", multiple" : "");
    /* the primaries come first; the peg-leg between them (2 t_2 - t_1, about -r_1 r_2^2) may
     * follow, labelled a multiple */
    for (i = 2; i < res.n_events; i++)
        CHECK(res.events[i].multiple);
    if (CHECK(res.n_events >= 2)) {
        for (i = 0; i < 2; i++) {
            const se_event *ev = &res.events[i];
            CHECK(!ev->multiple);
            double sd = 0.5 * 141.4 * ev->delay_uncertainty_s;
            CHECK(ev->polarity == (two[i].reflection > 0 ? 1 : -1));
            CHECK_CLOSE(ev->distance_m, two[i].distance_m, 4.0 * sd + q, "splice/clamp distance, m");
        }
        /* the clamp seen through the splice: -0.8 (1 - 0.2^2) = -0.768; at the discontinuity
         * the two-way transmission is removed [calc, REFERENCE.md 1] */
        CHECK_CLOSE(res.events[1].reflection_at_discontinuity, -0.8,
                    4.0 * res.events[1].reflection_uncertainty + 0.01,
                    "clamp coefficient at the discontinuity");
    }
    se_locate_result_free(&res);
}

static void test_dead_zone(void)
{
    se_sim_reflector far = {40.0, -0.3}, two[2];
    se_locate_result res;
    double dz, q = 0.5 * 141.4 / 48000.0 * 0.5; /* half a lattice cell, m [calc] */
    if (!ov_locate(&far, 1, 0, &res))
        return;
    dz = res.dead_zone_m;
    CHECK(res.n_dead_zone_events == 0);
    se_locate_result_free(&res);
    two[0].distance_m = 0.5 * dz;
    two[0].reflection = 0.4;
    two[1] = far;
    if (!ov_locate(two, 2, 0, &res))
        return;
    printf("dead zone %.3f m, reflector at %.3f m: %zu dead-zone events, %zu events\n", dz,
           0.5 * dz, res.n_dead_zone_events, res.n_events);
    if (CHECK(res.n_dead_zone_events == 1)) {
        const se_event *ev = &res.dead_zone_events[0];
        printf("  %.4f m, r %+.3f, sd %.4f m\n", ev->distance_m, ev->reflection,
               0.5 * 141.4 * ev->delay_uncertainty_s);
        CHECK(ev->in_dead_zone && ev->low_confidence && ev->polarity == 1);
        CHECK_CLOSE(ev->distance_m, 0.5 * dz, 4.0 * 0.5 * 141.4 * ev->delay_uncertainty_s + q,
                    "dead-zone echo distance, m");
    }
    CHECK(res.n_events >= 1 && res.events[0].distance_m > dz);
    se_locate_result_free(&res);
}

static void test_survey(void)
{
    const double v = 141.4, fs = 48000.0;
    se_sim_reflector rf[2] = {{40.0, 0.2}, {40.283, -0.8}};
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    double *r1 = NULL, *p1 = NULL, *x = NULL, *pil = NULL, *pp = NULL, energy = 0.0, sigma, q;
    size_t n1, n, np = 0, i, k, b, e, shots = 4, primaries = 0;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);

    memset(&rec, 0, sizeof rec);
    memset(&res, 0, sizeof res);
    q = 0.5 * v / fs * 0.5;
    if (!CHECK(rng != NULL) || !CHECK(se_pulse_parse("hann:4ms", &rec.pulse, &err) == SE_OK) ||
        !CHECK(se_sim_uniform_line(v, rf, 2, 400.0, 0.0, 0.5, 0.0, &ifs, &line, &err) == SE_OK))
        goto out;
    rec.rate_hz = fs;
    rec.duration_s = 1.2;
    rec.pulse_start_s = 8e-3;
    n1 = se_sim_frames(&rec);
    n = shots * n1;
    r1 = malloc(n1 * sizeof *r1);
    p1 = malloc(n1 * sizeof *p1);
    x = malloc(n * sizeof *x);
    pil = malloc(n * sizeof *pil);
    if (!CHECK(r1 != NULL && p1 != NULL && x != NULL && pil != NULL) ||
        !CHECK(se_simulate(&line, &rec, r1, p1, n1, &err) == SE_OK) ||
        !CHECK(se_pulse_render(&rec.pulse, fs, &pp, &np, &err) == SE_OK) ||
        !CHECK(se_pulse_support(p1, n1, &b, &e, &err) == SE_OK))
        goto out;
    for (i = 0; i < np; i++)
        energy += pp[i] * pp[i];
    sigma = sqrt(energy) / pow(10.0, 30.0 / 20.0);
    gsl_rng_set(rng, 5150);
    for (k = 0; k < shots; k++)
        for (i = 0; i < n1; i++) {
            x[k * n1 + i] = r1[i] + gsl_ran_gaussian(rng, sigma);
            pil[k * n1 + i] = p1[i];
        }
    se_locate_config_init(&cfg);
    cfg.speed_m_s = v;
    cfg.source_reflection = NAN; /* not given: estimate */
    cfg.reference = p1 + b;
    cfg.reference_length = e - b;
    cfg.reference_offset = b;
    cfg.reference_kind = SE_REF_CHANNEL;
    cfg.pilot = pil;
    if (!CHECK(se_locate(x, n, fs, &cfg, &res, &err) == SE_OK)) {
        fprintf(stderr, "  %s\n", err.message);
        goto out;
    }
    printf("survey: %zu of %zu taps stacked (gain %.2f dB), r_s %.3f%s, %zu events\n",
           res.shots_used, res.shots_found, res.stack_gain_db, res.source_reflection,
           res.source_reflection_estimated ? " estimated" : "", res.n_events);
    CHECK(res.shots_found == shots && res.shots_used >= shots - 1);
    CHECK(res.source_reflection_estimated);
    CHECK_CLOSE(res.source_reflection, 0.5, 0.1, "source-end coefficient estimated");
    for (i = 0; i < res.n_events; i++) {
        const se_event *ev = &res.events[i];
        printf("  %.3f m r %+.4f%s\n", ev->distance_m, ev->reflection,
               ev->multiple ? " multiple" : "");
        if (ev->multiple)
            continue;
        if (primaries < 2) {
            double sd = 0.5 * v * ev->delay_uncertainty_s;
            CHECK_CLOSE(ev->distance_m, rf[primaries].distance_m, 4.0 * sd + q, "survey: primary, m");
            CHECK(ev->polarity == (rf[primaries].reflection > 0.0 ? 1 : -1));
        }
        primaries++;
    }
    CHECK(primaries == 2);
    CHECK(res.n_dead_zone_events == 0);
out:
    se_locate_result_free(&res);
    gsl_rng_free(rng);
    free(pp);
    free(r1);
    free(p1);
    free(x);
    free(pil);
    free(ifs);
}

/* max_events holds after the refit: two same-sign echoes (0.25, 0.3) 0.5 main lobe apart, found as
 * two events uncapped; with max_events 1 one event comes out, the larger. (This does not make the
 * refit add echoes beyond the cap, which the issue reports from a CLI run: se_keep_largest in
 * locate.c cuts what the refit returns to max_events either way.) */
static void test_max_events(void)
{
    se_sim_reflector one = {20.0, -0.8}, refl[2];
    se_locate_result res, all;
    double sep;
    if (!ov_locate(&one, 1, 0, &res))
        return;
    sep = 0.5 * 2.0 * res.resolution_m;
    se_locate_result_free(&res);
    refl[0].distance_m = 30.0;
    refl[0].reflection = 0.25;
    refl[1].distance_m = 30.0 + sep;
    refl[1].reflection = 0.3;
    if (!ov_locate(refl, 2, 0, &all))
        return;
    if (!ov_locate(refl, 2, 1, &res)) {
        se_locate_result_free(&all);
        return;
    }
    printf("two same-sign echoes 0.5 main lobe apart: %zu events uncapped, %zu with max_events 1 "
           "(%.3f m, r %+.3f)\n",
           all.n_events, res.n_events, res.n_events ? res.events[0].distance_m : NAN,
           res.n_events ? res.events[0].reflection : NAN);
    CHECK(all.n_events >= 2); /* the refit did split: the cap has work to do */
    if (CHECK(res.n_events == 1)) {
        CHECK_CLOSE(res.events[0].distance_m, refl[1].distance_m, 0.25 * sep, "the larger echo kept");
    }
    se_locate_result_free(&all);
    se_locate_result_free(&res);
}

int main(void)
{
    test_model();
    test_two_echoes();
    test_one_echo();
    test_splice_clamp();
    test_dead_zone();
    test_survey();
    test_max_events();
    return se_test_done("test_overlap");
}
