/* strandecho: the self-contained HTML report (single recording or survey). */
#include "strandecho/report.h"

#include <gsl/gsl_cdf.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/caution.h"
#include "strandecho/output.h"
#include "strandecho/units.h"

#define SE_FT 0.3048

typedef struct se_rb {
    se_strbuf sb;    /* the document */
    char nb[16][64]; /* number buffers, used in turn */
    unsigned next;
    double k;        /* display units per metre */
    const char *u;   /* unit */
} se_rb;

/* A located result paired with expected events (a private copy when matched here). */
typedef struct se_rmatch {
    const se_expected_event *ex;
    size_t nex;
    se_expected_event *own_ex;
    se_locate_result copy; /* events copied and matched when the result was not matched to ex */
    const se_locate_result *res;
} se_rmatch;

static const char se_css[] =
    "body{font-family:sans-serif;color:#202020;margin:24px auto;max-width:1000px;line-height:1.4;"
    "font-size:14px;padding:0 12px}"
    "h1{font-size:22px;margin:0 0 4px}h2{font-size:18px;border-bottom:2px solid #202020;padding-bottom:2px;"
    "margin-top:28px}h3{font-size:15px;margin:18px 0 6px}"
    ".meta{color:#5a5a5a;margin:0 0 12px}.job{font-size:15px}"
    "table{border-collapse:collapse;margin:6px 0 12px;font-size:13px}"
    "th,td{border:1px solid #b8b8b8;padding:3px 7px;text-align:left;vertical-align:top}"
    "th{background:#ececec;font-weight:bold}td.n{text-align:right;font-variant-numeric:tabular-nums}"
    "tr.multiple td{color:#5a5a5a;font-style:italic}tr.missing td{font-weight:bold}"
    "tr.attention td{font-weight:bold}tr.attention td:first-child{border-left:5px solid #202020}"
    ".flag{display:inline-block;font-weight:bold;border:1.5px solid #202020;border-radius:3px;"
    "padding:0 5px 0 3px;margin-right:6px;white-space:nowrap;background:#fff;font-style:normal}"
    ".flag svg{vertical-align:-2px;margin-right:4px}.also{color:#5a5a5a;font-weight:normal}"
    "table.summary{width:100%}table.summary td:first-child,table.summary td:nth-child(2){white-space:nowrap}"
    ".finding{font-size:15px;border-left:4px solid #1d4e89;padding:4px 10px;background:#f4f4f4}"
    ".warn{border-left-color:#202020;font-weight:bold}"
    "figure{margin:10px 0}figure svg{max-width:100%;height:auto;border:1px solid #d0d0d0}"
    "figcaption{color:#5a5a5a;font-size:12px}"
    ".hash{font-family:monospace;font-size:12px;word-break:break-all}"
    ".cautions li{margin-bottom:4px}.cautions{border:2px solid #202020;padding:6px 14px 6px 30px}"
    "footer{color:#5a5a5a;font-size:12px;margin-top:24px;border-top:1px solid #b8b8b8;padding-top:6px}"
    "@page{size:A4;margin:14mm}"
    "@media print{body{max-width:none;margin:0;font-size:10pt;padding:0}"
    "section.line{break-before:page}figure,table,.finding{break-inside:avoid}"
    "h2,h3{break-after:avoid}figure svg{border:none}th{background:#e4e4e4}}";

static void se_rb_add(se_rb *b, const char *s);
static void se_rb_printf(se_rb *b, const char *fmt, ...) SE_PRINTF(2, 3);
static void se_rb_esc(se_rb *b, const char *s);
static const char *se_rb_num(se_rb *b, double v, int decimals);
static const char *se_rb_g(se_rb *b, double v, int digits);
static const char *se_rb_dist(se_rb *b, double m, int decimals);
static const char *se_rb_sig(se_rb *b, double v, int min_decimals);
static const char *se_rel(const se_report *r, const char *path);
static void se_flag(se_rb *b);
static void se_flag_word(se_rb *b, const char *word);
static void se_note_sep(se_rb *b, size_t mark);
static int se_overlap_paragraph(se_rb *b, const se_locate_result *res);
static void se_event_note_multiple(se_rb *b, const se_event *ev);
static void se_report_losses(se_rb *b, const se_locate_result *res);
static void se_attenuation_text(se_rb *b, const se_locate_result *res, char *out, size_t size);
static void se_skin_text(se_rb *b, const se_locate_result *res, char *out, size_t size);
static int se_attention(const se_report_line *l, int warn);
static void se_change_sentence(se_rb *b, const se_report_line *l, char *out, size_t size);
static int se_dist_decimals(const se_locate_result *res, double k);
static const char *se_line_title(const se_report_line *l);
static se_status se_rmatch_init(se_rmatch *m, const se_report_line *l, double confidence, se_error *err);
static void se_rmatch_free(se_rmatch *m);
static void se_report_summary(se_rb *b, const se_report *r, se_rmatch *m);
static se_status se_report_section(se_rb *b, const se_report *r, size_t index, se_rmatch *m, se_error *err);
static void se_finding_sentence(se_rb *b, const se_rmatch *m, char *out, size_t size, int *warn);
static void se_param_row(se_rb *b, const char *name, const char *value);
static void se_report_changes(se_rb *b, const se_report *r, const se_report_line *l, int dd);

static void se_rb_add(se_rb *b, const char *s)
{
    se_strbuf_add(&b->sb, s, strlen(s));
}

static void se_rb_printf(se_rb *b, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    se_strbuf_vprintf(&b->sb, fmt, ap);
    va_end(ap);
}

static void se_rb_esc(se_rb *b, const char *s)
{
    se_strbuf_xml_escape(&b->sb, s);
}

/* Put the decimal point back to '.' whatever the locale wrote (C-locale output). */
static void se_fix_point(char *s)
{
    char *o = s;
    int in_sep = 0;
    for (; *s; s++) {
        if ((*s >= '0' && *s <= '9') || *s == '-' || *s == '+' || *s == 'e' || *s == 'E') {
            *o++ = *s;
            in_sep = 0;
        } else if (!in_sep) {
            *o++ = '.';
            in_sep = 1;
        }
    }
    *o = '\0';
}

static const char *se_rb_num(se_rb *b, double v, int decimals)
{
    char *buf = b->nb[b->next++ % 16];
    if (!isfinite(v))
        return "&ndash;";
    snprintf(buf, 64, "%.*f", decimals, v);
    se_fix_point(buf);
    return buf;
}

static const char *se_rb_g(se_rb *b, double v, int digits)
{
    char *buf = b->nb[b->next++ % 16];
    if (!isfinite(v))
        return "&ndash;";
    snprintf(buf, 64, "%.*g", digits, v);
    se_fix_point(buf);
    return buf;
}

/* A distance in the report's unit with its unit name. */
static const char *se_rb_dist(se_rb *b, double m, int decimals)
{
    char *buf = b->nb[b->next++ % 16];
    if (!isfinite(m))
        return "&ndash;";
    snprintf(buf, 64, "%.*f", decimals, m * b->k);
    se_fix_point(buf);
    strcat(buf, b->u[0] == 'f' ? " ft" : " m");
    return buf;
}

/* Two significant digits and at least min_decimals: an uncertainty of 0.00023 is "0.00023", not
 * "0.000"; 0.15 with three decimals is "0.150". */
static const char *se_rb_sig(se_rb *b, double v, int min_decimals)
{
    int d = min_decimals;
    if (!isfinite(v))
        return "&ndash;";
    if (v != 0.0) {
        int need = 1 - (int)floor(log10(fabs(v)));
        if (need > d)
            d = need;
    }
    return se_rb_num(b, v, d > 9 ? 9 : d);
}

/* A path as shown outside the input files table: relative to the report's base folder when under
 * it (the survey file's folder, so the report shows what the survey file says, not the folders of
 * the machine that ran it). */
static const char *se_rel(const se_report *r, const char *path)
{
    size_t n;
    if (path == NULL || r->base_dir == NULL || r->base_dir[0] == '\0' || strcmp(r->base_dir, ".") == 0)
        return path;
    n = strlen(r->base_dir);
    if (r->base_dir[n - 1] == '/')
        n--;
    if (strncmp(path, r->base_dir, n) == 0 && path[n] == '/' && path[n + 1] != '\0')
        return path + n + 1;
    return path;
}

/* The "may be a fault" badge: a word and a shape (a filled warning triangle), so it does not rest on
 * colour; near-black like the rest of the report's emphasis. */
static void se_flag(se_rb *b)
{
    se_flag_word(b, "Possible fault");
}

/* The same badge with another word (a measurement warning is not a fault). */
static void se_flag_word(se_rb *b, const char *word)
{
    se_rb_add(b, "<span class=\"flag\"><svg width=\"14\" height=\"13\" viewBox=\"0 0 14 13\" aria-hidden=\"true\">"
                 "<path d=\"M7 0.6L13.6 12.4H0.4Z\" fill=\"#202020\"/><path d=\"M7 4.3V8.6\" stroke=\"#ffffff\" "
                 "stroke-width=\"1.7\"/><circle cx=\"7\" cy=\"10.5\" r=\"0.95\" fill=\"#ffffff\"/></svg>");
    se_rb_esc(b, word);
    se_rb_add(b, "</span>");
}

/* "; " between the parts of an event's note, none before the first (mark: where the note began). */
static void se_note_sep(se_rb *b, size_t mark)
{
    if (b->sb.len > mark)
        se_rb_add(b, "; ");
}

/* The field engineer's warning when the taps were closer together than the line's ring-down, as a
 * framed paragraph with its badge; 1 when written. */
static int se_overlap_paragraph(se_rb *b, const se_locate_result *res)
{
    char w[512];
    size_t n;
    if (!se_locate_overlap_warning(res, w, sizeof w) || w[0] == '\0')
        return 0;
    if (w[0] >= 'a' && w[0] <= 'z')
        w[0] = (char)(w[0] - 'a' + 'A');
    n = strlen(w);
    if (n + 1 < sizeof w && w[n - 1] != '.') {
        w[n] = '.';
        w[n + 1] = '\0';
    }
    se_rb_add(b, "<p class=\"finding warn overlap\">");
    se_flag_word(b, "Measurement warning");
    se_rb_add(b, "Taps closer together than the line's ring-down. ");
    se_rb_esc(b, w);
    se_rb_add(b, " Events marked as an earlier tap's echo are not faults.</p>\n");
    return 1;
}

/* The note of a multiple: an earlier tap's echo, or the primaries that explain it. */
static void se_event_note_multiple(se_rb *b, const se_event *ev)
{
    if (ev->previous_shot == 1) {
        se_rb_add(b, "echo of the previous tap: not a fault");
        return;
    }
    if (ev->previous_shot > 1) {
        se_rb_printf(b, "echo of an earlier tap (%d taps before): not a fault", ev->previous_shot);
        return;
    }
    se_rb_add(b, "multiple");
    if (ev->multiple_of[0] >= 0)
        se_rb_printf(b, " of %d", ev->multiple_of[0] + 1);
    if (ev->multiple_of[1] >= 0)
        se_rb_printf(b, " and %d", ev->multiple_of[1] + 1);
    se_rb_add(b, ": not a fault");
}

/* The attenuation and how it was obtained, one sentence (no markup; escaped by the caller). */
static void se_attenuation_text(se_rb *b, const se_locate_result *res, char *out, size_t size)
{
    char pm[96] = "", un[48] = "";
    const double a = res->attenuation_db_per_m, u = res->attenuation_uncertainty_db_per_m;
    if (!isfinite(a) || res->attenuation_method == SE_ATTEN_NONE) {
        snprintf(out, size, "not known: none was given and none could be estimated from this recording");
        return;
    }
    if (isfinite(u) && u > 0.0) { /* "A +/- U dB/m one way (one standard uncertainty)" */
        snprintf(pm, sizeof pm, " \xc2\xb1 %s", se_rb_g(b, u, 2));
        snprintf(un, sizeof un, " (one standard uncertainty)");
    }
    switch (res->attenuation_method) {
    case SE_ATTEN_GIVEN:
        snprintf(out, size, "%s dB/m one way, as given for this run", se_rb_g(b, a, 4));
        break;
    case SE_ATTEN_KNOWN_REFLECTOR:
        snprintf(out, size, "%s%s dB/m one way%s, estimated from a known reflector (an expected feature of the "
                            "line description whose reflection coefficient is known)",
                 se_rb_g(b, a, 4), pm, un);
        break;
    case SE_ATTEN_END_MULTIPLES:
        snprintf(out, size, "%s%s dB/m one way%s, estimated from the decay of the end's repeats (%zu arrival%s of "
                            "the end's echo fitted), a full reflection at the end assumed (a fixed or free end, or "
                            "a break; a weaker reflection there would be counted as loss)",
                 se_rb_g(b, a, 4), pm, un, res->attenuation_repeats, res->attenuation_repeats == 1 ? "" : "s");
        break;
    default: /* a method this version does not know: the value alone */
        snprintf(out, size, "%s dB/m one way", se_rb_g(b, a, 4));
        break;
    }
}

/* The skin-effect loss used, one sentence; "" without skin loss. */
static void se_skin_text(se_rb *b, const se_locate_result *res, char *out, size_t size)
{
    const double k = res->skin_k_s05_per_m;
    const double db = se_skin_loss_attenuation_db(k, 100.0, 1e8);
    out[0] = '\0';
    if (!(k > 0.0) && !res->skin_k_estimated)
        return;
    if (res->skin_k_estimated && !(k > 0.0 && isfinite(k))) {
        /* nothing to convert: the echoes' shapes show no loss (or none could be told) */
        snprintf(out, size, "estimated from the shapes of %zu echo%s: %s", res->skin_fit_echoes,
                 res->skin_fit_echoes == 1 ? "" : "es",
                 k == 0.0 ? "none seen (K = 0 s^0.5/m)" : "it could not be estimated");
    } else if (res->skin_k_estimated) {
        char pm[64] = "";
        if (isfinite(res->skin_k_uncertainty) && res->skin_k_uncertainty > 0.0)
            snprintf(pm, sizeof pm, " \xc2\xb1 %s s^0.5/m (one standard uncertainty)",
                     se_rb_g(b, res->skin_k_uncertainty, 2));
        else
            snprintf(pm, sizeof pm, " s^0.5/m");
        snprintf(out, size, "K = %s%s, estimated from the shapes of %zu "
                            "echo%s; equivalent to %s dB per 100 m at 100 MHz with all of the cable's loss taken as "
                            "skin-effect (conductor) loss",
                 se_rb_g(b, k, 3), pm, res->skin_fit_echoes, res->skin_fit_echoes == 1 ? "" : "es",
                 se_rb_g(b, db, 3));
    } else {
        snprintf(out, size, "K = %s s^0.5/m, as given for this run; equivalent to %s dB per 100 m at 100 MHz",
                 se_rb_g(b, k, 3), se_rb_g(b, db, 3));
    }
}

/* Losses along the line: the attenuation and the skin-effect loss, when either is known. */
static void se_report_losses(se_rb *b, const se_locate_result *res)
{
    char t[512];
    size_t i, ncorr = 0;
    int atten = isfinite(res->attenuation_db_per_m) && res->attenuation_method != SE_ATTEN_NONE;
    se_skin_text(b, res, t, sizeof t);
    if (!atten && t[0] == '\0')
        return;
    se_rb_add(b, "<h3>Losses along the line</h3>\n");
    if (atten) {
        char a[512];
        se_attenuation_text(b, res, a, sizeof a);
        se_rb_add(b, "<p>Attenuation of the line: ");
        se_rb_esc(b, a);
        se_rb_add(b, ". The reflections in the findings table do not have this attenuation removed.</p>\n");
    }
    if (t[0] != '\0') {
        for (i = 0; i < res->n_events; i++)
            ncorr += res->events[i].skin_corrected != 0;
        se_rb_add(b, "<p>Skin-effect loss of the cable: ");
        se_rb_esc(b, t);
        if (!(res->skin_k_s05_per_m > 0.0 && isfinite(res->skin_k_s05_per_m))) {
            se_rb_add(b, "; the echoes were matched with the undistorted pulse.</p>\n");
            return;
        }
        se_rb_printf(b, ". It smears each echo more the farther it travels; a match with the undistorted pulse "
                        "would place such echoes late and split them into several peaks. So each echo was matched "
                        "with the pulse shape this loss gives it: %zu event%s matched so (marked in the findings "
                        "table), %zu detection%s of the undistorted match dropped as pieces of a distorted echo, "
                        "not separate reflections.</p>\n",
                     ncorr, ncorr == 1 ? "" : "s", res->skin_explained, res->skin_explained == 1 ? "" : "s");
    }
}


/* 1 when the line's finding may be a fault: a change since the baseline that is not secondary, or
 * what the locate sentence flags (an unexpected reflection, a missing end). */
static int se_attention(const se_report_line *l, int warn)
{
    return warn || (l->compare != NULL && l->compare->n_faults > 0);
}

/* The comparison's sentence, capitalised, with a full stop. */
static void se_change_sentence(se_rb *b, const se_report_line *l, char *out, size_t size)
{
    size_t n;
    if (se_compare_sentence(l->compare, l->baseline_label, b->k, b->u, out, size, NULL) != SE_OK) {
        snprintf(out, size, "Compared with the baseline.");
        return;
    }
    if (out[0] >= 'a' && out[0] <= 'z')
        out[0] = (char)(out[0] - 'a' + 'A');
    n = strlen(out);
    if (n + 1 < size && n > 0 && out[n - 1] != '.') {
        out[n] = '.';
        out[n + 1] = '\0';
    }
}

/* Decimals that the resolution justifies. */
static int se_dist_decimals(const se_locate_result *res, double k)
{
    double r = res->resolution_m * k;
    if (r > 0.0 && r < 0.1)
        return 2;
    if (r > 0.0 && r < 2.0)
        return 1;
    return isfinite(r) && r > 0.0 ? 0 : 2;
}

static const char *se_line_title(const se_report_line *l)
{
    if (l->name != NULL && l->name[0])
        return l->name;
    if (l->line != NULL && l->line->name != NULL && l->line->name[0])
        return l->line->name;
    if (l->info != NULL && l->info->input_file != NULL)
        return l->info->input_file;
    return "line";
}

static se_status se_rmatch_init(se_rmatch *m, const se_report_line *l, double confidence, se_error *err)
{
    const se_locate_result *res = l->result;
    memset(m, 0, sizeof *m);
    m->res = res;
    m->ex = l->expected;
    m->nex = l->n_expected;
    if (m->ex == NULL && l->line != NULL && l->line->prepared) {
        se_status st = se_line_expected_events(l->line, &m->own_ex, &m->nex, err);
        if (st != SE_OK)
            return st;
        m->ex = m->own_ex;
    }
    if (m->nex == 0 || (res->expected_found != NULL && res->n_expected == m->nex))
        return SE_OK;
    /* Not matched to these expected events yet: match a private copy. */
    {
        double z = 1.959963984540054; /* standard normal 97.5 % quantile */
        se_status st;
        if (confidence > 0.0 && confidence < 1.0)
            z = gsl_cdf_ugaussian_Pinv(0.5 * (1.0 + confidence));
        m->copy = *res;
        m->copy.expected_found = NULL;
        m->copy.n_expected = 0;
        m->copy.events = NULL;
        if (res->n_events > 0) {
            m->copy.events = se_calloc(res->n_events, sizeof *m->copy.events, "report events", err);
            if (m->copy.events == NULL)
                return SE_ERR_NOMEM;
            memcpy(m->copy.events, res->events, res->n_events * sizeof *res->events);
        }
        st = se_match_expected(&m->copy, m->ex, m->nex, z, err);
        if (st != SE_OK)
            return st;
        m->res = &m->copy;
    }
    return SE_OK;
}

static void se_rmatch_free(se_rmatch *m)
{
    free(m->own_ex);
    free(m->copy.events);
    free(m->copy.expected_found);
    memset(m, 0, sizeof *m);
}

/* 1 when an expected event that was not found is too weak to be seen: its expected echo lies
 * below the detection threshold (a junction of equal impedances), so not finding it is no news. */
static int se_expected_below(const se_expected_event *e, const se_locate_result *r)
{
    return e->has_reflection && !(fabs(e->amplitude) >= r->threshold);
}

/* One sentence on what was found, for the summary and the section. */
static void se_finding_sentence(se_rb *b, const se_rmatch *m, char *out, size_t size, int *warn)
{
    const se_locate_result *r = m->res;
    size_t i, prim = 0, mult = 0, unexpected = 0, missing = 0, below = 0;
    int n;
    *warn = 0;
    for (i = 0; i < r->n_events; i++) {
        if (r->events[i].multiple)
            mult++;
        else {
            prim++;
            if (m->nex > 0 && r->events[i].expected < 0)
                unexpected++;
        }
    }
    if (m->nex > 0 && r->expected_found != NULL)
        for (i = 0; i < m->nex; i++) {
            missing += r->expected_found[i] < 0;
            below += r->expected_found[i] < 0 && se_expected_below(&m->ex[i], r);
        }
    n = snprintf(out, size, "%zu reflection%s located (%zu primar%s, %zu multiple%s)", r->n_events,
                 r->n_events == 1 ? "" : "s", prim, prim == 1 ? "y" : "ies", mult, mult == 1 ? "" : "s");
    if (n < 0 || (size_t)n >= size)
        return;
    if (m->nex > 0) {
        n += snprintf(out + n, size - (size_t)n, "; %zu of %zu expected features found", m->nex - missing,
                      m->nex);
        if (n >= 0 && (size_t)n < size && below > 0)
            n += snprintf(out + n, size - (size_t)n, " (%zu expected below the detection threshold)", below);
        if (n >= 0 && (size_t)n < size)
            n += snprintf(out + n, size - (size_t)n, ", %zu unexpected reflection%s", unexpected,
                          unexpected == 1 ? "" : "s");
        if (unexpected > 0)
            *warn = 1;
    }
    if (n < 0 || (size_t)n >= size)
        return;
    if (r->end_missing) {
        *warn = 1;
        if (r->break_event >= 0 && (size_t)r->break_event < r->n_events)
            snprintf(out + n, size - (size_t)n, "; the line's end was not found: event %d at %s is the likely "
                     "break or open fault", r->break_event + 1,
                     se_rb_dist(b, r->events[r->break_event].distance_m, se_dist_decimals(r, b->k)));
        else
            snprintf(out + n, size - (size_t)n, "; the line's end was not found within the record");
    } else {
        snprintf(out + n, size - (size_t)n, ".");
    }
}

static void se_param_row(se_rb *b, const char *name, const char *value)
{
    se_rb_add(b, "<tr><th scope=\"row\">");
    se_rb_esc(b, name);
    se_rb_add(b, "</th><td>");
    se_rb_esc(b, value != NULL ? value : "not given");
    se_rb_add(b, "</td></tr>\n");
}

/* The table of changes since the baseline, with how the two recordings were put side by side. */
static void se_report_changes(se_rb *b, const se_report *r, const se_report_line *l, int dd)
{
    const se_compare_result *c = l->compare;
    size_t i;
    se_rb_add(b, "<h3>Changes since ");
    se_rb_esc(b, l->baseline_label != NULL ? l->baseline_label : "the baseline");
    se_rb_add(b, "</h3>\n<p>");
    if (l->baseline_file != NULL) {
        se_rb_add(b, "Baseline recording ");
        se_rb_esc(b, se_rel(r, l->baseline_file));
        se_rb_add(b, ", aligned on the outgoing pulse. ");
    }
    se_rb_printf(b, "The wave speed %s by %s %% (delays stretched by %s%s), the gain by a factor %s; "
                    "the two traces correlate at %s. What is left after taking these out has a noise of %s "
                    "(reflection units) and a detection threshold of %s (%s sigma); every residual peak above it "
                    "is listed. Secondary changes are explained without a fault there: multiples, or an echo "
                    "dimmed by a change in front of it.</p>\n",
                 c->speed_change < 0.0 ? "fell" : "rose", se_rb_num(b, fabs(c->speed_change) * 100.0, 2),
                 se_rb_g(b, c->stretch, 7),
                 c->stretch_from_echoes ? ", from the common echoes" : "", se_rb_g(b, c->gain, 4),
                 se_rb_num(b, c->correlation, 3), se_rb_g(b, c->residual_sigma, 3), se_rb_g(b, c->threshold, 3),
                 se_rb_num(b, c->threshold_sigma, 1));
    se_rb_printf(b, "<table class=\"changes\"><thead><tr><th>Change</th><th>Distance (%s)</th><th>Shift (%s)</th>"
                    "<th>Reflection now</th><th>Before</th><th>Significance (&sigma;)</th><th>Event</th>"
                    "<th>Reading</th></tr></thead><tbody>\n",
                 b->u, b->u);
    for (i = 0; i < c->n_changes; i++) {
        const se_change *ch = &c->changes[i];
        se_rb_printf(b, "<tr%s><td>%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td>"
                        "<td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">",
                     ch->secondary ? " class=\"multiple\"" : " class=\"attention\"", se_change_kind_name(ch->kind),
                     se_rb_num(b, ch->distance_m * b->k, dd),
                     ch->kind == SE_CHANGE_MOVED ? se_rb_num(b, ch->shift_m * b->k, dd + 1) : "&ndash;",
                     se_rb_num(b, ch->reflection_now, 3), se_rb_num(b, ch->reflection_baseline, 3),
                     se_rb_num(b, ch->significance, 1));
        if (ch->event_now >= 0)
            se_rb_printf(b, "%d", ch->event_now + 1);
        else
            se_rb_add(b, "&ndash;");
        se_rb_add(b, "</td><td>");
        if (ch->secondary)
            se_rb_add(b, "secondary: not a fault");
        else
            se_flag(b);
        se_rb_add(b, "</td></tr>\n");
    }
    if (c->n_changes == 0)
        se_rb_add(b, "<tr><td colspan=\"8\">No change above the threshold.</td></tr>\n");
    se_rb_add(b, "</tbody></table>\n");
}

static void se_report_summary(se_rb *b, const se_report *r, se_rmatch *m)
{
    size_t i, j;
    int any_compare = 0;
    for (i = 0; i < r->n_lines; i++)
        any_compare |= r->lines[i].compare != NULL;
    se_rb_add(b, "<h2>Summary</h2>\n<table class=\"summary\"><thead><tr><th>Line</th><th>Recording</th>"
                 "<th>Reflections</th><th>Expected found</th>");
    se_rb_printf(b, "<th>Farthest primary (%s)</th><th>Finding</th></tr></thead><tbody>\n", b->u);
    for (i = 0; i < r->n_lines; i++) {
        const se_locate_result *res = m[i].res;
        char sentence[512];
        int warn, attention;
        double far = NAN;
        size_t found = 0;
        for (j = 0; j < res->n_events; j++)
            if (!res->events[j].multiple)
                far = res->events[j].distance_m;
        if (res->expected_found != NULL)
            for (j = 0; j < m[i].nex && j < res->n_expected; j++)
                found += res->expected_found[j] >= 0;
        se_finding_sentence(b, &m[i], sentence, sizeof sentence, &warn);
        attention = se_attention(&r->lines[i], warn);
        se_rb_printf(b, "<tr%s><td><a href=\"#line-%zu\">", attention ? " class=\"attention\"" : "", i + 1);
        se_rb_esc(b, se_line_title(&r->lines[i]));
        se_rb_add(b, "</a></td><td>");
        se_rb_esc(b, se_rel(r, r->lines[i].info->input_file));
        se_rb_printf(b, "</td><td class=\"n\">%zu</td><td class=\"n\">", res->n_events);
        if (m[i].nex > 0)
            se_rb_printf(b, "%zu / %zu", found, m[i].nex);
        else
            se_rb_add(b, "no line described");
        se_rb_printf(b, "</td><td class=\"n\">%s</td><td>", se_rb_num(b, far * b->k, se_dist_decimals(res, b->k)));
        if (attention)
            se_flag(b);
        if (r->lines[i].compare != NULL) {
            char change[512];
            se_change_sentence(b, &r->lines[i], change, sizeof change);
            se_rb_esc(b, change);
            if (warn) { /* what the line description flags as well */
                se_rb_add(b, " <span class=\"also\">");
                se_rb_esc(b, sentence);
                se_rb_add(b, "</span>");
            }
        } else {
            se_rb_esc(b, sentence);
            if (any_compare)
                se_rb_add(b, " <span class=\"also\">No baseline to compare with.</span>");
        }
        if (res->shots_overlap)
            se_rb_add(b, " <strong>Measurement warning: the taps overlap (echoes of an earlier tap lie in the "
                         "recording; see the line's section).</strong>");
        se_rb_add(b, "</td></tr>\n");
    }
    se_rb_add(b, "</tbody></table>\n");
}

static se_status se_report_section(se_rb *b, const se_report *r, size_t index, se_rmatch *m, se_error *err)
{
    const se_report_line *l = &r->lines[index];
    const se_locate_result *res = m->res;
    const se_run_info *info = l->info;
    const int dd = se_dist_decimals(res, b->k);
    const double conf = isfinite(info->confidence) && info->confidence > 0.0 ? info->confidence : 0.95;
    char sentence[512];
    int warn;
    size_t i;

    se_rb_printf(b, "<section class=\"line\" id=\"line-%zu\">\n<h2>", index + 1);
    if (r->n_lines > 1 || r->survey)
        se_rb_printf(b, "%zu. ", index + 1);
    se_rb_esc(b, se_line_title(l));
    se_rb_add(b, "</h2>\n");
    if (l->compare != NULL) {
        char change[512];
        se_change_sentence(b, l, change, sizeof change);
        se_rb_printf(b, "<p class=\"finding%s\">", l->compare->n_faults > 0 ? " warn" : "");
        if (l->compare->n_faults > 0)
            se_flag(b);
        se_rb_esc(b, change);
        se_rb_add(b, "</p>\n");
    }
    if (l->note != NULL) {
        se_rb_add(b, "<p class=\"finding\">");
        se_rb_esc(b, l->note);
        se_rb_add(b, "</p>\n");
    }

    /* The line. */
    se_rb_add(b, "<h3>The line</h3>\n");
    if (l->line != NULL && l->line->prepared) {
        const se_line *ln = l->line;
        se_rb_add(b, "<p>");
        if (ln->name != NULL && ln->name[0]) {
            se_rb_esc(b, ln->name);
            se_rb_add(b, ": ");
        }
        se_rb_printf(b, "%s waves, %s measured at the sensor, %s long in %zu segment%s; sensor end ",
                     se_wave_kind_name(ln->wave), se_quantity_name(ln->quantity), se_rb_dist(b, ln->length_m, 2),
                     ln->n_segments, ln->n_segments == 1 ? "" : "s");
        se_rb_esc(b, ln->source_end_name);
        se_rb_add(b, ", far end ");
        se_rb_esc(b, ln->end_name != NULL ? ln->end_name : "not given");
        se_rb_add(b, " (described in ");
        se_rb_esc(b, se_rel(r, info->line_file != NULL ? info->line_file : ln->source_name));
        se_rb_add(b, ").</p>\n");
        se_rb_printf(b, "<table><thead><tr><th>Segment</th><th>From (%s)</th><th>To (%s)</th><th>Speed (m/s)</th>"
                        "<th>Impedance (%s)</th><th>Features</th></tr></thead><tbody>\n",
                     b->u, b->u, ln->wave == SE_WAVE_ELECTRICAL ? "ohm" : "N s/m");
        for (i = 0; i < ln->n_segments; i++) {
            const se_segment *sg = &ln->segments[i];
            double end = i + 1 < ln->n_segments ? ln->segments[i + 1].start_m : ln->length_m;
            size_t f;
            se_rb_add(b, "<tr><td>");
            se_rb_esc(b, sg->name);
            se_rb_printf(b, "</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td>"
                            "<td class=\"n\">%s</td><td>",
                         se_rb_num(b, sg->start_m * b->k, 2), se_rb_num(b, end * b->k, 2), se_rb_g(b, sg->speed_m_s, 6),
                         se_rb_g(b, sg->impedance_near, 5));
            for (f = 0; f < sg->n_features; f++) {
                if (f > 0)
                    se_rb_add(b, "; ");
                se_rb_esc(b, sg->features[f].name);
            }
            se_rb_add(b, "</td></tr>\n");
        }
        se_rb_add(b, "</tbody></table>\n");
    } else {
        se_rb_printf(b, "<p>No line description was given: a uniform line of speed %s m/s is assumed, %s measured "
                        "at the sensor.</p>\n",
                     se_rb_g(b, res->speed_m_s, 6), se_quantity_name(res->quantity));
    }

    /* Findings. */
    se_rb_add(b, "<h3>Findings</h3>\n");
    se_finding_sentence(b, m, sentence, sizeof sentence, &warn);
    se_rb_printf(b, "<p class=\"finding%s\">", warn ? " warn" : "");
    if (warn)
        se_flag(b);
    se_rb_esc(b, sentence);
    se_rb_add(b, "</p>\n");
    se_overlap_paragraph(b, res);
    if (l->plot != NULL) {
        se_plot_data pd = *l->plot;
        char pfx[32], *svg;
        pd.units = r->units;
        if (pd.line == NULL)
            pd.line = l->line;
        if (pd.expected == NULL && m->nex > 0) {
            pd.expected = m->ex;
            pd.n_expected = m->nex;
        }
        if (pd.result == m->res || pd.result == l->result)
            pd.result = m->res;
        snprintf(pfx, sizeof pfx, "l%zu", index + 1);
        svg = se_plot_svg_string(&pd, r->plot_width > 0.0 ? r->plot_width : 900.0,
                                 r->plot_height > 0.0 ? r->plot_height : 540.0, pfx, SE_PLOT_SVG_INLINE, err);
        if (svg == NULL)
            return err != NULL ? err->code : SE_ERR_NOMEM;
        se_rb_add(b, "<figure>\n");
        se_rb_add(b, svg);
        free(svg);
        se_rb_add(b, "<figcaption>Matched-filter output against distance from the sensor (round-trip time above). "
                     "Filled diamonds: located reflections; hollow diamonds: low confidence; hollow circles with "
                     "dashed leaders: multiples (echoes of earlier reflections, not faults); dashed pair: detection "
                     "threshold; grey band: dead zone; triangles under the axis: expected features (filled when "
                     "found).</figcaption>\n</figure>\n");
    }
    se_rb_printf(b, "<table class=\"events\"><thead><tr><th>#</th><th>Distance (%s)</th><th>&plusmn; (%s, %s %%)</th>"
                    "<th>Delay (%s)</th><th>Class</th><th>Polarity</th><th>Reflection</th><th>&plusmn; (1 &sigma;)</th>"
                    "<th>SNR (dB)</th><th>Note</th></tr></thead><tbody>\n",
                 b->u, b->u, se_rb_g(b, conf * 100.0, 3), res->electrical ? "&micro;s" : "ms");
    for (i = 0; i < res->n_events; i++) {
        const se_event *ev = &res->events[i];
        size_t mark;
        se_rb_printf(b, "<tr%s><td class=\"n\">%zu</td><td class=\"n\">%s</td><td class=\"n\">%s</td>"
                        "<td class=\"n\">%s</td><td>%s</td><td>%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td>"
                        "<td class=\"n\">%s</td><td>",
                     ev->multiple ? " class=\"multiple\"" : "", i + 1, se_rb_num(b, ev->distance_m * b->k, dd),
                     se_rb_sig(b, ev->distance_uncertainty_m * b->k, dd + 1), se_rb_num(b, ev->delay_s * (res->electrical ? 1e6 : 1e3), 4),
                     se_event_class(res, ev), se_event_polarity(ev), se_rb_num(b, ev->reflection, 3),
                     se_rb_sig(b, ev->reflection_uncertainty, 3), se_rb_num(b, ev->snr_db, 1));
        mark = b->sb.len;
        if (ev->multiple) {
            se_event_note_multiple(b, ev);
        } else if (m->nex > 0 && ev->expected >= 0 && (size_t)ev->expected < m->nex) {
            se_rb_add(b, "expected: ");
            se_rb_esc(b, m->ex[ev->expected].name);
        } else if (m->nex > 0) {
            se_rb_add(b, "<strong>not expected</strong>");
        }
        if (l->compare != NULL) {
            size_t c;
            for (c = 0; c < l->compare->n_changes; c++) {
                const se_change *ch = &l->compare->changes[c];
                if (ch->event_now != (int)i || ch->secondary)
                    continue;
                se_note_sep(b, mark);
                se_rb_printf(b, "<strong>%s since the baseline</strong>",
                             ch->kind == SE_CHANGE_NEW     ? "new"
                             : ch->kind == SE_CHANGE_MOVED ? "moved"
                                                           : "changed in strength");
                break;
            }
        }
        /* a primary where the multiples of the reflectors before it also arrive, when that is at least
         * the reflection's standard uncertainty (smaller is below what the measurement resolves) */
        if (!ev->multiple && isfinite(ev->predicted) && ev->predicted != 0.0 &&
            fabs(ev->predicted) >= ev->reflection_uncertainty) {
            se_note_sep(b, mark);
            se_rb_printf(b, "multiples of earlier reflections also arrive here (predicted %s): the reflector's own "
                            "share is about %s",
                         se_rb_num(b, ev->predicted, 3), se_rb_num(b, ev->reflection - ev->predicted, 3));
        }
        if (ev->skin_corrected) {
            se_note_sep(b, mark);
            se_rb_add(b, "matched with the loss-shaped pulse");
            if (isfinite(ev->skin_shift_s) && ev->skin_shift_s > 0.0)
                se_rb_printf(b, ", placed %s &micro;s earlier than the undistorted match",
                             se_rb_g(b, ev->skin_shift_s * 1e6, 3));
        }
        if (ev->low_confidence) {
            se_note_sep(b, mark);
            se_rb_add(b, "low confidence: the delay may sit on a wrong peak");
        }
        if (res->break_event == (int)i && res->end_missing) {
            se_note_sep(b, mark);
            se_rb_add(b, "<strong>likely break or open fault</strong>");
        }
        se_rb_add(b, "</td></tr>\n");
    }
    if (res->n_events == 0)
        se_rb_add(b, "<tr><td colspan=\"10\">No reflection above the detection threshold.</td></tr>\n");
    se_rb_add(b, "</tbody></table>\n");

    if (l->compare != NULL)
        se_report_changes(b, r, l, dd);

    /* Expected versus found. */
    if (m->nex > 0) {
        se_rb_printf(b, "<h3>Expected versus found</h3>\n<table class=\"expected\"><thead><tr><th>Expected</th>"
                        "<th>Kind</th><th>Expected at (%s)</th><th>&plusmn; (%s, 1 &sigma;)</th><th>Expected echo</th>"
                        "<th>Found</th><th>Found at (%s)</th><th>Found &minus; expected (%s)</th><th>Reflection found</th>"
                        "</tr></thead><tbody>\n",
                     b->u, b->u, b->u, b->u);
        for (i = 0; i < m->nex; i++) {
            const se_expected_event *e = &m->ex[i];
            int f = (res->expected_found != NULL && i < res->n_expected) ? res->expected_found[i] : -1;
            se_rb_printf(b, "<tr%s><td>", f < 0 && !se_expected_below(e, res) ? " class=\"missing\"" : "");
            se_rb_esc(b, e->name);
            se_rb_add(b, "</td><td>");
            se_rb_esc(b, e->kind);
            se_rb_printf(b, "</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td>",
                         se_rb_num(b, e->distance_m * b->k, dd), se_rb_num(b, e->distance_sigma_m * b->k, dd + 1),
                         e->has_reflection ? se_rb_num(b, e->amplitude, 3) : "unknown");
            if (f >= 0 && (size_t)f < res->n_events) {
                const se_event *ev = &res->events[f];
                se_rb_printf(b, "<td>event %d</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td>",
                             f + 1, se_rb_num(b, ev->distance_m * b->k, dd),
                             se_rb_num(b, (ev->distance_m - e->distance_m) * b->k, dd), se_rb_num(b, ev->reflection, 3));
            } else if (se_expected_below(e, res)) {
                se_rb_add(b, "<td>not seen: expected below the detection threshold</td><td class=\"n\">&ndash;</td>"
                             "<td class=\"n\">&ndash;</td><td class=\"n\">&ndash;</td>");
            } else {
                se_rb_add(b, "<td>not found</td><td class=\"n\">&ndash;</td><td class=\"n\">&ndash;</td>"
                             "<td class=\"n\">&ndash;</td>");
            }
            se_rb_add(b, "</tr>\n");
        }
        se_rb_add(b, "</tbody></table>\n");
    }

    se_report_losses(b, res);

    /* Uncertainty. */
    se_rb_add(b, "<h3>What the &plusmn; means</h3>\n<p>");
    se_rb_printf(b, "Each distance &plusmn; is the half-width of an interval that holds the true distance with "
                    "probability %s %% under Gaussian errors (a %s %% confidence interval). It combines the timing "
                    "uncertainty of the echo (the Cramer-Rao bound at the measured noise and the pulse's RMS bandwidth, "
                    "with the same for the direct arrival) ",
                 se_rb_g(b, conf * 100.0, 3), se_rb_g(b, conf * 100.0, 3));
    if (info->speed_uncertainty > 0.0 && isfinite(info->speed_uncertainty))
        se_rb_printf(b, "and the speed's standard uncertainty of %s %%.", se_rb_g(b, info->speed_uncertainty * 100.0, 3));
    else
        se_rb_add(b, "only: <strong>no speed uncertainty was given, so the intervals cover timing alone</strong> and a "
                     "wrong speed moves every distance in proportion.");
    se_rb_printf(b, " Reflections closer together than the resolution (%s) may merge; nothing is searched within the "
                    "dead zone (%s) of the sensor. Reflection coefficients carry one standard uncertainty and are not "
                    "corrected for losses along the line",
                 se_rb_dist(b, res->resolution_m, 2), se_rb_dist(b, res->dead_zone_m, 2));
    {
        size_t ncorr = 0;
        for (i = 0; i < res->n_events; i++)
            ncorr += res->events[i].skin_corrected != 0;
        /* a loss-shaped template's amplitude has the skin-effect loss's shape removed (docs/json.md) */
        if (ncorr > 0)
            se_rb_add(b, ", except that those matched with the loss-shaped pulse have the skin-effect loss "
                         "removed");
    }
    se_rb_add(b, ".</p>\n");

    /* Inputs. */
    se_rb_add(b, "<h3>Input files</h3>\n<table><thead><tr><th>File</th><th>Role</th><th>SHA-256</th></tr></thead>"
                 "<tbody>\n<tr><td>");
    se_rb_esc(b, info->input_file != NULL ? info->input_file : "not given");
    se_rb_add(b, "</td><td>recording</td><td class=\"hash\">");
    se_rb_esc(b, info->input_sha256 != NULL ? info->input_sha256 : "not computed");
    se_rb_add(b, "</td></tr>\n");
    if (info->reference_sha256 != NULL) {
        se_rb_add(b, "<tr><td>");
        se_rb_esc(b, info->reference);
        se_rb_add(b, "</td><td>reference pulse</td><td class=\"hash\">");
        se_rb_esc(b, info->reference_sha256);
        se_rb_add(b, "</td></tr>\n");
    }
    if (l->baseline_file != NULL) {
        se_rb_add(b, "<tr><td>");
        se_rb_esc(b, l->baseline_file);
        se_rb_add(b, "</td><td>baseline recording</td><td class=\"hash\">");
        se_rb_esc(b, l->baseline_sha256 != NULL ? l->baseline_sha256 : "not computed");
        se_rb_add(b, "</td></tr>\n");
    }
    if (info->line_file != NULL) {
        se_rb_add(b, "<tr><td>");
        se_rb_esc(b, info->line_file);
        se_rb_add(b, "</td><td>line description</td><td>&ndash;</td></tr>\n");
    }
    se_rb_add(b, "</tbody></table>\n");

    /* Parameters. */
    se_rb_add(b, "<h3>Parameters</h3>\n<table class=\"params\"><tbody>\n");
    {
        char v[640]; /* the attenuation's sentence is the longest value */
        se_param_row(b, "input format", info->input_format);
        snprintf(v, sizeof v, "%zu samples per channel, %u channel%s, response channel %u", info->input_frames,
                 info->input_channels, info->input_channels == 1 ? "" : "s", info->channel);
        se_param_row(b, "recording", v);
        snprintf(v, sizeof v, "%s Hz", se_rb_g(b, res->rate_hz, 10));
        se_param_row(b, "sample rate", v);
        se_param_row(b, "quantity", se_quantity_name(res->quantity));
        se_param_row(b, "line kind", res->electrical ? "electrical" : "mechanical");
        if (info->reference != NULL && strncmp(info->reference, "file ", 5) == 0)
            snprintf(v, sizeof v, "file %s, %zu samples", se_rel(r, info->reference + 5), res->reference_length);
        else
            snprintf(v, sizeof v, "%s, %zu samples", info->reference != NULL ? info->reference : "not given",
                     res->reference_length);
        se_param_row(b, "reference pulse", v);
        snprintf(v, sizeof v, "%s m/s", se_rb_g(b, res->speed_m_s, 6));
        se_param_row(b, "speed at the sensor", v);
        se_param_row(b, "speed source", info->speed_source);
        snprintf(v, sizeof v, "%s %% (one standard uncertainty)",
                 se_rb_g(b, isfinite(info->speed_uncertainty) ? info->speed_uncertainty * 100.0 : 0.0, 3));
        se_param_row(b, "speed uncertainty", v);
        if (isfinite(info->tension_n)) {
            snprintf(v, sizeof v, "%s N", se_rb_g(b, info->tension_n, 6));
            se_param_row(b, "tension", v);
        }
        if (isfinite(info->mass_per_length_kg_m)) {
            snprintf(v, sizeof v, "%s kg/m", se_rb_g(b, info->mass_per_length_kg_m, 6));
            se_param_row(b, "mass per length", v);
        }
        if (isfinite(info->axial_stiffness_n)) {
            snprintf(v, sizeof v, "%s N", se_rb_g(b, info->axial_stiffness_n, 6));
            se_param_row(b, "axial stiffness EA", v);
        }
        if (isfinite(info->velocity_factor)) {
            snprintf(v, sizeof v, "%s", se_rb_g(b, info->velocity_factor, 6));
            se_param_row(b, "velocity factor", v);
        }
        snprintf(v, sizeof v, "%s", se_rb_g(b, info->source_reflection, 6));
        se_param_row(b, "source-end reflection", v);
        snprintf(v, sizeof v, "%s per record", se_rb_g(b, info->false_alarms, 4));
        se_param_row(b, "false-alarm target", v);
        snprintf(v, sizeof v, "%s (%s x noise)", se_rb_g(b, res->threshold, 4), se_rb_g(b, res->threshold_sigma, 4));
        se_param_row(b, "detection threshold (reflection units)", v);
        snprintf(v, sizeof v, "%s", se_rb_g(b, res->noise_level, 4));
        se_param_row(b, "noise level (reflection units, 1.4826 MAD)", v);
        snprintf(v, sizeof v, "%s %%", se_rb_g(b, conf * 100.0, 3));
        se_param_row(b, "interval coverage", v);
        snprintf(v, sizeof v, "%s s", se_rb_g(b, res->t0_s, 9));
        se_param_row(b, "direct arrival (time origin)", v);
        snprintf(v, sizeof v, "%s (%s ms)", se_rb_dist(b, res->dead_zone_m, 3), se_rb_g(b, res->dead_zone_s * 1e3, 4));
        se_param_row(b, "dead zone", v);
        snprintf(v, sizeof v, "%s", se_rb_dist(b, res->resolution_m, 3));
        se_param_row(b, "resolution", v);
        snprintf(v, sizeof v, "%s Hz", se_rb_g(b, res->rms_bandwidth_hz, 5));
        se_param_row(b, "RMS bandwidth", v);
        snprintf(v, sizeof v, "%s", se_rb_dist(b, res->record_range_m, 1));
        se_param_row(b, "record reaches", v);
        se_attenuation_text(b, res, v, sizeof v);
        se_param_row(b, "attenuation", v);
        se_skin_text(b, res, v, sizeof v);
        se_param_row(b, "skin-effect loss", v[0] != '\0' ? v : "none (not modelled)");
        if (res->shots_found > 1) {
            int n = snprintf(v, sizeof v, "%zu found, %zu stacked", res->shots_found, res->shots_used);
            if (n > 0 && (size_t)n < sizeof v && res->shot_interval_s > 0.0) {
                if (isfinite(res->ring_down_s))
                    snprintf(v + n, sizeof v - (size_t)n, "; %s s apart; the line rings for %s s after a tap%s",
                             se_rb_g(b, res->shot_interval_s, 3), se_rb_g(b, res->ring_down_s, 3),
                             res->shots_overlap ? " (they overlap: see the warning)" : "");
                else
                    snprintf(v + n, sizeof v - (size_t)n, "; %s s apart; the line rings on past any interval%s",
                             se_rb_g(b, res->shot_interval_s, 3),
                             res->shots_overlap ? " (they overlap: see the warning)" : "");
            }
            se_param_row(b, "taps", v);
        }
        if (l->plot != NULL && isfinite(l->plot->gain_db_per_m) && l->plot->gain_db_per_m != 0.0) {
            snprintf(v, sizeof v, "%s dB/m (plot only)", se_rb_g(b, l->plot->gain_db_per_m, 4));
            se_param_row(b, "display gain with distance", v);
        }
        for (i = 0; i < l->n_params; i++)
            se_param_row(b, l->params[i].name, l->params[i].value);
    }
    se_rb_add(b, "</tbody></table>\n</section>\n");
    return SE_OK;
}

void se_report_init(se_report *report)
{
    if (report != NULL)
        memset(report, 0, sizeof *report);
}

void se_report_line_init(se_report_line *line)
{
    if (line != NULL)
        memset(line, 0, sizeof *line);
}

char *se_report_html(const se_report *r, se_error *err)
{
    se_rb *b;
    se_rmatch *m = NULL;
    size_t i, n_init = 0;
    const char *title;
    const char *const *cautions;
    size_t n_cautions;
    int survey;
    se_status st = SE_OK;
    char *out;

    if (r == NULL || r->lines == NULL || r->n_lines == 0) {
        se_fail(err, SE_ERR_ARG, "report: no line to report");
        return NULL;
    }
    if (r->units != SE_PLOT_METRES && r->units != SE_PLOT_FEET) {
        se_fail(err, SE_ERR_ARG, "report: unknown distance unit %d", (int)r->units);
        return NULL;
    }
    for (i = 0; i < r->n_lines; i++)
        if (r->lines[i].result == NULL || r->lines[i].info == NULL ||
            (r->lines[i].result->n_events > 0 && r->lines[i].result->events == NULL)) {
            se_fail(err, SE_ERR_ARG, "report: line %zu has no locate result or no run information", i + 1);
            return NULL;
        }
    b = se_calloc(1, sizeof *b, "report", err);
    m = se_calloc(r->n_lines, sizeof *m, "report lines", err);
    if (b == NULL || m == NULL) {
        free(b);
        free(m);
        return NULL;
    }
    b->k = r->units == SE_PLOT_FEET ? 1.0 / SE_FT : 1.0;
    b->u = r->units == SE_PLOT_FEET ? "ft" : "m";
    for (; n_init < r->n_lines && st == SE_OK; n_init++)
        st = se_rmatch_init(&m[n_init], &r->lines[n_init], r->lines[n_init].info->confidence, err);
    survey = r->survey || r->n_lines > 1;
    title = r->title != NULL ? r->title : (survey ? "Reflectometry survey report" : "Reflectometry report");

    se_rb_add(b, "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
                 "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>");
    se_rb_esc(b, title);
    if (r->site != NULL) {
        se_rb_add(b, " &ndash; ");
        se_rb_esc(b, r->site);
    }
    se_rb_add(b, "</title>\n<style>");
    se_rb_add(b, se_css);
    se_rb_add(b, "</style>\n</head>\n<body>\n<header>\n<h1>");
    se_rb_esc(b, title);
    se_rb_add(b, "</h1>\n<p class=\"meta\">");
    if (r->site != NULL) {
        se_rb_add(b, "Site: ");
        se_rb_esc(b, r->site);
        se_rb_add(b, ". ");
    }
    if (r->date != NULL) {
        se_rb_add(b, "Date: ");
        se_rb_esc(b, r->date);
        se_rb_add(b, ". ");
    }
    if (r->prepared_by != NULL) {
        se_rb_add(b, "Prepared by: ");
        se_rb_esc(b, r->prepared_by);
        se_rb_add(b, ". ");
    }
    se_rb_printf(b, "strandecho %s.</p>\n<p class=\"job\">", se_version());
    if (r->job != NULL) {
        se_rb_esc(b, r->job);
    } else if (!survey) {
        const se_report_line *l = &r->lines[0];
        se_rb_add(b, "Reflectometry of ");
        se_rb_esc(b, se_line_title(l));
        se_rb_add(b, ": a pulse injected at the sensor end, its echoes recorded in ");
        se_rb_esc(b, l->info->input_file != NULL ? se_rel(r, l->info->input_file) : "the recording");
        se_rb_printf(b, " (%s) and located along the line by matched filtering.", se_quantity_name(l->result->quantity));
    } else {
        se_rb_printf(b, "Reflectometry survey of %zu lines", r->n_lines);
        if (r->site != NULL) {
            se_rb_add(b, " at ");
            se_rb_esc(b, r->site);
        }
        se_rb_add(b, ": on each line a pulse injected at the sensor end, its echoes recorded and located along the "
                     "line by matched filtering.");
    }
    se_rb_add(b, "</p>\n</header>\n<main>\n");
    if (st == SE_OK && survey)
        se_report_summary(b, r, m);
    for (i = 0; st == SE_OK && i < r->n_lines; i++)
        st = se_report_section(b, r, i, &m[i], err);

    cautions = se_cautions(&n_cautions);
    se_rb_add(b, "<section id=\"cautions\">\n<h2>Cautions</h2>\n<ul class=\"cautions\">\n");
    for (i = 0; i < n_cautions; i++) {
        se_rb_add(b, "<li>");
        se_rb_esc(b, cautions[i]);
        se_rb_add(b, "</li>\n");
    }
    se_rb_add(b, "</ul>\n</section>\n</main>\n");
    se_rb_printf(b, "<footer>Written by strandecho %s. Distances from the sensor along the line, in %s; times are "
                    "round trip.</footer>\n</body>\n</html>\n",
                 se_version(), r->units == SE_PLOT_FEET ? "feet (0.3048 m)" : "metres");

    for (i = 0; i < n_init; i++)
        se_rmatch_free(&m[i]);
    free(m);
    if (st == SE_OK && b->sb.failed)
        st = se_fail(err, SE_ERR_NOMEM, "report: out of memory while writing the HTML");
    out = b->sb.p;
    if (st != SE_OK) {
        free(out);
        out = NULL;
    }
    free(b);
    return out;
}

se_status se_report_write(const se_report *report, const char *path, se_error *err)
{
    char *html;
    se_output *out;
    size_t len;
    if (path == NULL)
        return se_fail(err, SE_ERR_ARG, "report: no output path");
    html = se_report_html(report, err);
    if (html == NULL)
        return err != NULL ? err->code : SE_ERR_NOMEM;
    out = se_output_open(path, err);
    if (out == NULL) {
        free(html);
        return err != NULL ? err->code : SE_ERR_IO;
    }
    len = strlen(html);
    if (fwrite(html, 1, len, se_output_stream(out)) != len) {
        free(html);
        se_output_abort(out);
        return se_fail(err, SE_ERR_IO, "%s: cannot write the report", path);
    }
    free(html);
    return se_output_commit(out, err);
}
