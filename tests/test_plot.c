/* Plot files: PNG read back with cairo (size, not blank, the accent marker where the SVG puts it),
 * SVG parsed for its size and for each event marker's position mapped back through the distance
 * tick labels, PDF header, trailer and page box; feet, compare plots, escaping, determinism, errors. */
#include <cairo.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/line.h"
#include "strandecho/locate.h"
#include "strandecho/plot.h"
#include "reflectogram_fixture.h"
#include "testutil.h"

/* LeakSanitizer hook, read only by -DSE_SANITIZE builds: fontconfig (loaded by cairo's toy text API)
 * keeps its configuration cache for the life of the process by design; that is not our leak. */
const char *__lsan_default_suppressions(void);
const char *__lsan_default_suppressions(void)
{
    return "leak:libfontconfig.so\n";
}


static char *read_file(const char *path, size_t *len)
{
    FILE *fp = fopen(path, "rb");
    char *buf;
    long n;
    if (fp == NULL)
        return NULL;
    fseek(fp, 0, SEEK_END);
    n = ftell(fp);
    fseek(fp, 0, SEEK_SET);
    buf = malloc((size_t)n + 1);
    if (buf != NULL && fread(buf, 1, (size_t)n, fp) != (size_t)n) {
        free(buf);
        buf = NULL;
    }
    fclose(fp);
    if (buf != NULL) {
        buf[n] = '\0';
        *len = (size_t)n;
    }
    return buf;
}

/* needle within buf[size: len], which may hold NUL bytes (PDF streams). */
static int contains(const char *buf, size_t len, const char *needle)
{
    size_t n = strlen(needle), i;
    for (i = 0; i + n <= len; i++)
        if (memcmp(buf + i, needle, n) == 0)
            return 1;
    return 0;
}

/* Attribute value of name="..." inside the element starting at tag; NAN if absent. */
static double attr(const char *tag, const char *name)
{
    char key[64];
    const char *end = strchr(tag, '>'), *p;
    snprintf(key, sizeof key, " %s=\"", name);
    p = strstr(tag, key);
    if (p == NULL || (end != NULL && p > end))
        return NAN;
    return strtod(p + strlen(key), NULL);
}

/* The distance axis mapping read from the SVG's own tick labels: least squares over every tick
 * (x position against the printed value). Returns the number of ticks. */
static int tick_mapping(const char *svg, double *a, double *b)
{
    const char *p = svg;
    double sx = 0, sv = 0, sxx = 0, sxv = 0;
    int n = 0;
    while ((p = strstr(p, "<text class=\"se-xtick\"")) != NULL) {
        double x = attr(p, "x");
        const char *gt = strchr(p, '>');
        double v = strtod(gt + 1, NULL);
        sx += x;
        sv += v;
        sxx += x * x;
        sxv += x * v;
        n++;
        p = gt;
    }
    if (n >= 2) {
        *a = (n * sxv - sx * sv) / (n * sxx - sx * sx); /* value per pixel */
        *b = (sv - *a * sx) / n;
    }
    return n;
}

/* Check every event marker through the tick mapping; unit factor k (display units per metre). */
static void check_markers(const char *svg, const fixture *f, double k, const char *pfx)
{
    double a = NAN, b = NAN;
    size_t i;
    CHECK(tick_mapping(svg, &a, &b) >= 4);
    for (i = 0; i < f->res.n_events; i++) {
        char id[64];
        const char *p, *start;
        double x;
        snprintf(id, sizeof id, "id=\"%s-event-%zu\"", pfx, i + 1);
        p = strstr(svg, id);
        if (!CHECK(p != NULL))
            continue;
        for (start = p; start > svg && *start != '<'; start--)
            ;
        x = attr(start, "cx");
        if (isnan(x))
            x = attr(start, "data-x");
        /* within one pixel: |distance error| <= one pixel's worth of distance */
        CHECK_CLOSE(a * x + b, f->ev[i].distance_m * k, fabs(a) * 1.0, "marker x maps to the event distance");
        CHECK_CLOSE(attr(start, "data-distance-m"), f->ev[i].distance_m, 1e-6, "marker data-distance-m");
        CHECK((f->ev[i].multiple != 0) == (strstr(start, "se-multiple") != NULL &&
                                          strstr(start, "se-multiple") < strchr(start, '>')));
    }
}

int main(void)
{
    fixture f;
    se_plot_data d;
    se_error err;
    se_line *line = make_line();
    char path[512], *svg, *svg2, *buf;
    size_t len;
    double svg_x1 = NAN, svg_y1 = NAN;
    se_plot_format fmt;

    make_fixture(&f);
    CHECK(line != NULL);
    se_plot_data_init(&d);
    d.trace = f.trace;
    d.n = NS;
    d.rate_hz = RATE;
    d.result = &f.res;
    d.line = line;
    d.title = "Leg <A> & \"test\"";

    /* Formats from names. */
    CHECK(se_plot_format_from_path("a/b.PNG", &fmt, &err) == SE_OK && fmt == SE_PLOT_PNG);
    CHECK(se_plot_format_from_path("x.svg", &fmt, &err) == SE_OK && fmt == SE_PLOT_SVG);
    CHECK(se_plot_format_from_path("x.pdf", &fmt, &err) == SE_OK && fmt == SE_PLOT_PDF);
    CHECK(se_plot_format_from_path("x.jpeg", &fmt, &err) == SE_ERR_ARG && strstr(err.message, "x.jpeg"));
    CHECK(se_plot_format_from_path("dir.v/x", &fmt, &err) == SE_ERR_ARG);

    /* SVG: size, markers through the axis mapping, escaping, determinism. */
    svg = se_plot_svg_string(&d, 1000, 600, NULL, 0, &err);
    CHECK(svg != NULL);
    if (svg != NULL) {
        const char *root = strstr(svg, "<svg");
        CHECK(strncmp(svg, "<?xml", 5) == 0);
        CHECK(root != NULL && attr(root, "width") == 1000.0 && attr(root, "height") == 600.0);
        check_markers(svg, &f, 1.0, "se");
        CHECK(strstr(svg, "Leg &lt;A&gt; &amp; &quot;test&quot;") != NULL);
        CHECK(strstr(svg, "<A>") == NULL);
        CHECK(strstr(svg, "class=\"se-threshold\"") != NULL);
        CHECK(strstr(svg, "class=\"se-deadzone\"") != NULL);
        CHECK(strstr(svg, "class=\"se-trace\"") != NULL);
        CHECK(strstr(svg, "se-expected") != NULL);
        CHECK(strstr(svg, "shackle S1") != NULL);
        CHECK(strstr(svg, "chain top") != NULL);
        CHECK(strstr(svg, "se-low-confidence") != NULL);
        CHECK(strstr(svg, "2 multiple 500.0 m") != NULL); /* label: number, class, distance */
        CHECK(strstr(svg, "1 free-like 250.0 m") != NULL);
        {
            const char *e1 = strstr(svg, "id=\"se-event-1\""), *p;
            for (p = e1; p > svg && *p != '<'; p--)
                ;
            svg_x1 = isnan(attr(p, "cx")) ? attr(p, "data-x") : attr(p, "cx");
            svg_y1 = isnan(attr(p, "cy")) ? attr(p, "data-y") : attr(p, "cy");
        }
        svg2 = se_plot_svg_string(&d, 1000, 600, NULL, 0, &err);
        CHECK(svg2 != NULL && strcmp(svg, svg2) == 0);
        free(svg2);
        svg2 = se_plot_svg_string(&d, 1000, 600, "leg2", SE_PLOT_SVG_INLINE, &err);
        CHECK(svg2 != NULL && strstr(svg2, "http") == NULL && strstr(svg2, "id=\"leg2-event-3\"") != NULL &&
              strncmp(svg2, "<svg", 4) == 0);
        free(svg2);
        CHECK(se_plot_svg_string(&d, 1000, 600, "bad\"id", 0, &err) == NULL && err.code == SE_ERR_ARG);
    }
    free(svg);

    /* Feet: the ticks are in feet and the markers still land on the events. */
    d.units = SE_PLOT_FEET;
    svg = se_plot_svg_string(&d, 800, 500, "ft", 0, &err);
    CHECK(svg != NULL);
    if (svg != NULL) {
        check_markers(svg, &f, 1.0 / 0.3048, "ft"); /* international foot = 0.3048 m exactly (NIST SP 811) */
        CHECK(strstr(svg, "distance from the sensor (ft)") != NULL);
    }
    free(svg);
    d.units = SE_PLOT_METRES;

    /* Files through se_output. */
    CHECK(se_plot_write(&d, se_test_binary_path(path, sizeof path, "tests/plot-sample.svg"), SE_PLOT_AUTO, 1000,
                        600, &err) == SE_OK);
    buf = read_file(path, &len);
    CHECK(buf != NULL && strstr(buf, "</svg>") != NULL);
    free(buf);

    CHECK(se_plot_write(&d, se_test_binary_path(path, sizeof path, "tests/plot-sample.png"), SE_PLOT_AUTO, 1000,
                        600, &err) == SE_OK);
    {
        cairo_surface_t *img = cairo_image_surface_create_from_png(path);
        CHECK(cairo_surface_status(img) == CAIRO_STATUS_SUCCESS);
        if (cairo_surface_status(img) == CAIRO_STATUS_SUCCESS) {
            int w = cairo_image_surface_get_width(img), h = cairo_image_surface_get_height(img);
            int stride = cairo_image_surface_get_stride(img), x, y, dark = 0, accent = 0;
            const unsigned char *px;
            cairo_surface_flush(img);
            px = cairo_image_surface_get_data(img);
            CHECK(w == 1000 && h == 600);
            for (y = 0; y < h; y++)
                for (x = 0; x < w; x++) {
                    unsigned v = *(const unsigned *)(const void *)(px + (size_t)y * (size_t)stride + 4 * (size_t)x);
                    unsigned r = (v >> 16) & 255, g = (v >> 8) & 255, b = v & 255;
                    if (r + g + b < 300)
                        dark++;
                }
            /* not blank: the trace, axes and text darken well over 0.5 % of the pixels */
            CHECK(dark > w * h / 200);
            CHECK(dark < w * h / 2);
            /* the PNG draws event 1's filled accent marker where the SVG puts it (same layout) */
            for (y = (int)svg_y1 - 3; y <= (int)svg_y1 + 3; y++)
                for (x = (int)svg_x1 - 2; x <= (int)svg_x1 + 2; x++) {
                    unsigned v;
                    if (x < 0 || y < 0 || x >= w || y >= h)
                        continue;
                    v = *(const unsigned *)(const void *)(px + (size_t)y * (size_t)stride + 4 * (size_t)x);
                    if ((v & 255) > ((v >> 16) & 255) + 60)
                        accent++;
                }
            CHECK(accent >= 6);
        }
        cairo_surface_destroy(img);
    }

    CHECK(se_plot_write(&d, se_test_binary_path(path, sizeof path, "tests/plot-sample.pdf"), SE_PLOT_AUTO, 595,
                        420, &err) == SE_OK);
    buf = read_file(path, &len);
    CHECK(buf != NULL && len > 1000);
    if (buf != NULL) {
        size_t e = len;
        while (e > 0 && (buf[e - 1] == '\n' || buf[e - 1] == '\r'))
            e--;
        CHECK(strncmp(buf, "%PDF-", 5) == 0);
        CHECK(e >= 5 && strncmp(buf + e - 5, "%%EOF", 5) == 0);
        CHECK(contains(buf, len, "/MediaBox [ 0 0 595 420 ]"));
    }
    free(buf);

    /* Compare plot: baseline and a difference panel; gain stated. */
    {
        double *base = calloc(NS, sizeof *base);
        size_t i;
        for (i = 0; i < NS; i++)
            base[i] = f.trace[i] - 0.09 * pulse((double)i / RATE - T0 - 2.0 * 500.0 / SPEED);
        d.baseline = base;
        d.baseline_n = NS;
        d.baseline_label = "2024 survey";
        d.gain_db_per_m = 0.01;
        svg = se_plot_svg_string(&d, 1000, 700, "cmp", 0, &err);
        CHECK(svg != NULL && strstr(svg, "class=\"se-baseline\"") && strstr(svg, "class=\"se-difference\"") &&
              strstr(svg, "2024 survey") && strstr(svg, "+0.01 dB/m"));
        if (svg != NULL)
            check_markers(svg, &f, 1.0, "cmp");
        free(svg);
        CHECK(se_plot_write(&d, se_test_binary_path(path, sizeof path, "tests/plot-compare.png"), SE_PLOT_AUTO,
                            1000, 700, &err) == SE_OK);
        d.baseline = NULL;
        d.baseline_n = 0;
        d.gain_db_per_m = 0.0;
        free(base);
    }

    /* Errors. */
    CHECK(se_plot_write(&d, "/nonexistent-folder/x.png", SE_PLOT_AUTO, 800, 500, &err) == SE_ERR_IO);
    CHECK(se_plot_write(&d, "x.gif", SE_PLOT_AUTO, 800, 500, &err) == SE_ERR_ARG);
    CHECK(se_plot_svg_string(&d, 100, 500, NULL, 0, &err) == NULL && err.code == SE_ERR_ARG);
    d.trace = NULL;
    CHECK(se_plot_svg_string(&d, 800, 500, NULL, 0, &err) == NULL && err.code == SE_ERR_ARG);
    d.trace = f.trace;
    d.rate_hz = 0.0;
    CHECK(se_plot_svg_string(&d, 800, 500, NULL, 0, &err) == NULL && err.code == SE_ERR_ARG);
    d.rate_hz = RATE;
    d.line = NULL;
    d.speed_m_s = -1.0;
    f.res.speed_m_s = 0.0;
    CHECK(se_plot_svg_string(&d, 800, 500, NULL, 0, &err) == NULL && err.code == SE_ERR_ARG);

    free(f.trace);
    se_line_free(line);
    return se_test_done("plot");
}
