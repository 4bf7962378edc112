/* strandecho tests: false alarms of the whole locator on noise-only records.
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
 * source. Seeds fixed. */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/locate.h"
#include "testutil.h"

#define FA_PI 3.14159265358979323846
#define FA_N 8192
#define FA_M 17
#define FA_AT 100

static size_t fa_run(gsl_rng *rng, double per_record, size_t records, size_t *with_alarm);

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

    gsl_rng_free(rng);
    return se_test_done("test_false_alarms");
}
