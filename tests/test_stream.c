/* strandecho tests: se_locate_stream against se_locate on files that fit in memory. The oracle is
 * the whole-record pipeline itself (same events, delays within 1e-9 s; lags bit for bit with the
 * default FFTW_ESTIMATE plans) across block sizes (one step, a block that leaves a final partial
 * chunk, a block longer than the file), one and two threads, a pulse channel (known time base) and a
 * separate reference (no time base: the extra pass), a record whose noise falls along it (the
 * provisional pre-threshold is too high: the exact rerun), clipped runs, and the refusals; and on
 * lattice records (simulate.h) of a splice beside a clamp, what follows CLEAN: the overlap refit,
 * the source-end estimate and the dead-zone scan, read back from the file.
 * Synthetic signals: Gaussian-windowed sine bursts at known fractional delays plus Gaussian noise
 * from a fixed seed (common practice, no source). */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/detect.h"
#include "strandecho/fdline.h"
#include "strandecho/locate.h"
#include "strandecho/pulse.h"
#include "strandecho/recording.h"
#include "strandecho/simulate.h"
#include "strandecho/stream.h"
#include <sndfile.h>

#include "testutil.h"

#define TS_FS 1.0e6
#define TS_V 3000.0
#define TS_PI 3.14159265358979323846

/* max_events of both runs: the glitches of the clipping case leave many CLEAN residues, and past
 * the cap the two pipelines keep different subsets (stream.h) */
static size_t ts_max_events = 64;
/* noise_tracking of both runs (se_locate_config_init's default is on) */
static int ts_tracking = 1;

typedef struct ts_echo {
    double t;   /* start of the burst, samples */
    double a;   /* amplitude */
} ts_echo;

static double ts_burst(double u);
static double ts_gauss(uint64_t *state);
static int ts_write(const char *path, size_t n, const ts_echo *e, size_t ne, double noise,
                    double noise_late, double clip, uint64_t seed);
static int ts_whole(const char *path, int use_channel, se_locate_result *res, double **ref,
                    size_t *m);
static void ts_compare(const se_locate_result *a, const se_locate_result *b, int exact,
                       const char *what);
static void test_blocks_and_threads(void);
static void test_no_time_base(void);
static void test_noise_falls(void);
static void test_clipping(void);
static void test_refusals(void);
static void test_mono_windows(void);
static void test_formats(void);
static void test_noise_taps(void);
static void test_overlap_refit(void);
static void test_non_finite(void);

/* A 40-sample burst: 8 cycles of 0.1 cycles/sample under a Gaussian window. */
static double ts_burst(double u)
{
    double c = u - 20.0;
    if (u < 0.0 || u > 40.0)
        return 0.0;
    return exp(-c * c / (2.0 * 7.0 * 7.0)) * sin(2.0 * TS_PI * 0.1 * c);
}

/* xorshift64* uniform pair -> Box-Muller normal */
static double ts_gauss(uint64_t *state)
{
    double u1, u2;
    *state ^= *state >> 12;
    *state ^= *state << 25;
    *state ^= *state >> 27;
    u1 = ((double)((*state * 2685821657736338717ULL) >> 11) + 0.5) / 9007199254740992.0;
    *state ^= *state >> 12;
    *state ^= *state << 25;
    *state ^= *state >> 27;
    u2 = ((double)((*state * 2685821657736338717ULL) >> 11) + 0.5) / 9007199254740992.0;
    return sqrt(-2.0 * log(u1)) * cos(2.0 * TS_PI * u2);
}

/* Two channels, float WAV: the response (echoes + noise, noise_late after n/2, runs at +-clip
 * when clip > 0) and the injected pulse (the first echo alone, a little noise). */
static int ts_write(const char *path, size_t n, const ts_echo *e, size_t ne, double noise,
                    double noise_late, double clip, uint64_t seed)
{
    double *a = calloc(n, sizeof *a), *b = calloc(n, sizeof *b);
    const double *ch[2];
    size_t i, k;
    uint64_t st = seed;
    se_error err;
    int ok;
    if (a == NULL || b == NULL) {
        free(a);
        free(b);
        return 0;
    }
    for (k = 0; k < ne; k++) {
        size_t i0 = e[k].t > 1.0 ? (size_t)e[k].t - 1 : 0;
        for (i = i0; i < n && i < i0 + 43; i++) {
            double v = e[k].a * ts_burst((double)i - e[k].t);
            a[i] += v;
            if (k == 0)
                b[i] += v;
        }
    }
    for (i = 0; i < n; i++) {
        a[i] += (i < n / 2 ? noise : noise_late) * ts_gauss(&st);
        b[i] += 1e-4 * ts_gauss(&st);
    }
    if (clip > 0.0) {
        /* flat runs at the record's extremes (a converter at full scale) before the outgoing
         * pulse, so that their correlation stays out of the searched lags: 8 and 6 samples
         * count, a run of 3 does not */
        for (i = 0; i < 8; i++)
            a[200 + i] = clip;
        for (i = 0; i < 6; i++)
            a[500 + i] = -clip;
        for (i = 0; i < 3; i++)
            a[700 + i] = clip;
    }
    ch[0] = a;
    ch[1] = b;
    se_error_clear(&err);
    ok = se_recording_write(path, ch, 2, n, TS_FS, &err) == SE_OK;
    if (!ok)
        printf("write %s: %s\n", path, err.message);
    free(a);
    free(b);
    return ok;
}

/* se_locate on the whole file read into memory, reference from the pulse channel (use_channel) or
 * the pulse channel's support as a separate reference without time base. */
static int ts_whole(const char *path, int use_channel, se_locate_result *res, double **ref,
                    size_t *m)
{
    se_error err;
    se_recording *rec;
    se_locate_config cfg;
    size_t b, e;
    int ok;
    se_error_clear(&err);
    rec = se_recording_read(path, NULL, &err);
    if (!CHECK(rec != NULL))
        return 0;
    se_locate_config_init(&cfg);
    cfg.speed_m_s = TS_V;
    cfg.max_events = ts_max_events;
    cfg.noise_tracking = ts_tracking;
    if (!CHECK(se_pulse_support(se_recording_channel(rec, 1), rec->frames, &b, &e, &err) == SE_OK)) {
        se_recording_free(rec);
        return 0;
    }
    *m = e - b;
    *ref = malloc(*m * sizeof **ref);
    if (*ref == NULL) {
        se_recording_free(rec);
        return 0;
    }
    memcpy(*ref, se_recording_channel(rec, 1) + b, *m * sizeof **ref);
    cfg.reference = *ref;
    cfg.reference_length = *m;
    cfg.reference_offset = use_channel ? b : SIZE_MAX;
    cfg.reference_kind = use_channel ? SE_REF_CHANNEL : SE_REF_FILE;
    ok = se_locate(se_recording_channel(rec, 0), rec->frames, rec->rate, &cfg, res, &err) == SE_OK;
    if (!ok)
        printf("se_locate: %s\n", err.message);
    se_recording_free(rec);
    return CHECK(ok);
}

static void ts_compare(const se_locate_result *a, const se_locate_result *b, int exact,
                       const char *what)
{
    size_t i;
    if (!CHECK(a->n_events == b->n_events)) {
        printf("  %s: %zu events whole, %zu streamed\n", what, a->n_events, b->n_events);
        return;
    }
    for (i = 0; i < a->n_events; i++) {
        CHECK_CLOSE(b->events[i].delay_s, a->events[i].delay_s, 1e-9, what);
        CHECK_CLOSE(b->events[i].reflection, a->events[i].reflection, 1e-9, what);
        CHECK(b->events[i].multiple == a->events[i].multiple);
        if (exact && !CHECK(b->events[i].lag_samples == a->events[i].lag_samples))
            printf("  %s: event %zu lag %.17g whole, %.17g streamed\n", what, i,
                   a->events[i].lag_samples, b->events[i].lag_samples);
    }
    CHECK_CLOSE(b->t0_s, a->t0_s, 1e-12, what);
    CHECK_CLOSE(b->noise_level, a->noise_level, exact ? 0.0 : 1e-9 * a->noise_level, what);
    CHECK_CLOSE(b->threshold, a->threshold, exact ? 0.0 : 1e-9 * a->threshold, what);
    CHECK(b->noise_floored == a->noise_floored);
    CHECK(b->clipped_samples == a->clipped_samples);
    CHECK(b->first_clipped == a->first_clipped);
    CHECK(b->n_clip_runs == a->n_clip_runs);
    CHECK(b->direct_clipped == a->direct_clipped);
    CHECK_CLOSE(b->dead_zone_s, a->dead_zone_s, 0.0, what);
    CHECK_CLOSE(b->record_range_s, a->record_range_s, 0.0, what);
    CHECK(b->reference_length == a->reference_length);
    /* the noise profile (non-stationary noise): the same blocks, so the same levels */
    CHECK(b->noise_varies == a->noise_varies);
    if (a->noise_varies) {
        CHECK_CLOSE(b->noise_level_min, a->noise_level_min, 0.0, what);
        CHECK_CLOSE(b->noise_level_max, a->noise_level_max, 0.0, what);
    }
    for (i = 0; i < a->n_events; i++)
        CHECK_CLOSE(b->events[i].snr_db, a->events[i].snr_db, 1e-9, what);
}

static const ts_echo ts_echoes[] = {
    {1000.0, 1.0},      /* the outgoing pulse */
    {4321.37, 0.30},    /* 3.33 ms after it */
    {4391.9, -0.20},    /* overlapping the previous one's tail */
    {60000.25, 0.05},
    {150001.5, -0.02},
    {199960.0, 0.04},   /* near the end: its window is cut by the record */
};

static void test_blocks_and_threads(void)
{
    char path[4096];
    se_locate_result whole, str;
    double *ref = NULL;
    size_t m = 0, k;
    se_error err;
    /* n = 200003: not a multiple of any step; block 2^20 is longer than the file */
    const size_t blocks[] = {1, 4096, 65536, 100000, (size_t)1 << 20};
    se_test_binary_path(path, sizeof path, "stream_a.wav");
    if (!CHECK(ts_write(path, 200003, ts_echoes, 6, 1e-3, 1e-3, 0.0, 7)))
        return;
    if (!ts_whole(path, 1, &whole, &ref, &m))
        return;
    CHECK(whole.n_events == 5);
    for (k = 0; k < sizeof blocks / sizeof blocks[0]; k++) {
        unsigned t;
        for (t = 1; t <= 2; t++) {
            se_stream_config sc;
            se_locate_config cfg;
            se_stream_info info;
            char what[96];
            se_stream_config_init(&sc);
            sc.pulse_channel = 1;
            sc.block = blocks[k];
            sc.threads = t;
            se_locate_config_init(&cfg);
            cfg.speed_m_s = TS_V;
            se_error_clear(&err);
            snprintf(what, sizeof what, "block %zu, %u thread%s", blocks[k], t, t > 1 ? "s" : "");
            if (!CHECK(se_locate_stream(path, &cfg, &sc, &str, &info, &err) == SE_OK)) {
                printf("  %s: %s\n", what, err.message);
                continue;
            }
            CHECK(info.passes == 1);
            CHECK(info.frames == 200003 && info.channels == 2);
            ts_compare(&whole, &str, 1, what);
            se_locate_result_free(&str);
        }
    }
    se_locate_result_free(&whole);
    free(ref);
    remove(path);
}

/* A reference without a time base: the first lag at half the largest |r| needs a pass of its own. */
static void test_no_time_base(void)
{
    char path[4096];
    se_locate_result whole, str;
    double *ref = NULL;
    size_t m = 0;
    se_error err;
    se_stream_config sc;
    se_locate_config cfg;
    se_stream_info info;
    se_test_binary_path(path, sizeof path, "stream_b.wav");
    if (!CHECK(ts_write(path, 120000, ts_echoes, 5, 5e-3, 5e-3, 0.0, 11)))
        return;
    if (!ts_whole(path, 0, &whole, &ref, &m))
        return;
    se_stream_config_init(&sc);
    sc.block = 30000;
    se_locate_config_init(&cfg);
    cfg.speed_m_s = TS_V;
    cfg.reference = ref;
    cfg.reference_length = m;
    cfg.reference_kind = SE_REF_FILE;
    se_error_clear(&err);
    if (CHECK(se_locate_stream(path, &cfg, &sc, &str, &info, &err) == SE_OK)) {
        CHECK(info.passes == 2);
        ts_compare(&whole, &str, 1, "no time base");
        se_locate_result_free(&str);
    } else {
        printf("  %s\n", err.message);
    }
    se_locate_result_free(&whole);
    free(ref);
    remove(path);
}

/* Loud noise in the first half, ten times quieter after (and the reverse), with noise tracking on
 * (the default) and off. Off: the provisional pre-threshold from the first lags is above the final
 * threshold, so the pass is redone with the exact one. On: the block sigmas of the first pass
 * vary tenfold, so a second pass holds each lag to its own level (a single pre-threshold at the
 * quiet level would make one cluster of the whole loud half: the recomputed windows stay small).
 * Either way the answer is se_locate's on the whole record. */
static void test_noise_falls(void)
{
    char path[4096];
    const ts_echo e[] = {{1000.0, 1.0}, {30000.4, 0.3}, {150000.7, 0.01}, {160000.2, -0.002}};
    const ts_echo r[] = {{1000.0, 1.0}, {30000.4, 0.002}, {60000.1, -0.01}, {150000.7, 0.3}};
    size_t run;
    /* not the rising noise with tracking off: the one threshold then lets more than max_events
     * false alarms through in the loud half, where the two pipelines may differ (stream.h) */
    for (run = 0; run < 3; run++) {
        se_locate_result whole, str;
        double *ref = NULL;
        size_t m = 0;
        se_error err;
        se_stream_config sc;
        se_locate_config cfg;
        se_stream_info info;
        int rises = run >= 2;
        char what[64];
        ts_tracking = run % 2 == 0;
        snprintf(what, sizeof what, "noise %s, tracking %s", rises ? "rises" : "falls",
                 ts_tracking ? "on" : "off");
        se_test_binary_path(path, sizeof path, "stream_c.wav");
        if (!CHECK(ts_write(path, 200000, rises ? r : e, 4, rises ? 1e-3 : 2e-2, rises ? 2e-2 : 1e-3,
                            0.0, 13)))
            break;
        if (!ts_whole(path, 1, &whole, &ref, &m))
            break;
        CHECK(whole.noise_varies == ts_tracking);
        se_stream_config_init(&sc);
        sc.pulse_channel = 1;
        se_locate_config_init(&cfg);
        cfg.speed_m_s = TS_V;
        cfg.noise_tracking = ts_tracking;
        se_error_clear(&err);
        if (CHECK(se_locate_stream(path, &cfg, &sc, &str, &info, &err) == SE_OK)) {
            /* falls: the exact rerun (off) or the profile pass (on); rises: the profile pass */
            if (!CHECK(info.passes == 2u))
                printf("  %s: %u passes\n", what, info.passes);
            ts_compare(&whole, &str, 1, what);
            if (ts_tracking && !CHECK(info.window_samples < 20000))
                printf("  %s: %zu window lags\n", what, info.window_samples);
            se_locate_result_free(&str);
        } else {
            printf("  %s: %s\n", what, err.message);
        }
        printf("  %s: %zu events, noise varies %d\n", what, whole.n_events, whole.noise_varies);
        se_locate_result_free(&whole);
        free(ref);
        remove(path);
    }
    ts_tracking = 1;
}

/* Clipped runs at both extremes: same count, first sample, runs and flags as the whole-record
 * scan (se_locate's rule: 5 or more equal samples at the maximum or minimum). */
static void test_clipping(void)
{
    char path[4096];
    se_locate_result whole, str;
    double *ref = NULL;
    size_t m = 0;
    se_error err;
    se_stream_config sc;
    se_locate_config cfg;
    se_stream_info info;
    const ts_echo e[] = {{1000.0, 1.0}, {9000.0, 0.5}, {50000.2, 0.2}};
    se_test_binary_path(path, sizeof path, "stream_d.wav");
    if (!CHECK(ts_write(path, 80000, e, 3, 1e-3, 1e-3, 1.5, 17)))
        return;
    ts_max_events = 4096;
    if (!ts_whole(path, 1, &whole, &ref, &m))
        return;
    CHECK(whole.clipped_samples == 14 && whole.n_clip_runs == 2); /* 8 + 6, the run of 3 not */
    se_stream_config_init(&sc);
    sc.pulse_channel = 1;
    sc.block = 5000;
    se_locate_config_init(&cfg);
    cfg.speed_m_s = TS_V;
    cfg.max_events = ts_max_events;
    se_error_clear(&err);
    if (CHECK(se_locate_stream(path, &cfg, &sc, &str, &info, &err) == SE_OK)) {
        size_t i;
        ts_compare(&whole, &str, 1, "clipping");
        for (i = 0; i < whole.n_clip_runs && i < str.n_clip_runs; i++)
            CHECK(whole.clip_runs[i][0] == str.clip_runs[i][0] &&
                  whole.clip_runs[i][1] == str.clip_runs[i][1]);
        for (i = 0; i < whole.n_events && i < str.n_events; i++)
            CHECK(whole.events[i].clipped == str.events[i].clipped);
        se_locate_result_free(&str);
    } else {
        printf("  %s\n", err.message);
    }
    se_locate_result_free(&whole);
    free(ref);
    remove(path);
    ts_max_events = 64;
}

static void test_refusals(void)
{
    char path[4096];
    se_locate_result str;
    se_error err;
    se_stream_config sc;
    se_locate_config cfg;
    se_test_binary_path(path, sizeof path, "stream_e.wav");
    if (!CHECK(ts_write(path, 20000, ts_echoes, 2, 1e-3, 1e-3, 0.0, 19)))
        return;
    se_stream_config_init(&sc);
    se_locate_config_init(&cfg);
    cfg.speed_m_s = TS_V;
    se_error_clear(&err);
    /* self reference: needs the whole record */
    CHECK(se_locate_stream(path, &cfg, &sc, &str, NULL, &err) == SE_ERR_ARG);
    CHECK(strstr(err.message, "self reference") != NULL);
    sc.pulse_channel = 1;
    cfg.quantity = SE_Q_ACCELERATION;
    CHECK(se_locate_stream(path, &cfg, &sc, &str, NULL, &err) == SE_ERR_ARG);
    cfg.quantity = SE_Q_VELOCITY;
    sc.pulse_channel = 0; /* the response channel itself */
    CHECK(se_locate_stream(path, &cfg, &sc, &str, NULL, &err) == SE_ERR_ARG);
    sc.pulse_channel = 1;
    cfg.skin_k_s05_per_m = 1e-6; /* skin-effect loss: whole-record templates, refused */
    CHECK(se_locate_stream(path, &cfg, &sc, &str, NULL, &err) == SE_ERR_ARG);
    CHECK(strstr(err.message, "skin-effect") != NULL);
    cfg.skin_k_s05_per_m = NAN;
    CHECK(se_locate_stream(path, &cfg, &sc, &str, NULL, &err) == SE_ERR_ARG);
    cfg.skin_k_s05_per_m = 0.0;
    sc.threads = 3;
    CHECK(se_locate_stream(path, &cfg, &sc, &str, NULL, &err) == SE_ERR_ARG);
    sc.threads = 1;
    CHECK(se_locate_stream("/nonexistent/x.wav", &cfg, &sc, &str, NULL, &err) == SE_ERR_FORMAT);
    CHECK(strstr(err.message, "/nonexistent/x.wav") != NULL);
    CHECK(se_locate_stream(path, &cfg, &sc, &str, NULL, &err) == SE_OK);
    CHECK(str.n_events == 1);
    se_locate_result_free(&str);
    remove(path);
}
/* A mono file (read straight into the chunk buffers) with the reference given, its windows
 * recomputed from the file at the end: the same answer as se_locate on the response channel, and
 * no more windows recomputed than events found (noise clusters below the threshold are skipped). */
static void test_mono_windows(void)
{
    char path[4096], mono[4096];
    se_locate_result whole, str;
    se_recording *rec;
    double *ref = NULL;
    size_t m = 0, b, e, k;
    se_error err;
    const size_t blocks[] = {1, 0};
    se_test_binary_path(path, sizeof path, "stream_m2.wav");
    se_test_binary_path(mono, sizeof mono, "stream_m1.wav");
    if (!CHECK(ts_write(path, 200003, ts_echoes, 6, 1e-3, 1e-3, 0.0, 23)))
        return;
    if (!ts_whole(path, 1, &whole, &ref, &m))
        return;
    se_error_clear(&err);
    rec = se_recording_read(path, NULL, &err);
    if (!CHECK(rec != NULL))
        goto out;
    {
        const double *ch[1];
        ch[0] = se_recording_channel(rec, 0);
        CHECK(se_pulse_support(se_recording_channel(rec, 1), rec->frames, &b, &e, &err) == SE_OK);
        CHECK(se_recording_write(mono, ch, 1, rec->frames, TS_FS, &err) == SE_OK);
    }
    se_recording_free(rec);
    for (k = 0; k < sizeof blocks / sizeof blocks[0]; k++) {
        se_stream_config sc;
        se_locate_config cfg;
        se_stream_info info;
        char what[64];
        se_stream_config_init(&sc);
        sc.block = blocks[k];
        se_locate_config_init(&cfg);
        cfg.speed_m_s = TS_V;
        cfg.max_events = ts_max_events;
        cfg.reference = ref;
        cfg.reference_length = m;
        cfg.reference_offset = b;
        cfg.reference_kind = SE_REF_CHANNEL;
        snprintf(what, sizeof what, "mono, block %zu", blocks[k]);
        if (!CHECK(se_locate_stream(mono, &cfg, &sc, &str, &info, &err) == SE_OK)) {
            printf("  %s: %s\n", what, err.message);
            continue;
        }
        CHECK(info.channels == 1 && info.passes == 1);
        CHECK(info.windows >= 1 && info.windows <= whole.n_events);
        CHECK(info.window_samples > 0);
        ts_compare(&whole, &str, 1, what);
        se_locate_result_free(&str);
    }
out:
    se_locate_result_free(&whole);
    free(ref);
    remove(path);
    remove(mono);
}

/* A file that is not native-endian float (read through libsndfile's conversion, not raw): AIFC
 * float32, big-endian (FLAC, the integer format, cannot hold the 1 MHz rate), with a pulse
 * channel, 1 and 2 threads. */
static void test_formats(void)
{
    const char *ext[] = {"aif"};
    size_t k;
    for (k = 0; k < sizeof ext / sizeof ext[0]; k++) {
        char path[4096], name[32];
        se_locate_result whole, str;
        double *ref = NULL;
        size_t m = 0;
        unsigned t;
        se_error err;
        snprintf(name, sizeof name, "stream_f.%s", ext[k]);
        se_test_binary_path(path, sizeof path, name);
        if (!CHECK(ts_write(path, 200003, ts_echoes, 6, 1e-3, 1e-3, 0.0, 13)))
            continue;
        if (!ts_whole(path, 1, &whole, &ref, &m)) {
            remove(path);
            continue;
        }
        CHECK(whole.n_events == 5);
        for (t = 1; t <= 2; t++) {
            se_stream_config sc;
            se_locate_config cfg;
            char what[96];
            se_stream_config_init(&sc);
            sc.pulse_channel = 1;
            sc.threads = t;
            se_locate_config_init(&cfg);
            cfg.speed_m_s = TS_V;
            se_error_clear(&err);
            snprintf(what, sizeof what, "%s, %u thread%s", ext[k], t, t > 1 ? "s" : "");
            if (!CHECK(se_locate_stream(path, &cfg, &sc, &str, NULL, &err) == SE_OK)) {
                printf("  %s: %s\n", what, err.message);
                continue;
            }
            ts_compare(&whole, &str, 1, what);
            se_locate_result_free(&str);
        }
        se_locate_result_free(&whole);
        free(ref);
        remove(path);
    }
}

/* The noise block's sigmas from its sampled lags alone (what the stream keeps) equal those of the
 * whole block, and both follow the definition in detect.h: the MAD sigma of the block on at most
 * SE_NOISE_BLOCK_SAMPLES strided lags, and the largest of it and its 8 parts' on at most
 * SE_NOISE_PART_SAMPLES each (se_noise_mad directly), for lengths below and above the strides. */
static void test_noise_taps(void)
{
    const size_t lens[] = {10, 127, 128, 4096, 5000, 262144 + 4095, 1048576 + 12345};
    size_t n = 1048576 + 12345, k, i, nt;
    double d1, d2;
    double *r = malloc(n * sizeof *r), *vals = malloc(SE_NOISE_BLOCK_TAPS * sizeof *vals);
    size_t *idx = malloc(SE_NOISE_BLOCK_TAPS * sizeof *idx);
    uint64_t st = 99;
    se_error err;
    if (!CHECK(r != NULL && vals != NULL && idx != NULL))
        goto out;
    for (i = 0; i < n; i++) /* a loud tenth in the middle: the parts must see it */
        r[i] = ts_gauss(&st) * (i > n / 2 && i < n / 2 + n / 10 ? 8.0 : 1.0);
    for (k = 0; k < sizeof lens / sizeof lens[0]; k++) {
        size_t len = lens[k], first[9], part = len / 8, q;
        double s1, h1, s2, h2, hdef;
        se_noise nz;
        char what[64];
        snprintf(what, sizeof what, "block of %zu lags", len);
        se_error_clear(&err);
        if (!CHECK(se_noise_block_sigma(r + n - len, len, &s1, &h1, &err) == SE_OK))
            continue;
        nt = se_noise_block_taps(len, idx, first);
        CHECK(nt <= SE_NOISE_BLOCK_TAPS && first[8] == nt && nt == se_noise_block_taps(len, NULL, NULL));
        for (i = 0; i < nt; i++)
            vals[i] = idx[i] < len ? r[n - len + idx[i]] : NAN;
        if (!CHECK(se_noise_block_sigma_taps(vals, len, &s2, &h2, &err) == SE_OK))
            continue;
        if (!CHECK(s1 == s2 && h1 == h2))
            printf("  %s: sigma %.17g / %.17g, hi %.17g / %.17g\n", what, s1, s2, h1, h2);
        CHECK(se_noise_mad(r + n - len, 0, len, SE_NOISE_BLOCK_SAMPLES, &nz, &err) == SE_OK);
        CHECK_CLOSE(s1, nz.sigma, 0.0, what);
        hdef = nz.sigma;
        for (q = 0; part >= 16 && q < 8; q++) {
            size_t a = q * part, e = q == 7 ? len : a + part;
            CHECK(se_noise_mad(r + n - len, a, e, SE_NOISE_PART_SAMPLES, &nz, &err) == SE_OK);
            hdef = nz.sigma > hdef ? nz.sigma : hdef;
        }
        CHECK_CLOSE(h1, hdef, 0.0, what);
    }
    /* a non-finite sampled value is named by its offset in the block */
    nt = se_noise_block_taps(5000, idx, NULL);
    for (i = 0; i < nt; i++)
        vals[i] = 1.0 + (double)i;
    vals[3] = INFINITY;
    se_error_clear(&err);
    CHECK(se_noise_block_sigma_taps(vals, 5000, &d1, &d2, &err) == SE_ERR_DATA);
    {
        char want[64];
        snprintf(want, sizeof want, "lag %zu ", idx[3]);
        CHECK(strstr(err.message, want) != NULL);
    }
out:
    free(r);
    free(vals);
    free(idx);
}

/* A lattice record (Goupillaud's equal-travel-time lattice, simulate.h) of a tether tapped with a
 * 20 ms Hann pulse at 48 kHz, 141.42 m/s, reflectors rf [size: nr], the far end fixed at 150 m,
 * source end rs, noise 0.003 (seed 5): response on channel 0, the pulse on channel 1, float WAV. */
static int ts_lattice(const char *path, const se_sim_reflector *rf, size_t nr, double rs)
{
    const double v = sqrt(100000.0 / 5.0), fs = 48000.0;
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_error err;
    double *x = NULL, *p = NULL;
    const double *ch[2];
    size_t n;
    int ok = 0;
    memset(&rec, 0, sizeof rec);
    rec.rate_hz = fs;
    rec.duration_s = 3.0;
    rec.seed = 1;
    se_error_clear(&err);
    if (!CHECK(se_pulse_parse("hann:20ms", &rec.pulse, &err) == SE_OK) ||
        !CHECK(se_sim_uniform_line(v, rf, nr, 150.0, -1.0, rs, 0.0, &ifs, &line, &err) == SE_OK))
        return 0;
    n = se_sim_frames(&rec);
    x = malloc(n * sizeof *x);
    p = malloc(n * sizeof *p);
    if (CHECK(x != NULL && p != NULL) && CHECK(se_simulate(&line, &rec, x, p, n, &err) == SE_OK) &&
        CHECK(se_fd_add_noise(x, n, 0.003, 5, &err) == SE_OK)) {
        ch[0] = x;
        ch[1] = p;
        ok = CHECK(se_recording_write(path, ch, 2, n, fs, &err) == SE_OK);
    }
    if (!ok)
        printf("  lattice record: %s\n", err.message);
    free(x);
    free(p);
    free(ifs);
    return ok;
}

/* se_locate on the lattice file read back (the pulse channel as reference and pilot, as the
 * stream takes it) against the stream with small blocks: the same events bit for bit, fitted
 * flags, multiples, source end and dead-zone events. Returns the number of fitted events of the
 * whole run. */
static size_t ts_refit_case(const char *path, double rs, const char *what, size_t *n_dead)
{
    se_error err;
    se_recording *rec;
    se_locate_config cfg;
    se_locate_result whole, str;
    size_t b, e, i, k, fitted = 0;
    const size_t blocks[] = {4096, 10000};
    *n_dead = 0;
    se_error_clear(&err);
    rec = se_recording_read(path, NULL, &err);
    if (!CHECK(rec != NULL))
        return 0;
    se_locate_config_init(&cfg);
    cfg.speed_m_s = sqrt(100000.0 / 5.0);
    cfg.source_reflection = rs;
    if (!CHECK(se_pulse_support(se_recording_channel(rec, 1), rec->frames, &b, &e, &err) == SE_OK)) {
        se_recording_free(rec);
        return 0;
    }
    cfg.reference = se_recording_channel(rec, 1) + b;
    cfg.reference_length = e - b;
    cfg.reference_offset = b;
    cfg.reference_kind = SE_REF_CHANNEL;
    if (!CHECK(se_locate(se_recording_channel(rec, 0), rec->frames, rec->rate, &cfg, &whole, &err) ==
               SE_OK)) {
        printf("  %s: se_locate: %s\n", what, err.message);
        se_recording_free(rec);
        return 0;
    }
    for (i = 0; i < whole.n_events; i++)
        fitted += whole.events[i].fitted != 0;
    for (k = 0; k < sizeof blocks / sizeof blocks[0]; k++) {
        se_stream_config sc;
        se_stream_info info;
        char w2[128];
        se_stream_config_init(&sc);
        sc.pulse_channel = 1;
        sc.block = blocks[k];
        se_locate_config_init(&cfg);
        cfg.speed_m_s = sqrt(100000.0 / 5.0);
        cfg.source_reflection = rs;
        snprintf(w2, sizeof w2, "%s, block %zu", what, blocks[k]);
        se_error_clear(&err);
        if (!CHECK(se_locate_stream(path, &cfg, &sc, &str, &info, &err) == SE_OK)) {
            printf("  %s: %s\n", w2, err.message);
            continue;
        }
        ts_compare(&whole, &str, 1, w2);
        for (i = 0; i < whole.n_events && i < str.n_events; i++) {
            const se_event *a = &whole.events[i], *c = &str.events[i];
            CHECK(c->fitted == a->fitted);
            CHECK(c->low_confidence == a->low_confidence);
            CHECK(c->multiple_of[0] == a->multiple_of[0] && c->multiple_of[1] == a->multiple_of[1]);
            CHECK_CLOSE(c->delay_uncertainty_s, a->delay_uncertainty_s, 0.0, w2);
            CHECK_CLOSE(c->reflection_at_discontinuity, a->reflection_at_discontinuity, 0.0, w2);
        }
        CHECK_CLOSE(str.source_reflection, whole.source_reflection, 0.0, w2);
        CHECK(str.source_reflection_estimated == whole.source_reflection_estimated);
        if (CHECK(str.n_dead_zone_events == whole.n_dead_zone_events))
            for (i = 0; i < whole.n_dead_zone_events; i++) {
                CHECK_CLOSE(str.dead_zone_events[i].delay_s, whole.dead_zone_events[i].delay_s, 0.0,
                            w2);
                CHECK_CLOSE(str.dead_zone_events[i].reflection, whole.dead_zone_events[i].reflection,
                            0.0, w2);
            }
        se_locate_result_free(&str);
    }
    printf("%s: %zu events (%zu fitted), %zu in the dead zone (%.3f m), r_s %.4f%s\n", what,
           whole.n_events, fitted, whole.n_dead_zone_events, whole.dead_zone_m, whole.source_reflection,
           whole.source_reflection_estimated ? " (estimated)" : "");
    if (isnan(rs)) /* the estimate found, near the line's +0.5 (common practice, no source) */
        CHECK(whole.source_reflection_estimated && fabs(whole.source_reflection - 0.5) < 0.1);
    *n_dead = whole.n_dead_zone_events;
    se_locate_result_free(&whole);
    se_recording_free(rec);
    return fitted;
}

/* A splice (+0.2) 0.283 m before a clamp (-0.8): their echoes overlap within a pulse length, so
 * the whole-record run refits them by least squares on the response (and, a fifth of the main
 * lobe apart, by the layered model); the stream reads the windows back from the file and gives the
 * same answer bit for bit. With the source end (+0.5) estimated, on a pair 0.8 m apart, the
 * stream estimates it too, and the reverberation train's weak echoes, which CLEAN refines in a
 * window of r there, come out bit for bit too (se_detect_config.origin: CLEAN's arithmetic on
 * record lags; before it they differed by up to 3e-9 s). */
static void test_overlap_refit(void)
{
    char path[4096];
    const se_sim_reflector rf[2] = {{40.0, 0.2}, {40.283, -0.8}};
    const se_sim_reflector rf8[2] = {{40.0, 0.2}, {40.8, -0.8}};
    size_t nd;
    se_test_binary_path(path, sizeof path, "stream_refit.wav");
    /* the refit must have run (fitted events) for the comparison to mean something */
    if (ts_lattice(path, rf, 2, 0.0)) {
        CHECK(ts_refit_case(path, 0.0, "splice and clamp", &nd) >= 2);
        CHECK(nd == 0);
    }
    if (ts_lattice(path, rf8, 2, 0.5))
        (void)ts_refit_case(path, NAN, "splice and clamp, source end estimated", &nd);
    remove(path);
}

/* A non-finite sample stops the stream with the file and the sample named: the record's first
 * one, whichever chunk or thread meets it, also in the overlap a chunk reads past its own lags,
 * and in the pass without a time base. Written with libsndfile directly (se_recording_write
 * refuses such samples). */
static int ts_write_bad(const char *path, size_t n, const size_t *at, const double *val, size_t nbad)
{
    float *f = calloc(2 * n, sizeof *f);
    uint64_t st = 23;
    SF_INFO si;
    SNDFILE *snd;
    size_t i;
    int ok;
    if (f == NULL)
        return 0;
    for (i = 0; i < n; i++) {
        double p = ts_burst((double)i - 1000.0);
        f[2 * i] = (float)(p + 0.5 * ts_burst((double)i - 40000.0) + 1e-3 * ts_gauss(&st));
        f[2 * i + 1] = (float)(p + 1e-4 * ts_gauss(&st));
    }
    for (i = 0; i < nbad; i++)
        f[2 * at[i]] = (float)val[i];
    memset(&si, 0, sizeof si);
    si.samplerate = (int)TS_FS;
    si.channels = 2;
    si.format = SF_FORMAT_WAV | SF_FORMAT_FLOAT;
    snd = sf_open(path, SFM_WRITE, &si);
    ok = snd != NULL && sf_writef_float(snd, f, (sf_count_t)n) == (sf_count_t)n;
    if (snd != NULL)
        sf_close(snd);
    free(f);
    return ok;
}

static void test_non_finite(void)
{
    /* 70001: chunk 1 of 2^16 lags, and inside chunk 0's overlap (its last m - 1 samples) */
    static const struct {
        size_t at[2];
        double val[2];
        size_t nbad;
        const char *want;
    } cases[] = {
        {{70001, 0}, {NAN, 0.0}, 1, "sample 70001 (channel 1) is NaN"},
        {{65540, 0}, {INFINITY, 0.0}, 1, "sample 65540 (channel 1) is infinite"},
        {{130000, 150}, {NAN, -INFINITY}, 2, "sample 150 (channel 1) is infinite"},
    };
    char path[4096];
    size_t c, t, b;
    se_test_binary_path(path, sizeof path, "stream_nan.wav");
    for (c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        if (!CHECK(ts_write_bad(path, 140000, cases[c].at, cases[c].val, cases[c].nbad)))
            return;
        for (t = 1; t <= 2; t++)
            for (b = 0; b < 3; b++) { /* default chunks, small ones, and no time base */
                se_locate_result str;
                se_stream_config sc;
                se_locate_config cfg;
                se_error err;
                se_stream_config_init(&sc);
                se_locate_config_init(&cfg);
                cfg.speed_m_s = TS_V;
                sc.threads = (unsigned)t;
                sc.pulse_channel = 1;
                if (b == 1)
                    sc.block = 5000;
                se_error_clear(&err);
                if (b == 2) { /* the pulse as a separate reference, no time base: pass 0 */
                    double ref[43];
                    size_t i;
                    for (i = 0; i < 43; i++)
                        ref[i] = ts_burst((double)i - 1.0);
                    sc.pulse_channel = SE_STREAM_NO_CHANNEL;
                    cfg.reference = ref;
                    cfg.reference_length = 43;
                    cfg.reference_kind = SE_REF_FILE;
                    cfg.reference_offset = SIZE_MAX;
                    CHECK(se_locate_stream(path, &cfg, &sc, &str, NULL, &err) == SE_ERR_DATA);
                } else {
                    CHECK(se_locate_stream(path, &cfg, &sc, &str, NULL, &err) == SE_ERR_DATA);
                }
                if (!CHECK(strstr(err.message, cases[c].want) != NULL &&
                           strstr(err.message, "stream_nan.wav") != NULL))
                    printf("  case %zu threads %zu mode %zu: %s\n", c, t, b, err.message);
            }
    }
    remove(path);
}

int main(void)
{
    test_blocks_and_threads();
    test_no_time_base();
    test_noise_falls();
    test_clipping();
    test_refusals();
    test_non_finite();
    test_mono_windows();
    test_formats();
    test_noise_taps();
    test_overlap_refit();
    return se_test_done("test_stream");
}
