/* HTML report: a single-recording report and a three-line survey built from hand-made locate
 * results. Checks: every tag it emits is balanced, nothing points outside the file (no http(s)
 * URL, no src=, no script, only local url(#...) references), each event's distance and every
 * caution are present, user strings are escaped, expected versus found pairs the shackle and flags
 * the unexpected reflection, the uncertainty statement follows the speed uncertainty, feet, ids
 * unique across plots, the same bytes twice; the locator's newer fields in client words (taps closer
 * than the ring-down, an earlier tap's echo, the attenuation and how it was obtained, the
 * skin-effect loss and the events matched with loss-shaped templates, a primary's predicted
 * multiple share), from a result record set here. With "--html-out DIR" it writes report-sample.html
 * and survey-sample.html into DIR (the browser test uses that); by default into the build folder. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/caution.h"
#include "strandecho/jsonout.h"
#include "strandecho/line.h"
#include "strandecho/locate.h"
#include "strandecho/plot.h"
#include "strandecho/report.h"
#include "reflectogram_fixture.h"
#include "testutil.h"

/* LeakSanitizer hook, read only by -DSE_SANITIZE builds: fontconfig (loaded by cairo's toy text API)
 * keeps its configuration cache for the life of the process by design; that is not our leak. */
const char *__lsan_default_suppressions(void);
const char *__lsan_default_suppressions(void)
{
    return "leak:libfontconfig.so\n";
}


/* Elements that have no end tag in HTML. */
static int is_void(const char *name, size_t n)
{
    static const char *const v[] = {"meta", "br", "hr", "img", "input", "link", "wbr", NULL};
    size_t i;
    for (i = 0; v[i] != NULL; i++)
        if (strlen(v[i]) == n && strncmp(v[i], name, n) == 0)
            return 1;
    return 0;
}

/* 1 when every start tag has its end tag in order (self-closing "/>" and void elements excepted). */
static int balanced(const char *html)
{
    const char *stack[512];
    size_t len[512], depth = 0;
    const char *p = html;
    while ((p = strchr(p, '<')) != NULL) {
        const char *name, *gt = strchr(p, '>');
        size_t n;
        int closing;
        if (gt == NULL)
            return 0;
        if (p[1] == '!' || p[1] == '?') {
            p = gt + 1;
            continue;
        }
        closing = p[1] == '/';
        name = p + 1 + closing;
        for (n = 0; name[n] && name[n] != ' ' && name[n] != '>' && name[n] != '/' && name[n] != '\n'; n++)
            ;
        if (closing) {
            if (depth == 0 || len[depth - 1] != n || strncmp(stack[depth - 1], name, n) != 0) {
                fprintf(stderr, "unbalanced </%.*s> at offset %ld\n", (int)n, name, (long)(p - html));
                return 0;
            }
            depth--;
        } else if (gt[-1] != '/' && !is_void(name, n)) {
            if (depth == 512)
                return 0;
            stack[depth] = name;
            len[depth++] = n;
        }
        p = gt + 1;
    }
    if (depth != 0)
        fprintf(stderr, "unclosed <%.*s>\n", (int)len[depth - 1], stack[depth - 1]);
    return depth == 0;
}

static int self_contained(const char *html)
{
    const char *p = html;
    if (strstr(html, "http://") || strstr(html, "https://") || strstr(html, "src=") || strstr(html, "<script") ||
        strstr(html, "@import") || strstr(html, "<link"))
        return 0;
    while ((p = strstr(p, "url(")) != NULL) {
        if (p[4] != '#')
            return 0;
        p += 4;
    }
    return 1;
}

/* HTML-escape s into out as the report does. */
static void esc(const char *s, char *out, size_t size)
{
    size_t o = 0;
    for (; *s && o + 7 < size; s++) {
        const char *r = NULL;
        switch (*s) {
        case '&': r = "&amp;"; break;
        case '<': r = "&lt;"; break;
        case '>': r = "&gt;"; break;
        case '"': r = "&quot;"; break;
        case '\'': r = "&#39;"; break;
        default: out[o++] = *s; continue;
        }
        memcpy(out + o, r, strlen(r));
        o += strlen(r);
    }
    out[o] = '\0';
}

static size_t count(const char *h, const char *needle)
{
    size_t n = 0;
    while ((h = strstr(h, needle)) != NULL) {
        n++;
        h += strlen(needle);
    }
    return n;
}

/* The report's sentence: text with its first letter capitalised and a full stop (as the report
 * writes the locator's warning), HTML-escaped. */
static void sentence_of(const char *text, char *out, size_t size)
{
    char t[600];
    size_t n;
    snprintf(t, sizeof t, "%s", text);
    if (t[0] >= 'a' && t[0] <= 'z')
        t[0] = (char)(t[0] - 'a' + 'A');
    n = strlen(t);
    if (n > 0 && n + 1 < sizeof t && t[n - 1] != '.') {
        t[n] = '.';
        t[n + 1] = '\0';
    }
    esc(t, out, size);
}

/* The text between the start of the row holding needle and its end, or NULL. */
static const char *row_of(const char *html, const char *needle, char *out, size_t size)
{
    const char *hit = strstr(html, needle), *b, *e;
    if (hit == NULL)
        return NULL;
    for (b = hit; b > html && strncmp(b, "<tr", 3) != 0; b--)
        ;
    e = strstr(hit, "</tr>");
    if (e == NULL || (size_t)(e - b) + 1 > size)
        return NULL;
    memcpy(out, b, (size_t)(e - b));
    out[e - b] = '\0';
    return out;
}

/* The locator's newer result fields, in the report: a record set by hand as se_locate fills it. */
static void check_new_fields(void)
{
    fixture g;
    se_run_info gi;
    se_report_line gl;
    se_report gr;
    se_error err;
    char *html, want[1400], warn[600], row[4000];
    double db;

    make_fixture(&g);
    se_run_info_init(&gi);
    gi.input_file = "leg-d.wav";
    gi.input_format = "WAV float32";
    gi.reference = "channel 2";
    gi.speed_source = "--speed 3000 m/s";
    gi.false_alarms = 0.01;
    gi.confidence = 0.95;
    se_report_line_init(&gl);
    gl.name = "Leg D";
    gl.result = &g.res;
    gl.info = &gi;
    se_report_init(&gr);
    gr.lines = &gl;
    gr.n_lines = 1;
    gr.survey = 1; /* with the summary table */

    /* five taps 2 s apart on a line ringing for 5.3 s; the 500 m echo is the previous tap's, the
     * 820 m one the tap's three before */
    g.res.shots_found = 5;
    g.res.shots_used = 5;
    g.res.shot_interval_s = 2.0;
    g.res.ring_down_s = 5.3;
    g.res.shots_overlap = 1;
    g.ev[1].previous_shot = 1;
    g.ev[1].multiple_of[0] = -1;
    g.ev[3].multiple = 1;
    g.ev[3].previous_shot = 3;
    g.ev[3].multiple_of[0] = g.ev[3].multiple_of[1] = -1;
    /* the attenuation from three of the end's repeats */
    g.res.attenuation_db_per_m = 0.0123;
    g.res.attenuation_uncertainty_db_per_m = 0.0011;
    g.res.attenuation_method = SE_ATTEN_END_MULTIPLES;
    g.res.attenuation_estimated = 1;
    g.res.attenuation_repeats = 3;
    /* skin-effect loss estimated from three echoes; two detections dropped as pieces */
    g.res.skin_k_s05_per_m = 4.3e-7;
    g.res.skin_k_uncertainty = 2e-8;
    g.res.skin_k_estimated = 1;
    g.res.skin_fit_echoes = 3;
    g.res.skin_explained = 2;
    g.ev[2].skin_corrected = 1;
    g.ev[2].skin_shift_s = 0.0;
    g.ev[4].skin_corrected = 1;
    g.ev[4].skin_shift_s = 1.5e-6;
    /* a multiple share at the 250 m primary (0.05 > its 0.003 uncertainty), a negligible one at 600 m */
    g.ev[0].predicted = 0.05;
    g.ev[2].predicted = 0.001;

    html = se_report_html(&gr, &err);
    CHECK(html != NULL);
    if (html == NULL) {
        fprintf(stderr, "%s\n", err.message);
        free(g.trace);
        return;
    }
    CHECK(balanced(html));
    CHECK(self_contained(html));
    /* the overlap warning: the locator's sentence, framed, with its badge (a measurement warning, not
     * a fault: no "Possible fault" badge), under the finding sentence and before the table */
    CHECK(se_locate_overlap_warning(&g.res, warn, sizeof warn) == 1);
    {
        char s1[800];
        const char *p, *table = strstr(html, "<table class=\"events\">");
        sentence_of(warn, s1, sizeof s1);
        snprintf(want, sizeof want, "<p class=\"finding warn overlap\"><span class=\"flag\">");
        p = strstr(html, want);
        CHECK(p != NULL && table != NULL && p < table);
        snprintf(want, sizeof want, "Measurement warning</span>Taps closer together than the line's ring-down. %s "
                                    "Events marked as an earlier tap's echo are not faults.</p>", s1);
        CHECK(p != NULL && strstr(p, want) == strstr(html, want) && strstr(html, want) != NULL);
        CHECK(strstr(s1, "The taps are 2.0 s apart but the line rings for 5.3 s") == s1);
    }
    CHECK(count(html, "<span class=\"flag\">") == 1 && count(html, "Possible fault") == 0);
    CHECK(row_of(html, "href=\"#line-1\"", row, sizeof row) != NULL &&
          strstr(row, "<strong>Measurement warning: the taps overlap (echoes of an earlier tap lie in the recording; "
                      "see the line's section).</strong>") != NULL &&
          strstr(row, "class=\"attention\"") == NULL);
    /* the earlier taps' echoes, in the events table */
    CHECK(row_of(html, "<td class=\"n\">500.0</td>", row, sizeof row) != NULL &&
          strstr(row, "<td>echo of the previous tap: not a fault</td>") != NULL &&
          strstr(row, "class=\"multiple\"") != NULL);
    CHECK(row_of(html, "<td class=\"n\">820.0</td>", row, sizeof row) != NULL &&
          strstr(row, "<td>echo of an earlier tap (3 taps before): not a fault; low confidence: the delay may sit on "
                      "a wrong peak</td>") != NULL);
    CHECK(strstr(html, "multiple of") == NULL);
    /* the primary's predicted multiple share (0.30 - 0.05), none at 600 m (0.001 < 0.012) */
    CHECK(row_of(html, "<td class=\"n\">250.0</td>", row, sizeof row) != NULL &&
          strstr(row, "<td>multiples of earlier reflections also arrive here (predicted 0.050): the reflector's own "
                      "share is about 0.250</td>") != NULL);
    CHECK(count(html, "multiples of earlier reflections also arrive here") == 1);
    /* loss-shaped templates: 600 m (no shift), 1000 m (1.5 us earlier) */
    CHECK(row_of(html, "<td class=\"n\">600.0</td>", row, sizeof row) != NULL &&
          strstr(row, "<td>matched with the loss-shaped pulse</td>") != NULL);
    CHECK(row_of(html, "<td class=\"n\">5</td><td class=\"n\">1000.0</td>", row, sizeof row) != NULL &&
          strstr(row, "<td>matched with the loss-shaped pulse, placed 1.5 &micro;s earlier than the undistorted "
                      "match</td>") != NULL);
    /* the attenuation and how it was obtained */
    CHECK(strstr(html, "<h3>Losses along the line</h3>") != NULL);
    CHECK(strstr(html, "<p>Attenuation of the line: 0.0123 \xc2\xb1 0.0011 dB/m one way (one standard "
                       "uncertainty), estimated from the decay of the end&#39;s repeats (3 arrivals of the end&#39;s "
                       "echo fitted), a full reflection at the end assumed (a fixed or free end, or a break; a weaker "
                       "reflection there would be counted as loss). The reflections in the findings table do not have "
                       "this attenuation removed.</p>") != NULL);
    CHECK(strstr(html, "are not corrected for losses along the line, except that those matched with the loss-shaped "
                       "pulse have the skin-effect loss removed.</p>") != NULL);
    /* the skin-effect loss: dB per 100 m at 100 MHz from alpha = K sqrt(pi f) Np/m and 20 / ln 10 dB
     * per neper (the neper-decibel relation, NIST SP 811; the conversion of units.h) */
    db = 20.0 / log(10.0) * 4.3e-7 * 100.0 * sqrt(3.14159265358979323846 * 1e8);
    snprintf(want, sizeof want, "<p>Skin-effect loss of the cable: K = 4.3e-07 \xc2\xb1 2e-08 s^0.5/m (one standard "
                                "uncertainty), estimated from the shapes of 3 echoes; equivalent to %.3g dB per 100 m "
                                "at 100 MHz with all of the cable&#39;s loss taken as skin-effect (conductor) loss. It "
                                "smears each echo more the farther it travels; a match with the undistorted pulse would "
                                "place such echoes late and split them into several peaks. So each echo was matched "
                                "with the pulse shape this loss gives it: 2 events matched so (marked in the findings "
                                "table), 2 detections of the undistorted match dropped as pieces of a distorted echo, "
                                "not separate reflections.</p>",
             db);
    CHECK(strstr(html, want) != NULL);
    CHECK(fabs(db - 6.62) < 0.01); /* 6.6 dB/100 m at 100 MHz is about 4.3e-7 (units.h's example) */
    /* parameters: the taps, ring-down and the losses */
    CHECK(strstr(html, "<tr><th scope=\"row\">taps</th><td>5 found, 5 stacked; 2 s apart; the line rings for 5.3 s "
                       "after a tap (they overlap: see the warning)</td></tr>") != NULL);
    CHECK(strstr(html, "<tr><th scope=\"row\">attenuation</th><td>0.0123 \xc2\xb1 0.0011 dB/m one way (one standard "
                       "uncertainty), estimated from the decay of the end&#39;s repeats (3 arrivals of the end&#39;s "
                       "echo fitted), a full reflection at the end assumed (a fixed or free end, or a break; a weaker "
                       "reflection there would be counted as loss)</td></tr>") != NULL);
    CHECK(strstr(html, "<tr><th scope=\"row\">skin-effect loss</th><td>K = 4.3e-07 \xc2\xb1 2e-08") != NULL);
    free(html);

    /* given values; a known reflector; a line that rings on; no overlap */
    g.res.shots_overlap = 0;
    g.res.ring_down_s = INFINITY;
    g.res.attenuation_method = SE_ATTEN_GIVEN;
    g.res.attenuation_estimated = 0;
    g.res.attenuation_db_per_m = 0.002;
    g.res.attenuation_uncertainty_db_per_m = NAN;
    g.res.skin_k_estimated = 0;
    g.res.skin_k_uncertainty = NAN;
    g.res.skin_fit_echoes = 0;
    g.res.skin_explained = 0;
    g.ev[2].skin_corrected = 0;
    html = se_report_html(&gr, &err);
    CHECK(html != NULL);
    if (html != NULL) {
        CHECK(balanced(html));
        CHECK(strstr(html, "Measurement warning") == NULL && strstr(html, "Taps closer together") == NULL);
        CHECK(strstr(html, "<p>Attenuation of the line: 0.002 dB/m one way, as given for this run. The reflections") !=
              NULL);
        CHECK(strstr(html, "are not corrected for losses along the line, except that") != NULL); /* 1000 m */
        snprintf(want, sizeof want, "<p>Skin-effect loss of the cable: K = 4.3e-07 s^0.5/m, as given for this run; "
                                    "equivalent to %.3g dB per 100 m at 100 MHz. It smears", db);
        CHECK(strstr(html, want) != NULL);
        CHECK(strstr(html, "1 event matched so (marked in the findings table), 0 detections of the undistorted") !=
              NULL);
        CHECK(strstr(html, "2 s apart; the line rings on past any interval</td>") != NULL);
        /* the earlier taps' echoes are labelled whether or not the warning is raised */
        CHECK(strstr(html, "echo of the previous tap: not a fault") != NULL);
        free(html);
    }
    g.res.attenuation_method = SE_ATTEN_KNOWN_REFLECTOR;
    g.res.attenuation_estimated = 1;
    g.res.attenuation_uncertainty_db_per_m = 0.0004;
    g.res.skin_k_s05_per_m = 0.0;
    html = se_report_html(&gr, &err);
    CHECK(html != NULL);
    if (html != NULL) {
        CHECK(strstr(html, "<p>Attenuation of the line: 0.002 \xc2\xb1 0.0004 dB/m one way (one standard "
                           "uncertainty), estimated from a known reflector (an expected feature of the line "
                           "description whose reflection coefficient is known).") != NULL);
        CHECK(strstr(html, "Skin-effect loss of the cable") == NULL);
        CHECK(strstr(html, "<tr><th scope=\"row\">skin-effect loss</th><td>none (not modelled)</td></tr>") != NULL);
        free(html);
    }
    /* K estimated as 0 (the echoes' shapes show no loss): no conversion, no smearing sentence */
    g.res.skin_k_estimated = 1;
    g.res.skin_fit_echoes = 2;
    html = se_report_html(&gr, &err);
    CHECK(html != NULL);
    if (html != NULL) {
        CHECK(strstr(html, "<p>Skin-effect loss of the cable: estimated from the shapes of 2 echoes: none seen (K = 0 "
                           "s^0.5/m); the echoes were matched with the undistorted pulse.</p>") != NULL);
        CHECK(strstr(html, "dB per 100 m") == NULL && strstr(html, "&amp;ndash;") == NULL);
        free(html);
    }
    g.res.skin_k_estimated = 0;
    /* nothing known: no losses section, the parameter says so */
    g.res.attenuation_method = SE_ATTEN_NONE;
    g.res.attenuation_db_per_m = NAN;
    g.ev[4].skin_corrected = 0;
    html = se_report_html(&gr, &err);
    CHECK(html != NULL);
    if (html != NULL) {
        CHECK(strstr(html, "Losses along the line") == NULL);
        CHECK(strstr(html, "are not corrected for losses along the line.</p>") != NULL);
        CHECK(strstr(html, "<tr><th scope=\"row\">attenuation</th><td>not known: none was given and none could be "
                           "estimated from this recording</td></tr>") != NULL);
        free(html);
    }
    free(g.trace);
}

static int write_text(const char *path, const char *text)
{
    FILE *fp = fopen(path, "w");
    if (fp == NULL)
        return 0;
    fputs(text, fp);
    return fclose(fp) == 0;
}

int main(int argc, char **argv)
{
    fixture f[3];
    se_line *line = make_line();
    se_run_info info[3];
    se_plot_data pd[3];
    se_report_line rl[3];
    se_report rep;
    se_report_param extra[1] = {{"max events", "64 <default>"}};
    se_compare_result cmp;
    se_change ch[2];
    se_error err;
    char *html, *again, path[1024], dir[512], buf[1200];
    const char *const *cautions;
    size_t nc, i;

    if (argc == 3 && strcmp(argv[1], "--html-out") == 0)
        snprintf(dir, sizeof dir, "%s", argv[2]);
    else
        se_test_binary_path(dir, sizeof dir, "tests");
    CHECK(line != NULL);
    for (i = 0; i < 3; i++) {
        make_fixture(&f[i]);
        se_run_info_init(&info[i]);
        info[i].input_file = i == 0 ? "leg-a <2025>.wav" : (i == 1 ? "leg-b.wav" : "leg-c.wav");
        info[i].input_sha256 = "9f86d081884c7d659a2feaa0c55ad015a3bf4f1b2b0b822cd15d6c15b0f00a08";
        info[i].input_format = "WAV float32";
        info[i].input_frames = NS;
        info[i].input_channels = 2;
        info[i].channel = 1;
        info[i].reference = "channel 2";
        info[i].speed_source = "--speed 3000 m/s";
        info[i].speed_uncertainty = i == 0 ? 0.0 : 0.02;
        info[i].false_alarms = 0.01;
        info[i].confidence = 0.95;
        info[i].source_reflection = 0.0;
        info[i].line_file = "legs/leg-a.yaml";
        se_plot_data_init(&pd[i]);
        pd[i].trace = f[i].trace;
        pd[i].n = NS;
        pd[i].rate_hz = RATE;
        pd[i].result = &f[i].res;
        pd[i].title = "Leg <A> & test";
        se_report_line_init(&rl[i]);
        rl[i].result = &f[i].res;
        rl[i].info = &info[i];
        rl[i].line = line;
        rl[i].plot = &pd[i];
        rl[i].params = extra;
        rl[i].n_params = 1;
    }
    rl[1].name = "Leg B";
    rl[2].name = "Leg C";
    rl[2].line = NULL; /* a line with no description: no expected-versus-found */
    rl[2].note = "Changed since the 2024 baseline: one new reflection at 600 m.";
    f[0].ev[0].reflection_uncertainty = 0.00023;
    f[0].ev[2].reflection_uncertainty = 0.012;

    se_report_init(&rep);
    rep.site = "Invented site \"North\"";
    rep.date = "2025-06-01";
    rep.lines = rl;
    rep.n_lines = 1;
    html = se_report_html(&rep, &err);
    CHECK(html != NULL);
    if (html == NULL) {
        fprintf(stderr, "%s\n", err.message);
        return se_test_done("report");
    }
    CHECK(strncmp(html, "<!DOCTYPE html>", 15) == 0);
    CHECK(balanced(html));
    CHECK(self_contained(html));
    CHECK(strstr(html, "<svg id=\"l1-plot\"") != NULL);
    /* one plot; every other SVG is a "Possible fault" badge (unexpected reflections at 600 m, 820 m) */
    CHECK(count(html, "<svg id=") == 1 && count(html, "</svg>") == 1 + count(html, "<span class=\"flag\">"));
    CHECK(count(html, "<span class=\"flag\">") == 1 && count(html, "Possible fault</span>") == 1);
    /* an uncertainty under 5e-4 keeps two significant digits (not "0.000"); 0.012 keeps three decimals */
    CHECK(strstr(html, "<td class=\"n\">0.00023</td>") != NULL);
    CHECK(strstr(html, "<td class=\"n\">0.012</td>") != NULL);
    CHECK(strstr(html, "<td class=\"n\">0.000</td>") == NULL);
    CHECK(strstr(html, "Summary") == NULL);
    /* each event's distance as a table cell */
    for (i = 0; i < f[0].res.n_events; i++) {
        char cell[64];
        snprintf(cell, sizeof cell, "<td class=\"n\">%.1f</td>", f[0].ev[i].distance_m);
        CHECK(strstr(html, cell) != NULL);
    }
    cautions = se_cautions(&nc);
    CHECK(nc >= 4);
    for (i = 0; i < nc; i++) {
        esc(cautions[i], buf, sizeof buf);
        CHECK(strstr(html, buf) != NULL);
    }
    CHECK(strstr(html, "Leg &lt;A&gt; &amp; test") != NULL && strstr(html, "<A>") == NULL);
    CHECK(strstr(html, "leg-a &lt;2025&gt;.wav") != NULL);
    CHECK(strstr(html, "Invented site &quot;North&quot;") != NULL);
    CHECK(strstr(html, "64 &lt;default&gt;") != NULL);
    CHECK(strstr(html, info[0].input_sha256) != NULL);
    CHECK(strstr(html, se_version()) != NULL);
    CHECK(strstr(html, "Distance (m)") != NULL);
    CHECK(strstr(html, "no speed uncertainty was given") != NULL);
    CHECK(strstr(html, "95 % confidence interval") != NULL);
    /* expected versus found: the shackle at 250 m is event 1, the reflection at 600 m is unexpected,
     * the far end at 1000 m is event 5 */
    CHECK(strstr(html, "Expected versus found") != NULL);
    CHECK(strstr(html, "<tr><td>shackle S1</td><td>shackle</td><td class=\"n\">250.0</td>") != NULL);
    CHECK(strstr(html, "<td>event 1</td>") != NULL && strstr(html, "<td>event 5</td>") != NULL);
    CHECK(count(html, "<strong>not expected</strong>") == 2); /* 600 m and 820 m */
    CHECK(strstr(html, "expected: shackle S1") != NULL);
    CHECK(strstr(html, "multiple of 1: not a fault") != NULL);
    /* the plot shows the matches: the shackle's triangle is filled */
    CHECK(strstr(html, "id=\"l1-expected-1\" class=\"se-expected se-found\"") != NULL);
    again = se_report_html(&rep, &err);
    CHECK(again != NULL && strcmp(again, html) == 0);
    free(again);
    snprintf(path, sizeof path, "%s/report-sample.html", dir);
    CHECK(se_report_write(&rep, path, &err) == SE_OK);
    free(html);

    /* Survey of three lines: leg B compared with a baseline (a hand-made comparison: one new
     * reflection at 600 m that may be a fault and a secondary one), recordings under the survey's
     * folder shown relative to it except beside their SHA-256. */
    memset(&cmp, 0, sizeof cmp);
    memset(ch, 0, sizeof ch);
    ch[0].kind = SE_CHANGE_NEW;
    ch[0].distance_m = 600.0;
    ch[0].reflection_now = -0.20;
    ch[0].reflection_baseline = NAN;
    ch[0].significance = 346.2;
    ch[0].event_now = 2;
    ch[0].event_baseline = -1;
    ch[1].kind = SE_CHANGE_STRENGTH;
    ch[1].distance_m = 1000.0;
    ch[1].reflection_now = -0.55;
    ch[1].reflection_baseline = -0.60;
    ch[1].significance = 20.0;
    ch[1].event_now = 4;
    ch[1].event_baseline = 3;
    ch[1].secondary = 1;
    cmp.stretch = 1.0 / 1.003;
    cmp.speed_change = 0.003;
    cmp.gain = 1.0;
    cmp.correlation = 0.98;
    cmp.residual_sigma = 0.0004;
    cmp.threshold = 0.0018;
    cmp.threshold_sigma = 4.4;
    cmp.changes = ch;
    cmp.n_changes = 2;
    cmp.n_faults = 1;
    rl[1].compare = &cmp;
    rl[1].baseline_label = "the 2024 survey";
    rl[1].baseline_file = "/srv/site 9/2024/leg-b.wav";
    rl[1].baseline_sha256 = "ab01ab01ab01ab01ab01ab01ab01ab01ab01ab01ab01ab01ab01ab01ab01ab01";
    info[1].input_file = "/srv/site 9/2025/leg-b.wav";
    rep.base_dir = "/srv/site 9";
    rep.n_lines = 3;
    rep.title = "Mooring survey";
    html = se_report_html(&rep, &err);
    CHECK(html != NULL);
    if (html != NULL) {
        const char *sum = strstr(html, "<h2>Summary</h2>"), *s1 = strstr(html, "id=\"line-1\"");
        CHECK(balanced(html));
        CHECK(self_contained(html));
        CHECK(sum != NULL && s1 != NULL && sum < s1);
        CHECK(strstr(html, "id=\"line-3\"") != NULL && strstr(html, "href=\"#line-3\"") != NULL);
        CHECK(strstr(html, "id=\"l3-event-5\"") != NULL && count(html, "id=\"l1-event-5\"") == 1);
        CHECK(count(html, "<svg id=") == 3);
        /* the summary: leg B's finding is the comparison's, flagged by a word and a shape, its
         * recording as the survey file gives it; the full paths only in the input files table */
        {
            const char *row = strstr(html, "href=\"#line-2\"");
            const char *end = row != NULL ? strstr(row, "</tr>") : NULL;
            const char *want = "Since the 2024 survey (speed +0.30 %): new reflection at 600.0 m, 346 sigma.";
            const char *hit = row != NULL ? strstr(row, want) : NULL;
            const char *flag = row != NULL ? strstr(row, "<span class=\"flag\"><svg") : NULL;
            const char *rec = row != NULL ? strstr(row, "<td>2025/leg-b.wav</td>") : NULL;
            CHECK(end != NULL && hit != NULL && hit < end && flag != NULL && flag < hit && rec != NULL && rec < end);
            CHECK(strstr(html, "<tr class=\"attention\"><td><a href=\"#line-2\">") != NULL);
            CHECK(strstr(html, "<td>/srv/site 9/2025/leg-b.wav</td><td>recording</td>") != NULL);
            CHECK(strstr(html, "<td>/srv/site 9/2024/leg-b.wav</td><td>baseline recording</td>") != NULL);
            CHECK(count(html, "/srv/site 9/") == 2);
            CHECK(strstr(html, rl[1].baseline_sha256) != NULL);
            CHECK(strstr(html, "Baseline recording 2024/leg-b.wav") != NULL);
            CHECK(strstr(html, "<h3>Changes since the 2024 survey</h3>") != NULL);
            CHECK(strstr(html, "secondary: not a fault") != NULL);
            CHECK(strstr(html, "<strong>new since the baseline</strong>") != NULL);
            CHECK(strstr(html, "No baseline to compare with.") != NULL); /* legs A and C */
        }
        CHECK(strstr(html, "2 % .") == NULL && strstr(html, "standard uncertainty of 2 %") != NULL);
        CHECK(strstr(html, "Changed since the 2024 baseline") != NULL);
        CHECK(count(html, "Expected versus found") == 2);
        CHECK(strstr(html, "Reflectometry survey of 3 lines at Invented site") != NULL);
        CHECK(count(html, "<li>") == nc); /* cautions once, for the whole survey */
        snprintf(path, sizeof path, "%s/survey-sample.html", dir);
        CHECK(write_text(path, html));
    }
    free(html);

    rl[1].compare = NULL;
    rl[1].baseline_file = NULL;
    rep.base_dir = NULL;

    /* Feet. */
    rep.n_lines = 1;
    rep.units = SE_PLOT_FEET;
    html = se_report_html(&rep, &err);
    CHECK(html != NULL && strstr(html, "Distance (ft)") && strstr(html, "<td class=\"n\">820.2</td>") &&
          strstr(html, "distance from the sensor (ft)")); /* 250 m / 0.3048 = 820.21 ft (NIST SP 811) */
    free(html);
    rep.units = SE_PLOT_METRES;

    check_new_fields();

    /* Errors. */
    rl[0].info = NULL;
    CHECK(se_report_html(&rep, &err) == NULL && err.code == SE_ERR_ARG && strstr(err.message, "line 1"));
    rl[0].info = &info[0];
    rep.n_lines = 0;
    CHECK(se_report_html(&rep, &err) == NULL && err.code == SE_ERR_ARG);
    rep.n_lines = 1;
    CHECK(se_report_write(&rep, "/nonexistent-folder/r.html", &err) == SE_ERR_IO);

    for (i = 0; i < 3; i++)
        free(f[i].trace);
    se_line_free(line);
    return se_test_done("report");
}
