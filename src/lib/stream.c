/* strandecho: streaming locate (see stream.h). One correlation pass in the usual case:
 *   chunks of x -> r (threads) -> [direct-arrival store D] [noise sample q] [candidate windows]
 * then the direct arrival is refined on D, the noise estimated on q exactly as se_locate does,
 * CLEAN run on each window and the events classified by se_locate_events. Repeated shots with a
 * pulse channel: se_stream_stack at the end of this file, before the engine runs. */
#include "strandecho/stream.h"

#include <math.h>
#include <pthread.h>
#include <sndfile.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#if defined(__SSE2__)
#include <emmintrin.h> /* the two scans below, two lags at a time; plain C elsewhere */
#endif

#include "internal.h"
#include "strandecho/detect.h"
#include "strandecho/distmap.h"
#include "strandecho/stack.h"
#include "strandecho/wave.h"

#define SE_STREAM_NOISE_FLOOR 1e-4            /* as se_locate: 80 dB below the direct arrival */
#define SE_STREAM_CLIP_RUN 5                  /* as se_locate */
/* 2^16 lags a thread: an input chunk (2 2^16 + m doubles) stays in a core's L2 cache between
 * being read and being correlated; 2^17 was slower, 2^15 too (thread start-up per chunk) */
#define SE_STREAM_DEFAULT_BLOCK ((size_t)1 << 16)
#define SE_STREAM_DEFAULT_NOISE ((size_t)1 << 16)
#define SE_STREAM_PULSE_WINDOW ((size_t)1 << 20)
#define SE_STREAM_PROVISIONAL ((size_t)1 << 15) /* lags for the provisional noise */
#define SE_STREAM_DIRECT_HALF (((size_t)1 << 17) + 8) /* > se_refine_peak's largest window 2^16 */
#define SE_STREAM_READ_FRAMES 8192
/* The pre-threshold as a fraction of the provisional threshold: high enough that noise alone
 * rarely passes it (clusters stay few), low enough that a provisional noise over the final one by
 * up to a quarter still needs no second pass. */
#define SE_STREAM_PRE_FRACTION 0.8
/* Chunks of r correlated ahead of the scan (threads lc lags each, 1 MiB at the default block):
 * enough to keep both cores busy while the reference's autocorrelation is made. */
#define SE_STREAM_RING 8

/* Clipping runs at one extreme, tracked while the extreme may still move. */
typedef struct se_clip_side {
    double value;
    size_t count, samples, runs[SE_MAX_CLIP_RUNS][2], nruns;
} se_clip_side;

/* A cluster of candidates (|r| >= pre, no gap over 2 left lags). Only its extent and largest |r|
 * are kept during the pass; the r around it is recomputed at the end when it passes the threshold. */
typedef struct se_window {
    size_t cand_first, cand_last;
    double cmax;
} se_window;


/* The file being read: the response channel ch of nch; rawf: native-endian float data, read raw
 * through fbuf [size: SE_STREAM_READ_FRAMES nch]; other multichannel data through inter. */
typedef struct se_src {
    SNDFILE *snd;
    const char *path;
    unsigned nch, ch;
    int rawf;
    float *fbuf;
    double *inter;
} se_src;

/* Work done in the calling thread of a pass once its correlation has started. */
typedef se_status (*se_pass_hook)(void *ctx, se_error *err);

/* One sampled lag of a noise block: its offset in the block and its slot in the block's values. */
typedef struct se_tap {
    size_t pos, slot;
} se_tap;

/* Everything one run needs. */
typedef struct se_sl {
    const se_locate_config *cfg;
    size_t n, m, ext, win, mg, reach, left; /* left: r kept before a candidate */
    /* direct arrival */
    size_t lo, hi;                 /* argmax range */
    size_t d0, d1;                 /* D = r[d0, d1) */
    double *dbuf;
    int known;
    size_t k0;
    /* noise sample */
    size_t start, end, stride, used, ni, qn;
    int pending;
    double *q;                     /* pairs r[at], r[at+1] */
    /* provisional noise and pre-threshold */
    double *pbuf;
    size_t pcount, plen;
    double pre, pre_fixed;
    double fa;
    /* windows */
    se_window *wins;
    size_t nwins, capwins;
    int open;
    /* unknown time base (pass 0): prefix maxima of |r| */
    int pass0;
    size_t *pm_i;
    double *pm_v;
    size_t pm_n, pm_cap, pm_head;
    double gmax;
    /* clipping and constant check on the raw response */
    se_clip_side cmax, cmin;
    double run_v, first_v;
    size_t run_start, seen;
    int varies;
    /* non-stationary noise (cfar.c): block b of blen lags covers [start + b blen, ...), the last
     * to end; only the lags se_noise_block_sigma samples are taken from r as it goes by (taps,
     * sorted by offset, for a block of tlen lags; tnext the next one due) into tval, then the
     * block's two MAD sigmas go to braw/bhi */
    int track;
    size_t blen, nb, bi, ntaps, tnext, tlen;
    se_tap *taps;
    double *tval, *braw, *bhi;
    /* the profile pass: candidates against SE_STREAM_PRE_FRACTION of each lag's own threshold
     * pk sigma(lag), clusters keeping their largest |r| / (pk sigma(lag)) */
    const se_noise_profile *pprof;
    double pk;
} se_sl;

static se_status se_sl_cand(se_sl *s, size_t i, double av, se_error *err);
static se_status se_sl_block(se_sl *s, size_t i0, const double *v, size_t n, se_error *err);
static void se_sl_scan(se_sl *s, size_t i0, const double *v, size_t a, size_t b, se_status *st,
                       se_error *err);
static size_t se_clip_block(se_sl *s, size_t i0, const double *v, size_t n);
static size_t se_first_bad(const double *v, size_t n);
static int se_block_flags(const double *u, size_t len, double cmx, double cmn);
static int se_any_at_least(const double *p, size_t len, double t);
static void se_widen(double *o, const float *f, size_t n);
static se_status se_read_range(se_src *src, size_t pos, size_t count, double *x, se_error *err);
static se_status se_read_src(void *ctx, size_t pos, size_t count, double *out, se_error *err);
static se_status se_window_data(const se_sl *s, se_src *src, const se_xcorr *xc, se_xcorr_work *w,
                                size_t a, size_t e, double **data, se_error *err);
static se_status se_sl_know(se_sl *s, size_t c0, size_t c1, const double *chunk, se_error *err);
static se_status se_sl_chunk(se_sl *s, size_t c0, size_t c1, const double *r, se_error *err);
static void se_clip_close(se_sl *s);
static void se_clip_sample(se_sl *s, size_t i, double v);
static void se_clip_result(const se_sl *s, se_locate_result *res);
static se_status se_provisional(se_sl *s, se_error *err);
static se_status se_pass(se_sl *s, se_src *src, const se_xcorr *xc, se_xcorr_work *const *w,
                         unsigned threads, size_t lc, se_pass_hook hook, void *hook_ctx,
                         se_error *err);
static void se_sl_reset(se_sl *s);
static se_status se_sl_direct(se_sl *s, se_error *err);
static se_status se_prep_run(void *ctx, se_error *err);
static se_status se_stream_stack(se_src *src, size_t n, int pilot_ch, const se_locate_config *cfg,
                                 double rate, size_t block, size_t budget, se_locate_result *res,
                                 int *stacked, se_stream_info *info, se_error *err);
static void *se_wjob_fetch(void *arg);
static int se_peak_by_size(const void *a, const void *b);
static int se_sl_shots_possible(const se_sl *s, double a0);
static int se_peak_by_lag(const void *a, const void *b);
static se_status se_sl_noise_blocks(se_sl *s, size_t i0, const double *v, size_t lo, size_t hi,
                                    se_error *err);
static se_status se_sl_taps(se_sl *s, se_error *err);
static int se_tap_by_pos(const void *a, const void *b);
static size_t se_prof_block(const se_noise_profile *p, size_t lag);
static void se_sl_scan_profile(se_sl *s, size_t i0, const double *v, size_t a, size_t b,
                               se_status *st, se_error *err);
static se_status se_window_profile(const se_noise_profile *p, size_t a, size_t e, size_t *a_out,
                                   se_noise_profile *out, se_error *err);

/* Whether the response may hold the three shots se_locate stacks on the response's own direct
 * arrivals, from what the pass kept: a shot's trigger reaches half the largest |r| (se_shot_finder,
 * stack.h), which is at least |r| at the direct arrival, so every shot after it lies in a cluster
 * whose largest |r| reaches half of that (0.45 |a0| here, a0 being the refined peak), and a
 * cluster of extent E holds at most E / min_interval + 1 of them (min_interval 4 m). Clusters of
 * the profile pass keep |r| / (pk sigma(lag)): their |r| is bounded by that times pk and the
 * largest level of the blocks they touch (guard lags included). */
static int se_sl_shots_possible(const se_sl *s, double a0)
{
    size_t i, can = 1; /* the direct arrival */
    for (i = 0; i < s->nwins; i++) {
        const se_window *w = &s->wins[i];
        double top = w->cmax;
        if (s->pprof != NULL) {
            const se_noise_profile *p = s->pprof;
            size_t g = p->guard, b = se_prof_block(p, w->cand_first > g ? w->cand_first - g : 0);
            size_t e = se_prof_block(p, w->cand_last + g);
            double smax = 0.0;
            for (; b <= e; b++)
                smax = fmax(smax, p->sigma[b]);
            top *= s->pk * smax;
        }
        if (top >= 0.45 * fabs(a0))
            can += (w->cand_last - w->cand_first) / (4 * s->m) + 1;
    }
    return can >= 3;
}

static int se_peak_by_size(const void *a, const void *b)
{
    double x = fabs(((const se_peak *)a)->amplitude), y = fabs(((const se_peak *)b)->amplitude);
    return (x < y) - (x > y);
}

static int se_peak_by_lag(const void *a, const void *b)
{
    double x = ((const se_peak *)a)->lag, y = ((const se_peak *)b)->lag;
    return (x > y) - (x < y);
}

void se_stream_config_init(se_stream_config *scfg)
{
    memset(scfg, 0, sizeof *scfg);
    scfg->pulse_channel = SE_STREAM_NO_CHANNEL;
    scfg->threads = 2;
}


/* ---- clipping: runs of equal samples at the record's extremes (se_locate's rule) ---- */

static void se_clip_side_add(se_clip_side *c, size_t b, size_t e)
{
    if (c->nruns < SE_MAX_CLIP_RUNS) {
        c->runs[c->nruns][0] = b;
        c->runs[c->nruns][1] = e;
        c->nruns++;
    }
    c->count++;
    c->samples += e - b;
}

static void se_clip_close(se_sl *s)
{
    size_t len = s->seen - s->run_start;
    if (s->seen == 0 || len < SE_STREAM_CLIP_RUN)
        return;
    if (s->run_v == s->cmax.value)
        se_clip_side_add(&s->cmax, s->run_start, s->seen);
    else if (s->run_v == s->cmin.value)
        se_clip_side_add(&s->cmin, s->run_start, s->seen);
}

static void se_clip_sample(se_sl *s, size_t i, double v)
{
    if (i == 0) {
        s->cmax.value = s->cmin.value = s->first_v = s->run_v = v;
        s->run_start = 0;
        s->seen = 1;
        return;
    }
    if (v != s->run_v) {
        se_clip_close(s);
        s->run_v = v;
        s->run_start = i;
    }
    if (v != s->first_v)
        s->varies = 1;
    /* a new extreme voids the runs found at the old one */
    if (v > s->cmax.value) {
        memset(&s->cmax, 0, sizeof s->cmax);
        s->cmax.value = v;
    }
    if (v < s->cmin.value) {
        memset(&s->cmin, 0, sizeof s->cmin);
        s->cmin.value = v;
    }
    s->seen = i + 1;
}

/* The two sides merged in time order, as se_locate's single scan records them. */
static void se_clip_result(const se_sl *s, se_locate_result *res)
{
    size_t a = 0, b = 0;
    const se_clip_side *x = &s->cmax, *y = &s->cmin;
    res->clipped_samples = x->samples + (x->value != y->value ? y->samples : 0);
    res->first_clipped = SIZE_MAX;
    res->n_clip_runs = 0;
    if (x->value == y->value)
        y = NULL; /* constant record: refused earlier */
    while (res->n_clip_runs < SE_MAX_CLIP_RUNS && (a < x->nruns || (y != NULL && b < y->nruns))) {
        int takex = y == NULL || b >= y->nruns || (a < x->nruns && x->runs[a][0] < y->runs[b][0]);
        const size_t *run = takex ? x->runs[a++] : y->runs[b++];
        res->clip_runs[res->n_clip_runs][0] = run[0];
        res->clip_runs[res->n_clip_runs][1] = run[1];
        res->n_clip_runs++;
    }
    /* more runs than remembered: se_locate's list is full as well */
    if (x->count + (y != NULL ? y->count : 0) > SE_MAX_CLIP_RUNS)
        res->n_clip_runs = SE_MAX_CLIP_RUNS;
    if (res->n_clip_runs > 0)
        res->first_clipped = res->clip_runs[0][0];
}

/* Whether |p[k]| >= t for some k < len (NaN never is). */
static int se_any_at_least(const double *p, size_t len, double t)
{
    size_t k = 0;
    int any = 0;
#if defined(__SSE2__)
    const __m128d mask = _mm_castsi128_pd(_mm_set1_epi64x(0x7fffffffffffffffLL)), vt = _mm_set1_pd(t);
    __m128d acc = _mm_setzero_pd();
    for (; k + 2 <= len; k += 2)
        acc = _mm_or_pd(acc, _mm_cmpge_pd(_mm_and_pd(_mm_loadu_pd(p + k), mask), vt));
    any = _mm_movemask_pd(acc) != 0;
#endif
    for (; k < len; k++)
        any |= fabs(p[k]) >= t;
    return any;
}

/* The tests of one block u [size: len >= 1] of se_clip_block, as bits: 1 a non-finite value
 * (x - x is NaN exactly then), 2 two equal neighbours, 4 a value above cmx, 8 one below cmn.
 * Independent tests OR-ed together, two values at a time where SSE2 is there. */
static int se_block_flags(const double *u, size_t len, double cmx, double cmn)
{
    size_t k = 1;
    int bad = !(u[0] - u[0] == 0.0), eq = 0, up = u[0] > cmx, dn = u[0] < cmn;
#if defined(__SSE2__)
    {
        const __m128d vmx = _mm_set1_pd(cmx), vmn = _mm_set1_pd(cmn);
        __m128d b = _mm_setzero_pd(), e = b, hi = b, lo = b;
        for (; k + 2 <= len; k += 2) {
            __m128d x = _mm_loadu_pd(u + k), d = _mm_sub_pd(x, x);
            b = _mm_or_pd(b, _mm_cmpunord_pd(d, d));
            e = _mm_or_pd(e, _mm_cmpeq_pd(x, _mm_loadu_pd(u + k - 1)));
            hi = _mm_or_pd(hi, _mm_cmpgt_pd(x, vmx));
            lo = _mm_or_pd(lo, _mm_cmplt_pd(x, vmn));
        }
        bad |= _mm_movemask_pd(b) != 0;
        eq |= _mm_movemask_pd(e) != 0;
        up |= _mm_movemask_pd(hi) != 0;
        dn |= _mm_movemask_pd(lo) != 0;
    }
#endif
    for (; k < len; k++) {
        double x = u[k];
        bad |= !(x - x == 0.0);
        eq |= x == u[k - 1];
        up |= x > cmx;
        dn |= x < cmn;
    }
    return bad | eq << 1 | up << 2 | dn << 3;
}

/* The block form of se_clip_sample, for [i0, i0+n) in order, with the finite test: returns the
 * index of the first non-finite value (the clipping state is then unusable), n if none. A block
 * with no two equal neighbours (nor equal to the run before it), once the record varies, holds
 * only runs of one sample: the run before it closes at i0 and the extremes move at most once, as
 * sample by sample. Other blocks go sample by sample. The scan of a block tests each value
 * against the extremes instead of carrying a running minimum and maximum (a chain of dependent
 * operations); the block's own extreme is found only when it passes one. */
static size_t se_clip_block(se_sl *s, size_t i0, const double *v, size_t n)
{
    size_t j, k;
    for (j = 0; j < n; j += k) {
        size_t len = n - j < 256 ? n - j : 256;
        const double *u = v + j;
        const double cmx = s->cmax.value, cmn = s->cmin.value;
        int fl = se_block_flags(u, len, cmx, cmn);
        int bad = fl & 1, eq = fl & 2, up = fl & 4, dn = fl & 8;
        if (bad)
            for (k = 0; k < len; k++)
                if (!isfinite(u[k]))
                    return j + k;
        k = len;
        if (i0 + j == 0 || !s->varies || u[0] == s->run_v || eq) {
            for (k = 0; k < len; k++)
                se_clip_sample(s, i0 + j + k, u[k]);
            continue;
        }
        se_clip_close(s); /* the run before the block ends at i0 + j (s->seen) */
        if (up) {
            double hi = u[0];
            for (k = 1; k < len; k++)
                hi = u[k] > hi ? u[k] : hi;
            memset(&s->cmax, 0, sizeof s->cmax);
            s->cmax.value = hi;
        }
        if (dn) {
            double lo = u[0];
            for (k = 1; k < len; k++)
                lo = u[k] < lo ? u[k] : lo;
            memset(&s->cmin, 0, sizeof s->cmin);
            s->cmin.value = lo;
        }
        k = len;
        s->run_v = u[len - 1];
        s->run_start = i0 + j + len - 1;
        s->seen = i0 + j + len;
    }
    return n;
}

/* Index of the first non-finite value of v [size: n], n if none; x - x is NaN exactly then. */
static size_t se_first_bad(const double *v, size_t n)
{
    size_t j, k;
    for (j = 0; j < n; j += 512) {
        size_t len = n - j < 512 ? n - j : 512;
        int bad = 0;
        for (k = 0; k < len; k++)
            bad |= !(v[j + k] - v[j + k] == 0.0);
        if (bad)
            for (k = 0; k < len; k++)
                if (!isfinite(v[j + k]))
                    return j + k;
    }
    return n;
}

/* ---- candidate clusters ---- */

/* A candidate at lag i, |r| = av: it joins the open cluster when no more than 2 left lags past
 * its last candidate (where the window of r kept around it would have closed), else opens one. */
static se_status se_sl_cand(se_sl *s, size_t i, double av, se_error *err)
{
    se_window *w;
    if (s->open) {
        w = &s->wins[s->nwins - 1];
        if (i <= w->cand_last + 2 * s->left) {
            w->cand_last = i;
            if (av > w->cmax)
                w->cmax = av;
            return SE_OK;
        }
    }
    if (s->nwins == s->capwins) {
        size_t nc = s->capwins ? 2 * s->capwins : 16;
        se_window *nw = realloc(s->wins, nc * sizeof *nw);
        if (nw == NULL)
            return se_fail(err, SE_ERR_NOMEM, "stream: cannot grow the window list to %zu", nc);
        s->wins = nw;
        s->capwins = nc;
    }
    w = &s->wins[s->nwins++];
    w->cand_first = w->cand_last = i;
    w->cmax = av;
    s->open = 1;
    return SE_OK;
}

/* Provisional noise on the first lags after start: a pre-threshold at SE_STREAM_PRE_FRACTION of
 * the threshold it implies, below the final one unless the noise falls along the record by more
 * than that (checked at the end, and the pass redone then). Clusters below it are dropped. */
static se_status se_provisional(se_sl *s, se_error *err)
{
    se_noise nz;
    double k, pre;
    size_t i, keep = 0;
    se_status st = se_noise_mad(s->pbuf, 0, s->pcount, 0, &nz, err);
    if (st != SE_OK)
        return st;
    k = se_rice_k((double)(s->end - s->start), nz.beta > 0.0 ? nz.beta : 1.0, s->fa);
    pre = isfinite(k) ? SE_STREAM_PRE_FRACTION * k * nz.sigma : 0.0;
    if (pre > s->pre)
        s->pre = pre;
    for (i = 0; i < s->nwins; i++) {
        int last = i + 1 == s->nwins;
        if (s->wins[i].cmax >= s->pre)
            s->wins[keep++] = s->wins[i];
        else if (last)
            s->open = 0;
    }
    s->nwins = keep;
    return SE_OK;
}

/* Candidates among lags [a, b) (values v[i - i0]): 64 lags at a time counted against pre (a loop
 * the compiler vectorises), lag by lag only in the groups that hold one. */
static void se_sl_scan(se_sl *s, size_t i0, const double *v, size_t a, size_t b, se_status *st,
                       se_error *err)
{
    const double pre = s->pre, *p = v + (a - i0);
    size_t n = b - a, j, k;
    if (s->pprof != NULL) {
        se_sl_scan_profile(s, i0, v, a, b, st, err);
        return;
    }
    for (j = 0; j < n && *st == SE_OK; j += 64) {
        size_t len = n - j < 64 ? n - j : 64;
        if (!se_any_at_least(p + j, len, pre))
            continue;
        for (k = 0; k < len && *st == SE_OK; k++)
            if (fabs(p[j + k]) >= pre)
                *st = se_sl_cand(s, a + j + k, fabs(p[j + k]), err);
    }
}

/* Lags [i0, i0+n) of r (values v), in order, once the direct arrival is known: the noise sample
 * picked by index arithmetic, the provisional noise filled, candidates scanned. */
static se_status se_sl_block(se_sl *s, size_t i0, const double *v, size_t n, se_error *err)
{
    size_t i1 = i0 + n, lo, hi;
    se_status st = SE_OK;
    if (n == 0)
        return SE_OK;
    /* noise sample: r[at] and r[at+1] (when at + 1 < end) for at = start + k stride, k < used */
    if (s->pending) {
        s->q[s->qn++] = v[0];
        s->pending = 0;
        s->ni++;
    }
    while (s->ni < s->used) {
        size_t at = s->start + s->ni * s->stride;
        if (at >= i1)
            break;
        s->q[s->qn++] = v[at - i0];
        if (at + 1 >= s->end) {
            s->ni++;
        } else if (at + 1 < i1) {
            s->q[s->qn++] = v[at + 1 - i0];
            s->ni++;
        } else {
            s->pending = 1;
            break;
        }
    }
    lo = i0 > s->start ? i0 : s->start;
    hi = i1 < s->end ? i1 : s->end;
    if (s->nb > 0 && (st = se_sl_noise_blocks(s, i0, v, lo, hi, err)) != SE_OK)
        return st;
    while (lo < hi && st == SE_OK) {
        if (s->pre_fixed == 0.0 && s->pcount < s->plen) {
            size_t take = hi - lo < s->plen - s->pcount ? hi - lo : s->plen - s->pcount;
            memcpy(s->pbuf + s->pcount, v + (lo - i0), take * sizeof *v);
            s->pcount += take;
            if (s->pcount < s->plen) {
                se_sl_scan(s, i0, v, lo, lo + take, &st, err);
                lo += take;
                continue;
            }
            /* the lag that fills the provisional sample is already tested against its level */
            se_sl_scan(s, i0, v, lo, lo + take - 1, &st, err);
            if (st == SE_OK)
                st = se_provisional(s, err);
            lo += take - 1;
            continue;
        }
        se_sl_scan(s, i0, v, lo, hi, &st, err);
        lo = hi;
    }
    return st;
}

/* The argmax range [lo, hi) has been seen: fix k0 (se_locate's rule: the first largest |r|), the
 * noise sample and the pre-threshold floor, then replay the lags seen so far. */
static se_status se_sl_know(se_sl *s, size_t c0, size_t c1, const double *chunk, se_error *err)
{
    size_t i, best = SIZE_MAX, count, f0;
    double bestv = 0.0;
    se_status st;
    for (i = s->lo; i < s->hi; i++)
        if (fabs(s->dbuf[i - s->d0]) > bestv) {
            bestv = fabs(s->dbuf[i - s->d0]);
            best = i;
        }
    if (best == SIZE_MAX || !(bestv > 0.0))
        return se_fail(err, SE_ERR_NOTFOUND,
                       "the outgoing pulse does not appear in the response (no correlation peak)");
    s->k0 = best;
    s->known = 1;
    s->start = s->k0 + s->m < s->n ? s->k0 + s->m : s->n;
    s->end = s->n - s->m + 1;
    if (s->end <= s->start + 16)
        return SE_OK; /* reported by the caller with se_locate's message */
    count = s->end - s->start;
    s->stride = count / s->used + (count % s->used != 0); /* s->used holds max_samples here */
    s->used = (count + s->stride - 1) / s->stride;
    s->q = malloc(2 * s->used * sizeof *s->q);
    if (s->q == NULL)
        return se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate the noise sample (%zu lags)", s->used);
    /* se_locate's noise profile: blocks from start = k0 + m (the profile pass needs none) */
    s->blen = se_noise_block_length(s->m);
    s->nb = s->track && s->pprof == NULL ? se_noise_block_count(s->start, s->end, s->blen) : 0;
    if (s->nb < 3) {
        s->nb = 0;
    } else {
        s->taps = malloc(SE_NOISE_BLOCK_TAPS * sizeof *s->taps);
        s->tval = malloc(SE_NOISE_BLOCK_TAPS * sizeof *s->tval);
        s->braw = malloc(s->nb * sizeof *s->braw);
        s->bhi = malloc(s->nb * sizeof *s->bhi);
        if (s->taps == NULL || s->tval == NULL || s->braw == NULL || s->bhi == NULL)
            return se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate %zu noise blocks", s->nb);
        if ((st = se_sl_taps(s, err)) != SE_OK)
            return st;
    }
    /* CLEAN's floor: sigma >= 1e-4 |a0| and k >= 3, so |r| below 3e-4 |a0| is never detected;
     * half that for the refined a0 against |r[k0]|. */
    if (s->pre_fixed > 0.0)
        s->pre = s->pre_fixed;
    else
        s->pre = 0.5 * 3.0 * SE_STREAM_NOISE_FLOOR * bestv;
    /* lags before start do nothing; [start, c0) are in D (d1 > hi + m > start), then the chunk */
    if (s->start < c0) {
        size_t b = c0 < s->d1 ? c0 : s->d1;
        if ((st = se_sl_block(s, s->start, s->dbuf + (s->start - s->d0), b - s->start, err)) != SE_OK)
            return st;
    }
    f0 = s->start > c0 ? s->start : c0;
    if (f0 < c1)
        return se_sl_block(s, f0, chunk + (f0 - c0), c1 - f0, err);
    return SE_OK;
}

/* r[c0, c1) of the record, in order. */
static se_status se_sl_chunk(se_sl *s, size_t c0, size_t c1, const double *r, se_error *err)
{
    size_t i;
    if (s->pass0) {
        for (i = c0; i < c1; i++) {
            double a = fabs(r[i - c0]);
            if (a > s->gmax) {
                s->gmax = a;
                /* prefix maxima below half the largest so far can no longer be the answer */
                while (s->pm_head < s->pm_n && s->pm_v[s->pm_head] < 0.5 * a)
                    s->pm_head++;
                if (s->pm_head > 0 && s->pm_n == s->pm_cap) {
                    memmove(s->pm_i, s->pm_i + s->pm_head, (s->pm_n - s->pm_head) * sizeof *s->pm_i);
                    memmove(s->pm_v, s->pm_v + s->pm_head, (s->pm_n - s->pm_head) * sizeof *s->pm_v);
                    s->pm_n -= s->pm_head;
                    s->pm_head = 0;
                }
                if (s->pm_n == s->pm_cap) {
                    size_t nc = s->pm_cap ? 2 * s->pm_cap : 64;
                    size_t *ni = realloc(s->pm_i, nc * sizeof *ni);
                    double *nv;
                    if (ni == NULL)
                        return se_fail(err, SE_ERR_NOMEM, "stream: cannot grow the maxima list");
                    s->pm_i = ni;
                    nv = realloc(s->pm_v, nc * sizeof *nv);
                    if (nv == NULL)
                        return se_fail(err, SE_ERR_NOMEM, "stream: cannot grow the maxima list");
                    s->pm_v = nv;
                    s->pm_cap = nc;
                }
                s->pm_i[s->pm_n] = i;
                s->pm_v[s->pm_n++] = a;
            }
        }
        return SE_OK;
    }
    if (c1 > s->d0 && c0 < s->d1) {
        size_t a = c0 > s->d0 ? c0 : s->d0, b = c1 < s->d1 ? c1 : s->d1;
        memcpy(s->dbuf + (a - s->d0), r + (a - c0), (b - a) * sizeof *r);
    }
    if (!s->known) {
        if (c1 >= s->hi)
            return se_sl_know(s, c0, c1, r, err);
        return SE_OK;
    }
    if (s->end <= s->start + 16)
        return SE_OK;
    return se_sl_block(s, c0, r, c1 - c0, err);
}

static void se_sl_reset(se_sl *s)
{
    s->nwins = 0;
    s->open = 0;
    free(s->q);
    s->q = NULL;
    s->known = 0;
    s->ni = s->qn = s->pcount = 0;
    s->pending = 0;
    memset(&s->cmax, 0, sizeof s->cmax);
    memset(&s->cmin, 0, sizeof s->cmin);
    s->seen = 0;
    s->varies = 0;
    free(s->taps);
    free(s->tval);
    free(s->braw);
    free(s->bhi);
    s->taps = NULL;
    s->tval = s->braw = s->bhi = NULL;
    s->nb = s->bi = s->ntaps = s->tnext = s->tlen = 0;
}

static int se_tap_by_pos(const void *a, const void *b)
{
    const se_tap *x = a, *y = b;
    if (x->pos != y->pos)
        return (x->pos > y->pos) - (x->pos < y->pos);
    return (x->slot > y->slot) - (x->slot < y->slot);
}

/* The sampled lags of noise block bi, in the order they go by (made again only when the block's
 * length changes: the last block is longer). */
static se_status se_sl_taps(se_sl *s, se_error *err)
{
    size_t b0 = s->start + s->bi * s->blen, b1 = s->bi + 1 == s->nb ? s->end : b0 + s->blen, i;
    s->tnext = 0;
    if (b1 - b0 == s->tlen)
        return SE_OK;
    {
        size_t *idx = malloc(SE_NOISE_BLOCK_TAPS * sizeof *idx);
        if (idx == NULL)
            return se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate the noise block samples");
        s->ntaps = se_noise_block_taps(b1 - b0, idx, NULL);
        for (i = 0; i < s->ntaps; i++) {
            s->taps[i].pos = idx[i];
            s->taps[i].slot = i;
        }
        free(idx);
    }
    qsort(s->taps, s->ntaps, sizeof *s->taps, se_tap_by_pos);
    s->tlen = b1 - b0;
    return SE_OK;
}

/* Lags [lo, hi) of r (values v[i - i0]), in order, into the noise blocks: each block's sigmas
 * from the lags se_noise_block_sigma samples (se_noise_block_sigma_taps), as
 * se_noise_profile_estimate takes them. */
static se_status se_sl_noise_blocks(se_sl *s, size_t i0, const double *v, size_t lo, size_t hi,
                                    se_error *err)
{
    while (lo < hi && s->bi < s->nb) {
        size_t b0 = s->start + s->bi * s->blen;
        size_t b1 = s->bi + 1 == s->nb ? s->end : b0 + s->blen;
        size_t e = hi < b1 ? hi : b1;
        /* the taps before lo went by in earlier calls */
        while (s->tnext < s->ntaps && b0 + s->taps[s->tnext].pos < e) {
            s->tval[s->taps[s->tnext].slot] = v[b0 + s->taps[s->tnext].pos - i0];
            s->tnext++;
        }
        lo = e;
        if (e == b1) {
            se_status st = se_noise_block_sigma_taps(s->tval, b1 - b0, &s->braw[s->bi],
                                                     &s->bhi[s->bi], err);
            if (st != SE_OK)
                return st;
            s->bi++;
            if (s->bi < s->nb && (st = se_sl_taps(s, err)) != SE_OK)
                return st;
        }
    }
    return SE_OK;
}

/* Block of the profile holding lag (as se_noise_profile_sigma finds it, 0 before the range). */
static size_t se_prof_block(const se_noise_profile *p, size_t lag)
{
    size_t b;
    if (lag < p->start)
        return 0;
    b = (lag - p->start) / p->block;
    return b < p->n_blocks ? b : p->n_blocks - 1;
}

/* The profile pass's scan of lags [a, b): 64 lags at a time against the lowest level of the
 * blocks at their ends (sigma(j) >= the level of j's block), lag by lag against
 * SE_STREAM_PRE_FRACTION of pk sigma(j) in the groups that hold one. */
static void se_sl_scan_profile(se_sl *s, size_t i0, const double *v, size_t a, size_t b,
                               se_status *st, se_error *err)
{
    const se_noise_profile *pf = s->pprof;
    const double *p = v + (a - i0), f = SE_STREAM_PRE_FRACTION * s->pk;
    size_t n = b - a, j, k;
    for (j = 0; j < n && *st == SE_OK; j += 64) {
        size_t len = n - j < 64 ? n - j : 64;
        double lo = f * fmin(pf->sigma[se_prof_block(pf, a + j)],
                             pf->sigma[se_prof_block(pf, a + j + len - 1)]);
        if (!se_any_at_least(p + j, len, lo))
            continue;
        for (k = 0; k < len && *st == SE_OK; k++) {
            double t = s->pk * se_noise_profile_sigma(pf, (double)(a + j + k));
            if (fabs(p[j + k]) >= SE_STREAM_PRE_FRACTION * t)
                *st = se_sl_cand(s, a + j + k, fabs(p[j + k]) / t, err);
        }
    }
}

/* The profile p seen from a window of r that starts at lag *a_out (<= a) and ends at e: the same
 * level at every lag of [a, e) from index j = lag - *a_out. The blocks are cut into parts of
 * block/64 lags (more than the guard, so the guard rule picks the same neighbours) and the window
 * starts at the part before the one holding a (so that part's neighbour is there): it grows by
 * less than block/32 lags. out owns its sigma array (se_noise_profile_free). */
static se_status se_window_profile(const se_noise_profile *p, size_t a, size_t e, size_t *a_out,
                                   se_noise_profile *out, se_error *err)
{
    size_t per = p->block % 64 == 0 && p->block / 64 > p->guard ? 64 : 1, g = p->block / per;
    size_t total = p->n_blocks * per, i0, i1, k;
    memset(out, 0, sizeof *out);
    *out = *p;
    out->raw = NULL;
    out->sigma = NULL;
    if (a <= p->start) {
        *a_out = a;
        out->start = p->start - a;
        i0 = 0;
    } else if ((a - p->start) / g >= total) {
        /* past the last part: the last block's level throughout */
        *a_out = a;
        out->start = 0;
        out->n_blocks = 1;
        out->sigma = se_calloc(1, sizeof *out->sigma, "window noise profile", err);
        if (out->sigma == NULL)
            return SE_ERR_NOMEM;
        out->sigma[0] = p->sigma[p->n_blocks - 1];
        return SE_OK;
    } else {
        i0 = (a - p->start) / g;
        i0 = i0 > 0 ? i0 - 1 : 0;
        *a_out = p->start + i0 * g;
        out->start = 0;
    }
    i1 = e > p->start ? (e - 1 - p->start) / g + 1 : 1;
    if (i1 > total - 1)
        i1 = total - 1;
    if (i1 < i0)
        i1 = i0;
    out->block = g;
    out->n_blocks = i1 - i0 + 1;
    out->sigma = se_calloc(out->n_blocks, sizeof *out->sigma, "window noise profile", err);
    if (out->sigma == NULL)
        return SE_ERR_NOMEM;
    for (k = 0; k < out->n_blocks; k++)
        out->sigma[k] = p->sigma[(i0 + k) / per];
    return SE_OK;
}

/* o[j] = f[j], j < n: 256 at a time (a fixed count the compiler vectorises at -O2), then the rest. */
static void se_widen(double *o, const float *f, size_t n)
{
    size_t j = 0, k;
    for (; j + 256 <= n; j += 256)
        for (k = 0; k < 256; k++)
            o[j + k] = (double)f[j + k];
    for (; j < n; j++)
        o[j] = (double)f[j];
}

/* count frames of the response channel into x, from frame pos (SIZE_MAX: from where the file
 * is). Native-endian float data are read raw (sf_read_raw into src->fbuf, one read per
 * SE_STREAM_READ_FRAMES frames) and widened here: the same doubles libsndfile's float-to-double
 * read gives (a float widens exactly), without its copy through a small buffer. Other mono files
 * are read straight into x; others through src->inter. */
static se_status se_read_range(se_src *src, size_t pos, size_t count, double *x, se_error *err)
{
    size_t got = 0, nch = src->nch, ch = src->ch;
    if (pos != SIZE_MAX && sf_seek(src->snd, (sf_count_t)pos, SEEK_SET) != (sf_count_t)pos)
        return se_fail(err, SE_ERR_IO, "%s: cannot seek to frame %zu", src->path, pos);
    while (got < count) {
        size_t take = count - got, j;
        sf_count_t k;
        if (src->rawf) {
            const float *f = src->fbuf;
            double *o = x + got;
            if (take > SE_STREAM_READ_FRAMES)
                take = SE_STREAM_READ_FRAMES;
            k = sf_read_raw(src->snd, src->fbuf, (sf_count_t)(take * nch * sizeof(float)));
            k = k > 0 ? k / (sf_count_t)(nch * sizeof(float)) : 0;
            if (nch == 1)
                se_widen(o, f, (size_t)k);
            else
                for (j = 0; j < (size_t)k; j++)
                    o[j] = (double)f[j * nch + ch];
        } else if (nch == 1) {
            k = sf_readf_double(src->snd, x + got, (sf_count_t)take);
        } else {
            if (take > SE_STREAM_READ_FRAMES)
                take = SE_STREAM_READ_FRAMES;
            k = sf_readf_double(src->snd, src->inter, (sf_count_t)take);
            for (j = 0; k > 0 && j < (size_t)k; j++)
                x[got + j] = src->inter[j * nch + ch];
        }
        if (k <= 0)
            return se_fail(err, SE_ERR_FORMAT, "%s: truncated: file ends before frame %zu", src->path,
                           (pos == SIZE_MAX ? 0 : pos) + got + 1);
        got += (size_t)k;
    }
    return SE_OK;
}

/* se_read_range as an se_sample_reader (ctx: the se_src), for se_locate_finish. */
static se_status se_read_src(void *ctx, size_t pos, size_t count, double *out, se_error *err)
{
    return se_read_range((se_src *)ctx, pos, count, out, err);
}

/* r[a, e) recomputed from the file, bit for bit what the pass computed: the chunk starts at a
 * multiple of the step and ends at one (or at the record's end), as every chunk of the pass does
 * (se_xcorr_run_part). *data receives a malloc'd array of e - a values. */
static se_status se_window_data(const se_sl *s, se_src *src, const se_xcorr *xc, se_xcorr_work *w,
                                size_t a, size_t e, double **data, se_error *err)
{
    size_t step = se_xcorr_step(xc), c = a / step * step, nl, nx;
    double *x = NULL, *r = NULL;
    se_status st;
    nl = (e - c + step - 1) / step * step;
    if (nl > s->n - c)
        nl = s->n - c;
    nx = nl + s->m - 1 < s->n - c ? nl + s->m - 1 : s->n - c;
    *data = NULL;
    x = malloc(nx * sizeof *x);
    r = malloc(nl * sizeof *r);
    if (x == NULL || r == NULL) {
        st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate a window of %zu lags", nl);
        goto done;
    }
    if ((st = se_read_range(src, c, nx, x, err)) != SE_OK)
        goto done;
    if ((st = se_xcorr_run_part(xc, w, x, nx, nl, r, err)) != SE_OK)
        goto done;
    memmove(r, r + (a - c), (e - a) * sizeof *r);
    *data = r;
    r = NULL;
done:
    free(x);
    free(r);
    return st;
}

/* ---- one pass over the file ----
 * The lags are cut in chunks of lc (a multiple of the step): chunk k is r[k lc, (k+1) lc), the
 * last one running to the record's end, correlated from its own input x[k lc, (k+1) lc + m - 1)
 * read from the file, so that se_xcorr_run_part gives what the whole record gives, bit for bit.
 * With two threads, two correlating threads live for the whole pass, each with its own handle
 * on the file, and take the next chunk in turn; the calling thread scans the chunks in order
 * (clipping, then se_sl_chunk) from a ring of SE_STREAM_RING slots. Nothing is started or joined
 * per chunk, and the correlators never wait for each other, only for a free slot: on a machine
 * whose cores wake slowly, a barrier per chunk cost more than the scan. */
typedef struct se_slot {
    double *x, *r; /* [size: lc + m - 1], [size: lc] */
    size_t c0, c1; /* the chunk's lags */
    int ready;
    se_status st;
    se_error err;
} se_slot;

typedef struct se_passq {
    const se_sl *s;
    const se_xcorr *xc;
    size_t lc, nchunks, next, used; /* next: the next chunk to take; used: chunks scanned */
    se_slot slot[SE_STREAM_RING];
    int stop;
    pthread_mutex_t mu;
    pthread_cond_t cv;
} se_passq;

/* One correlating thread: its handle on the file and its FFT buffers. */
typedef struct se_corr {
    se_passq *q;
    se_src *src;
    se_xcorr_work *w;
} se_corr;

/* Chunk k into sl: x read, then r. se_xcorr_run_part tests x finite; the first non-finite sample
 * is then named (the scan takes the chunks in order, so the first it meets is the record's
 * first). */
static void se_chunk_make(const se_passq *q, se_src *src, se_xcorr_work *w, size_t k, se_slot *sl)
{
    size_t n = q->s->n, m = q->s->m, c0 = k * q->lc, c1 = c0 + q->lc < n ? c0 + q->lc : n;
    size_t nx = c1 + m - 1 < n ? c1 - c0 + m - 1 : n - c0, bad;
    sl->c0 = c0;
    sl->c1 = c1;
    se_error_clear(&sl->err);
    if ((sl->st = se_read_range(src, c0, nx, sl->x, &sl->err)) != SE_OK)
        return;
    sl->st = se_xcorr_run_part(q->xc, w, sl->x, nx, c1 - c0, sl->r, &sl->err);
    if (sl->st == SE_ERR_DATA && (bad = se_first_bad(sl->x, nx)) < nx)
        sl->st = se_fail(&sl->err, SE_ERR_DATA, "%s: sample %zu (channel %u) is %s", src->path,
                         c0 + bad, src->ch + 1, isnan(sl->x[bad]) ? "NaN" : "infinite");
}

static void *se_corr_run(void *arg)
{
    se_corr *c = arg;
    se_passq *q = c->q;
    for (;;) {
        size_t k;
        se_slot *sl;
        int failed;
        pthread_mutex_lock(&q->mu);
        while (!q->stop && q->next < q->nchunks && q->next - q->used >= SE_STREAM_RING)
            pthread_cond_wait(&q->cv, &q->mu);
        if (q->stop || q->next >= q->nchunks) {
            pthread_mutex_unlock(&q->mu);
            return NULL;
        }
        k = q->next++;
        pthread_mutex_unlock(&q->mu);
        sl = &q->slot[k % SE_STREAM_RING];
        se_chunk_make(q, c->src, c->w, k, sl);
        failed = sl->st != SE_OK; /* read before the slot is handed over (then reused) */
        pthread_mutex_lock(&q->mu);
        sl->ready = 1;
        pthread_cond_broadcast(&q->cv);
        pthread_mutex_unlock(&q->mu);
        if (failed)
            return NULL; /* the scan stops there; the chunks before are the other thread's */
    }
}

/* The read buffers src's format needs (raw floats, or all channels interleaved); 0 when they
 * cannot be allocated. */
static int se_src_buffers(se_src *src)
{
    if (src->rawf)
        src->fbuf = malloc((size_t)SE_STREAM_READ_FRAMES * src->nch * sizeof *src->fbuf);
    else if (src->nch > 1)
        src->inter = malloc((size_t)SE_STREAM_READ_FRAMES * src->nch * sizeof *src->inter);
    return !((src->rawf && src->fbuf == NULL) || (!src->rawf && src->nch > 1 && src->inter == NULL));
}

/* A second handle on src's file for a correlating thread, read the same way. */
static int se_src_twin(const se_src *src, se_src *twin)
{
    SF_INFO sfi;
    memset(twin, 0, sizeof *twin);
    memset(&sfi, 0, sizeof sfi);
    *twin = *src;
    twin->fbuf = NULL;
    twin->inter = NULL;
    twin->snd = sf_open(src->path, SFM_READ, &sfi);
    if (twin->snd == NULL)
        return 0;
    sf_command(twin->snd, SFC_SET_SCALE_FLOAT_INT_READ, NULL, SF_FALSE);
    if ((unsigned)sfi.channels != src->nch)
        return 0;
    return se_src_buffers(twin);
}

static void se_src_close(se_src *src)
{
    if (src->snd != NULL)
        sf_close(src->snd);
    free(src->fbuf);
    free(src->inter);
    memset(src, 0, sizeof *src);
}

/* One pass over the file: the response channel read and correlated in chunks of lc lags, r handed
 * to se_sl_chunk in order (after the clipping scan of the chunk's samples). hook (may be NULL)
 * runs in this thread once the correlation has started, before the first chunk is scanned. */
static se_status se_pass(se_sl *s, se_src *src, const se_xcorr *xc, se_xcorr_work *const *w,
                         unsigned threads, size_t lc, se_pass_hook hook, void *hook_ctx,
                         se_error *err)
{
    size_t m = s->m, n = s->n, i, k, nslots = threads > 1 ? SE_STREAM_RING : 1;
    se_passq q;
    se_src twin;
    se_corr cr[2];
    pthread_t tid[2];
    int started[2] = {0, 0}, sync_ok = 0, twin_ok = 0;
    unsigned nt = 0;
    se_status st = SE_OK;

    memset(&q, 0, sizeof q);
    memset(&twin, 0, sizeof twin);
    q.s = s;
    q.xc = xc;
    q.lc = lc;
    q.nchunks = (n + lc - 1) / lc;
    for (i = 0; i < nslots; i++) {
        q.slot[i].x = malloc((lc + m - 1) * sizeof *q.slot[i].x);
        q.slot[i].r = malloc(lc * sizeof *q.slot[i].r);
        if (q.slot[i].x == NULL || q.slot[i].r == NULL) {
            st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate chunk buffers of %zu samples",
                         lc + m - 1);
            goto done;
        }
    }
    if (threads > 1 && pthread_mutex_init(&q.mu, NULL) == 0) {
        if (pthread_cond_init(&q.cv, NULL) == 0)
            sync_ok = 1;
        else
            pthread_mutex_destroy(&q.mu);
    }
    if (sync_ok) {
        twin_ok = se_src_twin(src, &twin);
        for (i = 0; i < (twin_ok ? 2u : 1u); i++) {
            cr[i].q = &q;
            cr[i].src = i == 0 ? src : &twin;
            cr[i].w = w[i];
            started[i] = pthread_create(&tid[i], NULL, se_corr_run, &cr[i]) == 0;
            nt += started[i] != 0;
        }
    }
    if (hook != NULL)
        st = hook(hook_ctx, err);
    for (k = 0; k < q.nchunks && st == SE_OK; k++) {
        se_slot *sl = &q.slot[nt > 0 ? k % SE_STREAM_RING : 0];
        if (nt > 0) {
            pthread_mutex_lock(&q.mu);
            while (!sl->ready)
                pthread_cond_wait(&q.cv, &q.mu);
            pthread_mutex_unlock(&q.mu);
        } else {
            se_chunk_make(&q, src, w[0], k, sl);
        }
        if (sl->st != SE_OK) {
            st = se_fail(err, sl->st, "%s", sl->err.message);
        } else {
            size_t len = sl->c1 - sl->c0;
            if (!s->pass0 && se_clip_block(s, sl->c0, sl->x, len) < len) /* tested finite */
                st = se_fail(err, SE_ERR_DATA, "%s: a sample of frames %zu to %zu is not finite",
                             src->path, sl->c0, sl->c1 - 1);
            if (st == SE_OK)
                st = se_sl_chunk(s, sl->c0, sl->c1, sl->r, err);
        }
        if (nt > 0) {
            pthread_mutex_lock(&q.mu);
            sl->ready = 0;
            q.used++;
            pthread_cond_broadcast(&q.cv);
            pthread_mutex_unlock(&q.mu);
        }
    }
    if (nt > 0) {
        pthread_mutex_lock(&q.mu);
        q.stop = 1;
        pthread_cond_broadcast(&q.cv);
        pthread_mutex_unlock(&q.mu);
    }
    for (i = 0; i < 2; i++)
        if (started[i])
            pthread_join(tid[i], NULL);
    if (st == SE_OK && !s->pass0)
        se_clip_close(s);
done:
    if (sync_ok) {
        pthread_cond_destroy(&q.cv);
        pthread_mutex_destroy(&q.mu);
    }
    se_src_close(&twin); /* zeroed when never opened */
    for (i = 0; i < nslots; i++) {
        free(q.slot[i].x);
        free(q.slot[i].r);
    }
    return st;
}

/* One window to CLEAN: r[a, e) recomputed from the file (data), the lags [s0, s1) searched, the
 * noise profile seen from it. */
typedef struct se_wjob {
    const se_sl *s;
    se_src *src;
    const se_xcorr *xc;
    se_xcorr_work *w;
    size_t a, e, s0, s1;
    se_noise_profile prof;
    double *data;
    se_status st;
    se_error err;
} se_wjob;

static void *se_wjob_fetch(void *arg)
{
    se_wjob *j = arg;
    se_error_clear(&j->err);
    j->st = se_window_data(j->s, j->src, j->xc, j->w, j->a, j->e, &j->data, &j->err);
    return NULL;
}

/* The first cluster from *i on that holds something to CLEAN, as job j (*have = 1; *i moves past
 * it), or *have = 0. A cluster whose largest |r| is below the threshold holds no detection
 * (every other lag of its range is below pre <= thr, and the direct arrival's sidelobes end
 * before start), so only the others get their window r[cand_first - left, cand_last + left]
 * recomputed. ds: the end of the dead zone. */
static se_status se_wjob_next(const se_sl *s, size_t *i, int varies, double thr, size_t ds,
                              const se_noise_profile *prof, se_wjob *j, int *have, se_error *err)
{
    *have = 0;
    for (; *i < s->nwins; (*i)++) {
        const se_window *wd = &s->wins[*i];
        size_t a = wd->cand_first > s->left ? wd->cand_first - s->left : 0;
        size_t e = s->n - wd->cand_last > s->left ? wd->cand_last + s->left + 1 : s->n;
        size_t s0 = wd->cand_first > s->reach ? wd->cand_first - s->reach : 0;
        size_t s1 = wd->cand_last + s->reach + 1;
        /* with the profile, cmax is relative to each lag's own threshold */
        if (!(wd->cmax >= (varies ? 1.0 : thr)))
            continue;
        if (s0 < ds)
            s0 = ds;
        if (s1 > s->end)
            s1 = s->end;
        if (s1 > e)
            s1 = e;
        if (s0 >= s1)
            continue;
        se_noise_profile_free(&j->prof);
        if (varies) {
            se_status st = se_window_profile(prof, a, e, &a, &j->prof, err);
            if (st != SE_OK)
                return st;
        }
        j->a = a;
        j->e = e;
        j->s0 = s0;
        j->s1 = s1;
        j->data = NULL;
        j->st = SE_OK;
        (*i)++;
        *have = 1;
        return SE_OK;
    }
    return SE_OK;
}

/* Where the direct arrival's r is kept: D = r[d0, d1) around the argmax range [lo, hi). */
static se_status se_sl_direct(se_sl *s, se_error *err)
{
    size_t h = SE_STREAM_DIRECT_HALF > s->left + 2 ? SE_STREAM_DIRECT_HALF : s->left + 2;
    s->d0 = s->lo > h ? s->lo - h : 0;
    s->d1 = s->n - s->hi > h ? s->hi + h : s->n;
    s->dbuf = malloc((s->d1 - s->d0) * sizeof *s->dbuf);
    if (s->dbuf == NULL)
        return se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate %zu lags", s->d1 - s->d0);
    return SE_OK;
}

/* The first pass's hook (se_pass_hook): the reference's autocorrelation and the reaches that
 * follow from it (se_detect's margin, the core around candidates, what is kept before one), made
 * while the first chunks are correlated; then D when the time base is known. */
typedef struct se_prep {
    se_sl *s;
    const double *ref;
    size_t m;
    se_acf **acf;
    int direct;
} se_prep;

static se_status se_prep_run(void *ctx, se_error *err)
{
    se_prep *p = ctx;
    se_sl *s = p->s;
    *p->acf = se_acf_create(p->ref, p->m, err);
    if (*p->acf == NULL)
        return err ? err->code : SE_ERR_NOMEM;
    s->ext = se_acf_half_length(*p->acf);
    s->win = se_acf_extent(*p->acf, 1e-6);
    if (s->win < 16)
        s->win = 16;
    s->mg = s->ext + s->win + 2;
    s->reach = 2 * s->ext + s->win + 4;
    s->left = s->reach + s->mg;
    return p->direct ? se_sl_direct(s, err) : SE_OK;
}

se_status se_locate_stream(const char *path, const se_locate_config *cfg_in,
                           const se_stream_config *scfg_in, se_locate_result *res,
                           se_stream_info *info, se_error *err)
{
    se_stream_config scfg;
    se_locate_config cfg;
    se_stream_info dummy;
    SF_INFO sfi;
    SNDFILE *snd = NULL;
    se_sl s;
    se_status st = SE_OK;
    se_xcorr *xc = NULL;
    se_xcorr_work *w[2] = {NULL, NULL};
    se_acf *acf = NULL;
    se_distmap *own_map = NULL;
    const se_distmap *map;
    double *ref = NULL, *pbuf_pulse = NULL;
    se_peak *all = NULL;
    size_t nall = 0, m, n, lc, step, i, dead = 0, maxp;
    unsigned threads, nch;
    double lag0 = 0.0, a0 = 0.0, sigma, beta, beta_crb, kthr = 0.0, thr = 0.0;
    se_xcorr_config xcfg;
    se_noise_profile prof;
    se_src src;
    se_prep prep;
    se_wjob wj[2];
    int varies = 0, have = 0, wcur = 0, rs_unknown;

    memset(&src, 0, sizeof src);
    memset(&prep, 0, sizeof prep);
    memset(wj, 0, sizeof wj);
    if (res == NULL)
        return se_fail(err, SE_ERR_ARG, "stream locate: no result record");
    memset(res, 0, sizeof *res);
    memset(&s, 0, sizeof s);
    memset(&prof, 0, sizeof prof);
    if (info == NULL)
        info = &dummy;
    memset(info, 0, sizeof *info);
    if (path == NULL || cfg_in == NULL)
        return se_fail(err, SE_ERR_ARG, "stream locate: no file or no configuration");
    cfg = *cfg_in;
    if (scfg_in != NULL)
        scfg = *scfg_in;
    else
        se_stream_config_init(&scfg);
    threads = scfg.threads == 0 ? 2 : scfg.threads;
    if (threads > 2)
        return se_fail(err, SE_ERR_ARG, "stream locate: %u threads asked, 1 or 2 supported", threads);
    if (cfg.quantity == SE_Q_ACCELERATION || cfg.quantity == SE_Q_DISPLACEMENT)
        return se_fail(err, SE_ERR_ARG,
                       "stream locate: %s responses need the whole record to become velocity; "
                       "locate them without streaming",
                       se_quantity_name(cfg.quantity));
    if (cfg.skin_k_s05_per_m != 0.0) /* NaN (estimate) too */
        return se_fail(err, SE_ERR_ARG,
                       "stream locate: skin-effect loss (loss-shaped templates) needs the whole "
                       "record; locate without streaming");
    if (cfg.reference_kind == SE_REF_SELF && scfg.pulse_channel == SE_STREAM_NO_CHANNEL)
        return se_fail(err, SE_ERR_ARG,
                       "stream locate: the self reference needs the whole record; give the pulse "
                       "(a channel, a file or a shape)");
    /* the checks of se_locate that need no data */
    if (cfg.map == NULL && se_check_speed(cfg.speed_m_s, err) != SE_OK)
        return err ? err->code : SE_ERR_RANGE;
    if (!(cfg.speed_uncertainty >= 0.0) || cfg.speed_uncertainty >= 1.0)
        return se_fail(err, SE_ERR_RANGE, "locate: speed uncertainty %g %% is not in [0, 100)",
                       cfg.speed_uncertainty * 100.0);
    if (!(cfg.false_alarms > 0.0) || cfg.false_alarms > 1000.0)
        return se_fail(err, SE_ERR_RANGE, "locate: false-alarm target %g per record is not in (0, 1000]",
                       cfg.false_alarms);
    if (!(cfg.confidence > 0.0 && cfg.confidence < 1.0))
        return se_fail(err, SE_ERR_RANGE, "locate: confidence %g is not in (0, 1)", cfg.confidence);
    /* NaN: estimated from the echoes (se_locate_finish), as se_locate does */
    rs_unknown = isnan(cfg.source_reflection);
    if (!rs_unknown && (!(cfg.source_reflection >= -1.0 && cfg.source_reflection <= 1.0) ||
                        fabs(1.0 + cfg.source_reflection) < 1e-6))
        return se_fail(err, SE_ERR_RANGE,
                       "locate: source-end coefficient %g leaves nothing to measure at the sensor",
                       cfg.source_reflection);

    memset(&sfi, 0, sizeof sfi);
    snd = sf_open(path, SFM_READ, &sfi);
    if (snd == NULL) {
        char msg[256];
        snprintf(msg, sizeof msg, "%s", sf_strerror(NULL)); /* global in libsndfile: copy now */
        return se_fail(err, SE_ERR_FORMAT, "%s: not a sound file libsndfile reads (%s); text tables "
                                           "are not streamed", path, msg);
    }
    sf_command(snd, SFC_SET_SCALE_FLOAT_INT_READ, NULL, SF_FALSE);
    if (sfi.channels < 1 || sfi.samplerate <= 0 || sfi.frames <= 0 || !sfi.seekable) {
        st = se_fail(err, SE_ERR_FORMAT, "%s: header gives %d channels at %d Hz, %lld frames%s", path,
                     sfi.channels, sfi.samplerate, (long long)sfi.frames,
                     sfi.seekable ? "" : ", not seekable");
        goto done;
    }
    {
        SF_FORMAT_INFO fi;
        memset(&fi, 0, sizeof fi);
        fi.format = sfi.format & SF_FORMAT_TYPEMASK;
        if (sf_command(NULL, SFC_GET_FORMAT_INFO, &fi, sizeof fi) == 0 && fi.name != NULL)
            snprintf(info->format, sizeof info->format, "%s", fi.name);
    }
    nch = (unsigned)sfi.channels;
    n = (size_t)sfi.frames;
    info->frames = n;
    info->channels = nch;
    info->rate = (double)sfi.samplerate;
    if (scfg.channel >= nch || (scfg.pulse_channel != SE_STREAM_NO_CHANNEL &&
                                (scfg.pulse_channel < 0 || (unsigned)scfg.pulse_channel >= nch ||
                                 (unsigned)scfg.pulse_channel == scfg.channel))) {
        st = se_fail(err, SE_ERR_ARG, "%s: channel %u / pulse channel %d not usable with %u channel%s",
                     path, scfg.channel, scfg.pulse_channel, nch, nch == 1 ? "" : "s");
        goto done;
    }
    if (n < 16) {
        st = se_fail(err, SE_ERR_DATA, "locate: the response has only %zu samples", n);
        goto done;
    }
    src.snd = snd;
    src.path = path;
    src.nch = nch;
    src.ch = scfg.channel;
    src.rawf = (sfi.format & SF_FORMAT_SUBMASK) == SF_FORMAT_FLOAT &&
               sf_command(snd, SFC_RAW_DATA_NEEDS_ENDSWAP, NULL, 0) == SF_FALSE;
    if (!se_src_buffers(&src)) {
        st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate a read buffer of %u x %d samples",
                     nch, SE_STREAM_READ_FRAMES);
        goto done;
    }

    /* Reference from the pulse channel: its support in the first pulse_window samples. */
    if (scfg.pulse_channel != SE_STREAM_NO_CHANNEL) {
        size_t pw = scfg.pulse_window ? scfg.pulse_window : SE_STREAM_PULSE_WINDOW, got = 0, b, e;
        double *inter = malloc((size_t)SE_STREAM_READ_FRAMES * nch * sizeof *inter);
        if (pw > n)
            pw = n;
        pbuf_pulse = malloc(pw * sizeof *pbuf_pulse);
        if (inter == NULL || pbuf_pulse == NULL) {
            free(inter);
            st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate %zu samples of the pulse channel", pw);
            goto done;
        }
        while (got < pw) {
            size_t take = pw - got < SE_STREAM_READ_FRAMES ? pw - got : SE_STREAM_READ_FRAMES, j;
            sf_count_t k = sf_readf_double(snd, inter, (sf_count_t)take);
            if (k <= 0)
                break;
            for (j = 0; j < (size_t)k; j++)
                pbuf_pulse[got + j] = inter[j * nch + (unsigned)scfg.pulse_channel];
            got += (size_t)k;
        }
        free(inter);
        if (got < pw) {
            st = se_fail(err, SE_ERR_FORMAT, "%s: truncated: header says %zu frames, file holds %zu",
                         path, n, got);
            goto done;
        }
        for (i = 0; i < pw; i++)
            if (!isfinite(pbuf_pulse[i])) {
                st = se_fail(err, SE_ERR_DATA, "%s: sample %zu (channel %d) is not finite", path, i,
                             scfg.pulse_channel + 1);
                goto done;
            }
        if ((st = se_pulse_support(pbuf_pulse, pw, &b, &e, err)) != SE_OK) {
            char why[SE_ERROR_MESSAGE_SIZE];
            snprintf(why, sizeof why, "%s", err ? err->message : "no pulse");
            se_fail(err, st, "%s channel %d: %s", path, scfg.pulse_channel + 1, why);
            goto done;
        }
        memmove(pbuf_pulse, pbuf_pulse + b, (e - b) * sizeof *pbuf_pulse);
        cfg.reference = pbuf_pulse;
        cfg.reference_length = e - b;
        cfg.reference_offset = b;
        cfg.reference_kind = SE_REF_CHANNEL;
    }
    if (cfg.reference == NULL || cfg.reference_length < 3) {
        st = se_fail(err, SE_ERR_ARG, "locate: the reference pulse has fewer than 3 samples");
        goto done;
    }
    m = cfg.reference_length;
    if (m >= n) {
        st = se_fail(err, SE_ERR_DATA,
                     "the response (%zu samples) is not longer than the reference pulse (%zu samples)",
                     n, m);
        goto done;
    }
    ref = se_calloc(m, sizeof *ref, "reference", err);
    if (ref == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    memcpy(ref, cfg.reference, m * sizeof *ref);
    /* Repeated shots on a pulse channel: found and stacked in passes of their own, then located
     * on the stack (on the response's own direct arrivals: after the engine's pass, below). */
    if (cfg.stacking != SE_STACKING_OFF && scfg.pulse_channel != SE_STREAM_NO_CHANNEL) {
        int stacked = 0;
        st = se_stream_stack(&src, n, scfg.pulse_channel, &cfg, info->rate, scfg.block,
                             scfg.stack_memory, res, &stacked, info, err);
        if (st != SE_OK || stacked)
            goto done;
        memset(res, 0, sizeof *res);
    }
    map = cfg.map;
    if (map == NULL) {
        own_map = se_distmap_create_uniform(cfg.speed_m_s, cfg.speed_uncertainty, INFINITY, err);
        if (own_map == NULL) {
            st = err ? err->code : SE_ERR_NOMEM;
            goto done;
        }
        map = own_map;
    }

    memset(&xcfg, 0, sizeof xcfg);
    xcfg.wisdom_path = scfg.wisdom_path;
    xcfg.measure = scfg.measure;
    xc = se_xcorr_create_with(ref, m, &xcfg, err);
    if (xc == NULL) {
        st = err ? err->code : SE_ERR_NOMEM;
        goto done;
    }
    info->plan = se_xcorr_plan_source(xc);
    for (i = 0; i < threads; i++)
        if ((w[i] = se_xcorr_work_create(xc, err)) == NULL) {
            st = err ? err->code : SE_ERR_NOMEM;
            goto done;
        }
    step = se_xcorr_step(xc);
    lc = scfg.block ? scfg.block : SE_STREAM_DEFAULT_BLOCK;
    lc = lc < step ? step : lc / step * step;

    /* Reaches: se_detect's margin, the core around candidates, and what is kept before one. */
    s.cfg = &cfg;
    s.n = n;
    s.m = m;
    s.fa = cfg.false_alarms;
    s.track = cfg.noise_tracking != 0;
    prep.s = &s;
    prep.ref = ref;
    prep.m = m;
    prep.acf = &acf;
    s.plen = SE_STREAM_PROVISIONAL;
    s.pbuf = malloc(s.plen * sizeof *s.pbuf);
    if (s.pbuf == NULL) {
        st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate the provisional sample of %zu lags",
                     s.plen);
        goto done;
    }

    /* Where the direct arrival is searched (se_locate's rule). */
    if (cfg.reference_offset != SIZE_MAX) {
        s.lo = cfg.reference_offset > m ? cfg.reference_offset - m : 0;
        s.hi = cfg.reference_offset + 2 * m + 1 < n ? cfg.reference_offset + 2 * m + 1 : n;
        if (s.lo >= s.hi) {
            st = se_fail(err, SE_ERR_NOTFOUND,
                         "the outgoing pulse does not appear in the response (no correlation peak)");
            goto done;
        }
    } else {
        /* no time base: a pass for the first lag reaching half the largest |r| */
        s.pass0 = 1;
        info->passes++;
        if ((st = se_pass(&s, &src, xc, w, threads, lc, se_prep_run, &prep, err)) != SE_OK)
            goto done;
        s.pass0 = 0;
        for (i = s.pm_head; i < s.pm_n; i++)
            if (s.pm_v[i] >= 0.5 * s.gmax)
                break;
        if (i == s.pm_n || !(s.gmax > 0.0)) {
            st = se_fail(err, SE_ERR_NOTFOUND,
                         "the outgoing pulse does not appear in the response (no correlation peak)");
            goto done;
        }
        s.lo = s.pm_i[i];
        s.hi = s.lo + m + 1 < n ? s.lo + m + 1 : n;
    }
    if (acf != NULL && (st = se_sl_direct(&s, err)) != SE_OK)
        goto done;
    prep.direct = 1;

    for (;;) {
        se_noise nz;
        size_t cnt;
        s.used = scfg.noise_samples ? scfg.noise_samples : SE_STREAM_DEFAULT_NOISE;
        info->passes++;
        st = se_pass(&s, &src, xc, w, threads, lc, acf == NULL ? se_prep_run : NULL, &prep, err);
        if (st != SE_OK)
            goto done;
        if (!s.varies) {
            st = se_fail(err, SE_ERR_DATA, "the response is constant (every sample is %.6g)", s.first_v);
            goto done;
        }
        se_clip_result(&s, res);
        if (!s.known) { /* cannot happen: hi <= n */
            st = se_fail(err, SE_ERR_NOTFOUND, "the outgoing pulse does not appear in the response");
            goto done;
        }
        st = se_refine_peak(s.dbuf, s.d1 - s.d0, s.k0 - s.d0, 0, &lag0, &a0, err);
        if (st != SE_OK)
            goto done;
        lag0 += (double)s.d0;
        if (!(fabs(a0) > 0.0)) {
            st = se_fail(err, SE_ERR_NOTFOUND, "the outgoing pulse does not appear in the response");
            goto done;
        }
        if (s.end <= s.start + 16) {
            st = se_fail(err, SE_ERR_DATA,
                         "the record ends %.6g s after the direct arrival: too short to search for "
                         "echoes",
                         (double)(n - s.k0) / info->rate);
            goto done;
        }
        /* The pairs (r[at], r[at+1]) read with stride 2 give se_noise_mad the very values, in the
         * same order, that it takes from the whole r. */
        cnt = s.qn;
        st = se_noise_mad(s.q, 0, cnt, s.used, &nz, err);
        if (st != SE_OK)
            goto done;
        sigma = nz.sigma;
        beta_crb = se_acf_rms_bandwidth(acf);
        beta = (isfinite(nz.beta) && nz.beta > 0.0) ? nz.beta : beta_crb;
        if (!(sigma >= SE_STREAM_NOISE_FLOOR * fabs(a0))) {
            sigma = SE_STREAM_NOISE_FLOOR * fabs(a0);
            res->noise_floored = 1;
        }
        kthr = se_rice_k((double)(s.end - s.start), beta, cfg.false_alarms);
        thr = kthr * sigma;
        if (s.pprof != NULL)
            break; /* the profile pass: candidates were held to each lag's own threshold */
        /* Non-stationary noise, as se_locate (never on noise-floored records): the block sigmas
         * of this pass; when they vary, one more pass against each lag's own threshold, since a
         * single pre-threshold low enough for the quiet part would make one cluster of the loud
         * part. */
        if (s.nb > 0 && !res->noise_floored) {
            if (s.bi != s.nb) { /* cannot happen: every lag of [start, end) was seen */
                st = se_fail(err, SE_ERR_DATA, "stream: %zu of %zu noise blocks measured", s.bi, s.nb);
                goto done;
            }
            st = se_noise_profile_from_blocks(s.braw, s.bhi, s.nb, s.start, s.blen, m,
                                              SE_STREAM_NOISE_FLOOR * fabs(a0), &prof, &varies, err);
            if (st != SE_OK)
                goto done;
            if (varies) {
                s.pprof = &prof;
                s.pk = kthr;
                s.pre_fixed = SE_STREAM_PRE_FRACTION * kthr * prof.min_sigma;
                se_sl_reset(&s);
                continue;
            }
        }
        if (s.pre <= thr)
            break;
        /* the noise fell along the record below the provisional estimate: again, exactly */
        s.pre_fixed = thr;
        res->noise_floored = 0;
        se_sl_reset(&s);
    }
    if (fabs(a0) < 2.0 * thr) {
        st = se_fail(err, SE_ERR_NOTFOUND,
                     "the outgoing pulse does not stand above the noise of the matched filter (peak "
                     "%.3g, threshold %.3g): wrong channel or wrong reference?",
                     fabs(a0), thr);
        goto done;
    }
    /* Repeated shots without a pulse channel: se_locate stacks on the response's own direct
     * arrivals (three in a rhythm). The pass just made says whether the record can hold three;
     * only then are they searched for, in passes of their own, and located on the stack. */
    if (cfg.stacking != SE_STACKING_OFF && scfg.pulse_channel == SE_STREAM_NO_CHANNEL &&
        se_sl_shots_possible(&s, a0)) {
        int stacked = 0, floored = res->noise_floored;
        se_locate_result keep = *res; /* the clipping and noise fields of this pass */
        st = se_stream_stack(&src, n, SE_STREAM_NO_CHANNEL, &cfg, info->rate, scfg.block,
                             scfg.stack_memory, res, &stacked, info, err);
        if (st != SE_OK || stacked)
            goto done;
        *res = keep;
        res->noise_floored = floored;
    }
    {
        double level = 0.5 * thr / fabs(a0);
        size_t ext;
        if (varies) /* the noise where the search starts (start = k0 + m here) */
            level = fmin(level, 0.5 * kthr * se_noise_profile_sigma(&prof, (double)s.start) / fabs(a0));
        ext = level < 1.0 ? se_acf_extent(acf, level) : 0;
        dead = ext > m ? ext : m;
    }
    if (s.k0 + dead >= s.end) {
        st = se_fail(err, SE_ERR_DATA, "the record ends inside the dead zone");
        goto done;
    }

    /* CLEAN on each window: windows lie more than the acf support apart, so each is independent.
     * A cluster whose largest |r| is below the threshold holds no detection (every other lag of
     * its range is below pre <= thr, and the direct arrival's sidelobes end before start), so only
     * the others get their window r[cand_first - left, cand_last + left] recomputed. */
    maxp = cfg.max_events ? cfg.max_events : 64;
    for (i = 0; i < 2; i++) {
        wj[i].s = &s;
        wj[i].src = &src;
        wj[i].xc = xc;
        wj[i].w = w[0]; /* one window is recomputed at a time */
    }
    /* the next window's r is recomputed (in a thread of its own with two threads) while this one
     * is CLEANed */
    i = 0;
    st = se_wjob_next(&s, &i, varies, thr, s.k0 + dead, &prof, &wj[0], &have, err);
    if (st == SE_OK && have) {
        se_wjob_fetch(&wj[0]);
        if ((st = wj[0].st) != SE_OK)
            se_fail(err, st, "%s", wj[0].err.message);
    }
    while (st == SE_OK && have) {
        se_wjob *cj = &wj[wcur], *nj = &wj[1 - wcur];
        se_detect_config dc;
        se_peak direct, *pk = NULL;
        size_t np = 0, j, a = cj->a, len = cj->e - cj->a;
        int nhave = 0, spawned = 0;
        pthread_t ftid;
        if ((st = se_wjob_next(&s, &i, varies, thr, s.k0 + dead, &prof, nj, &nhave, err)) != SE_OK)
            break;
        if (nhave && threads > 1)
            spawned = pthread_create(&ftid, NULL, se_wjob_fetch, nj) == 0;
        info->windows++;
        info->window_samples += len;
        direct.lag = lag0; /* record lags: dc.origin */
        direct.amplitude = a0;
        direct.index = s.k0;
        memset(&dc, 0, sizeof dc);
        dc.origin = a;
        dc.start = cj->s0 - a;
        dc.end = cj->s1 - a;
        dc.threshold = thr;
        dc.max_peaks = maxp;
        dc.acf = acf;
        dc.known = &direct;
        dc.n_known = 1;
        if (varies) {
            dc.profile = &cj->prof;
            dc.profile_sigmas = kthr;
        }
        st = se_detect(cj->data, len, &dc, &pk, &np, err);
        if (nhave) {
            if (spawned)
                pthread_join(ftid, NULL);
            else
                se_wjob_fetch(nj);
        }
        if (st == SE_OK && np > 0) {
            se_peak *na = realloc(all, (nall + np) * sizeof *na);
            if (na == NULL) {
                st = se_fail(err, SE_ERR_NOMEM, "stream: cannot grow the peak list");
            } else {
                all = na;
                for (j = 0; j < np; j++)
                    all[nall + j] = pk[j]; /* record lags already */
                nall += np;
            }
        }
        free(pk);
        if (st == SE_OK && nhave && (st = nj->st) != SE_OK)
            se_fail(err, st, "%s", nj->err.message);
        free(cj->data);
        cj->data = NULL;
        se_noise_profile_free(&cj->prof);
        wcur = 1 - wcur;
        have = nhave;
    }
    if (st != SE_OK)
        goto done;
    if (nall > maxp) {
        /* keep the largest maxp, back in lag order */
        qsort(all, nall, sizeof *all, se_peak_by_size);
        nall = maxp;
        qsort(all, nall, sizeof *all, se_peak_by_lag);
    }
    /* As se_locate after CLEAN: the overlap refit on the response read back from the file, the
     * source end, the events, the losses and the dead zone (se_locate_finish) */
    if (rs_unknown)
        cfg.source_reflection = 0.0;
    {
        se_locate_stage sg;
        se_sample_reader rd;
        se_peak direct;
        memset(&sg, 0, sizeof sg);
        sg.map = map;
        sg.rate_hz = info->rate;
        sg.lag0 = lag0;
        sg.a0 = a0;
        sg.k0 = s.k0;
        sg.m = m;
        sg.dead = dead;
        sg.end = s.end;
        sg.sigma = sigma;
        sg.kthr = kthr;
        sg.thr = thr;
        sg.beta_crb = beta_crb;
        sg.mainlobe_half_width = se_acf_mainlobe_half_width(acf);
        sg.profile = varies ? &prof : NULL;
        direct.lag = lag0;
        direct.amplitude = a0;
        direct.index = s.k0;
        rd.read = se_read_src;
        rd.ctx = &src;
        rd.n = n;
        st = se_locate_finish(&sg, &cfg, rs_unknown, &rd, ref, &direct, 0, NULL, NULL, &all, &nall,
                              res, err);
    }

done:
    se_noise_profile_free(&prof);
    for (i = 0; i < 2; i++) {
        free(wj[i].data);
        se_noise_profile_free(&wj[i].prof);
    }
    se_sl_reset(&s);
    free(s.wins);
    free(s.pbuf);
    free(s.dbuf);
    free(s.pm_i);
    free(s.pm_v);
    free(all);
    se_acf_destroy(acf);
    se_xcorr_work_destroy(w[0]);
    se_xcorr_work_destroy(w[1]);
    se_xcorr_destroy(xc);
    se_distmap_destroy(own_map);
    free(ref);
    free(pbuf_pulse);
    free(src.fbuf);
    free(src.inter);
    if (snd != NULL)
        sf_close(snd);
    if (st != SE_OK)
        se_locate_result_free(res);
    return st;
}

/* ---- Repeated shots on the stream ----
 * Pass 1 reads the whole file once: the trigger channel (the pulse channel, else the response)
 * is correlated with the reference chunk by chunk (se_xcorr_run_part on chunks at multiples of
 * the step: se_stack_shots' values bit for bit) into se_shot_finder; the response is checked for
 * non-finite samples and its extremes are kept. Each trigger's r is then recomputed around it
 * (2^17 + 8 lags each side: se_refine_peak's largest window and its uphill steps) and refined.
 * Pass 2 reads the response for its runs of clipped samples (se_locate's se_find_clipping, and
 * the shots' clipping test). Then, for each part of the interval whose aligned segments fit in
 * the memory budget, every candidate's span is read back (se_stack_align_span) and aligned, and
 * se_stack_misfit_part / se_stack_acc_part take the part: lag by lag what se_stack_shots does on
 * its whole matrix. se_locate finally runs on the stack (or on the one usable shot's segment) as
 * its own se_locate_stack would have left it: through se_locate_config.given_stack. */

#define SE_STREAM_STACK_MEMORY ((size_t)256 << 20)
#define SE_STREAM_REFINE_HALF (((size_t)1 << 17) + 8)

/* A maximal run [b, e) of equal samples at an extreme of the response. */
typedef struct se_xrun {
    size_t b, e;
} se_xrun;

/* Up to take (<= SE_STREAM_READ_FRAMES) frames of every channel from where the file is, into
 * inter [size: take nch]: raw and widened for native-endian float data (the doubles
 * sf_readf_double gives, without its copy through a small buffer), else sf_readf_double. Returns
 * the frames read (0 at the end or on error). */
static size_t se_read_frames(se_src *src, double *inter, size_t take)
{
    sf_count_t k;
    if (src->rawf) {
        k = sf_read_raw(src->snd, src->fbuf, (sf_count_t)(take * src->nch * sizeof(float)));
        k = k > 0 ? k / (sf_count_t)(src->nch * sizeof(float)) : 0;
        se_widen(inter, src->fbuf, (size_t)k * src->nch);
        return (size_t)k;
    }
    k = sf_readf_double(src->snd, inter, (sf_count_t)take);
    return k > 0 ? (size_t)k : 0;
}

/* The file back at its first frame, for another pass of the shot search. */
static se_status se_rewind(se_src *src, se_error *err)
{
    if (sf_seek(src->snd, 0, SEEK_SET) != 0)
        return se_fail(err, SE_ERR_IO, "%s: cannot seek to the start", src->path);
    return SE_OK;
}

/* The frames from pos on (at most SE_STREAM_READ_FRAMES, none past n) into inter, *got of them;
 * a file that ends before n is named as truncated. */
static se_status se_next_frames(se_src *src, double *inter, size_t pos, size_t n, size_t *got,
                                se_error *err)
{
    size_t take = n - pos < SE_STREAM_READ_FRAMES ? n - pos : SE_STREAM_READ_FRAMES;
    *got = se_read_frames(src, inter, take);
    if (*got == 0)
        return se_fail(err, SE_ERR_FORMAT, "%s: truncated: file ends before frame %zu", src->path,
                       pos + 1);
    return SE_OK;
}

/* r[a, e) of the trigger channel (src->ch) into *out (malloc'd), bit for bit the pass's values. */
static se_status se_stack_rwin(se_src *src, const se_xcorr *xc, se_xcorr_work *w, size_t n,
                               size_t m, size_t a, size_t e, double **out, size_t *a_out,
                               se_error *err)
{
    size_t step = se_xcorr_step(xc), c = a / step * step, nout = e - c, nx;
    double *x;
    se_status st;
    *a_out = c;
    nx = c + nout + m - 1 < n ? nout + m - 1 : n - c;
    x = malloc(nx * sizeof *x);
    *out = malloc(nout * sizeof **out);
    if (x == NULL || *out == NULL) {
        free(x);
        free(*out);
        *out = NULL;
        return se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate %zu lags around a shot", nout);
    }
    st = se_read_range(src, c, nx, x, err);
    if (st == SE_OK)
        st = se_xcorr_run_part(xc, w, x, nx, nout, *out, err);
    free(x);
    if (st != SE_OK) {
        free(*out);
        *out = NULL;
    }
    *a_out = c;
    return st;
}

/* Rows [size: k w] of lags j0 .. j0 + w - 1 of the aligned segments of the shots whose status is
 * SE_SHOT_USED, read back from the response. */
static se_status se_stack_fill(se_src *src, size_t n, const double *onsets, const se_shot_status *status,
                               size_t k, size_t pre, size_t len, size_t j0, size_t w, double *rows,
                               double *xw, double *seg, se_error *err)
{
    size_t i, b, e;
    se_status st;
    for (i = 0; i < k; i++) {
        if (status[i] != SE_SHOT_USED)
            continue;
        se_stack_align_span(onsets[i], pre, len, n, &b, &e);
        if (e > b && (st = se_read_range(src, b, e - b, xw, err)) != SE_OK)
            return st;
        if ((st = se_stack_align(xw, b, e - b, n, onsets[i], pre, len, seg, err)) != SE_OK)
            return st;
        memcpy(rows + i * w, seg + j0, w * sizeof *seg);
    }
    return SE_OK;
}

static se_status se_stream_stack(se_src *src_in, size_t n, int pilot_ch, const se_locate_config *cfg,
                                 double rate, size_t block, size_t budget, se_locate_result *res,
                                 int *stacked, se_stream_info *info, se_error *err)
{
    const size_t m = cfg->reference_length;
    const int have_pilot = pilot_ch != SE_STREAM_NO_CHANNEL;
    const unsigned nch = src_in->nch, rch = src_in->ch;
    const unsigned tch = have_pilot ? (unsigned)pilot_ch : rch;
    se_src tsrc = *src_in, rsrc = *src_in;
    se_xcorr *xc = NULL;
    se_xcorr_work *xw = NULL;
    se_shot_finder *fd = NULL;
    se_stack_config sc;
    se_stack_acc acc;
    se_stack_result given;
    se_stack_result sr;
    se_locate_config lc;
    se_xrun *runs = NULL;
    size_t nruns = 0, capruns = 0, *idx = NULL, k = 0, i, j, step, B, pre = 0, len = 0, nu;
    size_t first = SIZE_MAX, clipped_samples = 0, first_clipped = SIZE_MAX;
    double *inter = NULL, *tx = NULL, *rw = NULL, *rows = NULL, *xwin = NULL, *segbuf = NULL;
    double *misfit = NULL, *x2 = NULL, vmax = 0.0, vmin = 0.0;
    unsigned char *clip = NULL;
    se_status st = SE_OK;

    *stacked = 0;
    memset(&acc, 0, sizeof acc);
    memset(&sr, 0, sizeof sr);
    tsrc.ch = tch;
    rsrc.ch = rch;
    if (m < 3 || m >= n)
        return SE_OK; /* se_locate does not stack then */
    if (budget == 0)
        budget = SE_STREAM_STACK_MEMORY;
    se_stack_config_init(&sc);
    sc.pulse = cfg->reference;
    sc.pulse_length = m;
    sc.mode = cfg->stacking == SE_STACKING_ROBUST ? SE_STACK_TRIMMED : SE_STACK_MEAN;
    xc = se_xcorr_create(cfg->reference, m, 0, err); /* as se_stack_shots: ESTIMATE plans */
    xw = xc ? se_xcorr_work_create(xc, err) : NULL;
    fd = se_shot_finder_create(n, m, &sc, err);
    if (xw == NULL || fd == NULL) {
        st = err ? err->code : SE_ERR_NOMEM;
        goto done;
    }
    step = se_xcorr_step(xc);
    info->plan = se_xcorr_plan_source(xc); /* replaced by the engine's when it runs */
    B = (block ? block : SE_STREAM_DEFAULT_BLOCK) / step * step; /* as the engine's chunks */
    B = B < step ? step : B;

    inter = malloc((size_t)SE_STREAM_READ_FRAMES * nch * sizeof *inter);
    if (inter == NULL) {
        st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate the shot search buffers");
        goto done;
    }
    /* Pass 0, cheap: |r[k]| <= sqrt(E_x(k) / E_s) (Cauchy-Schwarz, E_x(k) the pilot's energy over
     * [k, k + m)), and the largest |r| is at least r at the reference's own start, 1. When every
     * lag where that bound reaches 0.9 of the trigger level lies within less than min_interval of
     * the others, the search cannot find two shots: the record is located as a single shot.
     * Triggers on the response itself have no such floor: the caller screened them on the
     * engine's own pass (se_sl_shots_possible). */
    if (have_pilot) {
        double es = 0.0, thr, frac = 0.5, e = 0.0, fx;
        size_t pos = 0, kmin = SIZE_MAX, kmax = 0, hi = n - m + 1, ri = 0;
        double *ring = malloc(m * sizeof *ring);
        if (ring == NULL) {
            st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate %zu samples", m);
            goto done;
        }
        for (i = 0; i < m; i++)
            es += cfg->reference[i] * cfg->reference[i];
        thr = (0.9 * frac) * (0.9 * frac) * es;
        if ((st = se_rewind(src_in, err)) != SE_OK) {
            free(ring);
            goto done;
        }
        info->stack_reads++;
        /* E_x(k) is known once sample k + m - 1 is read (and for the last m - 1 lags, at the end) */
        while (pos < n) {
            size_t got;
            if ((st = se_next_frames(src_in, inter, pos, n, &got, err)) != SE_OK) {
                free(ring);
                goto done;
            }
            for (j = 0; j < got; j++) {
                size_t t = pos + j;
                fx = inter[j * nch + tch];
                if (t >= m)
                    e -= ring[ri] * ring[ri];
                ring[ri] = fx;
                ri = ri + 1 == m ? 0 : ri + 1;
                e += fx * fx;
                /* lag t + 1 - m, known now; e < 0 only by rounding */
                if (!(e < thr) && t + 1 >= m && t + 1 - m < hi) {
                    kmin = kmin == SIZE_MAX ? t + 1 - m : kmin;
                    kmax = t + 1 - m;
                }
            }
            pos += got;
        }
        free(ring);
        if (kmin == SIZE_MAX || kmax - kmin < 4 * m)
            goto done;
    }

    /* Pass 1: the trigger channel's r, the response's finiteness and extremes. */
    tx = malloc((B + m - 1) * sizeof *tx);
    rw = malloc(B * sizeof *rw);
    if (tx == NULL || rw == NULL) {
        st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate the shot search buffers");
        goto done;
    }
    if ((st = se_rewind(src_in, err)) != SE_OK)
        goto done;
    info->passes++;
    {
        size_t pos = 0, c = 0, have = 0; /* tx holds trigger samples c .. c + have - 1 */
        while (pos < n) {
            size_t got;
            if ((st = se_next_frames(src_in, inter, pos, n, &got, err)) != SE_OK)
                goto done;
            for (j = 0; j < got; j++) {
                double v = inter[j * nch + rch], t = inter[j * nch + tch];
                if (!isfinite(v) || !isfinite(t)) {
                    st = se_fail(err, SE_ERR_DATA, "%s: sample %zu (channel %u) is not finite",
                                 src_in->path, pos + j, (isfinite(v) ? tch : rch) + 1);
                    goto done;
                }
                if (pos + j == 0)
                    vmax = vmin = v;
                vmax = fmax(vmax, v);
                vmin = fmin(vmin, v);
                tx[have++] = t;
                if (have == B + m - 1) { /* chunk c .. c + B - 1 complete */
                    if ((st = se_xcorr_run_part(xc, xw, tx, have, B, rw, err)) != SE_OK ||
                        (st = se_shot_finder_push(fd, rw, B, err)) != SE_OK)
                        goto done;
                    memmove(tx, tx + B, (m - 1) * sizeof *tx);
                    have = m - 1;
                    c += B;
                }
            }
            pos += got;
        }
        while (c < n) { /* the rest, x taken as 0 beyond the end */
            size_t nout = n - c < B ? n - c : B;
            if ((st = se_xcorr_run_part(xc, xw, tx, have, nout, rw, err)) != SE_OK ||
                (st = se_shot_finder_push(fd, rw, nout, err)) != SE_OK)
                goto done;
            if (have > B) {
                memmove(tx, tx + B, (have - B) * sizeof *tx);
                have -= B;
            } else {
                have = 0;
            }
            c += nout;
        }
    }
    if (vmax == vmin)
        goto done; /* constant: the single-shot engine says so, as se_locate does first */
    st = se_shot_finder_finish(fd, &idx, &k, err);
    if (st == SE_ERR_NOTFOUND) { /* no trigger: se_locate goes on unstacked */
        se_error_clear(err);
        st = SE_OK;
        goto done;
    }
    if (st != SE_OK)
        goto done;
    if (k < (have_pilot ? 2u : 3u))
        goto done; /* on the response three shots are needed (se_locate's rule) */

    /* Refinement of each trigger on its recomputed neighbourhood. */
    sr.n_found = k;
    sr.onsets = se_calloc(k, sizeof *sr.onsets, "shots", err);
    sr.amplitudes = se_calloc(k, sizeof *sr.amplitudes, "shots", err);
    sr.status = se_calloc(k, sizeof *sr.status, "shots", err);
    clip = se_calloc(k, sizeof *clip, "shots", err);
    misfit = se_calloc(k, sizeof *misfit, "shots", err);
    if (sr.onsets == NULL || sr.amplitudes == NULL || sr.status == NULL || clip == NULL ||
        misfit == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    for (i = 0; i < k; i++) {
        size_t a = idx[i] > SE_STREAM_REFINE_HALF ? idx[i] - SE_STREAM_REFINE_HALF : 0;
        size_t e = idx[i] + SE_STREAM_REFINE_HALF + 1 < n ? idx[i] + SE_STREAM_REFINE_HALF + 1 : n;
        double *win = NULL;
        size_t c = 0;
        if ((st = se_stack_rwin(&tsrc, xc, xw, n, m, a, e, &win, &c, err)) != SE_OK)
            goto done;
        /* refined at the record's own index (lag = (double)k + tau, as on the whole r: a lag
         * refined in the window and shifted back would be rounded twice); se_refine_peak reads r
         * only within 2^16 + a few lags of idx[i], all in [c, e), and sees the record's end where
         * the window reaches it (e = n) or none within its reach (e < n) */
        st = se_refine_peak(win - c, e, idx[i], 0, &sr.onsets[i], &sr.amplitudes[i], err);
        free(win);
        if (st != SE_OK)
            goto done;
    }
    if (!have_pilot) {
        /* on the response, shots come in a rhythm: glitches and echoes do not (se_locate) */
        double lo = INFINITY, hi = 0.0;
        for (i = 1; i < k; i++) {
            lo = fmin(lo, sr.onsets[i] - sr.onsets[i - 1]);
            hi = fmax(hi, sr.onsets[i] - sr.onsets[i - 1]);
        }
        if (hi > 1.5 * lo)
            goto done;
    }
    if ((st = se_stack_layout(sr.onsets, k, n, sc.pre, m, &pre, &len, err)) != SE_OK)
        goto done;

    /* Pass 2: the runs of clipped samples of the response. */
    info->stack_reads++;
    if ((st = se_rewind(src_in, err)) != SE_OK)
        goto done;
    {
        size_t pos = 0, rb = 0;
        double rv = 0.0;
        int inrun = 0;
        while (pos < n) {
            size_t got;
            if ((st = se_next_frames(src_in, inter, pos, n, &got, err)) != SE_OK)
                goto done;
            for (j = 0; j <= got; j++) {
                size_t at = pos + j;
                int last = j == got;
                double v = last ? 0.0 : inter[j * nch + rch];
                if (last && at < n)
                    break; /* the next read continues the run */
                if (inrun && (last || v != rv)) {
                    if (at - rb >= SE_STREAM_CLIP_RUN) {
                        if (nruns == capruns) {
                            size_t nc = capruns ? 2 * capruns : 64;
                            se_xrun *t = realloc(runs, nc * sizeof *t);
                            if (t == NULL) {
                                st = se_fail(err, SE_ERR_NOMEM, "stream: cannot keep %zu clipped runs", nc);
                                goto done;
                            }
                            runs = t;
                            capruns = nc;
                        }
                        runs[nruns].b = rb;
                        runs[nruns].e = at;
                        nruns++;
                    }
                    inrun = 0;
                }
                if (last)
                    break;
                if (!inrun && (v == vmax || v == vmin)) {
                    inrun = 1;
                    rb = at;
                    rv = v;
                }
            }
            pos += got;
        }
    }
    for (i = 0; i < nruns; i++) { /* se_locate's se_find_clipping on the record */
        if (first_clipped == SIZE_MAX)
            first_clipped = runs[i].b;
        clipped_samples += runs[i].e - runs[i].b;
    }
    /* the shots' clipping test: a run of 5 or more touching [b, b + len + 1) */
    {
        size_t q = 0;
        for (i = 0; i < k; i++) {
            size_t b = (size_t)floor(sr.onsets[i]) - pre, e = b + len + 1;
            if (e > n)
                continue;
            while (q < nruns && runs[q].e <= b)
                q++;
            clip[i] = (unsigned char)(q < nruns && runs[q].b < e);
        }
    }
    if ((st = se_stack_screen(sr.onsets, sr.amplitudes, clip, k, n, pre, len, sr.status, err)) != SE_OK)
        goto done;

    /* Alignment, misfit and stack, part of the interval by part. */
    {
        size_t P = 64, w, nc = 0, parts, pass, j0;
        int keep;
        for (i = 0; i < k; i++)
            nc += sr.status[i] == SE_SHOT_USED;
        while (P < len + 128)
            P *= 2;
        w = budget / sizeof(double) / k;
        w = w < 1024 ? 1024 : w;
        w = w > len ? len : w;
        parts = (len + w - 1) / w;
        keep = parts == 1;
        rows = malloc(k * w * sizeof *rows);
        xwin = malloc(P * sizeof *xwin);
        segbuf = malloc(len * sizeof *segbuf);
        if (rows == NULL || xwin == NULL || segbuf == NULL) {
            st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate %zu x %zu aligned samples", k, w);
            goto done;
        }
        if (nc >= 3) {
            for (pass = 0, j0 = 0; j0 < len; j0 += w, pass++) {
                size_t ww = len - j0 < w ? len - j0 : w;
                if ((st = se_stack_fill(&rsrc, n, sr.onsets, sr.status, k, pre, len, j0, ww, rows,
                                        xwin, segbuf, err)) != SE_OK ||
                    (st = se_stack_misfit_part(rows, k, ww, sr.status, misfit, err)) != SE_OK)
                    goto done;
            }
            info->stack_reads += (unsigned)parts;
            if ((st = se_stack_misfit_screen(misfit, k, sr.status, err)) != SE_OK)
                goto done;
        } else {
            keep = 0;
        }
        nu = 0;
        for (i = 0; i < k; i++)
            if (sr.status[i] == SE_SHOT_USED) {
                if (first == SIZE_MAX)
                    first = i;
                nu++;
            }
        sr.n_used = nu;
        sr.first_used = first == SIZE_MAX ? 0 : first;
        sr.pre = pre;
        sr.length = len;
        if (!have_pilot && nu < 3)
            goto done; /* not stacked, and no cut to one shot either: se_locate's rule */
        if (nu >= 2) {
            if ((st = se_stack_acc_init(&acc, sr.status, k, len, sc.mode, err)) != SE_OK)
                goto done;
            if (!keep && sc.mode == SE_STACK_MEAN) {
                /* the mean needs no shot beside another: one read and alignment per shot, the
                 * previous one kept for the differences */
                double *prev = malloc(len * sizeof *prev);
                size_t q = 0, b, e;
                if (prev == NULL) {
                    st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate a shot of %zu samples", len);
                    goto done;
                }
                for (i = 0; i < k && st == SE_OK; i++) {
                    if (sr.status[i] != SE_SHOT_USED)
                        continue;
                    se_stack_align_span(sr.onsets[i], pre, len, n, &b, &e);
                    if (e > b)
                        st = se_read_range(&rsrc, b, e - b, xwin, err);
                    if (st == SE_OK)
                        st = se_stack_align(xwin, b, e - b, n, sr.onsets[i], pre, len, segbuf, err);
                    if (st == SE_OK)
                        st = se_stack_acc_shot(&acc, q, segbuf, q > 0 ? prev : NULL, err);
                    if (st == SE_OK) {
                        double *t = prev;
                        prev = segbuf;
                        segbuf = t;
                        q++;
                    }
                }
                free(prev);
                if (st != SE_OK)
                    goto done;
                se_stack_acc_shot_end(&acc);
                info->stack_reads++;
            } else {
                for (j0 = 0; j0 < len; j0 += w) {
                    size_t ww = len - j0 < w ? len - j0 : w;
                    if (!keep && (st = se_stack_fill(&rsrc, n, sr.onsets, sr.status, k, pre, len,
                                                     j0, ww, rows, xwin, segbuf, err)) != SE_OK)
                        goto done;
                    if ((st = se_stack_acc_part(&acc, rows, j0, ww, err)) != SE_OK)
                        goto done;
                }
                if (!keep)
                    info->stack_reads += (unsigned)parts;
            }
            if ((st = se_stack_acc_gain(&acc, &sr, err)) != SE_OK)
                goto done;
        }
    }

    /* se_locate on the stack (or on the one usable shot's segment), as after its own stacking
     * (se_locate_config.given_stack: these shots are reported, none searched for) */
    memset(&given, 0, sizeof given);
    given.n_found = k;
    given.n_used = sr.n_used;
    given.first_used = sr.first_used;
    given.pre = pre;
    given.length = len;
    given.onsets = sr.onsets;
    given.status = sr.status; /* which taps ring into the stack (se_locate's labels) */
    given.gain_db = sr.gain_db;
    given.expected_gain_db = sr.expected_gain_db;
    given.noise_single = sr.noise_single;
    given.noise_stacked = sr.noise_stacked;
    if (sr.n_used >= 2) {
        x2 = malloc(len * sizeof *x2);
        if (x2 == NULL) {
            st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate the stack of %zu samples", len);
            goto done;
        }
        memcpy(x2, acc.stacked, len * sizeof *x2);
    } else {
        size_t kk = sr.n_used > 0 ? sr.first_used : 0, b, ln = len;
        double o = floor(sr.onsets[kk]);
        b = o > (double)pre ? (size_t)o - pre : 0;
        if (b + ln > n)
            ln = n - b;
        x2 = malloc(ln * sizeof *x2);
        if (x2 == NULL) {
            st = se_fail(err, SE_ERR_NOMEM, "stream: cannot allocate a shot of %zu samples", ln);
            goto done;
        }
        if ((st = se_read_range(&rsrc, b, ln, x2, err)) != SE_OK)
            goto done;
        len = ln;
    }
    lc = *cfg;
    lc.given_stack = &given;
    if (lc.reference_offset != SIZE_MAX)
        lc.reference_offset = pre;
    st = se_locate(x2, len, rate, &lc, res, err);
    if (st != SE_OK)
        goto done;
    /* what se_locate's se_find_clipping found on the whole record (n_clip_runs is 0 after a stack) */
    res->clipped_samples = clipped_samples;
    res->first_clipped = first_clipped;
    for (i = 0; i < nruns && i < SE_MAX_CLIP_RUNS; i++) {
        res->clip_runs[i][0] = runs[i].b;
        res->clip_runs[i][1] = runs[i].e;
    }
    res->n_clip_runs = 0;
    for (i = 0; i < k; i++)
        if ((size_t)sr.status[i] < sizeof info->shots / sizeof info->shots[0])
            info->shots[sr.status[i]]++;
    *stacked = 1;

done:
    se_stack_result_free(&sr);
    se_stack_acc_free(&acc);
    se_shot_finder_destroy(fd);
    se_xcorr_work_destroy(xw);
    se_xcorr_destroy(xc);
    free(runs);
    free(idx);
    free(inter);
    free(tx);
    free(rw);
    free(rows);
    free(xwin);
    free(segbuf);
    free(misfit);
    free(clip);
    free(x2);
    return st;
}
