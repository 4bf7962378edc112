/* strandecho benchmark: detection probability of se_locate versus energy SNR at a stated
 * false-alarm count per record, against Pd = Q(k - sqrt(eta)) for a threshold of k sigma on the
 * matched-filter output (a known-delay approximation, S.M. Kay, Fundamentals of Statistical Signal
 * Processing Vol. II, 1998, ch. 4), and the false alarms measured on noise-only records.
 *
 * Records: 8192 samples at 1 kHz, the outgoing pulse (Hann, 17 samples) at sample 100, white
 * Gaussian noise of 0.01, one echo at lag 3000.37 of amplitude A for eta = A^2 E_s / sigma^2. A
 * detection is an event within 2 samples of the echo; other/rec counts the events elsewhere (false
 * alarms, and near the threshold the echo itself found on a wrong lobe).
 *
 * Usage: bench_detection [--records N] [--false-alarms F]  (defaults 500, 0.01) */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/locate.h"

#define BD_PI 3.14159265358979323846
#define BD_N 8192
#define BD_M 17

static double bd_hann(double t);

/* Hann of BD_M samples at fractional start: value at t samples after its start. */
static double bd_hann(double t)
{
    if (t <= -1.0 || t >= (double)BD_M)
        return 0.0;
    return 0.5 * (1.0 - cos(2.0 * BD_PI * (t + 1.0) / (BD_M + 1)));
}

int main(int argc, char **argv)
{
    size_t records = 500, i, rec, q;
    double fa = 0.01, pulse[BD_M], es = 0.0, sigma = 0.01;
    double *x = malloc(BD_N * sizeof *x);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    se_locate_config cfg;
    se_error err;
    int a;
    for (a = 1; a < argc; a++) {
        if (strcmp(argv[a], "--records") == 0 && a + 1 < argc)
            records = (size_t)strtoul(argv[++a], NULL, 10);
        else if (strcmp(argv[a], "--false-alarms") == 0 && a + 1 < argc)
            fa = atof(argv[++a]);
        else {
            fprintf(stderr, "usage: bench_detection [--records N] [--false-alarms F]\n");
            return 2;
        }
    }
    if (x == NULL || rng == NULL || records == 0)
        return 1;
    gsl_rng_set(rng, 4711);
    for (i = 0; i < BD_M; i++) {
        pulse[i] = bd_hann((double)i);
        es += pulse[i] * pulse[i];
    }
    se_locate_config_init(&cfg);
    cfg.speed_m_s = 100.0;
    cfg.false_alarms = fa;
    cfg.reference = pulse;
    cfg.reference_length = BD_M;
    cfg.reference_kind = SE_REF_SYNTHETIC;
    cfg.stacking = SE_STACKING_OFF;
    printf("# command: bench_detection --records %zu --false-alarms %g\n", records, fa);
    printf("%8s %10s %10s %10s %12s\n", "SNR_dB", "Pd", "Pd_theory", "k_sigma", "other/rec");
    for (q = 0; q <= 14; q++) {
        double snr_db = 6.0 + (double)q, eta = pow(10.0, snr_db / 10.0);
        double amp = sqrt(eta) * sigma / sqrt(es), ksum = 0.0;
        size_t hits = 0, falses = 0;
        for (rec = 0; rec < records; rec++) {
            se_locate_result res;
            for (i = 0; i < BD_N; i++)
                x[i] = gsl_ran_gaussian(rng, sigma) + bd_hann((double)i - 100.0) +
                       amp * bd_hann((double)i - 100.0 - 3000.37);
            if (se_locate(x, BD_N, 1000.0, &cfg, &res, &err) != SE_OK) {
                fprintf(stderr, "bench_detection: %s\n", err.message);
                return 1;
            }
            ksum += res.threshold_sigma;
            for (i = 0; i < res.n_events; i++) {
                if (fabs(res.events[i].lag_samples - 3000.37) < 2.0)
                    hits++;
                else
                    falses++;
            }
            se_locate_result_free(&res);
        }
        {
            double k = ksum / (double)records;
            printf("%8.0f %10.3f %10.3f %10.3f %12.4f\n", snr_db, (double)hits / (double)records,
                   gsl_cdf_ugaussian_Q(k - sqrt(eta)), k, (double)falses / (double)records);
        }
    }
    /* noise only */
    {
        size_t total = 0, with = 0, nrec = 4 * records;
        for (rec = 0; rec < nrec; rec++) {
            se_locate_result res;
            for (i = 0; i < BD_N; i++)
                x[i] = gsl_ran_gaussian(rng, sigma) + bd_hann((double)i - 100.0);
            if (se_locate(x, BD_N, 1000.0, &cfg, &res, &err) != SE_OK)
                return 1;
            total += res.n_events;
            with += res.n_events > 0;
            se_locate_result_free(&res);
        }
        printf("noise only: %zu records, %zu false events (%.4f per record, stated %g), %zu records "
               "with one or more\n",
               nrec, total, (double)total / (double)nrec, fa, with);
    }
    free(x);
    gsl_rng_free(rng);
    return 0;
}
