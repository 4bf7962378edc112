/* strandecho: text tables (CSV/TSV/whitespace) read as recordings: a time column in seconds and
 * one column per channel; the rate comes from the median time step. */
#include <errno.h>
#include <locale.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/types.h>

#include "internal.h"
#include "strandecho/recording.h"

/* Longest field parsed as a number (longer ones are reported as non-numeric). */
#define SE_CSV_FIELD_MAX 128
/* Allowed relative deviation of each time step from the median step (tolerates printed rounding). */
#define SE_CSV_STEP_TOL 0.01

/* The table being read: rows of ncols values (time first), row-major. */
typedef struct se_csv {
    const char *path;
    size_t max;      /* byte limit of the channel samples as double */
    char delim;      /* 0 before the first data row, ' ' = runs of whitespace */
    size_t ncols;    /* columns of the first data row (time + channels) */
    size_t line0;    /* line of the first data row */
    size_t rows, cap;
    double *vals;    /* [size: cap * ncols] */
    size_t *lines;   /* [size: cap] line number of each row */
    double *row;     /* [size: ncols] the row being parsed */
} se_csv;

static char se_csv_detect(const char *s);
static int se_csv_field(const char *s, size_t *pos, int *done, char delim, const char **f,
                        size_t *flen);
static int se_csv_number(const char *f, size_t flen, double *v);
static int se_csv_is_hex(const char *f, size_t flen);
static int se_csv_decimal_comma(const char *f, size_t flen);
static se_status se_csv_line(se_csv *t, const char *s, size_t lineno, se_error *err);
static se_status se_csv_append(se_csv *t, size_t lineno, se_error *err);
static int se_csv_cmp(const void *a, const void *b);
static se_status se_csv_parse(se_csv *t, FILE *fp, se_error *err);
static se_status se_csv_finish(se_csv *t, se_recording *rec, se_error *err);

/* Delimiter of a data row: tab, else semicolon, else comma, else whitespace. */
static char se_csv_detect(const char *s)
{
    if (strchr(s, '\t') != NULL)
        return '\t';
    if (strchr(s, ';') != NULL)
        return ';';
    if (strchr(s, ',') != NULL)
        return ',';
    return ' ';
}

/* Next field of s from *pos: sets f/flen (surrounding blanks and double quotes removed) and returns
 * 1, or returns 0 when the line has no more fields. */
static int se_csv_field(const char *s, size_t *pos, int *done, char delim, const char **f,
                        size_t *flen)
{
    size_t p = *pos, b, e;
    if (*done)
        return 0;
    if (delim == ' ') {
        while (s[p] == ' ' || s[p] == '\t')
            p++;
        if (s[p] == '\0') {
            *done = 1;
            return 0;
        }
        b = p;
        while (s[p] != '\0' && s[p] != ' ' && s[p] != '\t')
            p++;
        e = p;
    } else {
        b = p;
        while (s[p] != '\0' && s[p] != delim)
            p++;
        e = p;
        if (s[p] == delim)
            p++;
        else
            *done = 1;
        while (b < e && (s[b] == ' ' || s[b] == '\t'))
            b++;
        while (e > b && (s[e - 1] == ' ' || s[e - 1] == '\t'))
            e--;
    }
    if (e - b >= 2 && s[b] == '"' && s[e - 1] == '"') {
        b++;
        e--;
    }
    *pos = p;
    *f = s + b;
    *flen = e - b;
    return 1;
}

/* 1 when the field is a hexadecimal number ("0x1p3"): strtod reads those, a table never means them. */
static int se_csv_is_hex(const char *f, size_t flen)
{
    size_t i = 0;
    if (i < flen && (f[i] == '+' || f[i] == '-'))
        i++;
    return flen - i >= 2 && f[i] == '0' && (f[i + 1] == 'x' || f[i + 1] == 'X');
}

/* 1 when the field is digits, one comma, digits ("0,001"): a number written with a decimal comma. */
static int se_csv_decimal_comma(const char *f, size_t flen)
{
    size_t i = 0, before = 0, after = 0;
    if (i < flen && (f[i] == '+' || f[i] == '-'))
        i++;
    while (i < flen && f[i] >= '0' && f[i] <= '9') {
        i++;
        before++;
    }
    if (i >= flen || f[i] != ',' || before == 0)
        return 0;
    for (i++; i < flen && f[i] >= '0' && f[i] <= '9'; i++)
        after++;
    return after > 0 && i == flen;
}

/* Whole field as a decimal number (strtod; the caller has selected the C locale). 1 on success. */
static int se_csv_number(const char *f, size_t flen, double *v)
{
    char buf[SE_CSV_FIELD_MAX];
    char *end;
    if (flen == 0 || flen >= sizeof buf || se_csv_is_hex(f, flen))
        return 0;
    memcpy(buf, f, flen);
    buf[flen] = '\0';
    *v = strtod(buf, &end);
    return end == buf + flen;
}

static se_status se_csv_append(se_csv *t, size_t lineno, se_error *err)
{
    size_t bytes;
    if (se_mul_size(t->rows + 1, (t->ncols - 1) * sizeof(double), &bytes) != 0 || bytes > t->max)
        return se_fail(err, SE_ERR_NOMEM, "%s:%zu: the table exceeds the limit of %zu bytes as double",
                       t->path, lineno, t->max);
    if (t->rows == t->cap) {
        size_t ncap = t->cap == 0 ? 1024 : t->cap * 2, vb, lb;
        double *nv;
        size_t *nl;
        if (se_mul_size(ncap, t->ncols * sizeof(double), &vb) != 0 ||
            se_mul_size(ncap, sizeof(size_t), &lb) != 0)
            return se_fail(err, SE_ERR_NOMEM, "%s:%zu: table too large", t->path, lineno);
        nv = realloc(t->vals, vb);
        if (nv == NULL)
            return se_fail(err, SE_ERR_NOMEM, "%s:%zu: cannot allocate %zu bytes", t->path, lineno, vb);
        t->vals = nv;
        nl = realloc(t->lines, lb);
        if (nl == NULL)
            return se_fail(err, SE_ERR_NOMEM, "%s:%zu: cannot allocate %zu bytes", t->path, lineno, lb);
        t->lines = nl;
        t->cap = ncap;
    }
    memcpy(t->vals + t->rows * t->ncols, t->row, t->ncols * sizeof(double));
    t->lines[t->rows] = lineno;
    t->rows++;
    return SE_OK;
}

/* One line (newline removed). Comments and blank lines are skipped; before the first data row a
 * line whose first field is not a number is a header. */
static se_status se_csv_line(se_csv *t, const char *s, size_t lineno, se_error *err)
{
    const char *f;
    size_t flen, pos = 0, col = 0;
    int done = 0;
    double v;
    while (*s == ' ' || *s == '\t')
        s++;
    if (*s == '\0' || *s == '#')
        return SE_OK;
    if (t->delim == 0) {
        char delim = se_csv_detect(s);
        size_t n = 0;
        if (!se_csv_field(s, &pos, &done, delim, &f, &flen))
            return SE_OK;
        if (delim != ',' && se_csv_decimal_comma(f, flen))
            return se_fail(err, SE_ERR_FORMAT,
                           "%s:%zu:1: '%.*s' has a decimal comma; write numbers with a decimal point",
                           t->path, lineno, (int)(flen > 40 ? 40 : flen), f);
        if (!se_csv_number(f, flen, &v))
            return SE_OK; /* header line */
        pos = 0;
        done = 0;
        while (se_csv_field(s, &pos, &done, delim, &f, &flen))
            n++;
        if (n < 2)
            return se_fail(err, SE_ERR_FORMAT,
                           "%s:%zu: only one column; need time (s) and at least one channel",
                           t->path, lineno);
        t->delim = delim;
        t->ncols = n;
        t->line0 = lineno;
        t->row = malloc(n * sizeof(double));
        if (t->row == NULL)
            return se_fail(err, SE_ERR_NOMEM, "%s:%zu: cannot allocate a row", t->path, lineno);
        pos = 0;
        done = 0;
    }
    while (se_csv_field(s, &pos, &done, t->delim, &f, &flen)) {
        col++;
        if (col > t->ncols)
            continue; /* counted for the ragged-row message */
        if (flen == 0)
            return se_fail(err, SE_ERR_FORMAT, "%s:%zu:%zu: missing value", t->path, lineno, col);
        if (se_csv_is_hex(f, flen))
            return se_fail(err, SE_ERR_FORMAT, "%s:%zu:%zu: '%.*s' is not a decimal number", t->path,
                           lineno, col, (int)(flen > 40 ? 40 : flen), f);
        if (!se_csv_number(f, flen, &v))
            return se_fail(err, SE_ERR_FORMAT, "%s:%zu:%zu: '%.*s' is not a number", t->path, lineno,
                           col, (int)(flen > 40 ? 40 : flen), f);
        if (!isfinite(v))
            return se_fail(err, SE_ERR_DATA, "%s:%zu:%zu: value '%.*s' is not finite", t->path,
                           lineno, col, (int)(flen > 40 ? 40 : flen), f);
        t->row[col - 1] = v;
    }
    if (col != t->ncols)
        return se_fail(err, SE_ERR_FORMAT,
                       "%s:%zu:%zu: ragged row: %zu columns, the first data row (line %zu) has %zu",
                       t->path, lineno, col < t->ncols ? col + 1 : t->ncols + 1, col, t->line0,
                       t->ncols);
    if (t->rows > 0) {
        double prev = t->vals[(t->rows - 1) * t->ncols];
        if (!(t->row[0] > prev))
            return se_fail(err, SE_ERR_DATA,
                           "%s:%zu:1: time %.10g s is not after %.10g s of the row before (line %zu)",
                           t->path, lineno, t->row[0], prev, t->lines[t->rows - 1]);
    }
    return se_csv_append(t, lineno, err);
}

static se_status se_csv_parse(se_csv *t, FILE *fp, se_error *err)
{
    char *line = NULL;
    size_t size = 0, lineno = 0;
    ssize_t len;
    se_status s = SE_OK;
    while ((len = getline(&line, &size, fp)) >= 0) {
        char *p = line;
        lineno++;
        if ((size_t)len != strlen(line)) {
            s = se_fail(err, SE_ERR_FORMAT, "%s:%zu: NUL byte: binary data, not a text table",
                        t->path, lineno);
            break;
        }
        while (len > 0 && (line[len - 1] == '\n' || line[len - 1] == '\r'))
            line[--len] = '\0';
        if (lineno == 1 && (unsigned char)p[0] == 0xef && (unsigned char)p[1] == 0xbb &&
            (unsigned char)p[2] == 0xbf)
            p += 3; /* UTF-8 byte order mark */
        s = se_csv_line(t, p, lineno, err);
        if (s != SE_OK)
            break;
    }
    if (s == SE_OK && ferror(fp))
        s = se_fail(err, SE_ERR_IO, "%s:%zu: read error: %s", t->path, lineno + 1, strerror(errno));
    free(line);
    if (s == SE_OK && lineno == 0)
        s = se_fail(err, SE_ERR_FORMAT, "%s: no numeric data rows: the file is empty (0 bytes)", t->path);
    if (s == SE_OK && t->rows == 0)
        s = se_fail(err, SE_ERR_FORMAT, "%s: no numeric data rows (%zu lines read)", t->path, lineno);
    return s;
}

static int se_csv_cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Rate from the median step, every step within SE_CSV_STEP_TOL of it, then channel-major data. */
static se_status se_csv_finish(se_csv *t, se_recording *rec, se_error *err)
{
    size_t n = t->rows, nst, i, nch = t->ncols - 1;
    double *steps, med;
    if (n < 2)
        return se_fail(err, SE_ERR_DATA,
                       "%s:%zu: the time column has only 1 row; at least 2 are needed for the rate",
                       t->path, t->lines[0]);
    nst = n - 1;
    steps = se_calloc(nst, sizeof(double), "time steps", err);
    if (steps == NULL)
        return SE_ERR_NOMEM;
    for (i = 0; i < nst; i++)
        steps[i] = t->vals[(i + 1) * t->ncols] - t->vals[i * t->ncols];
    qsort(steps, nst, sizeof(double), se_csv_cmp);
    med = nst % 2 ? steps[nst / 2] : 0.5 * (steps[nst / 2 - 1] + steps[nst / 2]);
    free(steps);
    if (!(med > 0.0) || !isfinite(1.0 / med))
        return se_fail(err, SE_ERR_DATA, "%s: median time step %.10g s gives no usable rate",
                       t->path, med);
    for (i = 0; i < nst; i++) {
        double dt = t->vals[(i + 1) * t->ncols] - t->vals[i * t->ncols];
        if (fabs(dt - med) > SE_CSV_STEP_TOL * med)
            return se_fail(err, SE_ERR_DATA,
                           "%s:%zu: time step %.10g s differs from the median %.10g s by more than "
                           "1 %%",
                           t->path, t->lines[i + 1], dt, med);
    }
    rec->data = se_calloc(n, nch * sizeof(double), t->path, err);
    if (rec->data == NULL)
        return SE_ERR_NOMEM;
    for (i = 0; i < n; i++) {
        size_t c;
        for (c = 0; c < nch; c++)
            rec->data[c * n + i] = t->vals[i * t->ncols + 1 + c];
    }
    rec->frames = n;
    rec->channels = (unsigned)nch;
    rec->rate = 1.0 / med;
    snprintf(rec->format, sizeof rec->format, "%s",
             t->delim == ',' ? "CSV" : t->delim == ';' ? "CSV semicolon"
                                   : t->delim == '\t' ? "CSV tab" : "CSV whitespace");
    return SE_OK;
}

se_recording *se_recording_read_csv(const char *path, const se_read_options *opt, se_error *err)
{
    se_csv t;
    se_recording *rec = NULL;
    locale_t cloc, old;
    se_status s;
    FILE *fp;
    if (path == NULL) {
        se_fail(err, SE_ERR_ARG, "recording: NULL path");
        return NULL;
    }
    memset(&t, 0, sizeof t);
    t.path = path;
    t.max = (opt != NULL && opt->max_bytes != 0) ? opt->max_bytes : SE_READ_DEFAULT_MAX_BYTES;
    fp = fopen(path, "r");
    if (fp == NULL) {
        se_fail(err, SE_ERR_IO, "%s: cannot open: %s", path, strerror(errno));
        return NULL;
    }
    cloc = newlocale(LC_NUMERIC_MASK, "C", (locale_t)0);
    if (cloc == (locale_t)0) {
        fclose(fp);
        se_fail(err, SE_ERR_NOMEM, "%s: cannot create the C locale for parsing numbers", path);
        return NULL;
    }
    old = uselocale(cloc); /* this thread only, restored below */
    s = se_csv_parse(&t, fp, err);
    uselocale(old);
    freelocale(cloc);
    fclose(fp);
    if (s == SE_OK) {
        rec = se_calloc(1, sizeof *rec, "recording", err);
        if (rec == NULL)
            s = SE_ERR_NOMEM;
    }
    if (s == SE_OK)
        s = se_csv_finish(&t, rec, err);
    if (s == SE_OK) {
        rec->path = se_strdup(path, err);
        if (rec->path == NULL)
            s = SE_ERR_NOMEM;
    }
    free(t.vals);
    free(t.lines);
    free(t.row);
    if (s != SE_OK) {
        se_recording_free(rec);
        return NULL;
    }
    return rec;
}
