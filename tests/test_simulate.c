/* strandecho tests: the sparse lattice simulator against closed-form multiples, energy balance, a
 * dense textbook lattice kept here, the analytic synthesis, noise and every error case. */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "strandecho/simulate.h"
#include "testutil.h"

/* 48 kHz x 1024: the default fine cell of a 48 kHz record */
#define Q48 (1.0 / (48000.0 * 1024.0))

static const se_sim_arrival *find_arrival(const se_sim_arrival *a, size_t n, double t, double tol);
static double quantised(double t, double q);
static int sorted_distinct(const se_sim_arrival *a, size_t n);
static se_sim_line make_line(const se_sim_interface *f, size_t n, double rs, double loss);
static void test_one_reflector(void);
static void test_end_repeats(void);
static void test_two_reflectors(void);
static void test_energy_balance(void);
static void test_loss(void);
static void test_dense_lattice(void);
static void test_synthesis(void);
static void test_noise(void);
static void test_uniform_line(void);
static void test_errors(void);
static void test_speed(void);

static const se_sim_arrival *find_arrival(const se_sim_arrival *a, size_t n, double t, double tol)
{
    size_t i;
    for (i = 0; i < n; i++)
        if (fabs(a[i].time_s - t) <= tol)
            return &a[i];
    return NULL;
}

static double quantised(double t, double q)
{
    return nearbyint(t / q) * q;
}

static int sorted_distinct(const se_sim_arrival *a, size_t n)
{
    size_t i;
    for (i = 1; i < n; i++)
        if (!(a[i].time_s > a[i - 1].time_s))
            return 0;
    return 1;
}

static se_sim_line make_line(const se_sim_interface *f, size_t n, double rs, double loss)
{
    se_sim_line l;
    l.interfaces = f;
    l.n_interfaces = n;
    l.source_reflection = rs;
    l.loss_np_per_s = loss;
    return l;
}

/* One reflector: a single arrival at 2 d / v with amplitude r (matched source and far end). */
static void test_one_reflector(void)
{
    se_sim_reflector r = {30.0, 0.4};
    se_sim_interface *f = NULL;
    se_sim_line line;
    se_sim_arrival *a = NULL;
    size_t n = 0;
    se_error err;
    CHECK(se_sim_uniform_line(100.0, &r, 1, 100.0, 0.0, 0.0, 0.0, &f, &line, &err) == SE_OK);
    CHECK(line.n_interfaces == 2);
    CHECK(se_sim_arrivals(&line, 5.0, Q48, &a, &n, &err) == SE_OK);
    CHECK(n == 1);
    if (n == 1) {
        /* d = v t / 2 (REFERENCE.md "Delay to distance"): 2 * 30 / 100 = 0.6 s, within one cell */
        CHECK_CLOSE(a[0].time_s, 0.6, Q48, "one reflector: arrival time 2 d / v");
        CHECK_CLOSE(a[0].time_s, 2.0 * quantised(0.3, Q48), 1e-15, "one reflector: quantised time");
        CHECK_CLOSE(a[0].amplitude, 0.4, 1e-15, "one reflector: amplitude r");
    }
    free(a);
    free(f);
}

/* A lone far end with a reflecting source end repeats at (m+1) T with r_s^m r^(m+1)
 * (M.M. Backus, Geophysics 24(2), 1959, via REFERENCE.md "Multiples"). */
static void test_end_repeats(void)
{
    static const double cases[][2] = {{1.0, -1.0}, {0.7, -0.9}, {-0.5, 0.8}}; /* r_s, r */
    size_t c;
    for (c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        const double rs = cases[c][0], r = cases[c][1];
        se_sim_interface f = {0.5, r};
        se_sim_line line = make_line(&f, 1, rs, 0.0);
        se_sim_arrival *a = NULL;
        size_t n = 0, m;
        se_error err;
        CHECK(se_sim_arrivals(&line, 10.5, Q48, &a, &n, &err) == SE_OK);
        CHECK(n == 10); /* arrivals at 1, 2, ..., 10 s */
        for (m = 0; m < n && m < 10; m++) {
            char what[96];
            snprintf(what, sizeof what, "end repeats r_s=%g r=%g m=%zu amplitude", rs, r, m);
            CHECK_CLOSE(a[m].time_s, (double)(m + 1) * 1.0, 1e-12, "end repeats: time (m+1) T");
            CHECK_CLOSE(a[m].amplitude, pow(rs, (double)m) * pow(r, (double)(m + 1)), 1e-14, what);
        }
        free(a);
        /* the horizon is inclusive: an arrival exactly at it is kept, one cell less drops it */
        CHECK(se_sim_arrivals(&line, 10.0, Q48, &a, &n, &err) == SE_OK);
        CHECK(n == 10);
        free(a);
        CHECK(se_sim_arrivals(&line, 10.0 - Q48, Q48, &a, &n, &err) == SE_OK);
        CHECK(n == 9);
        free(a);
    }
}

/* Two reflectors i < j over a matched far end:
 * - primary j: r_j (1 - r_i^2);
 * - between-reflector multiple at 2 T_j - T_i: -r_i r_j^2 (1 - r_i^2) (Backus 1959, REFERENCE.md);
 * - with a source end r_s, first-order source multiple at T_i + T_j: r_s r_i r_j (1 - r_i^2) by each of
 *   its two paths (i then j, j then i), which the lattice merges: 2 r_s r_i r_j (1 - r_i^2) [calc].
 * Times 0.010 s and 0.0237 s one-way are chosen so no other path shares these cells [calc]. */
static void test_two_reflectors(void)
{
    const double ri = 0.3, rj = -0.4, ti = 0.010, tj = 0.0237;
    const se_sim_interface f[3] = {{ti, ri}, {tj, rj}, {0.05, 0.0}};
    const double Ti = 2.0 * quantised(ti, Q48), Tj = 2.0 * quantised(tj, Q48);
    const double rs_cases[2] = {0.0, 0.8};
    size_t c;
    for (c = 0; c < 2; c++) {
        const double rs = rs_cases[c];
        se_sim_line line = make_line(f, 3, rs, 0.0);
        se_sim_arrival *a = NULL;
        size_t n = 0;
        const se_sim_arrival *p;
        se_error err;
        CHECK(se_sim_arrivals(&line, 0.2, Q48, &a, &n, &err) == SE_OK);
        CHECK(sorted_distinct(a, n));
        p = find_arrival(a, n, Ti, 0.5 * Q48);
        CHECK(p != NULL && fabs(p->amplitude - ri) < 1e-15);
        p = find_arrival(a, n, Tj, 0.5 * Q48);
        CHECK(p != NULL && fabs(p->amplitude - rj * (1.0 - ri * ri)) < 1e-15);
        p = find_arrival(a, n, 2.0 * Tj - Ti, 0.5 * Q48);
        CHECK(p != NULL);
        if (p != NULL)
            CHECK_CLOSE(p->amplitude, -ri * rj * rj * (1.0 - ri * ri), 1e-15, "between-reflector multiple");
        p = find_arrival(a, n, Ti + Tj, 0.5 * Q48);
        if (rs == 0.0) {
            CHECK(p == NULL); /* no source-end multiple on a matched source */
        } else {
            CHECK(p != NULL);
            if (p != NULL)
                CHECK_CLOSE(p->amplitude, 2.0 * rs * ri * rj * (1.0 - ri * ri), 1e-15, "source-end multiple");
            /* and the r_s^1 repeat of reflector i at 2 T_i: r_s r_i^2 (one reflector rule) */
            p = find_arrival(a, n, 2.0 * Ti, 0.5 * Q48);
            CHECK(p != NULL && fabs(p->amplitude - rs * ri * ri) < 1e-15);
        }
        free(a);
    }
}

/* Energy balance of a lossless lattice. A wave of observed amplitude a in section k carries power
 * w_k a^2 with w_k = Z_k for velocity/current, 1/Z_k for force/voltage; in both conventions
 * w_{k+1}/w_k = (1 - r)/(1 + r), so each scattering conserves weighted energy:
 * (1 + r)^2 (1 - r)/(1 + r) + r^2 = 1 [calc from REFERENCE.md's lattice equations]. The injected unit
 * wave and every returning wave are in section 0 (same weight), so with a matched source (r_s = 0, all
 * returning energy leaves) and a total reflector at the far end (nothing leaves there) the returned
 * energy is the injected one: sum_j a_j^2 -> 1 [calc]. */
static void test_energy_balance(void)
{
    static const double ends[2] = {-1.0, 1.0};
    size_t c;
    for (c = 0; c < 2; c++) {
        const se_sim_interface f[4] = {{0.0031, 0.5}, {0.0077, -0.6}, {0.0102, 0.3}, {0.0149, ends[c]}};
        se_sim_line line = make_line(f, 4, 0.0, 0.0);
        se_sim_arrival *a = NULL;
        size_t n = 0, i;
        double e = 0.0, e_short = 0.0;
        se_error err;
        CHECK(se_sim_arrivals_floor(&line, 4.0, 1e-6, 1e-13, &a, &n, &err) == SE_OK);
        for (i = 0; i < n; i++) {
            e += a[i].amplitude * a[i].amplitude;
            if (a[i].time_s < 0.05)
                e_short += a[i].amplitude * a[i].amplitude;
        }
        printf("energy balance (end %+g): %zu arrivals, sum a^2 = %.15f\n", ends[c], n, e);
        CHECK_CLOSE(e, 1.0, 1e-9, "lossless energy balance sum a^2 = 1");
        CHECK(e_short < 1.0 - 1e-3); /* not already complete early: the check needs the multiples */
        free(a);
    }
}

/* Loss: amplitude falls as exp(-alpha * time travelled), i.e. exp(-2 alpha t) for a reflector at
 * one-way time t; multiples lose by their full travel time. */
static void test_loss(void)
{
    const double alpha = 0.7, t = 0.3;
    const se_sim_interface f[2] = {{t, 0.5}, {0.45, -1.0}};
    se_sim_line line = make_line(f, 2, 0.6, alpha);
    se_sim_arrival *a = NULL;
    size_t n = 0, i;
    se_error err;
    CHECK(se_sim_arrivals(&line, 3.0, Q48, &a, &n, &err) == SE_OK);
    CHECK(n > 3);
    if (n > 0) {
        const double tq = 2.0 * quantised(t, Q48);
        CHECK_CLOSE(a[0].time_s, tq, 1e-15, "loss: first arrival time");
        CHECK_CLOSE(a[0].amplitude, 0.5 * exp(-alpha * tq), 1e-14, "loss: reflector amplitude exp(-2 alpha t)");
    }
    {
        /* same line without loss: every arrival scales by exp(-alpha t_j) */
        se_sim_line l0 = make_line(f, 2, 0.6, 0.0);
        se_sim_arrival *b = NULL;
        size_t nb = 0;
        CHECK(se_sim_arrivals(&l0, 3.0, Q48, &b, &nb, &err) == SE_OK);
        CHECK(nb >= n);
        for (i = 0; i < n && i < nb; i++) {
            CHECK(a[i].time_s == b[i].time_s);
            CHECK_CLOSE(a[i].amplitude, b[i].amplitude * exp(-alpha * b[i].time_s), 1e-13,
                        "loss: every path decays by its travel time");
        }
        free(b);
    }
    free(a);
}

/* Dense textbook lattice: one-cell cells, every boundary updated every step (Goupillaud 1961 as in
 * REFERENCE.md). Returns the nonzero sensor arrivals (cell, amplitude) up to horizon cells. Waves
 * arriving at an interface or at the source below floor are zeroed (the simulator's pruning rule). */
static size_t dense_lattice(const int64_t *cells, const double *refl, size_t n_if, double rs, double g,
                            double floor_abs, int64_t horizon, int64_t *out_cell, double *out_amp,
                            size_t max_out)
{
    const size_t k = (size_t)cells[n_if - 1];
    double *din = calloc(k + 1, sizeof *din), *uin = calloc(k + 1, sizeof *uin);
    double *dout = calloc(k + 1, sizeof *dout), *uout = calloc(k + 1, sizeof *uout);
    double *r = calloc(k + 1, sizeof *r);
    char *is_if = calloc(k + 1, 1);
    size_t i, n_out = 0;
    int64_t t;
    if (!din || !uin || !dout || !uout || !r || !is_if) {
        free(din), free(uin), free(dout), free(uout), free(r), free(is_if);
        return (size_t)-1;
    }
    for (i = 0; i < n_if; i++) {
        is_if[cells[i]] = 1;
        r[cells[i]] = refl[i];
    }
    for (t = 0; t <= horizon; t++) {
        size_t x;
        for (x = 0; x <= k; x++) {
            if ((x == 0 || is_if[x]) && floor_abs > 0.0) {
                if (fabs(din[x]) < floor_abs)
                    din[x] = 0.0;
                if (fabs(uin[x]) < floor_abs)
                    uin[x] = 0.0;
            }
            if (x == 0) {
                if (uin[0] != 0.0 && n_out < max_out) {
                    out_cell[n_out] = t;
                    out_amp[n_out++] = uin[0];
                }
                dout[0] = rs * uin[0] + (t == 0 ? 1.0 : 0.0);
                uout[0] = 0.0;
            } else if (x == k) {
                uout[k] = r[k] * din[k];
                dout[k] = 0.0;
            } else if (is_if[x]) {
                dout[x] = (1.0 + r[x]) * din[x] - r[x] * uin[x];
                uout[x] = r[x] * din[x] + (1.0 - r[x]) * uin[x];
            } else {
                dout[x] = din[x];
                uout[x] = uin[x];
            }
        }
        for (x = 0; x <= k; x++) {
            din[x] = x > 0 ? dout[x - 1] * g : 0.0;
            uin[x] = x < k ? uout[x + 1] * g : 0.0;
        }
    }
    free(din), free(uin), free(dout), free(uout), free(r), free(is_if);
    return n_out;
}

static void compare_dense(const int64_t *cells, const double *refl, size_t n_if, double rs, double alpha,
                          double floor_abs, int64_t horizon, double tol, const char *name)
{
    const double q = 1e-3;
    se_sim_interface f[8];
    se_sim_line line;
    se_sim_arrival *a = NULL;
    size_t n = 0, nd, i, bad = 0;
    int64_t *dc = malloc((size_t)(horizon + 1) * sizeof *dc);
    double *da = malloc((size_t)(horizon + 1) * sizeof *da);
    se_error err;
    if (!CHECK(dc != NULL && da != NULL && n_if <= 8)) {
        free(dc), free(da);
        return;
    }
    for (i = 0; i < n_if; i++) {
        f[i].one_way_s = (double)cells[i] * q;
        f[i].reflection = refl[i];
    }
    line = make_line(f, n_if, rs, alpha);
    nd = dense_lattice(cells, refl, n_if, rs, exp(-alpha * q), floor_abs, horizon, dc, da, (size_t)horizon + 1);
    CHECK(se_sim_arrivals_floor(&line, (double)horizon * q, q, floor_abs, &a, &n, &err) == SE_OK);
    printf("dense lattice %s: %zu arrivals (dense %zu)\n", name, n, nd);
    CHECK(n == nd);
    CHECK(n > 20);
    for (i = 0; i < n && i < nd; i++) {
        double scale = fabs(da[i]) > 1.0 ? fabs(da[i]) : 1.0;
        if (nearbyint(a[i].time_s / q) != (double)dc[i] || !(fabs(a[i].amplitude - da[i]) <= tol * scale)) {
            if (bad++ < 5)
                fprintf(stderr, "%s: arrival %zu: sparse (%.0f, %.17g), dense (%lld, %.17g)\n", name, i,
                        a[i].time_s / q, a[i].amplitude, (long long)dc[i], da[i]);
        }
    }
    CHECK(bad == 0);
    free(a), free(dc), free(da);
}

static void test_dense_lattice(void)
{
    const int64_t c1[4] = {7, 12, 20, 33};
    const double r1[4] = {0.5, -0.3, 0.7, -1.0};
    const int64_t c2[6] = {5, 17, 18, 41, 90, 131};
    const double r2[6] = {-0.2, 0.45, -0.35, 0.1, 0.6, 0.9};
    /* lossless, no pruning: the same arithmetic in the same order, so identical to the last bit */
    compare_dense(c1, r1, 4, 0.6, 0.0, 0.0, 3000, 0.0, "4 interfaces, lossless");
    compare_dense(c2, r2, 6, -0.8, 0.0, 0.0, 6000, 0.0, "6 interfaces, lossless");
    /* with pruning at 1e-4 (lossless, so the pruned set is identical too) */
    compare_dense(c2, r2, 6, 1.0, 0.0, 1e-4, 6000, 0.0, "6 interfaces, floor 1e-4");
    /* with loss: per-segment exp() against per-cell products, rounding only */
    compare_dense(c2, r2, 6, 0.9, 0.8, 0.0, 6000, 1e-12, "6 interfaces, lossy");
}

/* Analytic synthesis: response = p(n/fs - t0) + (1 + r_s) sum a_j p(n/fs - t0 - t_j); the arrival
 * falls between samples (fractional delay) and must match se_pulse_value at that delay. */
static void test_synthesis(void)
{
    const double tau = 0.12345678, r = 0.5, rs = 0.6;
    const se_sim_interface f[2] = {{tau, r}, {0.4, 0.0}};
    se_sim_line line = make_line(f, 2, rs, 0.0);
    se_sim_record rec;
    size_t frames, i;
    double *resp, *pul, *want;
    se_sim_arrival *a = NULL;
    size_t na = 0;
    se_error err;
    memset(&rec, 0, sizeof rec);
    rec.rate_hz = 1000.0;
    rec.duration_s = 1.0;
    rec.pulse_start_s = 0.1;
    rec.pulse.kind = SE_PULSE_HANN;
    rec.pulse.duration_s = 0.02;
    rec.oversample = 16;
    frames = se_sim_frames(&rec);
    CHECK(frames == 1001);
    resp = malloc(frames * sizeof *resp);
    pul = malloc(frames * sizeof *pul);
    want = calloc(frames, sizeof *want);
    if (!CHECK(resp && pul && want)) {
        free(resp), free(pul), free(want);
        return;
    }
    CHECK(se_simulate(&line, &rec, resp, pul, frames, &err) == SE_OK);
    /* arrivals with the same cell (1/(1000 * 16) s) and the default floor */
    CHECK(se_sim_arrivals(&line, 0.9, 1.0 / 16000.0, &a, &na, &err) == SE_OK);
    CHECK(na >= 3); /* primary, r_s r^2 at 2 T, r_s^2 r^3 at 3 T */
    if (na > 0) {
        const double frac = a[0].time_s * 1000.0 - floor(a[0].time_s * 1000.0);
        CHECK(frac > 0.05 && frac < 0.95); /* a genuinely fractional delay */
        CHECK_CLOSE(a[0].time_s, 2.0 * quantised(tau, 1.0 / 16000.0), 1e-15, "synthesis: arrival time");
        CHECK_CLOSE(a[0].amplitude, r, 1e-15, "synthesis: arrival amplitude");
    }
    for (i = 0; i < frames; i++) {
        size_t j;
        double x = se_pulse_value(&rec.pulse, (double)i / 1000.0 - 0.1);
        CHECK(pul[i] == x);
        want[i] = x;
        for (j = 0; j < na; j++)
            want[i] += (1.0 + rs) * a[j].amplitude * se_pulse_value(&rec.pulse, (double)i / 1000.0 - 0.1 - a[j].time_s);
    }
    {
        double maxdiff = 0.0, peak = 0.0;
        for (i = 0; i < frames; i++) {
            if (fabs(resp[i] - want[i]) > maxdiff)
                maxdiff = fabs(resp[i] - want[i]);
            if (i > 200 && fabs(resp[i]) > peak)
                peak = fabs(resp[i]);
        }
        CHECK_CLOSE(maxdiff, 0.0, 1e-14, "synthesis equals the analytic sum");
        CHECK(peak > 0.5); /* the echo (1.6 * 0.5 * Hann near its crest) is really there */
    }
    /* the pulse alone when the response is not wanted, and the response alone */
    {
        double *p2 = malloc(frames * sizeof *p2), *r2 = malloc(frames * sizeof *r2);
        if (CHECK(p2 && r2)) {
            CHECK(se_simulate(&line, &rec, NULL, p2, frames, &err) == SE_OK);
            CHECK(memcmp(p2, pul, frames * sizeof *p2) == 0);
            CHECK(se_simulate(&line, &rec, r2, NULL, frames, &err) == SE_OK);
            CHECK(memcmp(r2, resp, frames * sizeof *r2) == 0);
        }
        free(p2), free(r2);
    }
    free(a), free(resp), free(pul), free(want);
}

/* Noise: Gaussian of the requested rms, deterministic for a seed, different for another seed. The
 * rms of N samples has relative standard deviation 1/sqrt(2N) [calc, common practice]: 0.22 % for
 * N = 100001; the check allows 1.5 % (7 sigma). */
static void test_noise(void)
{
    const se_sim_interface f = {0.2, 0.0};
    se_sim_line line = make_line(&f, 1, 0.0, 0.0);
    se_sim_record rec;
    size_t frames, i;
    double *r1, *r2, *r3, *p, ss = 0.0, s = 0.0;
    se_error err;
    memset(&rec, 0, sizeof rec);
    rec.rate_hz = 10000.0;
    rec.duration_s = 10.0;
    rec.pulse_start_s = 0.5;
    rec.pulse.kind = SE_PULSE_HALFSINE;
    rec.pulse.duration_s = 0.002;
    rec.noise_rms = 0.03;
    rec.seed = 12345;
    frames = se_sim_frames(&rec);
    CHECK(frames == 100001);
    r1 = malloc(frames * sizeof *r1);
    r2 = malloc(frames * sizeof *r2);
    r3 = malloc(frames * sizeof *r3);
    p = malloc(frames * sizeof *p);
    if (!CHECK(r1 && r2 && r3 && p)) {
        free(r1), free(r2), free(r3), free(p);
        return;
    }
    CHECK(se_simulate(&line, &rec, r1, p, frames, &err) == SE_OK);
    CHECK(se_simulate(&line, &rec, r2, NULL, frames, &err) == SE_OK);
    rec.seed = 12346;
    CHECK(se_simulate(&line, &rec, r3, NULL, frames, &err) == SE_OK);
    CHECK(memcmp(r1, r2, frames * sizeof *r1) == 0);
    CHECK(memcmp(r1, r3, frames * sizeof *r1) != 0);
    for (i = 0; i < frames; i++) {
        double e = r1[i] - p[i]; /* a matched far end: no echo, the residual is the noise */
        s += e;
        ss += e * e;
    }
    CHECK_CLOSE(sqrt(ss / (double)frames), 0.03, 0.03 * 0.015, "noise rms");
    CHECK_CLOSE(s / (double)frames, 0.0, 5.0 * 0.03 / sqrt((double)frames), "noise mean");
    free(r1), free(r2), free(r3), free(p);
}

/* Uniform-line convenience: sorting, times d / v, loss in dB/m. */
static void test_uniform_line(void)
{
    const se_sim_reflector unsorted[3] = {{70.0, 0.2}, {10.0, -0.3}, {40.0, 0.1}};
    const se_sim_reflector sorted[3] = {{10.0, -0.3}, {40.0, 0.1}, {70.0, 0.2}};
    se_sim_interface *f1 = NULL, *f2 = NULL;
    se_sim_line l1, l2;
    se_error err;
    size_t i;
    CHECK(se_sim_uniform_line(200.0, unsorted, 3, 100.0, -1.0, 0.5, 0.0, &f1, &l1, &err) == SE_OK);
    CHECK(se_sim_uniform_line(200.0, sorted, 3, 100.0, -1.0, 0.5, 0.0, &f2, &l2, &err) == SE_OK);
    if (f1 && f2) {
        CHECK(l1.n_interfaces == 4 && l1.interfaces == f1);
        CHECK(memcmp(f1, f2, 4 * sizeof *f1) == 0);
        for (i = 0; i < 3; i++) {
            CHECK_CLOSE(f1[i].one_way_s, sorted[i].distance_m / 200.0, 1e-15, "uniform line: t = d / v");
            CHECK(f1[i].reflection == sorted[i].reflection);
        }
        CHECK(f1[3].one_way_s == 0.5 && f1[3].reflection == -1.0);
        CHECK(l1.source_reflection == 0.5 && l1.loss_np_per_s == 0.0);
    }
    free(f1), free(f2);
    {
        /* 0.01 dB/m over the 100 m round trip to a 50 m end is 1 dB: amplitude x 10^(-1/20) [calc] */
        se_sim_interface *f = NULL;
        se_sim_line l;
        se_sim_arrival *a = NULL;
        size_t n = 0;
        CHECK(se_sim_uniform_line(100.0, NULL, 0, 50.0, 0.5, 0.0, 0.01, &f, &l, &err) == SE_OK);
        CHECK_CLOSE(l.loss_np_per_s, 0.01 * log(10.0) / 20.0 * 100.0, 1e-15, "dB/m to Np/s");
        CHECK(se_sim_arrivals(&l, 2.0, Q48, &a, &n, &err) == SE_OK);
        CHECK(n == 1);
        if (n == 1) {
            CHECK_CLOSE(a[0].time_s, 1.0, 1e-12, "uniform line: 2 L / v");
            CHECK_CLOSE(a[0].amplitude, 0.5 * pow(10.0, -1.0 / 20.0), 1e-12, "1 dB round-trip loss");
        }
        free(a), free(f);
    }
}

/* The call (which names the local error record e_) fails with status st and a message. */
#define EXPECT_FAIL(call, st)                                                                     \
    do {                                                                                          \
        se_error e_;                                                                              \
        se_error_clear(&e_);                                                                      \
        CHECK((call) == (st));                                                                    \
        CHECK(e_.code == (st) && strlen(e_.message) > 10);                                        \
    } while (0)

static void test_errors(void)
{
    const se_sim_reflector good[2] = {{10.0, 0.2}, {20.0, -0.2}};
    se_sim_reflector bad[2];
    se_sim_interface *f = (se_sim_interface *)&f; /* must be reset to NULL on failure */
    se_sim_line l;
    se_sim_interface fi[3] = {{0.1, 0.2}, {0.2, 0.3}, {0.3, -1.0}};
    se_sim_line line = make_line(fi, 3, 0.0, 0.0);
    se_sim_arrival *a = NULL;
    size_t n = 0;
    se_sim_record rec, r;
    double buf[16];

    /* uniform line */
    EXPECT_FAIL(se_sim_uniform_line(100.0, good, 2, 15.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE); /* beyond */
    CHECK(f == NULL);
    EXPECT_FAIL(se_sim_uniform_line(100.0, good, 2, 20.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE); /* at end */
    bad[0] = good[0], bad[1] = good[0];
    EXPECT_FAIL(se_sim_uniform_line(100.0, bad, 2, 30.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE); /* same d */
    bad[1].reflection = 0.5; /* same distance, different coefficient */
    EXPECT_FAIL(se_sim_uniform_line(100.0, bad, 2, 30.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    bad[0] = good[0], bad[1] = good[1], bad[1].reflection = 1.0001;
    EXPECT_FAIL(se_sim_uniform_line(100.0, bad, 2, 30.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    bad[1].reflection = NAN;
    EXPECT_FAIL(se_sim_uniform_line(100.0, bad, 2, 30.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    bad[1] = good[1], bad[1].distance_m = INFINITY;
    EXPECT_FAIL(se_sim_uniform_line(100.0, bad, 2, 30.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    bad[1].distance_m = -5.0;
    EXPECT_FAIL(se_sim_uniform_line(100.0, bad, 2, 30.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    EXPECT_FAIL(se_sim_uniform_line(100.0, good, 2, 30.0, -1.5, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    EXPECT_FAIL(se_sim_uniform_line(100.0, good, 2, 30.0, 0.0, 2.0, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    EXPECT_FAIL(se_sim_uniform_line(100.0, good, 2, 30.0, 0.0, NAN, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    EXPECT_FAIL(se_sim_uniform_line(NAN, good, 2, 30.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    EXPECT_FAIL(se_sim_uniform_line(0.0, good, 2, 30.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    EXPECT_FAIL(se_sim_uniform_line(100.0, good, 2, INFINITY, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_RANGE);
    EXPECT_FAIL(se_sim_uniform_line(100.0, good, 2, 30.0, 0.0, 0.0, -0.1, &f, &l, &e_), SE_ERR_RANGE);
    EXPECT_FAIL(se_sim_uniform_line(100.0, good, 2, 30.0, 0.0, 0.0, INFINITY, &f, &l, &e_), SE_ERR_RANGE);
    EXPECT_FAIL(se_sim_uniform_line(100.0, NULL, 2, 30.0, 0.0, 0.0, 0.0, &f, &l, &e_), SE_ERR_ARG);
    EXPECT_FAIL(se_sim_uniform_line(100.0, good, 2, 30.0, 0.0, 0.0, 0.0, NULL, &l, &e_), SE_ERR_ARG);
    EXPECT_FAIL(se_sim_uniform_line(100.0, good, 2, 30.0, 0.0, 0.0, 0.0, &f, NULL, &e_), SE_ERR_ARG);
    CHECK(f == NULL);

    /* arrivals */
    {
        se_sim_line lb = line;
        se_sim_interface fb[3];
        EXPECT_FAIL(se_sim_arrivals(NULL, 1.0, Q48, &a, &n, &e_), SE_ERR_ARG);
        EXPECT_FAIL(se_sim_arrivals(&line, 1.0, Q48, NULL, &n, &e_), SE_ERR_ARG);
        EXPECT_FAIL(se_sim_arrivals(&line, 1.0, Q48, &a, NULL, &e_), SE_ERR_ARG);
        lb.n_interfaces = 0;
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_ARG);
        lb = line, lb.interfaces = NULL;
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_ARG);
        lb = line, lb.source_reflection = -1.01;
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        lb = line, lb.loss_np_per_s = -1.0;
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        lb = line, lb.loss_np_per_s = NAN;
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        memcpy(fb, fi, sizeof fb);
        lb = line, lb.interfaces = fb;
        fb[1].one_way_s = 0.1; /* not increasing */
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        fb[1].one_way_s = NAN;
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        fb[1].one_way_s = 0.2, fb[0].one_way_s = 0.0;
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        fb[0].one_way_s = 0.1, fb[2].reflection = -1.5;
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        fb[2].reflection = INFINITY;
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        fb[2].reflection = -1.0, fb[1].one_way_s = 0.1 + 0.3 * Q48; /* same cell as interface 0 */
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        fb[1].one_way_s = 0.2, fb[0].one_way_s = 0.2 * Q48; /* rounds to cell 0 */
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        fb[0].one_way_s = 1e9; /* beyond 2^52 cells */
        fb[1].one_way_s = 2e9, fb[2].one_way_s = 3e9;
        EXPECT_FAIL(se_sim_arrivals(&lb, 1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        EXPECT_FAIL(se_sim_arrivals(&line, -1.0, Q48, &a, &n, &e_), SE_ERR_RANGE);
        EXPECT_FAIL(se_sim_arrivals(&line, INFINITY, Q48, &a, &n, &e_), SE_ERR_RANGE);
        EXPECT_FAIL(se_sim_arrivals(&line, 1e12, Q48, &a, &n, &e_), SE_ERR_RANGE); /* > 2^52 cells */
        EXPECT_FAIL(se_sim_arrivals(&line, 1.0, 0.0, &a, &n, &e_), SE_ERR_RANGE);
        EXPECT_FAIL(se_sim_arrivals(&line, 1.0, NAN, &a, &n, &e_), SE_ERR_RANGE);
        EXPECT_FAIL(se_sim_arrivals_floor(&line, 1.0, Q48, 1.0, &a, &n, &e_), SE_ERR_RANGE);
        EXPECT_FAIL(se_sim_arrivals_floor(&line, 1.0, Q48, -1e-9, &a, &n, &e_), SE_ERR_RANGE);
        CHECK(a == NULL && n == 0);
    }

    /* a lossless line closed at both ends never empties: the arrival cap stops it */
    {
        const se_sim_interface fc = {1.0, -1.0};
        se_sim_line lc = make_line(&fc, 1, 1.0, 0.0);
        EXPECT_FAIL(se_sim_arrivals(&lc, 2.0 * (double)SE_SIM_MAX_ARRIVALS + 10.0, 1.0, &a, &n, &e_),
                    SE_ERR_NOMEM);
        CHECK(a == NULL && n == 0);
    }

    /* records */
    memset(&rec, 0, sizeof rec);
    rec.rate_hz = 1000.0;
    rec.duration_s = 0.01;
    rec.pulse.kind = SE_PULSE_HANN;
    rec.pulse.duration_s = 0.002;
    CHECK(se_sim_frames(&rec) == 11);
    CHECK(se_sim_frames(NULL) == 0);
    CHECK(se_simulate(&line, &rec, buf, buf, 11, NULL) == SE_OK);
    EXPECT_FAIL(se_simulate(&line, &rec, buf, buf, 12, &e_), SE_ERR_ARG);
    EXPECT_FAIL(se_simulate(NULL, &rec, buf, buf, 11, &e_), SE_ERR_ARG);
    EXPECT_FAIL(se_simulate(&line, NULL, buf, buf, 11, &e_), SE_ERR_ARG);
    r = rec, r.rate_hz = 0.0;
    CHECK(se_sim_frames(&r) == 0);
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.rate_hz = NAN;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.rate_hz = 2e9;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.duration_s = 0.0;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.duration_s = INFINITY;
    CHECK(se_sim_frames(&r) == 0);
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    /* 2^31 frames is the limit; one more is refused before anything is allocated */
    r = rec, r.rate_hz = 1e6, r.duration_s = 2147.483647;
    CHECK(se_sim_frames(&r) == ((size_t)1 << 31));
    r.duration_s = 2147.483648;
    CHECK(se_sim_frames(&r) == 0);
    EXPECT_FAIL(se_simulate(&line, &r, NULL, NULL, ((size_t)1 << 31) + 1, &e_), SE_ERR_NOMEM);
    r = rec, r.pulse_start_s = -0.001;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.pulse_start_s = 0.011;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.pulse_start_s = NAN;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.noise_rms = -0.1;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.noise_rms = INFINITY;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.oversample = 2000000;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.amplitude_floor = 1.0;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.amplitude_floor = NAN;
    EXPECT_FAIL(se_simulate(&line, &r, buf, buf, 11, &e_), SE_ERR_RANGE);
    r = rec, r.pulse.duration_s = 0.0;
    {
        se_error e_;
        CHECK(se_simulate(&line, &r, buf, buf, 11, &e_) != SE_OK);
    }
    r = rec, r.pulse.duration_s = NAN;
    {
        se_error e_;
        CHECK(se_simulate(&line, &r, buf, buf, 11, &e_) != SE_OK);
    }
    {
        se_sim_line lb = line;
        lb.source_reflection = 3.0;
        EXPECT_FAIL(se_simulate(&lb, &rec, buf, buf, 11, &e_), SE_ERR_RANGE);
    }
}

/* Speed: 60 s at 48 kHz (2.9 million frames), 10 interfaces, default 1024x cell and 1e-9 floor. */
static void test_speed(void)
{
    static const double cases[3][3] = {
        /* r_s, end r, loss dB/m */
        {0.0, -1.0, 0.0}, /* matched source, lossless, fixed far end */
        {1.0, -1.0, 1e-3}, /* free source end, fixed far end, a little loss */
        {0.5, 1.0, 2e-4},
    };
    const se_sim_reflector refl[9] = {{31.0, 0.08},  {77.0, -0.12}, {140.0, 0.05}, {201.0, -0.2},
                                      {260.0, 0.1},  {333.0, -0.07}, {400.0, 0.15}, {455.0, -0.1},
                                      {512.0, 0.06}};
    size_t c;
    for (c = 0; c < 3; c++) {
        se_sim_interface *f = NULL;
        se_sim_line l;
        se_sim_record rec;
        se_sim_arrival *a = NULL;
        size_t frames, n = 0;
        double *resp;
        struct timespec t0, t1;
        double dt;
        se_error err;
        CHECK(se_sim_uniform_line(4000.0, refl, 9, 600.0, cases[c][1], cases[c][0], cases[c][2], &f, &l, &err) ==
              SE_OK);
        memset(&rec, 0, sizeof rec);
        rec.rate_hz = 48000.0;
        rec.duration_s = 60.0;
        rec.pulse_start_s = 0.01;
        rec.pulse.kind = SE_PULSE_HANN;
        rec.pulse.duration_s = 0.0005;
        rec.noise_rms = 1e-3;
        frames = se_sim_frames(&rec);
        resp = malloc(frames * sizeof *resp);
        if (!CHECK(resp != NULL && f != NULL)) {
            free(resp), free(f);
            return;
        }
        clock_gettime(CLOCK_MONOTONIC, &t0);
        CHECK(se_simulate(&l, &rec, resp, NULL, frames, &err) == SE_OK);
        clock_gettime(CLOCK_MONOTONIC, &t1);
        dt = (double)(t1.tv_sec - t0.tv_sec) + 1e-9 * (double)(t1.tv_nsec - t0.tv_nsec);
        CHECK(se_sim_arrivals(&l, 60.0, Q48, &a, &n, &err) == SE_OK);
        printf("speed: 60 s at 48 kHz, 10 interfaces, r_s %+g, end %+g, %g dB/m: %zu arrivals, %.3f s\n",
               cases[c][0], cases[c][1], cases[c][2], n, dt);
        /* generous against sanitizer builds and a loaded machine; the figure is printed above */
        CHECK(dt < 10.0);
        free(a), free(resp), free(f);
    }
}

int main(void)
{
    test_one_reflector();
    test_end_repeats();
    test_two_reflectors();
    test_energy_balance();
    test_loss();
    test_dense_lattice();
    test_synthesis();
    test_noise();
    test_uniform_line();
    test_errors();
    test_speed();
    return se_test_done("test_simulate");
}
