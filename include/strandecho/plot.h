/* strandecho: the reflectogram plot. The matched-filter trace against distance from the sensor
 * (metres or feet) with a secondary round-trip time axis (ms), every located event marked and
 * labelled (number, class, distance), the dead zone shaded, the detection threshold drawn as a
 * pair of lines, and, when a line description is given, a schematic of its segments with the
 * expected features along the distance axis. A compare plot adds a baseline trace and a panel
 * with the difference. The visual language is documented in docs/report.md.
 *
 * Formats: PNG and PDF are drawn with cairo; SVG is written directly by this module (the same
 * layout and drawing calls), so that every element can carry an id and a class and the text stays
 * text (searchable in the HTML report). Sizes are pixels for PNG and points (1/72 in) for PDF and
 * SVG; one unit of the drawing is one pixel or one point.
 *
 * Every output goes through se_output (complete-or-nothing). The module keeps no state; a plot
 * description is only read. */
#ifndef SE_PLOT_H
#define SE_PLOT_H

#include <stddef.h>

#include "strandecho/distmap.h"
#include "strandecho/error.h"
#include "strandecho/line.h"
#include "strandecho/locate.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Unit of the distance axis and of the distance text. */
typedef enum se_plot_units {
    SE_PLOT_METRES = 0, /* m */
    SE_PLOT_FEET        /* international foot, 0.3048 m */
} se_plot_units;

/* Output format. */
typedef enum se_plot_format {
    SE_PLOT_AUTO = 0, /* from the path's extension (.png, .svg, .pdf; case-insensitive) */
    SE_PLOT_PNG,
    SE_PLOT_SVG,
    SE_PLOT_PDF
} se_plot_format;

/* Everything a plot shows. Pointers are borrowed for the call; NULL means "not shown" where noted.
 *
 * Time base: trace[i] lies at round-trip delay  i / rate_hz - t0_s  after the direct arrival, the
 * same convention as se_event.delay_s (t0_s is the record time of the direct arrival, as
 * se_locate_result.t0_s when the trace is the full-record correlation). Samples at negative
 * delays are not drawn. Distances come from map (when given) else from speed_m_s (d = v t / 2). */
typedef struct se_plot_data {
    const double *trace;        /* matched-filter output [size: n], reflection units (the same scale
                                   as result->threshold and the events' reflection); required */
    size_t n;                   /* samples, >= 2 */
    double rate_hz;             /* sample rate of the trace, Hz, > 0 */
    double t0_s;                /* record time of the direct arrival, s; NAN = result->t0_s */
    const se_distmap *map;      /* delay -> distance (borrowed), or NULL: uniform speed below */
    double speed_m_s;           /* used when map is NULL; 0 or NAN = result->speed_m_s */
    const se_locate_result *result; /* events, dead zone, threshold (borrowed); required */
    const se_line *line;        /* prepared line description for the schematic, or NULL */
    const se_expected_event *expected; /* [size: n_expected] expected events, or NULL: taken from
                                   line (se_line_expected_events) when a line is given */
    size_t n_expected;
    const int *match;           /* [size: result->n_events] index into the expected events of the
                                   event's match, -1 for none; or NULL: the events' own
                                   se_event.expected, when the result was matched (se_match_expected)
                                   to the same number of expected events, else none */
    double gain_db_per_m;       /* loss compensation applied for display: the trace (and the
                                   threshold) are multiplied by 10^(g d / 20) at distance d; stated
                                   on the plot. 0 or NAN = none */
    const double *baseline;     /* compare plot: baseline trace [size: baseline_n] on the same time
                                   base (already aligned, stretched and gain-normalised), or NULL */
    size_t baseline_n;
    const char *trace_label;    /* legend text of trace in a compare plot (NULL: "now") */
    const char *baseline_label; /* legend text of the baseline (NULL: "baseline") */
    const char *title;          /* text at the top (copied into the drawing; NULL: none) */
    se_plot_units units;        /* distance unit shown */
    double max_distance_m;      /* right end of the distance axis, m; 0 or NAN = automatic (the line's
                                   length plus a margin, or the record's range) */
} se_plot_data;

/* Defaults: every pointer NULL, counts 0, t0_s and speed NAN, gain 0, metres, automatic range. */
void se_plot_data_init(se_plot_data *data);

/* Format from a path's extension; SE_ERR_ARG naming the path when it is none of .png .svg .pdf. */
se_status se_plot_format_from_path(const char *path, se_plot_format *fmt, se_error *err);

/* Draw to path (through se_output: the old file stays until the new one is complete).
 *  width, height : pixels (PNG) or points (SVG, PDF), each in [200, 10000].
 *  fmt           : SE_PLOT_AUTO = from the extension.
 * Returns SE_OK, SE_ERR_ARG (bad data, size, format), SE_ERR_NOMEM, SE_ERR_IO (cairo or file). */
se_status se_plot_write(const se_plot_data *data, const char *path, se_plot_format fmt, double width,
                        double height, se_error *err);

/* The plot as a standalone SVG document in a NUL-terminated malloc'd string (free with free()),
 * for embedding in HTML. NULL with err filled on failure. Deterministic: the same data gives the
 * same bytes. Element ids: "se-plot" (the root svg), "se-event-N" (the marker of event N, 1-based,
 * a <circle> or <path> with attributes data-distance-m and data-class), class "se-xtick" on the
 * distance tick labels (text = the tick value in the plot's unit), "se-expected" on expected
 * feature ticks, "se-trace", "se-threshold", "se-deadzone". id_prefix (NULL: "se"; letters, digits,
 * '-' and '_') replaces "se" in ids so several plots can share one HTML page.
 * flags: 0 for a standalone file (XML declaration, SVG namespace), SE_PLOT_SVG_INLINE for an
 * element to place inside an HTML5 page (neither: HTML needs no namespace). */
#define SE_PLOT_SVG_INLINE 1u
char *se_plot_svg_string(const se_plot_data *data, double width, double height, const char *id_prefix,
                         unsigned flags, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_PLOT_H */
