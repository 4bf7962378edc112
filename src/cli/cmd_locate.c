/* strandecho CLI: `strandecho locate`, a thin layer over se_locate. */
#include <math.h>
#include <unistd.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "cli_reference.h"
#include "commands.h"
#include "strandecho/caution.h"
#include "strandecho/digest.h"
#include "strandecho/eventcsv.h"
#include "strandecho/jsonout.h"
#include "strandecho/line.h"
#include "strandecho/locate.h"
#include "strandecho/output.h"
#include "strandecho/plot.h"
#include "strandecho/pulse.h"
#include "strandecho/recording.h"
#include "strandecho/stream.h"
#include "strandecho/report.h"
#include "strandecho/units.h"

/* Multiples listed in the terminal table without --verbose; more are counted, not listed. */
#define SE_TABLE_MULTIPLES 8

static const char se_locate_usage[] =
    "usage: strandecho locate RECORDING [options]\n"
    "\n"
    "Find, locate and classify the reflections in a recording of an injected pulse.\n"
    "\n"
    "Recording and reference:\n"
    "  --channel N              response channel, 1-based (default 1)\n"
    "  --pulse-channel N        the injected pulse is recorded on channel N\n"
    "  --pulse FILE|SPEC        the pulse from a separate recording, or a shape:\n"
    "                           hann:4ms halfsine:2ms gauss:3ms triangle:2ms ricker:200Hz\n"
    "                           burst:5@2kHz chirp:100Hz-2kHz:50ms\n"
    "                           (none: the direct arrival in the response is the reference)\n"
    "  --quantity Q             what the sensor measures: displacement velocity acceleration\n"
    "                           force strain voltage current (default velocity; voltage with\n"
    "                           --velocity-factor)\n"
    "Line description:\n"
    "  --line FILE              a line description (docs/line-file.md): speeds per segment,\n"
    "                           quantity, ends and expected features; echoes are matched to\n"
    "                           the expected junctions and features, the rest are unexpected\n"
    "Wave speed (one way, when no --line):\n"
    "  --speed V                m/s (or km/s, ft/s, m/us, ft/us)\n"
    "  --velocity-factor F      times the speed of light (electrical lines)\n"
    "  --tension T --mass-per-length MU        transverse waves, sqrt(T/mu)\n"
    "  --axial-stiffness EA --mass-per-length MU  longitudinal waves, sqrt(EA/mu)\n"
    "  --speed-uncertainty PCT  one standard uncertainty of the speed, percent\n"
    "Detection:\n"
    "  --false-alarms N         expected false detections per record (default 0.01)\n"
    "  --source-end TERM        continuing, free, fixed, open, short, matched or a coefficient:\n"
    "                           corrects echo amplitudes seen at the sensor; or estimate (the\n"
    "                           default without --line: from the source-end multiples, 0 when\n"
    "                           the record holds none)\n"
    "  --stacking auto|off|robust  repeated shots (taps) in one recording are found (on the pulse\n"
    "                           channel when given), aligned and averaged (robust: trimmed mean);\n"
    "                           default auto\n"
    "  --noise-tracking on|off  thresholds follow noise that changes along the record (default on)\n"
    "  --confidence P           coverage of the distance intervals (default 0.95)\n"
    "  --max-events N           at most N events (default 64)\n"
    "  --skin-loss K|estimate   skin-effect loss of a cable: K in s^0.5/m, or the datasheet form\n"
    "                           \"6.6 dB/100m@100MHz\" (all of it taken as conductor loss), or\n"
    "                           estimate (from the echoes' shapes); echoes are matched with\n"
    "                           loss-shaped templates so their delays are not late (default none)\n"
    "Output:\n"
    "  --json PATH              write the result as JSON (- for standard output)\n"
    "  --memory-limit MIB       largest recording read whole, MiB of samples as doubles (default\n"
    "                           2048); a larger one is streamed in blocks (needs --pulse-channel or\n"
    "                           --pulse), its repeated taps stacked within this limit (at most\n"
    "                           256 MiB)\n"
    "  --stream                 stream the recording in blocks even when it fits in memory\n"
    "  --plot FILE              the reflectogram: .png, .svg or .pdf by the extension\n"
    "  --plot-size WxH          plot size, pixels (PNG) or points (SVG, PDF) (default 1200x700)\n"
    "  --report FILE.html       a self-contained HTML report (plot, findings, inputs, cautions)\n"
    "  --csv FILE               the events as CSV for spreadsheets (- for standard output)\n"
    "  --title TEXT             title of the plot and the report\n"
    "  --units m|ft             distances in the table, plot and report (JSON and CSV stay SI)\n"
    "  --quiet, --verbose\n"
    "\n"
    "exit codes: 0 success; 1 internal failure; 2 bad command line or option value; 3 input file\n"
    "unreadable or malformed; 4 data cannot give a result (no pulse, too short, NaN...); 5 output\n"
    "cannot be written; 6 out of memory.\n";

static void se_print_table(const se_locate_result *res, const se_recording *rec, unsigned ch,
                           const char *refdesc, const se_speed *sp, double fa, double conf,
                           int feet, int verbose, const se_line *line,
                           const se_expected_event *exp);

/* The plot, the HTML report and the CSV of one located recording. */
static int se_locate_outputs(const se_locate_result *res, const se_run_info *info, const se_line *line,
                             const se_expected_event *exp, size_t nexp, const se_distmap *map,
                             const char *plot, double w, double h, const char *report,
                             const char *csv, const char *title, int feet, const char *refdesc)
{
    se_error err;
    se_plot_data pd;
    se_error_clear(&err);
    se_plot_data_init(&pd);
    pd.trace = res->trace;
    pd.n = res->trace_length;
    pd.rate_hz = res->rate_hz;
    pd.map = map;
    pd.result = res;
    pd.line = line;
    pd.expected = exp;
    pd.n_expected = nexp;
    pd.title = title;
    if (pd.title == NULL)
        pd.title = strrchr(info->input_file, '/') != NULL ? strrchr(info->input_file, '/') + 1
                                                          : info->input_file;
    pd.units = feet ? SE_PLOT_FEET : SE_PLOT_METRES;
    if (plot != NULL && se_plot_write(&pd, plot, SE_PLOT_AUTO, w, h, &err) != SE_OK)
        return se_cli_fail_err(&err, 1);
    if (report != NULL) {
        se_report rp;
        se_report_line rl;
        se_report_param par[1] = {{"reference", refdesc}};
        se_report_init(&rp);
        se_report_line_init(&rl);
        rl.result = res;
        rl.info = info;
        rl.line = line;
        rl.expected = exp;
        rl.n_expected = nexp;
        rl.plot = &pd;
        rl.params = par;
        rl.n_params = 1;
        rp.title = title;
        rp.units = pd.units;
        rp.lines = &rl;
        rp.n_lines = 1;
        if (se_report_write(&rp, report, &err) != SE_OK)
            return se_cli_fail_err(&err, 1);
    }
    if (csv != NULL && se_events_csv_write(res, csv, &err) != SE_OK)
        return se_cli_fail_err(&err, 1);
    return SE_EXIT_OK;
}

static int se_write_text(const char *path, const char *text)
{
    se_error err;
    se_output *out;
    se_error_clear(&err);
    out = se_output_open(path, &err);
    if (out == NULL)
        return se_cli_fail_err(&err, 1);
    if (fputs(text, se_output_stream(out)) == EOF) {
        se_output_abort(out);
        return se_cli_fail(SE_EXIT_OUTPUT, "%s: write failed", path);
    }
    if (se_output_commit(out, &err) != SE_OK)
        return se_cli_fail_err(&err, 1);
    return SE_EXIT_OK;
}

int se_cmd_locate(int argc, char **argv)
{
    se_cli c = {argc, argv, 1, 0, 0};
    se_speed_opts so;
    se_speed sp;
    se_locate_config cfg;
    se_locate_result res;
    se_recording *rec = NULL;
    se_error err;
    const char *path = NULL, *pulse = NULL, *json = NULL, *quantity = NULL, *v;
    const char *source_end = NULL, *units = "m", *line_path = NULL;
    const char *plot = NULL, *report = NULL, *csv = NULL, *title = NULL, *plot_size = NULL;
    double plot_w = 1200.0, plot_h = 700.0;
    se_run_info info;
    se_line *line = NULL;
    se_expected_event *exp = NULL;
    size_t nexp = 0;
    unsigned long channel = 1, pulse_channel = 0, max_events = 64;
    double fa = 0.01, conf = 0.95;
    double *refbuf = NULL;
    char refdesc[160], sha[65], refsha[65], *text = NULL;
    int have_refsha = 0, rc = SE_EXIT_OK, got;

    unsigned long mem_mib = 2048;
    const char *stacking = NULL, *skin_text = NULL;
    int stream = 0, rec_is_header = 0;
    se_recording header;
    memset(&header, 0, sizeof header);
    memset(&so, 0, sizeof so);
    memset(&res, 0, sizeof res);
    se_error_clear(&err);
    se_locate_config_init(&cfg);
    while (c.i < argc) {
        const char *a = argv[c.i];
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            fputs(se_locate_usage, stdout);
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
        SE_TAKE("--stacking", stacking)
        SE_TAKE("--units", units)
        SE_TAKE("--line", line_path)
        SE_TAKE("--plot", plot)
        SE_TAKE("--plot-size", plot_size)
        SE_TAKE("--report", report)
        SE_TAKE("--csv", csv)
        SE_TAKE("--title", title)
        SE_TAKE("--skin-loss", skin_text)
        SE_TAKE_UINT("--channel", 1, 65535, channel)
        SE_TAKE_UINT("--pulse-channel", 1, 65535, pulse_channel)
        SE_TAKE_UINT("--memory-limit", 1, 1048576, mem_mib)
        if (se_cli_flag(&c, "--stream")) {
            stream = 1;
            continue;
        }
        SE_TAKE_UINT("--max-events", 1, 10000, max_events)
        SE_TAKE_FALSE_ALARMS(fa)
        if ((got = se_cli_value(&c, "--noise-tracking", &v)) != 0) {
            if (got < 0)
                return SE_EXIT_USAGE;
            if (strcmp(v, "on") != 0 && strcmp(v, "off") != 0)
                return se_cli_fail(SE_EXIT_USAGE, "--noise-tracking: '%s' is not on or off", v);
            cfg.noise_tracking = strcmp(v, "on") == 0;
            continue;
        }
        if ((got = se_cli_value(&c, "--confidence", &v)) != 0) {
            char *end;
            if (got < 0)
                return SE_EXIT_USAGE;
            conf = strtod(v, &end);
            if (end == v || *end != '\0' || !(conf > 0.0 && conf < 1.0))
                return se_cli_fail(SE_EXIT_USAGE, "--confidence: '%s' is not a number in (0, 1)", v);
            continue;
        }
        if (se_cli_flag(&c, "--quiet")) {
            c.quiet = 1;
            continue;
        }
        if (se_cli_flag(&c, "--verbose")) {
            c.verbose = 1;
            continue;
        }
        if (a[0] == '-' && a[1] != '\0')
            return se_cli_fail(SE_EXIT_USAGE, "locate: unknown option %s (see strandecho locate --help)",
                               a);
        if (path != NULL)
            return se_cli_fail(SE_EXIT_USAGE, "locate: one recording at a time (got %s and %s)", path,
                               a);
        path = a;
        c.i++;
    }
    if (path == NULL)
        return se_cli_fail(SE_EXIT_USAGE, "locate: no recording given (see strandecho locate --help)");
    if (pulse != NULL && pulse_channel > 0)
        return se_cli_fail(SE_EXIT_USAGE, "give the reference once: --pulse or --pulse-channel");
    if (strcmp(units, "m") != 0 && strcmp(units, "ft") != 0)
        return se_cli_fail(SE_EXIT_USAGE, "--units: '%s' is not m or ft", units);
    if (plot != NULL) {
        se_plot_format pf;
        if (se_plot_format_from_path(plot, &pf, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--plot: %s", err.message);
    }
    if (plot_size != NULL) {
        char *end;
        plot_w = strtod(plot_size, &end);
        plot_h = (*end == 'x' || *end == 'X') ? strtod(end + 1, &end) : NAN;
        if (*end != '\0' || !(plot_w >= 200.0 && plot_w <= 10000.0) ||
            !(plot_h >= 200.0 && plot_h <= 10000.0))
            return se_cli_fail(SE_EXIT_USAGE,
                               "--plot-size: '%s' is not WIDTHxHEIGHT with each in [200, 10000]",
                               plot_size);
    }
    if (line_path != NULL &&
        (so.speed || so.velocity_factor || so.tension || so.axial_stiffness || so.mass_per_length ||
         so.uncertainty))
        return se_cli_fail(SE_EXIT_USAGE, "--line %s gives the speeds: drop the speed options (or "
                                          "drop --line)",
                           line_path);
    if ((rc = se_cli_speed_resolve(&so, line_path == NULL, &sp)) != SE_EXIT_OK)
        return rc;
    cfg.speed_m_s = sp.speed_m_s;
    cfg.speed_uncertainty = sp.uncertainty;
    cfg.false_alarms = fa;
    cfg.confidence = conf;
    cfg.max_events = max_events;
    if (skin_text != NULL) {
        if (strcmp(skin_text, "estimate") == 0)
            cfg.skin_k_s05_per_m = NAN;
        else if (se_skin_loss_parse(skin_text, &cfg.skin_k_s05_per_m, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--skin-loss: %s", err.message);
    }
    cfg.quantity = sp.electrical_hint ? SE_Q_VOLTAGE : SE_Q_VELOCITY;
    if (quantity != NULL && se_quantity_parse(quantity, &cfg.quantity, &err) != SE_OK)
        return se_cli_fail(SE_EXIT_USAGE, "--quantity: %s", err.message);
    if (line_path != NULL) {
        line = se_line_read(line_path, &err);
        if (line == NULL)
            return se_cli_fail_err(&err, 0);
        if (quantity != NULL && cfg.quantity != line->quantity) {
            rc = se_cli_fail(SE_EXIT_USAGE, "--quantity %s differs from the line file's quantity %s",
                             quantity, se_quantity_name(line->quantity));
            se_line_free(line);
            return rc;
        }
        if (source_end != NULL) {
            se_line_free(line);
            return se_cli_fail(SE_EXIT_USAGE, "--line %s gives the source end: drop --source-end",
                               line_path);
        }
        cfg.quantity = line->quantity;
        cfg.source_reflection = line->source_end_r;
        cfg.map = se_line_distmap(line);
        /* the line file's skin loss (length-weighted mean K), unless --skin-loss overrides it */
        if (skin_text == NULL && se_line_skin_loss(line, &cfg.skin_k_s05_per_m, &err) != SE_OK) {
            se_line_free(line);
            return se_cli_fail_err(&err, 0);
        }
        if (se_line_expected_events(line, &exp, &nexp, &err) != SE_OK) {
            se_line_free(line);
            return se_cli_fail_err(&err, 0);
        }
        cfg.expected = exp;
        cfg.n_expected = nexp;
        snprintf(sp.source, sizeof sp.source, "from the line file (%zu segment%s, %.6g m)",
                 line->n_segments, line->n_segments == 1 ? "" : "s", line->length_m);
    } else if (source_end == NULL || strcmp(source_end, "estimate") == 0) {
        /* not given (no line file, no --source-end): estimated from the data by se_locate, 0
         * (a continuing line) when nothing in the record supports an estimate */
        cfg.source_reflection = NAN;
    } else if (source_end != NULL &&
               se_termination_parse(source_end, cfg.quantity, &cfg.source_reflection, &err) != SE_OK) {
        return se_cli_fail(SE_EXIT_USAGE, "--source-end: %s", err.message);
    }
    if (stacking != NULL) {
        if (strcmp(stacking, "auto") == 0)
            cfg.stacking = SE_STACKING_AUTO;
        else if (strcmp(stacking, "off") == 0)
            cfg.stacking = SE_STACKING_OFF;
        else if (strcmp(stacking, "robust") == 0)
            cfg.stacking = SE_STACKING_ROBUST;
        else
            return se_cli_fail(SE_EXIT_USAGE, "--stacking: '%s' is not auto, off or robust", stacking);
    }
    {
        const char *inputs[4] = {path, line_path,
                                 pulse != NULL && !se_pulse_is_spec(pulse) ? pulse : NULL, NULL};
        if (inputs[1] == NULL) {
            inputs[1] = inputs[2];
            inputs[2] = NULL;
        }
        const char *outs[4] = {json, plot, report, csv};
        size_t k;
        for (k = 0; k < 4; k++)
            if (outs[k] != NULL && (rc = se_cli_check_output(outs[k], inputs)) != SE_EXIT_OK)
                goto done;
    }

    if (!stream) {
        se_read_options ropt;
        ropt.max_bytes = (size_t)mem_mib << 20;
        rec = se_recording_read(path, &ropt, &err);
        if (rec == NULL && err.code == SE_ERR_NOMEM && (pulse_channel > 0 || pulse != NULL) &&
            plot == NULL && report == NULL && cfg.skin_k_s05_per_m == 0.0) {
            stream = 1; /* larger than the limit: read it in blocks instead */
            if (!c.quiet)
                fprintf(stderr, "strandecho: note: %s is over the %lu MiB memory limit: streaming it\n",
                        path, mem_mib);
        } else if (rec == NULL) {
            rc = se_cli_fail_err(&err, 0);
            goto done;
        }
    }
    if (stream) {
        se_stream_config scfg;
        se_stream_info sinfo;
        se_recording *hdr = NULL;
        if (pulse_channel == 0 && pulse == NULL) {
            rc = se_cli_fail(SE_EXIT_USAGE, "streaming %s needs --pulse-channel or --pulse (the "
                                            "direct arrival as its own reference needs the whole "
                                            "record)",
                             path);
            goto done;
        }
        if (cfg.skin_k_s05_per_m != 0.0) {
            rc = se_cli_fail(SE_EXIT_USAGE, "--skin-loss needs the whole record (its templates "
                                            "reach past the echoes): not available when "
                                            "streaming %s",
                             path);
            goto done;
        }
        if (plot != NULL || report != NULL) {
            rc = se_cli_fail(SE_EXIT_USAGE, "--plot and --report need the whole record: not "
                                            "available when streaming %s",
                             path);
            goto done;
        }
        if (pulse_channel == channel) {
            rc = se_cli_fail(SE_EXIT_USAGE, "--pulse-channel %lu is the response channel",
                             pulse_channel);
            goto done;
        }
        se_stream_config_init(&scfg);
        scfg.channel = (unsigned)(channel - 1);
        /* repeated taps are stacked within the memory limit (at most 256 MiB of shot segments) */
        scfg.stack_memory = mem_mib < 256 ? (size_t)mem_mib << 20 : (size_t)256 << 20;
        if (pulse_channel > 0) {
            scfg.pulse_channel = (int)(pulse_channel - 1);
            cfg.reference_kind = SE_REF_CHANNEL;
            snprintf(refdesc, sizeof refdesc, "channel %lu", pulse_channel);
        } else {
            /* a shape or a pulse file, rendered or checked at the header's rate */
            hdr = se_recording_probe(path, &err);
            if (hdr == NULL) {
                rc = se_cli_fail_err(&err, 0);
                goto done;
            }
            if (channel > hdr->channels) {
                rc = se_cli_fail(SE_EXIT_USAGE, "--channel %lu: %s has %u channel%s", channel,
                                 path, hdr->channels, hdr->channels == 1 ? "" : "s");
                se_recording_free(hdr);
                goto done;
            }
            rc = se_cli_load_reference(pulse, 0, hdr, &cfg, &refbuf, refdesc, sizeof refdesc,
                                       refsha, &have_refsha);
            se_recording_free(hdr);
            if (rc != SE_EXIT_OK)
                goto done;
        }
        memset(&sinfo, 0, sizeof sinfo);
        /* a NaN source end is estimated by the stream as by the whole-record run */
        if (se_locate_stream(path, &cfg, &scfg, &res, &sinfo, &err) != SE_OK) {
            if (strncmp(err.message, path, strlen(path)) == 0) /* already names the file */
                rc = se_cli_fail_err(&err, 0);
            else
                rc = se_cli_fail(se_cli_exit_code(err.code, 0), "%s: %s", path, err.message);
            goto done;
        }
        if (se_sha256_file(path, sha, &err) != SE_OK) {
            rc = se_cli_fail_err(&err, 0);
            goto done;
        }
        header.frames = sinfo.frames;
        header.channels = sinfo.channels;
        header.rate = sinfo.rate;
        header.path = (char *)path;
        snprintf(header.format, sizeof header.format, "%.36s, streamed", sinfo.format);
        rec = &header;
        rec_is_header = 1;
        goto located;
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
    rc = se_cli_load_reference(pulse, pulse_channel, rec, &cfg, &refbuf, refdesc, sizeof refdesc, refsha,
                           &have_refsha);
    if (rc != SE_EXIT_OK)
        goto done;
    if (se_sha256_file(path, sha, &err) != SE_OK) {
        rc = se_cli_fail_err(&err, 0);
        goto done;
    }
    cfg.keep_trace = plot != NULL || report != NULL;
    if (se_locate(se_recording_channel(rec, (unsigned)(channel - 1)), rec->frames, rec->rate, &cfg,
                  &res, &err) != SE_OK) {
        rc = se_cli_fail(se_cli_exit_code(err.code, 0), "%s: %s", path, err.message);
        goto done;
    }
located:
    if (res.clipped_samples > 0)
        fprintf(stderr,
                "strandecho: warning: %s: %zu samples of channel %lu clipped from sample %zu; "
                "%s marked 'clipped' are unreliable\n",
                path, res.clipped_samples, channel, res.first_clipped,
                res.direct_clipped ? "the outgoing pulse itself is clipped, so every reflection "
                                     "estimate is unreliable; events"
                                   : "events");
    {
        char wbuf[512];
        if (se_locate_overlap_warning(&res, wbuf, sizeof wbuf))
            fprintf(stderr, "strandecho: warning: %s: %s\n", path, wbuf);
    }
    se_run_info_init(&info);
    {
        info.input_file = path;
        info.input_sha256 = sha;
        info.input_format = rec->format;
        info.input_frames = rec->frames;
        info.input_channels = rec->channels;
        info.channel = (unsigned)channel;
        info.reference = refdesc;
        info.reference_sha256 = have_refsha ? refsha : NULL;
        info.speed_source = sp.source;
        info.tension_n = sp.tension_n;
        info.mass_per_length_kg_m = sp.mass_per_length_kg_m;
        info.axial_stiffness_n = sp.axial_stiffness_n;
        info.velocity_factor = sp.velocity_factor;
        info.speed_uncertainty = sp.uncertainty;
        info.false_alarms = fa;
        info.confidence = conf;
        info.source_reflection = cfg.source_reflection;
        info.line_file = line_path;
        info.line_name = line != NULL ? line->name : NULL;
        info.expected = exp;
        info.n_expected = nexp;
    }
    if (json != NULL) {
        text = se_result_json(&res, &info, &err);
        if (text == NULL) {
            rc = se_cli_fail_err(&err, 1);
            goto done;
        }
        if ((rc = se_write_text(json, text)) != SE_EXIT_OK)
            goto done;
    }
    if ((rc = se_locate_outputs(&res, &info, line, exp, nexp, cfg.map, plot, plot_w, plot_h, report,
                                csv, title, units[0] == 'f', refdesc)) != SE_EXIT_OK)
        goto done;
    if (!c.quiet && !(json != NULL && strcmp(json, "-") == 0) && !(csv != NULL && strcmp(csv, "-") == 0))
        se_print_table(&res, rec, (unsigned)channel, refdesc, &sp, fa, conf, units[0] == 'f',
                       c.verbose, line, exp);
done:
    free(exp);
    se_line_free(line);
    free(text);
    free(refbuf);
    se_locate_result_free(&res);
    if (!rec_is_header)
        se_recording_free(rec);
    return rc;
}

static void se_print_table(const se_locate_result *res, const se_recording *rec, unsigned ch,
                           const char *refdesc, const se_speed *sp, double fa, double conf,
                           int feet, int verbose, const se_line *line,
                           const se_expected_event *exp)
{
    const double k = feet ? 1.0 / 0.3048 : 1.0;
    const char *u = feet ? "ft" : "m";
    size_t i, nmult = 0, nprev = 0;
    int fold;
    const char *tunit = res->electrical ? "us" : "ms";
    const double tscale = res->electrical ? 1e6 : 1e3;
    printf("strandecho %s  %s  (%s, %.10g Hz, %u channel%s, %.6g s), response channel %u\n",
           se_version(), rec->path, rec->format, rec->rate, rec->channels,
           rec->channels == 1 ? "" : "s", (double)rec->frames / rec->rate, ch);
    printf("reference: %s, %zu samples (%.4g %s); quantity: %s; %s line\n", refdesc,
           res->reference_length, tscale * (double)res->reference_length / res->rate_hz, tunit,
           se_quantity_name(res->quantity), res->electrical ? "electrical" : "mechanical");
    if (line != NULL)
        printf("line: %s (%s), %zu segment%s, %.2f %s, source end %s, far end %s\n",
               line->name[0] ? line->name : "(unnamed)", line->source_name, line->n_segments,
               line->n_segments == 1 ? "" : "s", line->length_m * k, u, line->source_end_name,
               line->end_name);
    printf("\n");
    /* delays in ms on mechanical lines, in us on cables (whose round trips are microseconds) */
    printf(" #  distance (%s)  +/- (%s, %.0f %%)  delay (%s)  polarity  impedance  class       "
           "reflection  SNR (dB)%s\n",
           u, u, conf * 100.0, tunit, line != NULL ? "  expected" : "");
    /* A ringing line gives many more multiples than reflectors: past a handful the table lists
     * the reflections only (as a surveyor describes the line) and counts the rest; --verbose,
     * the JSON and the CSV have every event. */
    for (i = 0; i < res->n_events; i++)
        if (res->events[i].multiple) {
            nmult++;
            nprev += res->events[i].previous_shot > 0;
        }
    fold = !verbose && nmult > SE_TABLE_MULTIPLES;
    for (i = 0; i < res->n_events; i++) {
        const se_event *ev = &res->events[i];
        char note[160] = "";
        if (fold && ev->multiple)
            continue;
        if (line != NULL) {
            if (ev->expected >= 0)
                snprintf(note, sizeof note, "  %s", exp[ev->expected].name);
            else if (!ev->multiple)
                snprintf(note, sizeof note, "  UNEXPECTED");
        }
        if (ev->low_confidence)
            snprintf(note + strlen(note), sizeof note - strlen(note), "  low confidence");
        if (ev->multiple && ev->previous_shot > 0)
            snprintf(note + strlen(note), sizeof note - strlen(note), "  multiple (tap -%d)",
                     ev->previous_shot);
        else if (ev->multiple)
            snprintf(note + strlen(note), sizeof note - strlen(note), "  multiple");
        if (ev->clipped || res->direct_clipped)
            snprintf(note + strlen(note), sizeof note - strlen(note), "  clipped");
        printf("%2zu  %13.3f  %14.3f  %10.3f  %-8s  %-9s  %-10s  %+10.3f  %8.1f%s\n", i + 1,
               ev->distance_m * k, ev->distance_uncertainty_m * k, ev->delay_s * tscale,
               se_event_polarity(ev), se_event_impedance(ev), se_event_class(res, ev), ev->reflection,
               ev->snr_db, note);
    }
    if (res->n_events == 0)
        printf("    no reflection above the threshold\n");
    if (fold) {
        printf("    and %zu multiples", nmult);
        if (nprev > 0)
            printf(" (%zu of them echoes of earlier taps)", nprev);
        printf(", not listed: reverberation explained by the reflections above, not faults "
               "(--verbose lists them; the JSON and CSV hold every event)\n");
    }
    for (i = 0; line != NULL && i < res->n_expected; i++) {
        const se_expected_event *x = &exp[i];
        if (res->expected_found[i] >= 0)
            continue;
        if (x->round_trip_s > res->record_range_s)
            printf("not reached: %s at %.3f %s (beyond the record)\n", x->name, x->distance_m * k, u);
        else if (x->has_reflection && !(fabs(x->amplitude) >= res->threshold))
            printf("not seen: %s at %.3f %s (expected %+.3f at the sensor, below the threshold "
                   "%.3g)\n",
                   x->name, x->distance_m * k, u, x->amplitude, res->threshold);
        else if (x->has_reflection)
            printf("MISSING: %s at %.3f %s (expected %+.3f at the sensor)\n", x->name,
                   x->distance_m * k, u, x->amplitude);
        else
            printf("not seen: %s at %.3f %s (no coefficient given in the line file)\n", x->name,
                   x->distance_m * k, u);
    }
    if (res->end_missing && res->break_event >= 0) {
        const se_event *b = &res->events[res->break_event];
        printf("the end was not found: event %d (%s at %.3f %s) is the likely break\n",
               res->break_event + 1, se_event_class(res, b), b->distance_m * k, u);
    } else if (res->end_missing) {
        printf("the end was not found where the line file puts it\n");
    }
    printf("\n");
    if (line != NULL)
        printf("speed at the sensor: %.6g m/s, %s; per-segment speed uncertainties from the file\n",
               res->speed_m_s, sp->source);
    else
        printf("speed used: %.6g m/s, %s; speed uncertainty %.3g %% (one standard "
               "uncertainty)%s\n",
               res->speed_m_s, sp->source, sp->uncertainty * 100.0,
               sp->uncertainty == 0.0 ? ": distance intervals are timing-only" : "");
    printf("noise level %.3g, threshold %.3g (%.2f sigma for %g false alarm%s per record), in "
           "reflection units\n",
           res->noise_level, res->threshold, res->threshold_sigma, fa, fa == 1.0 ? "" : "s");
    if (res->shots_found > 1)
        printf("shots: %zu found, %zu stacked, SNR gain %.2f dB (%.2f dB expected for %zu)\n",
               res->shots_found, res->shots_used, res->stack_gain_db, res->stack_expected_gain_db,
               res->shots_used);
    if (res->source_reflection_estimated)
        printf("source-end coefficient estimated from the data: %+.3f\n", res->source_reflection);
    if (res->attenuation_estimated && res->attenuation_method == SE_ATTEN_END_MULTIPLES)
        printf("attenuation estimated from the decay of the end's %zu repeats: %.4g +/- %.2g dB/m "
               "(one standard uncertainty; a full reflection at the end assumed)\n",
               res->attenuation_repeats, res->attenuation_db_per_m,
               res->attenuation_uncertainty_db_per_m);
    else if (res->attenuation_estimated)
        printf("attenuation estimated from a known reflector: %.4g dB/m (coefficients at the "
               "discontinuities have it removed)\n",
               res->attenuation_db_per_m);
    if (res->skin_k_s05_per_m > 0.0 || res->skin_k_estimated) {
        size_t ncorr = 0;
        for (i = 0; i < res->n_events; i++)
            ncorr += res->events[i].skin_corrected != 0;
        if (res->skin_k_estimated && !(res->skin_k_s05_per_m > 0.0))
            printf("skin-effect loss estimated from %zu echoes: none seen (K = 0 s^0.5/m)",
                   res->skin_fit_echoes);
        else if (res->skin_k_estimated && !isfinite(res->skin_k_uncertainty))
            printf("skin-effect loss estimated from %zu echoes: K = %.4g s^0.5/m (uncertainty not "
                   "known; %.3g dB per 100 m at 100 MHz, all taken as conductor loss)",
                   res->skin_fit_echoes, res->skin_k_s05_per_m,
                   se_skin_loss_attenuation_db(res->skin_k_s05_per_m, 100.0, 1e8));
        else if (res->skin_k_estimated)
            printf("skin-effect loss estimated from %zu echoes: K = %.4g +/- %.2g s^0.5/m (%.3g dB "
                   "per 100 m at 100 MHz, all taken as conductor loss)",
                   res->skin_fit_echoes, res->skin_k_s05_per_m, res->skin_k_uncertainty,
                   se_skin_loss_attenuation_db(res->skin_k_s05_per_m, 100.0, 1e8));
        else
            printf("skin-effect loss K = %.4g s^0.5/m (%.3g dB per 100 m at 100 MHz)",
                   res->skin_k_s05_per_m,
                   se_skin_loss_attenuation_db(res->skin_k_s05_per_m, 100.0, 1e8));
        if (res->skin_k_s05_per_m > 0.0)
            printf(": %zu echo%s matched with loss-shaped templates, %zu detection%s dropped as "
                   "pieces of a distorted echo",
                   ncorr, ncorr == 1 ? "" : "es", res->skin_explained,
                   res->skin_explained == 1 ? "" : "s");
        printf("\n");
    }
    if (res->shots_found > 1 && res->shot_interval_s > 0.0)
        printf("the line rings for %.3g s after a tap; the taps are %.3g s apart%s\n",
               res->ring_down_s, res->shot_interval_s,
               res->shots_overlap ? " (they overlap: see the warning)" : "");
    for (i = 0; i < res->n_dead_zone_events; i++)
        printf("inside the dead zone (low confidence): %s echo at %.3f %s, reflection %+.3f\n",
               se_event_class(res, &res->dead_zone_events[i]),
               res->dead_zone_events[i].distance_m * k, u, res->dead_zone_events[i].reflection);
    printf("dead zone %.3f %s (%.4g %s), resolution %.3f %s, record reaches %.1f %s\n",
           res->dead_zone_m * k, u, res->dead_zone_s * tscale, tunit, res->resolution_m * k, u,
           res->record_range_m * k, u);
    if (verbose)
        printf("direct arrival at %.9g s, amplitude %.6g; RMS bandwidth %.6g Hz\n", res->t0_s,
               res->direct_amplitude, res->rms_bandwidth_hz);
    printf("%s\n", se_caution_line(res->electrical));
}
