/* Skin-effect loss (skin.h): the filter against its published step response, the template's
 * truncation, the simulator's shaped arrivals, and the correction of late matched-filter delays on
 * a simulated cable with K given and K estimated, noise-free and noisy. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/detect.h"
#include "strandecho/pulse.h"
#include "strandecho/simulate.h"
#include "strandecho/skin.h"
#include "plain_lag.h"
#include "testutil.h"

#define FS 1e9                         /* 1 GS/s */
#define VF 0.66                        /* velocity factor */
#define C0 299792458.0                 /* speed of light, m/s, exact (BIPM SI brochure, 2019) */
#define SKIN_K 4e-7                    /* s^0.5 per metre: strong loss at these lengths */
#define NREFL 3

static void test_step_response(void);
static void test_identity_and_area(void);
static void test_simulator(void);
static void test_cable(double noise, unsigned long seed, int estimate);
static void test_cli(void);

/* The filter's step response: the running sum of its impulse response (a one-sample pulse), sample
 * k standing for t = (k + 1/2) / fs (the sum of the samples 0..k approximates the integral up to the
 * middle between samples k and k+1). */
static void test_step_response(void)
{
    /* a^2 fs = 20, 80, 320 samples */
    const double u[3] = {20.0, 80.0, 320.0};
    /* pointwise tolerances from the sampling: the band-limited filter differs from the continuous
     * one by about |H| at Nyquist, exp(-a sqrt(pi fs / 2)) = 3.7e-3, 1.4e-5, 2e-10, on the early
     * samples, and the running sum from the integral by the midpoint rule (h' / 24); at a^2 fs = 320
     * what is left is the tail's wrap correction (skin.h) */
    const double tol[3] = {2e-3, 1.5e-4, 1.5e-5};
    const double one = 1.0;
    size_t t;
    for (t = 0; t < 3; t++) {
        const double a = sqrt(u[t] / FS);
        double *h = NULL, sum = 0.0, prev = 0.0, t50 = NAN, worst = 0.0;
        size_t n = 0, k, worst_k = 0;
        se_error err;
        CHECK(se_skin_template(&one, 1, FS, a, 0.0, &h, &n, NULL, &err) == SE_OK);
        CHECK(n == se_skin_template_length(1, FS, a));
        for (k = 0; k < n && h != NULL; k++) {
            const double tk = ((double)k + 0.5) / FS;
            const double want = erfc(a / (2.0 * sqrt(tk)));
            sum += h[k];
            if (fabs(sum - want) > worst) {
                worst = fabs(sum - want);
                worst_k = k;
            }
            if (isnan(t50) && sum >= 0.5 && k > 0) /* linear between the two samples' times */
                t50 = ((double)k - 0.5 + (0.5 - prev) / (sum - prev)) / FS;
            prev = sum;
        }
        /* Pointwise erfc(a / (2 sqrt t)) (Wigington & Nahman, Proc. IRE 45(2), 1957 [pub]) over the
         * whole template, slow tail included, within tol[] */
        printf("a^2 fs = %g: max |step - erfc| = %.3g at sample %zu of %zu, t50 / a^2 = %.5f\n", u[t],
               worst, worst_k, n, t50 / (a * a));
        CHECK(worst <= tol[t]);
        /* 50 % at 1.10 a^2 (Wigington & Nahman 1957 [pub]): the published 3 figures give +-0.005 */
        CHECK_CLOSE(t50 / (a * a), 1.10, 0.005, "skin step response 50 % at 1.10 a^2");
        /* tighter, against the exact 1 / (4 erfc^-1(0.5)^2) = 1.09906 [calc], within 0.1 sample
         * of the crossing (0.1 / (a^2 fs) relative: the early-sample error above) */
        CHECK_CLOSE(t50 / (a * a), 1.09906, 0.1 / u[t], "t50 exact");
        free(h);
    }
}

/* a = 0 gives the pulse back exactly; a = 1e-20 s^0.5 through the transform within 1e-12; the template's
 * area is the pulse's (H(0) = 1) once the truncated tail erf(a / (2 sqrt T)) is added back. */
static void test_identity_and_area(void)
{
    se_pulse_shape ps;
    double *p = NULL, *y = NULL, s0 = 0.0, sy = 0.0, dev = 0.0;
    size_t m = 0, n = 0, k;
    se_error err;
    CHECK(se_pulse_parse("gauss:16ns", &ps, &err) == SE_OK);
    CHECK(se_pulse_render(&ps, FS, &p, &m, &err) == SE_OK);
    CHECK(se_skin_template(p, m, FS, 0.0, 0.0, &y, &n, NULL, &err) == SE_OK);
    CHECK(n == m);
    CHECK(y != NULL && memcmp(y, p, m * sizeof *p) == 0);
    free(y);
    y = NULL;
    CHECK(se_skin_template(p, m, FS, 1e-20, 0.0, &y, &n, NULL, &err) == SE_OK);
    for (k = 0; k < m && y != NULL; k++)
        dev = fmax(dev, fabs(y[k] - p[k]));
    printf("a = 1e-20 s^0.5 through the transform: max dev %.3g\n", dev);
    CHECK(dev < 1e-12);
    free(y);
    y = NULL;
    {
        const double a = sqrt(40.0 / FS);
        CHECK(se_skin_template(p, m, FS, a, 0.0, &y, &n, NULL, &err) == SE_OK);
        for (k = 0; k < m; k++)
            s0 += p[k];
        for (k = 0; k < n && y != NULL; k++)
            sy += y[k];
        /* the tail beyond the template, ~ erf(a / (2 sqrt(T))) s0 with T from the centroid */
        sy += s0 * erf(a / (2.0 * sqrt(((double)n - 0.5 - 0.5 * (double)(m - 1)) / FS)));
        printf("area: pulse %.9f, template + tail %.9f\n", s0, sy);
        CHECK_CLOSE(sy / s0, 1.0, 1e-4, "template area with its tail");
        /* truncation statement: the tail's energy fraction a^4 / (8 T^2) = 7.8e-7 (skin.h) */
        {
            double e = 0.0, et = 0.0;
            /* per sample (t in samples, a^2 fs = u): h = sqrt(u) / (2 sqrt(pi)) t^-1.5 far out,
             * so the energy of s0 h beyond T is s0^2 u / (4 pi) / (2 T^2) */
            const double u = a * a * FS, T = SE_SKIN_TAIL_FACTOR * u;
            for (k = 0; k < n && y != NULL; k++)
                e += y[k] * y[k];
            et = s0 * s0 * u / (4.0 * 3.14159265358979323846) / (2.0 * T * T);
            printf("truncated tail energy fraction %.3g\n", et / e);
            CHECK(et / e < 2e-6);
        }
        free(y);
    }
    free(p);
}

/* se_simulate_skin: K = 0 is se_simulate bit for bit; one reflector's arrival equals the template
 * (independent route: analytic sampling and a whole-record transform vs the sampled pulse shifted
 * band-limited with its own wrap correction). */
static void test_simulator(void)
{
    const double v = VF * C0;
    se_sim_reflector rf = {150.0, 0.5};
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_sim_arrival *arr = NULL;
    size_t frames, narr = 0, k, m = 0, n = 0;
    double *r0, *r1, *r2, *p = NULL, *y = NULL, dev = 0.0, peak = 0.0;
    se_error err;
    memset(&rec, 0, sizeof rec);
    rec.rate_hz = FS;
    rec.duration_s = 3e-6;
    rec.pulse_start_s = 40e-9;
    CHECK(se_pulse_parse("gauss:16ns", &rec.pulse, &err) == SE_OK);
    CHECK(se_sim_uniform_line(v, &rf, 1, 1000.0, 0.0, 0.0, 0.0, &ifs, &line, &err) == SE_OK);
    frames = se_sim_frames(&rec);
    r0 = calloc(frames, sizeof *r0);
    r1 = calloc(frames, sizeof *r1);
    r2 = calloc(frames, sizeof *r2);
    CHECK(r0 && r1 && r2);
    CHECK(se_simulate(&line, &rec, r0, NULL, frames, &err) == SE_OK);
    CHECK(se_simulate_skin(&line, &rec, 0.0, v, r1, NULL, frames, &err) == SE_OK);
    CHECK(memcmp(r0, r1, frames * sizeof *r0) == 0);
    CHECK(se_simulate_skin(&line, &rec, SKIN_K, v, r2, NULL, frames, &err) == SE_OK);
    CHECK(se_simulate_skin(&line, &rec, -1.0, v, r2, NULL, frames, &err) == SE_ERR_RANGE);
    CHECK(se_simulate_skin(&line, &rec, SKIN_K, v, r2, NULL, frames, &err) == SE_OK);
    CHECK(se_sim_arrivals(&line, 3e-6, 1.0 / (FS * 1024.0), &arr, &narr, &err) == SE_OK);
    CHECK(narr == 1);
    CHECK(se_pulse_render(&rec.pulse, FS, &p, &m, &err) == SE_OK);
    if (narr == 1 && p != NULL) {
        const double st = (rec.pulse_start_s + arr[0].time_s) * FS, base = floor(st);
        const double a = SKIN_K * v * arr[0].time_s;
        /* the pulse sampled analytically at the arrival's fraction, as the simulator does */
        double *q = calloc(m + 2, sizeof *q);
        for (k = 0; q != NULL && k < m + 2; k++)
            q[k] = se_pulse_value(&rec.pulse, ((double)k - (st - base)) / FS);
        CHECK(q != NULL && se_skin_template(q, m + 2, FS, a, 0.0, &y, &n, NULL, &err) == SE_OK);
        free(q);
        for (k = (size_t)base; k < frames && y != NULL; k++) {
            const size_t j = k - (size_t)base;
            const double want = (j < n ? 0.5 * y[j] : 0.0) +
                                se_pulse_value(&rec.pulse, (double)k / FS - rec.pulse_start_s);
            dev = fmax(dev, fabs(r2[k] - want));
            peak = fmax(peak, fabs(0.5 * (j < n ? y[j] : 0.0)));
        }
        /* the two routes differ by the template's truncation (tail beyond 400 a^2, < 1e-5 of the
         * peak there) and the two wrap corrections */
        printf("simulated arrival vs template: max dev %.3g of peak %.3g (a^2 fs = %.2f)\n", dev, peak,
               a * a * FS);
        CHECK(dev < 2e-5 * peak);
        /* the loss lowers and delays the peak: the echo is visibly distorted */
        CHECK(peak < 0.5 * 0.8);
    }
    free(y);
    free(p);
    free(arr);
    free(ifs);
    free(r0);
    free(r1);
    free(r2);
}

/* 10-90 % rise (samples) of the leading edge up to the peak of y [size: n] from sample from. */
static double rise_10_90(const double *y, size_t n, size_t from, size_t to)
{
    size_t k, kp = from, k10 = 0, k90 = 0;
    double pk = 0.0;
    for (k = from; k < to && k < n; k++)
        if (fabs(y[k]) > pk) {
            pk = fabs(y[k]);
            kp = k;
        }
    for (k = kp; k > from; k--) {
        if (!k90 && fabs(y[k]) < 0.9 * pk)
            k90 = k;
        if (fabs(y[k]) < 0.1 * pk) {
            k10 = k;
            break;
        }
    }
    return (double)k90 - (double)k10;
}

/* A cable at 1 GS/s, velocity factor 0.66, Gaussian pulse (support 16 ns, sigma 2 ns), reflectors
 * at 120, 250 and 330 m, K = 4e-7 s^0.5/m (a^2 fs = 9.4, 41, 71 samples over the round trips); the
 * record ends before the first inter-reflector multiple (2 t(330) - t(250), at 410 m). */
static void test_cable(double noise, unsigned long seed, int estimate)
{
    const double v = VF * C0;
    const se_sim_reflector rf[NREFL] = {{120.0, 0.3}, {250.0, -0.4}, {330.0, 0.5}};
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_sim_arrival *arr = NULL;
    se_skin_config sc;
    se_skin_result sr;
    se_skin_echo ech[3 * NREFL + 1];
    size_t frames, narr = 0, i, j, kb = 0, ke = 0, m;
    double *x, *pl, truth[NREFL], plain[NREFL];
    se_error err;
    memset(&rec, 0, sizeof rec);
    rec.rate_hz = FS;
    rec.duration_s = 3.8e-6;
    rec.pulse_start_s = 40e-9;
    rec.noise_rms = noise;
    rec.seed = seed;
    CHECK(se_pulse_parse("gauss:16ns", &rec.pulse, &err) == SE_OK);
    CHECK(se_sim_uniform_line(v, rf, NREFL, 5000.0, 0.0, 0.0, 0.0, &ifs, &line, &err) == SE_OK);
    frames = se_sim_frames(&rec);
    x = calloc(frames, sizeof *x);
    pl = calloc(frames, sizeof *pl);
    CHECK(x && pl);
    CHECK(se_simulate_skin(&line, &rec, SKIN_K, v, x, pl, frames, &err) == SE_OK);
    /* reference: the pulse channel over its support */
    for (kb = 0; kb < frames && pl[kb] == 0.0; kb++) {
    }
    for (ke = kb; ke < frames && pl[ke] != 0.0; ke++) {
    }
    m = ke - kb;
    /* truth: the lattice's own (quantised) round-trip times */
    CHECK(se_sim_arrivals(&line, 3.8e-6, 1.0 / (FS * 1024.0), &arr, &narr, &err) == SE_OK);
    for (i = 0; i < NREFL; i++) {
        double want = 2.0 * rf[i].distance_m / v, bt = 0.0;
        for (j = 0; j < narr; j++)
            if (fabs(arr[j].time_s - want) < fabs(bt - want))
                bt = arr[j].time_s;
        truth[i] = (double)kb + bt * FS; /* x[n] = ref[n - kb - t fs] */
    }
    free(arr);
    se_skin_config_init(&sc);
    sc.rate_hz = FS;
    sc.lag0 = (double)kb; /* the reference is the pulse channel from kb */
    sc.speed_m_s = v;
    sc.k_s05_per_m = estimate ? NAN : SKIN_K;
    for (i = 0; i < NREFL; i++) {
        double amp = 0.0;
        plain[i] = se_plain_lag(x, frames, pl + kb, m, truth[i], 256, &amp);
        ech[i].lag = plain[i];
        ech[i].amplitude = amp;
    }
    ech[NREFL].lag = sc.lag0; /* the direct arrival: left alone */
    ech[NREFL].amplitude = 1.0;
    /* two more detections per echo on its late flank, as a matched filter with the lossless pulse
     * splits a distorted echo (strandecho locate finds 5-8 per echo on this cable): they must be
     * explained by the echo's loss-shaped template (threshold: 5 sigma of the plain matched filter,
     * sigma = noise / sqrt(E_s); 1e-3 when noise-free) */
    for (i = 0; i < NREFL; i++)
        for (j = 0; j < 2; j++) {
            ech[NREFL + 1 + 2 * i + j].lag = plain[i] + (j == 0 ? 4.0 : 9.0);
            ech[NREFL + 1 + 2 * i + j].amplitude = 0.2 * ech[i].amplitude;
        }
    {
        double es = 0.0;
        for (i = 0; i < m; i++)
            es += pl[kb + i] * pl[kb + i];
        sc.threshold = noise > 0.0 ? 5.0 * noise / sqrt(es) : 1e-3;
    }
    if (noise == 0.0 && !estimate) {
        /* the echo's rise is visibly longer than the pulse's (the farthest echo) */
        double rp = rise_10_90(x, frames, kb, kb + m);
        double re = rise_10_90(x, frames, (size_t)truth[2] - 8, (size_t)truth[2] + 400);
        printf("10-90 %% rise: pulse %.0f samples, echo at 330 m %.0f samples\n", rp, re);
        CHECK(re >= 1.5 * rp);
    }
    if (!CHECK(se_skin_correct(x, frames, pl + kb, m, &sc, ech, 3 * NREFL + 1, &sr, &err) == SE_OK))
        printf("  %s\n", err.message);
    printf("noise %g, K %s: K = %.6g +- %.3g s^0.5/m (true %g), %zu echoes fitted\n", noise,
           estimate ? "estimated" : "given", sr.k_s05_per_m, sr.k_sd, SKIN_K, sr.fit_echoes);
    CHECK(sr.estimated == estimate);
    if (estimate) {
        /* noise-free: within 0.5 %; noisy: within 3 of its uncertainty and 10 % */
        CHECK(fabs(sr.k_s05_per_m - SKIN_K) <= (noise == 0.0 ? 5e-3 * SKIN_K : 0.1 * SKIN_K));
        if (noise > 0.0)
            CHECK(fabs(sr.k_s05_per_m - SKIN_K) <= 3.0 * sr.k_sd);
    }
    CHECK(ech[NREFL].lag == sc.lag0 && ech[NREFL].corrected == 0 && ech[NREFL].amplitude == 1.0);
    CHECK(ech[NREFL].explained == 0);
    for (i = NREFL + 1; i < 3 * NREFL + 1; i++)
        CHECK(ech[i].explained == 1 && ech[i].corrected == 0);
    for (i = 0; i < NREFL; i++) {
        const double bias = plain[i] - truth[i], e = ech[i].lag - truth[i];
        /* the lattice's amplitude: the coefficient times the two-way transmissions 1 - r^2 of the
         * reflectors before it */
        double want = rf[i].reflection;
        for (j = 0; j < i; j++)
            want *= 1.0 - rf[j].reflection * rf[j].reflection;
        printf("  %3.0f m: plain lag late by %.4f samples, corrected %+.5f (sd %.4f), amplitude %+.4f "
               "(at the discontinuity %+.4f), a^2 fs %.1f, %zu rebuilds\n",
               rf[i].distance_m, bias, e, ech[i].lag_sd, ech[i].amplitude, want,
               ech[i].a_sqrt_s * ech[i].a_sqrt_s * FS, ech[i].iterations);
        /* the plain matched filter IS late: by more than one sample at these losses */
        CHECK(bias > 1.0);
        CHECK(ech[i].corrected == 1 && ech[i].explained == 0);
        if (noise == 0.0) {
            /* noise-free: within 1 % of the bias and 0.02 sample */
            CHECK(fabs(e) < 0.01 * bias && fabs(e) < 0.02);
            CHECK_CLOSE(ech[i].amplitude, want, 2e-3,
                        "amplitude at the discontinuity (two-way transmissions 1 - r^2 before it)");
        } else {
            /* noisy: within 3 uncertainties and 10 % of the bias */
            CHECK(fabs(e) < 3.0 * ech[i].lag_sd && fabs(e) < 0.1 * bias);
        }
    }
    free(ifs);
    free(x);
    free(pl);
}

static void test_cli(void)
{
    char cmd[2048], out[8192], path[1024];
    const char *cli = se_test_cli();
    if (getenv("SE_CLI") == NULL || cli == NULL || cli[0] == '\0') {
        printf("SE_CLI not set (run under ctest): the simulate --skin-loss checks are skipped\n");
        return;
    }
    snprintf(cmd, sizeof cmd, "'%s' simulate --help", cli);
    CHECK(se_test_run(cmd, out, sizeof out) == 0);
    CHECK(strstr(out, "--skin-loss") != NULL && strstr(out, "s^0.5/m") != NULL);
    se_test_binary_path(path, sizeof path, "tests/skin_cli.csv");
    snprintf(cmd, sizeof cmd,
             "'%s' simulate --pulse gauss:16ns --rate 1GHz --duration 3us --velocity-factor 0.66 "
             "--reflector 150m:0.5 --skin-loss 3e-7 --quiet -o '%s'",
             cli, path);
    CHECK(se_test_run(cmd, out, sizeof out) == 0);
    snprintf(cmd, sizeof cmd,
             "'%s' simulate --pulse gauss:16ns --rate 1GHz --duration 3us --velocity-factor 0.66 "
             "--skin-loss -1 --quiet -o '%s'",
             cli, path);
    CHECK(se_test_run(cmd, out, sizeof out) != 0);
    remove(path);
}

int main(void)
{
    test_step_response();
    test_identity_and_area();
    test_simulator();
    test_cable(0.0, 1, 0);
    test_cable(0.0, 1, 1);
    test_cable(2e-3, 7, 0);
    test_cable(2e-3, 7, 1);
    test_cli();
    return se_test_done("skin");
}
