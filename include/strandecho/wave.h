/* strandecho: wave speeds, impedances and reflection signs on lines.
 *
 * Conventions (REFERENCE.md section 1). A wave going from impedance Z1 into Z2 is reflected with
 * the displacement-convention coefficient R = (Z1 - Z2)/(Z1 + Z2) in displacement, velocity,
 * acceleration (mechanical) and current (electrical), and with the opposite sign in force,
 * strain (mechanical) and voltage (electrical). So a clamp or fixed end (Z2 -> infinity) is
 * inverted in velocity and upright in force, an open circuit (Z2 -> infinity) is upright in
 * voltage (+1), a short (Z2 -> 0) inverted (-1). Transmission in the observed quantity is
 * 1 + R_observed. Units: m/s, kg/m, N, N s/m or ohm. No state; every function is reentrant.
 */
#ifndef SE_WAVE_H
#define SE_WAVE_H

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Speed of light in vacuum, m/s, exact (BIPM, The International System of Units, 9th ed., 2019). */
#define SE_SPEED_OF_LIGHT 299792458.0
/* Standard acceleration of gravity, m/s^2, exact by definition (NIST SP 811, 2008). */
#define SE_STANDARD_GRAVITY 9.80665

/* What the sensor records. */
typedef enum se_quantity {
    SE_Q_DISPLACEMENT,
    SE_Q_VELOCITY,
    SE_Q_ACCELERATION,
    SE_Q_FORCE,
    SE_Q_STRAIN,
    SE_Q_VOLTAGE,
    SE_Q_CURRENT,
    SE_Q_COUNT /* sentinel: number of quantities, not a quantity */
} se_quantity;

/* Parse a lower-case name: "displacement", "velocity", "acceleration", "force", "strain",
 * "voltage", "current". Returns SE_OK or SE_ERR_ARG (the message lists the names). */
se_status se_quantity_parse(const char *name, se_quantity *q, se_error *err);

/* Lower-case name of q; NULL out of range. Static string. */
const char *se_quantity_name(se_quantity q);

/* +1 when a recorded echo carries the sign of the displacement-convention coefficient
 * (Z1-Z2)/(Z1+Z2): displacement, velocity, acceleration, current; -1 for force, strain,
 * voltage; 0 for q out of range. */
int se_quantity_sign(se_quantity q);

/* 1 for voltage and current, else 0. */
int se_quantity_is_electrical(se_quantity q);

/* Transverse speed sqrt(T / mu), m/s. NaN unless T > 0 (N) and mu > 0 (kg/m), both finite. */
double se_speed_transverse(double tension_n, double mu_kg_m);

/* Longitudinal (axial) speed sqrt(EA / mu), m/s; EA in N, mu in kg/m. NaN unless both > 0 and
 * finite. For a bar, EA / mu = E / rho. */
double se_speed_longitudinal(double ea_n, double mu_kg_m);

/* Electrical line speed VF c, m/s. NaN unless 0 < VF <= 1. */
double se_speed_electrical(double velocity_factor);

/* Velocity factor 1 / sqrt(eps_r) of a line in a uniform dielectric (D.M. Pozar, Microwave
 * Engineering). NaN unless eps_r >= 1 and finite. */
double se_velocity_factor_from_permittivity(double eps_r);

/* Tension that gives transverse speed v on a line of mu: T = mu v^2 (N). NaN unless both > 0. */
double se_tension_from_speed(double mu_kg_m, double speed_m_s);

/* Mechanical impedance mu v (N s/m); equal to sqrt(T mu) = T / v for a string. NaN unless both
 * > 0 and finite. */
double se_impedance_mechanical(double mu_kg_m, double speed_m_s);

/* Displacement-convention reflection (Z1 - Z2)/(Z1 + Z2) for a wave going from Z1 into Z2.
 * Z >= 0, +INFINITY allowed (a rigid end gives -1, Z1 infinite gives +1). NaN for negative or NaN
 * impedances, Z1 = Z2 = 0 or both infinite. */
double se_reflection_displacement(double z1, double z2);

/* Displacement-convention transmission 2 Z1/(Z1 + Z2) = 1 + R (same domain). */
double se_transmission_displacement(double z1, double z2);

/* Reflection seen in quantity q: se_quantity_sign(q) x (Z1 - Z2)/(Z1 + Z2). NaN for bad q. */
double se_reflection_observed(se_quantity q, double z1, double z2);

/* Transmission seen in quantity q: 1 + se_reflection_observed(q, z1, z2). */
double se_transmission_observed(se_quantity q, double z1, double z2);

/* Impedance ratio Z2/Z1 from a displacement-convention coefficient: (1 - R)/(1 + R).
 * R = -1 gives +INFINITY, R = +1 gives 0; NaN outside [-1, 1]. */
double se_impedance_ratio(double r_displacement);

/* Return loss -20 log10 |Gamma| in dB (+INFINITY for Gamma = 0); NaN unless |Gamma| <= 1. */
double se_return_loss_db(double gamma);

/* Voltage standing wave ratio (1 + |Gamma|)/(1 - |Gamma|); +INFINITY at |Gamma| = 1; NaN unless
 * |Gamma| <= 1. */
double se_vswr(double gamma);

/* Class words for an impedance step: increase -> "fixed-like" (mechanical) / "open-like"
 * (electrical), decrease -> "free-like" / "short-like". Static string; NULL for bad q. */
const char *se_class_name(se_quantity q, int impedance_increase);

/* A named termination or a number, to the reflection coefficient seen in quantity q:
 * "fixed", "free", "open", "short", "matched", "continuing" (0), or a number in [-1, 1] (also
 * as "50%") taken as already in the observed convention. fixed/open are impedance -> infinity,
 * free/short impedance -> 0; electrical names on mechanical quantities (and the reverse) are
 * accepted and equivalent (open == fixed, short == free). So "fixed" is -1 in velocity and +1 in
 * force; "open" is +1 in voltage, "short" -1.
 * Returns SE_OK; SE_ERR_ARG for NULL, an unknown name or bad q; SE_ERR_RANGE for a number
 * outside [-1, 1]. */
se_status se_termination_parse(const char *text, se_quantity q, double *r_observed, se_error *err);

/* Range checks used by the CLI. Each returns SE_OK or SE_ERR_RANGE with a message naming the
 * value and the limit. */
se_status se_check_speed(double v, se_error *err);            /* 0 < v <= c, m/s */
se_status se_check_velocity_factor(double vf, se_error *err); /* 0 < VF <= 1 */
/* what > 0 and finite; what/unit name the value in the message, e.g. ("tension", "N"). */
se_status se_check_positive(double value, const char *what, const char *unit, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_WAVE_H */
