/* strandecho: repeated shots. Find every injection in a recording (in the pulse channel, or the
 * direct arrivals in the response), align each at sub-sample precision on its outgoing pulse
 * (phase ramp), reject outliers and stack (mean or trimmed mean).
 *
 * Method (REFERENCE.md 2, "Stacking repeated shots"; C.D. Woody, Med. Biol. Eng. 5, 1967):
 *  - trigger: the matched filter of the source channel with the pulse; every local maximum of |r|
 *    of the sign of the largest, above trigger_fraction of it and at least min_interval after the
 *    previous shot (the larger kept inside an interval), and not less than half the median
 *    interval after a stronger trigger (an echo of a strong shot), refined by se_refine_peak;
 *  - segments: from `pre` samples before each onset, length the median interval between
 *    consecutive shots, shortened by up to a tenth so that a last shot cut by the end of the record
 *    still fits (a shot whose segment still runs past the end is rejected as late);
 *  - alignment: each segment is delayed by its fractional onset with the phase ramp
 *    X(w) e^{-i w d} on a zero-padded FFT, so every shot's onset falls on the same sample;
 *  - outliers: a shot is rejected when its segment touches clipped samples (runs of 5 or more equal
 *    samples at the record's extreme), when its trigger amplitude is off the median by more than a
 *    factor 1.5 (mis-triggered or a weak tap), when its segment is cut by the end of the record
 *    (late), or when its misfit to the sample-wise median of the shots exceeds 3 times the median
 *    misfit (a wrong shape or an impulse);
 *  - stack: mean, or the 20 % trimmed mean per sample for impulsive noise;
 *  - gain: the noise of one shot from the differences of consecutive used shots,
 *    sigma_1 = MAD((x_k - x_{k+1}) / sqrt 2), and the noise of a mean stack from the alternating-sign
 *    mean of the used shots (signal-free), both over the whole segment;
 *    gain_db = 20 log10(sigma_1 / sigma_N). The expected gain is 10 log10 N.
 *
 * Threads: se_stack_shots plans FFTW transforms (FFTW_ESTIMATE): one thread at a time.
 */
#ifndef SE_STACK_H
#define SE_STACK_H

#include <stddef.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum se_stack_mode {
    SE_STACK_MEAN,    /* sample-wise mean */
    SE_STACK_TRIMMED  /* sample-wise 20 % trimmed mean (robust to impulsive noise) */
} se_stack_mode;

/* Why a shot was left out. */
typedef enum se_shot_status {
    SE_SHOT_USED = 0,
    SE_SHOT_CLIPPED,   /* its segment touches clipped samples */
    SE_SHOT_AMPLITUDE, /* trigger amplitude off the median by more than 1.5x: mis-triggered */
    SE_SHOT_LATE,      /* its segment runs past the end of the record */
    SE_SHOT_MISFIT     /* its shape differs from the others (misfit > 3 x median) */
} se_shot_status;

typedef struct se_stack_config {
    const double *pilot;     /* pulse channel [size: n] to trigger on (borrowed), or NULL to
                                trigger on the direct arrivals in the response itself */
    const double *pulse;     /* the outgoing pulse [size: pulse_length] (borrowed), required */
    size_t pulse_length;
    size_t min_interval;     /* fewest samples between two shots (0 = 4 pulse_length) */
    double trigger_fraction; /* a shot reaches this fraction of the largest trigger (0 = 0.5) */
    size_t pre;              /* samples kept before each onset (SIZE_MAX = pulse_length) */
    se_stack_mode mode;
} se_stack_config;

/* Zeroes cfg, pre = SIZE_MAX, mean. */
void se_stack_config_init(se_stack_config *cfg);

typedef struct se_stack_result {
    size_t n_found;          /* shots found */
    size_t n_used;           /* shots stacked */
    double *onsets;          /* [size: n_found] sub-sample trigger lags in the source channel,
                                samples (lag of r: start of the pulse); owned */
    double *amplitudes;      /* [size: n_found] trigger amplitudes (r units); owned */
    se_shot_status *status;  /* [size: n_found]; owned */
    double *stacked;         /* [size: length] the stack, NULL when fewer than 2 shots were used;
                                sample j lies at x[onset_ref - pre + j] of the first used shot
                                (onset_ref = onsets of that shot); owned */
    size_t length;
    size_t pre;              /* samples before the onset in the stack */
    size_t first_used;       /* index of the first used shot (its onset is the time base) */
    double noise_single;     /* sigma_1 (x units) */
    double noise_stacked;    /* sigma_N (x units) */
    double gain_db;          /* measured, 20 log10(sigma_1 / sigma_N); NaN when fewer than 2 */
    double expected_gain_db; /* 10 log10 n_used */
} se_stack_result;

/* Find, align, screen and stack the shots in x [size: n]. res is zeroed first; free with
 * se_stack_result_free (also after failure). Fewer than two usable shots is not an error:
 * res->stacked is then NULL and the counts tell. Errors: NULL x/cfg/pulse/res, pulse_length < 3 or
 * >= n (SE_ERR_ARG); a non-finite sample (SE_ERR_DATA, named); no trigger at all (SE_ERR_NOTFOUND);
 * allocation or FFT planning (SE_ERR_NOMEM). */
se_status se_stack_shots(const double *x, size_t n, const se_stack_config *cfg, se_stack_result *res,
                         se_error *err);
void se_stack_result_free(se_stack_result *res);

/* ---- The pieces se_stack_shots is made of, for a caller that sees the record in blocks (the
 * streaming locate, stream.h). Each gives bit for bit what se_stack_shots computes inside. ---- */

/* Trigger search on the matched filter r of the source channel with the pulse (se_xcorr_run, all n
 * lags), fed in consecutive pieces. Keeps the local maxima of +r and -r that reach trigger_fraction
 * of the largest |r| seen so far (so at most a few per shot in practice: 16 bytes each). */
typedef struct se_shot_finder se_shot_finder;
/* n: lags of r (the record's length); pulse_length: m (lags from n - m + 1 on are not triggers);
 * cfg: min_interval and trigger_fraction as se_stack_config (0 = defaults). NULL on failure. */
se_shot_finder *se_shot_finder_create(size_t n, size_t pulse_length, const se_stack_config *cfg,
                                      se_error *err);
/* The next count values of r (r[lag], lag continuing from the previous call). Errors: more than n
 * values in all (SE_ERR_ARG), allocation. */
se_status se_shot_finder_push(se_shot_finder *f, const double *r, size_t count, se_error *err);
/* After all n values: the triggers (integer lags, ascending) into *idx [size: *k, malloc'd, caller
 * frees], the greedy thinning to min_interval and the rejection of echoes of stronger shots done.
 * Errors: fewer than n values pushed (SE_ERR_ARG); no trigger at all (SE_ERR_NOTFOUND);
 * allocation. */
se_status se_shot_finder_finish(se_shot_finder *f, size_t **idx, size_t *k, se_error *err);
void se_shot_finder_destroy(se_shot_finder *f);

/* Segment layout from the refined onsets [size: k >= 2] of a record of n samples: *pre (cfg's pre,
 * SIZE_MAX = pulse_length, lowered to the earliest onset) and *len (the median interval, shortened
 * for a last shot cut by the end, at least 128, at most n). Error: allocation. */
se_status se_stack_layout(const double *onsets, size_t k, size_t n, size_t pre_in,
                          size_t pulse_length, size_t *pre, size_t *len, se_error *err);

/* Screening before alignment: status[i] = SE_SHOT_LATE when the segment [floor(onset) - pre,
 * + len + 1) runs past n, else SE_SHOT_CLIPPED when clipped[i] (the caller's test of that span
 * for runs of 5 or more samples at the record's extremes), else SE_SHOT_AMPLITUDE when
 * |amplitude| is off the median |amplitude| by more than 1.5x, else SE_SHOT_USED. Error:
 * allocation. */
se_status se_stack_screen(const double *onsets, const double *amplitudes, const unsigned char *clipped,
                          size_t k, size_t n, size_t pre, size_t len, se_shot_status *status,
                          se_error *err);

/* Samples of the record an alignment reads: [*begin, *end) (clipped to [0, n)). */
void se_stack_align_span(double onset, size_t pre, size_t len, size_t n, size_t *begin, size_t *end);
/* out [size: len] = x(onset - pre + j) by the phase ramp (as se_stack_shots aligns), where xw
 * [size: nw] holds samples off .. off + nw - 1 of a record of n samples and covers
 * se_stack_align_span. Errors: a window that does not cover the span (SE_ERR_ARG), allocation or
 * FFT planning (SE_ERR_NOMEM). Plans FFTW transforms: one thread at a time. */
se_status se_stack_align(const double *xw, size_t off, size_t nw, size_t n, double onset, size_t pre,
                         size_t len, double *out, se_error *err);

/* Misfit of the candidates (status SE_SHOT_USED) to their sample-wise median, accumulated over
 * lags in order: seg [size: k w] holds lags j0 .. j0 + w - 1 of every shot's aligned segment (row
 * i, rows of other shots unread); misfit [size: k] adds sum (seg - median)^2 to each candidate's
 * entry, lag after lag (call for j0 = 0, then each next piece, to get se_stack_shots' sums).
 * Needs 3 or more candidates to mean anything. Error: allocation. */
se_status se_stack_misfit_part(const double *seg, size_t k, size_t w, const se_shot_status *status,
                               double *misfit, se_error *err);
/* Marks SE_SHOT_MISFIT the candidates whose misfit exceeds 3 times the median misfit (3 or more
 * candidates; else nothing). Error: allocation. */
se_status se_stack_misfit_screen(const double *misfit, size_t k, se_shot_status *status,
                                 se_error *err);

/* Stack accumulation for the used shots (status SE_SHOT_USED, after the misfit screen) of length
 * len: the stack, the alternating-sign mean and the strided sample of the consecutive differences
 * that the gain takes (se_noise_mad's positions over the (used - 1) len differences). */
typedef struct se_stack_acc {
    size_t len, k, nu, ne, stride, nd, next; /* next: shots taken by se_stack_acc_shot */
    se_stack_mode mode;
    double *stacked;   /* [size: len] owned */
    double *alt;       /* [size: len] owned */
    double *dsamp;     /* [size: nd] owned */
    size_t *used;      /* [size: nu] indices of the used shots, owned */
} se_stack_acc;
/* Set up for the shots of status [size: k] (2 or more used). Error: fewer than 2 used
 * (SE_ERR_ARG), allocation. */
se_status se_stack_acc_init(se_stack_acc *a, const se_shot_status *status, size_t k, size_t len,
                            se_stack_mode mode, se_error *err);
/* Lags j0 .. j0 + w - 1 of the aligned segments, seg as for se_stack_misfit_part. Error:
 * allocation. */
se_status se_stack_acc_part(se_stack_acc *a, const double *seg, size_t j0, size_t w, se_error *err);
/* The mean stack shot by shot instead (SE_STACK_MEAN only, what a caller that cannot hold every
 * shot at a lag does): the q-th used shot's whole aligned segment seg [size: len], in the order of
 * the used shots, prev the (q-1)-th's (NULL for q = 0); then se_stack_acc_shot_end once. The same
 * sums in the same order as se_stack_acc_part. Error: SE_ERR_ARG for the trimmed mean or a shot
 * out of order. */
se_status se_stack_acc_shot(se_stack_acc *a, size_t q, const double *seg, const double *prev,
                            se_error *err);
void se_stack_acc_shot_end(se_stack_acc *a);
/* Once every lag was added: noise_single, noise_stacked, gain_db and expected_gain_db into res
 * (the other fields untouched). Error: from se_noise_mad. */
se_status se_stack_acc_gain(const se_stack_acc *a, se_stack_result *res, se_error *err);
void se_stack_acc_free(se_stack_acc *a);

/* Name of a shot status ("used", "clipped", "amplitude", "late", "misfit"). */
const char *se_shot_status_name(se_shot_status s);

#ifdef __cplusplus
}
#endif

#endif /* SE_STACK_H */
