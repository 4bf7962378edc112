/* strandecho: the locate result as JSON (jansson), the contract documented in docs/json.md. */
#ifndef SE_JSONOUT_H
#define SE_JSONOUT_H

#include <stddef.h>

#include "strandecho/error.h"
#include "strandecho/locate.h"

struct se_expected_event;

#ifdef __cplusplus
extern "C" {
#endif

/* What the run was made of: borrowed strings (NULL allowed where noted). Values not used are NaN. */
typedef struct se_run_info {
    const char *input_file;      /* recording path as given */
    const char *input_sha256;    /* lower-case hex */
    const char *input_format;    /* e.g. "WAV float32" */
    size_t input_frames;         /* samples per channel */
    unsigned input_channels;     /* channels in the file */
    unsigned channel;            /* response channel, 1-based */
    const char *reference;       /* e.g. "channel 2", "file pulse.wav", "hann:20ms", "self" */
    const char *reference_sha256;/* of a separate pulse file, or NULL */
    const char *speed_source;    /* how the speed was obtained, e.g. "--speed", "tension and mass" */
    double tension_n;            /* given tension, N (NaN if unused) */
    double mass_per_length_kg_m; /* given mass per length, kg/m (NaN if unused) */
    double axial_stiffness_n;    /* given EA, N (NaN if unused) */
    double velocity_factor;      /* given VF (NaN if unused) */
    double speed_uncertainty;    /* fraction (one standard uncertainty) */
    double false_alarms;         /* false-alarm target per record */
    double confidence;           /* interval coverage */
    double source_reflection;    /* source-end coefficient used */
    const char *line_file;       /* line description file or NULL */
    const struct se_expected_event *expected; /* the line's expected events (matched in the result), or NULL */
    size_t n_expected;
    const char *line_name;       /* the line's own name (free text) or NULL */
} se_run_info;

/* Initialise: all strings NULL, all numbers NaN or 0. */
void se_run_info_init(se_run_info *info);

/* Serialise to a NUL-terminated malloc'd string (caller frees with free()): deterministic key
 * order, two-space indent, trailing newline. NULL on failure with err filled. */
char *se_result_json(const se_locate_result *res, const se_run_info *info, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_JSONOUT_H */
