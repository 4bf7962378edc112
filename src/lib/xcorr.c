/* strandecho: matched filter by overlap-save on FFTW r2c/c2r. */
#include <errno.h>
#include <fftw3.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "internal.h"
#include "strandecho/xcorr.h"

struct se_xcorr {
    size_t m;          /* pulse length */
    size_t block;      /* FFT length B (power of two, >= 2 m) */
    size_t step;       /* valid outputs per block, B - m + 1 */
    double energy;     /* E_s = sum s^2 */
    fftw_complex *h;   /* conj(S) / (B E_s), B/2 + 1 bins */
    fftw_plan fwd;     /* r2c, B */
    fftw_plan inv;     /* c2r, B */
    se_xcorr_plan source; /* how the plans were made */
};

struct se_xcorr_work {
    double *in;          /* B real samples */
    fftw_complex *spec;  /* B/2 + 1 bins */
    double *out;         /* B real samples */
};

struct se_xcorr_stream {
    const se_xcorr *p;
    se_xcorr_work *w;
    double *buf;   /* pending input, buf[0] is the sample of the next output lag */
    size_t have;   /* samples in buf */
    size_t seen;   /* samples pushed in this record (for error messages) */
    int broken;    /* a bad sample was pushed: refuse until finish */
};

static int se_is_pow2(size_t b);
static void se_xcorr_block(const se_xcorr *p, se_xcorr_work *w);
static const double *se_first_nonfinite(const double *x, size_t n);
static se_xcorr_plan se_xcorr_plan_pair(const se_xcorr_config *cfg, int block, double *tin,
                                        fftw_complex *tspec, double *tout, fftw_plan *fwd,
                                        fftw_plan *inv);
static void se_xcorr_save_wisdom(const char *path);

static int se_is_pow2(size_t b)
{
    return b != 0 && (b & (b - 1)) == 0;
}

static const double *se_first_nonfinite(const double *x, size_t n)
{
    size_t i;
    for (i = 0; i < n; i++)
        if (!isfinite(x[i]))
            return x + i;
    return NULL;
}

/* One block: out = c2r(r2c(in) * conj(S) / (B E_s)). The first B - m + 1 values of out are
 * sum_j in[k+j] s[j] / E_s without circular wrap, since k + j <= B - 1 there. */
static void se_xcorr_block(const se_xcorr *p, se_xcorr_work *w)
{
    size_t q, nb = p->block / 2 + 1;
    fftw_execute_dft_r2c(p->fwd, w->in, w->spec);
    for (q = 0; q < nb; q++) {
        double re = w->spec[q][0] * p->h[q][0] - w->spec[q][1] * p->h[q][1];
        double im = w->spec[q][0] * p->h[q][1] + w->spec[q][1] * p->h[q][0];
        w->spec[q][0] = re;
        w->spec[q][1] = im;
    }
    fftw_execute_dft_c2r(p->inv, w->spec, w->out);
}

se_xcorr *se_xcorr_create(const double *pulse, size_t m, size_t block, se_error *err)
{
    se_xcorr_config cfg;
    memset(&cfg, 0, sizeof cfg);
    cfg.block = block;
    return se_xcorr_create_with(pulse, m, &cfg, err);
}

se_status se_xcorr_wisdom_default_path(char *buf, size_t size, int create_dir, se_error *err)
{
    const char *xdg = getenv("XDG_CACHE_HOME"), *home = getenv("HOME");
    char dir[4096];
    int k;
    if (buf == NULL || size == 0)
        return se_fail(err, SE_ERR_ARG, "wisdom path: no buffer");
    /* XDG Base Directory: a relative XDG_CACHE_HOME is invalid and ignored */
    if (xdg != NULL && xdg[0] == '/')
        k = snprintf(dir, sizeof dir, "%s/strandecho", xdg);
    else if (home != NULL && home[0] != '\0')
        k = snprintf(dir, sizeof dir, "%s/.cache/strandecho", home);
    else
        return se_fail(err, SE_ERR_ARG, "wisdom path: neither XDG_CACHE_HOME nor HOME is set");
    if (k < 0 || (size_t)k >= sizeof dir || (size_t)k + sizeof "/fftw-wisdom" > size)
        return se_fail(err, SE_ERR_ARG, "wisdom path: the cache folder path is too long");
    if (create_dir) {
        /* the parent (.cache) may be missing too */
        char *slash = strrchr(dir, '/');
        if (slash != NULL && slash != dir) {
            *slash = '\0';
            if (mkdir(dir, 0700) != 0 && errno != EEXIST)
                return se_fail(err, SE_ERR_IO, "wisdom path: cannot create %s: %s", dir, strerror(errno));
            *slash = '/';
        }
        if (mkdir(dir, 0700) != 0 && errno != EEXIST)
            return se_fail(err, SE_ERR_IO, "wisdom path: cannot create %s: %s", dir, strerror(errno));
    }
    snprintf(buf, size, "%s/fftw-wisdom", dir);
    return SE_OK;
}

/* Plans for one block length: from wisdom when it holds them (FFTW_WISDOM_ONLY returns NULL
 * otherwise), else measured when the caller allows, else estimated. MEASURE overwrites the
 * arrays: they are scratch here. */
static se_xcorr_plan se_xcorr_plan_pair(const se_xcorr_config *cfg, int block, double *tin,
                                        fftw_complex *tspec, double *tout, fftw_plan *fwd,
                                        fftw_plan *inv)
{
    *fwd = *inv = NULL;
    if (cfg->wisdom_path != NULL || cfg->measure) {
        if (cfg->wisdom_path != NULL)
            (void)fftw_import_wisdom_from_filename(cfg->wisdom_path); /* missing file: no wisdom */
        *fwd = fftw_plan_dft_r2c_1d(block, tin, tspec, FFTW_MEASURE | FFTW_WISDOM_ONLY);
        *inv = fftw_plan_dft_c2r_1d(block, tspec, tout, FFTW_MEASURE | FFTW_WISDOM_ONLY);
        if (*fwd != NULL && *inv != NULL)
            return SE_XCORR_PLAN_WISDOM;
        if (*fwd != NULL)
            fftw_destroy_plan(*fwd);
        if (*inv != NULL)
            fftw_destroy_plan(*inv);
        *fwd = *inv = NULL;
        if (cfg->measure) {
            *fwd = fftw_plan_dft_r2c_1d(block, tin, tspec, FFTW_MEASURE);
            *inv = fftw_plan_dft_c2r_1d(block, tspec, tout, FFTW_MEASURE);
            if (*fwd != NULL && *inv != NULL) {
                if (cfg->wisdom_path != NULL)
                    se_xcorr_save_wisdom(cfg->wisdom_path);
                return SE_XCORR_PLAN_MEASURED;
            }
            if (*fwd != NULL)
                fftw_destroy_plan(*fwd);
            if (*inv != NULL)
                fftw_destroy_plan(*inv);
            *fwd = *inv = NULL;
        }
    }
    /* FFTW_ESTIMATE does not touch the arrays */
    *fwd = fftw_plan_dft_r2c_1d(block, tin, tspec, FFTW_ESTIMATE);
    *inv = fftw_plan_dft_c2r_1d(block, tspec, tout, FFTW_ESTIMATE);
    return SE_XCORR_PLAN_ESTIMATE;
}

/* Wisdom to path through a temporary file and rename, so a reader never sees half a file. A
 * failure leaves the old file and only costs a later measurement: not reported. */
static void se_xcorr_save_wisdom(const char *path)
{
    char tmp[4200];
    int k = snprintf(tmp, sizeof tmp, "%s.%ld.tmp", path, (long)getpid());
    if (k < 0 || (size_t)k >= sizeof tmp)
        return;
    if (fftw_export_wisdom_to_filename(tmp) && rename(tmp, path) == 0)
        return;
    (void)remove(tmp);
}

se_xcorr *se_xcorr_create_with(const double *pulse, size_t m, const se_xcorr_config *cfg_in,
                               se_error *err)
{
    se_xcorr_config cfg;
    size_t block;
    se_xcorr *p;
    double *tin = NULL, *tout = NULL;
    fftw_complex *tspec = NULL;
    size_t i, nb;
    double e = 0.0;
    const double *bad;

    if (cfg_in != NULL)
        cfg = *cfg_in;
    else
        memset(&cfg, 0, sizeof cfg);
    block = cfg.block;
    if (pulse == NULL || m == 0) {
        se_fail(err, SE_ERR_ARG, "xcorr: pulse is %s", pulse == NULL ? "NULL" : "empty (m = 0)");
        return NULL;
    }
    if ((bad = se_first_nonfinite(pulse, m)) != NULL) {
        se_fail(err, SE_ERR_DATA, "xcorr: pulse sample %zu is not finite", (size_t)(bad - pulse));
        return NULL;
    }
    for (i = 0; i < m; i++)
        e += pulse[i] * pulse[i];
    if (!(e > 0.0) || !isfinite(e)) {
        se_fail(err, SE_ERR_DATA, "xcorr: pulse of %zu samples has %s energy", m,
                e > 0.0 ? "infinite" : "zero");
        return NULL;
    }
    if (m > (size_t)INT_MAX / 16) {
        se_fail(err, SE_ERR_NOMEM, "xcorr: pulse of %zu samples is too long for the FFT engine", m);
        return NULL;
    }
    if (block == 0) {
        block = 1024;
        while (block < 8 * m)
            block <<= 1;
    } else if (!se_is_pow2(block) || block < 2 * m) {
        se_fail(err, SE_ERR_ARG, "xcorr: block %zu must be a power of two >= 2 m = %zu", block, 2 * m);
        return NULL;
    } else if (block > (size_t)INT_MAX) {
        se_fail(err, SE_ERR_ARG, "xcorr: block %zu exceeds the FFT length limit %d", block, INT_MAX);
        return NULL;
    }

    p = se_calloc(1, sizeof *p, "xcorr engine", err);
    if (p == NULL)
        return NULL;
    p->m = m;
    p->block = block;
    p->step = block - m + 1;
    p->energy = e;
    nb = block / 2 + 1;
    p->h = fftw_malloc(nb * sizeof *p->h);
    tin = fftw_malloc(block * sizeof *tin);
    tout = fftw_malloc(block * sizeof *tout);
    tspec = fftw_malloc(nb * sizeof *tspec);
    if (p->h == NULL || tin == NULL || tout == NULL || tspec == NULL) {
        se_fail(err, SE_ERR_NOMEM, "xcorr: cannot allocate FFT arrays of %zu samples", block);
        goto fail;
    }
    /* The plans are later run on other fftw_malloc'd arrays (same alignment) with the new-array
     * execute functions. */
    p->source = se_xcorr_plan_pair(&cfg, (int)block, tin, tspec, tout, &p->fwd, &p->inv);
    if (p->fwd == NULL || p->inv == NULL) {
        se_fail(err, SE_ERR_NOMEM, "xcorr: FFTW could not plan a transform of %zu samples", block);
        goto fail;
    }
    memset(tin, 0, block * sizeof *tin);
    memcpy(tin, pulse, m * sizeof *tin);
    fftw_execute_dft_r2c(p->fwd, tin, tspec);
    /* Correlation theorem: sum_j x[k+j] s[j] = IDFT(X conj(S)); FFTW's inverse lacks the 1/B. */
    for (i = 0; i < nb; i++) {
        p->h[i][0] = tspec[i][0] / ((double)block * e);
        p->h[i][1] = -tspec[i][1] / ((double)block * e);
    }
    fftw_free(tin);
    fftw_free(tout);
    fftw_free(tspec);
    return p;

fail:
    fftw_free(tin);
    fftw_free(tout);
    fftw_free(tspec);
    se_xcorr_destroy(p);
    return NULL;
}

void se_xcorr_destroy(se_xcorr *p)
{
    if (p == NULL)
        return;
    if (p->fwd != NULL)
        fftw_destroy_plan(p->fwd);
    if (p->inv != NULL)
        fftw_destroy_plan(p->inv);
    fftw_free(p->h);
    free(p);
}

se_xcorr_plan se_xcorr_plan_source(const se_xcorr *p)
{
    return p == NULL ? SE_XCORR_PLAN_ESTIMATE : p->source;
}

size_t se_xcorr_step(const se_xcorr *p)
{
    return p == NULL ? 0 : p->step;
}

size_t se_xcorr_block_size(const se_xcorr *p)
{
    return p == NULL ? 0 : p->block;
}

size_t se_xcorr_pulse_length(const se_xcorr *p)
{
    return p == NULL ? 0 : p->m;
}

double se_xcorr_pulse_energy(const se_xcorr *p)
{
    return p == NULL ? 0.0 : p->energy;
}

se_xcorr_work *se_xcorr_work_create(const se_xcorr *p, se_error *err)
{
    se_xcorr_work *w;
    if (p == NULL) {
        se_fail(err, SE_ERR_ARG, "xcorr work: engine is NULL");
        return NULL;
    }
    w = se_calloc(1, sizeof *w, "xcorr work", err);
    if (w == NULL)
        return NULL;
    w->in = fftw_malloc(p->block * sizeof *w->in);
    w->out = fftw_malloc(p->block * sizeof *w->out);
    w->spec = fftw_malloc((p->block / 2 + 1) * sizeof *w->spec);
    if (w->in == NULL || w->out == NULL || w->spec == NULL) {
        se_fail(err, SE_ERR_NOMEM, "xcorr work: cannot allocate FFT arrays of %zu samples", p->block);
        se_xcorr_work_destroy(w);
        return NULL;
    }
    return w;
}

void se_xcorr_work_destroy(se_xcorr_work *w)
{
    if (w == NULL)
        return;
    fftw_free(w->in);
    fftw_free(w->out);
    fftw_free(w->spec);
    free(w);
}

se_status se_xcorr_run(const se_xcorr *p, se_xcorr_work *w, const double *x, size_t n, double *r,
                       se_error *err)
{
    return se_xcorr_run_part(p, w, x, n, n, r, err);
}

se_status se_xcorr_run_part(const se_xcorr *p, se_xcorr_work *w, const double *x, size_t n,
                            size_t nout_total, double *r, se_error *err)
{
    size_t o;
    const double *bad;
    if (p == NULL || w == NULL || x == NULL || r == NULL)
        return se_fail(err, SE_ERR_ARG, "xcorr run: NULL %s",
                       p == NULL ? "engine" : w == NULL ? "work" : x == NULL ? "input" : "output");
    if (n == 0)
        return se_fail(err, SE_ERR_ARG, "xcorr run: empty input (n = 0)");
    if (nout_total == 0 || nout_total > n)
        return se_fail(err, SE_ERR_ARG, "xcorr run: %zu outputs asked of %zu input samples",
                       nout_total, n);
    if ((bad = se_first_nonfinite(x, n)) != NULL)
        return se_fail(err, SE_ERR_DATA, "xcorr run: input sample %zu is not finite", (size_t)(bad - x));
    for (o = 0; o < nout_total; o += p->step) {
        size_t avail = n - o, left = nout_total - o;
        size_t cnt = avail < p->block ? avail : p->block;
        size_t nout = left < p->step ? left : p->step;
        memcpy(w->in, x + o, cnt * sizeof *x);
        if (cnt < p->block)
            memset(w->in + cnt, 0, (p->block - cnt) * sizeof *x);
        se_xcorr_block(p, w);
        memcpy(r + o, w->out, nout * sizeof *r);
    }
    return SE_OK;
}

se_xcorr_stream *se_xcorr_stream_create(const se_xcorr *p, se_error *err)
{
    se_xcorr_stream *st;
    if (p == NULL) {
        se_fail(err, SE_ERR_ARG, "xcorr stream: engine is NULL");
        return NULL;
    }
    st = se_calloc(1, sizeof *st, "xcorr stream", err);
    if (st == NULL)
        return NULL;
    st->p = p;
    st->w = se_xcorr_work_create(p, err);
    st->buf = st->w == NULL ? NULL : se_calloc(p->block, sizeof *st->buf, "xcorr stream buffer", err);
    if (st->buf == NULL) {
        se_xcorr_stream_destroy(st);
        return NULL;
    }
    return st;
}

void se_xcorr_stream_destroy(se_xcorr_stream *st)
{
    if (st == NULL)
        return;
    se_xcorr_work_destroy(st->w);
    free(st->buf);
    free(st);
}

se_status se_xcorr_stream_push(se_xcorr_stream *st, const double *x, size_t n, double *r_out,
                               size_t *n_out, se_error *err)
{
    const se_xcorr *p;
    const double *bad;
    size_t done = 0;
    if (st == NULL || r_out == NULL || n_out == NULL || (x == NULL && n > 0))
        return se_fail(err, SE_ERR_ARG, "xcorr stream push: NULL %s",
                       st == NULL ? "stream" : r_out == NULL ? "output" : n_out == NULL ? "count" : "input");
    *n_out = 0;
    if (st->broken)
        return se_fail(err, SE_ERR_ARG, "xcorr stream push: stream holds a bad sample; call finish first");
    if (n > 0 && (bad = se_first_nonfinite(x, n)) != NULL) {
        st->broken = 1;
        return se_fail(err, SE_ERR_DATA, "xcorr stream push: sample %zu of the record is not finite",
                       st->seen + (size_t)(bad - x));
    }
    p = st->p;
    st->seen += n;
    while (n > 0) {
        size_t take = p->block - st->have;
        if (take > n)
            take = n;
        memcpy(st->buf + st->have, x, take * sizeof *x);
        st->have += take;
        x += take;
        n -= take;
        if (st->have == p->block) {
            /* Same data as se_xcorr_run's full block at this offset: bit-identical output. */
            memcpy(st->w->in, st->buf, p->block * sizeof *st->buf);
            se_xcorr_block(p, st->w);
            memcpy(r_out + done, st->w->out, p->step * sizeof *r_out);
            done += p->step;
            memmove(st->buf, st->buf + p->step, (p->block - p->step) * sizeof *st->buf);
            st->have = p->block - p->step;
        }
    }
    *n_out = done;
    return SE_OK;
}

se_status se_xcorr_stream_finish(se_xcorr_stream *st, double *r_out, size_t *n_out, se_error *err)
{
    const se_xcorr *p;
    size_t done = 0;
    int broken;
    if (st == NULL || r_out == NULL || n_out == NULL)
        return se_fail(err, SE_ERR_ARG, "xcorr stream finish: NULL %s",
                       st == NULL ? "stream" : r_out == NULL ? "output" : "count");
    p = st->p;
    broken = st->broken;
    while (!broken && st->have > 0) {
        size_t nout = st->have < p->step ? st->have : p->step;
        memcpy(st->w->in, st->buf, st->have * sizeof *st->buf);
        memset(st->w->in + st->have, 0, (p->block - st->have) * sizeof *st->buf);
        se_xcorr_block(p, st->w);
        memcpy(r_out + done, st->w->out, nout * sizeof *r_out);
        done += nout;
        if (st->have > p->step) {
            memmove(st->buf, st->buf + p->step, (st->have - p->step) * sizeof *st->buf);
            st->have -= p->step;
        } else {
            st->have = 0;
        }
    }
    *n_out = done;
    st->have = 0;
    st->seen = 0;
    st->broken = 0;
    if (broken)
        return se_fail(err, SE_ERR_DATA, "xcorr stream finish: record had a non-finite sample; reset");
    return SE_OK;
}
