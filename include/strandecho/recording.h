/* strandecho: recordings (sampled traces, one or more channels) read from and written to files.
 *
 * Reading accepts every format libsndfile reads (WAV 8/16/24/32-bit integer and float, FLAC, AIFF,
 * W64, RF64, CAF, OGG, ...) and text tables (CSV/TSV: a time column in seconds, then one column per
 * channel). Samples are returned as double; integer PCM is scaled by libsndfile to [-1, 1)
 * (divided by 2^(bits-1)); float files are returned unscaled.
 *
 * Numbering in messages: text files name 1-based LINE and COLUMN ("FILE:LINE:COLUMN: ...");
 * sample numbers are 0-based, like the arrays, and channel numbers 1-based, as the command line's
 * --channel ("sample 1234 (channel 2)" is data[1 * frames + 1234]). */
#ifndef SE_RECORDING_H
#define SE_RECORDING_H

#include <stddef.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* A recording: owned by the caller, freed with se_recording_free. */
typedef struct se_recording {
    size_t frames;      /* samples per channel (>= 1 for a recording read from a file) */
    unsigned channels;  /* >= 1 */
    double rate;        /* samples per second (Hz) */
    double *data;       /* channel-major [size: channels * frames]: channel c (0-based) sample i at
                         * data[c * frames + i] */
    char *path;         /* malloc'd copy of the path read */
    char format[48];    /* human description, e.g. "WAV float32", "FLAC 24-bit", "CSV" */
} se_recording;

/* Default for se_read_options.max_bytes: 2 GiB of samples as double. */
#define SE_READ_DEFAULT_MAX_BYTES ((size_t)1 << 31)

typedef struct se_read_options {
    size_t max_bytes;   /* refuse recordings whose samples (as double) need more bytes than this;
                         * 0 = SE_READ_DEFAULT_MAX_BYTES. Checked before allocating. */
} se_read_options;

/* Read a recording.
 *  path : file to read (borrowed). Files named *.csv, *.tsv, *.txt (any case) are read as text
 *         tables (se_recording_read_csv); other files through libsndfile, falling back to the text
 *         reader when libsndfile does not recognise the file and its content is text.
 *  opt  : options, NULL = defaults
 *  err  : filled on failure (may be NULL)
 * Returns a new recording, or NULL with err filled:
 *  SE_ERR_ARG    NULL path
 *  SE_ERR_IO     cannot open or read the file (message has the system or libsndfile text)
 *  SE_ERR_FORMAT empty file, not a sound file nor a text table, bad header, truncated file
 *                ("FILE: truncated: header says N frames, file holds M"), text syntax errors
 *  SE_ERR_DATA   zero frames, a NaN/Inf sample ("FILE: sample 1234 (channel 2) is NaN", the first
 *                in time order), text time column irregular, non-increasing or too short
 *  SE_ERR_NOMEM  over opt->max_bytes, or allocation failed */
se_recording *se_recording_read(const char *path, const se_read_options *opt, se_error *err);

/* The header of a sound file without its samples, for a recording streamed in blocks (stream.h):
 * frames, channels, rate, format and path set, data NULL. Text tables (by name or content) are
 * not probed: SE_ERR_FORMAT, as they are read whole. Errors as se_recording_read's for the
 * header: SE_ERR_ARG (NULL path), SE_ERR_IO, SE_ERR_FORMAT, SE_ERR_DATA (zero frames),
 * SE_ERR_NOMEM. Free with se_recording_free. */
se_recording *se_recording_probe(const char *path, se_error *err);

/* Read a text table regardless of the file name. Format:
 *  - delimiter detected on the first data row: tab, else semicolon, else comma, else whitespace
 *    (runs of spaces/tabs); fields may carry surrounding spaces and double quotes;
 *  - blank lines and lines starting with '#' are skipped anywhere; lines before the first data row
 *    whose first field is not a number are header lines (skipped);
 *  - column 1 is time in seconds, strictly increasing; columns 2.. are channels (at least one);
 *  - rate = 1 / median time step; every step must lie within 1 % of the median;
 *  - numbers are parsed with strtod in the C locale (whatever the caller's locale), must be finite.
 * Errors name "FILE:LINE:COLUMN" (or "FILE:LINE" for whole-row faults): non-numeric or missing
 * value, ragged row (SE_ERR_FORMAT); non-finite value, non-increasing time, irregular step
 * ("FILE:LINE: time step X s differs from the median Y s"), fewer than 2 rows (SE_ERR_DATA).
 * format is "CSV" (comma), "CSV semicolon", "CSV tab" or "CSV whitespace". */
se_recording *se_recording_read_csv(const char *path, const se_read_options *opt, se_error *err);

/* Free a recording and its arrays. NULL accepted. */
void se_recording_free(se_recording *rec);

/* Samples of channel index0 (0-based) [size: rec->frames], borrowed from rec; NULL if rec is NULL
 * or index0 >= rec->channels. */
const double *se_recording_channel(const se_recording *rec, unsigned index0);

/* Write nch channels of frames samples each at rate Hz.
 *  path     : output file (borrowed); the format follows the extension (any case):
 *             .wav float32 WAV, .flac 24-bit FLAC, .aif/.aiff AIFF float32 (AIFC), .w64 float32,
 *             .rf64 float32, .caf float32, .csv text ("time_s,ch0,..." header, then the time i/rate
 *             and one column per channel, all %.17g, C locale). "-" writes CSV to standard output.
 *  channels : [size: nch] pointers to [size: frames] samples each (borrowed)
 *  rate     : > 0 and finite; sound formats store whole Hz (1 .. INT_MAX): a rate more than 1e-9
 *             relative from an integer is refused with SE_ERR_RANGE
 * Samples must be finite (SE_ERR_DATA names channel and sample). For the integer format (FLAC) any
 * |x| > 1 gives SE_ERR_RANGE naming the channel and sample; values are rounded to the nearest of
 * k / 2^23, k in [-2^23, 2^23 - 1], so they read back within 2^-23 (2^-24 away from +1).
 * Written atomically through se_output: on any failure the old file at path is left untouched.
 * Returns SE_OK, SE_ERR_ARG (NULL pointers, nch or frames 0, bad rate, unknown extension),
 * SE_ERR_DATA, SE_ERR_RANGE, SE_ERR_IO (libsndfile or system message), SE_ERR_NOMEM. */
se_status se_recording_write(const char *path, const double *const *channels, unsigned nch,
                             size_t frames, double rate, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_RECORDING_H */
