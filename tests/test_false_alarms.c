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

int main(void)
{
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    size_t total, with;
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
    gsl_rng_free(rng);
    return se_test_done("test_false_alarms");
}
