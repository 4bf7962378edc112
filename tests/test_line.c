/* Line model: segment speeds and impedances against trade values, hanging segments, expected
 * events, lattice interfaces and calibration. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "strandecho/line.h"
#include "testutil.h"

/* One-segment line from a few values; NULL on failure (message printed). */
static se_line *one_segment(se_wave_kind wave, se_quantity q, double L, double mu, double T, double ea,
                            double diameter, const char *end)
{
    se_error err;
    se_segment seg;
    se_line *line;
    se_error_clear(&err);
    line = se_line_create("test", wave, q, &err);
    if (line == NULL)
        return NULL;
    se_segment_init(&seg);
    seg.name = (char *)"only";
    seg.length_m = L;
    seg.mass_per_length_kg_m = mu;
    seg.tension_n = T;
    seg.axial_stiffness_n = ea;
    seg.diameter_m = diameter;
    if (se_line_add_segment(line, &seg, &err) != SE_OK || se_line_set_end(line, end, &err) != SE_OK ||
        se_line_prepare(line, &err) != SE_OK) {
        fprintf(stderr, "one_segment: %s\n", err.message);
        se_line_free(line);
        return NULL;
    }
    return line;
}

typedef struct speed_case {
    const char *what;
    se_wave_kind wave;
    double mu, T, ea;
    double speed, speed_tol, round_trip_len, round_trip, rt_tol;
} speed_case;

static void test_speeds(void)
{
    /* d in metres for the coefficient formulas */
    const double dc = 0.1, dw = 0.05, dp = 0.16;
    const speed_case cases[] = {
        /* T = 100 N, mu = 0.01 kg/m: v = 100 m/s, Z = 1 N s/m [calc, REFERENCE.md 3] */
        {"string 100 N / 0.01 kg/m", SE_WAVE_TRANSVERSE, 0.01, 100.0, NAN, 100.0, 1e-12, 0, 0, 0},
        /* rope 2.00 kg over 80.0 m, T = 196 N: v 88.5 m/s (Young & Freedman, University Physics [mem]) */
        {"rope 2 kg / 80 m at 196 N", SE_WAVE_TRANSVERSE, 2.0 / 80.0, 196.0, NAN, 88.5, 0.05, 0, 0, 0},
        /* studless chain 20.0e3 d^2 kg/m, EA 85.6e9 d^2 N: ~2069 m/s for any d (DNV-OS-E301 via NREL
         * open mooring property coefficients [pub; calc]) */
        {"studless chain d = 0.1 m", SE_WAVE_LONGITUDINAL, 20.0e3 * dc * dc, NAN, 85.6e9 * dc * dc, 2069.0, 0.5, 0,
         0, 0},
        /* spiral strand 5293 d^2 kg/m, EA 97.1e9 d^2 N: ~4283 m/s (NREL open mooring coefficients [pub]) */
        {"spiral strand d = 0.05 m", SE_WAVE_LONGITUDINAL, 5293.0 * dw * dw, NAN, 97.1e9 * dw * dw, 4283.0, 0.5, 0, 0,
         0},
        /* polyester 679 d^2 kg/m, EA ~ 14 MBL, MBL 308e6 d^2 N (same source [pub]): sqrt(14*308e6/679)
         * = 2520 m/s [calc] */
        {"polyester d = 0.16 m", SE_WAVE_LONGITUDINAL, 679.0 * dp * dp, NAN, 14.0 * 308e6 * dp * dp, 2520.0, 0.5, 0,
         0, 0},
        /* OC3 spar line: 77.7066 kg/m, EA 384.243 MN, 902.2 m: 2223.7 m/s, round trip 0.8114 s
         * (J. Jonkman, NREL/TP-500-47535, 2010 [pub; calc]) */
        {"OC3 mooring line", SE_WAVE_LONGITUDINAL, 77.7066, NAN, 384.243e6, 2223.7, 0.05, 902.2, 0.8114, 0.00005},
        /* OC4 semi line: 113.35 kg/m, EA 753.6 MN: 2578.5 m/s (A. Robertson et al., NREL/TP-5000-60601 [pub; calc]) */
        {"OC4 mooring line", SE_WAVE_LONGITUDINAL, 113.35, NAN, 753.6e6, 2578.5, 0.05, 0, 0, 0},
    };
    size_t i;
    for (i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        const speed_case *c = &cases[i];
        double L = c->round_trip_len > 0 ? c->round_trip_len : 100.0;
        se_line *line = one_segment(c->wave, c->wave == SE_WAVE_TRANSVERSE ? SE_Q_VELOCITY : SE_Q_FORCE, L, c->mu,
                                    c->T, c->ea, NAN, "fixed");
        const se_segment *s;
        CHECK(line != NULL);
        if (line == NULL)
            continue;
        s = &line->segments[0];
        CHECK_CLOSE(s->speed_m_s, c->speed, c->speed_tol, c->what);
        /* Z = mu v = sqrt(T mu) or sqrt(EA mu) (REFERENCE.md 1) */
        CHECK_CLOSE(s->impedance_near, c->mu * s->speed_m_s, 1e-9 * s->impedance_near, "Z = mu v");
        CHECK_CLOSE(s->impedance_near,
                    sqrt((c->wave == SE_WAVE_TRANSVERSE ? c->T : c->ea) * c->mu), 1e-9 * s->impedance_near,
                    "Z = sqrt(T mu)");
        if (c->round_trip > 0)
            CHECK_CLOSE(line->round_trip_s, c->round_trip, c->rt_tol, "OC3 round trip over 902.2 m");
        se_line_free(line);
    }
}

/* Added mass in water for transverse waves: mu_eff = mu + C_a rho_w pi D^2 / 4, C_a = 1, seawater
 * 1025 kg/m^3 (Bureau Veritas NR493 via open mooring models, REFERENCE.md 1). */
static void test_added_mass(void)
{
    double mu = 6.2, D = 0.12, T = 6.4e5, mu_eff = mu + 1025.0 * 3.14159265358979 * D * D / 4.0;
    se_line *wet = one_segment(SE_WAVE_TRANSVERSE, SE_Q_VELOCITY, 900.0, mu, T, NAN, D, "fixed");
    se_line *axial = one_segment(SE_WAVE_LONGITUDINAL, SE_Q_VELOCITY, 900.0, mu, NAN, 1.0e8, D, "fixed");
    CHECK(wet != NULL && axial != NULL);
    if (wet != NULL) {
        CHECK_CLOSE(wet->segments[0].mu_eff_kg_m, mu_eff, 1e-9, "added mass");
        CHECK_CLOSE(wet->segments[0].speed_m_s, sqrt(T / mu_eff), 1e-9, "transverse speed with added mass");
    }
    if (axial != NULL)
        CHECK_CLOSE(axial->segments[0].mu_eff_kg_m, mu, 0.0, "no added mass for axial waves");
    se_line_free(wet);
    se_line_free(axial);
}

/* Chain - polyester - chain leg (longitudinal), the junction signs in velocity and in force:
 * chain -> polyester is an impedance decrease (free-like): + in velocity, - in force; polyester ->
 * chain an increase (fixed-like): - in velocity, + in force (REFERENCE.md 1, reflection signs). */
static void test_leg_events(void)
{
    const se_quantity qs[2] = {SE_Q_VELOCITY, SE_Q_FORCE};
    const double dc = 0.076, dp = 0.16;
    const double mu_c = 20.0e3 * dc * dc, ea_c = 85.6e9 * dc * dc, mu_p = 679.0 * dp * dp,
                 ea_p = 14.0 * 308e6 * dp * dp;
    const double zc = sqrt(ea_c * mu_c), zp = sqrt(ea_p * mu_p), rd = (zc - zp) / (zc + zp);
    const double lens[3] = {120.0, 900.0, 300.0};
    size_t qi;
    for (qi = 0; qi < 2; qi++) {
        se_error err;
        se_line *line = se_line_create("leg", SE_WAVE_LONGITUDINAL, qs[qi], &err);
        se_segment seg;
        se_feature shackle = {(char *)"mid shackle", (char *)"shackle", 60.0, 1, -0.1, 0, 0};
        se_expected_event *ev = NULL;
        size_t n = 0, k;
        double sign = qs[qi] == SE_Q_VELOCITY ? 1.0 : -1.0, trans, v_c, v_p, t_expect;
        CHECK(line != NULL);
        if (line == NULL)
            continue;
        for (k = 0; k < 3; k++) {
            se_segment_init(&seg);
            seg.name = (char *)(k == 0 ? "upper chain" : k == 1 ? "polyester" : "ground chain");
            seg.length_m = lens[k];
            seg.mass_per_length_kg_m = k == 1 ? mu_p : mu_c;
            seg.axial_stiffness_n = k == 1 ? ea_p : ea_c;
            seg.speed_uncertainty = k == 1 ? 0.05 : 0.01;
            if (k == 0) {
                seg.features = &shackle;
                seg.n_features = 1;
            }
            CHECK(se_line_add_segment(line, &seg, &err) == SE_OK);
        }
        CHECK(se_line_set_end(line, "fixed", &err) == SE_OK);
        if (se_line_prepare(line, &err) != SE_OK) {
            fprintf(stderr, "prepare: %s\n", err.message);
            CHECK(0);
            se_line_free(line);
            continue;
        }
        CHECK(se_line_expected_events(line, &ev, &n, &err) == SE_OK);
        CHECK(n == 4);
        if (n != 4) {
            free(ev);
            se_line_free(line);
            continue;
        }
        v_c = sqrt(ea_c / mu_c);
        v_p = sqrt(ea_p / mu_p);
        CHECK(ev[0].type == SE_EVENT_FEATURE && strcmp(ev[0].name, "mid shackle") == 0);
        CHECK_CLOSE(ev[0].distance_m, 60.0, 1e-12, "shackle distance");
        CHECK_CLOSE(ev[0].round_trip_s, 120.0 / v_c, 1e-12, "shackle delay 2 x 60 / v");
        CHECK(ev[1].type == SE_EVENT_JUNCTION && strcmp(ev[1].name, "upper chain / polyester") == 0);
        CHECK_CLOSE(ev[1].reflection, sign * rd, 1e-12, "chain -> polyester coefficient");
        CHECK(qs[qi] == SE_Q_VELOCITY ? ev[1].reflection > 0 : ev[1].reflection < 0);
        CHECK(ev[2].type == SE_EVENT_JUNCTION);
        CHECK_CLOSE(ev[2].reflection, -sign * rd, 1e-12, "polyester -> chain coefficient");
        CHECK(qs[qi] == SE_Q_VELOCITY ? ev[2].reflection < 0 : ev[2].reflection > 0);
        CHECK(ev[3].type == SE_EVENT_END);
        CHECK_CLOSE(ev[3].reflection, -sign, 0.0, "fixed end: -1 in velocity, +1 in force");
        CHECK_CLOSE(ev[3].distance_m, 1320.0, 1e-9, "end distance");
        t_expect = 2.0 * (420.0 / v_c + 900.0 / v_p);
        CHECK_CLOSE(ev[3].round_trip_s, t_expect, 1e-12, "end delay");
        /* two-way transmission: prod (1 - r^2) over the shackle and both junctions [calc] */
        trans = (1.0 - 0.01) * (1.0 - rd * rd) * (1.0 - rd * rd);
        CHECK_CLOSE(ev[3].transmission, trans, 1e-12, "end transmission");
        CHECK_CLOSE(ev[3].amplitude, -sign * trans, 1e-12, "end amplitude at the sensor");
        CHECK_CLOSE(ev[2].amplitude, -sign * rd * (1.0 - 0.01) * (1.0 - rd * rd), 1e-12, "second junction amplitude");
        /* per-event time uncertainty: sqrt((0.01 t_chain)^2 + (0.05 t_poly)^2) [calc] */
        CHECK_CLOSE(ev[2].round_trip_sigma_s, sqrt(pow(0.01 * 240.0 / v_c, 2) + pow(0.05 * 1800.0 / v_p, 2)), 1e-12,
                    "delay uncertainty at the second junction");
        CHECK_CLOSE(ev[2].distance_sigma_m, sqrt(pow(0.01 * 120.0, 2) + pow(0.05 * 900.0, 2)), 1e-9,
                    "distance uncertainty at the second junction");
        {
            double d = NAN;
            CHECK(se_line_event_distance(line, "polyester / ground chain", &d, NULL) == SE_OK);
            CHECK_CLOSE(d, 1020.0, 1e-12, "junction by name");
            CHECK(se_line_event_distance(line, "no such thing", &d, &err) == SE_ERR_NOTFOUND);
        }
        free(ev);
        se_line_free(line);
    }
}

/* mu -> 4 mu at the same tension: R = -1/3, transmission 2/3 in displacement (textbook exercise [calc]). */
static void test_string_junction(void)
{
    se_error err;
    se_line *line = se_line_create("string", SE_WAVE_TRANSVERSE, SE_Q_DISPLACEMENT, &err);
    se_segment seg;
    se_expected_event *ev = NULL;
    size_t n = 0, k;
    CHECK(line != NULL);
    if (line == NULL)
        return;
    for (k = 0; k < 2; k++) {
        se_segment_init(&seg);
        seg.name = (char *)(k == 0 ? "light" : "heavy");
        seg.length_m = 10.0;
        seg.mass_per_length_kg_m = k == 0 ? 0.01 : 0.04;
        seg.tension_n = 100.0;
        CHECK(se_line_add_segment(line, &seg, &err) == SE_OK);
    }
    CHECK(se_line_set_end(line, "free", &err) == SE_OK);
    CHECK(se_line_prepare(line, &err) == SE_OK);
    CHECK(se_line_expected_events(line, &ev, &n, &err) == SE_OK);
    if (n == 2) {
        CHECK_CLOSE(ev[0].reflection, -1.0 / 3.0, 1e-15, "mu -> 4 mu: R = -1/3");
        CHECK_CLOSE(ev[1].transmission, 8.0 / 9.0, 1e-15, "(1 + R)(1 - R) = 2/3 x 4/3");
        CHECK_CLOSE(ev[1].reflection, 1.0, 0.0, "free end +1 in displacement");
    } else {
        CHECK(n == 2);
    }
    free(ev);
    se_line_free(line);
}

/* A hanging transverse segment: the w -> 0 limit gives the uniform time, the free vertical chain
 * 2 sqrt(L/g) one way [calc, REFERENCE.md 1]; the distance map follows the speed profile. */
static void test_hanging_segment(void)
{
    se_error err;
    const double L = 200.0, mu = 50.0, g = 9.80665;
    se_line *line = se_line_create("vertical", SE_WAVE_TRANSVERSE, SE_Q_VELOCITY, &err);
    se_segment seg;
    se_line_point pt;
    double d = NAN, t = NAN, back = NAN;
    size_t i;
    CHECK(line != NULL);
    if (line == NULL)
        return;
    se_segment_init(&seg);
    seg.name = (char *)"hanging chain";
    seg.length_m = L;
    seg.mass_per_length_kg_m = mu;
    seg.hanging.enabled = 1;
    seg.hanging.weight_in_water_n_m = mu * g; /* weight in air: a chain hanging in a shaft */
    seg.hanging.horizontal_tension_n = 0.0;
    CHECK(se_line_add_segment(line, &seg, &err) == SE_OK);
    CHECK(se_line_set_end(line, "free", &err) == SE_OK);
    if (se_line_prepare(line, &err) != SE_OK) {
        fprintf(stderr, "hanging prepare: %s\n", err.message);
        CHECK(0);
        se_line_free(line);
        return;
    }
    CHECK_CLOSE(line->segments[0].one_way_s, 2.0 * sqrt(L / g), 1e-9, "hanging free chain one-way time");
    CHECK_CLOSE(line->round_trip_s, 4.0 * sqrt(L / g), 1e-9, "round trip");
    /* sensor at the top (near end): T at depth x below the top is mu g (L - x) */
    CHECK(se_line_profile(line, 50.0, &pt, NULL) == SE_OK);
    CHECK_CLOSE(pt.tension_n, mu * g * 150.0, 1e-6, "tension 50 m below the top");
    CHECK_CLOSE(pt.speed_m_s, sqrt(g * 150.0), 1e-9, "speed 50 m below the top");
    CHECK_CLOSE(pt.impedance, mu * sqrt(g * 150.0), 1e-6, "impedance 50 m below the top");
    /* delay to depth x: 2 (2 sqrt(L/g) - 2 sqrt((L - x)/g)) [calc] */
    CHECK(se_distmap_time(se_line_distmap(line), 50.0, &t, NULL) == SE_OK);
    CHECK_CLOSE(t, 4.0 * (sqrt(L / g) - sqrt(150.0 / g)), 1e-6, "delay to 50 m");
    for (i = 1; i < 50; i++) {
        double tt = line->round_trip_s * (double)i / 50.0;
        CHECK(se_distmap_distance(se_line_distmap(line), tt, &d, NULL) == SE_OK);
        CHECK(se_distmap_time(se_line_distmap(line), d, &back, NULL) == SE_OK);
        if (fabs(back - tt) > 1e-9 * tt)
            CHECK_CLOSE(back, tt, 1e-9 * tt, "t -> s -> t on a hanging line");
        /* exact inverse: d = L - g (2 sqrt(L/g) - tt/2)^2 / 4 [calc] */
        if (fabs(d - (L - g * pow(2.0 * sqrt(L / g) - tt / 2.0, 2) / 4.0)) > 1e-3)
            CHECK_CLOSE(d, L - g * pow(2.0 * sqrt(L / g) - tt / 2.0, 2) / 4.0, 1e-3, "hanging distance vs exact");
    }
    se_line_free(line);
}

/* Lattice interfaces of a hanging segment: the product of (1 - r)/(1 + r) over its steps telescopes
 * to Z_last / Z_first (displacement convention, Z2/Z1 = (1 - R)/(1 + R), REFERENCE.md 1). */
static void test_interfaces(void)
{
    se_error err;
    se_line *line = se_line_parse_string("wave: transverse\nquantity: velocity\nsegments:\n"
                                         "  - name: taut\n    length: 100 m\n    mass_per_length: 40 kg/m\n"
                                         "    tension: 200 kN\n    features:\n      - at: 40 m\n"
                                         "        kind: clamp\n        reflection: -0.2\n      - at: 70 m\n"
                                         "        kind: mark\n"
                                         "  - name: catenary\n    length: 400 m\n    mass_per_length: 40 kg/m\n"
                                         "    hanging:\n      weight_in_water: 340 N/m\n"
                                         "      horizontal_tension: 150 kN\n      on_seabed: 100 m\n"
                                         "end: fixed\n",
                                         "interfaces.yaml", &err);
    se_line_interface *itf = NULL;
    size_t n = 0, i, steps = 0;
    int sorted = 1;
    double step = 1e-3, prod = 1.0, zf, zl;
    CHECK(line != NULL);
    if (line == NULL) {
        fprintf(stderr, "%s\n", err.message);
        return;
    }
    CHECK(se_line_interfaces(line, step, &itf, &n, &err) == SE_OK);
    steps = (size_t)ceil(line->segments[1].one_way_s / step);
    /* clamp + junction + (steps - 1) inner steps + end; the mark has no coefficient */
    CHECK(n == 1 + 1 + (steps - 1) + 1);
    for (i = 0; i + 1 < n; i++) {
        if (!(itf[i].one_way_s <= itf[i + 1].one_way_s))
            sorted = 0;
        if (itf[i].segment == 1 && itf[i].type == SE_EVENT_JUNCTION)
            prod *= (1.0 - itf[i].reflection) / (1.0 + itf[i].reflection);
    }
    CHECK(sorted);
    CHECK(n > 0 && itf[n - 1].type == SE_EVENT_END && itf[n - 1].reflection == -1.0);
    CHECK(itf[0].type == SE_EVENT_FEATURE && itf[0].reflection == -0.2);
    {
        se_line_point a, b;
        double t0 = line->segments[1].start_round_trip_s, tau = line->segments[1].one_way_s, da, db;
        CHECK(se_distmap_distance(se_line_distmap(line), t0 + 2.0 * tau * 0.5 / steps, &da, NULL) == SE_OK);
        CHECK(se_distmap_distance(se_line_distmap(line), t0 + 2.0 * tau * (steps - 0.5) / steps, &db, NULL) == SE_OK);
        CHECK(se_line_profile(line, da, &a, NULL) == SE_OK && se_line_profile(line, db, &b, NULL) == SE_OK);
        zf = a.impedance;
        zl = b.impedance;
        CHECK_CLOSE(prod, zl / zf, 1e-9, "steps telescope to Z_last / Z_first");
        CHECK(zl < zf); /* tension falls towards the touchdown */
    }
    free(itf);
    se_line_free(line);
}

/* Calibration on a known end recovers the speed used to make the "measurement". */
static void test_calibration(void)
{
    se_error err;
    se_calibration cal;
    se_line *line = one_segment(SE_WAVE_LONGITUDINAL, SE_Q_FORCE, 902.2, 77.7066, NAN, 384.243e6, NAN, "free");
    se_line *two;
    const char *key;
    double v_true, tm, value;
    CHECK(line != NULL);
    if (line == NULL)
        return;
    v_true = 1.03 * line->segments[0].speed_m_s;
    tm = 2.0 * 902.2 / v_true;
    CHECK(se_line_calibrate(line, 902.2, 0.0, tm, 1e-5, SE_LINE_ALL_SEGMENTS, &cal, &err) == SE_OK);
    CHECK_CLOSE(cal.scale, 1.03, 1e-12, "scale recovered");
    CHECK_CLOSE(cal.scale_sigma, 1.03 * 1e-5 / tm, 1e-15, "sigma_k = k sigma_t / t");
    CHECK(se_line_calibrated_value(line, 0, cal.scale, &key, &value, &err) == SE_OK);
    CHECK(strcmp(key, "axial_stiffness") == 0);
    CHECK_CLOSE(value, 1.03 * 1.03 * 384.243e6, 1e-3, "EA scales as k^2");
    CHECK(se_line_apply_scale(line, SE_LINE_ALL_SEGMENTS, cal.scale, &err) == SE_OK);
    CHECK_CLOSE(line->round_trip_s, tm, 1e-15, "calibrated round trip matches");
    se_line_free(line);

    /* two segments, only the second one's speed is off by 5 % */
    two = se_line_parse_string("wave: electrical\nquantity: voltage\nsegments:\n"
                               "  - name: a\n    length: 300 m\n    velocity_factor: 0.66\n"
                               "    speed_uncertainty: 1 %\n"
                               "  - name: b\n    length: 200 m\n    velocity_factor: 0.5\nend: open\n",
                               "two.yaml", &err);
    CHECK(two != NULL);
    if (two == NULL) {
        fprintf(stderr, "%s\n", err.message);
        return;
    }
    tm = 2.0 * 300.0 / (0.66 * 299792458.0) + 2.0 * 200.0 / (0.5 * 1.05 * 299792458.0);
    CHECK(se_line_calibrate(two, 500.0, 0.0, tm, 0.0, 1, &cal, &err) == SE_OK);
    CHECK_CLOSE(cal.scale, 1.05, 1e-12, "one-segment scale recovered");
    /* only segment a's 1 % enters: sigma_k = k t_a 0.01 / (t_m - t_a) [calc] */
    {
        double ta = 2.0 * 300.0 / (0.66 * 299792458.0);
        CHECK_CLOSE(cal.scale_sigma, 1.05 * ta * 0.01 / (tm - ta), 1e-12, "other segment's uncertainty enters");
    }
    CHECK(se_line_calibrated_value(two, 1, cal.scale, &key, &value, &err) == SE_OK);
    CHECK(strcmp(key, "velocity_factor") == 0);
    CHECK_CLOSE(value, 0.525, 1e-12, "VF 0.5 x 1.05");
    CHECK(se_line_calibrated_value(two, 0, 1.6, &key, &value, &err) == SE_ERR_RANGE); /* VF > 1 */
    CHECK(se_line_calibrate(two, 100.0, 0.0, tm, 0.0, 1, &cal, &err) == SE_ERR_RANGE); /* before segment b */
    se_line_free(two);
}

/* Through the line model: a hanging segment with w -> 0 takes the uniform time L sqrt(mu/T), and
 * `lower_end: near` turns the profile round (REFERENCE.md 1 checks [calc]); a depth-given leg. */
static void test_hanging_options(void)
{
    se_error err;
    se_line *flat = se_line_parse_string("wave: transverse\nquantity: velocity\nsegments:\n"
                                         "  - name: uniform\n    length: 250 m\n    mass_per_length: 30 kg/m\n"
                                         "    tension: 90 kN\n"
                                         "  - name: nearly weightless\n    length: 250 m\n"
                                         "    mass_per_length: 30 kg/m\n    hanging:\n"
                                         "      weight_in_water: 0.000001 N/m\n      horizontal_tension: 90 kN\n"
                                         "end: fixed\n",
                                         "flat.yaml", &err);
    se_line *up = se_line_parse_string("wave: transverse\nquantity: force\nsegments:\n"
                                       "  - name: chain in a shaft\n    length: 80 m\n    mass_per_length: 20 kg/m\n"
                                       "    hanging:\n      weight_in_water: 196.133 N/m\n"
                                       "      horizontal_tension: 0 N\n      lower_end: near\n"
                                       "end: fixed\n",
                                       "up.yaml", &err);
    se_line *deep = se_line_parse_string("wave: transverse\nquantity: velocity\nsegments:\n"
                                         "  - name: leg\n    length: 900 m\n    mass_per_length: 100 kg/m\n"
                                         "    hanging:\n      weight_in_water: 850 N/m\n"
                                         "      top_tension: 400 kN\n      depth: 150 m\n"
                                         "end: fixed\n",
                                         "deep.yaml", &err);
    se_line_point pt;
    CHECK(flat != NULL && up != NULL && deep != NULL);
    if (flat != NULL) {
        CHECK_CLOSE(flat->segments[1].one_way_s / flat->segments[0].one_way_s, 1.0, 1e-9, "w -> 0 in a line");
        CHECK_CLOSE(flat->segments[0].one_way_s, 250.0 * sqrt(30.0 / 90e3), 1e-12, "L sqrt(mu/T)");
    }
    if (up != NULL) {
        /* sensor at the free lower end: T = mu g x at x metres from the sensor */
        CHECK(se_line_profile(up, 50.0, &pt, NULL) == SE_OK);
        CHECK_CLOSE(pt.tension_n, 196.133 * 50.0, 1e-6, "lower_end near: tension grows from the sensor");
        CHECK_CLOSE(up->segments[0].one_way_s, 2.0 * sqrt(80.0 / 9.80665), 1e-9, "2 sqrt(L/g) from below");
    }
    if (deep != NULL) {
        se_catenary_info info;
        se_catenary_get_info(deep->segments[0].catenary, &info);
        CHECK_CLOSE(info.depth_m, 150.0, 1e-8, "depth reached");
        CHECK_CLOSE(info.top_tension_n, 400e3, 1e-6, "top tension kept");
        CHECK(info.seabed_length_m > 0.0 && info.seabed_length_m < 900.0);
    }
    se_line_free(flat);
    se_line_free(up);
    se_line_free(deep);
}

/* Calibration to a named feature (a marked splice at 300 m). */
static void test_calibrate_feature(void)
{
    se_error err;
    se_calibration cal;
    double d = NAN, v;
    se_line *line = se_line_parse_string("wave: longitudinal\nquantity: strain\nsegments:\n"
                                         "  - name: rope\n    length: 800 m\n    mass_per_length: 9 kg/m\n"
                                         "    axial_stiffness: 40 MN\n    speed_uncertainty: 4 %\n"
                                         "    features:\n      - at: 500 m\n        kind: mark\n"
                                         "      - at: 300 m\n        kind: splice\n        name: marked splice\n"
                                         "end: free\n",
                                         "rope.yaml", &err);
    CHECK(line != NULL);
    if (line == NULL)
        return;
    CHECK(strcmp(line->segments[0].features[0].name, "marked splice") == 0); /* sorted by position */
    CHECK(se_line_event_distance(line, "marked splice", &d, &err) == SE_OK);
    CHECK_CLOSE(d, 300.0, 0.0, "feature distance by name");
    v = 0.97 * sqrt(40e6 / 9.0);
    CHECK(se_line_calibrate(line, d, 0.5, 2.0 * d / v, 0.0, SE_LINE_ALL_SEGMENTS, &cal, &err) == SE_OK);
    CHECK_CLOSE(cal.scale, 0.97, 1e-12, "scale from the splice");
    /* sigma_k from the distance alone: (2/v_line) sigma_d / t_meas = 0.97 x 0.5 / 300 [calc] */
    CHECK_CLOSE(cal.scale_sigma, 0.97 * 0.5 / 300.0, 1e-12, "sigma_k from the known distance");
    se_line_free(line);
}

/* Skin loss on a line: the length-weighted mean K, the exact round-trip loss to a distance, and
 * the checks on a segment's K (line.h se_line_skin_loss, se_line_skin_path). */
static void test_skin_loss(void)
{
    se_error err;
    se_segment seg;
    se_line *line, *mech;
    double k = -1.0, a = -1.0;
    se_error_clear(&err);
    line = se_line_create("cable", SE_WAVE_ELECTRICAL, SE_Q_VOLTAGE, &err);
    CHECK(line != NULL);
    if (line == NULL)
        return;
    se_segment_init(&seg);
    CHECK(seg.skin_loss_s05_per_m == 0.0);
    seg.name = (char *)"thin";
    seg.length_m = 100.0;
    seg.velocity_factor = 0.66;
    seg.impedance_given = 50.0;
    seg.skin_loss_s05_per_m = 1e-6;
    CHECK(se_line_add_segment(line, &seg, &err) == SE_OK);
    seg.name = (char *)"thick";
    seg.length_m = 300.0;
    seg.skin_loss_s05_per_m = 4e-7;
    CHECK(se_line_add_segment(line, &seg, &err) == SE_OK);
    CHECK(se_line_set_end(line, "open", &err) == SE_OK);
    CHECK(se_line_skin_loss(line, &k, &err) == SE_ERR_ARG && strstr(err.message, "prepared") != NULL);
    CHECK(se_line_skin_path(line, 10.0, &a, NULL) == SE_ERR_ARG && a == -1.0);
    CHECK(se_line_prepare(line, &err) == SE_OK);
    /* (1e-6 x 100 + 4e-7 x 300) / 400 = 5.5e-7 s^0.5/m [calc] */
    CHECK(se_line_skin_loss(line, &k, &err) == SE_OK);
    CHECK_CLOSE(k, 5.5e-7, 1e-20, "length-weighted mean K");
    /* round trip: a = 2 x integral of K: 2 x 1e-6 x 50; 2 (1e-4 + 4e-7 x 150); 2 x 2.2e-4 [calc] */
    CHECK(se_line_skin_path(line, 50.0, &a, &err) == SE_OK);
    CHECK_CLOSE(a, 1e-4, 1e-18, "a to 50 m");
    CHECK(se_line_skin_path(line, 250.0, &a, &err) == SE_OK);
    CHECK_CLOSE(a, 3.2e-4, 1e-18, "a to 250 m");
    CHECK(se_line_skin_path(line, 400.0, &a, &err) == SE_OK);
    CHECK_CLOSE(a, 4.4e-4, 1e-18, "a to the end");
    /* the mean K over the whole length gives the far end's loss exactly */
    CHECK_CLOSE(a, 2.0 * k * line->length_m, 1e-18, "mean K exact at the far end");
    CHECK(se_line_skin_path(line, 0.0, &a, &err) == SE_OK && a == 0.0);
    CHECK(se_line_skin_path(line, 400.1, &a, &err) == SE_ERR_RANGE && strstr(err.message, "400.1") != NULL);
    CHECK(se_line_skin_path(line, -1.0, &a, &err) == SE_ERR_RANGE);
    CHECK(se_line_skin_path(line, NAN, &a, &err) == SE_ERR_RANGE);
    CHECK(se_line_skin_loss(NULL, &k, &err) == SE_ERR_ARG);
    CHECK(se_line_skin_loss(line, NULL, &err) == SE_ERR_ARG);
    /* a negative or absurd K is refused when the line is prepared */
    line->segments[1].skin_loss_s05_per_m = -1e-7;
    CHECK(se_line_prepare(line, &err) == SE_ERR_RANGE && strstr(err.message, "segment 'thick'") != NULL &&
          strstr(err.message, "skin_loss") != NULL);
    line->segments[1].skin_loss_s05_per_m = NAN;
    CHECK(se_line_prepare(line, &err) == SE_ERR_RANGE);
    line->segments[1].skin_loss_s05_per_m = 0.0;
    line->segments[0].skin_loss_s05_per_m = 0.0;
    CHECK(se_line_prepare(line, &err) == SE_OK);
    CHECK(se_line_skin_loss(line, &k, &err) == SE_OK && k == 0.0);
    se_line_free(line);

    /* a mechanical line has no skin loss */
    mech = one_segment(SE_WAVE_TRANSVERSE, SE_Q_VELOCITY, 100.0, 10.0, 1e4, NAN, NAN, "fixed");
    CHECK(mech != NULL);
    if (mech != NULL) {
        CHECK(se_line_skin_loss(mech, &k, &err) == SE_OK && k == 0.0);
        mech->segments[0].skin_loss_s05_per_m = 4e-7;
        CHECK(se_line_prepare(mech, &err) == SE_ERR_ARG &&
              strstr(err.message, "skin_loss applies to electrical segments") != NULL);
        se_line_free(mech);
    }
}

int main(void)
{
    gsl_set_error_handler_off();
    test_speeds();
    test_added_mass();
    test_leg_events();
    test_string_junction();
    test_hanging_segment();
    test_interfaces();
    test_calibration();
    test_hanging_options();
    test_calibrate_feature();
    test_skin_loss();
    return se_test_done("test_line");
}
