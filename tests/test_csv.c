/* strandecho tests: text tables (CSV, semicolon, tab, whitespace) read as recordings. */
#include <locale.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/recording.h"
#include "testutil.h"

static void write_file(const char *path, const char *text, size_t n);
static se_recording *read_text(const char *path, const char *text, se_error *err);
static int read_fails(const char *path, const se_read_options *opt, se_error *err);
static int read_csv_fails(const char *path, se_error *err);
static void test_delimiters(void);
static void test_headers_comments(void);
static void test_rounded_times(void);
static void test_extensions(void);
static void test_errors(void);
static void test_size_limit(void);
static void test_locale(void);

/* 1 when reading fails (a recording read by mistake is freed, so failing checks do not leak). */
static int read_fails(const char *path, const se_read_options *opt, se_error *err)
{
    se_recording *rec = se_recording_read(path, opt, err);
    int failed = rec == NULL;
    se_recording_free(rec);
    return failed;
}

static int read_csv_fails(const char *path, se_error *err)
{
    se_recording *rec = se_recording_read_csv(path, NULL, err);
    int failed = rec == NULL;
    se_recording_free(rec);
    return failed;
}

static void write_file(const char *path, const char *text, size_t n)
{
    FILE *fp = fopen(path, "wb");
    if (!CHECK(fp != NULL))
        return;
    CHECK(fwrite(text, 1, n, fp) == n);
    fclose(fp);
}

/* Write text to path, read it with se_recording_read, remove the file. */
static se_recording *read_text(const char *path, const char *text, se_error *err)
{
    se_recording *rec;
    write_file(path, text, strlen(text));
    se_error_clear(err);
    rec = se_recording_read(path, NULL, err);
    remove(path);
    return rec;
}

static void test_delimiters(void)
{
    static const struct {
        const char *text, *format;
        double rate;
    } cases[] = {
        {"time,a,b\n0,0.5,1\n0.001,0.25,2\n0.002,-0.5,3\n", "CSV", 1000.0},
        {"t;a;b\n0;0.5;1\n0.5;0.25;2\n1.0;-0.5;3\n", "CSV semicolon", 2.0},
        {"0\t0.5\t1\n1e-3\t0.25\t2\n2e-3\t-0.5\t3\n", "CSV tab", 1000.0},
        {"  0   0.5  1\n 0.25\t0.25 2 \n0.5 -0.5   3\n", "CSV whitespace", 4.0},
        {"0, 0.5 ,1\n 1 ,0.25, 2\n2,-0.5,3 \n", "CSV", 1.0},
        {"\"time\",\"a\",\"b\"\n\"0\",\"0.5\",\"1\"\n\"1\",\"0.25\",\"2\"\n\"2\",\"-0.5\",\"3\"\n", "CSV", 1.0},
    };
    size_t k;
    for (k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        se_error err;
        se_recording *rec = read_text("delim.csv", cases[k].text, &err);
        if (!CHECK(rec != NULL)) {
            fprintf(stderr, "  case %zu: %s\n", k, err.message);
            continue;
        }
        CHECK(rec->channels == 2 && rec->frames == 3);
        if (!CHECK(strcmp(rec->format, cases[k].format) == 0))
            fprintf(stderr, "  case %zu: format '%s'\n", k, rec->format);
        CHECK_CLOSE(rec->rate, cases[k].rate, cases[k].rate * 1e-9, "rate from the median step");
        /* values parsed exactly (all are binary fractions) and stored channel-major */
        CHECK(rec->data[0] == 0.5 && rec->data[1] == 0.25 && rec->data[2] == -0.5);
        CHECK(rec->data[3] == 1.0 && rec->data[4] == 2.0 && rec->data[5] == 3.0);
        CHECK(strcmp(rec->path, "delim.csv") == 0);
        se_recording_free(rec);
    }
}

static void test_headers_comments(void)
{
    se_error err;
    se_recording *rec;
    /* several header lines, comments anywhere, blank lines, CRLF line ends, a UTF-8 BOM */
    rec = read_text("hdr.csv",
                    "\xef\xbb\xbf# exported trace\r\nInstrument: bench rig\r\ntime (s),volts\r\n\r\n"
                    "0,1\r\n# a comment between rows\r\n0.1,2\r\n   \r\n0.2,3\r\n0.3,4\r\n# end\r\n",
                    &err);
    if (CHECK(rec != NULL)) {
        CHECK(rec->channels == 1 && rec->frames == 4);
        CHECK_CLOSE(rec->rate, 10.0, 10.0 * 1e-9, "rate with comments");
        CHECK(rec->data[0] == 1.0 && rec->data[3] == 4.0);
        se_recording_free(rec);
    } else {
        fprintf(stderr, "  %s\n", err.message);
    }
    /* no header at all, one channel, negative start time */
    rec = read_text("nohdr.csv", "-0.002,5\n-0.001,6\n0,7\n0.001,8\n", &err);
    if (CHECK(rec != NULL)) {
        CHECK(rec->frames == 4 && rec->channels == 1 && rec->data[2] == 7.0);
        CHECK_CLOSE(rec->rate, 1000.0, 1000.0 * 1e-9, "rate, negative start");
        se_recording_free(rec);
    }
}

/* Times printed with 6 decimals at 3000 Hz step 0.000333 or 0.000334 s: within 1 % of the
 * median, accepted; the rate is 1 / median, within 0.3 % of 3000 Hz. */
static void test_rounded_times(void)
{
    char *text = malloc(300 * 40);
    size_t used = 0, i;
    se_error err;
    se_recording *rec;
    if (!CHECK(text != NULL))
        return;
    used += (size_t)sprintf(text + used, "time,v\n");
    for (i = 0; i < 300; i++)
        used += (size_t)sprintf(text + used, "%.6f,%zu\n", (double)i / 3000.0, i);
    rec = read_text("rounded.csv", text, &err);
    if (CHECK(rec != NULL)) {
        CHECK(rec->frames == 300);
        CHECK_CLOSE(rec->rate, 3000.0, 3000.0 * 3e-3, "rate from rounded times");
        CHECK(rec->data[299] == 299.0);
        se_recording_free(rec);
    } else {
        fprintf(stderr, "  %s\n", err.message);
    }
    free(text);
}

static void test_extensions(void)
{
    static const char *table = "0\t1\n0.5\t2\n1\t3\n";
    se_error err;
    se_recording *rec;
    rec = read_text("ext.tsv", table, &err);
    CHECK(rec != NULL && rec->frames == 3 && strcmp(rec->format, "CSV tab") == 0);
    se_recording_free(rec);
    rec = read_text("ext.TXT", table, &err);
    CHECK(rec != NULL && rec->frames == 3);
    se_recording_free(rec);
    /* not a known extension: libsndfile does not recognise it, the content is text */
    rec = read_text("ext.dat", "time,v\n0,1\n0.5,2\n1,3\n", &err);
    if (CHECK(rec != NULL))
        CHECK(rec->frames == 3 && strcmp(rec->format, "CSV") == 0 && rec->rate == 2.0);
    else
        fprintf(stderr, "  %s\n", err.message);
    se_recording_free(rec);
    /* the explicit text reader ignores the name */
    write_file("ext.bin", table, strlen(table));
    rec = se_recording_read_csv("ext.bin", NULL, &err);
    CHECK(rec != NULL && rec->frames == 3);
    se_recording_free(rec);
    remove("ext.bin");
}

static void test_errors(void)
{
    static const struct {
        const char *text;
        se_status code;
        const char *want; /* must appear in the message */
    } cases[] = {
        /* irregular spacing: steps 1 1 1.5 1, median 1 */
        {"0,1\n1,1\n2,1\n3.5,1\n4.5,1\n", SE_ERR_DATA,
         "bad.csv:4: time step 1.5 s differs from the median 1 s"},
        {"t,v\n0,1\n0.001,1\n0.002,1\n0.00302,1\n0.004,1\n", SE_ERR_DATA,
         "bad.csv:5: time step 0.00102 s differs from the median 0.001 s"},
        /* time not increasing */
        {"0,1\n1,2\n1,3\n", SE_ERR_DATA, "bad.csv:3:1: time 1 s is not after 1 s"},
        {"0,1\n1,2\n0.5,3\n", SE_ERR_DATA, "bad.csv:3:1: time 0.5 s is not after 1 s"},
        /* missing values */
        {"0,1,2\n1,,3\n", SE_ERR_FORMAT, "bad.csv:2:2: missing value"},
        {"0;1;2\n1;2;\n", SE_ERR_FORMAT, "bad.csv:2:3: missing value"},
        /* non-numeric values */
        {"t,a\n0,1\n1,abc\n", SE_ERR_FORMAT, "bad.csv:3:2: 'abc' is not a number"},
        {"0,x\n1,2\n", SE_ERR_FORMAT, "bad.csv:1:2: 'x' is not a number"},
        {"0 1\n1 2O\n", SE_ERR_FORMAT, "bad.csv:2:2: '2O' is not a number"},
        {"0,1\n1,2\ntime,v\n", SE_ERR_FORMAT, "bad.csv:3:1: 'time' is not a number"},
        /* ragged rows */
        {"0,1,2\n1,2\n", SE_ERR_FORMAT, "bad.csv:2:3: ragged row: 2 columns, the first data row (line 1) has 3"},
        {"h\n0,1\n1,2,3\n", SE_ERR_FORMAT, "bad.csv:3:3: ragged row: 3 columns, the first data row (line 2) has 2"},
        /* non-finite values */
        {"0,1\n1,nan\n", SE_ERR_DATA, "bad.csv:2:2: value 'nan' is not finite"},
        {"0,1\n1,1e999\n", SE_ERR_DATA, "bad.csv:2:2: value '1e999' is not finite"},
        {"0,1\ninf,1\n", SE_ERR_DATA, "bad.csv:2:1: value 'inf' is not finite"},
        /* too few rows, too few columns, nothing at all */
        {"t,v\n0,1\n", SE_ERR_DATA, "bad.csv:2: the time column has only 1 row"},
        {"0\n1\n2\n", SE_ERR_FORMAT, "bad.csv:1: only one column"},
        {"", SE_ERR_FORMAT, "bad.csv: no numeric data rows"},
        {"# only a comment\ntime,v\n", SE_ERR_FORMAT, "bad.csv: no numeric data rows"},
    };
    size_t k;
    for (k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        se_error err;
        se_recording *rec = read_text("bad.csv", cases[k].text, &err);
        CHECK(rec == NULL);
        se_recording_free(rec);
        if (!CHECK(err.code == cases[k].code && strstr(err.message, cases[k].want) != NULL))
            fprintf(stderr, "  case %zu: got [%s] %s\n  want [%s] %s\n", k, se_strerror(err.code),
                    err.message, se_strerror(cases[k].code), cases[k].want);
    }
    /* a NUL byte: binary data */
    {
        se_error err;
        write_file("bad.csv", "0,1\n1,\0002\n", 9);
        CHECK(read_fails("bad.csv", NULL, &err));
        CHECK(err.code == SE_ERR_FORMAT && strstr(err.message, "bad.csv:2: NUL byte") != NULL);
        remove("bad.csv");
        CHECK(read_fails("missing_table.csv", NULL, &err) && err.code == SE_ERR_IO &&
              strstr(err.message, "missing_table.csv") != NULL);
        CHECK(read_csv_fails(NULL, &err) && err.code == SE_ERR_ARG);
    }
}

/* 2 channels x 8 bytes per row: a 1000-byte limit admits 62 rows, so row 63 (line 63) is refused. */
static void test_size_limit(void)
{
    char text[100 * 24];
    size_t used = 0, i;
    se_read_options opt;
    se_error err;
    se_recording *rec;
    for (i = 0; i < 100; i++)
        used += (size_t)sprintf(text + used, "%zu,1,2\n", i);
    write_file("limit.csv", text, used);
    opt.max_bytes = 1000;
    CHECK(read_fails("limit.csv", &opt, &err));
    CHECK(err.code == SE_ERR_NOMEM && strstr(err.message, "limit.csv:63:") != NULL);
    opt.max_bytes = 1600;
    rec = se_recording_read("limit.csv", &opt, &err);
    CHECK(rec != NULL && rec->frames == 100);
    se_recording_free(rec);
    remove("limit.csv");
}

/* Numbers are read in the C locale even when the caller selected one with a decimal comma. Runs
 * only where such a locale is installed (none of them on a minimal system). */
static void test_locale(void)
{
    static const char *names[] = {"de_DE.UTF-8", "de_DE.utf8", "fr_FR.UTF-8", "nl_NL.UTF-8"};
    size_t k;
    for (k = 0; k < sizeof names / sizeof names[0]; k++) {
        if (setlocale(LC_NUMERIC, names[k]) != NULL) {
            se_error err;
            se_recording *rec = read_text("locale.csv", "0.0,0.5\n0.5,1.5\n1.0,2.5\n", &err);
            CHECK(rec != NULL && rec->data[0] == 0.5 && rec->rate == 2.0);
            se_recording_free(rec);
            setlocale(LC_NUMERIC, "C");
            return;
        }
    }
    printf("test_csv: no decimal-comma locale installed; locale check not run\n");
}

int main(void)
{
    test_delimiters();
    test_headers_comments();
    test_rounded_times();
    test_extensions();
    test_errors();
    test_size_limit();
    test_locale();
    return se_test_done("test_csv");
}
