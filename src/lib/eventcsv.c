/* strandecho: the located events as CSV (fields of docs/json.md, C-locale numbers). */
#include "strandecho/eventcsv.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/output.h"

/* Longest row: 18 fields of at most 24 characters. */
#define SE_CSV_ROW 512

static const char se_csv_header[] =
    "index,delay_s,delay_uncertainty_s,distance_m,distance_uncertainty_m,polarity,impedance,class,"
    "reflection,reflection_uncertainty,snr_db,low_confidence,multiple,multiple_of,"
    "predicted_multiple,previous_shot,skin_corrected,skin_shift_s\n";

static void se_csv_num(char *buf, size_t size, double v);
static size_t se_csv_row(const se_locate_result *res, size_t i, char *row);

/* "%.10g" with the point as decimal separator whatever LC_NUMERIC says: the locale's separator (a
 * run of characters that are no part of a C number) is put back to '.'. Empty when not finite. */
static void se_csv_num(char *buf, size_t size, double v)
{
    char tmp[64];
    size_t i, o = 0;
    int in_sep = 0;
    if (!isfinite(v)) {
        buf[0] = '\0';
        return;
    }
    snprintf(tmp, sizeof tmp, "%.10g", v);
    for (i = 0; tmp[i] && o + 1 < size; i++) {
        char c = tmp[i];
        if ((c >= '0' && c <= '9') || c == '-' || c == '+' || c == 'e' || c == 'E') {
            buf[o++] = c;
            in_sep = 0;
        } else if (!in_sep) {
            buf[o++] = '.';
            in_sep = 1;
        }
    }
    buf[o] = '\0';
}

static size_t se_csv_row(const se_locate_result *res, size_t i, char *row)
{
    const se_event *ev = &res->events[i];
    char f[9][32], mo[32] = "", ps[16] = "";
    int n;
    se_csv_num(f[0], sizeof f[0], ev->delay_s);
    se_csv_num(f[1], sizeof f[1], ev->delay_uncertainty_s);
    se_csv_num(f[2], sizeof f[2], ev->distance_m);
    se_csv_num(f[3], sizeof f[3], ev->distance_uncertainty_m);
    se_csv_num(f[4], sizeof f[4], ev->reflection);
    se_csv_num(f[5], sizeof f[5], ev->reflection_uncertainty);
    se_csv_num(f[6], sizeof f[6], ev->snr_db);
    se_csv_num(f[7], sizeof f[7], ev->predicted);
    /* skin_shift_s and previous_shot are null in the JSON when they do not apply: empty here */
    if (ev->skin_corrected)
        se_csv_num(f[8], sizeof f[8], ev->skin_shift_s);
    else
        f[8][0] = '\0';
    if (ev->multiple && ev->previous_shot > 0)
        snprintf(ps, sizeof ps, "%d", ev->previous_shot);
    if (ev->multiple) {
        if (ev->multiple_of[0] >= 0 && ev->multiple_of[1] >= 0)
            snprintf(mo, sizeof mo, "%d;%d", ev->multiple_of[0] + 1, ev->multiple_of[1] + 1);
        else if (ev->multiple_of[0] >= 0 || ev->multiple_of[1] >= 0)
            snprintf(mo, sizeof mo, "%d", (ev->multiple_of[0] >= 0 ? ev->multiple_of[0] : ev->multiple_of[1]) + 1);
    }
    n = snprintf(row, SE_CSV_ROW, "%zu,%s,%s,%s,%s,%s,%s,%s,%s,%s,%s,%s,%s,%s,%s,%s,%s,%s\n", i + 1, f[0], f[1],
                 f[2], f[3], se_event_polarity(ev), se_event_impedance(ev), se_event_class(res, ev), f[4], f[5],
                 f[6], ev->low_confidence ? "true" : "false", ev->multiple ? "true" : "false", mo, f[7], ps,
                 ev->skin_corrected ? "true" : "false", f[8]);
    return n > 0 && n < SE_CSV_ROW ? (size_t)n : 0;
}

char *se_events_csv(const se_locate_result *res, se_error *err)
{
    size_t i, len = sizeof se_csv_header - 1, cap;
    char *out;
    if (res == NULL || (res->n_events > 0 && res->events == NULL)) {
        se_fail(err, SE_ERR_ARG, "events csv: no result");
        return NULL;
    }
    if (se_mul_size(res->n_events + 1, SE_CSV_ROW, &cap) != 0) {
        se_fail(err, SE_ERR_NOMEM, "events csv: %zu events is too many", res->n_events);
        return NULL;
    }
    out = se_calloc(cap + sizeof se_csv_header, 1, "events csv", err);
    if (out == NULL)
        return NULL;
    memcpy(out, se_csv_header, len);
    for (i = 0; i < res->n_events; i++) {
        size_t n = se_csv_row(res, i, out + len);
        if (n == 0) {
            free(out);
            se_fail(err, SE_ERR_NOMEM, "events csv: row of event %zu too long", i + 1);
            return NULL;
        }
        len += n;
    }
    out[len] = '\0';
    return out;
}

se_status se_events_csv_write(const se_locate_result *res, const char *path, se_error *err)
{
    char *text = se_events_csv(res, err);
    se_output *out;
    size_t len;
    if (text == NULL)
        return err != NULL ? err->code : SE_ERR_NOMEM;
    out = se_output_open(path, err);
    if (out == NULL) {
        free(text);
        return err != NULL ? err->code : SE_ERR_IO;
    }
    len = strlen(text);
    if (fwrite(text, 1, len, se_output_stream(out)) != len) {
        free(text);
        se_output_abort(out);
        return se_fail(err, SE_ERR_IO, "%s: cannot write the events CSV", path);
    }
    free(text);
    return se_output_commit(out, err);
}
