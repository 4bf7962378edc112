/* Delay <-> distance map: uniform and piecewise lines, Steffen pieces, uncertainty combination. */
#include <math.h>
#include <stdio.h>

#include <gsl/gsl_errno.h>

#include "strandecho/distmap.h"
#include "testutil.h"

/* Uniform line: d = v t / 2 exactly [calc, REFERENCE.md 1], bounded and unbounded. */
static void test_uniform(void)
{
    const double v = 0.66 * 299792458.0; /* VF 0.66 of c (BIPM SI brochure, 2019) */
    const double ts[] = {0.0, 1e-9, 1e-6, 3.3e-6, 9.9e-6};
    se_distmap *m = se_distmap_create_uniform(v, 0.02, 1000.0, NULL);
    se_distmap *u = se_distmap_create_uniform(v, 0.02, INFINITY, NULL);
    size_t i;
    CHECK(m != NULL && u != NULL);
    if (m == NULL || u == NULL)
        goto done;
    for (i = 0; i < sizeof ts / sizeof ts[0]; i++) {
        double d = NAN, du = NAN, t = NAN, sig = NAN;
        CHECK(se_distmap_distance(m, ts[i], &d, NULL) == SE_OK);
        CHECK(se_distmap_distance(u, ts[i], &du, NULL) == SE_OK);
        CHECK_CLOSE(d, v * ts[i] / 2.0, 1e-12 * (1.0 + d), "bounded uniform d = v t / 2");
        CHECK_CLOSE(du, v * ts[i] / 2.0, 1e-12 * (1.0 + d), "unbounded uniform d = v t / 2");
        CHECK(se_distmap_time(m, d, &t, NULL) == SE_OK);
        CHECK_CLOSE(t, ts[i], 1e-12 * (1e-6 + ts[i]), "uniform t(d(t)) = t");
        CHECK(se_distmap_distance_sigma(m, ts[i], &sig, NULL) == SE_OK);
        CHECK_CLOSE(sig, 0.02 * d, 1e-12 * (1.0 + d), "uniform sigma_d = e d");
    }
    /* a 1 us round trip at VF 0.66 is 98.93 m (REFERENCE.md 3 [calc]) */
    {
        double d = NAN;
        CHECK(se_distmap_distance(u, 1e-6, &d, NULL) == SE_OK);
        CHECK_CLOSE(d, 98.93, 0.005, "1 us at VF 0.66");
    }
    CHECK_CLOSE(se_distmap_length(m), 1000.0, 0.0, "length");
    CHECK_CLOSE(se_distmap_round_trip(m), 2000.0 / v, 1e-18, "round trip");
    CHECK(isinf(se_distmap_length(u)));
done:
    se_distmap_destroy(m);
    se_distmap_destroy(u);
}

/* Two uniform pieces: 100 m at 1000 m/s then 200 m at 2000 m/s, 1 % and 2 % speed uncertainty. */
static void test_two_pieces(void)
{
    double s1[2] = {0.0, 100.0}, t1[2] = {0.0, 0.2}, s2[2] = {0.0, 200.0}, t2[2] = {0.0, 0.2};
    se_distmap_piece pc[2] = {{2, s1, t1, 0.01}, {2, s2, t2, 0.02}};
    se_distmap *m = se_distmap_create(pc, 2, NULL);
    double d = NAN, t = NAN, sig = NAN, v = NAN;
    CHECK(m != NULL);
    if (m == NULL)
        return;
    /* piecewise [calc]: t(150) = 2*100/1000 + 2*50/2000 = 0.25 s */
    CHECK(se_distmap_time(m, 150.0, &t, NULL) == SE_OK);
    CHECK_CLOSE(t, 0.25, 1e-15, "t(150 m)");
    CHECK(se_distmap_distance(m, 0.25, &d, NULL) == SE_OK);
    CHECK_CLOSE(d, 150.0, 1e-12, "d(0.25 s)");
    CHECK(se_distmap_distance(m, 0.1, &d, NULL) == SE_OK);
    CHECK_CLOSE(d, 50.0, 1e-12, "d(0.1 s) in the first piece");
    CHECK(se_distmap_distance(m, 0.2, &d, NULL) == SE_OK);
    CHECK_CLOSE(d, 100.0, 1e-12, "junction");
    /* uncertainty: correlated in a piece, independent between: sqrt((0.01*100)^2 + (0.02*50)^2) [calc] */
    CHECK(se_distmap_distance_sigma(m, 0.25, &sig, NULL) == SE_OK);
    CHECK_CLOSE(sig, sqrt(2.0), 1e-12, "sigma_d at 150 m");
    CHECK(se_distmap_distance_sigma(m, 0.1, &sig, NULL) == SE_OK);
    CHECK_CLOSE(sig, 0.5, 1e-12, "sigma_d at 50 m");
    CHECK(se_distmap_time_sigma(m, 150.0, &sig, NULL) == SE_OK);
    CHECK_CLOSE(sig, sqrt(pow(0.01 * 0.2, 2) + pow(0.02 * 0.05, 2)), 1e-15, "sigma_t at 150 m");
    CHECK(se_distmap_speed(m, 50.0, &v, NULL) == SE_OK);
    CHECK_CLOSE(v, 1000.0, 1e-9, "speed in piece 1");
    CHECK(se_distmap_speed(m, 250.0, &v, NULL) == SE_OK);
    CHECK_CLOSE(v, 2000.0, 1e-9, "speed in piece 2");
    CHECK(se_distmap_piece_at(m, 99.0) == 0 && se_distmap_piece_at(m, 101.0) == 1);
    /* beyond the end: extrapolated with the last piece's speed (a multiple of the end) */
    CHECK(se_distmap_distance(m, 0.5, &d, NULL) == SE_OK);
    CHECK_CLOSE(d, 400.0, 1e-9, "beyond the end");
    se_distmap_destroy(m);
}

/* A Steffen piece from a speed profile v(s) = sqrt(g s) (vertical free chain): t(s) = 4 sqrt(s/g)
 * two-way [calc]. Tabulated with quadratic spacing; interpolation error and t -> s -> t round trip. */
static void test_steffen_piece(void)
{
    enum { N = 161 };
    double s[N], t[N], L = 100.0, g = 9.80665, worst = 0.0;
    se_distmap_piece pc;
    se_distmap *m;
    size_t i;
    for (i = 0; i < N; i++) {
        double q = (double)i / (N - 1);
        s[i] = L * q * q;
        t[i] = 4.0 * sqrt(s[i] / g);
    }
    pc.n = N;
    pc.s = s;
    pc.t = t;
    pc.speed_uncertainty = 0.0;
    m = se_distmap_create(&pc, 1, NULL);
    CHECK(m != NULL);
    if (m == NULL)
        return;
    for (i = 1; i < 200; i++) {
        double tt = se_distmap_round_trip(m) * i / 200.0, d = NAN, back = NAN, exact;
        CHECK(se_distmap_distance(m, tt, &d, NULL) == SE_OK);
        CHECK(se_distmap_time(m, d, &back, NULL) == SE_OK);
        if (fabs(back - tt) > 1e-9 * tt)
            CHECK_CLOSE(back, tt, 1e-9 * tt, "t -> s -> t");
        exact = g * tt * tt / 16.0;
        if (fabs(d - exact) > worst)
            worst = fabs(d - exact);
    }
    CHECK(worst < 1e-3); /* Steffen vs the exact inverse, metres over 100 m */
    se_distmap_destroy(m);
}

static void test_errors(void)
{
    double s[3] = {0.0, 2.0, 1.0}, t[3] = {0.0, 1.0, 2.0}, d;
    se_distmap_piece pc = {3, s, t, 0.0};
    se_error err;
    se_distmap *m;
    se_error_clear(&err);
    CHECK(se_distmap_create(&pc, 1, &err) == NULL && err.code == SE_ERR_ARG); /* not increasing */
    CHECK(se_distmap_create_uniform(0.0, 0.0, 1.0, &err) == NULL && err.code == SE_ERR_RANGE);
    CHECK(se_distmap_create_uniform(1.0, -0.1, 1.0, &err) == NULL && err.code == SE_ERR_RANGE);
    m = se_distmap_create_uniform(1000.0, 0.0, 10.0, NULL);
    CHECK(m != NULL);
    if (m != NULL) {
        CHECK(se_distmap_distance(m, -1.0, &d, &err) == SE_ERR_RANGE);
        CHECK(se_distmap_time(m, NAN, &d, &err) == SE_ERR_RANGE);
        se_distmap_destroy(m);
    }
}

int main(void)
{
    gsl_set_error_handler_off();
    test_uniform();
    test_two_pieces();
    test_steffen_piece();
    test_errors();
    return se_test_done("test_distmap");
}
