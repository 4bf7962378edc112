/* strandecho benchmark (not a test): end-to-end streaming locate against the SciPy reference
 * (tests/bench/scipy_reference.py run by /usr/bin/python3) and against the bare overlap-save
 * correlation (in memory, no I/O, no detection), on generated float WAV recordings of 2^a..2^b
 * samples with pulses of 256 and 4096 samples.
 *
 * usage: bench_perf [--min-log2 A] [--max-log2 B] [--reps R] [--dir D] [--threads T] [--pulse M]
 *        bench_perf --child-bare N M T | --child-bare-float N M T   (one bare correlation, double
 *                                        or fftw3f single precision: time, and for float the
 *                                        largest error relative to max |r| of the double one)
 *        bench_perf --huge DIR [LOG2]   (one record of 2^LOG2 samples, default 30, M = 4096,
 *                                        written block by block as RF64 float, located, deleted)
 *   defaults: A = 20, B = 24, R = 5, D = /tmp/strandecho-bench, T = 2, pulses 256 and 4096.
 * Each measurement runs in its own child process (fork + exec of this program, so the child's
 * peak resident memory from wait4/getrusage is its own); the table shows medians of R runs.
 * Printed per size: times (s), ratios, peak memory (MiB) and whether both found the same events
 * (every SciPy peak after the direct arrival within 0.5 sample of a strandecho event and the same
 * count). */
/* wait4 (per-child rusage) is a BSD/glibc extension */
#define _DEFAULT_SOURCE
#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/time.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include <pthread.h>

#include <fftw3.h>
#include <sndfile.h>

#include "strandecho/locate.h"
#include "strandecho/recording.h"
#include "strandecho/stream.h"
#include "strandecho/xcorr.h"

#define PB_PI 3.14159265358979323846
#define PB_DIRECT 1000.0
#define PB_MAXLAGS 64

typedef struct pb_run {
    double seconds;      /* measured time */
    double maxrss_mib;   /* peak resident memory of the child */
    size_t nlags;
    double lags[PB_MAXLAGS];
    int ok;
} pb_run;

static double pb_now(void);
static double pb_pulse(size_t m, double u);
static void pb_make_pulse(size_t m, double *s);
static int pb_generate(const char *wav, const char *pulse, size_t n, size_t m);
static int pb_child_stream(const char *wav, const char *pulse, unsigned threads);
static int pb_child_bare(size_t n, size_t m, unsigned threads);
static int pb_child_bare_float(size_t n, size_t m, unsigned threads);
static pb_run pb_spawn(char *const argv[], int python);
static int pb_cmp(const void *a, const void *b);
static double pb_median(double *v, size_t n);

static double pb_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Gaussian-windowed sine of m samples: window sigma m/8, 16 cycles over the pulse. */
static double pb_pulse(size_t m, double u)
{
    double c = u - 0.5 * (double)m, w = (double)m / 8.0;
    if (u < 0.0 || u > (double)m)
        return 0.0;
    return exp(-c * c / (2.0 * w * w)) * sin(2.0 * PB_PI * 16.0 * c / (double)m);
}

static void pb_make_pulse(size_t m, double *s)
{
    size_t i;
    for (i = 0; i < m; i++)
        s[i] = pb_pulse(m, (double)i);
}

/* Direct arrival at 1000, six echoes spread over the record, noise sigma 1e-3 (xorshift64* +
 * Box-Muller, seed fixed), written as a mono float WAV; the pulse as raw float64. */
static int pb_generate(const char *wav, const char *pulse, size_t n, size_t m)
{
    static const double where[6] = {0.11, 0.23, 0.37, 0.52, 0.71, 0.93};
    static const double amp[6] = {0.5, -0.3, 0.2, -0.1, 0.08, 0.05};
    double *x = malloc(n * sizeof *x), *s = malloc(m * sizeof *s);
    const double *ch[1];
    uint64_t st = 88172645463325252ULL;
    size_t i, k;
    se_error err;
    FILE *f;
    int ok = 0;
    if (x == NULL || s == NULL)
        goto out;
    for (i = 0; i + 1 < n; i += 2) {
        double u1, u2, rr;
        st ^= st >> 12, st ^= st << 25, st ^= st >> 27;
        u1 = ((double)((st * 2685821657736338717ULL) >> 11) + 0.5) / 9007199254740992.0;
        st ^= st >> 12, st ^= st << 25, st ^= st >> 27;
        u2 = ((double)((st * 2685821657736338717ULL) >> 11) + 0.5) / 9007199254740992.0;
        rr = 1e-3 * sqrt(-2.0 * log(u1));
        x[i] = rr * cos(2.0 * PB_PI * u2);
        x[i + 1] = rr * sin(2.0 * PB_PI * u2);
    }
    if (n % 2)
        x[n - 1] = 0.0;
    for (k = 0; k < 7; k++) {
        double t0 = k == 0 ? PB_DIRECT : floor(where[k - 1] * (double)n) + 0.37;
        double a = k == 0 ? 1.0 : amp[k - 1];
        size_t i0 = (size_t)t0;
        for (i = i0; i < n && i <= i0 + m + 1; i++)
            x[i] += a * pb_pulse(m, (double)i - t0);
    }
    ch[0] = x;
    if (se_recording_write(wav, ch, 1, n, 1e6, &err) != SE_OK) {
        fprintf(stderr, "bench: %s\n", err.message);
        goto out;
    }
    pb_make_pulse(m, s);
    f = fopen(pulse, "wb");
    if (f == NULL || fwrite(s, sizeof *s, m, f) != m) {
        if (f != NULL)
            fclose(f);
        goto out;
    }
    ok = fclose(f) == 0;
out:
    free(x);
    free(s);
    return ok;
}

/* The same record as pb_generate (same noise sequence, direct arrival, six echoes) written block
 * by block, so its length is not limited by memory: RF64 float (the 64-bit-size WAV), since a
 * RIFF WAV cannot hold 2^30 float samples (4 GiB of data). */
static int pb_generate_stream(const char *wav, const char *pulse, size_t n, size_t m)
{
    static const double where[6] = {0.11, 0.23, 0.37, 0.52, 0.71, 0.93};
    static const double amp[6] = {0.5, -0.3, 0.2, -0.1, 0.08, 0.05};
    const size_t blk = (size_t)1 << 20;
    double *x = malloc(blk * sizeof *x), *s = malloc(m * sizeof *s), t0[7], a[7];
    uint64_t st = 88172645463325252ULL;
    size_t b, i, k;
    SF_INFO si;
    SNDFILE *f;
    FILE *fp;
    int ok = 0;
    if (x == NULL || s == NULL || blk % 2 != 0)
        goto out;
    for (k = 0; k < 7; k++) {
        t0[k] = k == 0 ? PB_DIRECT : floor(where[k - 1] * (double)n) + 0.37;
        a[k] = k == 0 ? 1.0 : amp[k - 1];
    }
    memset(&si, 0, sizeof si);
    si.samplerate = 1000000;
    si.channels = 1;
    si.format = SF_FORMAT_RF64 | SF_FORMAT_FLOAT;
    f = sf_open(wav, SFM_WRITE, &si);
    if (f == NULL) {
        fprintf(stderr, "bench: %s: %s\n", wav, sf_strerror(NULL));
        goto out;
    }
    for (b = 0; b < n; b += blk) {
        size_t len = n - b < blk ? n - b : blk;
        for (i = 0; i + 1 < len; i += 2) {
            double u1, u2, rr;
            st ^= st >> 12, st ^= st << 25, st ^= st >> 27;
            u1 = ((double)((st * 2685821657736338717ULL) >> 11) + 0.5) / 9007199254740992.0;
            st ^= st >> 12, st ^= st << 25, st ^= st >> 27;
            u2 = ((double)((st * 2685821657736338717ULL) >> 11) + 0.5) / 9007199254740992.0;
            rr = 1e-3 * sqrt(-2.0 * log(u1));
            x[i] = rr * cos(2.0 * PB_PI * u2);
            x[i + 1] = rr * sin(2.0 * PB_PI * u2);
        }
        if (len % 2)
            x[len - 1] = 0.0;
        for (k = 0; k < 7; k++) {
            size_t i0 = (size_t)t0[k], i1 = i0 + m + 2;
            for (i = i0 > b ? i0 : b; i < i1 && i < b + len; i++)
                x[i - b] += a[k] * pb_pulse(m, (double)i - t0[k]);
        }
        if (sf_writef_double(f, x, (sf_count_t)len) != (sf_count_t)len) {
            fprintf(stderr, "bench: %s: %s\n", wav, sf_strerror(f));
            sf_close(f);
            goto out;
        }
    }
    if (sf_close(f) != 0)
        goto out;
    pb_make_pulse(m, s);
    fp = fopen(pulse, "wb");
    if (fp == NULL || fwrite(s, sizeof *s, m, fp) != m) {
        if (fp != NULL)
            fclose(fp);
        goto out;
    }
    ok = fclose(fp) == 0;
    if (ok) {
        printf("expected lags:");
        for (k = 0; k < 7; k++)
            printf(" %.2f", t0[k]);
        printf("\n");
    }
out:
    free(x);
    free(s);
    return ok;
}

/* Child: streaming locate end to end; prints "seconds lag lag ..." (absolute lags). */
static int pb_child_stream(const char *wav, const char *pulse, unsigned threads)
{
    se_locate_config cfg;
    se_stream_config sc;
    se_locate_result res;
    se_stream_info info;
    se_error err;
    double *s, t0;
    size_t m, i;
    FILE *f = fopen(pulse, "rb");
    long len;
    if (f == NULL || fseek(f, 0, SEEK_END) != 0 || (len = ftell(f)) <= 0)
        return 1;
    m = (size_t)len / sizeof(double);
    s = malloc(m * sizeof *s);
    rewind(f);
    if (s == NULL || fread(s, sizeof *s, m, f) != m)
        return 1;
    fclose(f);
    se_locate_config_init(&cfg);
    cfg.speed_m_s = 3000.0;
    cfg.reference = s;
    cfg.reference_length = m;
    cfg.reference_offset = (size_t)PB_DIRECT;
    cfg.reference_kind = SE_REF_CHANNEL;
    se_stream_config_init(&sc);
    sc.threads = threads;
    t0 = pb_now();
    if (se_locate_stream(wav, &cfg, &sc, &res, &info, &err) != SE_OK) {
        fprintf(stderr, "bench: %s\n", err.message);
        return 1;
    }
    printf("%.6f", pb_now() - t0);
    printf(" %.4f", res.t0_s * res.rate_hz);
    for (i = 0; i < res.n_events; i++)
        printf(" %.4f", res.t0_s * res.rate_hz + res.events[i].lag_samples);
    printf("\n");
    se_locate_result_free(&res);
    free(s);
    return 0;
}

typedef struct pb_part {
    const se_xcorr *xc;
    se_xcorr_work *w;
    const double *x;
    size_t n, from, to, lc;
    double *r;
} pb_part;

/* lags [from, to) in chunks of lc (multiples of the step), as the stream does */
/* Time fn on the first half of a record in this thread and, with two, on the second in another:
 * the seconds from start to both done. */
static double pb_halves(void *(*fn)(void *), void *first, void *second, int two)
{
    pthread_t tid;
    double t0 = pb_now();
    if (two && pthread_create(&tid, NULL, fn, second) == 0) {
        fn(first);
        pthread_join(tid, NULL);
    } else {
        fn(first);
        if (two)
            fn(second);
    }
    return pb_now() - t0;
}

static void *pb_part_run(void *arg)
{
    pb_part *p = arg;
    size_t o, m = se_xcorr_pulse_length(p->xc);
    for (o = p->from; o < p->to; o += p->lc) {
        size_t nout = p->to - o < p->lc ? p->to - o : p->lc;
        size_t nin = p->n - o < nout + m - 1 ? p->n - o : nout + m - 1;
        se_xcorr_run_part(p->xc, p->w, p->x + o, nin, nout, p->r + o, NULL);
    }
    return NULL;
}

/* Child: the bare overlap-save correlation of an in-memory record (generation not timed). */
static int pb_child_bare(size_t n, size_t m, unsigned threads)
{
    double *x = malloc(n * sizeof *x), *r = malloc(n * sizeof *r), *s = malloc(m * sizeof *s);
    se_xcorr *xc;
    pb_part part[2];
    size_t i, step, lc, half;
    se_error err;
    if (x == NULL || r == NULL || s == NULL)
        return 1;
    for (i = 0; i < n; i++)
        x[i] = sin(0.001 * (double)i * (double)(i % 13));
    pb_make_pulse(m, s);
    xc = se_xcorr_create(s, m, 0, &err);
    if (xc == NULL)
        return 1;
    step = se_xcorr_step(xc);
    lc = ((size_t)1 << 17) < step ? step : ((size_t)1 << 17) / step * step;
    half = threads > 1 ? (n / 2 + lc - 1) / lc * lc : n;
    if (half > n)
        half = n;
    for (i = 0; i < 2; i++) {
        part[i].xc = xc;
        part[i].w = se_xcorr_work_create(xc, &err);
        part[i].x = x;
        part[i].n = n;
        part[i].lc = lc;
        part[i].r = r;
    }
    part[0].from = 0;
    part[0].to = half;
    part[1].from = half;
    part[1].to = n;
    printf("%.6f\n", pb_halves(pb_part_run, &part[0], &part[1], threads > 1 && half < n));
    se_xcorr_work_destroy(part[0].w);
    se_xcorr_work_destroy(part[1].w);
    se_xcorr_destroy(xc);
    free(x);
    free(r);
    free(s);
    return 0;
}

/* The same overlap-save correlation in single precision (fftw3f, FFTW_ESTIMATE, the double
 * engine's block and chunks, input and output in float), for the cost a float detection pass
 * would have: not used by strandecho (docs/performance.md says why). Prints its time and the
 * largest |r_float - r_double| over the record relative to max |r_double|. */
typedef struct pb_fpart {
    fftwf_plan fwd, inv;
    fftwf_complex *h; /* not const: a pointer to a const array type is not C11-compatible */
    const float *x;
    size_t n, m, from, to, block, step;
    float *r, *in, *out;
    fftwf_complex *spec;
} pb_fpart;

static void *pb_fpart_run(void *arg)
{
    pb_fpart *p = arg;
    size_t o, q, nb = p->block / 2 + 1;
    for (o = p->from; o < p->to; o += p->step) {
        size_t cnt = p->n - o < p->block ? p->n - o : p->block;
        size_t nout = p->to - o < p->step ? p->to - o : p->step;
        memcpy(p->in, p->x + o, cnt * sizeof *p->in);
        if (cnt < p->block)
            memset(p->in + cnt, 0, (p->block - cnt) * sizeof *p->in);
        fftwf_execute_dft_r2c(p->fwd, p->in, p->spec);
        for (q = 0; q < nb; q++) {
            float re = p->spec[q][0] * p->h[q][0] - p->spec[q][1] * p->h[q][1];
            float im = p->spec[q][0] * p->h[q][1] + p->spec[q][1] * p->h[q][0];
            p->spec[q][0] = re;
            p->spec[q][1] = im;
        }
        fftwf_execute_dft_c2r(p->inv, p->spec, p->out);
        memcpy(p->r + o, p->out, nout * sizeof *p->r);
    }
    return NULL;
}

static int pb_child_bare_float(size_t n, size_t m, unsigned threads)
{
    float *x = malloc(n * sizeof *x), *r = malloc(n * sizeof *r);
    double *xd = malloc(n * sizeof *xd), *rd = malloc(n * sizeof *rd), *s = malloc(m * sizeof *s);
    double e = 0.0, emax = 0.0, rmax = 0.0;
    size_t i, block = 1024, nb, step, half;
    fftwf_complex *h;
    float *tin;
    pb_fpart part[2];
    se_xcorr *xc;
    se_xcorr_work *w;
    se_error err;
    if (x == NULL || r == NULL || xd == NULL || rd == NULL || s == NULL)
        return 1;
    for (i = 0; i < n; i++) {
        xd[i] = sin(0.001 * (double)i * (double)(i % 13));
        x[i] = (float)xd[i];
    }
    pb_make_pulse(m, s);
    while (block < 8 * m) /* se_xcorr's automatic block */
        block <<= 1;
    step = block - m + 1;
    nb = block / 2 + 1;
    h = fftwf_malloc(nb * sizeof *h);
    tin = fftwf_malloc(block * sizeof *tin);
    for (i = 0; i < 2; i++) {
        part[i].in = fftwf_malloc(block * sizeof *part[i].in);
        part[i].out = fftwf_malloc(block * sizeof *part[i].out);
        part[i].spec = fftwf_malloc(nb * sizeof *part[i].spec);
        if (part[i].in == NULL || part[i].out == NULL || part[i].spec == NULL)
            return 1;
    }
    if (h == NULL || tin == NULL)
        return 1;
    part[0].fwd = fftwf_plan_dft_r2c_1d((int)block, part[0].in, part[0].spec, FFTW_ESTIMATE);
    part[0].inv = fftwf_plan_dft_c2r_1d((int)block, part[0].spec, part[0].out, FFTW_ESTIMATE);
    for (i = 0; i < m; i++)
        e += s[i] * s[i];
    memset(tin, 0, block * sizeof *tin);
    for (i = 0; i < m; i++)
        tin[i] = (float)s[i];
    fftwf_execute_dft_r2c(part[0].fwd, tin, h);
    for (i = 0; i < nb; i++) { /* conj(S) / (B E_s), as se_xcorr */
        h[i][0] = (float)(h[i][0] / ((double)block * e));
        h[i][1] = (float)(-h[i][1] / ((double)block * e));
    }
    half = threads > 1 ? (n / 2 + step - 1) / step * step : n;
    if (half > n)
        half = n;
    for (i = 0; i < 2; i++) {
        part[i].fwd = part[0].fwd;
        part[i].inv = part[0].inv;
        part[i].h = h;
        part[i].x = x;
        part[i].n = n;
        part[i].m = m;
        part[i].block = block;
        part[i].step = step;
        part[i].r = r;
    }
    part[0].from = 0;
    part[0].to = half;
    part[1].from = half;
    part[1].to = n;
    printf("%.6f", pb_halves(pb_fpart_run, &part[0], &part[1], threads > 1 && half < n));
    /* accuracy against the double engine (not timed) */
    xc = se_xcorr_create(s, m, 0, &err);
    w = xc != NULL ? se_xcorr_work_create(xc, &err) : NULL;
    if (w != NULL && se_xcorr_run(xc, w, xd, n, rd, &err) == SE_OK) {
        for (i = 0; i < n; i++) {
            emax = fmax(emax, fabs((double)r[i] - rd[i]));
            rmax = fmax(rmax, fabs(rd[i]));
        }
        printf(" %.3g", emax / rmax);
    }
    printf("\n");
    se_xcorr_work_destroy(w);
    se_xcorr_destroy(xc);
    fftwf_destroy_plan(part[0].fwd);
    fftwf_destroy_plan(part[0].inv);
    for (i = 0; i < 2; i++) {
        fftwf_free(part[i].in);
        fftwf_free(part[i].out);
        fftwf_free(part[i].spec);
    }
    fftwf_free(h);
    fftwf_free(tin);
    free(x);
    free(r);
    free(xd);
    free(rd);
    free(s);
    return 0;
}

/* Run argv in a child, read its one line of output, its peak memory from wait4. For the
 * python reference the time is the script's own (read to peaks, imports excluded). */
static pb_run pb_spawn(char *const argv[], int python)
{
    pb_run out;
    int fd[2], status;
    pid_t pid;
    struct rusage ru;
    char buf[8192];
    size_t got = 0;
    ssize_t k;
    char *p, *e;
    memset(&out, 0, sizeof out);
    if (pipe(fd) != 0)
        return out;
    pid = fork();
    if (pid == 0) {
        close(fd[0]);
        dup2(fd[1], 1);
        execv(argv[0], argv);
        _exit(127);
    }
    close(fd[1]);
    while (got + 1 < sizeof buf && (k = read(fd[0], buf + got, sizeof buf - 1 - got)) > 0)
        got += (size_t)k;
    buf[got] = '\0';
    close(fd[0]);
    if (pid < 0 || wait4(pid, &status, 0, &ru) != pid || !WIFEXITED(status) || WEXITSTATUS(status) != 0)
        return out;
    out.maxrss_mib = (double)ru.ru_maxrss / 1024.0; /* ru_maxrss is in KiB on Linux */
    out.seconds = strtod(buf, &p);
    (void)python;
    while (out.nlags < PB_MAXLAGS) {
        double v = strtod(p, &e);
        if (e == p)
            break;
        out.lags[out.nlags++] = v;
        p = e;
    }
    out.ok = 1;
    return out;
}

static int pb_cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static double pb_median(double *v, size_t n)
{
    qsort(v, n, sizeof *v, pb_cmp);
    return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

int main(int argc, char **argv)
{
    int a = 20, b = 24, reps = 5, lg, ai;
    unsigned threads = 2;
    const char *dir = "/tmp/strandecho-bench";
    size_t pulses[2] = {256, 4096}, npulses = 2, pi;
    char self[4096], script[4200];
    ssize_t sl;

    if (argc >= 2 && strcmp(argv[1], "--child-stream") == 0 && argc == 5)
        return pb_child_stream(argv[2], argv[3], (unsigned)atoi(argv[4]));
    if (argc >= 2 && strcmp(argv[1], "--generate") == 0 && argc == 6)
        return pb_generate(argv[4], argv[5], (size_t)strtoull(argv[2], NULL, 10),
                           (size_t)strtoull(argv[3], NULL, 10)) ? 0 : 1;
    if (argc >= 2 && strcmp(argv[1], "--huge") == 0 && argc >= 3) {
        /* --huge DIR [LOG2]: one streamed record of 2^LOG2 samples (default 30), M = 4096,
         * generated block by block, located once (own child, peak RSS), then deleted */
        int lg2 = argc >= 4 ? atoi(argv[3]) : 30;
        char wav[4300], pul[4300], self2[4096];
        char *av[] = {self2, "--child-stream", wav, pul, "2", NULL};
        double tg;
        ssize_t l2 = readlink("/proc/self/exe", self2, sizeof self2 - 1);
        pb_run x;
        if (l2 <= 0 || lg2 < 16 || lg2 > 34)
            return 2;
        self2[l2] = '\0';
        snprintf(wav, sizeof wav, "%s/huge_%d.rf64", argv[2], lg2);
        snprintf(pul, sizeof pul, "%s/pulse_4096.f64", argv[2]);
        tg = pb_now();
        if (!pb_generate_stream(wav, pul, (size_t)1 << lg2, 4096))
            return 1;
        printf("generated %s (2^%d samples, float) in %.1f s\n", wav, lg2, pb_now() - tg);
        fflush(stdout);
        x = pb_spawn(av, 0);
        remove(wav);
        if (!x.ok) {
            printf("the streaming locate failed (see stderr)\n");
            return 1;
        }
        printf("stream end to end: %.3f s, peak RSS %.1f MiB, lags:", x.seconds, x.maxrss_mib);
        for (ai = 0; ai < (int)x.nlags; ai++)
            printf(" %.4f", x.lags[ai]);
        printf("\n");
        return 0;
    }
    if (argc >= 2 && strcmp(argv[1], "--child-bare-float") == 0 && argc == 5)
        return pb_child_bare_float((size_t)strtoull(argv[2], NULL, 10),
                                   (size_t)strtoull(argv[3], NULL, 10), (unsigned)atoi(argv[4]));
    if (argc >= 2 && strcmp(argv[1], "--child-bare") == 0 && argc == 5)
        return pb_child_bare((size_t)strtoull(argv[2], NULL, 10), (size_t)strtoull(argv[3], NULL, 10),
                             (unsigned)atoi(argv[4]));
    for (ai = 1; ai + 1 < argc; ai += 2) {
        if (strcmp(argv[ai], "--min-log2") == 0)
            a = atoi(argv[ai + 1]);
        else if (strcmp(argv[ai], "--max-log2") == 0)
            b = atoi(argv[ai + 1]);
        else if (strcmp(argv[ai], "--reps") == 0)
            reps = atoi(argv[ai + 1]);
        else if (strcmp(argv[ai], "--dir") == 0)
            dir = argv[ai + 1];
        else if (strcmp(argv[ai], "--threads") == 0)
            threads = (unsigned)atoi(argv[ai + 1]);
        else if (strcmp(argv[ai], "--pulse") == 0) {
            pulses[0] = (size_t)strtoull(argv[ai + 1], NULL, 10);
            npulses = 1;
        }
    }
    if (reps < 1 || reps > 99 || a < 10 || b > 31 || a > b) {
        fprintf(stderr, "bench_perf: bad options\n");
        return 2;
    }
    sl = readlink("/proc/self/exe", self, sizeof self - 1);
    if (sl <= 0)
        return 1;
    self[sl] = '\0';
    {
        /* the script sits in the source tree: tests/bench/ next to this file */
        const char *src = getenv("SE_SOURCE_DIR");
        snprintf(script, sizeof script, "%s/tests/bench/scipy_reference.py",
                 src != NULL ? src : "/work/main");
    }
    if (mkdir(dir, 0755) != 0 && errno != EEXIST) {
        fprintf(stderr, "bench_perf: cannot create %s\n", dir);
        return 1;
    }
    printf("threads %u, medians of %d runs; times in s, memory = peak RSS in MiB\n", threads, reps);
    printf("%8s %5s | %9s %9s %9s | %7s %7s | %7s %7s %7s | %s\n", "N", "M", "stream", "scipy", "bare",
           "sci/str", "str/bare", "MiBstr", "MiBsci", "MiBbare", "same events");
    for (lg = a; lg <= b; lg++) {
        for (pi = 0; pi < npulses; pi++) {
            size_t n = (size_t)1 << lg, m = pulses[pi];
            char wav[4300], pul[4300], ns[32], ms[32], ts[16], ks[16];
            double tst[99], tsc[99], tba[99], rst = 0, rsc = 0, rba = 0;
            pb_run last_st, last_sc;
            int r, same = 0, failed = 0;
            snprintf(wav, sizeof wav, "%s/rec_%d_%zu.wav", dir, lg, m);
            snprintf(pul, sizeof pul, "%s/pulse_%zu.f64", dir, m);
            if (!pb_generate(wav, pul, n, m)) {
                fprintf(stderr, "bench_perf: cannot generate %s\n", wav);
                return 1;
            }
            snprintf(ns, sizeof ns, "%zu", n);
            snprintf(ms, sizeof ms, "%zu", m);
            snprintf(ts, sizeof ts, "%u", threads);
            snprintf(ks, sizeof ks, "%s", "6");
            memset(&last_st, 0, sizeof last_st);
            memset(&last_sc, 0, sizeof last_sc);
            for (r = 0; r < reps; r++) {
                char *av_st[] = {self, "--child-stream", wav, pul, ts, NULL};
                char *av_sc[] = {"/usr/bin/python3", script, wav, pul, ks, NULL};
                char *av_ba[] = {self, "--child-bare", ns, ms, ts, NULL};
                pb_run x = pb_spawn(av_st, 0), y = pb_spawn(av_sc, 1), z = pb_spawn(av_ba, 0);
                if (!x.ok || !y.ok || !z.ok) {
                    failed = 1;
                    break;
                }
                tst[r] = x.seconds;
                tsc[r] = y.seconds;
                tba[r] = z.seconds;
                if (x.maxrss_mib > rst)
                    rst = x.maxrss_mib;
                if (y.maxrss_mib > rsc)
                    rsc = y.maxrss_mib;
                if (z.maxrss_mib > rba)
                    rba = z.maxrss_mib;
                last_st = x;
                last_sc = y;
            }
            if (failed) {
                printf("%8zu %5zu | a child failed (see stderr)\n", n, m);
                continue;
            }
            /* same events: strandecho's list is [direct, events...], SciPy's all peaks */
            if (last_st.nlags == last_sc.nlags) {
                size_t i;
                same = 1;
                for (i = 0; i < last_st.nlags; i++)
                    if (fabs(last_st.lags[i] - last_sc.lags[i]) > 0.5)
                        same = 0;
            }
            {
                double ms_ = pb_median(tst, (size_t)reps), msc = pb_median(tsc, (size_t)reps);
                double mba = pb_median(tba, (size_t)reps);
                printf("%8zu %5zu | %9.4f %9.4f %9.4f | %7.1f %7.2f | %7.1f %7.1f %7.1f | %s (%zu/%zu)\n",
                       n, m, ms_, msc, mba, msc / ms_, ms_ / mba, rst, rsc, rba, same ? "yes" : "NO",
                       last_st.nlags, last_sc.nlags);
                fflush(stdout);
            }
            remove(wav);
        }
    }
    return 0;
}
