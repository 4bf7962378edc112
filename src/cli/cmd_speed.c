/* strandecho CLI: `strandecho speed`, the surveyor's quick check of a line: per segment the speed,
 * impedance and travel times, and the reflection expected at every junction, feature and the end
 * with the two-way transmission in front of it. A thin layer over the line module. */
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "strandecho/line.h"
#include "strandecho/output.h"
#include "strandecho/units.h"
#include "strandecho/wave.h"

static const char se_speed_usage[] =
    "usage: strandecho speed (--line FILE | SPEED OPTIONS [--length L] [--end TERM]) [options]\n"
    "\n"
    "Per segment the wave speed, impedance, one-way and round-trip time, and the reflection\n"
    "expected at every junction, listed feature and the far end, with the two-way transmission\n"
    "through the interfaces in front of it and the amplitude that reaches the sensor.\n"
    "\n"
    "  --line FILE              a line description (docs/line-file.md)\n"
    "Or one uniform segment (the same wave-speed options as locate):\n"
    "  --speed V | --velocity-factor F | --tension T --mass-per-length MU |\n"
    "  --axial-stiffness EA --mass-per-length MU   [--speed-uncertainty PCT]\n"
    "  --length L               its length (m, ft...): travel times (default: per-metre values)\n"
    "  --end TERM               its far end: fixed free open short matched or a coefficient\n"
    "  --impedance Z            its impedance (ohm or N s/m) when the options do not give it\n"
    "  --quantity Q             what the sensor measures (sign of the coefficients; default\n"
    "                           velocity, voltage with --velocity-factor)\n"
    "Output:\n"
    "  --json PATH              write the table as JSON (- for standard output; SI units)\n"
    "  --units m|ft             lengths and speeds in the table (m, m/s or ft, ft/s)\n"
    "  --quiet\n";

static int se_speed_from_flags(const se_speed_opts *so, const char *length, const char *end,
                               const char *impedance, const char *quantity, se_line **out,
                               int *have_length, int *have_end);
static void se_speed_print(const se_line *ln, const se_expected_event *ev, size_t nev, int feet,
                           int have_length, int have_end, const char *line_path);
static json_t *se_speed_json(const se_line *ln, const se_expected_event *ev, size_t nev,
                             int have_length, int have_end, const char *line_path);

/* A JSON number, or null for NaN / infinity. */
static json_t *se_jnum(double x)
{
    return isfinite(x) ? json_real(x) : json_null();
}

int se_cmd_speed(int argc, char **argv)
{
    se_cli c = {argc, argv, 1, 0, 0};
    se_speed_opts so;
    se_error err;
    const char *line_path = NULL, *json = NULL, *units = "m", *length = NULL, *end = NULL;
    const char *impedance = NULL, *quantity = NULL;
    se_line *ln = NULL;
    se_expected_event *ev = NULL;
    size_t nev = 0;
    int rc = SE_EXIT_OK, got, have_length = 1, have_end = 1;

    memset(&so, 0, sizeof so);
    se_error_clear(&err);
    while (c.i < argc) {
        const char *a = argv[c.i];
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            fputs(se_speed_usage, stdout);
            return SE_EXIT_OK;
        }
        if ((got = se_cli_speed_option(&c, &so)) != 0) {
            if (got < 0)
                return SE_EXIT_USAGE;
            continue;
        }
        SE_TAKE("--line", line_path)
        SE_TAKE("--json", json)
        SE_TAKE("--units", units)
        SE_TAKE("--length", length)
        SE_TAKE("--end", end)
        SE_TAKE("--impedance", impedance)
        SE_TAKE("--quantity", quantity)
        if (se_cli_flag(&c, "--quiet")) {
            c.quiet = 1;
            continue;
        }
        return se_cli_fail(SE_EXIT_USAGE, "speed: unknown argument %s (see strandecho speed --help)",
                           a);
    }
    if (strcmp(units, "m") != 0 && strcmp(units, "ft") != 0)
        return se_cli_fail(SE_EXIT_USAGE, "--units: '%s' is not m or ft", units);
    if (line_path != NULL) {
        if (so.speed || so.velocity_factor || so.tension || so.axial_stiffness || so.mass_per_length ||
            so.uncertainty || length || end || impedance || quantity)
            return se_cli_fail(SE_EXIT_USAGE,
                               "--line %s describes the line: drop the speed, --length, --end, "
                               "--impedance and --quantity options (or drop --line)",
                               line_path);
        ln = se_line_read(line_path, &err);
        if (ln == NULL)
            return se_cli_fail_err(&err, 0);
    } else if ((rc = se_speed_from_flags(&so, length, end, impedance, quantity, &ln, &have_length,
                                         &have_end)) != SE_EXIT_OK) {
        return rc;
    }
    if (json != NULL) {
        const char *inputs[2] = {line_path, NULL};
        if ((rc = se_cli_check_output(json, inputs)) != SE_EXIT_OK)
            goto done;
    }
    if (se_line_expected_events(ln, &ev, &nev, &err) != SE_OK) {
        rc = se_cli_fail_err(&err, 0);
        goto done;
    }
    if (json != NULL) {
        json_t *root = se_speed_json(ln, ev, nev, have_length, have_end, line_path);
        if (root == NULL) {
            rc = se_cli_fail(SE_EXIT_MEMORY, "speed: out of memory for the JSON output");
            goto done;
        }
        rc = se_cli_write_json(json, root);
        json_decref(root);
        if (rc != SE_EXIT_OK)
            goto done;
    }
    if (!c.quiet && !(json != NULL && strcmp(json, "-") == 0))
        se_speed_print(ln, ev, nev, units[0] == 'f', have_length, have_end, line_path);
done:
    free(ev);
    se_line_free(ln);
    return rc;
}

/* One uniform segment from the command-line speed options. */
static int se_speed_from_flags(const se_speed_opts *so, const char *length, const char *end,
                               const char *impedance, const char *quantity, se_line **out,
                               int *have_length, int *have_end)
{
    se_speed sp;
    se_segment seg;
    se_error err;
    se_quantity q;
    se_wave_kind wave;
    se_line *ln;
    int rc;
    *out = NULL;
    se_error_clear(&err);
    if ((rc = se_cli_speed_resolve(so, 1, &sp)) != SE_EXIT_OK)
        return rc;
    se_segment_init(&seg);
    seg.name = (char *)"line";
    seg.speed_uncertainty = sp.uncertainty;
    seg.length_m = 1.0;
    *have_length = length != NULL;
    if (length != NULL) {
        if (se_unit_parse(length, SE_UNIT_LENGTH, NULL, &seg.length_m, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--length: %s", err.message);
        if (!(seg.length_m > 0.0) || !isfinite(seg.length_m))
            return se_cli_fail(SE_EXIT_USAGE, "--length: %g m is not positive", seg.length_m);
    }
    if (isfinite(sp.tension_n)) {
        wave = SE_WAVE_TRANSVERSE;
        seg.tension_n = sp.tension_n;
        seg.mass_per_length_kg_m = sp.mass_per_length_kg_m;
    } else if (isfinite(sp.axial_stiffness_n)) {
        wave = SE_WAVE_LONGITUDINAL;
        seg.axial_stiffness_n = sp.axial_stiffness_n;
        seg.mass_per_length_kg_m = sp.mass_per_length_kg_m;
    } else if (isfinite(sp.velocity_factor)) {
        wave = SE_WAVE_ELECTRICAL;
        seg.velocity_factor = sp.velocity_factor;
    } else {
        wave = SE_WAVE_TRANSVERSE;
        seg.speed_given_m_s = sp.speed_m_s;
    }
    q = wave == SE_WAVE_ELECTRICAL ? SE_Q_VOLTAGE : SE_Q_VELOCITY;
    if (quantity != NULL) {
        if (se_quantity_parse(quantity, &q, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--quantity: %s", err.message);
        if (se_quantity_is_electrical(q) && wave != SE_WAVE_ELECTRICAL && so->speed != NULL)
            wave = SE_WAVE_ELECTRICAL;
        if (!se_wave_quantity_compatible(wave, q))
            return se_cli_fail(SE_EXIT_USAGE, "--quantity %s cannot be measured on a %s line",
                               quantity, se_wave_kind_name(wave));
    }
    if (impedance != NULL) {
        if (se_unit_parse(impedance, SE_UNIT_IMPEDANCE, NULL, &seg.impedance_given, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--impedance: %s", err.message);
        if (!(seg.impedance_given > 0.0) || !isfinite(seg.impedance_given))
            return se_cli_fail(SE_EXIT_USAGE, "--impedance: %g is not positive", seg.impedance_given);
    }
    ln = se_line_create("command-line speed options", wave, q, &err);
    if (ln == NULL)
        return se_cli_fail_err(&err, 0);
    *have_end = end != NULL;
    if (se_line_add_segment(ln, &seg, &err) != SE_OK ||
        se_line_set_end(ln, end != NULL ? end : "matched", &err) != SE_OK ||
        se_line_prepare(ln, &err) != SE_OK) {
        se_line_free(ln);
        return se_cli_fail(se_cli_exit_code(err.code, 0) == SE_EXIT_INPUT ? SE_EXIT_USAGE
                                                                           : se_cli_exit_code(err.code, 0),
                           "%s%s", end != NULL && strstr(err.message, "termination") ? "--end: " : "",
                           err.message);
    }
    *out = ln;
    return SE_EXIT_OK;
}

static const char *se_impedance_unit(const se_line *ln)
{
    return ln->wave == SE_WAVE_ELECTRICAL ? "ohm" : "N s/m";
}

/* Time unit for a line: microseconds for fast (electrical) lines, else milliseconds. */
static void se_time_unit(const se_line *ln, const char **name, double *factor)
{
    if (ln->round_trip_s < 1e-3) {
        *name = "us";
        *factor = 1e6;
    } else {
        *name = "ms";
        *factor = 1e3;
    }
}

static void se_speed_print(const se_line *ln, const se_expected_event *ev, size_t nev, int feet,
                           int have_length, int have_end, const char *line_path)
{
    const double kl = feet ? 1.0 / 0.3048 : 1.0;
    const char *lu = feet ? "ft" : "m";
    const char *tu;
    const char *pu = "ms";
    double kt, pk = 1e3, arrival = 0.0;
    size_t i;
    se_time_unit(ln, &tu, &kt);
    if (ln->wave == SE_WAVE_ELECTRICAL) { /* per-length times: ns for electrical lines */
        pu = "ns";
        pk = 1e9;
    }
    if (line_path != NULL)
        printf("line: %s (%s), %s waves, sensor measures %s, %zu segment%s, %.3f %s, round trip "
               "%.6g %s\n",
               ln->name[0] ? ln->name : "(unnamed)", line_path, se_wave_kind_name(ln->wave),
               se_quantity_name(ln->quantity), ln->n_segments, ln->n_segments == 1 ? "" : "s",
               ln->length_m * kl, lu, ln->round_trip_s * kt, tu);
    else
        printf("uniform line from the command-line options, %s waves, sensor measures %s\n",
               se_wave_kind_name(ln->wave), se_quantity_name(ln->quantity));
    if (have_length)
        printf("\n #  segment               start (%s)  length (%s)  speed (%s/s)  +/- (%%)  "
               "impedance (%s)  one-way (%s)  round trip (%s)  arrival (%s)\n",
               lu, lu, lu, se_impedance_unit(ln), tu, tu, tu);
    else
        printf("\n #  segment               speed (%s/s)  +/- (%%)  impedance (%s)  one-way (%s/%s)  "
               "round trip (%s/%s)\n",
               lu, se_impedance_unit(ln), pu, lu, pu, lu);
    for (i = 0; i < ln->n_segments; i++) {
        const se_segment *s = &ln->segments[i];
        char imp[64];
        arrival += 2.0 * s->one_way_s;
        if (!isfinite(s->impedance_near))
            snprintf(imp, sizeof imp, "unknown");
        else if (s->catenary != NULL &&
                 fabs(s->impedance_far - s->impedance_near) > 1e-9 * fabs(s->impedance_near))
            snprintf(imp, sizeof imp, "%.5g..%.5g", s->impedance_near, s->impedance_far);
        else
            snprintf(imp, sizeof imp, "%.6g", s->impedance_near);
        if (have_length)
            printf("%2zu  %-20.20s  %10.3f  %11.3f  %12.6g  %7.2f  %15s  %12.6g  %15.6g  %12.6g\n",
                   i + 1, s->name, s->start_m * kl, s->length_m * kl, s->speed_m_s * kl,
                   s->speed_uncertainty * 100.0, imp, s->one_way_s * kt, 2.0 * s->one_way_s * kt,
                   arrival * kt);
        else /* per unit length (the line was given 1 m) */
            printf("%2zu  %-20.20s  %12.6g  %7.2f  %15s  %15.6g  %18.6g\n", i + 1, s->name,
                   s->speed_m_s * kl, s->speed_uncertainty * 100.0, imp, s->one_way_s * pk / kl,
                   2.0 * s->one_way_s * pk / kl);
    }
    printf("\n");
    for (i = 0; i < ln->n_segments; i++) {
        const se_segment *s = &ln->segments[i];
        printf("  %zu %s: ", i + 1, s->name);
        switch (s->speed_source) {
        case SE_SPEED_TENSION:
            printf("transverse, v = sqrt(T/mu_eff), T = %.6g kN, mu = %.6g kg/m", s->tension_n * 1e-3,
                   s->mass_per_length_kg_m);
            break;
        case SE_SPEED_AXIAL_STIFFNESS:
            printf("longitudinal, v = sqrt(EA/mu), EA = %.6g MN, mu = %.6g kg/m",
                   s->axial_stiffness_n * 1e-6, s->mass_per_length_kg_m);
            break;
        case SE_SPEED_VELOCITY_FACTOR:
            printf("electrical, v = VF c, VF = %.6g (c = 299792458 m/s)", s->velocity_factor);
            break;
        case SE_SPEED_GIVEN:
            printf("speed given");
            break;
        case SE_SPEED_HANGING: {
            se_catenary_info ci;
            se_catenary_get_info(s->catenary, &ci);
            printf("hanging, v = sqrt(T(s)/mu_eff) from %.6g to %.6g %s/s (mean %.6g), tension "
                   "%.6g kN at the lower end to %.6g kN at the top, %.6g %s on the seabed",
                   s->speed_near_m_s * kl, s->speed_far_m_s * kl, lu, s->speed_m_s * kl,
                   ci.anchor_tension_n * 1e-3, ci.top_tension_n * 1e-3, ci.seabed_length_m * kl,
                   lu);
            break;
        }
        default:
            printf("speed from the file");
            break;
        }
        if (ln->wave == SE_WAVE_TRANSVERSE && isfinite(s->mu_eff_kg_m) &&
            s->mu_eff_kg_m != s->mass_per_length_kg_m)
            printf(", mu_eff = %.6g kg/m with added mass in water", s->mu_eff_kg_m);
        if (s->speed_scale != 1.0)
            printf(", speed scale %.6g", s->speed_scale);
        printf("\n");
    }
    if (!have_end && ln->n_segments == 1 && nev <= 1) {
        printf("\nno --end given: no end reflection predicted\n");
        return;
    }
    printf("\n #  expected event                    kind        distance (%s)  +/- (%s, 1 sigma)  "
           "delay (%s)  reflection  two-way transmission  at sensor  class\n",
           lu, lu, tu);
    for (i = 0; i < nev; i++) {
        const se_expected_event *e = &ev[i];
        char refl[32], amp[32];
        const char *cls = "unknown";
        if (e->type == SE_EVENT_END && !have_end)
            continue;
        if (e->has_reflection) {
            snprintf(refl, sizeof refl, "%+.4f", e->reflection);
            snprintf(amp, sizeof amp, "%+.4f", e->amplitude);
            if (e->reflection != 0.0)
                cls = se_class_name(ln->quantity,
                                    se_quantity_sign(ln->quantity) * e->reflection < 0.0);
            else
                cls = "none";
        } else {
            snprintf(refl, sizeof refl, "unknown");
            snprintf(amp, sizeof amp, "unknown");
        }
        if (have_length)
            printf("%2zu  %-32.32s  %-10.10s  %13.3f  %17.3f  %10.6g  %10s  %20.4f  %9s  %s\n",
                   i + 1, e->name, e->kind, e->distance_m * kl, e->distance_sigma_m * kl,
                   e->round_trip_s * kt, refl, e->transmission, amp, cls);
        else
            printf("%2zu  %-32.32s  %-10.10s  %13s  %17s  %10s  %10s  %20.4f  %9s  %s\n", i + 1,
                   e->name, e->kind, "-", "-", "-", refl, e->transmission, amp, cls);
    }
    printf("\nreflection: coefficient at the discontinuity in the %s convention (r = %s(Z1 - Z2)/(Z1 "
           "+ Z2) going away from the sensor); two-way transmission: product of (1 - r^2) over the "
           "interfaces in front; at sensor: reflection x transmission\n",
           se_quantity_name(ln->quantity), se_quantity_sign(ln->quantity) > 0 ? "" : "-");
}

static json_t *se_speed_json(const se_line *ln, const se_expected_event *ev, size_t nev,
                             int have_length, int have_end, const char *line_path)
{
    json_t *root = json_object(), *segs = json_array(), *evs = json_array();
    double arrival = 0.0;
    size_t i;
    int bad = root == NULL || segs == NULL || evs == NULL;
    if (bad) {
        json_decref(root);
        json_decref(segs);
        json_decref(evs);
        return NULL;
    }
    bad |= json_object_set_new(root, "tool", json_string("strandecho"));
    bad |= json_object_set_new(root, "tool_version", json_string(se_version()));
    bad |= json_object_set_new(root, "command", json_string("speed"));
    bad |= json_object_set_new(root, "line_file", line_path ? json_string(line_path) : json_null());
    bad |= json_object_set_new(root, "line_name", json_string(ln->name));
    bad |= json_object_set_new(root, "wave", json_string(se_wave_kind_name(ln->wave)));
    bad |= json_object_set_new(root, "quantity", json_string(se_quantity_name(ln->quantity)));
    bad |= json_object_set_new(root, "impedance_unit", json_string(se_impedance_unit(ln)));
    bad |= json_object_set_new(root, "length_m", have_length ? se_jnum(ln->length_m) : json_null());
    bad |= json_object_set_new(root, "round_trip_s",
                               have_length ? se_jnum(ln->round_trip_s) : json_null());
    for (i = 0; i < ln->n_segments; i++) {
        const se_segment *s = &ln->segments[i];
        json_t *o = json_object();
        double tension = NAN;
        if (o == NULL || json_array_append_new(segs, o) != 0) {
            json_decref(o);
            bad = 1;
            break;
        }
        arrival += 2.0 * s->one_way_s;
        if (s->speed_source == SE_SPEED_TENSION)
            tension = s->tension_n * s->speed_scale * s->speed_scale;
        bad |= json_object_set_new(o, "name", json_string(s->name));
        bad |= json_object_set_new(o, "start_m", se_jnum(s->start_m));
        bad |= json_object_set_new(o, "length_m", have_length ? se_jnum(s->length_m) : json_null());
        bad |= json_object_set_new(o, "speed_m_s", se_jnum(s->speed_m_s));
        bad |= json_object_set_new(o, "speed_near_m_s", se_jnum(s->speed_near_m_s));
        bad |= json_object_set_new(o, "speed_far_m_s", se_jnum(s->speed_far_m_s));
        bad |= json_object_set_new(o, "speed_uncertainty_pct", se_jnum(100.0 * s->speed_uncertainty));
        bad |= json_object_set_new(o, "impedance_near", se_jnum(s->impedance_near));
        bad |= json_object_set_new(o, "impedance_far", se_jnum(s->impedance_far));
        bad |= json_object_set_new(o, "mass_per_length_kg_m", se_jnum(s->mass_per_length_kg_m));
        bad |= json_object_set_new(o, "mu_eff_kg_m", se_jnum(s->mu_eff_kg_m));
        bad |= json_object_set_new(o, "tension_n", se_jnum(tension));
        bad |= json_object_set_new(o, "hanging", json_boolean(s->catenary != NULL));
        if (have_length) {
            bad |= json_object_set_new(o, "one_way_s", se_jnum(s->one_way_s));
            bad |= json_object_set_new(o, "round_trip_s", se_jnum(2.0 * s->one_way_s));
            bad |= json_object_set_new(o, "arrival_s", se_jnum(arrival));
        } else {
            bad |= json_object_set_new(o, "one_way_s_per_m", se_jnum(s->one_way_s / s->length_m));
        }
    }
    for (i = 0; i < nev && !bad; i++) {
        const se_expected_event *e = &ev[i];
        json_t *o;
        if (e->type == SE_EVENT_END && !have_end)
            continue;
        o = json_object();
        if (o == NULL || json_array_append_new(evs, o) != 0) {
            json_decref(o);
            bad = 1;
            break;
        }
        bad |= json_object_set_new(o, "name", json_string(e->name));
        bad |= json_object_set_new(o, "type", json_string(e->type == SE_EVENT_JUNCTION ? "junction"
                                                          : e->type == SE_EVENT_FEATURE ? "feature"
                                                                                        : "end"));
        bad |= json_object_set_new(o, "kind", json_string(e->kind));
        bad |= json_object_set_new(o, "distance_m", have_length ? se_jnum(e->distance_m) : json_null());
        bad |= json_object_set_new(o, "distance_sigma_m",
                                   have_length ? se_jnum(e->distance_sigma_m) : json_null());
        bad |= json_object_set_new(o, "delay_s", have_length ? se_jnum(e->round_trip_s) : json_null());
        bad |= json_object_set_new(o, "delay_sigma_s",
                                   have_length ? se_jnum(e->round_trip_sigma_s) : json_null());
        bad |= json_object_set_new(o, "reflection",
                                   e->has_reflection ? se_jnum(e->reflection) : json_null());
        bad |= json_object_set_new(o, "transmission", se_jnum(e->transmission));
        bad |= json_object_set_new(o, "amplitude",
                                   e->has_reflection ? se_jnum(e->amplitude) : json_null());
    }
    bad |= json_object_set_new(root, "segments", segs);
    bad |= json_object_set_new(root, "events", evs);
    if (bad) {
        json_decref(root);
        return NULL;
    }
    return root;
}

