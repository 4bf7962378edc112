/* strandecho CLI: `strandecho compare BASELINE NOW`, change since a baseline (compare.h). The two
 * recordings run through the survey runner as a one-line survey, so compare and survey give the
 * same numbers. */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "strandecho/compare.h"
#include "strandecho/output.h"
#include "strandecho/plot.h"
#include "strandecho/pulse.h"
#include "strandecho/survey.h"
#include "strandecho/units.h"

static const char se_compare_usage[] =
    "usage: strandecho compare BASELINE NOW [options]\n"
    "\n"
    "What changed on a line since a baseline recording: both are located, aligned on the outgoing\n"
    "pulse (sub-sample), a small speed change is corrected by time-stretch, the gain normalised by\n"
    "least squares, the baseline subtracted and the residual searched with a noise-based\n"
    "threshold. Each change is new, gone, moved or changed (in strength), with its significance\n"
    "(residual peak over the residual's noise, or the z of a move). Changes explained without a\n"
    "fault there (multiples; the shadow of a change in front) are listed as secondary.\n"
    "\n"
    "  --line FILE              the line description (speeds, expected features), or speed options:\n"
    "  --speed V | --velocity-factor F | --tension T --mass-per-length MU |\n"
    "  --axial-stiffness EA --mass-per-length MU   [--speed-uncertainty PCT]\n"
    "  --channel N              response channel, 1-based (default 1)\n"
    "  --pulse-channel N        the injected pulse is on channel N of both recordings\n"
    "  --pulse FILE|SPEC        a pulse file or shape (hann:4ms ...); none: self reference\n"
    "  --quantity Q             what the sensor measures (default velocity)\n"
    "  --source-end TERM        source-end termination (without --line)\n"
    "  --false-alarms N         expected false findings per comparison (default 0.01)\n"
    "  --plot FILE              both traces and their difference (.png .svg .pdf)\n"
    "  --json FILE              the result as JSON (- for standard output)\n"
    "  --units m|ft             distances in the table and the plot\n"
    "  --quiet, --verbose\n"
    "\n"
    "exit codes: 0 compared (whether or not anything changed); 2 bad command line; 3 an input\n"
    "unreadable or malformed; 4 the data cannot give a result (no pulse, rates differ, no common\n"
    "delays); 5 an output cannot be written; 6 out of memory.\n";

int se_cmd_compare(int argc, char **argv)
{
    se_cli c = {argc, argv, 1, 0, 0};
    se_speed_opts so;
    se_speed sp;
    se_survey sv;
    se_survey_line sl;
    se_survey_run_config rc;
    se_survey_item *items = NULL;
    size_t n_items = 0, i;
    se_error err;
    const char *paths[2] = {NULL, NULL}, *line_path = NULL, *pulse = NULL, *quantity = NULL;
    const char *source_end = NULL, *plot = NULL, *json = NULL, *units = "m", *v;
    char *recs[1];
    unsigned long channel = 1, pulse_channel = 0;
    double fa = 0.01;
    int got, code = SE_EXIT_OK, npaths = 0;

    memset(&so, 0, sizeof so);
    se_error_clear(&err);
    while (c.i < argc) {
        const char *a = argv[c.i];
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            fputs(se_compare_usage, stdout);
            return SE_EXIT_OK;
        }
        if ((got = se_cli_speed_option(&c, &so)) != 0) {
            if (got < 0)
                return SE_EXIT_USAGE;
            continue;
        }
        SE_TAKE("--line", line_path)
        SE_TAKE("--pulse", pulse)
        SE_TAKE("--quantity", quantity)
        SE_TAKE("--source-end", source_end)
        SE_TAKE("--plot", plot)
        SE_TAKE("--json", json)
        SE_TAKE("--units", units)
        SE_TAKE_UINT("--channel", 1, 65535, channel)
        SE_TAKE_UINT("--pulse-channel", 1, 65535, pulse_channel)
        SE_TAKE_FALSE_ALARMS(fa)
        if (se_cli_flag(&c, "--quiet")) {
            c.quiet = 1;
            continue;
        }
        if (se_cli_flag(&c, "--verbose")) {
            c.verbose = 1;
            continue;
        }
        if (a[0] == '-' && a[1] != '\0')
            return se_cli_fail(SE_EXIT_USAGE, "compare: unknown option %s (see strandecho compare --help)",
                               a);
        if (npaths == 2)
            return se_cli_fail(SE_EXIT_USAGE, "compare: two recordings, BASELINE and NOW (got a third: %s)",
                               a);
        paths[npaths++] = a;
        c.i++;
    }
    if (npaths != 2)
        return se_cli_fail(SE_EXIT_USAGE, "compare: give BASELINE and NOW (see strandecho compare --help)");
    if (strcmp(units, "m") != 0 && strcmp(units, "ft") != 0)
        return se_cli_fail(SE_EXIT_USAGE, "--units: '%s' is not m or ft", units);
    if (pulse != NULL && pulse_channel > 0)
        return se_cli_fail(SE_EXIT_USAGE, "give the reference once: --pulse or --pulse-channel");
    if (pulse_channel == channel)
        return se_cli_fail(SE_EXIT_USAGE, "--pulse-channel %lu is the response channel", pulse_channel);
    if (plot != NULL) {
        se_plot_format pf;
        if (se_plot_format_from_path(plot, &pf, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--plot: %s", err.message);
    }
    if (line_path != NULL && (so.speed || so.velocity_factor || so.tension || so.axial_stiffness ||
                              so.mass_per_length || so.uncertainty))
        return se_cli_fail(SE_EXIT_USAGE, "--line %s gives the speeds: drop the speed options", line_path);
    if (line_path != NULL && source_end != NULL)
        return se_cli_fail(SE_EXIT_USAGE, "--line %s gives the source end: drop --source-end", line_path);
    if ((code = se_cli_speed_resolve(&so, line_path == NULL, &sp)) != SE_EXIT_OK)
        return code;
    {
        const char *inputs[4] = {paths[0], paths[1], line_path, NULL};
        if (plot != NULL && (code = se_cli_check_output(plot, inputs)) != SE_EXIT_OK)
            return code;
        if (json != NULL && (code = se_cli_check_output(json, inputs)) != SE_EXIT_OK)
            return code;
    }

    /* a one-line survey: borrowed strings, never freed through se_survey_free */
    memset(&sv, 0, sizeof sv);
    memset(&sl, 0, sizeof sl);
    recs[0] = (char *)paths[1];
    sl.name = (char *)"compare";
    sl.line_file = (char *)line_path;
    sl.recordings = recs;
    sl.n_recordings = 1;
    sl.baseline = (char *)paths[0];
    sl.channel = (unsigned)channel;
    sl.pulse_channel = (unsigned)pulse_channel;
    sl.pulse = (char *)pulse;
    sl.quantity = sp.electrical_hint ? SE_Q_VOLTAGE : SE_Q_VELOCITY;
    if (quantity != NULL) {
        if (se_quantity_parse(quantity, &sl.quantity, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--quantity: %s", err.message);
        sl.have_quantity = 1;
    }
    sl.speed_m_s = sp.speed_m_s;
    sl.speed_uncertainty = sp.uncertainty;
    sl.tension_n = sp.tension_n;
    sl.mass_per_length_kg_m = sp.mass_per_length_kg_m;
    sl.axial_stiffness_n = sp.axial_stiffness_n;
    sl.velocity_factor = sp.velocity_factor;
    snprintf(sl.speed_source, sizeof sl.speed_source, "%s", line_path ? "from the line file" : sp.source);
    if (source_end != NULL) {
        if (se_termination_parse(source_end, sl.quantity, &sl.source_reflection, &err) != SE_OK)
            return se_cli_fail(SE_EXIT_USAGE, "--source-end: %s", err.message);
        sl.have_source_end = 1;
    }
    sl.false_alarms = fa;
    sl.confidence = 0.95;
    sv.path = (char *)"<compare>";
    sv.lines = &sl;
    sv.n_lines = 1;
    se_survey_run_config_init(&rc);
    if (se_survey_run(&sv, &rc, &items, &n_items, &err) != SE_OK)
        return se_cli_fail_err(&err, 0);
    if (n_items != 1 || items[0].status != SE_OK) {
        code = n_items == 1 ? se_cli_fail(se_cli_exit_code(items[0].status, 0), "%s", items[0].err.message)
                            : se_cli_fail(SE_EXIT_INTERNAL, "compare: no result");
        se_survey_items_free(items, n_items);
        return code;
    }
    {
        const se_survey_item *it = &items[0];
        const se_compare_result *cr = &it->compare;
        const double k = units[0] == 'f' ? 1.0 / 0.3048 : 1.0;
        const char *u = units[0] == 'f' ? "ft" : "m";
        if (plot != NULL) {
            se_plot_data pd;
            se_plot_data_init(&pd);
            pd.trace = it->result.trace;
            pd.n = it->result.trace_length;
            pd.rate_hz = it->result.rate_hz;
            pd.map = it->line_desc != NULL ? se_line_distmap(it->line_desc) : NULL;
            pd.result = &it->result;
            pd.line = it->line_desc;
            pd.expected = it->expected;
            pd.n_expected = it->n_expected;
            pd.baseline = cr->aligned_baseline;
            pd.baseline_n = cr->n;
            pd.trace_label = strrchr(paths[1], '/') ? strrchr(paths[1], '/') + 1 : paths[1];
            pd.baseline_label = strrchr(paths[0], '/') ? strrchr(paths[0], '/') + 1 : paths[0];
            pd.title = "change since the baseline";
            pd.units = units[0] == 'f' ? SE_PLOT_FEET : SE_PLOT_METRES;
            if (se_plot_write(&pd, plot, SE_PLOT_AUTO, 1200, 800, &err) != SE_OK) {
                code = se_cli_fail_err(&err, 1);
                goto done;
            }
        }
        if (json != NULL) {
            se_output *out = se_output_open(json, &err);
            if (out == NULL) {
                code = se_cli_fail_err(&err, 1);
                goto done;
            }
            if (fprintf(se_output_stream(out), "%s\n", it->json) < 0) {
                se_output_abort(out);
                code = se_cli_fail(SE_EXIT_OUTPUT, "%s: write failed", json);
                goto done;
            }
            if (se_output_commit(out, &err) != SE_OK) {
                code = se_cli_fail_err(&err, 1);
                goto done;
            }
        }
        if (!c.quiet && !(json != NULL && strcmp(json, "-") == 0)) {
            printf("strandecho %s  compare  baseline %s  now %s\n", se_version(), paths[0], paths[1]);
            printf("speed change %+.3f %% (stretch %.6f from %s), gain %.4f, correlation %.4f\n",
                   cr->speed_change * 100.0, cr->stretch,
                   cr->stretch_from_echoes ? "common echoes" : "the correlation search", cr->gain,
                   cr->correlation);
            printf("residual noise %.3g, threshold %.3g (%.2f sigma), reflection units; searched %.1f "
                   "to %.1f ms\n\n",
                   cr->residual_sigma, cr->threshold, cr->threshold_sigma, cr->search_from_s * 1e3,
                   cr->search_to_s * 1e3);
            printf(" #  change   distance (%s)  shift (%s)  reflection now  before  significance\n", u, u);
            for (i = 0; i < cr->n_changes; i++) {
                const se_change *ch = &cr->changes[i];
                char rn[32] = "-", rb[32] = "-";
                if (isfinite(ch->reflection_now))
                    snprintf(rn, sizeof rn, "%+.3f", ch->reflection_now);
                if (isfinite(ch->reflection_baseline))
                    snprintf(rb, sizeof rb, "%+.3f", ch->reflection_baseline);
                printf("%2zu  %-7s  %13.3f  %10.3f  %14s  %6s  %9.1f sigma%s\n", i + 1,
                       se_change_kind_name(ch->kind), ch->distance_m * k, ch->shift_m * k, rn, rb,
                       ch->significance, ch->secondary ? "  secondary (not a fault)" : "");
            }
            if (cr->n_changes == 0)
                printf("    no change above the threshold\n");
            printf("\n%zu change%s that may be a fault, %zu secondary\n", cr->n_faults,
                   cr->n_faults == 1 ? "" : "s", cr->n_changes - cr->n_faults);
        }
    }
done:
    se_survey_items_free(items, n_items);
    return code;
}
