/* strandecho tests: recordings read through libsndfile and written in each supported format. */
#include <dirent.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <sndfile.h>

#include "strandecho/recording.h"
#include "testutil.h"

#define NCH 3
#define NFR 1000

static double sample_value(unsigned c, size_t i);
static void fill(double *buf[NCH]);
static size_t count_temps(const char *prefix);
static long file_size(const char *path);
static int write_sf_short(const char *path, int format, int nch, const short *v, size_t frames);
static int read_fails(const char *path, const se_read_options *opt, se_error *err);
static void test_round_trips(void);
static void test_float_unclipped(void);
static void test_int_wav(void);
static void test_multichannel(void);
static void test_truncated(void);
static void test_empty_and_garbage(void);
static void test_nonfinite(void);
static void test_size_limit(void);
static void test_write_errors(void);
static void test_misc(void);
static void test_probe(void);
static se_recording *read_through_fifo(const unsigned char *bytes, size_t n, se_error *err);
static void test_fifo(void);

/* Deterministic test signal in [-1, 1] with exact -1, 0, +1 and small values (fixed LCG). */
/* 1 when reading fails (a recording read by mistake is freed, so failing checks do not leak). */
static int read_fails(const char *path, const se_read_options *opt, se_error *err)
{
    se_recording *rec = se_recording_read(path, opt, err);
    int failed = rec == NULL;
    se_recording_free(rec);
    return failed;
}

static double sample_value(unsigned c, size_t i)
{
    unsigned long x = 2463534242ul ^ (c * 7919ul + i * 104729ul);
    int k;
    if (i == 0)
        return 1.0;
    if (i == 1)
        return -1.0;
    if (i == 2)
        return 0.0;
    if (i == 3)
        return 1e-9 * (c + 1);
    for (k = 0; k < 3; k++)
        x = (x * 1103515245ul + 12345ul) & 0xfffffffful;
    return (double)x / 2147483647.5 - 1.0;
}

static void fill(double *buf[NCH])
{
    unsigned c;
    size_t i;
    for (c = 0; c < NCH; c++)
        for (i = 0; i < NFR; i++)
            buf[c][i] = sample_value(c, i);
}

/* Files in the working folder named "<prefix>.XXXXXX.tmp". */
static size_t count_temps(const char *prefix)
{
    size_t n = 0, lp = strlen(prefix);
    struct dirent *e;
    DIR *d = opendir(".");
    if (d == NULL)
        return (size_t)-1;
    while ((e = readdir(d)) != NULL) {
        size_t len = strlen(e->d_name);
        if (len == lp + 11 && strncmp(e->d_name, prefix, lp) == 0 &&
            strcmp(e->d_name + len - 4, ".tmp") == 0)
            n++;
    }
    closedir(d);
    return n;
}

static long file_size(const char *path)
{
    struct stat st;
    return stat(path, &st) == 0 ? (long)st.st_size : -1;
}

/* Interleaved 16-bit samples written straight through libsndfile. */
static int write_sf_short(const char *path, int format, int nch, const short *v, size_t frames)
{
    SF_INFO info;
    SNDFILE *f;
    sf_count_t n;
    memset(&info, 0, sizeof info);
    info.samplerate = 8000;
    info.channels = nch;
    info.format = format;
    f = sf_open(path, SFM_WRITE, &info);
    if (f == NULL)
        return -1;
    n = frames > 0 ? sf_writef_short(f, v, (sf_count_t)frames) : 0;
    sf_close(f);
    return n == (sf_count_t)frames ? 0 : -1;
}

static void test_round_trips(void)
{
    /* tolerance: float formats give back the float32-rounded value exactly; 24-bit FLAC is rounded
     * to k / 2^23 (so within 2^-23, the quantisation step); CSV prints %.17g, exact for double */
    static const struct {
        const char *path, *format;
        int kind; /* 0 float32, 1 int24, 2 exact */
    } cases[] = {
        {"rt.wav", "WAV float32", 0},   {"rt.flac", "FLAC 24-bit", 1},
        {"rt.aif", "AIFF float32", 0},  {"rt.aiff", "AIFF float32", 0},
        {"rt.w64", "W64 float32", 0},   {"rt.rf64", "RF64 float32", 0},
        {"rt.caf", "CAF float32", 0},   {"rt.csv", "CSV", 2},
        {"RT_UPPER.WAV", "WAV float32", 0},
    };
    double a[NFR], b[NFR], c3[NFR];
    double *buf[NCH] = {a, b, c3};
    size_t k;
    fill(buf);
    for (k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        se_error err;
        se_recording *rec;
        double worst = 0.0;
        unsigned c;
        size_t i;
        se_error_clear(&err);
        if (!CHECK(se_recording_write(cases[k].path, (const double *const *)buf, NCH, NFR, 48000.0,
                                      &err) == SE_OK)) {
            fprintf(stderr, "  %s: %s\n", cases[k].path, err.message);
            continue;
        }
        CHECK(count_temps(cases[k].path) == 0);
        rec = se_recording_read(cases[k].path, NULL, &err);
        if (!CHECK(rec != NULL)) {
            fprintf(stderr, "  %s: %s\n", cases[k].path, err.message);
            remove(cases[k].path);
            continue;
        }
        CHECK(rec->channels == NCH && rec->frames == NFR);
        if (cases[k].kind == 2)
            CHECK_CLOSE(rec->rate, 48000.0, 48000.0 * 1e-9, cases[k].path);
        else
            CHECK(rec->rate == 48000.0);
        if (!CHECK(strcmp(rec->format, cases[k].format) == 0))
            fprintf(stderr, "  %s: format '%s'\n", cases[k].path, rec->format);
        CHECK(rec->path != NULL && strcmp(rec->path, cases[k].path) == 0);
        for (c = 0; c < NCH; c++) {
            const double *got = se_recording_channel(rec, c);
            for (i = 0; i < NFR; i++) {
                double want = buf[c][i], d;
                if (cases[k].kind == 0)
                    want = (double)(float)want;
                d = fabs(got[i] - want);
                if (!(d <= worst))
                    worst = d;
            }
        }
        if (cases[k].kind == 1)
            CHECK_CLOSE(worst, 0.0, ldexp(1.0, -23), cases[k].path);
        else
            CHECK_CLOSE(worst, 0.0, 0.0, cases[k].path);
        se_recording_free(rec);
        remove(cases[k].path);
    }
}

/* Float formats keep values beyond [-1, 1] (a trace in volts or m/s is not clipped). */
static void test_float_unclipped(void)
{
    double v[4] = {1.5, -3.25, 1000.0, 0.125};
    const double *ch[1] = {v};
    se_error err;
    se_recording *rec;
    CHECK(se_recording_write("big.wav", ch, 1, 4, 1000.0, &err) == SE_OK);
    rec = se_recording_read("big.wav", NULL, &err);
    if (CHECK(rec != NULL)) {
        CHECK(rec->data[0] == 1.5 && rec->data[1] == -3.25 && rec->data[2] == 1000.0 &&
              rec->data[3] == 0.125);
        se_recording_free(rec);
    }
    remove("big.wav");
}

/* Integer WAV files written directly with libsndfile read back divided by 2^(bits-1): libsndfile
 * API documentation (sf_read_double normalises integer PCM to [-1.0, 1.0)); the exact divisor
 * 2^(bits-1) is from memory of libsndfile's conversion code and is what this test pins down. */
static void test_int_wav(void)
{
    static const short s16[] = {-32768, -1, 0, 1, 12345, 32767};
    static const int s24[] = {-8388608, -1, 0, 1, 1234567, 8388607};
    static const int s32[] = {-2147483647 - 1, -1, 0, 1, 123456789, 2147483647};
    int i32[6];
    se_error err;
    se_recording *rec;
    SF_INFO info;
    SNDFILE *f;
    size_t i;

    CHECK(write_sf_short("i16.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, 1, s16, 6) == 0);
    rec = se_recording_read("i16.wav", NULL, &err);
    if (CHECK(rec != NULL)) {
        CHECK(rec->frames == 6 && rec->channels == 1 && rec->rate == 8000.0);
        CHECK(strcmp(rec->format, "WAV 16-bit") == 0);
        for (i = 0; i < 6; i++)
            CHECK_CLOSE(rec->data[i], s16[i] / 32768.0, 0.0, "16-bit sample");
        se_recording_free(rec);
    }
    remove("i16.wav");

    /* 24-bit: libsndfile's int interface is 32-bit full scale, so k is passed as k * 256 */
    for (i = 0; i < 6; i++)
        i32[i] = s24[i] * 256;
    memset(&info, 0, sizeof info);
    info.samplerate = 44100;
    info.channels = 1;
    info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_24;
    f = sf_open("i24.wav", SFM_WRITE, &info);
    if (CHECK(f != NULL)) {
        CHECK(sf_writef_int(f, i32, 6) == 6);
        sf_close(f);
    }
    rec = se_recording_read("i24.wav", NULL, &err);
    if (CHECK(rec != NULL)) {
        CHECK(rec->frames == 6 && rec->rate == 44100.0 && strcmp(rec->format, "WAV 24-bit") == 0);
        for (i = 0; i < 6; i++)
            CHECK_CLOSE(rec->data[i], s24[i] / 8388608.0, 0.0, "24-bit sample");
        se_recording_free(rec);
    }
    remove("i24.wav");

    info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_32;
    f = sf_open("i32.wav", SFM_WRITE, &info);
    if (CHECK(f != NULL)) {
        CHECK(sf_writef_int(f, s32, 6) == 6);
        sf_close(f);
    }
    rec = se_recording_read("i32.wav", NULL, &err);
    if (CHECK(rec != NULL)) {
        CHECK(rec->frames == 6 && strcmp(rec->format, "WAV 32-bit") == 0);
        for (i = 0; i < 6; i++)
            CHECK_CLOSE(rec->data[i], s32[i] / 2147483648.0, 0.0, "32-bit sample");
        se_recording_free(rec);
    }
    remove("i32.wav");
}

/* Five channels: interleaved in the file, channel-major in memory. */
static void test_multichannel(void)
{
    enum { C = 5, F = 300 };
    short v[C * F];
    se_error err;
    se_recording *rec;
    size_t i;
    unsigned c;
    for (i = 0; i < F; i++)
        for (c = 0; c < C; c++)
            v[i * C + c] = (short)(c * 1000 + i);
    CHECK(write_sf_short("multi.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, C, v, F) == 0);
    rec = se_recording_read("multi.wav", NULL, &err);
    if (CHECK(rec != NULL)) {
        int ok = 1;
        CHECK(rec->channels == C && rec->frames == F);
        for (c = 0; c < C; c++) {
            const double *ch = se_recording_channel(rec, c);
            ok &= ch == rec->data + (size_t)c * F;
            for (i = 0; i < F; i++)
                ok &= ch[i] == (double)(c * 1000 + i) / 32768.0;
        }
        CHECK(ok);
        CHECK(se_recording_channel(rec, C) == NULL);
        se_recording_free(rec);
    }
    remove("multi.wav");
}

/* A header claiming more frames than the file holds. */
static void test_truncated(void)
{
    static const char *paths[] = {"trunc.wav", "trunc.aiff", "trunc.w64", "trunc.rf64", "trunc.flac"};
    double a[NFR], b[NFR];
    double *buf[2] = {a, b};
    short v[2 * NFR];
    char want[256];
    size_t k, i;
    for (i = 0; i < NFR; i++) {
        a[i] = sample_value(0, i);
        b[i] = sample_value(1, i);
    }
    for (k = 0; k < sizeof paths / sizeof paths[0]; k++) {
        se_error err;
        long size;
        CHECK(se_recording_write(paths[k], (const double *const *)buf, 2, NFR, 8000.0, &err) ==
              SE_OK);
        size = file_size(paths[k]);
        CHECK(size > 0 && truncate(paths[k], size / 2) == 0);
        se_error_clear(&err);
        CHECK(read_fails(paths[k], NULL, &err));
        snprintf(want, sizeof want, "%s: truncated: header says 1000 frames, file holds ", paths[k]);
        if (!CHECK(err.code == SE_ERR_FORMAT && strncmp(err.message, want, strlen(want)) == 0))
            fprintf(stderr, "  got: %s\n", err.message);
        remove(paths[k]);
    }
    /* 16-bit WAV: the exact count left is (bytes after the data chunk header) / 4 */
    for (i = 0; i < 2 * NFR; i++)
        v[i] = (short)(i * 7);
    if (CHECK(write_sf_short("trunc16.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, 2, v, NFR) == 0)) {
        unsigned char head[256];
        long off = -1, cut = 1500;
        FILE *fp = fopen("trunc16.wav", "rb");
        se_error err;
        if (fp != NULL) {
            size_t n = fread(head, 1, sizeof head, fp);
            for (i = 0; i + 4 <= n; i++)
                if (memcmp(head + i, "data", 4) == 0) {
                    off = (long)i + 8;
                    break;
                }
            fclose(fp);
        }
        CHECK(off > 0 && truncate("trunc16.wav", cut) == 0);
        CHECK(read_fails("trunc16.wav", NULL, &err));
        snprintf(want, sizeof want, "trunc16.wav: truncated: header says 1000 frames, file holds %ld",
                 (cut - off) / 4);
        if (!CHECK(err.code == SE_ERR_FORMAT && strcmp(err.message, want) == 0))
            fprintf(stderr, "  got: %s\n  want: %s\n", err.message, want);
    }
    remove("trunc16.wav");
}

static void test_empty_and_garbage(void)
{
    se_error err;
    FILE *fp;
    unsigned x = 99u;
    size_t i;
    short none[1] = {0};
    /* zero-length file */
    fp = fopen("empty.wav", "wb");
    if (fp != NULL)
        fclose(fp);
    CHECK(read_fails("empty.wav", NULL, &err));
    CHECK(err.code == SE_ERR_FORMAT && strstr(err.message, "empty.wav") != NULL &&
          strstr(err.message, "empty") != NULL);
    remove("empty.wav");
    /* a valid header with zero frames */
    CHECK(write_sf_short("zero.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, 1, none, 0) == 0);
    CHECK(read_fails("zero.wav", NULL, &err));
    CHECK(err.code == SE_ERR_DATA && strstr(err.message, "zero.wav: recording holds no samples") != NULL);
    remove("zero.wav");
    /* garbage bytes: libsndfile's own reason is quoted */
    fp = fopen("garbage.wav", "wb");
    if (CHECK(fp != NULL)) {
        for (i = 0; i < 4096; i++) {
            x = x * 1103515245u + 12345u;
            fputc((int)(x >> 16) & 0xff, fp);
        }
        fclose(fp);
    }
    CHECK(read_fails("garbage.wav", NULL, &err));
    CHECK(err.code == SE_ERR_FORMAT && strstr(err.message, "garbage.wav") != NULL &&
          strstr(err.message, "libsndfile") != NULL);
    remove("garbage.wav");
    /* text that is no table */
    fp = fopen("prose.dat", "wb");
    if (CHECK(fp != NULL)) {
        fputs("hello world\nnot numbers here\n", fp);
        fclose(fp);
    }
    CHECK(read_fails("prose.dat", NULL, &err));
    CHECK(err.code == SE_ERR_FORMAT && strstr(err.message, "prose.dat: no numeric data rows") != NULL);
    remove("prose.dat");
    /* missing file, directory */
    CHECK(read_fails("missing_rec.wav", NULL, &err));
    CHECK(err.code == SE_ERR_IO && strstr(err.message, "missing_rec.wav") != NULL);
    CHECK(read_fails(".", NULL, &err) && err.code == SE_ERR_IO);
    CHECK(read_fails(NULL, NULL, &err) && err.code == SE_ERR_ARG);
}

static void test_nonfinite(void)
{
    enum { C = 3, F = 2000 };
    float *v = calloc((size_t)C * F, sizeof(float));
    SF_INFO info;
    SNDFILE *f;
    se_error err;
    if (!CHECK(v != NULL))
        return;
    /* first in time order wins: the NaN at sample 1234 comes before the lower-channel Inf at 1300 */
    v[1234 * C + 2] = NAN;
    v[1300 * C + 0] = INFINITY;
    memset(&info, 0, sizeof info);
    info.samplerate = 1000;
    info.channels = C;
    info.format = SF_FORMAT_WAV | SF_FORMAT_FLOAT;
    f = sf_open("nan.wav", SFM_WRITE, &info);
    if (CHECK(f != NULL)) {
        CHECK(sf_writef_float(f, v, F) == F);
        sf_close(f);
    }
    CHECK(read_fails("nan.wav", NULL, &err));
    if (!CHECK(err.code == SE_ERR_DATA && strcmp(err.message, "nan.wav: sample 1234 (channel 3) is NaN") == 0))
        fprintf(stderr, "  got: %s\n", err.message);
    v[1234 * C + 2] = 0.0f;
    v[1999 * C + 1] = -INFINITY;
    f = sf_open("nan.wav", SFM_WRITE, &info);
    if (CHECK(f != NULL)) {
        CHECK(sf_writef_float(f, v, F) == F);
        sf_close(f);
    }
    CHECK(read_fails("nan.wav", NULL, &err));
    CHECK(err.code == SE_ERR_DATA && strcmp(err.message, "nan.wav: sample 1300 (channel 1) is +Inf") == 0);
    remove("nan.wav");
    free(v);
}

static void test_size_limit(void)
{
    double a[NFR], b[NFR];
    const double *buf[2] = {a, b};
    se_read_options opt;
    se_error err;
    se_recording *rec;
    size_t i;
    for (i = 0; i < NFR; i++)
        a[i] = b[i] = sample_value(2, i);
    CHECK(se_recording_write("limit.wav", buf, 2, NFR, 1000.0, &err) == SE_OK);
    /* 1000 frames x 2 channels x 8 bytes = 16000 bytes */
    opt.max_bytes = 15999;
    CHECK(read_fails("limit.wav", &opt, &err));
    CHECK(err.code == SE_ERR_NOMEM && strstr(err.message, "limit.wav") != NULL &&
          strstr(err.message, "15999") != NULL);
    opt.max_bytes = 16000;
    rec = se_recording_read("limit.wav", &opt, &err);
    CHECK(rec != NULL);
    se_recording_free(rec);
    remove("limit.wav");

    /* an absurd FLAC header (2^36 - 1 frames claimed in STREAMINFO) is refused before allocating:
     * STREAMINFO layout from the FLAC format specification (xiph.org): after "fLaC" and the 4-byte
     * block header, 10 bytes of block/frame sizes, then 20 bits rate, 3 bits channels-1, 5 bits
     * bits-1, 36 bits total samples */
    CHECK(se_recording_write("absurd.flac", buf, 2, NFR, 1000.0, &err) == SE_OK);
    {
        FILE *fp = fopen("absurd.flac", "r+b");
        unsigned char sb[8];
        if (CHECK(fp != NULL)) {
            CHECK(fseek(fp, 18, SEEK_SET) == 0 && fread(sb, 1, 8, fp) == 8);
            sb[3] |= 0x0f;
            sb[4] = sb[5] = sb[6] = sb[7] = 0xff;
            CHECK(fseek(fp, 18, SEEK_SET) == 0 && fwrite(sb, 1, 8, fp) == 8);
            fclose(fp);
        }
    }
    CHECK(read_fails("absurd.flac", NULL, &err));
    if (!CHECK(err.code == SE_ERR_NOMEM && strstr(err.message, "68719476735 frames") != NULL))
        fprintf(stderr, "  got: %s\n", err.message);
    remove("absurd.flac");
}

static void test_write_errors(void)
{
    double v[10] = {0, 0.5, -0.5, 0.25, 0, 0, 0, 0, 0, 0};
    double w[10] = {0, 0, 0, 0, 0, 0, 0, 1.0000001, 0, 0};
    const double *two[2] = {v, w};
    const double *nul[2] = {v, NULL};
    se_error err;
    se_recording *rec;
    FILE *fp;
    char text[64];
    size_t n;
    /* FLAC refuses |x| > 1 naming channel and sample; the old file stays, no temp is left */
    fp = fopen("range.flac", "wb");
    if (fp != NULL) {
        fputs("previous", fp);
        fclose(fp);
    }
    CHECK(se_recording_write("range.flac", two, 2, 10, 1000.0, &err) == SE_ERR_RANGE);
    CHECK(strstr(err.message, "range.flac: channel 1 sample 7") != NULL);
    fp = fopen("range.flac", "rb");
    n = fp != NULL ? fread(text, 1, sizeof text - 1, fp) : 0;
    if (fp != NULL)
        fclose(fp);
    text[n] = '\0';
    CHECK(strcmp(text, "previous") == 0);
    CHECK(count_temps("range.flac") == 0);
    remove("range.flac");
    /* the same data is fine in a float format */
    CHECK(se_recording_write("range.wav", two, 2, 10, 1000.0, &err) == SE_OK);
    remove("range.wav");
    /* non-finite samples */
    w[3] = NAN;
    CHECK(se_recording_write("nanw.wav", two, 2, 10, 1000.0, &err) == SE_ERR_DATA &&
          strstr(err.message, "channel 1 sample 3 is NaN") != NULL);
    CHECK(access("nanw.wav", F_OK) != 0);
    w[3] = 0;
    /* arguments */
    CHECK(se_recording_write("x.mp3", two, 2, 10, 1000.0, &err) == SE_ERR_ARG &&
          strstr(err.message, "x.mp3") != NULL);
    CHECK(se_recording_write("noext", two, 2, 10, 1000.0, &err) == SE_ERR_ARG);
    CHECK(se_recording_write("x.wav", two, 0, 10, 1000.0, &err) == SE_ERR_ARG);
    CHECK(se_recording_write("x.wav", two, 2, 0, 1000.0, &err) == SE_ERR_ARG);
    CHECK(se_recording_write("x.wav", two, 2, 10, 0.0, &err) == SE_ERR_ARG);
    CHECK(se_recording_write("x.wav", two, 2, 10, NAN, &err) == SE_ERR_ARG);
    CHECK(se_recording_write("x.wav", nul, 2, 10, 1000.0, &err) == SE_ERR_ARG);
    CHECK(se_recording_write(NULL, two, 2, 10, 1000.0, &err) == SE_ERR_ARG);
    CHECK(se_recording_write("x.wav", NULL, 2, 10, 1000.0, &err) == SE_ERR_ARG);
    /* sound files store whole Hz; CSV keeps any rate */
    CHECK(se_recording_write("x.wav", two, 2, 10, 1000.5, &err) == SE_ERR_RANGE);
    CHECK(access("x.wav", F_OK) != 0);
    CHECK(se_recording_write("frac.csv", two, 2, 10, 1000.5, &err) == SE_OK);
    rec = se_recording_read("frac.csv", NULL, &err);
    if (CHECK(rec != NULL)) {
        CHECK_CLOSE(rec->rate, 1000.5, 1000.5 * 1e-9, "CSV fractional rate");
        CHECK(rec->frames == 10 && rec->channels == 2 && rec->data[10 + 7] == 1.0000001);
        se_recording_free(rec);
    }
    remove("frac.csv");
    /* no folder to write into */
    CHECK(se_recording_write("no_such_folder_rec/x.wav", two, 2, 10, 1000.0, &err) == SE_ERR_IO);
}

static void test_misc(void)
{
    double v[5] = {0.1, 0.2, 0.3, 0.4, 0.5}, u[3] = {-0.1, -0.2, -0.3};
    const double *one[1] = {v}, *other[1] = {u};
    se_error err;
    se_recording *rec;
    /* writing over an existing recording replaces it whole */
    CHECK(se_recording_write("over.wav", one, 1, 5, 2000.0, &err) == SE_OK);
    CHECK(se_recording_write("over.wav", other, 1, 3, 4000.0, &err) == SE_OK);
    rec = se_recording_read("over.wav", NULL, &err);
    if (CHECK(rec != NULL)) {
        CHECK(rec->frames == 3 && rec->rate == 4000.0 && rec->data[2] == (double)(float)-0.3);
        se_recording_free(rec);
    }
    remove("over.wav");
    CHECK(se_recording_channel(NULL, 0) == NULL);
    se_recording_free(NULL);
}

/* Feed n bytes to "fifo.wav" (a named pipe: not seekable, no file length) from a child process
 * and read the recording from it. */
static se_recording *read_through_fifo(const unsigned char *bytes, size_t n, se_error *err)
{
    se_recording *rec;
    pid_t pid;
    int status = 0;
    remove("fifo.wav");
    if (!CHECK(mkfifo("fifo.wav", 0600) == 0))
        return NULL;
    pid = fork();
    if (pid == 0) {
        int fd;
        size_t done = 0;
        alarm(20); /* never hang the suite if the reader went away */
        fd = open("fifo.wav", O_WRONLY);
        while (fd >= 0 && done < n) {
            ssize_t w = write(fd, bytes + done, n - done);
            if (w <= 0)
                break;
            done += (size_t)w;
        }
        _exit(done == n ? 0 : 1);
    }
    if (!CHECK(pid > 0)) {
        remove("fifo.wav");
        return NULL;
    }
    rec = se_recording_read("fifo.wav", NULL, err);
    waitpid(pid, &status, 0);
    remove("fifo.wav");
    return rec;
}

static void test_fifo(void)
{
    enum { C = 2, F = 5000 };
    short v[C * F];
    unsigned char *bytes;
    long size;
    size_t i;
    se_error err;
    se_recording *rec;
    FILE *fp;
    for (i = 0; i < (size_t)C * F; i++)
        v[i] = (short)((i * 37) % 30000);
    CHECK(write_sf_short("fifo_src.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, C, v, F) == 0);
    size = file_size("fifo_src.wav");
    bytes = size > 0 ? malloc((size_t)size) : NULL;
    fp = fopen("fifo_src.wav", "rb");
    if (!CHECK(bytes != NULL && fp != NULL && fread(bytes, 1, (size_t)size, fp) == (size_t)size)) {
        if (fp != NULL)
            fclose(fp);
        free(bytes);
        remove("fifo_src.wav");
        return;
    }
    fclose(fp);
    rec = read_through_fifo(bytes, (size_t)size, &err);
    if (CHECK(rec != NULL)) {
        int ok = rec->frames == F && rec->channels == C;
        for (i = 0; ok && i < F; i++)
            ok = rec->data[i] == v[i * C] / 32768.0 && rec->data[F + i] == v[i * C + 1] / 32768.0;
        CHECK(ok);
        se_recording_free(rec);
    } else {
        fprintf(stderr, "  fifo: %s\n", err.message);
    }
    /* the stream stops half-way: the frames read fall short of the header's count */
    rec = read_through_fifo(bytes, (size_t)size / 2, &err);
    CHECK(rec == NULL);
    se_recording_free(rec);
    if (!CHECK(err.code == SE_ERR_FORMAT &&
               strstr(err.message, "fifo.wav: truncated: header says 5000 frames, file holds ") != NULL))
        fprintf(stderr, "  got: %s\n", err.message);
    /* a streamed header with the "length unknown" data size 0xFFFFFFFF (RIFF and data sizes,
     * Microsoft RIFF/WAVE layout: data size follows the "data" id): read to the end */
    for (i = 12; i + 8 <= (size_t)size; i++)
        if (memcmp(bytes + i, "data", 4) == 0)
            break;
    if (CHECK(i + 8 <= (size_t)size)) {
        memset(bytes + 4, 0xff, 4);
        memset(bytes + i + 4, 0xff, 4);
        rec = read_through_fifo(bytes, (size_t)size, &err);
        if (CHECK(rec != NULL)) {
            CHECK(rec->frames == F && rec->channels == C && rec->data[F + 7] == v[7 * C + 1] / 32768.0);
            se_recording_free(rec);
        } else {
            fprintf(stderr, "  fifo unknown length: %s\n", err.message);
        }
    }
    free(bytes);
    remove("fifo_src.wav");
}

/* The header alone (se_recording_probe): what se_recording_read says of the file, no samples;
 * text tables, missing files and directories refused with their names. */
static void test_probe(void)
{
    enum { C = 3, F = 257 };
    short v[C * F];
    se_error err;
    se_recording *rec, *hdr;
    size_t i;
    FILE *f;
    for (i = 0; i < C * F; i++)
        v[i] = (short)(i % 1000);
    CHECK(write_sf_short("probe.flac", SF_FORMAT_FLAC | SF_FORMAT_PCM_16, C, v, F) == 0);
    rec = se_recording_read("probe.flac", NULL, &err);
    hdr = se_recording_probe("probe.flac", &err);
    if (CHECK(rec != NULL && hdr != NULL)) {
        CHECK(hdr->frames == rec->frames && hdr->channels == rec->channels &&
              hdr->rate == rec->rate && hdr->data == NULL);
        CHECK(strcmp(hdr->format, rec->format) == 0 && strcmp(hdr->path, "probe.flac") == 0);
    }
    se_recording_free(rec);
    se_recording_free(hdr);
    remove("probe.flac");
    f = fopen("probe.csv", "w");
    if (CHECK(f != NULL)) {
        fputs("0,1\n0.001,2\n0.002,3\n", f);
        fclose(f);
        CHECK(se_recording_probe("probe.csv", &err) == NULL && err.code == SE_ERR_FORMAT &&
              strstr(err.message, "probe.csv") != NULL);
        rename("probe.csv", "probe.dat"); /* text by its content */
        CHECK(se_recording_probe("probe.dat", &err) == NULL && err.code == SE_ERR_FORMAT &&
              strstr(err.message, "text table") != NULL);
        remove("probe.dat");
    }
    CHECK(se_recording_probe("no-such-file.wav", &err) == NULL && err.code == SE_ERR_IO &&
          strstr(err.message, "no-such-file.wav") != NULL);
    CHECK(se_recording_probe(".", &err) == NULL && err.code == SE_ERR_IO);
    CHECK(se_recording_probe(NULL, &err) == NULL && err.code == SE_ERR_ARG);
}

int main(void)
{
    test_round_trips();
    test_float_unclipped();
    test_int_wav();
    test_multichannel();
    test_truncated();
    test_empty_and_garbage();
    test_nonfinite();
    test_size_limit();
    test_write_errors();
    test_misc();
    test_probe();
    test_fifo();
    return se_test_done("test_recording");
}
