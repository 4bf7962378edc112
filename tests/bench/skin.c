/* Benchmark: delay bias of the plain matched filter against the skin-effect corrected delay
 * (skin.h), versus distance, on one simulated cable: 1 GS/s, velocity factor 0.66, Gaussian pulse
 * (support 16 ns, sigma 2 ns), one reflector r = 0.5, K = 4e-7 s^0.5/m (or argv[1]), noise-free and
 * at a stated noise. Prints the table and the command that made it.
 *   usage: bench_skin [K_s05_per_m [noise_rms]] */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/detect.h"
#include "strandecho/pulse.h"
#include "strandecho/simulate.h"
#include "strandecho/skin.h"

#include "../plain_lag.h"

#define FS 1e9
#define C0 299792458.0

int main(int argc, char **argv)
{
    const double dist[] = {25.0, 50.0, 100.0, 200.0, 300.0, 400.0, 500.0, 700.0};
    const size_t nd = sizeof dist / sizeof dist[0];
    const double v = 0.66 * C0;
    double K = argc > 1 ? atof(argv[1]) : 4e-7, noise = argc > 2 ? atof(argv[2]) : 0.0;
    size_t t;
    printf("# command: bench_skin %g %g   (1 GS/s, vf 0.66, gauss:16ns, r = 0.5, K = %g s^0.5/m, "
           "noise rms %g of the pulse peak, seed 1)\n", K, noise, K, noise);
    printf("# %8s %9s %12s %12s %14s %12s %14s %12s %12s %10s\n", "dist_m", "a2fs", "plain_smp",
           "plain_m", "corr_K_smp", "corr_K_sd", "corr_estK_smp", "estK_sd", "K_est", "K_sd");
    for (t = 0; t < nd; t++) {
        se_sim_reflector rf = {dist[t], 0.5};
        se_sim_interface *ifs = NULL;
        se_sim_line line;
        se_sim_record rec;
        se_sim_arrival *arr = NULL;
        se_skin_config sc;
        se_skin_result sr, sr2;
        se_skin_echo e1, e2;
        se_error err;
        size_t frames, narr = 0, kb, ke, m, j;
        double *x, *pl, truth = NAN, plain, amp = 0.0, tt, a;
        memset(&rec, 0, sizeof rec);
        rec.rate_hz = FS;
        rec.pulse_start_s = 40e-9;
        tt = 2.0 * dist[t] / v;
        rec.duration_s = tt + 1.5e-6 + 80e-9;
        rec.noise_rms = noise;
        rec.seed = 1;
        if (se_pulse_parse("gauss:16ns", &rec.pulse, &err) != SE_OK ||
            se_sim_uniform_line(v, &rf, 1, 1e5, 0.0, 0.0, 0.0, &ifs, &line, &err) != SE_OK) {
            fprintf(stderr, "bench_skin: %s\n", err.message);
            return 1;
        }
        frames = se_sim_frames(&rec);
        x = calloc(frames, sizeof *x);
        pl = calloc(frames, sizeof *pl);
        if (x == NULL || pl == NULL ||
            se_simulate_skin(&line, &rec, K, v, x, pl, frames, &err) != SE_OK ||
            se_sim_arrivals(&line, rec.duration_s, 1.0 / (FS * 1024.0), &arr, &narr, &err) != SE_OK) {
            fprintf(stderr, "bench_skin: %s\n", err.message);
            return 1;
        }
        for (kb = 0; kb < frames && pl[kb] == 0.0; kb++) {
        }
        for (ke = kb; ke < frames && pl[ke] != 0.0; ke++) {
        }
        m = ke - kb;
        for (j = 0; j < narr; j++)
            if (isnan(truth) || fabs(arr[j].time_s - tt) < fabs(truth - tt))
                truth = arr[j].time_s;
        truth = (double)kb + truth * FS;
        /* the plain filter within 64 lags of the truth: as a locator past its dead zone */
        plain = se_plain_lag(x, frames, pl + kb, m, truth, 64, &amp);
        se_skin_config_init(&sc);
        sc.rate_hz = FS;
        sc.lag0 = (double)kb;
        sc.speed_m_s = v;
        sc.k_s05_per_m = K;
        e1.lag = plain;
        e1.amplitude = amp;
        e2 = e1;
        if (se_skin_correct(x, frames, pl + kb, m, &sc, &e1, 1, &sr, &err) != SE_OK) {
            fprintf(stderr, "bench_skin: %s\n", err.message);
            return 1;
        }
        sc.k_s05_per_m = NAN;
        if (se_skin_correct(x, frames, pl + kb, m, &sc, &e2, 1, &sr2, &err) != SE_OK) {
            fprintf(stderr, "bench_skin: %s\n", err.message);
            return 1;
        }
        a = K * v * tt;
        printf("  %8.0f %9.2f %12.4f %12.4f %14.6f %12.6f %14.6f %12.6f %12.5g %10.2g\n", dist[t],
               a * a * FS, plain - truth, (plain - truth) * v / (2.0 * FS), e1.lag - truth, e1.lag_sd,
               e2.lag - truth, e2.lag_sd, sr2.k_s05_per_m, sr2.k_sd);
        free(arr);
        free(ifs);
        free(x);
        free(pl);
    }
    return 0;
}
