/* strandecho tests: wave.h, speeds, impedances, reflection signs, terminations.
 * Each outside value carries its source (REFERENCE.md section 3). */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "strandecho/units.h"
#include "strandecho/wave.h"
#include "testutil.h"

typedef struct sign_case {
    se_quantity q;
    const char *name;
    int sign;
    int electrical;
} sign_case;

int main(void)
{
    /* REFERENCE.md section 1: displacement, velocity, acceleration, current carry the sign of
     * (Z1-Z2)/(Z1+Z2); force, strain, voltage the opposite (voltage: DOE/NEETRAC, Diagnostic
     * Testing of Underground Cable Systems, 2010, sec. 3.2). */
    static const sign_case signs[] = {
        {SE_Q_DISPLACEMENT, "displacement", 1, 0},
        {SE_Q_VELOCITY, "velocity", 1, 0},
        {SE_Q_ACCELERATION, "acceleration", 1, 0},
        {SE_Q_FORCE, "force", -1, 0},
        {SE_Q_STRAIN, "strain", -1, 0},
        {SE_Q_VOLTAGE, "voltage", -1, 1},
        {SE_Q_CURRENT, "current", 1, 1},
    };
    se_error err;
    se_quantity q;
    double v, t, r, z1, z2, mu;
    size_t i;

    CHECK(SE_SPEED_OF_LIGHT == 299792458.0); /* exact, BIPM SI Brochure, 9th ed., 2019 */

    /* Quantities: names, signs, electrical flag. */
    for (i = 0; i < sizeof signs / sizeof signs[0]; i++) {
        const sign_case *c = &signs[i];
        CHECK(se_quantity_parse(c->name, &q, NULL) == SE_OK && q == c->q);
        CHECK(strcmp(se_quantity_name(c->q), c->name) == 0);
        CHECK(se_quantity_sign(c->q) == c->sign);
        CHECK(se_quantity_is_electrical(c->q) == c->electrical);
        /* Fixed / open end (Z2 -> infinity): displacement R = -1, observed sign x -1. */
        CHECK(se_reflection_observed(c->q, 50.0, INFINITY) == -c->sign);
        /* Free / short end (Z2 -> 0): displacement R = +1. */
        CHECK(se_reflection_observed(c->q, 50.0, 0.0) == c->sign);
        CHECK_CLOSE(se_transmission_observed(c->q, 1.0, 3.0), 1.0 + c->sign * -0.5, 1e-15, c->name);
        CHECK(strcmp(se_class_name(c->q, 1), c->electrical ? "open-like" : "fixed-like") == 0);
        CHECK(strcmp(se_class_name(c->q, 0), c->electrical ? "short-like" : "free-like") == 0);
    }
    se_error_clear(&err);
    CHECK(se_quantity_parse("Velocity", &q, &err) == SE_ERR_ARG);
    CHECK(strstr(err.message, "unknown quantity 'Velocity' (use displacement, velocity") != NULL);
    CHECK(se_quantity_parse(NULL, &q, NULL) == SE_ERR_ARG);
    CHECK(se_quantity_name(SE_Q_COUNT) == NULL && se_quantity_sign(SE_Q_COUNT) == 0);
    CHECK(se_class_name(SE_Q_COUNT, 1) == NULL);
    CHECK(isnan(se_reflection_observed(SE_Q_COUNT, 1.0, 2.0)));
    /* Fixed end inverted in velocity, upright in force; open +1 in voltage, short -1
     * (REFERENCE.md section 1; DOE/NEETRAC 2010 sec. 3.2). */
    CHECK(se_reflection_observed(SE_Q_VELOCITY, 1.0, INFINITY) == -1.0);
    CHECK(se_reflection_observed(SE_Q_FORCE, 1.0, INFINITY) == 1.0);
    CHECK(se_reflection_observed(SE_Q_VOLTAGE, 50.0, INFINITY) == 1.0);
    CHECK(se_reflection_observed(SE_Q_VOLTAGE, 50.0, 0.0) == -1.0);
    /* Free end: the motion doubles at the end (transmission 1 + R = 2) [calc]. */
    CHECK(se_transmission_observed(SE_Q_VELOCITY, 1.0, 0.0) == 2.0);
    CHECK(se_transmission_displacement(1.0, INFINITY) == 0.0);

    /* T = 100 N, mu = 0.01 kg/m -> v = 100 m/s, Z = 1 N s/m [calc]. */
    v = se_speed_transverse(100.0, 0.01);
    CHECK_CLOSE(v, 100.0, 1e-12, "sqrt(100 / 0.01) [calc]");
    CHECK_CLOSE(se_impedance_mechanical(0.01, v), 1.0, 1e-14, "Z = mu v [calc]");
    CHECK_CLOSE(sqrt(100.0 * 0.01), se_impedance_mechanical(0.01, v), 1e-14, "Z = sqrt(T mu)");
    CHECK_CLOSE(100.0 / v, se_impedance_mechanical(0.01, v), 1e-14, "Z = T / v");

    /* Cord 0.300 kg over 6.00 m, 2.00 kg hanging: T 19.6 N, v 19.8 m/s, 5.00 m in 0.253 s
     * (Serway & Jewett, Physics for Scientists and Engineers, from memory; the book rounds g to
     * 9.80 m/s^2). */
    mu = 0.300 / 6.00;
    t = 2.00 * 9.80;
    CHECK_CLOSE(t, 19.6, 0.05, "Serway & Jewett cord tension (from memory)");
    CHECK_CLOSE(2.00 * SE_STANDARD_GRAVITY, 19.6, 0.05, "same with standard gravity");
    v = se_speed_transverse(t, mu);
    CHECK_CLOSE(v, 19.8, 0.05, "Serway & Jewett cord speed (from memory)");
    CHECK_CLOSE(5.00 / v, 0.253, 0.0005, "Serway & Jewett 5.00 m travel time (from memory)");

    /* Rope 2.00 kg over 80.0 m, 20.0 kg box: T 196 N, v 88.5 m/s (Young & Freedman, University
     * Physics, from memory; g = 9.80 m/s^2 as in the book). */
    t = 20.0 * 9.80;
    CHECK_CLOSE(t, 196.0, 0.5, "Young & Freedman rope tension (from memory)");
    CHECK_CLOSE(se_speed_transverse(t, 2.00 / 80.0), 88.5, 0.05,
                "Young & Freedman rope speed (from memory)");
    CHECK_CLOSE(se_tension_from_speed(2.00 / 80.0, 88.5), 196.0, 0.5, "T = mu v^2 back");

    /* Junction mu -> 4 mu at the same T: v halves, Z doubles: R = -1/3, transmission 2/3
     * (displacement) [calc, textbook exercise]. */
    z1 = se_impedance_mechanical(0.01, se_speed_transverse(100.0, 0.01));
    z2 = se_impedance_mechanical(0.04, se_speed_transverse(100.0, 0.04));
    CHECK_CLOSE(z2 / z1, 2.0, 1e-14, "Z doubles for 4 mu");
    CHECK_CLOSE(se_reflection_displacement(z1, z2), -1.0 / 3.0, 1e-15, "R = -1/3 [calc]");
    CHECK_CLOSE(se_transmission_displacement(z1, z2), 2.0 / 3.0, 1e-15, "T = 2/3 [calc]");
    CHECK_CLOSE(se_reflection_observed(SE_Q_FORCE, z1, z2), 1.0 / 3.0, 1e-15, "force R +1/3");
    CHECK_CLOSE(se_transmission_observed(SE_Q_FORCE, z1, z2), 4.0 / 3.0, 1e-15,
                "force transmission 2 Z2/(Z1+Z2) [calc]");
    CHECK_CLOSE(se_impedance_ratio(-1.0 / 3.0), 2.0, 1e-15, "Z2/Z1 from R = -1/3 [calc]");
    /* Energy: R^2 + (Z2/Z1) T^2 = 1 for any pair [calc]. */
    for (i = 0; i < 20; i++) {
        double a = 0.1 + 0.37 * (double)i, b = 3.0 / (1.0 + (double)i);
        double rr = se_reflection_displacement(a, b), tt = se_transmission_displacement(a, b);
        CHECK_CLOSE(rr * rr + b / a * tt * tt, 1.0, 1e-14, "energy balance");
        CHECK_CLOSE(se_impedance_ratio(rr), b / a, 1e-13 * b / a, "ratio from R round trip");
        CHECK_CLOSE(se_transmission_displacement(a, b), 1.0 + rr, 1e-15, "T = 1 + R");
    }
    CHECK(se_impedance_ratio(-1.0) == INFINITY && se_impedance_ratio(1.0) == 0.0);
    CHECK(se_impedance_ratio(0.0) == 1.0);
    CHECK(isnan(se_impedance_ratio(1.5)) && isnan(se_impedance_ratio(NAN)));
    CHECK(isnan(se_reflection_displacement(0.0, 0.0)));
    CHECK(isnan(se_reflection_displacement(-1.0, 2.0)));
    CHECK(isnan(se_reflection_displacement(INFINITY, INFINITY)));
    CHECK(se_reflection_displacement(INFINITY, 1.0) == 1.0);

    /* 50 -> 75 ohm: Gamma +0.200, return loss 13.98 dB, VSWR 1.50 [calc]. */
    r = se_reflection_observed(SE_Q_VOLTAGE, 50.0, 75.0);
    CHECK_CLOSE(r, 0.200, 1e-15, "50 -> 75 ohm Gamma_V [calc]");
    CHECK_CLOSE(se_return_loss_db(r), 13.98, 0.005, "return loss 13.98 dB [calc]");
    CHECK_CLOSE(se_vswr(r), 1.50, 1e-14, "VSWR 1.50 [calc]");
    CHECK(se_return_loss_db(0.0) == INFINITY && se_vswr(-1.0) == INFINITY);
    CHECK(isnan(se_vswr(1.1)) && isnan(se_return_loss_db(-2.0)));
    /* Shunt fault R_f = Z0 across the line: Gamma_V = -1/3; series R_s = Z0: +1/3 [calc,
     * REFERENCE.md section 1]. */
    CHECK_CLOSE(se_reflection_observed(SE_Q_VOLTAGE, 50.0, 50.0 * 50.0 / (50.0 + 50.0)), -1.0 / 3.0,
                1e-15, "shunt fault Gamma_V = -Z0/(2 Rf + Z0) [calc]");
    CHECK_CLOSE(se_reflection_observed(SE_Q_VOLTAGE, 50.0, 50.0 + 50.0), 1.0 / 3.0, 1e-15,
                "series fault Gamma_V = Rs/(Rs + 2 Z0) [calc]");

    /* VF = 1/sqrt(eps_r): solid PE 2.25 -> 0.667, PTFE 2.1 -> 0.690, foam PE 1.5 -> 0.816
     * (D.M. Pozar, Microwave Engineering; cable-material tables). */
    CHECK_CLOSE(se_velocity_factor_from_permittivity(2.25), 0.667, 0.0005, "solid PE (Pozar)");
    CHECK_CLOSE(se_velocity_factor_from_permittivity(2.1), 0.690, 0.0005, "PTFE (Pozar)");
    CHECK_CLOSE(se_velocity_factor_from_permittivity(1.5), 0.816, 0.0005, "foam PE (Pozar)");
    CHECK(se_velocity_factor_from_permittivity(1.0) == 1.0);
    CHECK(isnan(se_velocity_factor_from_permittivity(0.5)));
    /* VF 0.66 -> 197.863 m/us; a 1 us round trip is 98.93 m [calc from SI c]. */
    v = se_speed_electrical(0.66);
    CHECK_CLOSE(v / 1e6, 197.863, 0.0005, "VF 0.66 speed in m/us [calc from SI c]");
    CHECK_CLOSE(v * 1e-6 / 2.0, 98.93, 0.005, "1 us round trip at VF 0.66 [calc from SI c]");
    CHECK(se_speed_electrical(1.0) == SE_SPEED_OF_LIGHT);
    CHECK(isnan(se_speed_electrical(0.0)) && isnan(se_speed_electrical(1.01)));
    CHECK(isnan(se_speed_electrical(NAN)));

    /* Steel bar: sqrt(210e9 / 7850) = 5172 m/s, 5048 m/s at 200 GPa (EN 1993-1-1 E = 210 GPa,
     * from memory). EA / mu = E / rho for any cross-section; use A = 1e-4 m^2. */
    CHECK_CLOSE(se_speed_longitudinal(210e9 * 1e-4, 7850.0 * 1e-4), 5172.0, 0.5,
                "steel bar 5172 m/s (EN 1993-1-1 E, from memory)");
    CHECK_CLOSE(se_speed_longitudinal(200e9 * 1e-4, 7850.0 * 1e-4), 5048.0, 0.5,
                "steel bar 5048 m/s at 200 GPa");
    /* OC3 spar mooring line: 77.7066 kg/m, EA 384.243 MN -> 2223.7 m/s, 902.2 m round trip
     * 0.8114 s (J. Jonkman, NREL/TP-500-47535, 2010; calc). */
    v = se_speed_longitudinal(384.243e6, 77.7066);
    CHECK_CLOSE(v, 2223.7, 0.05, "OC3 mooring axial speed (NREL/TP-500-47535)");
    CHECK_CLOSE(2.0 * 902.2 / v, 0.8114, 0.00005, "OC3 round trip (NREL/TP-500-47535; calc)");

    /* Guy wire measured by pulse: 100 ft, 0.2264 lb/ft, round trip 0.75 s -> v 81.3 m/s,
     * T 500 lbf = 2226 N (amateur tower practice, mailing-list report, 2011, informal).
     * Units through units.h (NIST SP 811 B.8 foot, pound per foot, pound-force). */
    {
        double len, lbft, lbf;
        CHECK(se_unit_parse("100 ft", SE_UNIT_LENGTH, NULL, &len, NULL) == SE_OK);
        CHECK(se_unit_parse("0.2264 lb/ft", SE_UNIT_LINEAR_DENSITY, NULL, &lbft, NULL) == SE_OK);
        v = 2.0 * len / 0.75;
        CHECK_CLOSE(v, 81.3, 0.05, "guy wire speed (mailing-list report 2011)");
        t = se_tension_from_speed(lbft, v);
        CHECK_CLOSE(t, 2226.0, 1.0, "guy wire tension in N (mailing-list report 2011)");
        CHECK(se_unit_from_si(t, SE_UNIT_FORCE, "lbf", &lbf, NULL) == SE_OK);
        CHECK_CLOSE(lbf, 500.0, 1.0, "guy wire tension in lbf (mailing-list report 2011)");
        CHECK_CLOSE(se_speed_transverse(t, lbft), v, 1e-12 * v, "speed from tension back");
    }
    /* Guy strand 3/16 in EHS, 0.1086 kg/m, at 10 % of 17.748 kN MBL: v ~ 128 m/s (ASTM A475
     * table; TIA-222 10 % initial tension; calc). */
    CHECK_CLOSE(se_speed_transverse(0.10 * 17748.0, 0.1086), 128.0, 0.5,
                "3/16 in EHS guy at 10 % MBL (ASTM A475, TIA-222; calc)");

    /* Speeds refuse bad inputs. */
    CHECK(isnan(se_speed_transverse(0.0, 1.0)) && isnan(se_speed_transverse(1.0, -1.0)));
    CHECK(isnan(se_speed_transverse(INFINITY, 1.0)) && isnan(se_speed_transverse(NAN, 1.0)));
    CHECK(isnan(se_speed_longitudinal(1.0, 0.0)) && isnan(se_impedance_mechanical(0.0, 1.0)));
    CHECK(isnan(se_tension_from_speed(1.0, 0.0)));

    /* Terminations in every quantity. */
    for (i = 0; i < sizeof signs / sizeof signs[0]; i++) {
        const sign_case *c = &signs[i];
        double rf, ro, rfr, rs, rm, rc;
        CHECK(se_termination_parse("fixed", c->q, &rf, NULL) == SE_OK && rf == -c->sign);
        CHECK(se_termination_parse("open", c->q, &ro, NULL) == SE_OK && ro == rf);
        CHECK(se_termination_parse("free", c->q, &rfr, NULL) == SE_OK && rfr == c->sign);
        CHECK(se_termination_parse("short", c->q, &rs, NULL) == SE_OK && rs == rfr);
        CHECK(se_termination_parse("matched", c->q, &rm, NULL) == SE_OK && rm == 0.0);
        CHECK(se_termination_parse("continuing", c->q, &rc, NULL) == SE_OK && rc == 0.0);
        CHECK(!signbit(rm) && !signbit(rc));
        /* The named value agrees with the impedance formula. */
        CHECK(rf == se_reflection_observed(c->q, 1.0, INFINITY));
        CHECK(rfr == se_reflection_observed(c->q, 1.0, 0.0));
        /* Numbers are taken as observed, whatever the quantity. */
        CHECK(se_termination_parse("-0.35", c->q, &r, NULL) == SE_OK && r == -0.35);
    }
    CHECK(se_termination_parse("fixed", SE_Q_VELOCITY, &r, NULL) == SE_OK && r == -1.0);
    CHECK(se_termination_parse("fixed", SE_Q_FORCE, &r, NULL) == SE_OK && r == 1.0);
    CHECK(se_termination_parse("open", SE_Q_VOLTAGE, &r, NULL) == SE_OK && r == 1.0);
    CHECK(se_termination_parse("short", SE_Q_VOLTAGE, &r, NULL) == SE_OK && r == -1.0);
    CHECK(se_termination_parse("50 %", SE_Q_VOLTAGE, &r, NULL) == SE_OK && r == 0.5);
    CHECK(se_termination_parse("1", SE_Q_FORCE, &r, NULL) == SE_OK && r == 1.0);
    se_error_clear(&err);
    CHECK(se_termination_parse("1.5", SE_Q_FORCE, &r, &err) == SE_ERR_RANGE);
    CHECK(strstr(err.message, "outside [-1, 1]") != NULL);
    se_error_clear(&err);
    CHECK(se_termination_parse("clamp", SE_Q_VELOCITY, &r, &err) == SE_ERR_ARG);
    CHECK(strstr(err.message, "unknown termination 'clamp' (use fixed, free, open, short") != NULL);
    CHECK(se_termination_parse("nan", SE_Q_VELOCITY, &r, NULL) == SE_ERR_ARG);
    CHECK(se_termination_parse("fixed", SE_Q_COUNT, &r, NULL) == SE_ERR_ARG);
    CHECK(se_termination_parse(NULL, SE_Q_FORCE, &r, NULL) == SE_ERR_ARG);

    /* Range checks. */
    CHECK(se_check_speed(SE_SPEED_OF_LIGHT, NULL) == SE_OK);
    CHECK(se_check_speed(4000.0, NULL) == SE_OK);
    se_error_clear(&err);
    CHECK(se_check_speed(3.1e8, &err) == SE_ERR_RANGE);
    CHECK(strstr(err.message, "faster than light (299792458 m/s)") != NULL);
    CHECK(se_check_speed(0.0, NULL) == SE_ERR_RANGE && se_check_speed(-5.0, NULL) == SE_ERR_RANGE);
    CHECK(se_check_speed(NAN, NULL) == SE_ERR_RANGE);
    CHECK(se_check_speed(INFINITY, NULL) == SE_ERR_RANGE);
    CHECK(se_check_velocity_factor(0.66, NULL) == SE_OK &&
          se_check_velocity_factor(1.0, NULL) == SE_OK);
    CHECK(se_check_velocity_factor(0.0, NULL) == SE_ERR_RANGE);
    CHECK(se_check_velocity_factor(1.2, NULL) == SE_ERR_RANGE);
    CHECK(se_check_positive(500.0, "tension", "N", NULL) == SE_OK);
    se_error_clear(&err);
    CHECK(se_check_positive(-3.0, "tension", "N", &err) == SE_ERR_RANGE);
    CHECK(strcmp(err.message, "tension -3 N must be positive and finite") == 0);
    CHECK(se_check_positive(INFINITY, "EA", "N", NULL) == SE_ERR_RANGE);

    return se_test_done("test_wave");
}
