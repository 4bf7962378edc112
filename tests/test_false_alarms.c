/* strandecho tests: nothing reported that is not there. False alarms of the whole locator on
 * noise-only records, and multiples never promoted to faults.
 *
 * Records hold only the outgoing pulse (a Hann pulse of 17 samples, direct arrival at 40 dB
 * above the noise per sample) and white Gaussian noise: every event se_locate reports is false.
 * The threshold is Rice's k sigma for cfg.false_alarms per record (S.O. Rice, BSTJ 23-24,
 * 1944-45; REFERENCE.md 2 "Detection"), sigma the MAD of the matched-filter output (Rousseeuw &
 * Croux, JASA 88, 1993).
 *  - stated 1 per record, 1000 records: the total count is Poisson with mean 1000 (sd 31.6);
 *  - stated 0.1 per record, 3000 records: the number of records with a false alarm is binomial
 *    with p = 1 - exp(-0.1) = 0.095 (mean 285.5, sd 16.1).
 * Tolerance: 3 standard deviations plus 15 % of the mean for what Rice's upcrossing count leaves
 * out (peaks against crossings, discrete lags, the scatter of the MAD sigma): common practice, no
 * source. Seeds fixed.
 *
 * Multiples: a two-reflector line (r = -0.3 at 30 m, +0.25 at 70 m, the far end matched) with a
 * free source end (r_s = +1) at 50 dB, simulated with every multiple by the lattice model
 * (simulate.h). Every event that is not at one of the two primaries must be labelled a multiple,
 * neither primary may be (M.M. Backus, Geophysics 24(2), 1959: source-end multiples at t_i + t_j
 * with r_s r_i r_j; REFERENCE.md 2), with r_s given and with r_s estimated from the data (then
 * within 0.1 of +1: tolerance common practice, no source). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/detect.h"
#include "strandecho/locate.h"
#include "strandecho/pulse.h"
#include "strandecho/simulate.h"
#include "testutil.h"

#define FA_PI 3.14159265358979323846
#define FA_N 8192
#define FA_M 17
#define FA_AT 100

static size_t fa_run(gsl_rng *rng, double per_record, size_t records, size_t *with_alarm);
static void test_multiples(double given_rs);

/* Total false events over the records; *with_alarm: records with at least one. */
static size_t fa_run(gsl_rng *rng, double per_record, size_t records, size_t *with_alarm)
{
    double *x = malloc(FA_N * sizeof *x), pulse[FA_M];
    size_t rec, i, total = 0;
    se_locate_config cfg;
    se_error err;

    *with_alarm = 0;
    if (!CHECK(x != NULL))
        return 0;
    for (i = 0; i < FA_M; i++)
        pulse[i] = 0.5 * (1.0 - cos(2.0 * FA_PI * (double)(i + 1) / (FA_M + 1)));
    se_locate_config_init(&cfg);
    cfg.speed_m_s = 100.0;
    cfg.false_alarms = per_record;
    cfg.reference = pulse;
    cfg.reference_length = FA_M;
    cfg.reference_kind = SE_REF_SYNTHETIC;
    cfg.max_events = 256;
    for (rec = 0; rec < records; rec++) {
        se_locate_result res;
        for (i = 0; i < FA_N; i++)
            x[i] = gsl_ran_gaussian(rng, 0.01);
        for (i = 0; i < FA_M; i++)
            x[FA_AT + i] += pulse[i];
        if (!CHECK(se_locate(x, FA_N, 1000.0, &cfg, &res, &err) == SE_OK)) {
            fprintf(stderr, "  %s\n", err.message);
            break;
        }
        total += res.n_events;
        *with_alarm += res.n_events > 0;
        se_locate_result_free(&res);
    }
    free(x);
    return total;
}

/* given_rs: the source-end coefficient told to se_locate, NaN = estimate it. */
static void test_multiples(double given_rs)
{
    const double v = 141.4, fs = 48000.0;
    se_sim_reflector refl[2] = {{30.0, -0.3}, {70.0, 0.25}};
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    double *resp = NULL, *inj = NULL, *p = NULL, energy = 0.0;
    size_t n, np = 0, i, b, e, nmult = 0;
    int found[2] = {0, 0};

    memset(&rec, 0, sizeof rec);
    memset(&res, 0, sizeof res);
    if (!CHECK(se_pulse_parse("hann:4ms", &rec.pulse, &err) == SE_OK) ||
        !CHECK(se_sim_uniform_line(v, refl, 2, 400.0, 0.0, 1.0, 0.0, &ifs, &line, &err) == SE_OK))
        return;
    rec.rate_hz = fs;
    rec.duration_s = 3.0;
    rec.pulse_start_s = 8e-3;
    rec.seed = 4;
    if (CHECK(se_pulse_render(&rec.pulse, fs, &p, &np, &err) == SE_OK))
        for (i = 0; i < np; i++)
            energy += p[i] * p[i];
    free(p);
    rec.noise_rms = sqrt(energy) / pow(10.0, 50.0 / 20.0);
    n = se_sim_frames(&rec);
    resp = malloc(n * sizeof *resp);
    inj = malloc(n * sizeof *inj);
    if (!CHECK(resp != NULL && inj != NULL) ||
        !CHECK(se_simulate(&line, &rec, resp, inj, n, &err) == SE_OK) ||
        !CHECK(se_pulse_support(inj, n, &b, &e, &err) == SE_OK))
        goto out;
    se_locate_config_init(&cfg);
    cfg.speed_m_s = v;
    cfg.source_reflection = given_rs;
    cfg.reference = inj + b;
    cfg.reference_length = e - b;
    cfg.reference_offset = b;
    cfg.reference_kind = SE_REF_CHANNEL;
    if (!CHECK(se_locate(resp, n, fs, &cfg, &res, &err) == SE_OK)) {
        fprintf(stderr, "  %s\n", err.message);
        goto out;
    }
    for (i = 0; i < res.n_events; i++) {
        const se_event *ev = &res.events[i];
        int primary = -1, q;
        char what[160];
        for (q = 0; q < 2; q++)
            if (fabs(ev->distance_m - refl[q].distance_m) < 3.0 * res.resolution_m)
                primary = q;
        if (primary >= 0) {
            found[primary] = 1;
            snprintf(what, sizeof what, "primary at %.2f m labelled a multiple", ev->distance_m);
            se_check(!ev->multiple, __FILE__, __LINE__, what);
        } else {
            nmult++;
            snprintf(what, sizeof what, "event at %.2f m (r %+.4f) is not labelled a multiple",
                     ev->distance_m, ev->reflection);
            se_check(ev->multiple, __FILE__, __LINE__, what);
        }
    }
    printf("two reflectors, free source end (r_s %s): %zu events, %zu multiples, r_s used %.4f%s\n",
           isnan(given_rs) ? "estimated" : "given", res.n_events, nmult, res.source_reflection,
           res.source_reflection_estimated ? " (estimated)" : "");
    CHECK(found[0] && found[1]);
    CHECK(nmult >= 3); /* t1 + t1, t1 + t2, t2 + t2 at least stand above the threshold */
    if (isnan(given_rs)) {
        CHECK(res.source_reflection_estimated);
        CHECK_CLOSE(res.source_reflection, 1.0, 0.1, "source-end coefficient estimated from the data");
    }
out:
    se_locate_result_free(&res);
    free(resp);
    free(inj);
    free(ifs);
}

/* Non-stationary noise: thresholds that follow it (cfar.c, detect.h
 * se_noise_profile; se_locate_config.noise_tracking).
 *
 * Records: a Hann pulse of 17 samples (the outgoing pulse at sample 100) and white Gaussian noise
 * whose level grows tenfold halfway along the record (0.01 then 0.1 per sample).
 *  - False alarms: noise-only records at a stated 1 false alarm per record. The threshold is Rice's
 *    k sigma (S.O. Rice, BSTJ 23-24, 1944-45; REFERENCE.md 2 "Detection") with sigma the local MAD
 *    (Rousseeuw & Croux, JASA 88, 1993), so each half should see about half the stated count: the
 *    count per half over R records is Poisson with mean R/2. Tolerance 3 standard deviations plus
 *    15 % of the mean (as tests/test_false_alarms.c) (Rice's crossings against peaks, the MAD's scatter, and the block that holds
 *    the change of level, held to the loud level: it takes about 7 % of the quiet half's lags):
 *    common practice, no source. With one threshold for the record the loud half must see far more
 *    (the check that the test can fail).
 *  - Sensitivity: an echo 9 sigma (of the quiet noise) high in the quiet half is found in every
 *    record with noise tracking; with one threshold (about 2.3 times the quiet sigma, the MAD of
 *    the mixture of both halves: [calc]) it is lost in most.
 *  - Stationary noise: noise tracking changes nothing (events identical, noise_varies 0).
 *  - The profile from given block sigmas: a step inside a block holds that block to the louder
 *    level; stationary blocks give no profile.
 * Seeds fixed. */
#define NP_N 65536
#define NP_M 17
#define NP_AT 100
#define NP_QUIET 0.01
#define NP_LOUD 0.1

static void np_record(gsl_rng *rng, double *x, const double *pulse, double echo_lag, double echo_a,
                      double late);
static int np_locate(const double *x, const double *pulse, int tracking, double fa,
                     se_locate_result *res);
static void np_false_alarms(gsl_rng *rng, const double *pulse);
static void np_weak_echo(gsl_rng *rng, const double *pulse);
static void np_stationary(gsl_rng *rng, const double *pulse);
static void np_blocks(void);

/* x [size: NP_N]: the pulse at NP_AT, an echo (echo_a > 0) at integer lag echo_lag after it, noise
 * NP_QUIET in the first half and `late` in the second. */
static void np_record(gsl_rng *rng, double *x, const double *pulse, double echo_lag, double echo_a,
                      double late)
{
    size_t i;
    for (i = 0; i < NP_N; i++)
        x[i] = gsl_ran_gaussian(rng, i < NP_N / 2 ? NP_QUIET : late);
    for (i = 0; i < NP_M; i++) {
        x[NP_AT + i] += pulse[i];
        if (echo_a > 0.0)
            x[NP_AT + (size_t)echo_lag + i] += echo_a * pulse[i];
    }
}

static int np_locate(const double *x, const double *pulse, int tracking, double fa,
                     se_locate_result *res)
{
    se_locate_config cfg;
    se_error err;
    se_locate_config_init(&cfg);
    cfg.speed_m_s = 100.0;
    cfg.false_alarms = fa;
    cfg.reference = pulse;
    cfg.reference_length = NP_M;
    cfg.reference_kind = SE_REF_SYNTHETIC;
    cfg.max_events = 256;
    cfg.noise_tracking = tracking;
    if (!CHECK(se_locate(x, NP_N, 1000.0, &cfg, res, &err) == SE_OK)) {
        fprintf(stderr, "  %s\n", err.message);
        return 0;
    }
    return 1;
}

static void np_false_alarms(gsl_rng *rng, const double *pulse)
{
    const size_t records = 300;
    double *x = malloc(NP_N * sizeof *x);
    size_t rec, i, quiet[2] = {0, 0}, loud[2] = {0, 0}, varies = 0;
    double mean = 0.5 * (double)records, tol = 3.0 * sqrt(mean) + 0.15 * mean;
    int t;
    if (!CHECK(x != NULL))
        return;
    for (rec = 0; rec < records; rec++) {
        np_record(rng, x, pulse, 0.0, 0.0, NP_LOUD);
        for (t = rec < 4 ? 0 : 1; t < 2; t++) { /* one threshold: 4 records (they flood) */
            se_locate_result res;
            if (!np_locate(x, pulse, t, 1.0, &res))
                break;
            for (i = 0; i < res.n_events; i++) {
                /* the event's lag in x: NP_AT + lag; the noise changes at NP_N / 2 */
                if ((double)NP_AT + res.events[i].lag_samples < (double)(NP_N / 2))
                    quiet[t]++;
                else
                    loud[t]++;
            }
            varies += t == 1 && res.noise_varies;
            se_locate_result_free(&res);
        }
    }
    printf("noise x10 halfway, stated 1 per record, %zu records: tracking %zu quiet + %zu loud "
           "(expected %.0f +- %.0f each); one threshold, first 4 records: %zu quiet + %zu loud\n",
           records, quiet[1], loud[1], mean, tol, quiet[0], loud[0]);
    CHECK(varies == records);
    CHECK(fabs((double)quiet[1] - mean) <= tol);
    CHECK(fabs((double)loud[1] - mean) <= tol);
    CHECK((double)loud[0] > 4.0 * 100.0); /* one threshold, 4 records: the loud half floods */
    free(x);
}

static void np_weak_echo(gsl_rng *rng, const double *pulse)
{
    const size_t records = 30;
    double *x = malloc(NP_N * sizeof *x), es = 0.0, a;
    size_t rec, i, found[2] = {0, 0};
    int t;
    if (!CHECK(x != NULL))
        return;
    for (i = 0; i < NP_M; i++)
        es += pulse[i] * pulse[i];
    /* peak of the matched filter over its noise: a sqrt(E_s) / sigma_x = 9 */
    a = 9.0 * NP_QUIET / sqrt(es);
    for (rec = 0; rec < records; rec++) {
        np_record(rng, x, pulse, 12000.0, a, NP_LOUD);
        for (t = rec < 10 ? 0 : 1; t < 2; t++) { /* one threshold: 10 records (they flood) */
            se_locate_result res;
            if (!np_locate(x, pulse, t, 0.01, &res))
                break;
            for (i = 0; i < res.n_events; i++)
                if (fabs(res.events[i].lag_samples - 12000.0) < 2.0 &&
                    fabs(res.events[i].reflection - a) < 0.5 * a)
                    found[t]++;
            if (t == 1 && rec == 0)
                printf("quiet half: noise %.3g..%.3g, record %.3g, echo a %.4f at snr %.1f dB\n",
                       res.noise_level_min, res.noise_level_max, res.noise_level, a,
                       res.n_events > 0 ? res.events[0].snr_db : NAN);
            se_locate_result_free(&res);
        }
    }
    printf("echo 9 sigma high in the quiet half, %zu records: found %zu with tracking, %zu of the "
           "first 10 with one threshold\n",
           records, found[1], found[0]);
    CHECK(found[1] == records);
    CHECK(found[0] <= 2);
    free(x);
}

static void np_stationary(gsl_rng *rng, const double *pulse)
{
    double *x = malloc(NP_N * sizeof *x);
    size_t rec, i, same = 0;
    const size_t records = 10;
    if (!CHECK(x != NULL))
        return;
    for (rec = 0; rec < records; rec++) {
        se_locate_result a, b;
        int ok = 1;
        np_record(rng, x, pulse, 3000.0 + 977.0 * (double)rec, 0.2, NP_QUIET);
        if (!np_locate(x, pulse, 0, 1.0, &a))
            break;
        if (!np_locate(x, pulse, 1, 1.0, &b)) {
            se_locate_result_free(&a);
            break;
        }
        ok = a.n_events == b.n_events && !b.noise_varies && isnan(b.noise_level_min);
        for (i = 0; ok && i < a.n_events; i++)
            ok = a.events[i].lag_samples == b.events[i].lag_samples &&
                 a.events[i].reflection == b.events[i].reflection &&
                 a.events[i].snr_db == b.events[i].snr_db;
        same += ok;
        se_locate_result_free(&a);
        se_locate_result_free(&b);
    }
    printf("stationary noise: %zu of %zu records identical with and without tracking\n", same,
           records);
    CHECK(same == records);
    free(x);
}

static void np_blocks(void)
{
    /* levels 1 for six blocks, a step inside block 6 (its parts show 10), 10 after */
    const double raw[12] = {1.0, 1.02, 0.98, 1.01, 0.99, 1.0, 1.1, 10.0, 9.9, 10.1, 10.0, 10.0};
    const double hi[12] = {1.05, 1.06, 1.03, 1.05, 1.04, 1.05, 10.0, 10.4, 10.3, 10.5, 10.4, 10.4};
    const double flat[5] = {1.0, 1.3, 0.9, 1.1, 1.0};
    se_noise_profile p;
    se_error err;
    int varies = -1;
    CHECK(se_noise_block_length(17) == 4352);
    CHECK(se_noise_block_length(4) == 4096);
    CHECK(se_noise_block_count(100, 100 + 3 * 4096 + 17, 4096) == 3);
    if (!CHECK(se_noise_profile_from_blocks(raw, hi, 12, 50, 100, 10, 0.0, &p, &varies, &err) ==
               SE_OK))
        return;
    CHECK(varies == 1);
    CHECK_CLOSE(se_noise_profile_sigma(&p, 55.0), 1.0, 0.02, "first run level");
    CHECK_CLOSE(se_noise_profile_sigma(&p, 50.0 + 6 * 100 + 50), 10.0, 1e-12, "block with the step");
    CHECK_CLOSE(se_noise_profile_sigma(&p, 50.0 + 5 * 100 + 50), 1.0, 0.02, "before the step");
    /* within the guard of the edge to the step's block: the louder side */
    CHECK_CLOSE(se_noise_profile_sigma(&p, 50.0 + 6 * 100 - 5), 10.0, 1e-12, "guard before the step");
    CHECK_CLOSE(se_noise_profile_sigma(&p, 50.0 + 9 * 100 + 50), 10.0, 0.1, "second run level");
    CHECK_CLOSE(se_noise_profile_sigma(&p, 1e9), se_noise_profile_sigma(&p, 50.0 + 11 * 100 + 50),
                0.0, "past the range");
    se_noise_profile_free(&p);
    CHECK(se_noise_profile_from_blocks(flat, flat, 5, 0, 100, 10, 0.0, &p, &varies, &err) == SE_OK);
    CHECK(varies == 0 && p.sigma == NULL);
    CHECK(se_noise_profile_from_blocks(raw, NULL, 12, 0, 100, 10, 0.0, &p, &varies, &err) ==
          SE_ERR_ARG);
}

int main(void)
{
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    size_t total, with, i;
    double mean, sd, p;
    if (!CHECK(rng != NULL))
        return se_test_done("test_false_alarms");
    gsl_rng_set(rng, 31337);

    total = fa_run(rng, 1.0, 1000, &with);
    mean = 1000.0;
    sd = sqrt(mean);
    printf("stated 1 per record, 1000 records: %zu false events (expected %.0f +- %.0f)\n", total,
           mean, 3.0 * sd + 0.15 * mean);
    CHECK(fabs((double)total - mean) <= 3.0 * sd + 0.15 * mean);

    total = fa_run(rng, 0.1, 3000, &with);
    p = 1.0 - exp(-0.1);
    mean = 3000.0 * p;
    sd = sqrt(3000.0 * p * (1.0 - p));
    printf("stated 0.1 per record, 3000 records: %zu records with a false event, %zu events "
           "(expected %.1f +- %.1f)\n",
           with, total, mean, 3.0 * sd + 0.15 * mean);
    CHECK(fabs((double)with - mean) <= 3.0 * sd + 0.15 * mean);

    test_multiples(1.0);
    test_multiples(NAN);

    /* non-stationary noise, its own seed */
    gsl_rng_set(rng, 2718);
    {
        double pulse[NP_M];
        for (i = 0; i < NP_M; i++)
            pulse[i] = 0.5 * (1.0 - cos(2.0 * FA_PI * (double)(i + 1) / (NP_M + 1)));
        np_blocks();
        np_stationary(rng, pulse);
        np_weak_echo(rng, pulse);
        np_false_alarms(rng, pulse);
    }
    gsl_rng_free(rng);
    return se_test_done("test_false_alarms");
}
