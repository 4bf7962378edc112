/* strandecho CLI: `strandecho calibrate`, the wave speed from a reflector at a known distance (the
 * end, a marked splice): locate the recording, take the echo of the reflector, solve the speed
 * scale k = t_predicted / t_measured with its uncertainty and print the line-file value to use.
 * A thin layer over se_locate and se_line_calibrate. */
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "cli_reference.h"
#include "commands.h"
#include "strandecho/line.h"
#include "strandecho/locate.h"
#include "strandecho/output.h"
#include "strandecho/pulse.h"
#include "strandecho/recording.h"
#include "strandecho/units.h"

static const char se_calibrate_usage[] =
    "usage: strandecho calibrate RECORDING --known-distance D [options]\n"
    "       strandecho calibrate RECORDING --line FILE --feature NAME [options]\n"
    "\n"
    "Solve the wave speed from the echo of a reflector at a known distance (the far end, a marked\n"
    "splice) and print the value to put in the line file (tension, axial_stiffness, speed,\n"
    "velocity_factor or speed_scale) with its one standard uncertainty.\n"
    "\n"
    "Reflector:\n"
    "  --known-distance D       its distance from the sensor (m, ft...)\n"
    "  --distance-uncertainty D one standard uncertainty of that distance (default 0)\n"
    "  --feature NAME           a feature or junction name of the line file, or end: its echo is\n"
    "                           the one matched to it (distance from the file unless\n"
    "                           --known-distance is given)\n"
    "  (otherwise the echo nearest the delay predicted for the distance, multiples excluded)\n"
    "Line:\n"
    "  --line FILE              a line description (docs/line-file.md)\n"
    "  --segment NAME           calibrate only this segment of the line (default: every segment\n"
    "                           by the same factor)\n"
    "  or the nominal speed of a uniform line, as in locate: --speed V | --velocity-factor F |\n"
    "  --tension T --mass-per-length MU | --axial-stiffness EA --mass-per-length MU\n"
    "  --quantity Q, --source-end TERM   as in locate (no --line)\n"
    "Recording and reference:\n"
    "  --channel N              response channel, 1-based (default 1)\n"
    "  --pulse-channel N | --pulse FILE|SPEC   the reference pulse, as in locate\n"
    "  --false-alarms N         expected false detections per record (default 0.01)\n"
    "Output:\n"
    "  --json PATH              write the result as JSON (- for standard output; SI units)\n"
    "  --units m|ft             distances and speeds in the text\n"
    "  --quiet\n";

/* One calibrated line-file value. */
typedef struct se_cal_value {
    const char *segment; /* segment name, or NULL for a uniform line from the options */
    const char *key;     /* line-file key */
    double value;        /* SI (N, m/s) or dimensionless */
    double sigma;        /* one standard uncertainty, same unit */
    double speed_m_s;    /* calibrated (mean) speed of the segment */
} se_cal_value;

static int se_pick_event(const se_locate_result *res, const se_expected_event *exp, size_t nexp,
                         const char *feature, double t_nominal, size_t *pick, int *matched);
static void se_format_value(const se_cal_value *v, int feet, char *buf, size_t size);

static json_t *se_jnum(double x)
{
    return isfinite(x) ? json_real(x) : json_null();
}

int se_cmd_calibrate(int argc, char **argv)
{
    se_cli c = {argc, argv, 1, 0, 0};
    se_speed_opts so;
    se_speed sp;
    se_locate_config cfg;
    se_locate_result res;
    se_recording *rec = NULL;
    se_error err;
    const char *path = NULL, *pulse = NULL, *json = NULL, *quantity = NULL, *v;
    const char *source_end = NULL, *units = "m", *line_path = NULL, *known = NULL;
    const char *known_sigma = NULL, *feature = NULL, *segment_name = NULL;
    se_line *line = NULL;
    se_expected_event *exp = NULL;
    size_t nexp = 0, pick = 0, seg = SE_LINE_ALL_SEGMENTS, nval = 0, i;
    unsigned long channel = 1, pulse_channel = 0;
    double fa = 0.01, dist = NAN, dist_sigma = 0.0, t_nom = NAN, k = NAN, k_sigma = NAN;
    double *refbuf = NULL;
    char refdesc[160], refsha[65];
    int have_refsha = 0, rc = SE_EXIT_OK, got, matched = 0;
    se_cal_value *vals = NULL;
    json_t *root = NULL;

    memset(&so, 0, sizeof so);
    memset(&res, 0, sizeof res);
    se_error_clear(&err);
    se_locate_config_init(&cfg);
    while (c.i < argc) {
        const char *a = argv[c.i];
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            fputs(se_calibrate_usage, stdout);
            return SE_EXIT_OK;
        }
        if ((got = se_cli_speed_option(&c, &so)) != 0) {
            if (got < 0)
                return SE_EXIT_USAGE;
            continue;
        }
        SE_TAKE("--pulse", pulse)
        SE_TAKE("--json", json)
        SE_TAKE("--quantity", quantity)
        SE_TAKE("--source-end", source_end)
        SE_TAKE("--units", units)
        SE_TAKE("--line", line_path)
        SE_TAKE("--known-distance", known)
        SE_TAKE("--distance-uncertainty", known_sigma)
        SE_TAKE("--feature", feature)
        SE_TAKE("--segment", segment_name)
        SE_TAKE_UINT("--channel", 1, 65535, channel)
        SE_TAKE_UINT("--pulse-channel", 1, 65535, pulse_channel)
        SE_TAKE_FALSE_ALARMS(fa)
        if (se_cli_flag(&c, "--quiet")) {
            c.quiet = 1;
            continue;
        }
        if (a[0] == '-' && a[1] != '\0')
            return se_cli_fail(SE_EXIT_USAGE,
                               "calibrate: unknown option %s (see strandecho calibrate --help)", a);
        if (path != NULL)
            return se_cli_fail(SE_EXIT_USAGE, "calibrate: one recording at a time (got %s and %s)",
                               path, a);
        path = a;
        c.i++;
    }

    /* the command line, before any file is read */
    if (path == NULL)
        return se_cli_fail(SE_EXIT_USAGE,
                           "calibrate: no recording given (see strandecho calibrate --help)");
    if (known == NULL && feature == NULL)
        return se_cli_fail(SE_EXIT_USAGE, "calibrate needs --known-distance D (or --line with "
                                          "--feature NAME)");
    if (feature != NULL && line_path == NULL)
        return se_cli_fail(SE_EXIT_USAGE, "--feature %s needs --line (the feature is named there)",
                           feature);
    if (segment_name != NULL && line_path == NULL)
        return se_cli_fail(SE_EXIT_USAGE, "--segment %s needs --line", segment_name);
    if (pulse != NULL && pulse_channel > 0)
        return se_cli_fail(SE_EXIT_USAGE, "give the reference once: --pulse or --pulse-channel");
    if (strcmp(units, "m") != 0 && strcmp(units, "ft") != 0)
        return se_cli_fail(SE_EXIT_USAGE, "--units: '%s' is not m or ft", units);
    if (line_path != NULL &&
        (so.speed || so.velocity_factor || so.tension || so.axial_stiffness || so.mass_per_length ||
         so.uncertainty || quantity || source_end))
        return se_cli_fail(SE_EXIT_USAGE, "--line %s gives the speeds, quantity and source end: drop "
                                          "the speed options, --quantity and --source-end",
                           line_path);
    if (known != NULL) {
        if (se_unit_parse(known, SE_UNIT_LENGTH, NULL, &dist, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--known-distance: %s", err.message);
        if (!(dist > 0.0) || !isfinite(dist))
            return se_cli_fail(SE_EXIT_USAGE, "--known-distance: %g m is not positive", dist);
    }
    if (known_sigma != NULL) {
        if (se_unit_parse(known_sigma, SE_UNIT_LENGTH, NULL, &dist_sigma, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--distance-uncertainty: %s", err.message);
        if (!(dist_sigma >= 0.0) || !isfinite(dist_sigma))
            return se_cli_fail(SE_EXIT_USAGE, "--distance-uncertainty: %g m is negative",
                               dist_sigma);
    }
    if ((rc = se_cli_speed_resolve(&so, line_path == NULL, &sp)) != SE_EXIT_OK)
        return rc;
    if (line_path == NULL && so.uncertainty != NULL)
        fprintf(stderr, "strandecho: warning: --speed-uncertainty does not enter a calibration "
                        "(the speed is what is measured)\n");
    cfg.speed_m_s = sp.speed_m_s;
    cfg.false_alarms = fa;
    cfg.quantity = sp.electrical_hint ? SE_Q_VOLTAGE : SE_Q_VELOCITY;
    if (quantity != NULL && se_quantity_parse(quantity, &cfg.quantity, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--quantity: %s", err.message);
    if (source_end != NULL &&
        se_termination_parse(source_end, cfg.quantity, &cfg.source_reflection, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--source-end: %s", err.message);

    if (line_path != NULL) {
        line = se_line_read(line_path, &err);
        if (line == NULL)
            return se_cli_fail_err(&err, 0);
        cfg.quantity = line->quantity;
        cfg.source_reflection = line->source_end_r;
        cfg.map = se_line_distmap(line);
        if (se_line_expected_events(line, &exp, &nexp, &err) != SE_OK) {
            rc = se_cli_fail_err(&err, 0);
            goto done;
        }
        cfg.expected = exp;
        cfg.n_expected = nexp;
        if (segment_name != NULL) {
            for (i = 0; i < line->n_segments; i++)
                if (strcmp(line->segments[i].name, segment_name) == 0)
                    seg = i;
            if (seg == SE_LINE_ALL_SEGMENTS) {
                rc = se_cli_fail(SE_EXIT_USAGE, "--segment: %s has no segment named '%s'",
                                 line_path, segment_name);
                goto done;
            }
        }
        if (feature != NULL && known == NULL) {
            if (se_line_event_distance(line, feature, &dist, &err) != SE_OK) {
                rc = se_cli_fail(SE_EXIT_USAGE, "--feature: %s", err.message);
                goto done;
            }
        } else if (feature != NULL) {
            double d_file;
            if (se_line_event_distance(line, feature, &d_file, &err) != SE_OK) {
                rc = se_cli_fail(SE_EXIT_USAGE, "--feature: %s", err.message);
                goto done;
            }
        }
        if (dist > line->length_m * (1.0 + 1e-12)) {
            rc = se_cli_fail(SE_EXIT_USAGE, "--known-distance: %g m is beyond the end of %s (%g m)",
                             dist, line_path, line->length_m);
            goto done;
        }
        if (se_distmap_time(cfg.map, dist, &t_nom, &err) != SE_OK) {
            rc = se_cli_fail_err(&err, 0);
            goto done;
        }
    } else {
        t_nom = 2.0 * dist / sp.speed_m_s;
    }
    {
        const char *inputs[4] = {path, line_path,
                                 pulse != NULL && !se_pulse_is_spec(pulse) ? pulse : NULL, NULL};
        if (inputs[1] == NULL) {
            inputs[1] = inputs[2];
            inputs[2] = NULL;
        }
        if (json != NULL && (rc = se_cli_check_output(json, inputs)) != SE_EXIT_OK)
            goto done;
    }

    /* locate, exactly as `strandecho locate` does */
    rec = se_recording_read(path, NULL, &err);
    if (rec == NULL) {
        rc = se_cli_fail_err(&err, 0);
        goto done;
    }
    if (channel > rec->channels) {
        rc = se_cli_fail(SE_EXIT_USAGE, "--channel %lu: %s has %u channel%s", channel, path,
                         rec->channels, rec->channels == 1 ? "" : "s");
        goto done;
    }
    if (pulse_channel == channel) {
        rc = se_cli_fail(SE_EXIT_USAGE, "--pulse-channel %lu is the response channel", pulse_channel);
        goto done;
    }
    rc = se_cli_load_reference(pulse, pulse_channel, rec, &cfg, &refbuf, refdesc, sizeof refdesc,
                               refsha, &have_refsha);
    if (rc != SE_EXIT_OK)
        goto done;
    if (se_locate(se_recording_channel(rec, (unsigned)(channel - 1)), rec->frames, rec->rate, &cfg,
                  &res, &err) != SE_OK) {
        rc = se_cli_fail(se_cli_exit_code(err.code, 0), "%s: %s", path, err.message);
        goto done;
    }
    if (t_nom > res.record_range_s) {
        rc = se_cli_fail(SE_EXIT_DATA,
                         "%s: the record reaches %.6g s round trip, the reflector at %g m is "
                         "expected at %.6g s",
                         path, res.record_range_s, dist, t_nom);
        goto done;
    }
    if ((rc = se_pick_event(&res, exp, nexp, feature, t_nom, &pick, &matched)) != SE_EXIT_OK) {
        se_cli_fail(rc, "%s: no echo found to calibrate on (no primary reflection above the "
                        "threshold)",
                    path);
        goto done;
    }

    /* solve */
    {
        const se_event *ev = &res.events[pick];
        if (line != NULL) {
            se_calibration cal;
            size_t n = seg == SE_LINE_ALL_SEGMENTS ? line->n_segments : 1;
            if (se_line_calibrate(line, dist, dist_sigma, ev->delay_s, ev->delay_uncertainty_s, seg,
                                  &cal, &err) != SE_OK) {
                rc = se_cli_fail(se_cli_exit_code(err.code, 0), "calibrate: %s", err.message);
                goto done;
            }
            k = cal.scale;
            k_sigma = cal.scale_sigma;
            vals = calloc(n, sizeof *vals);
            if (vals == NULL) {
                rc = se_cli_fail(SE_EXIT_MEMORY, "calibrate: out of memory");
                goto done;
            }
            for (i = 0; i < line->n_segments; i++) {
                se_cal_value *cv;
                if (seg != SE_LINE_ALL_SEGMENTS && i != seg)
                    continue;
                cv = &vals[nval++];
                cv->segment = line->segments[i].name;
                if (se_line_calibrated_value(line, i, k, &cv->key, &cv->value, &err) != SE_OK) {
                    rc = se_cli_fail(se_cli_exit_code(err.code, 0), "calibrate: %s", err.message);
                    goto done;
                }
                /* tension and EA go as k^2 (v ~ sqrt), the others as k */
                cv->sigma = cv->value * k_sigma / k *
                            (strcmp(cv->key, "tension") == 0 || strcmp(cv->key, "axial_stiffness") == 0
                                 ? 2.0
                                 : 1.0);
                cv->speed_m_s = k * line->segments[i].speed_m_s;
            }
        } else {
            /* uniform line: t = 2 d / v, so k = t_nominal / t_measured (first-order errors) */
            double rd = dist_sigma / dist, rt = ev->delay_uncertainty_s / ev->delay_s;
            k = t_nom / ev->delay_s;
            k_sigma = k * sqrt(rd * rd + rt * rt);
            vals = calloc(1, sizeof *vals);
            if (vals == NULL) {
                rc = se_cli_fail(SE_EXIT_MEMORY, "calibrate: out of memory");
                goto done;
            }
            nval = 1;
            vals[0].speed_m_s = k * sp.speed_m_s;
            if (isfinite(sp.tension_n)) {
                vals[0].key = "tension";
                vals[0].value = k * k * sp.tension_n;
                vals[0].sigma = 2.0 * vals[0].value * k_sigma / k;
            } else if (isfinite(sp.axial_stiffness_n)) {
                vals[0].key = "axial_stiffness";
                vals[0].value = k * k * sp.axial_stiffness_n;
                vals[0].sigma = 2.0 * vals[0].value * k_sigma / k;
            } else if (isfinite(sp.velocity_factor)) {
                vals[0].key = "velocity_factor";
                vals[0].value = k * sp.velocity_factor;
                vals[0].sigma = vals[0].value * k_sigma / k;
                if (vals[0].value > 1.0) {
                    rc = se_cli_fail(SE_EXIT_DATA,
                                     "calibrate: the echo gives a velocity factor of %g, above 1: "
                                     "not the reflector at %g m",
                                     vals[0].value, dist);
                    goto done;
                }
            } else {
                vals[0].key = "speed";
                vals[0].value = k * sp.speed_m_s;
                vals[0].sigma = vals[0].value * k_sigma / k;
            }
        }
    }
    if (fabs(k - 1.0) > 0.3)
        fprintf(stderr,
                "strandecho: warning: the speed changes by a factor %.4g: check that echo %zu is the "
                "reflector at %g m\n",
                k, pick + 1, dist);

    if (json != NULL) {
        const se_event *ev = &res.events[pick];
        json_t *jv = json_array(), *je = json_object();
        int bad = (root = json_object()) == NULL || jv == NULL || je == NULL;
        if (!bad) {
            bad |= json_object_set_new(root, "tool", json_string("strandecho"));
            bad |= json_object_set_new(root, "tool_version", json_string(se_version()));
            bad |= json_object_set_new(root, "command", json_string("calibrate"));
            bad |= json_object_set_new(root, "input_file", json_string(path));
            bad |= json_object_set_new(root, "channel", json_integer((json_int_t)channel));
            bad |= json_object_set_new(root, "reference", json_string(refdesc));
            bad |= json_object_set_new(root, "line_file", line_path ? json_string(line_path) : json_null());
            bad |= json_object_set_new(root, "feature", feature ? json_string(feature) : json_null());
            bad |= json_object_set_new(root, "segment",
                                       segment_name ? json_string(segment_name) : json_null());
            bad |= json_object_set_new(root, "known_distance_m", se_jnum(dist));
            bad |= json_object_set_new(root, "distance_sigma_m", se_jnum(dist_sigma));
            bad |= json_object_set_new(root, "nominal_round_trip_s", se_jnum(t_nom));
            bad |= json_object_set_new(je, "index", json_integer((json_int_t)pick + 1));
            bad |= json_object_set_new(je, "delay_s", se_jnum(ev->delay_s));
            bad |= json_object_set_new(je, "delay_uncertainty_s", se_jnum(ev->delay_uncertainty_s));
            bad |= json_object_set_new(je, "nominal_distance_m", se_jnum(ev->distance_m));
            bad |= json_object_set_new(je, "reflection", se_jnum(ev->reflection));
            bad |= json_object_set_new(je, "snr_db", se_jnum(ev->snr_db));
            bad |= json_object_set_new(je, "matched_to_feature", json_boolean(matched));
            bad |= json_object_set_new(root, "event", je);
            je = NULL;
            bad |= json_object_set_new(root, "scale", se_jnum(k));
            bad |= json_object_set_new(root, "scale_sigma", se_jnum(k_sigma));
            for (i = 0; i < nval && !bad; i++) {
                json_t *o = json_object();
                if (o == NULL || json_array_append_new(jv, o) != 0) {
                    json_decref(o);
                    bad = 1;
                    break;
                }
                bad |= json_object_set_new(o, "segment",
                                           vals[i].segment ? json_string(vals[i].segment) : json_null());
                bad |= json_object_set_new(o, "key", json_string(vals[i].key));
                bad |= json_object_set_new(o, "value", se_jnum(vals[i].value));
                bad |= json_object_set_new(o, "sigma", se_jnum(vals[i].sigma));
                bad |= json_object_set_new(o, "speed_m_s", se_jnum(vals[i].speed_m_s));
                bad |= json_object_set_new(o, "speed_sigma_m_s",
                                           se_jnum(vals[i].speed_m_s * k_sigma / k));
            }
            bad |= json_object_set_new(root, "values", jv);
            jv = NULL;
        }
        json_decref(jv);
        json_decref(je);
        if (bad) {
            rc = se_cli_fail(SE_EXIT_MEMORY, "calibrate: out of memory for the JSON output");
            goto done;
        }
        if ((rc = se_cli_write_json(json, root)) != SE_EXIT_OK)
            goto done;
    }
    if (!c.quiet && !(json != NULL && strcmp(json, "-") == 0)) {
        const se_event *ev = &res.events[pick];
        const int feet = units[0] == 'f';
        const double kl = feet ? 1.0 / 0.3048 : 1.0;
        const char *lu = feet ? "ft" : "m";
        printf("calibration of %s (channel %lu, reference %s)%s%s\n", path, channel, refdesc,
               line != NULL ? " on the line " : "", line != NULL ? line_path : "");
        printf("reflector: %s at %.3f %s (+/- %.3f %s), expected at %.6g ms round trip\n",
               feature != NULL ? feature : "known distance", dist * kl, lu, dist_sigma * kl, lu,
               t_nom * 1e3);
        printf("echo %zu%s: delay %.6f ms +/- %.3g ms, reflection %+.3f, SNR %.1f dB\n", pick + 1,
               matched ? " (matched to it)" : " (nearest in delay)", ev->delay_s * 1e3,
               ev->delay_uncertainty_s * 1e3, ev->reflection, ev->snr_db);
        printf("speed scale k = t_predicted / t_measured = %.7f +/- %.3g (1 sigma)%s\n", k, k_sigma,
               line != NULL && seg != SE_LINE_ALL_SEGMENTS ? " on that segment only" : "");
        printf("\nvalues to use (1 sigma):\n");
        for (i = 0; i < nval; i++) {
            char buf[160];
            se_format_value(&vals[i], feet, buf, sizeof buf);
            if (vals[i].segment != NULL)
                printf("  segment '%s': %s; speed %.6g +/- %.3g %s/s\n", vals[i].segment, buf,
                       vals[i].speed_m_s * kl, vals[i].speed_m_s * k_sigma / k * kl, lu);
            else
                printf("  %s; speed %.6g +/- %.3g %s/s\n", buf, vals[i].speed_m_s * kl,
                       vals[i].speed_m_s * k_sigma / k * kl, lu);
        }
        printf("reuse a calibration only on the same line material and tension\n");
    }
done:
    json_decref(root);
    free(vals);
    free(exp);
    se_line_free(line);
    free(refbuf);
    se_locate_result_free(&res);
    se_recording_free(rec);
    return rc;
}

/* The echo of the reflector: the one matched to the named feature, else the primary nearest the
 * predicted delay. SE_EXIT_DATA when there is no primary at all. */
static int se_pick_event(const se_locate_result *res, const se_expected_event *exp, size_t nexp,
                         const char *feature, double t_nominal, size_t *pick, int *matched)
{
    size_t i;
    double best = INFINITY;
    *matched = 0;
    if (feature != NULL && exp != NULL) {
        for (i = 0; i < res->n_events; i++) {
            int x = res->events[i].expected;
            if (x >= 0 && (size_t)x < nexp &&
                (strcmp(exp[x].name, feature) == 0 ||
                 (strcmp(feature, "end") == 0 && exp[x].type == SE_EVENT_END))) {
                *pick = i;
                *matched = 1;
                return SE_EXIT_OK;
            }
        }
    }
    for (i = 0; i < res->n_events; i++) {
        double d = fabs(res->events[i].delay_s - t_nominal);
        if (res->events[i].multiple)
            continue;
        if (d < best) {
            best = d;
            *pick = i;
        }
    }
    return isfinite(best) ? SE_EXIT_OK : SE_EXIT_DATA;
}

/* "tension: 652.3 kN (+/- 1.2 kN)" in the line file's usual units. */
static void se_format_value(const se_cal_value *v, int feet, char *buf, size_t size)
{
    if (strcmp(v->key, "tension") == 0 && v->value < 1e3)
        snprintf(buf, size, "tension: %.6g N (+/- %.3g N)", v->value, v->sigma);
    else if (strcmp(v->key, "tension") == 0)
        snprintf(buf, size, "tension: %.6g kN (+/- %.3g kN)", v->value * 1e-3, v->sigma * 1e-3);
    else if (strcmp(v->key, "axial_stiffness") == 0)
        snprintf(buf, size, "axial_stiffness: %.6g MN (+/- %.3g MN)", v->value * 1e-6,
                 v->sigma * 1e-6);
    else if (strcmp(v->key, "speed") == 0 && feet)
        snprintf(buf, size, "speed: %.6g ft/s (+/- %.3g ft/s)", v->value / 0.3048,
                 v->sigma / 0.3048);
    else if (strcmp(v->key, "speed") == 0)
        snprintf(buf, size, "speed: %.6g m/s (+/- %.3g m/s)", v->value, v->sigma);
    else
        snprintf(buf, size, "%s: %.6g (+/- %.3g)", v->key, v->value, v->sigma);
}

