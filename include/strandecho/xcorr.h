/* strandecho: matched filter (cross-correlation with the reference pulse) as an overlap-save block
 * engine on FFTW's real transforms.
 *
 *   r[k] = (1/E_s) sum_{j=0}^{m-1} x[k+j] s[j],   E_s = sum_j s[j]^2,   x[i] = 0 for i >= n
 *
 * so an echo a * s starting at sample k0 of x gives r[k0] = a: the peak value of r estimates the
 * reflection coefficient (times losses) when s is the outgoing pulse (S.M. Kay, Fundamentals of
 * Statistical Signal Processing Vol. I, 1993, ch. 3).
 *
 * Life cycle: se_xcorr_create once per pulse (holds the pulse spectrum and the FFTW plans, read-only
 * afterwards), then one se_xcorr_work per thread, or one se_xcorr_stream per record being streamed.
 *
 * Threads: FFTW's planner is not thread-safe. se_xcorr_create(_with), which plan, must be
 * called from one thread at a time (and not concurrently with any other FFTW planning in the
 * process). se_xcorr_run and se_xcorr_stream_push/finish only use fftw_execute_dft_r2c/c2r (new-array
 * execute, thread-safe), so one se_xcorr may serve many threads, each with its own se_xcorr_work or
 * se_xcorr_stream.
 */
#ifndef SE_XCORR_H
#define SE_XCORR_H

#include <stddef.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Read-only after create: pulse spectrum (pre-scaled by 1/(block E_s)) and the two FFTW plans. */
typedef struct se_xcorr se_xcorr;
/* Per-call / per-thread scratch (three FFT arrays of the block length). */
typedef struct se_xcorr_work se_xcorr_work;

/* How the FFTW plans were made (se_xcorr_plan_source). */
typedef enum se_xcorr_plan {
    SE_XCORR_PLAN_ESTIMATE = 0, /* FFTW_ESTIMATE: no measurement, no wisdom used */
    SE_XCORR_PLAN_WISDOM,       /* FFTW_MEASURE plans rebuilt from wisdom (no measuring done) */
    SE_XCORR_PLAN_MEASURED      /* FFTW_MEASURE measured now (and saved when a path is given) */
} se_xcorr_plan;

/* Options of se_xcorr_create_with. Zeroed = se_xcorr_create's behaviour (auto block, ESTIMATE). */
typedef struct se_xcorr_config {
    size_t block;            /* FFT block length, as for se_xcorr_create (0 = auto) */
    const char *wisdom_path; /* FFTW wisdom file (borrowed), NULL = none. Read before planning; when
                                it holds wisdom for this size the FFTW_MEASURE plans are rebuilt from
                                it at no measuring cost. A missing or unreadable file is not an
                                error (the planner falls back as below). */
    int measure;             /* 1: when the wisdom lacks this size, measure (FFTW_MEASURE, typically
                                0.1-1 s per size) and, with wisdom_path, save the wisdom there
                                (written to a temporary file then renamed). 0: FFTW_ESTIMATE then. */
} se_xcorr_config;

/* Default wisdom path: $XDG_CACHE_HOME/strandecho/fftw-wisdom, else $HOME/.cache/strandecho/
 * fftw-wisdom, written into buf [size: size]. The folder is created (mode 0700) when create_dir is
 * 1. Errors: neither variable set or the path too long (SE_ERR_ARG), folder creation (SE_ERR_IO). */
se_status se_xcorr_wisdom_default_path(char *buf, size_t size, int create_dir, se_error *err);

/* Create the engine for pulse s [size: m], copied (the caller keeps its array).
 *  block: FFT block length. 0 = auto: the smallest power of two >= 8 m and >= 1024. Otherwise it must
 *         be a power of two >= 2 m. Each block yields block - m + 1 values of r.
 * All FFTW planning (FFTW_ESTIMATE, arrays from fftw_malloc) happens here.
 * Returns NULL and fills err on: NULL pulse, m = 0, a non-finite sample (named), zero energy
 * (SE_ERR_DATA), a bad block (SE_ERR_ARG), allocation or planning failure (SE_ERR_NOMEM). */
se_xcorr *se_xcorr_create(const double *pulse, size_t m, size_t block, se_error *err);
/* As se_xcorr_create, with planning options (cfg NULL = zeroed). FFTW's wisdom is FFTW's own
 * process-wide state: this call imports into it and exports from it, so like all planning it must not
 * run concurrently with other FFTW planning. Identical pulses and blocks give values that agree to
 * rounding (~1e-15 relative) whatever the plan; bit for bit only between plans of the same kind. */
se_xcorr *se_xcorr_create_with(const double *pulse, size_t m, const se_xcorr_config *cfg,
                               se_error *err);
/* How the plans of p were made. */
se_xcorr_plan se_xcorr_plan_source(const se_xcorr *p);
/* Free the engine. NULL accepted. Destroy every work/stream object made from it first. */
void se_xcorr_destroy(se_xcorr *p);
/* FFT block length in samples. */
size_t se_xcorr_block_size(const se_xcorr *p);
/* Pulse length m in samples. */
size_t se_xcorr_pulse_length(const se_xcorr *p);
/* E_s = sum s^2 of the pulse (units of the pulse squared). */
double se_xcorr_pulse_energy(const se_xcorr *p);

/* Scratch for se_xcorr_run. NULL and err filled on allocation failure. Not shared between threads. */
se_xcorr_work *se_xcorr_work_create(const se_xcorr *p, se_error *err);
/* Free scratch. NULL accepted. */
void se_xcorr_work_destroy(se_xcorr_work *w);

/* Correlate x [size: n] with the pulse: r [size: n] receives r[k] for k = 0..n-1 (formula above,
 * x taken as 0 beyond n-1, so the last m-1 values see a partial pulse). x and r must not overlap.
 * Cost O(n log block). Errors: NULL pointers, n = 0 (SE_ERR_ARG); a non-finite x sample, named
 * (SE_ERR_DATA). On error r is left partly written. */
se_status se_xcorr_run(const se_xcorr *p, se_xcorr_work *w, const double *x, size_t n, double *r,
                       se_error *err);

/* Valid outputs per block, block - m + 1. */
size_t se_xcorr_step(const se_xcorr *p);

/* Part of a correlation: r [size: nout] receives r[k], k = 0..nout-1, of x [size: n] taken as 0
 * beyond n - 1 (1 <= nout <= n). Blocks start at multiples of se_xcorr_step, so for a chunk
 * x = y + c (c a multiple of the step) with n = nout + m - 1 (or the rest of y), the values equal
 * bit for bit those of se_xcorr_run on the whole y at lags c..c+nout-1: chunks of one record may be
 * correlated independently (in several threads, each with its own work). Errors as se_xcorr_run,
 * and nout = 0 or nout > n (SE_ERR_ARG). */
se_status se_xcorr_run_part(const se_xcorr *p, se_xcorr_work *w, const double *x, size_t n,
                            size_t nout, double *r, se_error *err);

/* Streaming correlation of one record given in consecutive chunks. */
typedef struct se_xcorr_stream se_xcorr_stream;
/* Create a stream on p (p is borrowed and must outlive the stream). NULL and err on failure. */
se_xcorr_stream *se_xcorr_stream_create(const se_xcorr *p, se_error *err);
/* Push the next chunk x [size: n] (n = 0 allowed; x may be NULL then). *n_out values of r, in order
 * and continuing from the previous call, are written to r_out, which must hold n + block values.
 * Output lags behind input by up to block - 1 samples; se_xcorr_stream_finish flushes the rest.
 * Errors: NULL st/r_out/n_out, NULL x with n > 0 (SE_ERR_ARG); a non-finite sample, named by its
 * index in the record (SE_ERR_DATA; the stream is then unusable until finish). */
se_status se_xcorr_stream_push(se_xcorr_stream *st, const double *x, size_t n, double *r_out,
                               size_t *n_out, se_error *err);
/* Flush the remaining values (including r for the last m-1 lags, with x = 0 beyond the end) into
 * r_out, which must hold block values; *n_out receives their count. Over the whole record the values
 * are identical (bit for bit) to se_xcorr_run on the concatenated input. The stream is then reset and
 * may take a new record. */
se_status se_xcorr_stream_finish(se_xcorr_stream *st, double *r_out, size_t *n_out, se_error *err);
/* Free the stream. NULL accepted. */
void se_xcorr_stream_destroy(se_xcorr_stream *st);

/* O(n m) direct correlation with the same normalisation and zero extension, r [size: n]: the in-tree
 * reference for the tests. If the pulse energy is zero, r is set to 0. No argument checks beyond
 * returning at once on NULL or zero sizes. */
void se_xcorr_direct(const double *x, size_t n, const double *s, size_t m, double *r);

#ifdef __cplusplus
}
#endif

#endif /* SE_XCORR_H */
