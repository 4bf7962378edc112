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
 * Threads: FFTW's planner is not thread-safe. se_xcorr_create, which plans (FFTW_ESTIMATE), must be
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

/* Create the engine for pulse s [size: m], copied (the caller keeps its array).
 *  block: FFT block length. 0 = auto: the smallest power of two >= 8 m and >= 1024. Otherwise it must
 *         be a power of two >= 2 m. Each block yields block - m + 1 values of r.
 * All FFTW planning (FFTW_ESTIMATE, arrays from fftw_malloc) happens here.
 * Returns NULL and fills err on: NULL pulse, m = 0, a non-finite sample (named), zero energy
 * (SE_ERR_DATA), a bad block (SE_ERR_ARG), allocation or planning failure (SE_ERR_NOMEM). */
se_xcorr *se_xcorr_create(const double *pulse, size_t m, size_t block, se_error *err);
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
