/* strandecho: the HTML report a client reads. One self-contained file: CSS inline, the plot as an
 * inline SVG element, no script, no external URL, no image source; prints on A4 (@media print).
 * Sections: the job, a summary table (survey reports), then per line: the line, the findings
 * (a sentence, the plot, the table), expected versus found (when a line is described), the
 * uncertainty statement, input files with SHA-256, every parameter; then all the safety cautions
 * and the tool version. docs/report.md describes the sections and the plot's visual language.
 *
 * A line whose finding may be a fault (a change since the baseline that is not secondary, an
 * unexpected reflection, a missing end) is flagged in the summary and its section by the words
 * "Possible fault" in a framed badge with a warning-triangle shape, not by colour alone. Taps
 * closer together than the line's ring-down (se_locate_result.shots_overlap) get the same badge
 * with the words "Measurement warning" and the locator's sentence (se_locate_overlap_warning) in
 * the line's findings, and a bold note in its summary row: not a fault, so the row is not flagged.
 * The section also words an earlier tap's echo (previous_shot), a primary's predicted multiple
 * share, events matched with loss-shaped templates, and the losses (attenuation and how it was
 * obtained, skin-effect K with its dB per 100 m at 100 MHz); docs/report.md quotes the sentences.
 *
 * Every string from the user (names, notes, file paths, parameter values) is HTML-escaped. The
 * report reads no clock and no environment: the same inputs give the same bytes (a date is shown
 * only when the caller gives one). */
#ifndef SE_REPORT_H
#define SE_REPORT_H

#include <stddef.h>

#include "strandecho/compare.h"
#include "strandecho/error.h"
#include "strandecho/jsonout.h"
#include "strandecho/line.h"
#include "strandecho/locate.h"
#include "strandecho/plot.h"

#ifdef __cplusplus
extern "C" {
#endif

/* An extra parameter shown verbatim in the parameters table (borrowed strings). */
typedef struct se_report_param {
    const char *name;
    const char *value;
} se_report_param;

/* One surveyed line: a recording and its locate result. Everything is borrowed for the call. */
typedef struct se_report_line {
    const char *name;                  /* section title (e.g. "Leg 3"); NULL: the line's name, else the
                                          input file */
    const char *note;                  /* optional paragraph under the title (e.g. a change since the
                                          baseline, written by a compare step), or NULL */
    const se_locate_result *result;    /* required */
    const se_run_info *info;           /* required: input file, SHA-256, reference, speed source... */
    const se_line *line;               /* prepared line description, or NULL */
    const se_expected_event *expected; /* [size: n_expected], or NULL: from line when one is given */
    size_t n_expected;
    const se_plot_data *plot;          /* plot to embed (its units are replaced by the report's), or
                                          NULL: no figure */
    const se_report_param *params;     /* [size: n_params] extra parameters (CLI options...), or NULL */
    size_t n_params;
    const se_compare_result *compare;  /* change since a baseline (se_compare with this result as
                                          now), or NULL: the summary's finding is then the located
                                          count, else the comparison's sentence, and the section gets
                                          a table of the changes */
    const char *baseline_label;        /* what the baseline was, for "since ...": e.g. "the 2025
                                          survey"; NULL: "the baseline" */
    const char *baseline_file;         /* the baseline recording (input files table), or NULL */
    const char *baseline_sha256;       /* its SHA-256 (lower-case hex), or NULL */
} se_report_line;

/* The whole report. */
typedef struct se_report {
    const char *title;        /* NULL: "Reflectometry report" (one line) / "Reflectometry survey report" */
    const char *site;         /* site name, or NULL */
    const char *job;          /* one sentence on what was surveyed, or NULL: generated from the lines */
    const char *date;         /* survey date as text, or NULL (not shown) */
    const char *prepared_by;  /* or NULL */
    se_plot_units units;      /* distances in m or ft throughout */
    const se_report_line *lines; /* [size: n_lines], n_lines >= 1 */
    size_t n_lines;
    int survey;               /* 1: survey layout (summary table first, one section per line); implied
                                 when n_lines > 1 */
    double plot_width;        /* SVG size in CSS pixels; 0 = 900 */
    double plot_height;       /* 0 = 540 */
    const char *base_dir;     /* a folder (e.g. the survey file's), or NULL: file paths under it are
                                 shown relative to it everywhere except in the input files table,
                                 which shows every path in full beside its SHA-256 */
} se_report;

/* Zero everything: NULL strings, metres, no lines. */
void se_report_init(se_report *report);
void se_report_line_init(se_report_line *line);

/* The report as a NUL-terminated malloc'd string (free with free()); NULL with err filled
 * (SE_ERR_ARG naming the line with a missing result or info; plot errors as se_plot_svg_string). */
char *se_report_html(const se_report *report, se_error *err);

/* Write it to path ("-" = standard output) through se_output: complete or nothing. */
se_status se_report_write(const se_report *report, const char *path, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_REPORT_H */
