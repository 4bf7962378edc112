/* strandecho: streaming locate. The locator of locate.h run on a recording read from libsndfile in
 * blocks, so memory does not grow with the record: the matched filter is computed chunk by chunk
 * (overlap-save, se_xcorr_run_part; with two threads, two correlating threads that live for the
 * whole pass, each reading its own chunks through its own handle on the file, up to 8 chunks
 * ahead of the scan, which takes them in order in the calling thread), the noise
 * is estimated on the same strided sample of lags se_locate uses (se_noise_mad), lags are scanned
 * in blocks against a pre-threshold (0.8 of the threshold the noise of the first 2^15 lags after
 * the direct arrival implies) and only the extent of each cluster of candidates is kept; at the
 * end, for each cluster that passes the final threshold, the window of r around it is recomputed
 * from the file (bit for bit the pass's values), CLEAN (se_detect) runs on it, and the rest is
 * se_locate's own code (se_locate_finish, internal.h) reading the response back from the file:
 * the overlap refit, the source-end estimate (cfg->source_reflection NaN), the event stage, the
 * losses and the dead-zone scan.
 *
 * Non-stationary noise (cfg->noise_tracking, detect.h se_noise_profile): the pass also measures
 * se_locate's noise blocks, keeping only the lags se_noise_block_sigma samples in each
 * (se_noise_block_taps: 3072 a block). When they
 * vary, one more pass scans each lag against 0.8 of its own threshold (a single pre-threshold at
 * the quiet level would gather a loud part into one cluster), and CLEAN on each window uses the
 * profile seen from the window (its start moved back by less than block/32 lags so the profile's
 * parts line up).
 *
 * Repeated shots (stack.h, cfg->stacking not SE_STACKING_OFF, with a pulse channel, which then
 * plays se_locate_config.pilot): a cheap read first bounds the pulse channel's matched filter by
 * its energy over each pulse length (Cauchy-Schwarz); when that leaves room for only one shot the
 * record goes to the one-pass engine above, unchanged. Otherwise the pulse channel is correlated
 * once (chunk by chunk) and the shots are found on it (se_shot_finder, se_stack_shots' own search),
 * each refined on its recomputed neighbourhood; one more read finds the response's clipped runs;
 * then each candidate's span is read back and aligned (phase ramp), and the misfit test and the
 * stack (mean or trimmed mean) take the aligned segments part of the interval by part, as many
 * lags at a time as scfg->stack_memory holds for every shot (one part when it all fits; else
 * the spans are read and aligned again for each part, for the misfit and again for a trimmed
 * mean, while the mean takes the shots one by one in one more read). se_locate then runs on the
 * stack, one interval long, as after its own stacking (se_locate_config.given_stack), so shots_found, shots_used, stack_gain_db and shot_interval_s, the events and
 * their multiple / previous-shot labels are se_locate's (the stack within rounding of se_locate's
 * own: the same operations in the same order, so bit for bit in the tests). When several shots
 * are found but fewer than two are usable, se_locate runs on the one usable (or first) shot's
 * segment, as se_locate does. Without a pulse channel se_locate stacks on the response's own
 * direct arrivals (three in a rhythm, stack.h); the stream does the same after its engine pass,
 * which shows whether three can be there (clusters reaching half the direct arrival's |r|; with
 * the profile pass of non-stationary noise, bounded by the levels of the blocks they touch):
 * only then does it search the response
 * for the shots in passes of its own, as above with the response as the trigger channel, and
 * locate on the stack (else the single shot's pass stands, no extra pass made).
 * Memory for repeated shots: stack_memory (default 256 MiB) for the aligned segments, plus the
 * stack, its alternating mean, an interval of scratch for one alignment and its FFT (2 P doubles,
 * P the power of two above the interval + 128), 2^18 lags around one trigger at a time, and
 * se_locate on one interval; measured in docs/performance.md.
 *
 * Same results as se_locate on the whole record: the same events, with lags bit for bit equal when
 * both plan with FFTW_ESTIMATE (the default here), within ~1e-12 sample otherwise; see
 * se_locate_stream for the two cases where the answer can differ.
 *
 * Memory: a ring of 8 chunks (one with one thread), each its input (block + m - 1 doubles) and
 * its output (block doubles), a second file handle with two threads, 2 MiB around the direct
 * arrival, 16 bytes per sampled noise lag (2 MiB at the default 2^16; twice during the final
 * median), 24 bytes per candidate cluster, the reference's autocorrelation tables (made during
 * the pass), and two recomputed windows (about 5 pulse lengths plus a block each) at a time; peak
 * resident memory does not grow with the record (figures in docs/performance.md). */
#ifndef SE_STREAM_H
#define SE_STREAM_H

#include <stddef.h>

#include "strandecho/error.h"
#include "strandecho/locate.h"
#include "strandecho/xcorr.h"

#ifdef __cplusplus
extern "C" {
#endif

/* No pulse channel: the reference comes from the locate configuration. */
#define SE_STREAM_NO_CHANNEL (-1)

typedef struct se_stream_config {
    unsigned channel;         /* response channel, 0-based */
    int pulse_channel;        /* 0-based channel carrying the injected pulse, or SE_STREAM_NO_CHANNEL.
                                 When set, the pulse is found by se_pulse_support on the first
                                 pulse_window samples of that channel and used as the reference
                                 (SE_REF_CHANNEL, offset where it starts), replacing cfg's */
    size_t pulse_window;      /* samples of the pulse channel searched (0 = 2^20) */
    size_t block;             /* lags correlated per chunk (0 = 2^16), rounded down to a
                                 multiple of the engine's step (at least one step) */
    unsigned threads;         /* 1 or 2 threads reading and correlating chunks (0 = 2); with 2
                                 the calling thread scans beside them, with 1 it reads, correlates
                                 and scans in turn. Results do not depend on it */
    size_t noise_samples;     /* lags sampled for the noise (0 = 2^16, as se_locate) */
    const char *wisdom_path;  /* FFTW wisdom file (see se_xcorr_config), NULL = none */
    int measure;              /* 1: FFTW_MEASURE when the wisdom lacks the size (then the values
                                 differ from se_locate's ESTIMATE plans by rounding only) */
    size_t stack_memory;      /* repeated shots: bytes for the aligned segments the misfit test
                                 (and the trimmed mean) look at lag by lag (0 = 256 MiB); when the
                                 shots times the interval need more, the segments are read and
                                 aligned again for each part of the interval that fits (more
                                 reads, same result; the mean itself goes shot by shot) */
} se_stream_config;

/* What the run read and did (filled as far as it got, also on failure). */
typedef struct se_stream_info {
    size_t frames;            /* samples per channel in the file */
    unsigned channels;        /* channels in the file */
    double rate;              /* sample rate, Hz */
    char format[48];          /* libsndfile's format name, e.g. "WAV float32" -> "WAV (Microsoft)" */
    unsigned passes;          /* correlation passes over the file (1; 2 without a known time base;
                                 one more when the pre-threshold proved too high, and one more
                                 when the noise varies along the record, with noise tracking;
                                 with a pulse channel that may hold several shots, one for the
                                 shot search on it, and then none more when they are stacked) */
    unsigned stack_reads;     /* other reads of the file for repeated shots: the energy screen of
                                 the pulse channel (1 with stacking on and a pulse channel), then,
                                 when it may hold several shots, the clipping scan, one read of
                                 the shots' spans per part of the interval for the misfit test,
                                 and, when the parts are several (stack_memory), one more for the
                                 mean or one per part again for the trimmed mean */
    size_t windows;           /* candidate windows recomputed (those reaching the threshold) */
    size_t window_samples;    /* r samples recomputed in them */
    se_xcorr_plan plan;       /* how the FFT plans were made */
    size_t shots[5];          /* repeated shots stacked on the stream: how many shots ended in each
                                 se_shot_status (stack.h: used, clipped, amplitude, late, misfit);
                                 all 0 when the record was located as a single shot */
} se_stream_info;

/* Defaults: channel 0, no pulse channel, auto block, 2 threads, 2^16 noise lags, no wisdom. */
void se_stream_config_init(se_stream_config *scfg);

/* Locate reflections in a recording file read in blocks.
 *  path : any file libsndfile reads (borrowed); text tables are not streamed (SE_ERR_FORMAT)
 *  cfg  : as for se_locate, except that the reference must be given (SE_REF_CHANNEL with its offset,
 *         SE_REF_FILE, SE_REF_SYNTHETIC) or come from scfg->pulse_channel; the direct-arrival self
 *         reference, acceleration/displacement responses (which need the whole record for their
 *         conversion) and skin-effect loss (cfg->skin_k_s05_per_m not 0: loss-shaped templates
 *         on the whole record) are refused with SE_ERR_ARG
 *  scfg : NULL = defaults
 *  res  : filled as by se_locate (caller frees with se_locate_result_free even on failure)
 *  info : may be NULL
 * The answer can differ from se_locate's only (1) when more than cfg->max_events peaks pass the
 * threshold (the streaming run keeps the largest, CLEAN on the whole record the first found),
 * and (2) with a pulse channel longer than pulse_window (se_pulse_support then sees a prefix).
 * CLEAN on a window of r
 * works on record lags (se_detect_config.origin), so even the weak echoes of an overlapping
 * reverberation train come out as on the whole record, bit for bit. With a pulse channel,
 * se_locate is the run with cfg->pilot = that channel; a record of repeated shots is stacked as
 * described above (info->shots counts the shots by se_shot_status).
 * Errors: as se_locate, plus SE_ERR_IO / SE_ERR_FORMAT from the file (named), SE_ERR_DATA for a
 * non-finite sample (named by sample and channel), SE_ERR_ARG for a bad channel or option. */
se_status se_locate_stream(const char *path, const se_locate_config *cfg,
                           const se_stream_config *scfg, se_locate_result *res,
                           se_stream_info *info, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_STREAM_H */
