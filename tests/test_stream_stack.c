/* strandecho tests: repeated shots stacked on the stream (se_locate_stream with a pulse channel)
 * against se_locate on the same file read whole (stack.h, REFERENCE.md 2 "Stacking repeated
 * shots"). The oracle is the whole-record pipeline itself: the same shots found and used, the same
 * gain and interval, the same matched-filter output of the stack (keep_trace, within 1e-12 of its
 * largest value), the same events (delays within 1e-9 s, multiples and previous-shot labels
 * equal). Records from the lattice simulator (simulate.h; Hann 20 ms at 48 kHz, v = sqrt(100 kN
 * / 5 kg/m), shots superposed as `strandecho simulate --shots` does, noise added once, seeds
 * fixed), written as two-channel float WAV (response, pulse), streamed with small blocks (chunks of
 * one correlation step: every shot straddles chunk boundaries, the last chunk is partial) and with
 * a small memory budget for the aligned segments (several parts of the interval). Cases: taps
 * closer than the line's ring-down (previous-shot multiples), a clipped shot and a cut last shot
 * (both rejected alike), the trimmed mean, a single shot (the one-pass engine, unchanged), and a
 * long record for peak memory when SE_STREAM_STACK_BIG is set (not part of the suite).
 * Tolerances: 1e-9 s and 1e-12 relative from issue 8's brief (common practice, no source). */
#define _DEFAULT_SOURCE /* fork, wait4, clock_gettime */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <stdint.h>
#include <sys/resource.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>
#include <time.h>

#include "strandecho/fdline.h"
#include "strandecho/locate.h"
#include "strandecho/pulse.h"
#include "strandecho/recording.h"
#include "strandecho/simulate.h"
#include "strandecho/stack.h"
#include "strandecho/stream.h"
#include "testutil.h"

static const double fs = 48000.0;

typedef struct tk_case {
    double end_r, rs, duration_s, interval_s, noise;
    size_t shots;
    double clip_shot;  /* >= 0: the shot whose direct arrival is clipped, -1 none */
    double cut;        /* fraction of the last interval the record keeps (1 = whole) */
    double loud;       /* > 0: noise of the second half raised by this much more (noise tracking) */
} tk_case;

/* Write the record of case c to path; *pw: the first interval (where the pulse is looked for). */
static int tk_write(const char *path, const tk_case *c, size_t *pw)
{
    const double v = sqrt(100000.0 / 5.0);
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_error err;
    double *resp = NULL, *inj = NULL;
    const double *ch[2];
    size_t n, i, k, step = (size_t)llround(c->interval_s * fs), b, e;
    int ok = 0;

    memset(&rec, 0, sizeof rec);
    if (!CHECK(se_pulse_parse("hann:20ms", &rec.pulse, &err) == SE_OK) ||
        !CHECK(se_sim_uniform_line(v, NULL, 0, 100.0, c->end_r, c->rs, 0.0, &ifs, &line, &err) ==
               SE_OK))
        return 0;
    rec.rate_hz = fs;
    rec.duration_s = c->duration_s;
    rec.seed = 3;
    n = se_sim_frames(&rec);
    resp = malloc(n * sizeof *resp);
    inj = malloc(n * sizeof *inj);
    if (!CHECK(resp != NULL && inj != NULL) ||
        !CHECK(se_simulate(&line, &rec, resp, inj, n, &err) == SE_OK))
        goto out;
    for (i = n; i-- > 0;)
        for (k = 1; k < c->shots; k++)
            if (i >= k * step) {
                resp[i] += resp[i - k * step];
                inj[i] += inj[i - k * step];
            }
    if (c->loud > 0.0 && !CHECK(se_fd_add_noise(resp + n / 2, n - n / 2, c->loud * c->noise, 11,
                                                &err) == SE_OK))
        goto out;
    if (!CHECK(se_fd_add_noise(resp, n, c->noise, rec.seed, &err) == SE_OK) ||
        !CHECK(se_pulse_support(inj, step, &b, &e, &err) == SE_OK))
        goto out;
    if (c->clip_shot >= 0.0) {
        /* seven samples at 1.5 times the largest |x| on the clipped shot's direct arrival: a run
         * at the record's maximum */
        double top = 0.0;
        size_t at = (size_t)c->clip_shot * step + (b + e) / 2;
        for (i = 0; i < n; i++)
            top = fmax(top, fabs(resp[i]));
        for (i = at - 3; i <= at + 3; i++)
            resp[i] = 1.5 * top;
    }
    if (c->cut < 1.0)
        n = (c->shots - 1) * step + (size_t)(c->cut * (double)step);
    ch[0] = resp;
    ch[1] = inj;
    *pw = step;
    ok = CHECK(se_recording_write(path, ch, 2, n, fs, &err) == SE_OK);
out:
    free(resp);
    free(inj);
    free(ifs);
    return ok;
}

static void tk_config(se_locate_config *cfg, int stacking)
{
    se_locate_config_init(cfg);
    cfg->speed_m_s = sqrt(100000.0 / 5.0);
    cfg->source_reflection = 0.8;
    cfg->stacking = stacking;
    cfg->keep_trace = 1;
}

/* se_locate on the file read whole, the pulse from the first pw samples of channel 2; sr: the
 * shots as se_locate's own stacking sees them (se_stack_shots with its configuration). */
static int tk_whole(const char *path, size_t pw, double rs, int stacking, se_locate_result *res,
                    se_stack_result *sr)
{
    se_error err;
    se_recording *rec = se_recording_read(path, NULL, &err);
    se_locate_config cfg;
    size_t b, e;
    int ok;
    if (!CHECK(rec != NULL))
        return 0;
    tk_config(&cfg, stacking);
    cfg.source_reflection = rs;
    if (!CHECK(se_pulse_support(se_recording_channel(rec, 1), pw, &b, &e, &err) == SE_OK)) {
        se_recording_free(rec);
        return 0;
    }
    cfg.reference = se_recording_channel(rec, 1) + b;
    cfg.reference_length = e - b;
    cfg.reference_offset = b;
    cfg.reference_kind = SE_REF_CHANNEL;
    cfg.pilot = se_recording_channel(rec, 1);
    if (sr != NULL) {
        se_stack_config sc;
        se_stack_config_init(&sc);
        sc.pilot = cfg.pilot;
        sc.pulse = cfg.reference;
        sc.pulse_length = cfg.reference_length;
        sc.mode = stacking == SE_STACKING_ROBUST ? SE_STACK_TRIMMED : SE_STACK_MEAN;
        CHECK(se_stack_shots(se_recording_channel(rec, 0), rec->frames, &sc, sr, &err) == SE_OK);
    }
    ok = se_locate(se_recording_channel(rec, 0), rec->frames, rec->rate, &cfg, res, &err) == SE_OK;
    if (!ok)
        printf("se_locate: %s\n", err.message);
    se_recording_free(rec);
    return CHECK(ok);
}

static int tk_stream(const char *path, size_t pw, double rs, int stacking, size_t block,
                     size_t budget, se_locate_result *res, se_stream_info *info)
{
    se_error err;
    se_locate_config cfg;
    se_stream_config sc;
    int ok;
    tk_config(&cfg, stacking);
    cfg.source_reflection = rs;
    se_stream_config_init(&sc);
    sc.pulse_channel = 1;
    sc.pulse_window = pw;
    sc.block = block;
    sc.stack_memory = budget;
    ok = se_locate_stream(path, &cfg, &sc, res, info, &err) == SE_OK;
    if (!ok)
        printf("se_locate_stream: %s\n", err.message);
    return CHECK(ok);
}

static void tk_compare(const se_locate_result *a, const se_locate_result *b, const char *what)
{
    size_t i;
    double top = 0.0, dmax = 0.0;
    CHECK(b->shots_found == a->shots_found);
    CHECK(b->shots_used == a->shots_used);
    if (a->shots_used >= 2) {
        CHECK_CLOSE(b->stack_gain_db, a->stack_gain_db, 1e-12 * fabs(a->stack_gain_db), what);
        CHECK_CLOSE(b->stack_expected_gain_db, a->stack_expected_gain_db, 0.0, what);
    }
    CHECK_CLOSE(b->shot_interval_s, a->shot_interval_s, 0.0, what);
    CHECK(b->shots_overlap == a->shots_overlap);
    CHECK(b->clipped_samples == a->clipped_samples);
    CHECK(b->first_clipped == a->first_clipped);
    CHECK(b->n_clip_runs == a->n_clip_runs);
    if (a->trace != NULL && b->trace != NULL && CHECK(a->trace_length == b->trace_length)) {
        for (i = 0; i < a->trace_length; i++) {
            top = fmax(top, fabs(a->trace[i]));
            dmax = fmax(dmax, fabs(a->trace[i] - b->trace[i]));
        }
        if (!CHECK(dmax <= 1e-12 * top))
            printf("  %s: matched filter of the stack differs by %.3g of its largest %.3g\n", what,
                   dmax, top);
    }
    if (!CHECK(a->n_events == b->n_events)) {
        printf("  %s: %zu events whole, %zu streamed\n", what, a->n_events, b->n_events);
        return;
    }
    for (i = 0; i < a->n_events; i++) {
        CHECK_CLOSE(b->events[i].delay_s, a->events[i].delay_s, 1e-9, what);
        CHECK_CLOSE(b->events[i].reflection, a->events[i].reflection, 1e-9, what);
        CHECK(b->events[i].multiple == a->events[i].multiple);
        CHECK(b->events[i].previous_shot == a->events[i].previous_shot);
        CHECK(b->events[i].multiple_of[0] == a->events[i].multiple_of[0]);
        CHECK(b->events[i].multiple_of[1] == a->events[i].multiple_of[1]);
        CHECK(b->events[i].clipped == a->events[i].clipped);
    }
    CHECK_CLOSE(b->t0_s, a->t0_s, 1e-12, what);
    CHECK_CLOSE(b->noise_level, a->noise_level, 1e-12 * a->noise_level, what);
}

/* Case c whole and streamed (two memory budgets, chunks of one step); returns the whole result. */
static void tk_run(const char *name, const tk_case *c, int stacking, size_t want_found,
                   size_t want_used_min)
{
    char path[256];
    size_t pw = 0, budgets[2] = {0, (size_t)1 << 20}, q, nprev = 0, i, count[5] = {0, 0, 0, 0, 0};
    se_locate_result whole, str;
    se_stack_result sr;
    se_stream_info info;
    snprintf(path, sizeof path, "test_stream_stack_%s.wav", name);
    memset(&whole, 0, sizeof whole);
    memset(&sr, 0, sizeof sr);
    if (!tk_write(path, c, &pw) || !tk_whole(path, pw, c->rs, stacking, &whole, &sr)) {
        se_locate_result_free(&whole);
        se_stack_result_free(&sr);
        return;
    }
    printf("%s: shots", name);
    for (i = 0; i < sr.n_found; i++) {
        printf(" %s", se_shot_status_name(sr.status[i]));
        count[sr.status[i]]++;
    }
    printf("\n");
    CHECK(whole.shots_used == sr.n_used);
    if (c->clip_shot >= 0.0 && CHECK(sr.n_found == c->shots)) {
        CHECK(sr.status[(size_t)c->clip_shot] == SE_SHOT_CLIPPED);
        if (c->cut < 1.0)
            CHECK(sr.status[c->shots - 1] == SE_SHOT_LATE);
    }
    printf("%s: %zu shots found, %zu used, gain %.3f dB (expected %.3f), interval %.4f s, %zu "
           "events\n",
           name, whole.shots_found, whole.shots_used, whole.stack_gain_db,
           whole.stack_expected_gain_db, whole.shot_interval_s, whole.n_events);
    CHECK(whole.shots_found == want_found);
    CHECK(whole.shots_used >= want_used_min);
    for (i = 0; i < whole.n_events; i++)
        nprev += whole.events[i].multiple && whole.events[i].previous_shot > 0;
    for (q = 0; q < 2; q++) {
        /* block 1: one correlation step per chunk (the least the engine takes) */
        memset(&str, 0, sizeof str);
        if (tk_stream(path, pw, c->rs, stacking, 1, budgets[q], &str, &info)) {
            printf("  streamed (memory %s): %u passes, %u other reads, %zu events\n",
                   q ? "1 MiB" : "default", info.passes, info.stack_reads, str.n_events);
            CHECK(info.passes == 1); /* the pulse channel's: the engine did not run */
            tk_compare(&whole, &str, name);
            for (i = 0; i < 5; i++) /* each shot rejected for the same reason */
                CHECK(info.shots[i] == count[i]);
        }
        se_locate_result_free(&str);
    }
    if (c->rs > 0.5 && c->interval_s < 5.0)
        CHECK(nprev > 0); /* the taps overlap: some echoes are the previous shot's */
    se_locate_result_free(&whole);
    se_stack_result_free(&sr);
    remove(path);
}

static void tk_single(void)
{
    const tk_case c = {-1.0, 0.3, 4.0, 4.0, 0.01, 1, -1.0, 1.0, 0.0};
    const char *path = "test_stream_stack_single.wav";
    size_t pw = 0;
    se_locate_result whole, on, off;
    se_stream_info ion, ioff;
    memset(&whole, 0, sizeof whole);
    memset(&on, 0, sizeof on);
    memset(&off, 0, sizeof off);
    if (tk_write(path, &c, &pw) && tk_whole(path, pw, c.rs, SE_STACKING_AUTO, &whole, NULL) &&
        tk_stream(path, pw, c.rs, SE_STACKING_AUTO, 0, 0, &on, &ion) &&
        tk_stream(path, pw, c.rs, SE_STACKING_OFF, 0, 0, &off, &ioff)) {
        size_t i;
        CHECK(whole.shots_found == 1 && on.shots_found == 1 && on.shots_used == 1);
        /* the one-pass engine: the cheap energy screen adds one read, nothing else changes */
        CHECK(ion.passes == ioff.passes);
        CHECK(ion.stack_reads == 1 && ioff.stack_reads == 0);
        if (CHECK(on.n_events == off.n_events) && CHECK(on.n_events == whole.n_events))
            for (i = 0; i < on.n_events; i++) {
                CHECK(on.events[i].lag_samples == off.events[i].lag_samples);
                CHECK(on.events[i].lag_samples == whole.events[i].lag_samples);
            }
    }
    se_locate_result_free(&whole);
    se_locate_result_free(&on);
    se_locate_result_free(&off);
    remove(path);
}

/* 2^24 samples, 40 taps: peak RSS of the streamed run (SE_STREAM_STACK_BIG set to the memory
 * budget for the aligned segments in MiB, 0 = the default). Short synthetic
 * shots (a Hann pulse and two echoes) so that writing the file stays quick. */
static void tk_big(void)
{
    const size_t n = (size_t)1 << 24, shots = 40, step = n / shots, m = 257;
    const char *path = "test_stream_stack_big.wav";
    double *resp = calloc(n, sizeof *resp), *inj = calloc(n, sizeof *inj);
    const double *ch[2];
    size_t i, k, j;
    se_error err;
    se_locate_config cfg;
    se_stream_config sc;
    se_locate_result res;
    se_stream_info info;
    struct rusage ru;
    struct timespec t0, t1;
    unsigned long long s = 12345;
    if (!CHECK(resp != NULL && inj != NULL)) {
        free(resp);
        free(inj);
        return;
    }
    for (k = 0; k < shots; k++) {
        double on = 1000.0 + (double)(k * step) + 0.37 * (double)k; /* fractional drift */
        for (j = 0; j < m + 2; j++) {
            size_t at = (size_t)on + j;
            double u = (double)at - on, p = u >= 0.0 && u <= (double)(m - 1)
                                                ? 0.5 - 0.5 * cos(2.0 * 3.14159265358979323846 * u / (double)(m - 1))
                                                : 0.0;
            inj[at] += p;
            resp[at] += p;
            resp[at + 30000] += 0.3 * p;
            resp[at + 90000] -= 0.2 * p;
        }
    }
    for (i = 0; i < n; i++) { /* uniform noise from a fixed LCG (common practice, no source) */
        s = s * 6364136223846793005ULL + 1442695040888963407ULL;
        resp[i] += 0.05 * ((double)(s >> 11) / 9007199254740992.0 - 0.5);
    }
    ch[0] = resp;
    ch[1] = inj;
    if (!CHECK(se_recording_write(path, ch, 2, n, fs, &err) == SE_OK)) {
        free(resp);
        free(inj);
        return;
    }
    free(resp);
    free(inj);
    /* the stream in a child of its own (fork after the record's arrays went back to the system),
     * its peak RSS from wait4 */
    fflush(stdout);
    {
        pid_t pid = fork();
        int status = 0;
        if (pid == 0) {
            int ok;
            se_locate_config_init(&cfg);
            cfg.speed_m_s = 3000.0;
            se_stream_config_init(&sc);
            sc.pulse_channel = 1;
            sc.pulse_window = step;
            sc.stack_memory = (size_t)strtoul(getenv("SE_STREAM_STACK_BIG"), NULL, 10) << 20;
            clock_gettime(CLOCK_MONOTONIC, &t0);
            ok = se_locate_stream(path, &cfg, &sc, &res, &info, &err) == SE_OK;
            clock_gettime(CLOCK_MONOTONIC, &t1);
            if (ok)
                printf("big: 2^24 samples x 2 channels, %zu shots found, %zu used, gain %.2f dB "
                       "(expected %.2f), %zu events, %u + %u reads of the file, %.2f s\n",
                       res.shots_found, res.shots_used, res.stack_gain_db,
                       res.stack_expected_gain_db, res.n_events, info.passes, info.stack_reads,
                       (double)(t1.tv_sec - t0.tv_sec) + 1e-9 * (double)(t1.tv_nsec - t0.tv_nsec));
            else
                printf("  %s\n", err.message);
            ok = ok && res.shots_found == shots && res.shots_used == shots;
            se_locate_result_free(&res);
            fflush(stdout);
            _exit(ok ? 0 : 1);
        }
        if (CHECK(pid > 0) && CHECK(wait4(pid, &status, 0, &ru) == pid)) {
            CHECK(WIFEXITED(status) && WEXITSTATUS(status) == 0);
            printf("big: peak RSS of the streaming child %.1f MiB\n", (double)ru.ru_maxrss / 1024.0);
        }
    }
    remove(path);
}

/* Taps without a pulse channel: se_locate stacks on the response's own direct arrivals (three
 * in a rhythm), and so does the stream, after its one engine pass said three can be there; with
 * the pulse's start known (time base) and without it. A single tap: the stream makes no pass
 * beyond the engine's. The reference is the pulse channel's support, given as a file pulse. */
static void tk_response(const char *name, const tk_case *c, int time_base, size_t want_used)
{
    char path[256];
    size_t pw = 0, b, e, i;
    se_error err;
    se_recording *rec;
    se_locate_config cfg;
    se_stream_config sc;
    se_locate_result whole, str;
    se_stream_info info;
    double *ref = NULL;
    snprintf(path, sizeof path, "test_stream_stack_%s.wav", name);
    memset(&whole, 0, sizeof whole);
    memset(&str, 0, sizeof str);
    if (!tk_write(path, c, &pw) || !CHECK((rec = se_recording_read(path, NULL, &err)) != NULL))
        return;
    if (CHECK(se_pulse_support(se_recording_channel(rec, 1), pw, &b, &e, &err) == SE_OK) &&
        CHECK((ref = malloc((e - b) * sizeof *ref)) != NULL)) {
        memcpy(ref, se_recording_channel(rec, 1) + b, (e - b) * sizeof *ref);
        tk_config(&cfg, SE_STACKING_AUTO);
        cfg.source_reflection = c->rs;
        cfg.reference = ref;
        cfg.reference_length = e - b;
        cfg.reference_offset = time_base ? b : SIZE_MAX;
        cfg.reference_kind = SE_REF_FILE;
        if (CHECK(se_locate(se_recording_channel(rec, 0), rec->frames, rec->rate, &cfg, &whole,
                            &err) == SE_OK)) {
            se_stream_config_init(&sc);
            sc.block = 1;
            if (CHECK(se_locate_stream(path, &cfg, &sc, &str, &info, &err) == SE_OK)) {
                printf("%s: %zu shots found, %zu used whole, %zu and %zu streamed; %u passes, %u "
                       "other reads; %zu events; noise varies %d\n",
                       name, whole.shots_found, whole.shots_used, str.shots_found, str.shots_used,
                       info.passes, info.stack_reads, str.n_events, str.noise_varies);
                CHECK(whole.shots_used == want_used);
                tk_compare(&whole, &str, name);
                for (i = 0; i < whole.n_events && i < str.n_events; i++)
                    CHECK(str.events[i].lag_samples == whole.events[i].lag_samples);
                if (want_used == 1) {
                    /* the screen held: the passes of a run with stacking off, nothing more */
                    se_locate_result off;
                    se_stream_info ioff;
                    se_locate_config oc = cfg;
                    memset(&off, 0, sizeof off);
                    oc.stacking = SE_STACKING_OFF;
                    if (CHECK(se_locate_stream(path, &oc, &sc, &off, &ioff, &err) == SE_OK))
                        CHECK(info.stack_reads == 0 && info.passes == ioff.passes &&
                              info.passes == (time_base ? 1u : 2u) + (str.noise_varies ? 1u : 0u));
                    se_locate_result_free(&off);
                }
            } else {
                printf("  %s: %s\n", name, err.message);
            }
        } else {
            printf("  %s: se_locate: %s\n", name, err.message);
        }
    }
    free(ref);
    se_locate_result_free(&whole);
    se_locate_result_free(&str);
    se_recording_free(rec);
    remove(path);
}

int main(void)
{
    /* taps 3 s apart on a line that rings for longer (end fixed at 100 m, source end +0.8) */
    const tk_case taps = {-1.0, 0.8, 12.0, 3.0, 0.01, 4, -1.0, 1.0, 0.0};
    /* eight taps 1.5 s apart, the third clipped, the last cut at 40 % of its interval */
    const tk_case outl = {-1.0, 0.3, 12.0, 1.5, 0.01, 8, 2.0, 0.4, 0.0};
    /* two taps, the second clipped: one usable, located on the first tap's segment alone */
    const tk_case pair = {-1.0, 0.3, 6.0, 3.0, 0.01, 2, 1.0, 1.0, 0.0};
    if (getenv("SE_STREAM_STACK_BIG") != NULL) {
        tk_big();
        return se_test_done("stream_stack big");
    }
    tk_run("taps", &taps, SE_STACKING_AUTO, 4, 2);
    tk_run("outliers", &outl, SE_STACKING_AUTO, 8, 2);
    tk_run("trimmed", &outl, SE_STACKING_ROBUST, 8, 2);
    tk_run("pair", &pair, SE_STACKING_AUTO, 2, 1);
    tk_single();
    {
        /* four taps 4 s apart, end -0.5 (the direct arrival stays the largest |r|), and one */
        const tk_case four = {-0.5, 0.3, 16.0, 4.0, 0.01, 4, -1.0, 1.0, 0.0};
        const tk_case one = {-0.5, 0.3, 4.0, 4.0, 0.01, 1, -1.0, 1.0, 0.0};
        tk_response("response", &four, 1, 4);
        tk_response("response_no_time_base", &four, 0, 4);
        tk_response("response_single", &one, 1, 1);
        tk_response("response_single_no_time_base", &one, 0, 1);
        {
            /* the noise of the second half eight times louder: the profile pass, whose clusters
             * keep |r| relative to each lag's level, still screens a single tap */
            const tk_case four_loud = {-0.5, 0.3, 16.0, 4.0, 0.01, 4, -1.0, 1.0, 8.0};
            const tk_case one_loud = {-0.5, 0.3, 16.0, 16.0, 0.01, 1, -1.0, 1.0, 8.0};
            tk_response("response_loud", &four_loud, 1, 4);
            tk_response("response_single_loud", &one_loud, 1, 1);
        }
    }
    return se_test_done("stream_stack");
}
