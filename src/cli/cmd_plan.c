/* strandecho CLI: `strandecho plan`, survey settings for a described line: pulse length, sample
 * rate, record length, dead zone, the amplitude of every expected echo at the sensor and the SNR
 * (and number of stacked shots) needed to see the weakest. A thin layer over the line module and
 * the detection threshold rule (se_rice_k). The rules are stated in the usage text and the
 * output. */
#include <jansson.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "strandecho/detect.h"
#include "strandecho/line.h"
#include "strandecho/output.h"
#include "strandecho/pulse.h"
#include "strandecho/units.h"

/* Rules (REFERENCE.md 2 and 3; the margins are common practice, no source). */
#define SE_PLAN_BW_FACTOR 10.0      /* sample rate >= 10 x the pulse bandwidth */
#define SE_PLAN_QUANTUM_FACTOR 10.0 /* sampling quantum v/(2 fs) <= resolution / 10 */
#define SE_PLAN_RECORD_MARGIN 0.10  /* record = (1 + 10 %) x 2 x round trip to the end + 3 pulses */
#define SE_PLAN_DETECT_MARGIN_DB 3.0 /* over the Rice threshold for about 90 % detection */
#define SE_PLAN_MAX_SHOTS 1e9

static const char se_plan_usage[] =
    "usage: strandecho plan --line FILE --resolution R [options]\n"
    "\n"
    "Survey settings for a described line (docs/line-file.md) and a wanted resolution R (m, ft):\n"
    "  pulse      a Hann pulse of length tau = 2 R / v_slowest (two echoes apart by ~ v tau / 2\n"
    "             are resolved, at the slowest segment)\n"
    "  rate       fs >= 10 x the pulse bandwidth B = 2 / tau (the Hann main-lobe half-width), and\n"
    "             the sampling quantum v_fastest / (2 fs) <= R / 10; rounded up to 1, 2 or 5 x 10^n\n"
    "  record     2 x the round trip to the end (its first multiple) + 10 %, plus 3 pulse lengths\n"
    "             (2 before the pulse, as simulate places it, and the pulse itself)\n"
    "  dead zone  v_sensor tau / 2: echoes closer than that overlap the outgoing pulse\n"
    "  echoes     every expected junction, feature and the end with its amplitude at the sensor\n"
    "             (reflection x two-way transmission)\n"
    "  SNR        an echo of amplitude a is seen at SNR_1 + 20 log10|a| (SNR_1: --snr-db, the\n"
    "             single-shot SNR of a full reflection, 20 log10(1 / noise level) as locate reports\n"
    "             it); it is detected (about 90 %) when that reaches 20 log10 k + 3 dB, k the Rice\n"
    "             threshold for the false-alarm target over the record (se_rice_k); N stacked shots\n"
    "             gain 10 log10 N dB\n"
    "\n"
    "  --line FILE              the line description (required)\n"
    "  --resolution R           wanted resolution (required; m, ft...)\n"
    "  --snr-db S               single-shot SNR of a full reflection, dB (default 30)\n"
    "  --false-alarms N         expected false detections per record (default 0.01)\n"
    "  --json PATH              write the plan as JSON (- for standard output; SI units)\n"
    "  --units m|ft             lengths and speeds in the text\n"
    "  --quiet\n";

static double se_nice_up(double x);
static void se_fmt_time(double t, char *buf, size_t size);

static json_t *se_jnum(double x)
{
    return isfinite(x) ? json_real(x) : json_null();
}

int se_cmd_plan(int argc, char **argv)
{
    se_cli c = {argc, argv, 1, 0, 0};
    se_error err;
    const char *line_path = NULL, *json = NULL, *units = "m", *resolution = NULL, *v;
    se_line *ln = NULL;
    se_expected_event *ev = NULL;
    size_t nev = 0, i, nsamp = 0, npulse = 0, weakest = SIZE_MAX;
    double res_m = NAN, snr_db = 30.0, fa = 0.01, vmin = INFINITY, vmax = 0.0, v0, tau, bw;
    double fs_bw, fs_q, fs, rec_s, dead_m, beta, k, need_db, shots = NAN, weakest_snr = NAN;
    double *pulse = NULL;
    size_t slow = 0, fast = 0;
    char tau_text[32], pulse_spec[48], rec_text[32];
    se_pulse_shape shape;
    json_t *root = NULL;
    int rc = SE_EXIT_OK, got;

    se_error_clear(&err);
    while (c.i < argc) {
        const char *a = argv[c.i];
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            fputs(se_plan_usage, stdout);
            return SE_EXIT_OK;
        }
        SE_TAKE("--line", line_path)
        SE_TAKE("--json", json)
        SE_TAKE("--units", units)
        SE_TAKE("--resolution", resolution)
        if ((got = se_cli_value(&c, "--snr-db", &v)) != 0) {
            char *end;
            if (got < 0)
                return SE_EXIT_USAGE;
            snr_db = strtod(v, &end);
            while (*end == ' ')
                end++;
            if (end == v || (*end != '\0' && strcmp(end, "dB") != 0) || !isfinite(snr_db) ||
                snr_db < -50.0 || snr_db > 200.0)
                return se_cli_fail(SE_EXIT_USAGE, "--snr-db: '%s' is not a number of dB in [-50, 200]",
                                   v);
            continue;
        }
        SE_TAKE_FALSE_ALARMS(fa)
        if (se_cli_flag(&c, "--quiet")) {
            c.quiet = 1;
            continue;
        }
        return se_cli_fail(SE_EXIT_USAGE, "plan: unknown argument %s (see strandecho plan --help)", a);
    }
    if (line_path == NULL)
        return se_cli_fail(SE_EXIT_USAGE, "plan needs --line FILE (see strandecho plan --help)");
    if (resolution == NULL)
        return se_cli_fail(SE_EXIT_USAGE, "plan needs --resolution R, e.g. --resolution 0.5m");
    if (strcmp(units, "m") != 0 && strcmp(units, "ft") != 0)
        return se_cli_fail(SE_EXIT_USAGE, "--units: '%s' is not m or ft", units);
    if (se_unit_parse(resolution, SE_UNIT_LENGTH, NULL, &res_m, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--resolution: %s", err.message);
    if (!(res_m > 0.0) || !isfinite(res_m))
        return se_cli_fail(SE_EXIT_USAGE, "--resolution: %g m is not positive", res_m);
    if (json != NULL) {
        const char *inputs[2] = {line_path, NULL};
        if ((rc = se_cli_check_output(json, inputs)) != SE_EXIT_OK)
            return rc;
    }
    ln = se_line_read(line_path, &err);
    if (ln == NULL)
        return se_cli_fail_err(&err, 0);
    if (res_m >= ln->length_m) {
        rc = se_cli_fail(SE_EXIT_USAGE, "--resolution: %g m is not below the line's length %g m",
                         res_m, ln->length_m);
        goto done;
    }
    if (se_line_expected_events(ln, &ev, &nev, &err) != SE_OK) {
        rc = se_cli_fail_err(&err, 0);
        goto done;
    }

    /* slowest and fastest local speeds: a hanging segment's tension is monotone along it, so its
     * extremes are at its ends (a free hanging end, v -> 0, is left out: the mean then stands) */
    for (i = 0; i < ln->n_segments; i++) {
        const se_segment *s = &ln->segments[i];
        const double cand[3] = {s->speed_near_m_s, s->speed_far_m_s, s->speed_m_s};
        size_t j;
        for (j = 0; j < 3; j++) {
            if (!(cand[j] > 0.0) || !isfinite(cand[j]) || cand[j] < 1e-3 * s->speed_m_s)
                continue;
            if (cand[j] < vmin) {
                vmin = cand[j];
                slow = i;
            }
            if (cand[j] > vmax) {
                vmax = cand[j];
                fast = i;
            }
        }
    }
    v0 = ln->segments[0].speed_near_m_s > 0.0 ? ln->segments[0].speed_near_m_s
                                              : ln->segments[0].speed_m_s;
    tau = 2.0 * res_m / vmin;
    bw = 2.0 / tau;
    fs_bw = SE_PLAN_BW_FACTOR * bw;
    fs_q = SE_PLAN_QUANTUM_FACTOR * vmax / (2.0 * res_m);
    fs = se_nice_up(fmax(fs_bw, fs_q));
    rec_s = (1.0 + SE_PLAN_RECORD_MARGIN) * 2.0 * ln->round_trip_s + 3.0 * tau;
    dead_m = 0.5 * v0 * tau;
    se_fmt_time(tau, tau_text, sizeof tau_text);
    se_fmt_time(rec_s, rec_text, sizeof rec_text);
    snprintf(pulse_spec, sizeof pulse_spec, "hann:%s", tau_text);
    if (!(rec_s * fs < 4e9)) {
        rc = se_cli_fail(SE_EXIT_DATA,
                         "plan: %g s at %g Hz is %.3g samples: ask for a coarser resolution", rec_s,
                         fs, rec_s * fs);
        goto done;
    }
    nsamp = (size_t)ceil(rec_s * fs);

    /* detection threshold: Rice's k for the false-alarm target over the whole record, at the
     * RMS bandwidth of the rendered pulse (rad/sample) */
    shape.kind = SE_PULSE_HANN;
    if (se_pulse_parse(pulse_spec, &shape, &err) != SE_OK ||
        se_pulse_render(&shape, fs, &pulse, &npulse, &err) != SE_OK) {
        rc = se_cli_fail(se_cli_exit_code(err.code, 0), "plan: pulse %s at %g Hz: %s", pulse_spec, fs,
                         err.message);
        goto done;
    }
    beta = se_pulse_rms_bandwidth(pulse, npulse);
    k = se_rice_k((double)nsamp, beta, fa);
    if (!isfinite(k)) {
        rc = se_cli_fail(SE_EXIT_INTERNAL, "plan: no threshold for %zu lags at %g rad/sample", nsamp,
                         beta);
        goto done;
    }
    need_db = 20.0 * log10(k) + SE_PLAN_DETECT_MARGIN_DB;
    for (i = 0; i < nev; i++)
        if (ev[i].has_reflection && ev[i].amplitude != 0.0 &&
            (weakest == SIZE_MAX || fabs(ev[i].amplitude) < fabs(ev[weakest].amplitude)))
            weakest = i;
    if (weakest != SIZE_MAX) {
        weakest_snr = snr_db + 20.0 * log10(fabs(ev[weakest].amplitude));
        shots = ceil(pow(10.0, (need_db - weakest_snr) / 10.0) - 1e-9);
        if (shots < 1.0)
            shots = 1.0;
    }

    if (json != NULL) {
        json_t *evs = json_array();
        int bad = (root = json_object()) == NULL || evs == NULL;
        if (!bad) {
            bad |= json_object_set_new(root, "tool", json_string("strandecho"));
            bad |= json_object_set_new(root, "tool_version", json_string(se_version()));
            bad |= json_object_set_new(root, "command", json_string("plan"));
            bad |= json_object_set_new(root, "line_file", json_string(line_path));
            bad |= json_object_set_new(root, "line_name", json_string(ln->name));
            bad |= json_object_set_new(root, "resolution_m", se_jnum(res_m));
            bad |= json_object_set_new(root, "slowest_speed_m_s", se_jnum(vmin));
            bad |= json_object_set_new(root, "slowest_segment", json_string(ln->segments[slow].name));
            bad |= json_object_set_new(root, "fastest_speed_m_s", se_jnum(vmax));
            bad |= json_object_set_new(root, "fastest_segment", json_string(ln->segments[fast].name));
            bad |= json_object_set_new(root, "sensor_speed_m_s", se_jnum(v0));
            bad |= json_object_set_new(root, "pulse", json_string(pulse_spec));
            bad |= json_object_set_new(root, "pulse_length_s", se_jnum(tau));
            bad |= json_object_set_new(root, "pulse_bandwidth_hz", se_jnum(bw));
            bad |= json_object_set_new(root, "rate_for_bandwidth_hz", se_jnum(fs_bw));
            bad |= json_object_set_new(root, "rate_for_quantum_hz", se_jnum(fs_q));
            bad |= json_object_set_new(root, "rate_hz", se_jnum(fs));
            bad |= json_object_set_new(root, "sampling_quantum_m", se_jnum(vmax / (2.0 * fs)));
            bad |= json_object_set_new(root, "round_trip_s", se_jnum(ln->round_trip_s));
            bad |= json_object_set_new(root, "record_s", se_jnum(rec_s));
            bad |= json_object_set_new(root, "record_samples", json_integer((json_int_t)nsamp));
            bad |= json_object_set_new(root, "dead_zone_m", se_jnum(dead_m));
            bad |= json_object_set_new(root, "dead_zone_s", se_jnum(tau));
            bad |= json_object_set_new(root, "rms_bandwidth_rad_per_sample", se_jnum(beta));
            bad |= json_object_set_new(root, "false_alarms_per_record", se_jnum(fa));
            bad |= json_object_set_new(root, "threshold_sigma", se_jnum(k));
            bad |= json_object_set_new(root, "detect_margin_db", se_jnum(SE_PLAN_DETECT_MARGIN_DB));
            bad |= json_object_set_new(root, "snr_needed_db", se_jnum(need_db));
            bad |= json_object_set_new(root, "single_shot_snr_db", se_jnum(snr_db));
            bad |= json_object_set_new(root, "weakest",
                                       weakest != SIZE_MAX ? json_string(ev[weakest].name) : json_null());
            bad |= json_object_set_new(root, "weakest_snr_db", se_jnum(weakest_snr));
            bad |= json_object_set_new(root, "shots", se_jnum(shots));
            for (i = 0; i < nev && !bad; i++) {
                json_t *o = json_object();
                if (o == NULL || json_array_append_new(evs, o) != 0) {
                    json_decref(o);
                    bad = 1;
                    break;
                }
                bad |= json_object_set_new(o, "name", json_string(ev[i].name));
                bad |= json_object_set_new(o, "kind", json_string(ev[i].kind));
                bad |= json_object_set_new(o, "distance_m", se_jnum(ev[i].distance_m));
                bad |= json_object_set_new(o, "delay_s", se_jnum(ev[i].round_trip_s));
                bad |= json_object_set_new(o, "reflection",
                                           ev[i].has_reflection ? se_jnum(ev[i].reflection) : json_null());
                bad |= json_object_set_new(o, "transmission", se_jnum(ev[i].transmission));
                bad |= json_object_set_new(o, "amplitude",
                                           ev[i].has_reflection ? se_jnum(ev[i].amplitude) : json_null());
                bad |= json_object_set_new(
                    o, "snr_db",
                    ev[i].has_reflection && ev[i].amplitude != 0.0
                        ? se_jnum(snr_db + 20.0 * log10(fabs(ev[i].amplitude)))
                        : json_null());
                bad |= json_object_set_new(o, "in_dead_zone", json_boolean(ev[i].round_trip_s < tau));
            }
            bad |= json_object_set_new(root, "events", evs);
            evs = NULL;
        }
        json_decref(evs);
        if (bad) {
            rc = se_cli_fail(SE_EXIT_MEMORY, "plan: out of memory for the JSON output");
            goto done;
        }
        if ((rc = se_cli_write_json(json, root)) != SE_EXIT_OK)
            goto done;
    }

    if (!c.quiet && !(json != NULL && strcmp(json, "-") == 0)) {
        const int feet = units[0] == 'f';
        const double kl = feet ? 1.0 / 0.3048 : 1.0;
        const char *lu = feet ? "ft" : "m";
        char rate_text[32];
        if (fs >= 1e6)
            snprintf(rate_text, sizeof rate_text, "%.6gMHz", fs * 1e-6);
        else if (fs >= 1e3)
            snprintf(rate_text, sizeof rate_text, "%.6gkHz", fs * 1e-3);
        else
            snprintf(rate_text, sizeof rate_text, "%.6gHz", fs);
        printf("plan for %s (%s), %.3f %s, round trip %.6g s, resolution %.3f %s\n",
               ln->name[0] ? ln->name : "(unnamed)", line_path, ln->length_m * kl, lu,
               ln->round_trip_s, res_m * kl, lu);
        printf("\nslowest speed %.6g %s/s (%s), fastest %.6g %s/s (%s), at the sensor %.6g %s/s\n",
               vmin * kl, lu, ln->segments[slow].name, vmax * kl, lu, ln->segments[fast].name, v0 * kl,
               lu);
        printf("pulse:        %s (tau = 2 R / v_slowest = %.6g s; bandwidth B = 2/tau = %.6g Hz)\n",
               pulse_spec, tau, bw);
        printf("sample rate:  %s (>= 10 B = %.6g Hz and >= 10 v_fastest / (2 R) = %.6g Hz; "
               "sampling quantum %.4g %s)\n",
               rate_text, fs_bw, fs_q, vmax / (2.0 * fs) * kl, lu);
        printf("record:       %s = %zu samples (2 x %.6g s round trip + 10 %% + 3 pulse lengths)\n",
               rec_text, nsamp, ln->round_trip_s);
        printf("dead zone:    %.4g %s (v_sensor tau / 2)\n", dead_m * kl, lu);
        printf("\n #  expected echo                     kind        distance (%s)  delay (s)  "
               "reflection  two-way transm.  at sensor  SNR 1 shot (dB)\n",
               lu);
        for (i = 0; i < nev; i++) {
            char refl[24] = "unknown", amp[24] = "unknown", snr[24] = "-";
            if (ev[i].has_reflection) {
                snprintf(refl, sizeof refl, "%+.4f", ev[i].reflection);
                snprintf(amp, sizeof amp, "%+.4f", ev[i].amplitude);
                if (ev[i].amplitude != 0.0)
                    snprintf(snr, sizeof snr, "%.1f", snr_db + 20.0 * log10(fabs(ev[i].amplitude)));
            }
            printf("%2zu  %-32.32s  %-10.10s  %13.3f  %9.6g  %10s  %15.4f  %9s  %15s%s%s\n", i + 1,
                   ev[i].name, ev[i].kind, ev[i].distance_m * kl, ev[i].round_trip_s, refl,
                   ev[i].transmission, amp, snr, i == weakest ? "  weakest" : "",
                   ev[i].round_trip_s < tau ? "  IN THE DEAD ZONE" : "");
        }
        printf("\ndetection: threshold k = %.3f sigma (Rice, %g false alarm%s over %zu lags at "
               "%.4g rad/sample),\n  needed 20 log10 k + %.0f dB = %.1f dB for about 90 %% "
               "detection\n",
               k, fa, fa == 1.0 ? "" : "s", nsamp, beta, SE_PLAN_DETECT_MARGIN_DB, need_db);
        if (weakest == SIZE_MAX)
            printf("no expected echo has a known coefficient: nothing to size the stacking on\n");
        else if (shots > SE_PLAN_MAX_SHOTS)
            printf("weakest: %s at %.1f dB per shot: stacking cannot reach %.1f dB (more than %.0g "
                   "shots); raise the source level\n",
                   ev[weakest].name, weakest_snr, need_db, SE_PLAN_MAX_SHOTS);
        else
            printf("weakest: %s at %.1f dB per shot (single-shot SNR %.1f dB of a full reflection): "
                   "%.0f shot%s stacked (+%.1f dB, 10 log10 N)\n",
                   ev[weakest].name, weakest_snr, snr_db, shots, shots == 1.0 ? "" : "s",
                   10.0 * log10(shots));
        printf("\ntry: strandecho simulate --line %s --pulse %s --rate %s --duration %s -o healthy.wav\n",
               line_path, pulse_spec, rate_text, rec_text);
    }
done:
    json_decref(root);
    free(pulse);
    free(ev);
    se_line_free(ln);
    return rc;
}

/* Smallest 1, 2 or 5 x 10^n >= x (x > 0). */
static double se_nice_up(double x)
{
    double p = pow(10.0, floor(log10(x)));
    const double steps[4] = {1.0, 2.0, 5.0, 10.0};
    size_t i;
    for (i = 0; i < 4; i++)
        if (steps[i] * p >= x * (1.0 - 1e-12))
            return steps[i] * p;
    return 10.0 * p;
}

/* A duration as a spec the unit parser reads back: "12.5ms", "2.4us", "3.2s". */
static void se_fmt_time(double t, char *buf, size_t size)
{
    if (t >= 1.0)
        snprintf(buf, size, "%.6gs", t);
    else if (t >= 1e-3)
        snprintf(buf, size, "%.6gms", t * 1e3);
    else if (t >= 1e-6)
        snprintf(buf, size, "%.6gus", t * 1e6);
    else
        snprintf(buf, size, "%.6gns", t * 1e9);
}

