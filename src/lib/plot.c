/* strandecho: the reflectogram plot (cairo for PNG and PDF, a direct SVG writer for SVG).
 *
 * One layout and one sequence of drawing calls serve every format: the calls go to a small
 * canvas that either drives cairo or appends SVG elements to a string. Text is measured with
 * cairo's toy font API in both cases so that labels are placed the same way. */
#include "strandecho/plot.h"

#include <cairo-pdf.h>
#include <cairo.h>
#include <ctype.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/output.h"

/* Colours (0xRRGGBB): neutral greys and one accent (a deep blue, distinct in grey-scale by its
 * darkness and always paired with a shape difference). */
#define SE_C_INK 0x202020u      /* trace, text */
#define SE_C_MUTED 0x5a5a5a     /* secondary text, multiples */
#define SE_C_RULE 0x8a8a8a      /* threshold, frame */
#define SE_C_GRID 0xdddddd      /* grid */
#define SE_C_SHADE 0xe9e9e9     /* dead zone */
#define SE_C_BASE 0xa8a8a8      /* baseline trace */
#define SE_C_ACCENT 0x1d4e89    /* primary events, found expected features */
#define SE_C_SEG_A 0xd4d4d4     /* schematic segments, alternating */
#define SE_C_SEG_B 0xa6a6a6
#define SE_NONE (-1L)

#define SE_FT 0.3048
#define SE_MAX_LABEL_ROWS 4
#define SE_PLOT_MIN_SIZE 200.0
#define SE_PLOT_MAX_SIZE 10000.0

typedef se_strbuf se_sb;

typedef enum se_dash { SE_SOLID = 0, SE_DASHED, SE_DOTTED } se_dash;
typedef enum se_shape { SE_DIAMOND = 0, SE_CIRCLE, SE_TRIANGLE } se_shape;

typedef struct se_cv {
    cairo_t *cr;      /* drawing target, or NULL for SVG */
    se_sb *svg;       /* SVG text, or NULL for cairo */
    cairo_t *measure; /* text measurement (always) */
    const char *pfx;  /* id prefix */
    int clip_count;
} se_cv;

typedef struct se_lay {
    const se_plot_data *d;
    double W, H, s;      /* size and type scale */
    double k;            /* display units per metre */
    const char *u;       /* unit name */
    double dmax_m;       /* right end of the distance axis, m */
    double fx0, fx1;     /* frame left and right */
    double fy0, fylab, fy1; /* frame top, bottom of the label zone, frame bottom */
    double gy0, gy1;     /* difference panel top and bottom (compare plots) */
    double ymax, gmax;   /* half ranges of the main and difference panels */
    double speed;        /* uniform speed when no map */
    double t0;
    int rows;            /* label rows */
    const se_expected_event *ex;
    size_t nex;
    const int *match;
} se_lay;

static void se_sb_num(se_sb *b, double v);
static void se_cv_colour(const se_cv *cv, unsigned long rgb);
static void se_cv_stroke_style(se_cv *cv, unsigned long rgb, double w, se_dash dash, double s);
static void se_cv_line(se_cv *cv, double x0, double y0, double x1, double y1, unsigned long rgb, double w,
                       se_dash dash, double s, const char *cls);
static void se_cv_path(se_cv *cv, const double *x, const double *y, size_t n, unsigned long rgb, double w,
                       se_dash dash, double s, const char *cls);
static void se_cv_rect(se_cv *cv, double x, double y, double w, double h, long fill, long stroke, double sw,
                       const char *cls);
static void se_cv_marker(se_cv *cv, se_shape shape, double x, double y, double r, long fill, long stroke,
                         double sw, const char *id, const char *attrs);
static double se_cv_text_width(const se_cv *cv, const char *t, double size, int bold);
static void se_cv_text(se_cv *cv, double x, double y, const char *t, double size, int bold, int anchor,
                       unsigned long rgb, const char *cls);
static void se_cv_clip(se_cv *cv, double x, double y, double w, double h);
static void se_cv_unclip(se_cv *cv);
static double se_nice_step(double range, int target);
static int se_fmt_decimals(double step);
static double se_dist_of_delay(const se_lay *L, double t);
static double se_delay_of_dist(const se_lay *L, double d);
static double se_xpos(const se_lay *L, double d_m);
static double se_gain(const se_lay *L, double d_m);
static double se_sample_at(const double *x, size_t n, double pos);
static se_status se_layout(se_lay *L, const se_plot_data *d, const se_cv *cv, double W, double H, se_error *err);
static void se_event_label(const se_lay *L, size_t i, char *buf, size_t size);
static se_status se_draw(const se_lay *L, se_cv *cv, se_error *err);
static se_status se_draw_trace(const se_lay *L, se_cv *cv, const double *x, size_t n, const double *minus,
                               double y0, double y1, double half, unsigned long rgb, double w,
                               const char *cls, se_error *err);
static se_status se_check_data(const se_plot_data *d, double W, double H, se_error *err);
static cairo_status_t se_cairo_to_file(void *closure, const unsigned char *data, unsigned int length);

/* ---- string buffer ---------------------------------------------------------------------- */

/* A coordinate with two decimals, by integer arithmetic so no locale can change the point. */
static void se_sb_num(se_sb *b, double v)
{
    long long c;
    if (!isfinite(v))
        v = 0.0;
    if (v > 1e12)
        v = 1e12;
    if (v < -1e12)
        v = -1e12;
    c = llround(v * 100.0);
    if (c < 0) {
        se_strbuf_add(b, "-", 1);
        c = -c;
    }
    if (c % 100 == 0)
        se_strbuf_printf(b, "%lld", c / 100);
    else if (c % 10 == 0)
        se_strbuf_printf(b, "%lld.%lld", c / 100, (c % 100) / 10);
    else
        se_strbuf_printf(b, "%lld.%02lld", c / 100, c % 100);
}

/* ---- canvas ------------------------------------------------------------------------------ */

static void se_cv_colour(const se_cv *cv, unsigned long rgb)
{
    cairo_set_source_rgb(cv->cr, (double)((rgb >> 16) & 0xff) / 255.0, (double)((rgb >> 8) & 0xff) / 255.0,
                         (double)(rgb & 0xff) / 255.0);
}

static void se_cv_stroke_style(se_cv *cv, unsigned long rgb, double w, se_dash dash, double s)
{
    if (cv->cr != NULL) {
        double dd[2];
        se_cv_colour(cv, rgb);
        cairo_set_line_width(cv->cr, w);
        cairo_set_line_join(cv->cr, CAIRO_LINE_JOIN_ROUND);
        if (dash == SE_DASHED) {
            dd[0] = 5.0 * s;
            dd[1] = 3.0 * s;
            cairo_set_dash(cv->cr, dd, 2, 0.0);
        } else if (dash == SE_DOTTED) {
            dd[0] = 1.2 * s;
            dd[1] = 2.4 * s;
            cairo_set_dash(cv->cr, dd, 2, 0.0);
        } else {
            cairo_set_dash(cv->cr, NULL, 0, 0.0);
        }
        return;
    }
    se_strbuf_printf(cv->svg, " fill=\"none\" stroke=\"#%06lx\" stroke-width=\"", rgb);
    se_sb_num(cv->svg, w);
    se_strbuf_add(cv->svg, "\"", 1);
    if (dash == SE_DASHED) {
        se_strbuf_add(cv->svg, " stroke-dasharray=\"", 19);
        se_sb_num(cv->svg, 5.0 * s);
        se_strbuf_add(cv->svg, " ", 1);
        se_sb_num(cv->svg, 3.0 * s);
        se_strbuf_add(cv->svg, "\"", 1);
    } else if (dash == SE_DOTTED) {
        se_strbuf_add(cv->svg, " stroke-dasharray=\"", 19);
        se_sb_num(cv->svg, 1.2 * s);
        se_strbuf_add(cv->svg, " ", 1);
        se_sb_num(cv->svg, 2.4 * s);
        se_strbuf_add(cv->svg, "\"", 1);
    }
}

static void se_cv_line(se_cv *cv, double x0, double y0, double x1, double y1, unsigned long rgb, double w,
                       se_dash dash, double s, const char *cls)
{
    double x[2], y[2];
    x[0] = x0;
    x[1] = x1;
    y[0] = y0;
    y[1] = y1;
    se_cv_path(cv, x, y, 2, rgb, w, dash, s, cls);
}

static void se_cv_path(se_cv *cv, const double *x, const double *y, size_t n, unsigned long rgb, double w,
                       se_dash dash, double s, const char *cls)
{
    size_t i;
    if (n < 2)
        return;
    if (cv->cr != NULL) {
        cairo_new_path(cv->cr);
        cairo_move_to(cv->cr, x[0], y[0]);
        for (i = 1; i < n; i++)
            cairo_line_to(cv->cr, x[i], y[i]);
        se_cv_stroke_style(cv, rgb, w, dash, s);
        cairo_stroke(cv->cr);
        return;
    }
    se_strbuf_add(cv->svg, n == 2 ? "<line" : "<polyline", n == 2 ? 5 : 9);
    if (cls != NULL)
        se_strbuf_printf(cv->svg, " class=\"%s\"", cls);
    if (n == 2) {
        se_strbuf_add(cv->svg, " x1=\"", 5);
        se_sb_num(cv->svg, x[0]);
        se_strbuf_add(cv->svg, "\" y1=\"", 6);
        se_sb_num(cv->svg, y[0]);
        se_strbuf_add(cv->svg, "\" x2=\"", 6);
        se_sb_num(cv->svg, x[1]);
        se_strbuf_add(cv->svg, "\" y2=\"", 6);
        se_sb_num(cv->svg, y[1]);
        se_strbuf_add(cv->svg, "\"", 1);
    } else {
        se_strbuf_add(cv->svg, " points=\"", 9);
        for (i = 0; i < n; i++) {
            if (i > 0)
                se_strbuf_add(cv->svg, " ", 1);
            se_sb_num(cv->svg, x[i]);
            se_strbuf_add(cv->svg, ",", 1);
            se_sb_num(cv->svg, y[i]);
        }
        se_strbuf_add(cv->svg, "\"", 1);
    }
    se_cv_stroke_style(cv, rgb, w, dash, s);
    se_strbuf_add(cv->svg, " stroke-linejoin=\"round\"/>\n", 27);
}

static void se_cv_rect(se_cv *cv, double x, double y, double w, double h, long fill, long stroke, double sw,
                       const char *cls)
{
    if (cv->cr != NULL) {
        cairo_new_path(cv->cr);
        cairo_rectangle(cv->cr, x, y, w, h);
        if (fill != SE_NONE) {
            se_cv_colour(cv, (unsigned long)fill);
            cairo_fill_preserve(cv->cr);
        }
        if (stroke != SE_NONE) {
            se_cv_stroke_style(cv, (unsigned long)stroke, sw, SE_SOLID, 1.0);
            cairo_stroke_preserve(cv->cr);
        }
        cairo_new_path(cv->cr);
        return;
    }
    se_strbuf_add(cv->svg, "<rect", 5);
    if (cls != NULL)
        se_strbuf_printf(cv->svg, " class=\"%s\"", cls);
    se_strbuf_add(cv->svg, " x=\"", 4);
    se_sb_num(cv->svg, x);
    se_strbuf_add(cv->svg, "\" y=\"", 5);
    se_sb_num(cv->svg, y);
    se_strbuf_add(cv->svg, "\" width=\"", 9);
    se_sb_num(cv->svg, w);
    se_strbuf_add(cv->svg, "\" height=\"", 10);
    se_sb_num(cv->svg, h);
    if (fill != SE_NONE)
        se_strbuf_printf(cv->svg, "\" fill=\"#%06lx\"", (unsigned long)fill);
    else
        se_strbuf_add(cv->svg, "\" fill=\"none\"", 13);
    if (stroke != SE_NONE) {
        se_strbuf_printf(cv->svg, " stroke=\"#%06lx\" stroke-width=\"", (unsigned long)stroke);
        se_sb_num(cv->svg, sw);
        se_strbuf_add(cv->svg, "\"", 1);
    }
    se_strbuf_add(cv->svg, "/>\n", 3);
}

/* Marker centred on (x, y) with "radius" r. SVG: circles are <circle cx cy>, other shapes <path>
 * with data-x/data-y giving the centre. */
static void se_cv_marker(se_cv *cv, se_shape shape, double x, double y, double r, long fill, long stroke,
                         double sw, const char *id, const char *attrs)
{
    double px[3], py[3];
    if (shape == SE_DIAMOND) {
        r *= 1.25;
    }
    px[0] = x;
    py[0] = y - r;
    px[1] = x + r * 0.95;
    py[1] = y + r * 0.7;
    px[2] = x - r * 0.95;
    py[2] = y + r * 0.7;
    if (cv->cr != NULL) {
        cairo_new_path(cv->cr);
        if (shape == SE_CIRCLE) {
            cairo_arc(cv->cr, x, y, r, 0.0, 2.0 * SE_PI);
        } else if (shape == SE_DIAMOND) {
            cairo_move_to(cv->cr, x, y - r);
            cairo_line_to(cv->cr, x + 0.75 * r, y);
            cairo_line_to(cv->cr, x, y + r);
            cairo_line_to(cv->cr, x - 0.75 * r, y);
        } else {
            cairo_move_to(cv->cr, px[0], py[0]);
            cairo_line_to(cv->cr, px[1], py[1]);
            cairo_line_to(cv->cr, px[2], py[2]);
        }
        cairo_close_path(cv->cr);
        if (fill != SE_NONE) {
            se_cv_colour(cv, (unsigned long)fill);
            cairo_fill_preserve(cv->cr);
        }
        if (stroke != SE_NONE) {
            se_cv_stroke_style(cv, (unsigned long)stroke, sw, SE_SOLID, 1.0);
            cairo_stroke_preserve(cv->cr);
        }
        cairo_new_path(cv->cr);
        return;
    }
    if (shape == SE_CIRCLE) {
        se_strbuf_add(cv->svg, "<circle cx=\"", 12);
        se_sb_num(cv->svg, x);
        se_strbuf_add(cv->svg, "\" cy=\"", 6);
        se_sb_num(cv->svg, y);
        se_strbuf_add(cv->svg, "\" r=\"", 5);
        se_sb_num(cv->svg, r);
        se_strbuf_add(cv->svg, "\"", 1);
    } else {
        se_strbuf_add(cv->svg, "<path d=\"M", 10);
        if (shape == SE_DIAMOND) {
            se_sb_num(cv->svg, x);
            se_strbuf_add(cv->svg, " ", 1);
            se_sb_num(cv->svg, y - r);
            se_strbuf_add(cv->svg, "L", 1);
            se_sb_num(cv->svg, x + 0.75 * r);
            se_strbuf_add(cv->svg, " ", 1);
            se_sb_num(cv->svg, y);
            se_strbuf_add(cv->svg, "L", 1);
            se_sb_num(cv->svg, x);
            se_strbuf_add(cv->svg, " ", 1);
            se_sb_num(cv->svg, y + r);
            se_strbuf_add(cv->svg, "L", 1);
            se_sb_num(cv->svg, x - 0.75 * r);
            se_strbuf_add(cv->svg, " ", 1);
            se_sb_num(cv->svg, y);
        } else {
            int i;
            for (i = 0; i < 3; i++) {
                if (i > 0)
                    se_strbuf_add(cv->svg, "L", 1);
                se_sb_num(cv->svg, px[i]);
                se_strbuf_add(cv->svg, " ", 1);
                se_sb_num(cv->svg, py[i]);
            }
        }
        se_strbuf_add(cv->svg, "Z\" data-x=\"", 11);
        se_sb_num(cv->svg, x);
        se_strbuf_add(cv->svg, "\" data-y=\"", 10);
        se_sb_num(cv->svg, y);
        se_strbuf_add(cv->svg, "\"", 1);
    }
    if (id != NULL)
        se_strbuf_printf(cv->svg, " id=\"%s\"", id);
    if (attrs != NULL) {
        se_strbuf_add(cv->svg, " ", 1);
        se_strbuf_add(cv->svg, attrs, strlen(attrs));
    }
    if (fill != SE_NONE)
        se_strbuf_printf(cv->svg, " fill=\"#%06lx\"", (unsigned long)fill);
    else
        se_strbuf_add(cv->svg, " fill=\"#ffffff\"", 15);
    if (stroke != SE_NONE) {
        se_strbuf_printf(cv->svg, " stroke=\"#%06lx\" stroke-width=\"", (unsigned long)stroke);
        se_sb_num(cv->svg, sw);
        se_strbuf_add(cv->svg, "\"", 1);
    }
    se_strbuf_add(cv->svg, "/>\n", 3);
}

static double se_cv_text_width(const se_cv *cv, const char *t, double size, int bold)
{
    cairo_text_extents_t ex;
    cairo_select_font_face(cv->measure, "sans-serif", CAIRO_FONT_SLANT_NORMAL,
                           bold ? CAIRO_FONT_WEIGHT_BOLD : CAIRO_FONT_WEIGHT_NORMAL);
    cairo_set_font_size(cv->measure, size);
    cairo_text_extents(cv->measure, t, &ex);
    return ex.x_advance;
}

/* Text with its baseline at y; anchor 0 start, 1 middle, 2 end. */
static void se_cv_text(se_cv *cv, double x, double y, const char *t, double size, int bold, int anchor,
                       unsigned long rgb, const char *cls)
{
    static const char *const anchors[3] = {"start", "middle", "end"};
    if (cv->cr != NULL) {
        double w = se_cv_text_width(cv, t, size, bold);
        cairo_select_font_face(cv->cr, "sans-serif", CAIRO_FONT_SLANT_NORMAL,
                               bold ? CAIRO_FONT_WEIGHT_BOLD : CAIRO_FONT_WEIGHT_NORMAL);
        cairo_set_font_size(cv->cr, size);
        se_cv_colour(cv, rgb);
        cairo_move_to(cv->cr, x - w * 0.5 * anchor, y);
        cairo_show_text(cv->cr, t);
        cairo_new_path(cv->cr);
        return;
    }
    se_strbuf_add(cv->svg, "<text", 5);
    if (cls != NULL)
        se_strbuf_printf(cv->svg, " class=\"%s\"", cls);
    se_strbuf_add(cv->svg, " x=\"", 4);
    se_sb_num(cv->svg, x);
    se_strbuf_add(cv->svg, "\" y=\"", 5);
    se_sb_num(cv->svg, y);
    se_strbuf_add(cv->svg, "\" font-size=\"", 13);
    se_sb_num(cv->svg, size);
    se_strbuf_printf(cv->svg, "\" text-anchor=\"%s\" fill=\"#%06lx\"%s>", anchors[anchor], rgb,
                 bold ? " font-weight=\"bold\"" : "");
    se_strbuf_xml_escape(cv->svg, t);
    se_strbuf_add(cv->svg, "</text>\n", 8);
}

static void se_cv_clip(se_cv *cv, double x, double y, double w, double h)
{
    if (cv->cr != NULL) {
        cairo_save(cv->cr);
        cairo_new_path(cv->cr);
        cairo_rectangle(cv->cr, x, y, w, h);
        cairo_clip(cv->cr);
        return;
    }
    cv->clip_count++;
    se_strbuf_printf(cv->svg, "<clipPath id=\"%s-clip%d\"><rect x=\"", cv->pfx, cv->clip_count);
    se_sb_num(cv->svg, x);
    se_strbuf_add(cv->svg, "\" y=\"", 5);
    se_sb_num(cv->svg, y);
    se_strbuf_add(cv->svg, "\" width=\"", 9);
    se_sb_num(cv->svg, w);
    se_strbuf_add(cv->svg, "\" height=\"", 10);
    se_sb_num(cv->svg, h);
    se_strbuf_printf(cv->svg, "\"/></clipPath>\n<g clip-path=\"url(#%s-clip%d)\">\n", cv->pfx, cv->clip_count);
}

static void se_cv_unclip(se_cv *cv)
{
    if (cv->cr != NULL)
        cairo_restore(cv->cr);
    else
        se_strbuf_add(cv->svg, "</g>\n", 5);
}

/* ---- numbers and mappings ---------------------------------------------------------------- */

/* A 1-2-5 step giving about target intervals over range. */
static double se_nice_step(double range, int target)
{
    double raw = range / (double)target, mag, f;
    if (!(raw > 0.0) || !isfinite(raw))
        return 1.0;
    mag = pow(10.0, floor(log10(raw)));
    f = raw / mag;
    if (f < 1.5)
        return mag;
    if (f < 3.5)
        return 2.0 * mag;
    if (f < 7.5)
        return 5.0 * mag;
    return 10.0 * mag;
}

/* Decimals needed to print multiples of step. */
static int se_fmt_decimals(double step)
{
    int d = 0;
    while (d < 6 && fabs(step * pow(10.0, d) - floor(step * pow(10.0, d) + 0.5)) > 1e-6)
        d++;
    return d;
}

static double se_dist_of_delay(const se_lay *L, double t)
{
    double d;
    if (t <= 0.0)
        return 0.0;
    if (L->d->map != NULL) {
        if (se_distmap_distance(L->d->map, t, &d, NULL) != SE_OK)
            return NAN;
        return d;
    }
    return 0.5 * L->speed * t;
}

static double se_delay_of_dist(const se_lay *L, double d)
{
    double t;
    if (d <= 0.0)
        return 0.0;
    if (L->d->map != NULL) {
        if (se_distmap_time(L->d->map, d, &t, NULL) != SE_OK)
            return NAN;
        return t;
    }
    return 2.0 * d / L->speed;
}

static double se_xpos(const se_lay *L, double d_m)
{
    return L->fx0 + (L->fx1 - L->fx0) * d_m / L->dmax_m;
}

static double se_gain(const se_lay *L, double d_m)
{
    double g = L->d->gain_db_per_m;
    if (!(g != 0.0) || !isfinite(g))
        return 1.0;
    return pow(10.0, g * d_m / 20.0);
}

/* Linear interpolation of x at fractional index pos (0 outside). */
static double se_sample_at(const double *x, size_t n, double pos)
{
    size_t i;
    double f;
    if (!(pos >= 0.0) || pos > (double)(n - 1))
        return 0.0;
    i = (size_t)pos;
    if (i >= n - 1)
        return x[n - 1];
    f = pos - (double)i;
    return x[i] * (1.0 - f) + x[i + 1] * f;
}

/* ---- layout ------------------------------------------------------------------------------ */

static void se_event_label(const se_lay *L, size_t i, char *buf, size_t size)
{
    const se_locate_result *r = L->d->result;
    const se_event *ev = &r->events[i];
    double res = r->resolution_m * L->k;
    int dec = res > 0.0 && res < 0.1 ? 2 : (res > 0.0 && res < 2.0 ? 1 : 0);
    if (ev->multiple)
        snprintf(buf, size, "%zu multiple %.*f %s", i + 1, dec, ev->distance_m * L->k, L->u);
    else
        snprintf(buf, size, "%zu %s %.*f %s%s", i + 1, se_event_class(r, ev), dec, ev->distance_m * L->k,
                 L->u, ev->low_confidence ? " ?" : "");
}

static se_status se_check_data(const se_plot_data *d, double W, double H, se_error *err)
{
    if (d == NULL || d->trace == NULL || d->result == NULL)
        return se_fail(err, SE_ERR_ARG, "plot: no trace or no locate result");
    if (d->n < 2)
        return se_fail(err, SE_ERR_ARG, "plot: the trace has %zu samples, needs at least 2", d->n);
    if (!(d->rate_hz > 0.0) || !isfinite(d->rate_hz))
        return se_fail(err, SE_ERR_ARG, "plot: sample rate %g Hz is not positive", d->rate_hz);
    if (!(W >= SE_PLOT_MIN_SIZE && W <= SE_PLOT_MAX_SIZE && H >= SE_PLOT_MIN_SIZE && H <= SE_PLOT_MAX_SIZE))
        return se_fail(err, SE_ERR_ARG, "plot: size %gx%g outside %g to %g", W, H, SE_PLOT_MIN_SIZE,
                       SE_PLOT_MAX_SIZE);
    if (d->result->n_events > 0 && d->result->events == NULL)
        return se_fail(err, SE_ERR_ARG, "plot: result has %zu events but no event array", d->result->n_events);
    if (d->baseline != NULL && d->baseline_n < 2)
        return se_fail(err, SE_ERR_ARG, "plot: the baseline has %zu samples, needs at least 2", d->baseline_n);
    if (d->n_expected > 0 && d->expected == NULL)
        return se_fail(err, SE_ERR_ARG, "plot: %zu expected events but no array", d->n_expected);
    if (d->units != SE_PLOT_METRES && d->units != SE_PLOT_FEET)
        return se_fail(err, SE_ERR_ARG, "plot: unknown distance unit %d", (int)d->units);
    return SE_OK;
}

static se_status se_layout(se_lay *L, const se_plot_data *d, const se_cv *cv, double W, double H, se_error *err)
{
    const se_locate_result *r = d->result;
    double s, t_end, d_end, top, bottom, maxabs = 0.0, row_h, right[SE_MAX_LABEL_ROWS];
    size_t i;
    int rows = 0;

    L->d = d;
    L->W = W;
    L->H = H;
    s = fmin(W / 1000.0, H / 600.0);
    L->s = s = fmax(0.6, fmin(3.0, s));
    L->k = d->units == SE_PLOT_FEET ? 1.0 / SE_FT : 1.0;
    L->u = d->units == SE_PLOT_FEET ? "ft" : "m";
    L->t0 = isfinite(d->t0_s) ? d->t0_s : r->t0_s;
    L->speed = (d->speed_m_s > 0.0 && isfinite(d->speed_m_s)) ? d->speed_m_s : r->speed_m_s;
    if (d->map == NULL && !(L->speed > 0.0 && isfinite(L->speed)))
        return se_fail(err, SE_ERR_ARG, "plot: no distance map and no positive speed");
    if (!isfinite(L->t0))
        return se_fail(err, SE_ERR_ARG, "plot: time of the direct arrival is not finite");

    t_end = (double)(d->n - 1) / d->rate_hz - L->t0;
    d_end = se_dist_of_delay(L, t_end);
    if (d->max_distance_m > 0.0 && isfinite(d->max_distance_m)) {
        L->dmax_m = d->max_distance_m;
    } else if (d->line != NULL && d->line->prepared && d->line->length_m > 0.0) {
        L->dmax_m = d->line->length_m * 1.08;
        for (i = 0; i < r->n_events; i++)
            if (!r->events[i].multiple)
                L->dmax_m = fmax(L->dmax_m, r->events[i].distance_m * 1.04);
        if (d_end > 0.0 && d_end < L->dmax_m)
            L->dmax_m = d_end;
    } else {
        L->dmax_m = d_end;
    }
    if (!(L->dmax_m > 0.0) || !isfinite(L->dmax_m))
        return se_fail(err, SE_ERR_ARG, "plot: the trace reaches no positive distance (t0 %g s, %zu samples)",
                       L->t0, d->n);

    /* Vertical bands, top to bottom. */
    top = 8.0 * s + 17.0 * s + 15.0 * s;  /* margin, title, subtitle */
    top += 26.0 * s;                      /* time axis labels and title */
    bottom = 6.0 * s + 20.0 * s;          /* margin, legend */
    bottom += 36.0 * s;                   /* distance tick labels and axis title */
    L->ex = d->expected;
    L->nex = d->n_expected;
    if (d->line != NULL || L->nex > 0)
        bottom += 44.0 * s;               /* schematic */
    L->fx0 = 70.0 * s;
    L->fx1 = W - 22.0 * s;
    L->fy0 = top;
    L->fy1 = H - bottom;
    L->gy0 = L->gy1 = L->fy1;
    if (d->baseline != NULL) {
        double gh = (L->fy1 - L->fy0) * 0.3;
        L->gy1 = L->fy1;
        L->gy0 = L->fy1 - gh;
        L->fy1 = L->gy0 - 10.0 * s;
    }

    /* Label rows: greedy, by distance. */
    for (i = 0; i < SE_MAX_LABEL_ROWS; i++)
        right[i] = -1e300;
    for (i = 0; i < r->n_events; i++) {
        char lab[128];
        double w, x, left;
        int k, best = 0;
        se_event_label(L, i, lab, sizeof lab);
        w = se_cv_text_width(cv, lab, 10.0 * s, 0) + 6.0 * s;
        x = se_xpos(L, r->events[i].distance_m);
        left = fmax(L->fx0, fmin(x - w / 2.0, L->fx1 - w));
        for (k = 0; k < SE_MAX_LABEL_ROWS; k++)
            if (right[k] + 3.0 * s <= left)
                break;
        if (k == SE_MAX_LABEL_ROWS) {
            for (k = 1; k < SE_MAX_LABEL_ROWS; k++)
                if (right[k] < right[best])
                    best = k;
            k = best;
        }
        right[k] = fmax(right[k] + 3.0 * s + w, left + w);
        if (k + 1 > rows)
            rows = k + 1;
    }
    L->rows = rows;
    row_h = 15.0 * s;
    L->fylab = L->fy0 + (rows > 0 ? (double)rows * row_h + 10.0 * s : 4.0 * s);
    if (L->fy1 - L->fylab < 60.0 * s)
        return se_fail(err, SE_ERR_ARG, "plot: %gx%g is too small for the trace and %d label rows", W, H, rows);

    /* Amplitude range: the largest excursion beyond the dead zone (the direct arrival is clipped). */
    for (i = 0; i < d->n; i++) {
        double t = (double)i / d->rate_hz - L->t0, dist, g, v;
        if (t <= r->dead_zone_s)
            continue;
        dist = se_dist_of_delay(L, t);
        if (!(dist <= L->dmax_m))
            break;
        g = se_gain(L, dist);
        v = fabs(d->trace[i] * g);
        if (d->baseline != NULL && i < d->baseline_n)
            v = fmax(v, fabs(d->baseline[i] * g));
        if (isfinite(v) && v > maxabs)
            maxabs = v;
    }
    if (r->threshold > 0.0 && isfinite(r->threshold))
        maxabs = fmax(maxabs, r->threshold * se_gain(L, L->dmax_m));
    L->ymax = maxabs > 0.0 ? maxabs * 1.12 : 1.0;
    L->gmax = L->ymax;
    if (d->baseline != NULL) {
        double m = 0.0;
        for (i = 0; i < d->n && i < d->baseline_n; i++) {
            double t = (double)i / d->rate_hz - L->t0, dist, v;
            if (t <= r->dead_zone_s)
                continue;
            dist = se_dist_of_delay(L, t);
            if (!(dist <= L->dmax_m))
                break;
            v = fabs((d->trace[i] - d->baseline[i]) * se_gain(L, dist));
            if (isfinite(v) && v > m)
                m = v;
        }
        if (r->threshold > 0.0 && isfinite(r->threshold))
            m = fmax(m, r->threshold * se_gain(L, L->dmax_m));
        L->gmax = m > 0.0 ? m * 1.15 : 1.0;
    }
    return SE_OK;
}

/* ---- drawing ----------------------------------------------------------------------------- */

/* The trace x (minus the optional second trace) between panel top y0 and bottom y1, half range
 * half; one polyline, reduced to the min and max of each pixel column when samples are dense. */
static se_status se_draw_trace(const se_lay *L, se_cv *cv, const double *x, size_t n, const double *minus,
                               double y0, double y1, double half, unsigned long rgb, double w,
                               const char *cls, se_error *err)
{
    const double rate = L->d->rate_hz, ymid = 0.5 * (y0 + y1), ys = 0.5 * (y1 - y0) / half;
    size_t cols = (size_t)ceil(L->fx1 - L->fx0) + 1, i, np = 0, cap, first, last;
    double *px, *py, t_last;
    double d_last;

    /* Samples shown: from the direct arrival to the axis end. */
    first = L->t0 > 0.0 ? (size_t)ceil(L->t0 * rate) : 0;
    if (first >= n)
        return SE_OK;
    t_last = se_delay_of_dist(L, L->dmax_m);
    d_last = (t_last + L->t0) * rate + 1.0;
    last = (isfinite(d_last) && d_last < (double)(n - 1)) ? (size_t)d_last : n - 1;
    if (last <= first)
        return SE_OK;
    cap = (last - first + 1 <= 4 * cols) ? last - first + 1 : 4 * cols + 4;
    px = se_calloc(cap, sizeof *px, "plot points", err);
    py = se_calloc(cap, sizeof *py, "plot points", err);
    if (px == NULL || py == NULL) {
        free(px);
        free(py);
        return err != NULL ? err->code : SE_ERR_NOMEM;
    }
    if (last - first + 1 <= 4 * cols) {
        for (i = first; i <= last; i++) {
            double dist = se_dist_of_delay(L, (double)i / rate - L->t0);
            double v = (x[i] - (minus != NULL ? minus[i] : 0.0)) * se_gain(L, dist);
            px[np] = se_xpos(L, dist);
            py[np] = ymid - ys * v;
            np++;
        }
    } else {
        /* Column c spans distances [c, c + 1) pixels: first, min, max, last sample of each. */
        size_t c, j = first;
        for (c = 0; c < cols && j <= last; c++) {
            double dc = (double)(c + 1) / (L->fx1 - L->fx0) * L->dmax_m;
            double tc = se_delay_of_dist(L, dc), stop = (tc + L->t0) * rate, vmin = INFINITY, vmax = -INFINITY;
            double g = se_gain(L, dc), xc = L->fx0 + (double)c + 0.5;
            size_t imin = j, imax = j, k0 = j;
            if (!isfinite(stop))
                stop = (double)last;
            for (; j <= last && (double)j < stop; j++) {
                double v = x[j] - (minus != NULL ? minus[j] : 0.0);
                if (v < vmin) {
                    vmin = v;
                    imin = j;
                }
                if (v > vmax) {
                    vmax = v;
                    imax = j;
                }
            }
            if (j == k0)
                continue;
            if (np + 2 > cap)
                break;
            px[np] = xc;
            py[np++] = ymid - ys * g * (imin < imax ? vmin : vmax);
            px[np] = xc;
            py[np++] = ymid - ys * g * (imin < imax ? vmax : vmin);
        }
    }
    se_cv_clip(cv, L->fx0, y0, L->fx1 - L->fx0, y1 - y0);
    se_cv_path(cv, px, py, np, rgb, w, SE_SOLID, L->s, cls);
    se_cv_unclip(cv);
    free(px);
    free(py);
    return SE_OK;
}

static se_status se_draw(const se_lay *L, se_cv *cv, se_error *err)
{
    const se_plot_data *d = L->d;
    const se_locate_result *r = d->result;
    const double s = L->s, fs = 10.0 * s, ymid = 0.5 * (L->fylab + L->fy1);
    const double ys = 0.5 * (L->fy1 - L->fylab) / L->ymax;
    const double tscale = r->electrical ? 1e6 : 1e3; /* round trips in us on cables, ms else */
    double step, v, tmax, x, y, lx, right[SE_MAX_LABEL_ROWS];
    char buf[256];
    int dec, k;
    size_t i;
    se_status st;

    /* Title and the statement line. */
    if (d->title != NULL)
        se_cv_text(cv, L->fx0, 8.0 * s + 13.0 * s, d->title, 14.0 * s, 1, 0, SE_C_INK, "se-title");
    {
        char sub[256];
        int n;
        if (d->map != NULL && d->line != NULL)
            n = snprintf(sub, sizeof sub, "distance from the line description's speeds");
        else
            n = snprintf(sub, sizeof sub, "speed %.6g m/s", L->speed);
        if (isfinite(d->gain_db_per_m) && d->gain_db_per_m != 0.0 && n > 0 && (size_t)n < sizeof sub)
            n += snprintf(sub + n, sizeof sub - (size_t)n, "   |   display gain %+.4g dB/%s with distance "
                          "(loss compensation) applied to trace and threshold",
                          d->gain_db_per_m / L->k, L->u);
        if (n > 0 && (size_t)n < sizeof sub)
            snprintf(sub + n, sizeof sub - (size_t)n, "   |   dead zone %.3g %s, resolution %.3g %s",
                     r->dead_zone_m * L->k, L->u, r->resolution_m * L->k, L->u);
        se_cv_text(cv, L->fx0, 8.0 * s + 17.0 * s + 12.0 * s, sub, 9.5 * s, 0, 0, SE_C_MUTED, "se-subtitle");
    }

    /* Frame backgrounds, dead zone, grid. */
    se_cv_rect(cv, L->fx0, L->fy0, L->fx1 - L->fx0, L->fy1 - L->fy0, 0xffffff, SE_NONE, 0, NULL);
    if (r->dead_zone_m > 0.0) {
        double xd = fmin(se_xpos(L, r->dead_zone_m), L->fx1);
        se_cv_rect(cv, L->fx0, L->fylab, xd - L->fx0, L->fy1 - L->fylab, SE_C_SHADE, SE_NONE, 0, "se-deadzone");
        if (d->baseline != NULL)
            se_cv_rect(cv, L->fx0, L->gy0, xd - L->fx0, L->gy1 - L->gy0, SE_C_SHADE, SE_NONE, 0, "se-deadzone");
        if (xd - L->fx0 > se_cv_text_width(cv, "dead zone", 8.5 * s, 0) + 4.0 * s)
            se_cv_text(cv, 0.5 * (L->fx0 + xd), L->fy1 - 5.0 * s, "dead zone", 8.5 * s, 0, 1, SE_C_MUTED, NULL);
    }
    step = se_nice_step(L->dmax_m * L->k, 8);
    dec = se_fmt_decimals(step);
    for (v = 0.0; v <= L->dmax_m * L->k * (1.0 + 1e-9); v += step) {
        x = se_xpos(L, v / L->k);
        se_cv_line(cv, x, L->fylab, x, L->fy1, SE_C_GRID, 0.8 * s, SE_SOLID, s, NULL);
        if (d->baseline != NULL)
            se_cv_line(cv, x, L->gy0, x, L->gy1, SE_C_GRID, 0.8 * s, SE_SOLID, s, NULL);
        se_cv_line(cv, x, L->gy1, x, L->gy1 + 4.0 * s, SE_C_RULE, 1.0 * s, SE_SOLID, s, NULL);
        snprintf(buf, sizeof buf, "%.*f", dec, v);
        se_cv_text(cv, x, L->gy1 + 15.0 * s, buf, fs, 0, 1, SE_C_INK, "se-xtick");
    }
    snprintf(buf, sizeof buf, "distance from the sensor (%s)", L->u);
    se_cv_text(cv, 0.5 * (L->fx0 + L->fx1), L->gy1 + 30.0 * s, buf, fs, 0, 1, SE_C_INK, "se-xlabel");

    /* Secondary axis: round-trip time, ms (us on cables), through the same distance mapping. */
    tmax = se_delay_of_dist(L, L->dmax_m) * tscale;
    if (isfinite(tmax) && tmax > 0.0) {
        double ts = se_nice_step(tmax, 8);
        int td = se_fmt_decimals(ts);
        double tv;
        for (tv = 0.0; tv <= tmax * (1.0 + 1e-9); tv += ts) {
            x = se_xpos(L, se_dist_of_delay(L, tv / tscale));
            se_cv_line(cv, x, L->fy0, x, L->fy0 - 4.0 * s, SE_C_RULE, 1.0 * s, SE_SOLID, s, NULL);
            snprintf(buf, sizeof buf, "%.*f", td, tv);
            se_cv_text(cv, x, L->fy0 - 7.0 * s, buf, 9.0 * s, 0, 1, SE_C_MUTED, "se-ttick");
        }
        se_cv_text(cv, L->fx1, L->fy0 - 19.0 * s, r->electrical ? "round-trip time (us)" : "round-trip time (ms)",
                   9.0 * s, 0, 2, SE_C_MUTED, NULL);
    }

    /* Amplitude axis. */
    step = se_nice_step(2.0 * L->ymax, 6);
    dec = se_fmt_decimals(step);
    for (v = -floor(L->ymax / step) * step; v <= L->ymax * (1.0 + 1e-9); v += step) {
        y = ymid - ys * v;
        if (fabs(v) < 0.5 * step)
            v = 0.0;
        se_cv_line(cv, L->fx0, y, L->fx1, y, v == 0.0 ? SE_C_BASE : SE_C_GRID, 0.8 * s, SE_SOLID, s, NULL);
        se_cv_line(cv, L->fx0 - 4.0 * s, y, L->fx0, y, SE_C_RULE, 1.0 * s, SE_SOLID, s, NULL);
        snprintf(buf, sizeof buf, "%.*f", dec, v);
        se_cv_text(cv, L->fx0 - 6.0 * s, y + 3.5 * s, buf, 9.0 * s, 0, 2, SE_C_INK, "se-ytick");
    }
    se_cv_text(cv, 6.0 * s, L->fylab - 2.0 * s, "reflection", 9.0 * s, 0, 0, SE_C_MUTED, NULL);

    /* Threshold pair. */
    if (r->threshold > 0.0 && isfinite(r->threshold)) {
        double tx[65], ty1[65], ty2[65];
        int sign, j;
        for (j = 0; j <= 64; j++) {
            double dist = r->dead_zone_m + (L->dmax_m - r->dead_zone_m) * (double)j / 64.0;
            double g = se_gain(L, dist);
            tx[j] = se_xpos(L, dist);
            ty1[j] = ymid - ys * r->threshold * g;
            ty2[j] = ymid + ys * r->threshold * g;
        }
        for (sign = 0; sign < 2; sign++)
            se_cv_path(cv, tx, sign ? ty2 : ty1, 65, SE_C_RULE, 1.0 * s, SE_DASHED, s, "se-threshold");
        if (d->baseline != NULL) {
            const double gys = 0.5 * (L->gy1 - L->gy0) / L->gmax, gmid = 0.5 * (L->gy0 + L->gy1);
            for (j = 0; j <= 64; j++) {
                double g = se_gain(L, r->dead_zone_m + (L->dmax_m - r->dead_zone_m) * (double)j / 64.0);
                ty1[j] = gmid - gys * r->threshold * g;
                ty2[j] = gmid + gys * r->threshold * g;
            }
            for (sign = 0; sign < 2; sign++)
                se_cv_path(cv, tx, sign ? ty2 : ty1, 65, SE_C_RULE, 1.0 * s, SE_DASHED, s, "se-threshold");
        }
    }

    /* Traces. */
    if (d->baseline != NULL) {
        size_t nb = d->baseline_n < d->n ? d->baseline_n : d->n;
        st = se_draw_trace(L, cv, d->baseline, d->baseline_n, NULL, L->fylab, L->fy1, L->ymax, SE_C_BASE,
                           1.1 * s, "se-baseline", err);
        if (st != SE_OK)
            return st;
        st = se_draw_trace(L, cv, d->trace, nb, d->baseline, L->gy0, L->gy1, L->gmax, SE_C_INK, 1.0 * s,
                           "se-difference", err);
        if (st != SE_OK)
            return st;
        se_cv_line(cv, L->fx0, 0.5 * (L->gy0 + L->gy1), L->fx1, 0.5 * (L->gy0 + L->gy1), SE_C_BASE, 0.8 * s,
                   SE_SOLID, s, NULL);
        {
            double gstep = se_nice_step(2.0 * L->gmax, 4), gv;
            const double gys = 0.5 * (L->gy1 - L->gy0) / L->gmax, gmid = 0.5 * (L->gy0 + L->gy1);
            int gd = se_fmt_decimals(gstep);
            for (gv = -floor(L->gmax / gstep) * gstep; gv <= L->gmax * (1.0 + 1e-9); gv += gstep) {
                y = gmid - gys * gv;
                se_cv_line(cv, L->fx0 - 4.0 * s, y, L->fx0, y, SE_C_RULE, 1.0 * s, SE_SOLID, s, NULL);
                snprintf(buf, sizeof buf, "%.*f", gd, fabs(gv) < 0.5 * gstep ? 0.0 : gv);
                se_cv_text(cv, L->fx0 - 6.0 * s, y + 3.5 * s, buf, 9.0 * s, 0, 2, SE_C_INK, "se-ytick");
            }
        }
        snprintf(buf, sizeof buf, "difference: %s - %s", d->trace_label ? d->trace_label : "now",
                 d->baseline_label ? d->baseline_label : "baseline");
        se_cv_text(cv, L->fx0 + 6.0 * s, L->gy0 + 12.0 * s, buf, 9.0 * s, 0, 0, SE_C_MUTED, NULL);
        se_cv_rect(cv, L->fx0, L->gy0, L->fx1 - L->fx0, L->gy1 - L->gy0, SE_NONE, SE_C_RULE, 1.0 * s, NULL);
    }
    st = se_draw_trace(L, cv, d->trace, d->n, NULL, L->fylab, L->fy1, L->ymax, SE_C_INK, 1.2 * s, "se-trace",
                       err);
    if (st != SE_OK)
        return st;
    se_cv_rect(cv, L->fx0, L->fy0, L->fx1 - L->fx0, L->fy1 - L->fy0, SE_NONE, SE_C_RULE, 1.0 * s, NULL);
    if (L->rows > 0)
        se_cv_line(cv, L->fx0, L->fylab, L->fx1, L->fylab, SE_C_GRID, 0.8 * s, SE_SOLID, s, NULL);

    /* Events: leader, label (in rows above the trace), marker on the trace. */
    for (k = 0; k < SE_MAX_LABEL_ROWS; k++)
        right[k] = -1e300;
    for (i = 0; i < r->n_events; i++) {
        const se_event *ev = &r->events[i];
        char lab[128], id[64], attrs[160];
        double w, left, ly, pos, val, my;
        int best = 0;
        if (!(ev->distance_m <= L->dmax_m) || ev->distance_m < 0.0)
            continue;
        se_event_label(L, i, lab, sizeof lab);
        w = se_cv_text_width(cv, lab, fs, 0) + 6.0 * s;
        x = se_xpos(L, ev->distance_m);
        left = fmax(L->fx0, fmin(x - w / 2.0, L->fx1 - w));
        for (k = 0; k < SE_MAX_LABEL_ROWS; k++)
            if (right[k] + 3.0 * s <= left)
                break;
        if (k == SE_MAX_LABEL_ROWS) {
            for (k = 1; k < SE_MAX_LABEL_ROWS; k++)
                if (right[k] < right[best])
                    best = k;
            k = best;
            left = fmin(right[k] + 3.0 * s, L->fx1 - w);
        }
        right[k] = fmax(right[k] + 3.0 * s + w, left + w);
        ly = L->fylab - 6.0 * s - (double)k * 15.0 * s; /* label baseline; row 0 nearest the trace */
        /* on the trace where the echo is; a skin-corrected echo is drawn at its reported
         * distance, at the height of the lossless matched filter's (later) peak it came from */
        pos = (ev->delay_s + (ev->skin_corrected ? ev->skin_shift_s : 0.0) + L->t0) * d->rate_hz;
        val = se_sample_at(d->trace, d->n, pos) * se_gain(L, ev->distance_m);
        my = fmin(L->fy1 - 5.0 * s, fmax(L->fylab + 5.0 * s, ymid - ys * val));
        lx = fmin(fmax(x, left + 2.0 * s), left + w - 2.0 * s);
        {
            /* Leader: in the label zone solid (primary) or dashed (multiple); across the trace a
             * light dotted guide so it never hides the trace. */
            double xs[3], yv[3];
            xs[0] = lx;
            yv[0] = ly + 3.0 * s;
            xs[1] = x;
            yv[1] = ly + 3.0 * s + fmax(0.0, fmin(6.0 * s, L->fylab - ly - 3.0 * s));
            xs[2] = x;
            yv[2] = L->fylab;
            se_cv_path(cv, xs, yv, 3, ev->multiple ? SE_C_MUTED : SE_C_ACCENT, 0.9 * s,
                       ev->multiple ? SE_DASHED : SE_SOLID, s, ev->multiple ? "se-leader-multiple" : "se-leader");
            se_cv_line(cv, x, L->fylab, x, my, SE_C_RULE, 0.7 * s, SE_DOTTED, s, "se-guide");
        }
        se_cv_text(cv, left + 3.0 * s, ly, lab, fs, 0, 0, ev->multiple ? SE_C_MUTED : SE_C_INK,
                   ev->multiple ? "se-label se-multiple" : "se-label");
        snprintf(id, sizeof id, "%s-event-%zu", cv->pfx, i + 1);
        if (cv->svg != NULL) {
            se_sb tmp = {NULL, 0, 0, 0};
            se_strbuf_add(&tmp, "class=\"se-event", 15);
            se_strbuf_add(&tmp, ev->multiple ? " se-multiple" : " se-primary", ev->multiple ? 12 : 11);
            if (ev->low_confidence)
                se_strbuf_add(&tmp, " se-low-confidence", 18);
            se_strbuf_add(&tmp, "\" data-distance-m=\"", 19);
            se_strbuf_printf(&tmp, "%.6f", ev->distance_m);
            se_strbuf_printf(&tmp, "\" data-class=\"%s\"", se_event_class(r, ev));
            if (tmp.failed || tmp.len >= sizeof attrs) {
                free(tmp.p);
                return se_fail(err, SE_ERR_NOMEM, "plot: cannot format the marker of event %zu", i + 1);
            }
            memcpy(attrs, tmp.p, tmp.len + 1);
            free(tmp.p);
            /* %.6f above is locale-bound: put the point back if a locale changed it. */
            {
                char *q = strstr(attrs, "data-distance-m=\"");
                if (q != NULL)
                    for (q += 17; *q && *q != '"'; q++)
                        if (!isdigit((unsigned char)*q) && *q != '-')
                            *q = '.';
            }
        } else {
            attrs[0] = '\0';
        }
        if (ev->multiple)
            se_cv_marker(cv, SE_CIRCLE, x, my, 4.0 * s, SE_NONE, SE_C_MUTED, 1.4 * s, id, attrs);
        else if (ev->low_confidence)
            se_cv_marker(cv, SE_DIAMOND, x, my, 4.4 * s, SE_NONE, SE_C_ACCENT, 1.6 * s, id, attrs);
        else
            se_cv_marker(cv, SE_DIAMOND, x, my, 4.4 * s, SE_C_ACCENT, 0xffffff, 0.8 * s, id, attrs);
    }

    /* Schematic of the line: segments as bars, expected features as triangles. */
    y = L->gy1 + 40.0 * s;
    if (d->line != NULL && d->line->prepared) {
        const se_line *ln = d->line;
        for (i = 0; i < ln->n_segments; i++) {
            double a = ln->segments[i].start_m;
            double b = i + 1 < ln->n_segments ? ln->segments[i + 1].start_m : ln->length_m;
            double xa = se_xpos(L, fmin(a, L->dmax_m)), xb = se_xpos(L, fmin(b, L->dmax_m));
            const char *nm = ln->segments[i].name != NULL ? ln->segments[i].name : "";
            if (a >= L->dmax_m)
                break;
            se_cv_rect(cv, xa, y + 14.0 * s, xb - xa, 7.0 * s, (i % 2) ? SE_C_SEG_B : SE_C_SEG_A, SE_C_MUTED,
                       0.7 * s, "se-segment");
            if (se_cv_text_width(cv, nm, 9.0 * s, 0) < xb - xa - 4.0 * s)
                se_cv_text(cv, 0.5 * (xa + xb), y + 32.0 * s, nm, 9.0 * s, 0, 1, SE_C_INK, "se-segment-name");
        }
        if (ln->length_m <= L->dmax_m) {
            x = se_xpos(L, ln->length_m);
            se_cv_line(cv, x, y + 10.0 * s, x, y + 25.0 * s, SE_C_INK, 2.0 * s, SE_SOLID, s, "se-end");
        }
    }
    if (L->nex > 0) {
        double last_right = -1e300;
        for (i = 0; i < L->nex; i++) {
            const se_expected_event *e = &L->ex[i];
            int found = 0;
            size_t j;
            char idx[64];
            if (!(e->distance_m <= L->dmax_m))
                continue;
            if (L->match != NULL)
                for (j = 0; j < r->n_events; j++)
                    if (L->match[j] == (int)i)
                        found = 1;
            x = se_xpos(L, e->distance_m);
            snprintf(idx, sizeof idx, "%s-expected-%zu", cv->pfx, i + 1);
            se_cv_marker(cv, SE_TRIANGLE, x, y + 8.5 * s, 4.0 * s, found ? (long)SE_C_ACCENT : SE_NONE,
                         found ? 0xffffff : SE_C_INK, found ? 0.6 * s : 1.1 * s, idx,
                         found ? "class=\"se-expected se-found\"" : "class=\"se-expected\"");
            if (e->name != NULL && e->type != SE_EVENT_JUNCTION) {
                double w = se_cv_text_width(cv, e->name, 8.5 * s, 0);
                double left = fmin(fmax(x - w / 2.0, L->fx0), L->W - w - 2.0 * s);
                if (left > last_right + 4.0 * s) {
                    se_cv_text(cv, left, y + 1.0 * s, e->name, 8.5 * s, 0, 0, SE_C_MUTED, "se-expected-name");
                    last_right = left + w;
                }
            }
        }
        se_cv_text(cv, L->fx0 - 6.0 * s, y + 21.0 * s, "line", 9.0 * s, 0, 2, SE_C_MUTED, NULL);
    }

    /* Legend. */
    {
        double ly = L->H - 10.0 * s, lx0 = L->fx0, sw = 16.0 * s;
        const char *txt;
        se_cv_line(cv, lx0, ly - 3.5 * s, lx0 + sw, ly - 3.5 * s, SE_C_INK, 1.4 * s, SE_SOLID, s, NULL);
        txt = d->baseline != NULL ? (d->trace_label ? d->trace_label : "now") : "matched-filter output";
        se_cv_text(cv, lx0 + sw + 4.0 * s, ly, txt, 9.0 * s, 0, 0, SE_C_INK, NULL);
        lx0 += sw + 12.0 * s + se_cv_text_width(cv, txt, 9.0 * s, 0);
        if (d->baseline != NULL) {
            txt = d->baseline_label ? d->baseline_label : "baseline";
            se_cv_line(cv, lx0, ly - 3.5 * s, lx0 + sw, ly - 3.5 * s, SE_C_BASE, 1.4 * s, SE_SOLID, s, NULL);
            se_cv_text(cv, lx0 + sw + 4.0 * s, ly, txt, 9.0 * s, 0, 0, SE_C_INK, NULL);
            lx0 += sw + 12.0 * s + se_cv_text_width(cv, txt, 9.0 * s, 0);
        }
        se_cv_line(cv, lx0, ly - 3.5 * s, lx0 + sw, ly - 3.5 * s, SE_C_RULE, 1.0 * s, SE_DASHED, s, NULL);
        se_cv_text(cv, lx0 + sw + 4.0 * s, ly, "\xc2\xb1 threshold", 9.0 * s, 0, 0, SE_C_INK, NULL);
        lx0 += sw + 12.0 * s + se_cv_text_width(cv, "\xc2\xb1 threshold", 9.0 * s, 0);
        se_cv_rect(cv, lx0, ly - 8.0 * s, 12.0 * s, 9.0 * s, SE_C_SHADE, SE_C_RULE, 0.6 * s, NULL);
        se_cv_text(cv, lx0 + 16.0 * s, ly, "dead zone", 9.0 * s, 0, 0, SE_C_INK, NULL);
        lx0 += 26.0 * s + se_cv_text_width(cv, "dead zone", 9.0 * s, 0);
        se_cv_marker(cv, SE_DIAMOND, lx0 + 5.0 * s, ly - 3.5 * s, 4.0 * s, SE_C_ACCENT, 0xffffff, 0.8 * s, NULL,
                     NULL);
        se_cv_text(cv, lx0 + 13.0 * s, ly, "event", 9.0 * s, 0, 0, SE_C_INK, NULL);
        lx0 += 22.0 * s + se_cv_text_width(cv, "event", 9.0 * s, 0);
        se_cv_marker(cv, SE_DIAMOND, lx0 + 5.0 * s, ly - 3.5 * s, 4.0 * s, SE_NONE, SE_C_ACCENT, 1.4 * s, NULL,
                     NULL);
        se_cv_text(cv, lx0 + 13.0 * s, ly, "low confidence (?)", 9.0 * s, 0, 0, SE_C_INK, NULL);
        lx0 += 22.0 * s + se_cv_text_width(cv, "low confidence (?)", 9.0 * s, 0);
        se_cv_marker(cv, SE_CIRCLE, lx0 + 5.0 * s, ly - 3.5 * s, 3.6 * s, SE_NONE, SE_C_MUTED, 1.3 * s, NULL,
                     NULL);
        se_cv_text(cv, lx0 + 13.0 * s, ly, "multiple (not a fault)", 9.0 * s, 0, 0, SE_C_INK, NULL);
        lx0 += 22.0 * s + se_cv_text_width(cv, "multiple (not a fault)", 9.0 * s, 0);
        if (L->nex > 0) {
            se_cv_marker(cv, SE_TRIANGLE, lx0 + 5.0 * s, ly - 3.5 * s, 4.0 * s, SE_NONE, SE_C_INK, 1.1 * s, NULL,
                         NULL);
            se_cv_marker(cv, SE_TRIANGLE, lx0 + 15.0 * s, ly - 3.5 * s, 4.0 * s, SE_C_ACCENT, 0xffffff, 0.6 * s,
                         NULL, NULL);
            se_cv_text(cv, lx0 + 23.0 * s, ly, "expected / found", 9.0 * s, 0, 0, SE_C_INK, NULL);
        }
    }
    if (cv->svg != NULL && cv->svg->failed)
        return se_fail(err, SE_ERR_NOMEM, "plot: out of memory while writing the SVG");
    if (cv->cr != NULL && cairo_status(cv->cr) != CAIRO_STATUS_SUCCESS)
        return se_fail(err, SE_ERR_IO, "plot: cairo: %s", cairo_status_to_string(cairo_status(cv->cr)));
    return SE_OK;
}

/* ---- public ------------------------------------------------------------------------------ */

void se_plot_data_init(se_plot_data *data)
{
    if (data == NULL)
        return;
    memset(data, 0, sizeof *data);
    data->t0_s = NAN;
    data->speed_m_s = NAN;
    data->gain_db_per_m = 0.0;
    data->max_distance_m = NAN;
    data->units = SE_PLOT_METRES;
}

se_status se_plot_format_from_path(const char *path, se_plot_format *fmt, se_error *err)
{
    const char *dot;
    char ext[8];
    size_t i;
    if (path == NULL || fmt == NULL)
        return se_fail(err, SE_ERR_ARG, "plot: no path");
    dot = strrchr(path, '.');
    if (dot == NULL || strlen(dot + 1) >= sizeof ext || strchr(dot, '/') != NULL)
        return se_fail(err, SE_ERR_ARG, "%s: plot file name needs the extension .png, .svg or .pdf", path);
    for (i = 0; dot[1 + i]; i++)
        ext[i] = (char)tolower((unsigned char)dot[1 + i]);
    ext[i] = '\0';
    if (strcmp(ext, "png") == 0)
        *fmt = SE_PLOT_PNG;
    else if (strcmp(ext, "svg") == 0)
        *fmt = SE_PLOT_SVG;
    else if (strcmp(ext, "pdf") == 0)
        *fmt = SE_PLOT_PDF;
    else
        return se_fail(err, SE_ERR_ARG, "%s: plot format '.%s' unknown: use .png, .svg or .pdf", path, ext);
    return SE_OK;
}

/* Build the layout's expected events and matches (computed ones are malloc'd into *own_ex / *own_match). */
static se_status se_plot_prepare(se_lay *L, const se_plot_data *d, se_expected_event **own_ex, int **own_match,
                                 se_error *err)
{
    *own_ex = NULL;
    *own_match = NULL;
    L->ex = d->expected;
    L->nex = d->n_expected;
    L->match = d->match;
    if (L->ex == NULL && d->line != NULL && d->line->prepared) {
        size_t n = 0;
        se_status st = se_line_expected_events(d->line, own_ex, &n, err);
        if (st != SE_OK)
            return st;
        L->ex = *own_ex;
        L->nex = n;
    }
    if (L->match == NULL && L->nex > 0 && d->result->n_events > 0 && d->result->expected_found != NULL &&
        d->result->n_expected == L->nex) {
        size_t i;
        *own_match = se_calloc(d->result->n_events, sizeof **own_match, "plot matches", err);
        if (*own_match == NULL)
            return SE_ERR_NOMEM;
        for (i = 0; i < d->result->n_events; i++) {
            int e = d->result->events[i].expected;
            (*own_match)[i] = (e >= 0 && (size_t)e < L->nex) ? e : -1;
        }
        L->match = *own_match;
    }
    return SE_OK;
}

static cairo_t *se_measure_create(void)
{
    cairo_surface_t *s = cairo_image_surface_create(CAIRO_FORMAT_A8, 4, 4);
    cairo_t *cr = cairo_create(s);
    cairo_surface_destroy(s); /* the context keeps a reference */
    if (cairo_status(cr) != CAIRO_STATUS_SUCCESS) {
        cairo_destroy(cr);
        return NULL;
    }
    return cr;
}

/* Draw into cv (cairo or SVG) with a fresh layout. */
static se_status se_plot_render(const se_plot_data *d, se_cv *cv, double W, double H, se_error *err)
{
    se_lay L;
    se_expected_event *own_ex = NULL;
    int *own_match = NULL;
    se_status st;
    memset(&L, 0, sizeof L);
    st = se_plot_prepare(&L, d, &own_ex, &own_match, err);
    if (st == SE_OK) {
        const se_expected_event *ex = L.ex;
        size_t nex = L.nex;
        const int *match = L.match;
        st = se_layout(&L, d, cv, W, H, err);
        L.ex = ex;
        L.nex = nex;
        L.match = match;
    }
    if (st == SE_OK)
        st = se_draw(&L, cv, err);
    free(own_ex);
    free(own_match);
    return st;
}

char *se_plot_svg_string(const se_plot_data *data, double width, double height, const char *id_prefix,
                         unsigned flags, se_error *err)
{
    se_sb sb = {NULL, 0, 0, 0};
    se_cv cv;
    const char *p;
    se_status st;
    if (se_check_data(data, width, height, err) != SE_OK)
        return NULL;
    if (id_prefix == NULL)
        id_prefix = "se";
    for (p = id_prefix; *p; p++)
        if (!isalnum((unsigned char)*p) && *p != '-' && *p != '_') {
            se_fail(err, SE_ERR_ARG, "plot: id prefix '%s' may hold only letters, digits, '-' and '_'", id_prefix);
            return NULL;
        }
    memset(&cv, 0, sizeof cv);
    cv.svg = &sb;
    cv.pfx = id_prefix;
    cv.measure = se_measure_create();
    if (cv.measure == NULL) {
        se_fail(err, SE_ERR_NOMEM, "plot: cannot create a cairo context to measure text");
        return NULL;
    }
    if (!(flags & SE_PLOT_SVG_INLINE))
        se_strbuf_printf(&sb, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
    se_strbuf_printf(&sb, "<svg%s id=\"%s-plot\" width=\"%ld\" height=\"%ld\" viewBox=\"0 0 %ld %ld\" "
                 "font-family=\"sans-serif\" role=\"img\">\n",
                 (flags & SE_PLOT_SVG_INLINE) ? "" : " xmlns=\"http://www.w3.org/2000/svg\"", id_prefix,
                 lround(width), lround(height), lround(width), lround(height));
    se_strbuf_add(&sb, "<title>", 7);
    se_strbuf_xml_escape(&sb, data->title != NULL ? data->title : "reflectogram");
    se_strbuf_add(&sb, "</title>\n", 9);
    se_strbuf_printf(&sb, "<rect width=\"%ld\" height=\"%ld\" fill=\"#ffffff\"/>\n", lround(width), lround(height));
    st = se_plot_render(data, &cv, width, height, err);
    cairo_destroy(cv.measure);
    se_strbuf_add(&sb, "</svg>\n", 7);
    if (st == SE_OK && sb.failed)
        st = se_fail(err, SE_ERR_NOMEM, "plot: out of memory while writing the SVG");
    if (st != SE_OK) {
        free(sb.p);
        return NULL;
    }
    return sb.p;
}

static cairo_status_t se_cairo_to_file(void *closure, const unsigned char *data, unsigned int length)
{
    FILE *fp = closure;
    return fwrite(data, 1, length, fp) == length ? CAIRO_STATUS_SUCCESS : CAIRO_STATUS_WRITE_ERROR;
}

se_status se_plot_write(const se_plot_data *data, const char *path, se_plot_format fmt, double width,
                        double height, se_error *err)
{
    se_output *out;
    FILE *fp;
    se_status st;
    if (path == NULL)
        return se_fail(err, SE_ERR_ARG, "plot: no output path");
    if (fmt == SE_PLOT_AUTO && (st = se_plot_format_from_path(path, &fmt, err)) != SE_OK)
        return st;
    if (fmt != SE_PLOT_PNG && fmt != SE_PLOT_SVG && fmt != SE_PLOT_PDF)
        return se_fail(err, SE_ERR_ARG, "%s: unknown plot format %d", path, (int)fmt);
    if ((st = se_check_data(data, width, height, err)) != SE_OK)
        return st;
    if (fmt == SE_PLOT_SVG) {
        char *svg = se_plot_svg_string(data, width, height, NULL, 0, err);
        size_t len;
        if (svg == NULL)
            return err != NULL ? err->code : SE_ERR_NOMEM;
        out = se_output_open(path, err);
        if (out == NULL) {
            free(svg);
            return err != NULL ? err->code : SE_ERR_IO;
        }
        len = strlen(svg);
        if (fwrite(svg, 1, len, se_output_stream(out)) != len) {
            free(svg);
            se_output_abort(out);
            return se_fail(err, SE_ERR_IO, "%s: cannot write the plot", path);
        }
        free(svg);
        return se_output_commit(out, err);
    }
    out = se_output_open(path, err);
    if (out == NULL)
        return err != NULL ? err->code : SE_ERR_IO;
    fp = se_output_stream(out);
    {
        cairo_surface_t *surf;
        se_cv cv;
        cairo_status_t cs;
        const int iw = (int)lround(width), ih = (int)lround(height);
        memset(&cv, 0, sizeof cv);
        cv.pfx = "se";
        if (fmt == SE_PLOT_PNG)
            surf = cairo_image_surface_create(CAIRO_FORMAT_RGB24, iw, ih);
        else
            surf = cairo_pdf_surface_create_for_stream(se_cairo_to_file, fp, (double)iw, (double)ih);
        if (cairo_surface_status(surf) != CAIRO_STATUS_SUCCESS) {
            cs = cairo_surface_status(surf);
            cairo_surface_destroy(surf);
            se_output_abort(out);
            return se_fail(err, SE_ERR_NOMEM, "%s: cairo surface: %s", path, cairo_status_to_string(cs));
        }
        /* no time of writing in the file: an empty date makes cairo leave /CreationDate out, so
         * the same data gives the same bytes (as the SVG, PNG and HTML outputs) */
        if (fmt != SE_PLOT_PNG)
            cairo_pdf_surface_set_metadata(surf, CAIRO_PDF_METADATA_CREATE_DATE, "");
        cv.cr = cairo_create(surf);
        cv.measure = se_measure_create();
        if (cv.measure == NULL || cairo_status(cv.cr) != CAIRO_STATUS_SUCCESS) {
            cairo_destroy(cv.measure);
            cairo_destroy(cv.cr);
            cairo_surface_destroy(surf);
            se_output_abort(out);
            return se_fail(err, SE_ERR_NOMEM, "%s: cannot create a cairo context", path);
        }
        cairo_set_source_rgb(cv.cr, 1.0, 1.0, 1.0);
        cairo_paint(cv.cr);
        st = se_plot_render(data, &cv, (double)iw, (double)ih, err);
        cairo_destroy(cv.cr);
        cairo_destroy(cv.measure);
        if (st == SE_OK) {
            if (fmt == SE_PLOT_PNG)
                cs = cairo_surface_write_to_png_stream(surf, se_cairo_to_file, fp);
            else {
                cairo_surface_finish(surf);
                cs = cairo_surface_status(surf);
            }
            if (cs != CAIRO_STATUS_SUCCESS)
                st = se_fail(err, SE_ERR_IO, "%s: cairo: %s", path, cairo_status_to_string(cs));
        }
        cairo_surface_destroy(surf);
    }
    if (st != SE_OK) {
        se_output_abort(out);
        return st;
    }
    return se_output_commit(out, err);
}
