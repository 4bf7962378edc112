/* strandecho: wave speeds, impedances and reflection signs on lines. */
#include <math.h>
#include <string.h>

#include "internal.h"
#include "strandecho/units.h"
#include "strandecho/wave.h"

static const char *const se_quantity_names[SE_Q_COUNT] = {
    [SE_Q_DISPLACEMENT] = "displacement",
    [SE_Q_VELOCITY] = "velocity",
    [SE_Q_ACCELERATION] = "acceleration",
    [SE_Q_FORCE] = "force",
    [SE_Q_STRAIN] = "strain",
    [SE_Q_VOLTAGE] = "voltage",
    [SE_Q_CURRENT] = "current",
};
#define SE_QUANTITY_KNOWN "displacement, velocity, acceleration, force, strain, voltage, current"

static int se_q_ok(se_quantity q);
static int se_pos_finite(double x);
static int se_z_ok(double z);

static int se_q_ok(se_quantity q)
{
    return (int)q >= 0 && q < SE_Q_COUNT;
}

static int se_pos_finite(double x)
{
    return isfinite(x) && x > 0.0;
}

/* An impedance: >= 0, possibly +infinity. */
static int se_z_ok(double z)
{
    return !isnan(z) && z >= 0.0;
}

se_status se_quantity_parse(const char *name, se_quantity *q, se_error *err)
{
    int i;
    if (name == NULL || q == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL argument to se_quantity_parse");
    for (i = 0; i < SE_Q_COUNT; i++) {
        if (strcmp(name, se_quantity_names[i]) == 0) {
            *q = (se_quantity)i;
            return SE_OK;
        }
    }
    return se_fail(err, SE_ERR_ARG, "unknown quantity '%s' (use " SE_QUANTITY_KNOWN ")", name);
}

const char *se_quantity_name(se_quantity q)
{
    return se_q_ok(q) ? se_quantity_names[q] : NULL;
}

int se_quantity_sign(se_quantity q)
{
    switch (q) {
    case SE_Q_DISPLACEMENT:
    case SE_Q_VELOCITY:
    case SE_Q_ACCELERATION:
    case SE_Q_CURRENT:
        return 1;
    case SE_Q_FORCE:
    case SE_Q_STRAIN:
    case SE_Q_VOLTAGE:
        return -1;
    case SE_Q_COUNT:
        break;
    }
    return 0;
}

int se_quantity_is_electrical(se_quantity q)
{
    return q == SE_Q_VOLTAGE || q == SE_Q_CURRENT;
}

double se_speed_transverse(double tension_n, double mu_kg_m)
{
    if (!se_pos_finite(tension_n) || !se_pos_finite(mu_kg_m))
        return NAN;
    return sqrt(tension_n / mu_kg_m);
}

double se_speed_longitudinal(double ea_n, double mu_kg_m)
{
    if (!se_pos_finite(ea_n) || !se_pos_finite(mu_kg_m))
        return NAN;
    return sqrt(ea_n / mu_kg_m);
}

double se_speed_electrical(double velocity_factor)
{
    if (!(velocity_factor > 0.0 && velocity_factor <= 1.0))
        return NAN;
    return velocity_factor * SE_SPEED_OF_LIGHT;
}

double se_velocity_factor_from_permittivity(double eps_r)
{
    if (!(isfinite(eps_r) && eps_r >= 1.0))
        return NAN;
    return 1.0 / sqrt(eps_r);
}

double se_tension_from_speed(double mu_kg_m, double speed_m_s)
{
    if (!se_pos_finite(mu_kg_m) || !se_pos_finite(speed_m_s))
        return NAN;
    return mu_kg_m * speed_m_s * speed_m_s;
}

double se_impedance_mechanical(double mu_kg_m, double speed_m_s)
{
    if (!se_pos_finite(mu_kg_m) || !se_pos_finite(speed_m_s))
        return NAN;
    return mu_kg_m * speed_m_s;
}

double se_reflection_displacement(double z1, double z2)
{
    if (!se_z_ok(z1) || !se_z_ok(z2) || (z1 == 0.0 && z2 == 0.0) || (isinf(z1) && isinf(z2)))
        return NAN;
    if (isinf(z2))
        return -1.0;
    if (isinf(z1))
        return 1.0;
    return (z1 - z2) / (z1 + z2);
}

double se_transmission_displacement(double z1, double z2)
{
    if (!se_z_ok(z1) || !se_z_ok(z2) || (z1 == 0.0 && z2 == 0.0) || (isinf(z1) && isinf(z2)))
        return NAN;
    if (isinf(z2))
        return 0.0;
    if (isinf(z1))
        return 2.0;
    return 2.0 * z1 / (z1 + z2);
}

double se_reflection_observed(se_quantity q, double z1, double z2)
{
    int sign = se_quantity_sign(q);
    if (sign == 0)
        return NAN;
    return sign * se_reflection_displacement(z1, z2);
}

double se_transmission_observed(se_quantity q, double z1, double z2)
{
    return 1.0 + se_reflection_observed(q, z1, z2);
}

double se_impedance_ratio(double r_displacement)
{
    if (!(r_displacement >= -1.0 && r_displacement <= 1.0))
        return NAN;
    if (r_displacement == -1.0)
        return INFINITY;
    return (1.0 - r_displacement) / (1.0 + r_displacement);
}

double se_return_loss_db(double gamma)
{
    double a = fabs(gamma);
    if (!(a <= 1.0))
        return NAN;
    if (a == 0.0)
        return INFINITY;
    return -20.0 * log10(a);
}

double se_vswr(double gamma)
{
    double a = fabs(gamma);
    if (!(a <= 1.0))
        return NAN;
    if (a == 1.0)
        return INFINITY;
    return (1.0 + a) / (1.0 - a);
}

const char *se_class_name(se_quantity q, int impedance_increase)
{
    if (!se_q_ok(q))
        return NULL;
    if (se_quantity_is_electrical(q))
        return impedance_increase ? "open-like" : "short-like";
    return impedance_increase ? "fixed-like" : "free-like";
}

se_status se_termination_parse(const char *text, se_quantity q, double *r_observed, se_error *err)
{
    /* Displacement-convention R of each name: Z2 -> infinity gives -1, Z2 -> 0 gives +1. */
    static const struct {
        const char *name;
        double r_disp;
    } names[] = {
        {"fixed", -1.0}, {"open", -1.0},   {"free", 1.0},
        {"short", 1.0},  {"matched", 0.0}, {"continuing", 0.0},
    };
    se_error e;
    double r;
    size_t i;
    int sign = se_quantity_sign(q);

    if (text == NULL || r_observed == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL argument to se_termination_parse");
    if (sign == 0)
        return se_fail(err, SE_ERR_ARG, "quantity %d out of range", (int)q);
    for (i = 0; i < sizeof names / sizeof names[0]; i++) {
        if (strcmp(text, names[i].name) == 0) {
            /* + 0.0 turns the -0.0 of "matched" in force into 0.0. */
            *r_observed = sign * names[i].r_disp + 0.0;
            return SE_OK;
        }
    }
    se_error_clear(&e);
    if (se_unit_parse(text, SE_UNIT_RATIO, NULL, &r, &e) != SE_OK)
        return se_fail(err, SE_ERR_ARG,
                       "unknown termination '%s' (use fixed, free, open, short, matched, "
                       "continuing or a coefficient in [-1, 1])",
                       text);
    if (!(r >= -1.0 && r <= 1.0))
        return se_fail(err, SE_ERR_RANGE, "termination coefficient %g from '%s' is outside [-1, 1]",
                       r, text);
    *r_observed = r;
    return SE_OK;
}

se_status se_check_speed(double v, se_error *err)
{
    if (isnan(v))
        return se_fail(err, SE_ERR_RANGE, "speed is not a number");
    if (!(v > 0.0))
        return se_fail(err, SE_ERR_RANGE, "speed %g m/s must be positive", v);
    if (v > SE_SPEED_OF_LIGHT)
        return se_fail(err, SE_ERR_RANGE,
                       "speed %g m/s is faster than light (%.0f m/s): check the unit", v,
                       SE_SPEED_OF_LIGHT);
    return SE_OK;
}

se_status se_check_velocity_factor(double vf, se_error *err)
{
    if (!(vf > 0.0 && vf <= 1.0))
        return se_fail(err, SE_ERR_RANGE, "velocity factor %g must be in (0, 1]", vf);
    return SE_OK;
}

se_status se_check_positive(double value, const char *what, const char *unit, se_error *err)
{
    if (!se_pos_finite(value))
        return se_fail(err, SE_ERR_RANGE, "%s %g%s%s must be positive and finite",
                       what != NULL ? what : "value", value, unit != NULL && unit[0] ? " " : "",
                       unit != NULL ? unit : "");
    return SE_OK;
}
