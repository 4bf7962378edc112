/* strandecho benchmark: stacking gain versus the number of shots (stack.h). Shots of a Ricker
 * pulse (f0 = 0.05 cycle/sample) with two echoes, 2000 samples apart at random fractional
 * onsets, white noise 0.05; the gain reported by se_stack_shots and the gain against the
 * noise-free shot (placed at the stack's own time origin: the shots are aligned on their estimated
 * onsets, so the stack is delayed by the mean onset error), each averaged over the repetitions,
 * against 10 log10 N (REFERENCE.md 2). The residual misalignment between shots (onset errors of
 * about 0.05 sample) is part of the true gain.
 *
 * Usage: bench_stacking [--reps R]  (default 20) */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/stack.h"

#define BS_PI 3.14159265358979323846
#define BS_HALF 40
#define BS_M (2 * BS_HALF + 1)

static double bs_ricker(double t);
static double bs_shot(double t);

static double bs_ricker(double t)
{
    double u = BS_PI * 0.05 * t;
    return (1.0 - 2.0 * u * u) * exp(-u * u);
}

/* noise-free shot at t samples after its onset */
static double bs_shot(double t)
{
    return bs_ricker(t - BS_HALF) + 0.3 * bs_ricker(t - 500.0 - BS_HALF) -
           0.2 * bs_ricker(t - 900.0 - BS_HALF);
}

int main(int argc, char **argv)
{
    static const size_t shots[7] = {2, 4, 8, 16, 32, 64, 128};
    size_t reps = 20, k, r, i, j;
    double pulse[BS_M], sigma = 0.05;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    int a;
    for (a = 1; a < argc; a++) {
        if (strcmp(argv[a], "--reps") == 0 && a + 1 < argc)
            reps = (size_t)strtoul(argv[++a], NULL, 10);
        else {
            fprintf(stderr, "usage: bench_stacking [--reps R]\n");
            return 2;
        }
    }
    if (rng == NULL || reps == 0)
        return 1;
    gsl_rng_set(rng, 99);
    for (j = 0; j < BS_M; j++)
        pulse[j] = bs_ricker((double)j - BS_HALF);
    printf("# command: bench_stacking --reps %zu\n", reps);
    printf("%6s %10s %12s %12s %12s\n", "shots", "used", "gain_rep_dB", "gain_true_dB", "expected_dB");
    for (k = 0; k < 7; k++) {
        size_t N = shots[k], n = N * 2000 + 1200, used = 0;
        double grep = 0.0, gtrue = 0.0;
        double *x = malloc(n * sizeof *x), *on = malloc(N * sizeof *on);
        if (x == NULL || on == NULL)
            return 1;
        for (r = 0; r < reps; r++) {
            se_stack_config cfg;
            se_stack_result res;
            se_error err;
            double e2 = 0.0, shift;
            for (i = 0; i < N; i++)
                on[i] = 200.0 + 2000.0 * (double)i + 7.0 * gsl_rng_uniform(rng);
            for (j = 0; j < n; j++) {
                double v = 0.0;
                for (i = 0; i < N; i++)
                    if ((double)j > on[i] - 60.0 && (double)j < on[i] + 1100.0)
                        v += bs_shot((double)j - on[i]);
                x[j] = v + gsl_ran_gaussian(rng, sigma);
            }
            se_stack_config_init(&cfg);
            cfg.pulse = pulse;
            cfg.pulse_length = BS_M;
            if (se_stack_shots(x, n, &cfg, &res, &err) != SE_OK || res.stacked == NULL) {
                fprintf(stderr, "bench_stacking: no stack for %zu shots\n", N);
                return 1;
            }
            /* the stack's time origin: the first used shot's estimated onset; the shots are
             * aligned on their own estimates, so the stack sits at the mean onset error */
            {
                double me = 0.0;
                size_t nu = 0;
                for (i = 0; i < res.n_found && i < N; i++)
                    if (res.status[i] == SE_SHOT_USED) {
                        me += res.onsets[i] - on[i];
                        nu++;
                    }
                shift = nu ? me / (double)nu : 0.0;
            }
            for (j = 0; j < res.length; j++) {
                /* stack[j] = x(onset_est - pre + j): the shot at j - pre + (onset_est - onset) */
                double t = (double)j - (double)res.pre + shift;
                double d = res.stacked[j] - bs_shot(t);
                e2 += d * d;
            }
            used += res.n_used;
            grep += res.gain_db;
            gtrue += 20.0 * log10(sigma / sqrt(e2 / (double)res.length));
            se_stack_result_free(&res);
        }
        printf("%6zu %10.2f %12.2f %12.2f %12.2f\n", N, (double)used / (double)reps,
               grep / (double)reps, gtrue / (double)reps, 10.0 * log10((double)N));
        free(x);
        free(on);
    }
    gsl_rng_free(rng);
    return 0;
}
