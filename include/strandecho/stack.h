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

/* Name of a shot status ("used", "clipped", "amplitude", "late", "misfit"). */
const char *se_shot_status_name(se_shot_status s);

#ifdef __cplusplus
}
#endif

#endif /* SE_STACK_H */
