/* strandecho tests: the overlap-save matched filter against the direct O(n m) sum, and its
 * properties (zero padding, shift, normalisation, streaming, threads, argument checks). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/xcorr.h"
#include "testutil.h"

/* FFTW's own bench accepts double-precision transforms at 1e-10 relative (common practice, the FFTW
 * verifier; Frigo & Johnson, Proc. IEEE 93(2), 2005). */
#define FFT_TOL 1e-10

static double max_abs(const double *v, size_t n)
{
    double m = 0.0;
    size_t i;
    for (i = 0; i < n; i++)
        if (fabs(v[i]) > m)
            m = fabs(v[i]);
    return m;
}

static double max_diff(const double *a, const double *b, size_t n, size_t *where)
{
    double m = -1.0;
    size_t i;
    for (i = 0; i < n; i++)
        if (!(fabs(a[i] - b[i]) <= m)) {
            m = isnan(a[i] - b[i]) ? HUGE_VAL : fabs(a[i] - b[i]);
            *where = i;
        }
    return m;
}

static void fill_gauss(gsl_rng *rng, double *v, size_t n)
{
    size_t i;
    for (i = 0; i < n; i++)
        v[i] = gsl_ran_gaussian(rng, 1.0);
}

/* Table-driven: n < block, n not a multiple of the step, m = 1, block = 2 m, big m, n < m. */
static void test_against_direct(gsl_rng *rng)
{
    static const struct { size_t n, m, block; } cases[] = {
        {100, 10, 0},   {5000, 37, 0}, {3000, 1, 0},     {3001, 1, 2},    {777, 64, 128},
        {1000, 300, 1024}, {20000, 961, 0}, {50, 200, 0}, {4096, 512, 1024}, {12345, 100, 256},
    };
    size_t c;
    for (c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        size_t n = cases[c].n, m = cases[c].m, where = 0;
        double *x = malloc(n * sizeof *x), *s = malloc(m * sizeof *s);
        double *r = malloc(n * sizeof *r), *rd = malloc(n * sizeof *rd);
        se_error err;
        se_xcorr *p;
        se_xcorr_work *w;
        double scale, d;
        fill_gauss(rng, x, n);
        fill_gauss(rng, s, m);
        p = se_xcorr_create(s, m, cases[c].block, &err);
        CHECK(p != NULL);
        w = se_xcorr_work_create(p, &err);
        CHECK(w != NULL);
        if (p != NULL && w != NULL) {
            CHECK(se_xcorr_pulse_length(p) == m);
            CHECK(cases[c].block == 0 || se_xcorr_block_size(p) == cases[c].block);
            CHECK(cases[c].block != 0 || (se_xcorr_block_size(p) >= 8 * m && se_xcorr_block_size(p) >= 1024));
            CHECK(se_xcorr_run(p, w, x, n, r, &err) == SE_OK);
            se_xcorr_direct(x, n, s, m, rd);
            scale = max_abs(rd, n);
            d = max_diff(r, rd, n, &where);
            if (!CHECK(d <= FFT_TOL * scale))
                fprintf(stderr, "  n %zu m %zu block %zu: |fft - direct| %.3g at lag %zu, max|r| %.3g\n", n,
                        m, se_xcorr_block_size(p), d, where, scale);
            printf("n %6zu m %4zu block %6zu: max |fft - direct| / max|r| = %.2e\n", n, m,
                   se_xcorr_block_size(p), d / scale);
        }
        se_xcorr_work_destroy(w);
        se_xcorr_destroy(p);
        free(x);
        free(s);
        free(r);
        free(rd);
    }
}

/* Padding x with zeros leaves r unchanged over the original range (FFTW's verifier checks the
 * same invariance of its transforms). Also linearity: r(a x + b y) = a r(x) + b r(y). */
static void test_padding_linearity(gsl_rng *rng)
{
    size_t n = 3000, pad = 5000, m = 45, i, where = 0;
    double *x = calloc(n + pad, sizeof *x), *y = malloc(n * sizeof *y), *z = malloc(n * sizeof *z);
    double *s = malloc(m * sizeof *s), *r1 = malloc((n + pad) * sizeof *r1), *r2 = malloc(n * sizeof *r2);
    double *r3 = malloc(n * sizeof *r3);
    se_error err;
    se_xcorr *p;
    se_xcorr_work *w;
    fill_gauss(rng, x, n);
    fill_gauss(rng, y, n);
    fill_gauss(rng, s, m);
    p = se_xcorr_create(s, m, 512, &err);
    w = p ? se_xcorr_work_create(p, &err) : NULL;
    CHECK(w != NULL);
    if (w != NULL) {
        double scale, d;
        CHECK(se_xcorr_run(p, w, x, n + pad, r1, &err) == SE_OK);
        CHECK(se_xcorr_run(p, w, x, n, r2, &err) == SE_OK);
        scale = max_abs(r2, n);
        d = max_diff(r1, r2, n, &where);
        if (!CHECK(d <= 1e-12 * scale))
            fprintf(stderr, "  padding changed r by %.3g at lag %zu\n", d, where);
        CHECK(max_abs(r1 + n, pad) <= FFT_TOL * scale); /* lags past the data see only zeros */
        for (i = 0; i < n; i++)
            z[i] = 2.5 * x[i] - 0.75 * y[i];
        CHECK(se_xcorr_run(p, w, y, n, r3, &err) == SE_OK);
        CHECK(se_xcorr_run(p, w, z, n, r1, &err) == SE_OK);
        for (i = 0; i < n; i++)
            r3[i] = 2.5 * r2[i] - 0.75 * r3[i];
        d = max_diff(r1, r3, n, &where);
        if (!CHECK(d <= FFT_TOL * max_abs(r3, n)))
            fprintf(stderr, "  linearity off by %.3g at lag %zu\n", d, where);
    }
    se_xcorr_work_destroy(w);
    se_xcorr_destroy(p);
    free(x);
    free(y);
    free(z);
    free(s);
    free(r1);
    free(r2);
    free(r3);
}

/* Known answers: an impulse at k0 gives r[k0 - j] = s[j] / E_s; a copy a * s starting at k0 peaks
 * at k0 with r[k0] = a (the normalisation in xcorr.h; Kay 1993, ch. 3). */
static void test_shift_normalisation(gsl_rng *rng)
{
    size_t n = 4000, m = 77, i, j, k0;
    double *x = calloc(n, sizeof *x), *s = malloc(m * sizeof *s), *r = malloc(n * sizeof *r);
    static const double amps[] = {1.0, -0.333, 0.2, -1.0, 7.5};
    se_error err;
    se_xcorr *p;
    se_xcorr_work *w;
    double es = 0.0;
    fill_gauss(rng, s, m);
    for (j = 0; j < m; j++)
        es += s[j] * s[j];
    p = se_xcorr_create(s, m, 0, &err);
    w = p ? se_xcorr_work_create(p, &err) : NULL;
    CHECK(w != NULL);
    if (w != NULL) {
        CHECK_CLOSE(se_xcorr_pulse_energy(p), es, 1e-12 * es, "pulse energy");
        for (k0 = 100; k0 < n; k0 += 1111) {
            double worst = 0.0;
            memset(x, 0, n * sizeof *x);
            x[k0] = 1.0;
            CHECK(se_xcorr_run(p, w, x, n, r, &err) == SE_OK);
            for (j = 0; j < m; j++)
                if (fabs(r[k0 - j] - s[j] / es) > worst)
                    worst = fabs(r[k0 - j] - s[j] / es);
            CHECK(worst <= FFT_TOL * max_abs(s, m) / es);
        }
        for (i = 0; i < sizeof amps / sizeof amps[0]; i++) {
            size_t argmax = 0;
            k0 = 500 + 613 * i;
            memset(x, 0, n * sizeof *x);
            for (j = 0; j < m; j++)
                x[k0 + j] = amps[i] * s[j];
            CHECK(se_xcorr_run(p, w, x, n, r, &err) == SE_OK);
            for (j = 0; j < n; j++)
                if (fabs(r[j]) > fabs(r[argmax]))
                    argmax = j;
            CHECK(argmax == k0);
            CHECK_CLOSE(r[k0], amps[i], 1e-12 * fabs(amps[i]), "r at the echo equals its amplitude");
        }
    }
    se_xcorr_work_destroy(w);
    se_xcorr_destroy(p);
    free(x);
    free(s);
    free(r);
}

/* Chunks of random sizes (0, 1, up to several blocks) give exactly se_xcorr_run's values. */
static void test_stream(gsl_rng *rng)
{
    static const struct { size_t n, m, block; } cases[] = {{20000, 33, 0}, {5000, 200, 512}, {3, 1, 2}, {999, 7, 16}};
    size_t c;
    for (c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        size_t n = cases[c].n, m = cases[c].m, B, pass;
        double *x = malloc(n * sizeof *x), *s = malloc(m * sizeof *s), *r = malloc(n * sizeof *r);
        double *rs = NULL, *out = NULL;
        se_error err;
        se_xcorr *p = NULL;
        se_xcorr_work *w = NULL;
        se_xcorr_stream *st = NULL;
        fill_gauss(rng, x, n);
        fill_gauss(rng, s, m);
        p = se_xcorr_create(s, m, cases[c].block, &err);
        w = p ? se_xcorr_work_create(p, &err) : NULL;
        st = p ? se_xcorr_stream_create(p, &err) : NULL;
        CHECK(w != NULL && st != NULL);
        if (w == NULL || st == NULL)
            goto next;
        B = se_xcorr_block_size(p);
        rs = malloc((n + B) * sizeof *rs);
        out = malloc((n + B) * sizeof *out);
        CHECK(se_xcorr_run(p, w, x, n, r, &err) == SE_OK);
        for (pass = 0; pass < 2; pass++) { /* the second pass reuses the stream after finish */
            size_t at = 0, got = 0, nout, where = 0, exact = 1, i;
            double d;
            while (at < n) {
                size_t chunk = (size_t)gsl_rng_uniform_int(rng, 3 * B) / (1 + gsl_rng_uniform_int(rng, 8));
                if (chunk > n - at)
                    chunk = n - at;
                CHECK(se_xcorr_stream_push(st, x + at, chunk, out, &nout, &err) == SE_OK);
                CHECK(nout <= chunk + B && got + nout <= n);
                if (got + nout <= n)
                    memcpy(rs + got, out, nout * sizeof *out);
                got += nout;
                at += chunk;
            }
            CHECK(se_xcorr_stream_finish(st, out, &nout, &err) == SE_OK);
            CHECK(nout <= B);
            if (got + nout <= n)
                memcpy(rs + got, out, nout * sizeof *out);
            got += nout;
            if (!CHECK(got == n))
                continue;
            d = max_diff(rs, r, n, &where);
            /* spec: equal to 1e-12 of max|r|; the engine runs the same blocks, so in fact bit-equal */
            if (!CHECK(d <= 1e-12 * max_abs(r, n)))
                fprintf(stderr, "  stream differs by %.3g at lag %zu\n", d, where);
            for (i = 0; i < n; i++)
                exact &= rs[i] == r[i];
            CHECK(exact);
        }
    next:
        se_xcorr_stream_destroy(st);
        se_xcorr_work_destroy(w);
        se_xcorr_destroy(p);
        free(x);
        free(s);
        free(r);
        free(rs);
        free(out);
    }
}

/* One plan, many threads, each with its own work: results equal the single-threaded ones. */
typedef struct job {
    const se_xcorr *p;
    const double *x;
    size_t n;
    double *r;
    se_status st;
} job;

static void *run_job(void *arg)
{
    job *j = arg;
    se_error err;
    se_xcorr_work *w = se_xcorr_work_create(j->p, &err);
    j->st = w ? se_xcorr_run(j->p, w, j->x, j->n, j->r, &err) : SE_ERR_NOMEM;
    se_xcorr_work_destroy(w);
    return NULL;
}

static void test_threads(gsl_rng *rng)
{
    enum { NT = 4 };
    size_t n = 50000, m = 101, t, i;
    double *x = malloc(n * sizeof *x), *s = malloc(m * sizeof *s), *ref = malloc(n * sizeof *ref);
    double *r[NT];
    pthread_t th[NT];
    job jobs[NT];
    se_error err;
    se_xcorr *p;
    se_xcorr_work *w;
    fill_gauss(rng, x, n);
    fill_gauss(rng, s, m);
    p = se_xcorr_create(s, m, 0, &err);
    w = p ? se_xcorr_work_create(p, &err) : NULL;
    CHECK(w != NULL && se_xcorr_run(p, w, x, n, ref, &err) == SE_OK);
    for (t = 0; t < NT; t++) {
        r[t] = malloc(n * sizeof *r[t]);
        jobs[t] = (job){p, x, n, r[t], SE_ERR_ARG};
        CHECK(pthread_create(&th[t], NULL, run_job, &jobs[t]) == 0);
    }
    for (t = 0; t < NT; t++) {
        int same = 1;
        pthread_join(th[t], NULL);
        CHECK(jobs[t].st == SE_OK);
        for (i = 0; i < n; i++)
            same &= r[t][i] == ref[i];
        CHECK(same);
        free(r[t]);
    }
    se_xcorr_work_destroy(w);
    se_xcorr_destroy(p);
    free(x);
    free(s);
    free(ref);
}

static void test_errors(void)
{
    double s[4] = {1, 2, 3, 4}, z[4] = {0, 0, 0, 0}, x[8] = {0}, r[8];
    se_error err;
    se_xcorr *p;
    se_xcorr_work *w;
    CHECK(se_xcorr_create(NULL, 4, 0, &err) == NULL && err.code == SE_ERR_ARG);
    CHECK(se_xcorr_create(s, 0, 0, &err) == NULL && err.code == SE_ERR_ARG);
    CHECK(se_xcorr_create(z, 4, 0, &err) == NULL && err.code == SE_ERR_DATA);
    CHECK(se_xcorr_create(s, 4, 12, &err) == NULL && err.code == SE_ERR_ARG); /* not a power of two */
    CHECK(se_xcorr_create(s, 4, 4, &err) == NULL && err.code == SE_ERR_ARG);  /* < 2 m */
    s[2] = NAN;
    CHECK(se_xcorr_create(s, 4, 0, &err) == NULL && err.code == SE_ERR_DATA && strstr(err.message, "2") != NULL);
    s[2] = 3.0;
    p = se_xcorr_create(s, 4, 8, &err);
    w = p ? se_xcorr_work_create(p, &err) : NULL;
    CHECK(w != NULL);
    if (w != NULL) {
        x[5] = INFINITY;
        CHECK(se_xcorr_run(p, w, x, 8, r, &err) == SE_ERR_DATA && strstr(err.message, "sample 5") != NULL);
        CHECK(se_xcorr_run(p, w, x, 0, r, &err) == SE_ERR_ARG);
        CHECK(se_xcorr_run(p, w, NULL, 8, r, &err) == SE_ERR_ARG);
    }
    se_xcorr_work_destroy(w);
    se_xcorr_destroy(p);
    se_xcorr_destroy(NULL);
    se_xcorr_work_destroy(NULL);
    se_xcorr_stream_destroy(NULL);
}

int main(void)
{
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    if (rng == NULL)
        return 77;
    gsl_rng_set(rng, 20240611UL);
    test_against_direct(rng);
    test_padding_linearity(rng);
    test_shift_normalisation(rng);
    test_stream(rng);
    test_threads(rng);
    test_errors();
    gsl_rng_free(rng);
    return se_test_done("test_xcorr");
}
