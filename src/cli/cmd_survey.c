/* strandecho CLI: `strandecho survey SURVEY.yaml`, every line of a survey file (survey.h). */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cli.h"
#include "commands.h"
#include "strandecho/output.h"
#include "strandecho/plot.h"
#include "strandecho/report.h"
#include "strandecho/survey.h"

static const char se_survey_usage[] =
    "usage: strandecho survey SURVEY.yaml [options]\n"
    "\n"
    "Locate every recording of every line of a survey file (docs/survey.md), compare with the\n"
    "baseline recording where a line names one, print one summary table and write one combined\n"
    "report and JSON Lines.\n"
    "\n"
    "  --jobs N                 worker threads (default 1)\n"
    "  --shard K/N              only lines K, K+N, K+2N... (1-based): one task of a job array;\n"
    "                           the shards' JSON Lines, merged, equal one run's\n"
    "  --report FILE.html       the combined HTML report\n"
    "  --jsonl FILE|-           one compact JSON object per recording (the locate JSON with\n"
    "                           \"survey\" and, with a baseline, \"compare\" keys)\n"
    "  --units m|ft             distances in the table and the report\n"
    "  --title TEXT             title of the report\n"
    "  --quiet                  no table, no progress bar (the bar is shown only on a terminal)\n"
    "  --verbose                also the speed source and the stretch of each comparison\n"
    "\n"
    "exit codes: 0 every recording located; 2 bad command line; 3 the survey file (or a recording)\n"
    "unreadable or malformed; 4 a recording cannot give a result; 5 an output cannot be written;\n"
    "6 out of memory. When a recording fails the others are still processed and written; the code\n"
    "is that of the first failure.\n";

static void se_progress(void *user, size_t done, size_t total)
{
    const int width = 40;
    int fill = (int)((double)width * (double)done / (double)total), i;
    (void)user;
    fputs("\r[", stderr);
    for (i = 0; i < width; i++)
        fputc(i < fill ? '#' : '.', stderr);
    fprintf(stderr, "] %zu/%zu", done, total);
    if (done == total)
        fputs("\r\033[K", stderr);
    fflush(stderr);
}

/* The change note of an item, for the terminal table (the report writes se_compare_sentence's). */
static void se_change_note(const se_survey_item *it, const char *when, const char *u, double k,
                           char *buf, size_t size)
{
    const se_compare_result *cr = &it->compare;
    char since[128];
    size_t i, len;
    /* the report's words: "since the 2025 survey" with a baseline_date, else "since the baseline" */
    if (when != NULL)
        snprintf(since, sizeof since, "since the %s survey", when);
    else
        snprintf(since, sizeof since, "since the baseline");
    if (!it->compared) {
        snprintf(buf, size, "no baseline");
        return;
    }
    if (cr->n_faults == 0) {
        snprintf(buf, size, "no change %s (speed %+.2f %%)", since, cr->speed_change * 100.0);
        return;
    }
    snprintf(buf, size, "%s (speed %+.2f %%):", since, cr->speed_change * 100.0);
    for (i = 0; i < cr->n_changes; i++) {
        const se_change *ch = &cr->changes[i];
        if (ch->secondary)
            continue;
        len = strlen(buf);
        snprintf(buf + len, size - len, " %s at %.1f %s (%.0f sigma);", se_change_kind_name(ch->kind),
                 ch->distance_m * k, u, ch->significance);
    }
    len = strlen(buf);
    if (len > 0 && buf[len - 1] == ';')
        buf[len - 1] = '\0';
}

static int se_survey_report(const se_survey *sv, const se_survey_item *items, size_t n, const char *path,
                            const char *title, int feet)
{
    se_report rp;
    se_report_line *rl = calloc(n, sizeof *rl);
    se_plot_data *pd = calloc(n, sizeof *pd);
    char (*notes)[512] = calloc(n, sizeof *notes);
    char (*names)[256] = calloc(n, sizeof *names);
    size_t i, m = 0;
    se_error err;
    int code = SE_EXIT_OK;
    se_error_clear(&err);
    if (rl == NULL || pd == NULL || notes == NULL || names == NULL) {
        code = se_cli_fail(SE_EXIT_MEMORY, "out of memory for the report");
        goto done;
    }
    for (i = 0; i < n; i++) {
        const se_survey_item *it = &items[i];
        const se_survey_line *sl = &sv->lines[it->line];
        if (it->status != SE_OK)
            continue;
        se_plot_data_init(&pd[m]);
        pd[m].trace = it->result.trace;
        pd[m].n = it->result.trace_length;
        pd[m].rate_hz = it->result.rate_hz;
        pd[m].map = it->line_desc != NULL ? se_line_distmap(it->line_desc) : NULL;
        pd[m].result = &it->result;
        pd[m].line = it->line_desc;
        pd[m].expected = it->expected;
        pd[m].n_expected = it->n_expected;
        if (it->compared) {
            pd[m].baseline = it->compare.aligned_baseline;
            pd[m].baseline_n = it->compare.n;
            pd[m].baseline_label = "baseline";
            pd[m].trace_label = "this survey";
        }
        if (sl->n_recordings > 1) {
            const char *b = strrchr(sl->recordings[it->recording], '/');
            snprintf(names[m], sizeof names[m], "%s, %s", sl->name,
                     b != NULL ? b + 1 : sl->recordings[it->recording]);
        } else {
            snprintf(names[m], sizeof names[m], "%s", sl->name);
        }
        pd[m].title = names[m];
        se_report_line_init(&rl[m]);
        rl[m].name = names[m];
        rl[m].result = &it->result;
        rl[m].info = &it->info;
        rl[m].line = it->line_desc;
        rl[m].expected = it->expected;
        rl[m].n_expected = it->n_expected;
        rl[m].plot = &pd[m];
        if (it->compared) {
            rl[m].compare = &it->compare;
            rl[m].baseline_file = sl->baseline;
            rl[m].baseline_sha256 = it->baseline_sha256;
            if (sl->baseline_date != NULL) {
                snprintf(notes[m], sizeof notes[m], "the %s survey", sl->baseline_date);
                rl[m].baseline_label = notes[m];
            }
        }
        m++;
    }
    if (m == 0) {
        code = se_cli_fail(SE_EXIT_DATA, "%s: no recording gave a result: no report written", path);
        goto done;
    }
    se_report_init(&rp);
    rp.title = title;
    rp.site = sv->site;
    rp.job = sv->job;
    rp.date = sv->date;
    rp.prepared_by = sv->prepared_by;
    rp.units = feet ? SE_PLOT_FEET : SE_PLOT_METRES;
    rp.lines = rl;
    rp.n_lines = m;
    rp.survey = 1;
    rp.base_dir = sv->base_dir;
    if (se_report_write(&rp, path, &err) != SE_OK)
        code = se_cli_fail_err(&err, 1);
done:
    free(rl);
    free(pd);
    free(notes);
    free(names);
    return code;
}

int se_cmd_survey(int argc, char **argv)
{
    se_cli c = {argc, argv, 1, 0, 0};
    const char *path = NULL, *report = NULL, *jsonl = NULL, *units = "m", *title = NULL, *v;
    const char *shard = NULL;
    unsigned long jobs = 1;
    se_survey_run_config rc;
    se_survey *sv = NULL;
    se_survey_item *items = NULL;
    size_t n = 0, i;
    se_error err;
    int got, code = SE_EXIT_OK, first_fail = SE_EXIT_OK;

    se_error_clear(&err);
    se_survey_run_config_init(&rc);
    while (c.i < argc) {
        const char *a = argv[c.i];
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            fputs(se_survey_usage, stdout);
            return SE_EXIT_OK;
        }
        SE_TAKE("--report", report)
        SE_TAKE("--jsonl", jsonl)
        SE_TAKE("--units", units)
        SE_TAKE("--title", title)
        SE_TAKE("--shard", shard)
        SE_TAKE_UINT("--jobs", 1, 256, jobs)
        if (se_cli_flag(&c, "--quiet")) {
            c.quiet = 1;
            continue;
        }
        if (se_cli_flag(&c, "--verbose")) {
            c.verbose = 1;
            continue;
        }
        if (a[0] == '-' && a[1] != '\0')
            return se_cli_fail(SE_EXIT_USAGE, "survey: unknown option %s (see strandecho survey --help)", a);
        if (path != NULL)
            return se_cli_fail(SE_EXIT_USAGE, "survey: one survey file at a time (got %s and %s)", path, a);
        path = a;
        c.i++;
    }
    if (path == NULL)
        return se_cli_fail(SE_EXIT_USAGE, "survey: no survey file given (see strandecho survey --help)");
    if (strcmp(units, "m") != 0 && strcmp(units, "ft") != 0)
        return se_cli_fail(SE_EXIT_USAGE, "--units: '%s' is not m or ft", units);
    rc.jobs = jobs;
    if (shard != NULL) {
        char *end;
        unsigned long k = strtoul(shard, &end, 10), nn = 0;
        if (end != shard && *end == '/')
            nn = strtoul(end + 1, &end, 10);
        if (*end != '\0' || nn < 1 || nn > 1000000 || k < 1 || k > nn)
            return se_cli_fail(SE_EXIT_USAGE, "--shard: '%s' is not K/N with 1 <= K <= N", shard);
        rc.shard_k = k;
        rc.shard_n = nn;
    }
    {
        const char *inputs[2] = {path, NULL};
        if (report != NULL && (code = se_cli_check_output(report, inputs)) != SE_EXIT_OK)
            return code;
        if (jsonl != NULL && (code = se_cli_check_output(jsonl, inputs)) != SE_EXIT_OK)
            return code;
    }
    sv = se_survey_read(path, &err);
    if (sv == NULL)
        return se_cli_fail_err(&err, 0);
    if (!c.quiet && isatty(STDERR_FILENO))
        rc.progress = se_progress;
    if (se_survey_run(sv, &rc, &items, &n, &err) != SE_OK) {
        code = se_cli_fail_err(&err, 0);
        goto done;
    }
    for (i = 0; i < n; i++)
        if (items[i].status != SE_OK) {
            int e = se_cli_fail(se_cli_exit_code(items[i].status, 0), "%s: %s",
                                sv->lines[items[i].line].name, items[i].err.message);
            if (first_fail == SE_EXIT_OK)
                first_fail = e;
        }
    if (jsonl != NULL) {
        se_output *out = se_output_open(jsonl, &err);
        int bad = 0;
        if (out == NULL) {
            code = se_cli_fail_err(&err, 1);
            goto done;
        }
        for (i = 0; i < n && !bad; i++)
            if (items[i].json != NULL && fprintf(se_output_stream(out), "%s\n", items[i].json) < 0)
                bad = 1;
        if (bad) {
            se_output_abort(out);
            code = se_cli_fail(SE_EXIT_OUTPUT, "%s: write failed", jsonl);
            goto done;
        }
        if (se_output_commit(out, &err) != SE_OK) {
            code = se_cli_fail_err(&err, 1);
            goto done;
        }
    }
    if (report != NULL && (code = se_survey_report(sv, items, n, report, title, units[0] == 'f')) !=
                              SE_EXIT_OK)
        goto done;
    if (!c.quiet && !(jsonl != NULL && strcmp(jsonl, "-") == 0)) {
        const double k = units[0] == 'f' ? 1.0 / 0.3048 : 1.0;
        const char *u = units[0] == 'f' ? "ft" : "m";
        printf("strandecho %s  survey %s%s%s", se_version(), path, sv->site ? "  site: " : "",
               sv->site ? sv->site : "");
        if (rc.shard_n > 0)
            printf("  shard %zu/%zu", rc.shard_k, rc.shard_n);
        printf("\n\n %-18s %-26s %6s %8s %10s  %s\n", "line", "recording", "events", "primary",
               "farthest", "finding");
        for (i = 0; i < n; i++) {
            const se_survey_item *it = &items[i];
            const se_survey_line *sl = &sv->lines[it->line];
            const char *rec = se_survey_path_as_given(sv, sl->recordings[it->recording]);
            char note[512], far[32] = "-";
            size_t e, prim = 0, unexp = 0;
            double farthest = -1.0;
            if (it->status != SE_OK) {
                printf(" %-18.18s %-26.26s %6s %8s %10s  FAILED: %s\n", sl->name, rec, "-", "-", "-",
                       se_strerror(it->status));
                continue;
            }
            for (e = 0; e < it->result.n_events; e++) {
                const se_event *ev = &it->result.events[e];
                if (ev->multiple)
                    continue;
                prim++;
                if (ev->distance_m > farthest)
                    farthest = ev->distance_m;
                if (it->line_desc != NULL && ev->expected < 0)
                    unexp++;
            }
            if (farthest >= 0.0)
                snprintf(far, sizeof far, "%.1f %s", farthest * k, u);
            se_change_note(it, sl->baseline_date, u, k, note, sizeof note);
            if (unexp > 0) {
                size_t len = strlen(note);
                snprintf(note + len, sizeof note - len, "; %zu UNEXPECTED", unexp);
            }
            if (it->result.end_missing) {
                size_t len = strlen(note);
                snprintf(note + len, sizeof note - len, "; END NOT FOUND");
            }
            if (it->result.shots_overlap) { /* the warning itself is in the report and the JSON */
                size_t len = strlen(note);
                snprintf(note + len, sizeof note - len, "; taps overlap");
            }
            printf(" %-18.18s %-26.26s %6zu %8zu %10s  %s\n", sl->name, rec, it->result.n_events, prim,
                   far, note);
            if (c.verbose)
                printf("   speed: %s%s\n", sl->speed_source,
                       it->compared ? "; compared with the baseline by time-stretch" : "");
        }
        printf("\n%zu recording%s", n, n == 1 ? "" : "s");
        if (report != NULL)
            printf("; report: %s", report);
        if (jsonl != NULL)
            printf("; JSON Lines: %s", jsonl);
        printf("\n");
    }
    code = first_fail;
done:
    se_survey_items_free(items, n);
    se_survey_free(sv);
    return code;
}
