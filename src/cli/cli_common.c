/* strandecho CLI: shared option handling, messages and exit codes. */
#include "cli.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>

#include "strandecho/output.h"
#include "strandecho/units.h"

int se_cli_fail(int code, const char *fmt, ...)
{
    va_list ap;
    fputs("strandecho: error: ", stderr);
    va_start(ap, fmt);
    vfprintf(stderr, fmt, ap);
    va_end(ap);
    fputc('\n', stderr);
    return code;
}

int se_cli_exit_code(se_status st, int io_is_output)
{
    switch (st) {
    case SE_OK:
        return SE_EXIT_OK;
    case SE_ERR_ARG:
    case SE_ERR_UNIT:
    case SE_ERR_RANGE:
        return SE_EXIT_USAGE;
    case SE_ERR_IO:
        return io_is_output ? SE_EXIT_OUTPUT : SE_EXIT_INPUT;
    case SE_ERR_FORMAT:
        return SE_EXIT_INPUT;
    case SE_ERR_DATA:
    case SE_ERR_NOTFOUND:
    case SE_ERR_NUMERIC:
        return SE_EXIT_DATA;
    case SE_ERR_NOMEM:
        return SE_EXIT_MEMORY;
    default:
        return SE_EXIT_INTERNAL;
    }
}

int se_cli_fail_err(const se_error *err, int io_is_output)
{
    const char *msg = err->message[0] ? err->message : se_strerror(err->code);
    return se_cli_fail(se_cli_exit_code(err->code, io_is_output), "%s", msg);
}

int se_cli_value(se_cli *c, const char *name, const char **value)
{
    const char *a = c->argv[c->i];
    size_t n = strlen(name);
    if (strncmp(a, name, n) != 0)
        return 0;
    if (a[n] == '=') {
        *value = a + n + 1;
        c->i++;
        return 1;
    }
    if (a[n] != '\0')
        return 0;
    if (c->i + 1 >= c->argc) {
        se_cli_fail(SE_EXIT_USAGE, "option %s needs a value", name);
        return -1;
    }
    *value = c->argv[c->i + 1];
    c->i += 2;
    return 1;
}

int se_cli_flag(se_cli *c, const char *name)
{
    if (strcmp(c->argv[c->i], name) != 0)
        return 0;
    c->i++;
    return 1;
}

int se_cli_false_alarms(const char *text, double *out)
{
    char *end;
    double fa = strtod(text, &end);
    if (end == text || *end != '\0' || !(fa > 0.0 && fa <= 1000.0)) {
        se_cli_fail(SE_EXIT_USAGE, "--false-alarms: '%s' is not a number in (0, 1000]", text);
        return -1;
    }
    *out = fa;
    return 0;
}

int se_cli_uint(const char *opt, const char *text, unsigned long min, unsigned long max,
                unsigned long *out)
{
    char *end = NULL;
    unsigned long v;
    errno = 0;
    if (text[0] == '-' || text[0] == '\0') {
        se_cli_fail(SE_EXIT_USAGE, "%s: '%s' is not a whole number from %lu to %lu", opt, text, min,
                    max);
        return -1;
    }
    v = strtoul(text, &end, 10);
    if (errno != 0 || end == text || *end != '\0' || v < min || v > max) {
        se_cli_fail(SE_EXIT_USAGE, "%s: '%s' is not a whole number from %lu to %lu", opt, text, min,
                    max);
        return -1;
    }
    *out = v;
    return 0;
}

int se_cli_speed_option(se_cli *c, se_speed_opts *o)
{
    static const struct {
        const char *name;
        size_t offset;
    } opts[] = {
        {"--speed", offsetof(se_speed_opts, speed)},
        {"--velocity-factor", offsetof(se_speed_opts, velocity_factor)},
        {"--tension", offsetof(se_speed_opts, tension)},
        {"--mass-per-length", offsetof(se_speed_opts, mass_per_length)},
        {"--axial-stiffness", offsetof(se_speed_opts, axial_stiffness)},
        {"--speed-uncertainty", offsetof(se_speed_opts, uncertainty)},
    };
    size_t k;
    for (k = 0; k < sizeof opts / sizeof opts[0]; k++) {
        const char *v;
        int got = se_cli_value(c, opts[k].name, &v);
        if (got != 0) {
            if (got > 0)
                *(const char **)((char *)o + opts[k].offset) = v;
            return got;
        }
    }
    return 0;
}

/* Parse one value with a unit or print "OPTION: message" and return -1. */
static int se_cli_unit(const char *opt, const char *text, se_unit_kind kind, const char *def,
                       double *out)
{
    se_error err;
    se_error_clear(&err);
    if (se_unit_parse(text, kind, def, out, &err) != SE_OK) {
        se_cli_fail(SE_EXIT_USAGE, "%s: %s", opt, err.message);
        return -1;
    }
    return 0;
}

int se_cli_speed_resolve(const se_speed_opts *o, int required, se_speed *s)
{
    se_error err;
    int ways = (o->speed != NULL) + (o->velocity_factor != NULL) + (o->tension != NULL) +
               (o->axial_stiffness != NULL);
    memset(s, 0, sizeof *s);
    s->tension_n = s->mass_per_length_kg_m = s->axial_stiffness_n = s->velocity_factor = NAN;
    se_error_clear(&err);
    if (o->uncertainty != NULL) {
        double pct;
        if (se_cli_unit("--speed-uncertainty", o->uncertainty, SE_UNIT_RATIO, NULL, &pct) != 0)
            return SE_EXIT_USAGE;
        /* a bare number is a percentage here, as the option's name says */
        s->uncertainty = strchr(o->uncertainty, '%') != NULL ? pct : pct / 100.0;
        if (!(s->uncertainty >= 0.0 && s->uncertainty < 0.5))
            return se_cli_fail(SE_EXIT_USAGE,
                               "--speed-uncertainty: %g %% is not in [0, 50) %%", s->uncertainty * 100);
    }
    if (ways > 1)
        return se_cli_fail(SE_EXIT_USAGE, "give the wave speed one way only: --speed, "
                                          "--velocity-factor, --tension with --mass-per-length, or "
                                          "--axial-stiffness with --mass-per-length");
    if (ways == 0) {
        if (o->mass_per_length != NULL)
            return se_cli_fail(SE_EXIT_USAGE, "--mass-per-length needs --tension (transverse waves) "
                                              "or --axial-stiffness (longitudinal waves)");
        if (required)
            return se_cli_fail(SE_EXIT_USAGE,
                               "no wave speed: give --speed, --velocity-factor, --tension with "
                               "--mass-per-length, or --axial-stiffness with --mass-per-length");
        return SE_EXIT_OK;
    }
    if (o->speed != NULL) {
        if (se_cli_unit("--speed", o->speed, SE_UNIT_SPEED, "m/s", &s->speed_m_s) != 0)
            return SE_EXIT_USAGE;
        snprintf(s->source, sizeof s->source, "given (--speed %s)", o->speed);
    } else if (o->velocity_factor != NULL) {
        if (se_cli_unit("--velocity-factor", o->velocity_factor, SE_UNIT_RATIO, NULL,
                        &s->velocity_factor) != 0)
            return SE_EXIT_USAGE;
        if (!(s->velocity_factor > 0.0 && s->velocity_factor <= 1.0))
            return se_cli_fail(SE_EXIT_USAGE,
                               "--velocity-factor: %g is not in (0, 1] (a fraction of the speed of "
                               "light)",
                               s->velocity_factor);
        s->speed_m_s = se_speed_electrical(s->velocity_factor);
        s->electrical_hint = 1;
        snprintf(s->source, sizeof s->source, "velocity factor %.6g x c (299792458 m/s)",
                 s->velocity_factor);
    } else {
        const char *which = o->tension != NULL ? "--tension" : "--axial-stiffness";
        double num;
        if (o->mass_per_length == NULL)
            return se_cli_fail(SE_EXIT_USAGE, "%s needs --mass-per-length", which);
        if (o->tension != NULL) {
            if (se_cli_unit("--tension", o->tension, SE_UNIT_FORCE, NULL, &num) != 0)
                return SE_EXIT_USAGE;
        } else if (se_cli_unit("--axial-stiffness", o->axial_stiffness, SE_UNIT_STIFFNESS, NULL,
                               &num) != 0) {
            return SE_EXIT_USAGE;
        }
        if (se_cli_unit("--mass-per-length", o->mass_per_length, SE_UNIT_LINEAR_DENSITY, NULL,
                        &s->mass_per_length_kg_m) != 0)
            return SE_EXIT_USAGE;
        if (!(num > 0.0) || !isfinite(num))
            return se_cli_fail(SE_EXIT_USAGE, "%s: %g N is not positive", which, num);
        if (!(s->mass_per_length_kg_m > 0.0) || !isfinite(s->mass_per_length_kg_m))
            return se_cli_fail(SE_EXIT_USAGE, "--mass-per-length: %g kg/m is not positive",
                               s->mass_per_length_kg_m);
        if (o->tension != NULL) {
            s->tension_n = num;
            s->speed_m_s = se_speed_transverse(num, s->mass_per_length_kg_m);
            snprintf(s->source, sizeof s->source,
                     "transverse, sqrt(T/mu) with T = %.6g N, mu = %.6g kg/m", num,
                     s->mass_per_length_kg_m);
        } else {
            s->axial_stiffness_n = num;
            s->speed_m_s = se_speed_longitudinal(num, s->mass_per_length_kg_m);
            snprintf(s->source, sizeof s->source,
                     "longitudinal, sqrt(EA/mu) with EA = %.6g N, mu = %.6g kg/m", num,
                     s->mass_per_length_kg_m);
        }
    }
    if (se_check_speed(s->speed_m_s, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "%s", err.message);
    return SE_EXIT_OK;
}

int se_cli_check_output(const char *out, const char *const *inputs)
{
    size_t k;
    if (out == NULL || strcmp(out, "-") == 0)
        return SE_EXIT_OK;
    for (k = 0; inputs[k] != NULL; k++)
        if (se_path_same_file(out, inputs[k]))
            return se_cli_fail(SE_EXIT_USAGE, "refusing to write %s over the input %s", out,
                               inputs[k]);
    return SE_EXIT_OK;
}

int se_cli_write_json(const char *path, json_t *root)
{
    se_error err;
    se_output *out;
    char *text = json_dumps(root, JSON_INDENT(2) | JSON_REAL_PRECISION(12));
    if (text == NULL)
        return se_cli_fail(SE_EXIT_MEMORY, "%s: out of memory for the JSON output", path);
    se_error_clear(&err);
    out = se_output_open(path, &err);
    if (out == NULL) {
        free(text);
        return se_cli_fail_err(&err, 1);
    }
    if (fputs(text, se_output_stream(out)) == EOF || fputc('\n', se_output_stream(out)) == EOF) {
        free(text);
        se_output_abort(out);
        return se_cli_fail(SE_EXIT_OUTPUT, "%s: write failed", path);
    }
    free(text);
    if (se_output_commit(out, &err) != SE_OK)
        return se_cli_fail_err(&err, 1);
    return SE_EXIT_OK;
}
