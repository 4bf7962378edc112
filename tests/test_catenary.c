/* Elastic catenary: limits with known answers, Irvine's equations, the seabed part, errors. */
#include <math.h>
#include <stdio.h>

#include <gsl/gsl_errno.h>

#include "strandecho/catenary.h"
#include "strandecho/wave.h"
#include "testutil.h"

static se_catenary *make(double L, double w, double ea, double h, double top, double va, double lb, double depth,
                         double cb)
{
    se_catenary_config cfg;
    se_error err;
    se_catenary *c;
    se_catenary_config_init(&cfg);
    cfg.length_m = L;
    cfg.weight_n_m = w;
    cfg.ea_n = ea;
    cfg.horizontal_tension_n = h;
    cfg.top_tension_n = top;
    cfg.lower_vertical_n = va;
    cfg.seabed_length_m = lb;
    cfg.depth_m = depth;
    cfg.seabed_friction = cb;
    se_error_clear(&err);
    c = se_catenary_create(&cfg, &err);
    if (c == NULL)
        fprintf(stderr, "catenary_create: %s\n", err.message);
    return c;
}

/* w -> 0: the line is straight with uniform tension, t = L sqrt(mu / T) [calc, REFERENCE.md 1]. */
static void test_weightless_limit(void)
{
    double L = 500.0, mu = 20.0, T = 2.0e5, t = NAN;
    se_catenary *c = make(L, 1e-9, INFINITY, T, NAN, NAN, NAN, NAN, 0.0);
    CHECK(c != NULL);
    if (c == NULL)
        return;
    CHECK(se_catenary_transverse_time(c, mu, 0.0, L, &t, NULL) == SE_OK);
    CHECK_CLOSE(t / (L * sqrt(mu / T)), 1.0, 1e-10, "w -> 0 one-way time / L sqrt(mu/T)");
    se_catenary_destroy(c);
}

/* A chain hanging free (H = 0, V_A = 0, T = mu g s): one-way time 2 sqrt(L/g) [calc, REFERENCE.md 1].
 * This is the case the u = sqrt(s) substitution exists for: the integrand 1/sqrt(g s) is singular. */
static void test_vertical_free_chain(void)
{
    const double g = SE_STANDARD_GRAVITY, mu = 7.5;
    const double lengths[] = {1.0, 37.0, 1200.0};
    size_t i;
    for (i = 0; i < sizeof lengths / sizeof lengths[0]; i++) {
        double L = lengths[i], t = NAN, half = NAN, x, z;
        se_catenary *c = make(L, mu * g, INFINITY, 0.0, NAN, NAN, NAN, NAN, 0.0);
        CHECK(c != NULL);
        if (c == NULL)
            continue;
        CHECK(se_catenary_transverse_time(c, mu, 0.0, L, &t, NULL) == SE_OK);
        CHECK_CLOSE(t / (2.0 * sqrt(L / g)), 1.0, 1e-10, "vertical chain one-way time / 2 sqrt(L/g)");
        /* lower half: 2 sqrt((L/2)/g) as well [calc] */
        CHECK(se_catenary_transverse_time(c, mu, 0.0, L / 2.0, &half, NULL) == SE_OK);
        CHECK_CLOSE(half / (2.0 * sqrt(L / 2.0 / g)), 1.0, 1e-10, "vertical chain lower half");
        CHECK_CLOSE(se_catenary_tension(c, L), mu * g * L, 1e-9 * mu * g * L, "top tension = weight");
        se_catenary_position(c, L, &x, &z);
        CHECK_CLOSE(x, 0.0, 1e-12, "vertical chain has no span");
        CHECK_CLOSE(z, L, 1e-9 * L, "inextensible vertical chain rises L");
        se_catenary_destroy(c);
    }
}

/* H = 0, V_A > 0: T = V_A + w s, t = 2 sqrt(mu) / w (sqrt(V_A + w L) - sqrt(V_A)) [calc]. */
static void test_vertical_with_load(void)
{
    double L = 80.0, w = 500.0, va = 3000.0, mu = 60.0, t = NAN;
    double want = 2.0 * sqrt(mu) / w * (sqrt(va + w * L) - sqrt(va));
    se_catenary *c = make(L, w, INFINITY, 0.0, NAN, va, NAN, NAN, 0.0);
    CHECK(c != NULL);
    if (c == NULL)
        return;
    CHECK(se_catenary_transverse_time(c, mu, 0.0, L, &t, NULL) == SE_OK);
    CHECK_CLOSE(t / want, 1.0, 1e-10, "vertical line with a clump: closed-form time");
    se_catenary_destroy(c);
}

/* Irvine's equations (H. M. Irvine, Cable Structures, 1981): T(s) = sqrt(H^2 + (V_A + w s)^2), and
 * the geometry obeys dx/ds = H (1/T + 1/EA), dz/ds = (V_A + w s)(1/T + 1/EA) (Irvine's Lagrangian
 * equilibrium with Hooke's law). Checked by central differences of x(s), z(s) at several points. */
static void test_irvine_profile(void)
{
    double L = 900.0, w = 700.0, ea = 4.0e8, H = 4.0e5, top = 8.0e5;
    double vtop = sqrt(top * top - H * H), va = vtop - w * L;
    const double s_pts[] = {0.0, 0.13, 150.0, 450.0, 777.7, 900.0};
    size_t i;
    se_catenary_info info;
    se_catenary *c = make(L, w, ea, H, top, NAN, NAN, NAN, 0.0);
    CHECK(c != NULL);
    if (c == NULL)
        return;
    se_catenary_get_info(c, &info);
    CHECK_CLOSE(info.lower_vertical_n, va, 1e-9 * top, "V_A from both tensions");
    CHECK_CLOSE(info.top_tension_n, top, 1e-9 * top, "top tension reproduced");
    for (i = 0; i < sizeof s_pts / sizeof s_pts[0]; i++) {
        double s = s_pts[i], v = va + w * s, T = sqrt(H * H + v * v);
        CHECK_CLOSE(se_catenary_tension(c, s), T, 1e-9 * T, "T(s) = sqrt(H^2 + (V_A + w s)^2)");
        if (s > 1.0 && s < L - 1.0) {
            double h = 1e-3, x1, z1, x2, z2;
            se_catenary_position(c, s - h, &x1, &z1);
            se_catenary_position(c, s + h, &x2, &z2);
            CHECK_CLOSE((x2 - x1) / (2 * h), H * (1.0 / T + 1.0 / ea), 1e-7, "dx/ds = H (1/T + 1/EA)");
            CHECK_CLOSE((z2 - z1) / (2 * h), v * (1.0 / T + 1.0 / ea), 1e-7, "dz/ds = V (1/T + 1/EA)");
        }
    }
    se_catenary_destroy(c);
}

/* Inextensible catenary touching down (V_A = 0): z = (H/w)(cosh(w x / H) - 1) (Irvine 1981, the
 * classical catenary). */
static void test_classic_catenary(void)
{
    double L = 600.0, w = 1000.0, H = 2.5e5;
    const double s_pts[] = {10.0, 200.0, 599.0};
    size_t i;
    se_catenary *c = make(L, w, INFINITY, H, NAN, NAN, NAN, NAN, 0.0);
    CHECK(c != NULL);
    if (c == NULL)
        return;
    for (i = 0; i < sizeof s_pts / sizeof s_pts[0]; i++) {
        double x, z;
        se_catenary_position(c, s_pts[i], &x, &z);
        CHECK_CLOSE(z, (H / w) * (cosh(w * x / H) - 1.0), 1e-8 * (H / w), "z = (H/w)(cosh(w x/H) - 1)");
    }
    se_catenary_destroy(c);
}

/* Seabed: the tension falls by C_B w per metre towards the anchor (Jonkman, NREL/TP-500-41958);
 * the time over a frictionless seabed part is L_B sqrt(mu / H) [calc]. Depth mode: Brent finds the
 * suspended length so the suspended part rises the given depth. */
static void test_seabed_and_depth(void)
{
    double L = 800.0, w = 1200.0, H = 3.0e5, lb = 250.0, mu = 140.0, t = NAN, t_all = NAN, t_susp = NAN;
    se_catenary_info info;
    se_catenary *c = make(L, w, INFINITY, H, NAN, NAN, lb, NAN, 0.0), *d, *f;
    CHECK(c != NULL);
    if (c == NULL)
        return;
    CHECK(se_catenary_transverse_time(c, mu, 0.0, lb, &t, NULL) == SE_OK);
    CHECK_CLOSE(t, lb * sqrt(mu / H), 1e-12, "frictionless seabed time");
    CHECK(se_catenary_transverse_time(c, mu, 0.0, L, &t_all, NULL) == SE_OK);
    CHECK(se_catenary_transverse_time(c, mu, lb, L, &t_susp, NULL) == SE_OK);
    CHECK_CLOSE(t_all, t + t_susp, 1e-12 * t_all, "times add over the touchdown");
    se_catenary_get_info(c, &info);
    CHECK_CLOSE(info.anchor_tension_n, H, 1e-9, "no friction: anchor tension H");

    /* the same line given by top tension and depth instead of on_seabed */
    d = make(L, w, INFINITY, NAN, info.top_tension_n, NAN, NAN, info.depth_m, 0.0);
    CHECK(d != NULL);
    if (d != NULL) {
        se_catenary_info di;
        se_catenary_get_info(d, &di);
        CHECK_CLOSE(di.seabed_length_m, lb, 1e-6, "depth mode recovers the seabed length");
        CHECK_CLOSE(di.horizontal_tension_n, H, 1e-6 * H, "depth mode recovers H");
        CHECK_CLOSE(di.depth_m, info.depth_m, 1e-9 * info.depth_m, "depth reached");
        se_catenary_destroy(d);
    }

    f = make(L, w, INFINITY, H, NAN, NAN, lb, NAN, 0.4);
    CHECK(f != NULL);
    if (f != NULL) {
        double tf = NAN, a0 = H - 0.4 * w * lb, b = 0.4 * w;
        CHECK_CLOSE(se_catenary_tension(f, 0.0), a0, 1e-9, "anchor tension H - C_B w L_B");
        CHECK_CLOSE(se_catenary_tension(f, lb), H, 1e-9, "touchdown tension H");
        CHECK(se_catenary_transverse_time(f, mu, 0.0, lb, &tf, NULL) == SE_OK);
        /* integral of sqrt(mu / (a0 + b s)) ds [calc] */
        CHECK_CLOSE(tf, 2.0 * sqrt(mu) / b * (sqrt(a0 + b * lb) - sqrt(a0)), 1e-12, "seabed time with friction");
        se_catenary_destroy(f);
    }
    se_catenary_destroy(c);
}

static void test_errors(void)
{
    se_catenary_config cfg;
    se_error err;
    se_catenary *c;
    double t;
    /* top tension below the suspended weight */
    c = make(100.0, 1000.0, INFINITY, NAN, 5.0e4, NAN, NAN, NAN, 0.0);
    CHECK(c == NULL);
    se_catenary_config_init(&cfg);
    cfg.length_m = 100.0;
    cfg.weight_n_m = 10.0;
    se_error_clear(&err);
    CHECK(se_catenary_create(&cfg, &err) == NULL && err.code == SE_ERR_ARG); /* no tension at all */
    cfg.horizontal_tension_n = 100.0;
    cfg.weight_n_m = -1.0;
    CHECK(se_catenary_create(&cfg, &err) == NULL && err.code == SE_ERR_RANGE);
    /* friction that leaves the anchor end slack: transverse waves cannot cross it */
    c = make(500.0, 1000.0, INFINITY, 1.0e4, NAN, NAN, 200.0, NAN, 1.0);
    CHECK(c != NULL);
    if (c != NULL) {
        se_error_clear(&err);
        CHECK(se_catenary_transverse_time(c, 100.0, 0.0, 500.0, &t, &err) == SE_ERR_RANGE);
        se_catenary_destroy(c);
    }
}

int main(void)
{
    gsl_set_error_handler_off();
    test_weightless_limit();
    test_vertical_free_chain();
    test_vertical_with_load();
    test_irvine_profile();
    test_classic_catenary();
    test_seabed_and_depth();
    test_errors();
    return se_test_done("test_catenary");
}
