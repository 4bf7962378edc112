/* strandecho: surveys. A survey file (YAML, docs/survey.md) names a site and, per line, its line
 * description (optional), its recordings, how the pulse and the speed are given, and optionally a
 * baseline recording (last survey's) to compare with. The runner locates every recording of the
 * selected lines with worker threads and compares with the baseline where one is named.
 *
 * Life: se_survey_read -> se_survey_run (any number of times) -> se_survey_items_free,
 * se_survey_free. The survey is only read by the runner; every item owns its results.
 *
 * Threads: each worker takes the next recording and does all of it (read, hash, locate, compare,
 * serialise) side by side with the others; FFTW's own planner lock (libfftw3_threads) guards the
 * planning inside se_locate, the runner's mutex (created and destroyed by each se_survey_run: no
 * process-global state) only the queue and the progress count. Results do not depend on the
 * number of workers or on the shard. */
#ifndef SE_SURVEY_H
#define SE_SURVEY_H

#include <stddef.h>

#include "strandecho/compare.h"
#include "strandecho/error.h"
#include "strandecho/jsonout.h"
#include "strandecho/line.h"
#include "strandecho/locate.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One surveyed line of the file. Paths are resolved against the survey file's folder. */
typedef struct se_survey_line {
    char *name;                 /* display name (owned); "line N" when not given */
    char *line_file;            /* line description path or NULL (owned) */
    char **recordings;          /* [size: n_recordings] paths (owned), n_recordings >= 1 */
    size_t n_recordings;
    char *baseline;             /* baseline recording path or NULL (owned) */
    char *baseline_date;        /* when the baseline was recorded, as text (e.g. "2025"), or NULL
                                   (owned); the report says "since the 2025 survey" */
    unsigned channel;           /* response channel, 1-based (default 1) */
    unsigned pulse_channel;     /* pulse channel, 1-based, 0 = none */
    char *pulse;                /* pulse spec ("hann:20ms") or pulse file path, or NULL (owned) */
    int have_quantity;          /* 1 when quantity was given */
    se_quantity quantity;       /* default velocity (voltage with a velocity factor) */
    double speed_m_s;           /* resolved speed (0 with a line file) */
    double speed_uncertainty;   /* fraction */
    double tension_n, mass_per_length_kg_m, axial_stiffness_n, velocity_factor; /* NaN unused */
    char speed_source[160];     /* how the speed was obtained */
    int have_source_end;        /* 1 when source_end was given */
    double source_reflection;   /* from source_end (observed convention) */
    double false_alarms;        /* default 0.01 */
    double confidence;          /* default 0.95 */
    double skin_k_s05_per_m;    /* skin-effect loss K, s^0.5/m, for se_locate_config (key
                                   skin_loss, parsed by se_skin_loss_parse): 0 none (default),
                                   NaN estimate from the echoes' shapes ("estimate") */
} se_survey_line;

typedef struct se_survey {
    char *path;                 /* the file read (owned) */
    char *base_dir;             /* the folder relative paths were resolved against (owned; "."
                                   when they were taken as given) */
    char *site, *date, *prepared_by, *job; /* or NULL (owned) */
    se_survey_line *lines;      /* [size: n_lines], n_lines >= 1 */
    size_t n_lines;
} se_survey;

/* Read and check a survey file. NULL with err "FILE:LINE:COLUMN: what" on any error (YAML syntax,
 * unknown or duplicate key, missing recordings, a speed given twice or not at all without a line
 * file, bad units...). Files named are not opened here. */
se_survey *se_survey_read(const char *path, se_error *err);
/* Same from text; base_dir resolves relative paths (NULL: "."), name stands for the file in
 * messages (NULL: "<string>"). */
se_survey *se_survey_parse_string(const char *text, const char *base_dir, const char *name,
                                  se_error *err);
void se_survey_free(se_survey *survey);

/* A resolved path as the survey file gave it: path without the leading "base_dir/" when it has
 * it (a pointer into path), else path itself. For display; open the resolved path. */
const char *se_survey_path_as_given(const se_survey *survey, const char *path);

/* One job: one recording of one line, with its result. */
typedef struct se_survey_item {
    size_t line;                /* index into survey->lines */
    size_t recording;           /* index into its recordings */
    se_status status;           /* SE_OK, else what failed (err holds the message) */
    se_error err;
    se_locate_result result;    /* with its trace */
    se_run_info info;           /* strings point into this item and the survey */
    char sha256[65], reference_sha256[65], reference[160], format[48];
    se_line *line_desc;         /* the line description, or NULL (owned) */
    se_expected_event *expected;/* [size: n_expected] (owned) */
    size_t n_expected;
    int compared;               /* 1 when a baseline was compared */
    se_locate_result baseline_result;
    char baseline_sha256[65];
    se_compare_result compare;
    char *json;                 /* compact JSON of the item, one line, no newline (owned) */
} se_survey_item;

/* Called after each item, from the worker that finished it, with the runner's lock held. */
typedef void (*se_survey_progress_fn)(void *user, size_t done, size_t total);

typedef struct se_survey_run_config {
    size_t jobs;                /* worker threads, 0 = 1 */
    size_t shard_k, shard_n;    /* shard K of N (1-based K): lines K, K + N, K + 2N... (1-based line
                                   numbers); shard_n 0 = every line */
    se_survey_progress_fn progress; /* or NULL */
    void *user;
} se_survey_run_config;

void se_survey_run_config_init(se_survey_run_config *cfg);

/* Run the selected lines. *items [size: *n_items] in survey order (line, then recording) whatever
 * the threads; each item carries its own status: a recording that fails does not stop the others.
 * Returns SE_OK, SE_ERR_ARG (bad shard, NULL), SE_ERR_NOMEM (also: no mutex). When no worker
 * thread can start, the calling thread does the work. */
se_status se_survey_run(const se_survey *survey, const se_survey_run_config *cfg,
                        se_survey_item **items, size_t *n_items, se_error *err);
void se_survey_items_free(se_survey_item *items, size_t n_items);

/* The item's result as one compact JSON object (no newline), malloc'd: the locate JSON
 * (docs/json.md) with two more keys, "survey" {"site", "line", "line_index" (1-based),
 * "recording_index" (1-based)} and, with a baseline, "compare" (docs/survey.md); for a failed
 * item {"survey": ..., "error": message, "status": code}. */
char *se_survey_item_json(const se_survey *survey, const se_survey_item *item, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_SURVEY_H */
