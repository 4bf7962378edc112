/* strandecho tests: se_locate at the API level. Argument and data errors (too short, all zero,
 * reference longer than the record, no pulse at all), the dead zone (reported in metres, nothing
 * inside it), repeatability, max_events, and the labelling of multiples (between two reflectors,
 * off the source end, and everything after a full reflection).
 *
 * Oracles: the simulated line itself; d = v t / 2 (REFERENCE.md 1, "Delay to distance"); the
 * multiple times and signs of REFERENCE.md 2 (M.M. Backus, Geophysics 24(2), 1959): between
 * reflectors i < j at 2 t_j - t_i with about -r_i r_j^2, off the source end at t_i + t_j with
 * r_s r_i r_j, and nothing real after a full reflection. */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/locate.h"
#include "strandecho/pulse.h"
#include "strandecho/simulate.h"
#include "strandecho/wave.h"
#include "testutil.h"

/* T = 100 N on mu = 5e-3 kg/m: sqrt(T/mu) = 141.42 m/s (REFERENCE.md 1 [calc]) */
#define LT_V 141.4
#define LT_FS 48000.0

/* A simulated record: response and injected pulse channels, [size: n]. */
typedef struct lt_rec {
    double *resp, *inj;
    size_t n;
    size_t ref_begin, ref_end; /* support of the pulse channel */
} lt_rec;

static int lt_make(lt_rec *r, const se_sim_reflector *refl, size_t nrefl, double end_m,
                   double end_r, double source_r, double duration_s, double snr_db,
                   unsigned long seed);
static void lt_free(lt_rec *r);
static void lt_config(se_locate_config *cfg, const lt_rec *r, double source_r);
static const se_event *lt_at(const se_locate_result *res, double d, int *index);
static void test_arguments(void);
static void test_data_errors(void);
static void test_no_pulse(void);
static void test_dead_zone(void);
static void test_repeatable(void);
static void test_max_events(void);
static void test_multiple_between(void);
static void test_multiple_source_end(void);
static void test_after_full_reflection(void);

/* hann:4ms at 48 kHz on the tether; noise for snr_db energy SNR of a unit echo
 * (eta = A^2 E_s / sigma^2, REFERENCE.md 2); snr_db = INFINITY for none. Returns 1 on success. */
static int lt_make(lt_rec *r, const se_sim_reflector *refl, size_t nrefl, double end_m,
                   double end_r, double source_r, double duration_s, double snr_db,
                   unsigned long seed)
{
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_error err;
    double *p = NULL, energy = 0.0;
    size_t np = 0, i;
    int ok = 0;

    memset(r, 0, sizeof *r);
    memset(&rec, 0, sizeof rec);
    if (!CHECK(se_pulse_parse("hann:4ms", &rec.pulse, &err) == SE_OK))
        return 0;
    if (!CHECK(se_sim_uniform_line(LT_V, refl, nrefl, end_m, end_r, source_r, 0.0, &ifs, &line,
                                   &err) == SE_OK)) {
        fprintf(stderr, "  %s\n", err.message);
        return 0;
    }
    rec.rate_hz = LT_FS;
    rec.duration_s = duration_s;
    rec.pulse_start_s = 2.0 * rec.pulse.duration_s;
    rec.seed = seed;
    if (isfinite(snr_db)) {
        CHECK(se_pulse_render(&rec.pulse, LT_FS, &p, &np, &err) == SE_OK);
        for (i = 0; i < np; i++)
            energy += p[i] * p[i];
        free(p);
        rec.noise_rms = sqrt(energy) / pow(10.0, snr_db / 20.0);
    }
    r->n = se_sim_frames(&rec);
    r->resp = malloc(r->n * sizeof *r->resp);
    r->inj = malloc(r->n * sizeof *r->inj);
    if (CHECK(r->resp != NULL && r->inj != NULL) &&
        CHECK(se_simulate(&line, &rec, r->resp, r->inj, r->n, &err) == SE_OK) &&
        CHECK(se_pulse_support(r->inj, r->n, &r->ref_begin, &r->ref_end, &err) == SE_OK))
        ok = 1;
    free(ifs);
    return ok;
}

static void lt_free(lt_rec *r)
{
    free(r->resp);
    free(r->inj);
    memset(r, 0, sizeof *r);
}

/* Velocity, the tether speed, the pulse channel as the reference. */
static void lt_config(se_locate_config *cfg, const lt_rec *r, double source_r)
{
    se_locate_config_init(cfg);
    cfg->speed_m_s = LT_V;
    cfg->source_reflection = source_r;
    cfg->reference = r->inj + r->ref_begin;
    cfg->reference_length = r->ref_end - r->ref_begin;
    cfg->reference_offset = r->ref_begin;
    cfg->reference_kind = SE_REF_CHANNEL;
}

/* Strongest event within 3 main-lobe half widths of d; its index in *index. */
static const se_event *lt_at(const se_locate_result *res, double d, int *index)
{
    const se_event *best = NULL;
    size_t i;
    for (i = 0; i < res->n_events; i++)
        if (fabs(res->events[i].distance_m - d) <= 3.0 * res->resolution_m &&
            (best == NULL || fabs(res->events[i].reflection) > fabs(best->reflection))) {
            best = &res->events[i];
            if (index != NULL)
                *index = (int)i;
        }
    return best;
}

/* NULL pointers, bad speeds and settings: SE_ERR_ARG / SE_ERR_RANGE with a message, res zeroed. */
static void test_arguments(void)
{
    se_sim_reflector rf = {20.0, -0.3};
    lt_rec r;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    if (!lt_make(&r, &rf, 1, 100.0, 0.0, 0.0, 0.5, 40.0, 1))
        return;
    lt_config(&cfg, &r, 0.0);
    CHECK(se_locate(NULL, r.n, LT_FS, &cfg, &res, &err) == SE_ERR_ARG);
    CHECK(err.message[0] != '\0');
    CHECK(res.events == NULL && res.n_events == 0);
    CHECK(se_locate(r.resp, r.n, LT_FS, NULL, &res, &err) == SE_ERR_ARG);
    CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, NULL, &err) == SE_ERR_ARG);
    CHECK(se_locate(r.resp, r.n, 0.0, &cfg, &res, &err) == SE_ERR_ARG);
    CHECK(se_locate(r.resp, r.n, NAN, &cfg, &res, &err) == SE_ERR_ARG);
    cfg.speed_m_s = 0.0;
    CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) != SE_OK);
    /* faster than light (exact SI c, BIPM SI brochure 9th ed.) */
    cfg.speed_m_s = 1.0001 * SE_SPEED_OF_LIGHT;
    CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) != SE_OK);
    cfg.speed_m_s = LT_V;
    cfg.confidence = 1.0;
    CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_ERR_RANGE);
    cfg.confidence = 0.95;
    cfg.false_alarms = 0.0;
    CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_ERR_RANGE);
    cfg.false_alarms = 0.01;
    cfg.source_reflection = -1.0; /* a sensor at a node sees nothing: refused */
    CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_ERR_RANGE);
    cfg.source_reflection = 0.0;
    cfg.reference_length = 2;
    CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_ERR_ARG);
    CHECK(res.events == NULL && res.n_events == 0);
    lt_free(&r);
}

/* Too short, all zero, reference longer than the response, record ending after the direct arrival.
 */
static void test_data_errors(void)
{
    se_sim_reflector rf = {20.0, -0.3};
    lt_rec r;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    double *zero;
    se_status st;
    if (!lt_make(&r, &rf, 1, 100.0, 0.0, 0.0, 0.5, 40.0, 2))
        return;
    lt_config(&cfg, &r, 0.0);

    /* 15 samples */
    CHECK(se_locate(r.resp, 15, LT_FS, &cfg, &res, &err) == SE_ERR_DATA);
    CHECK(strstr(err.message, "15") != NULL);
    CHECK(res.n_events == 0 && res.events == NULL);

    /* reference longer than the response: the response cut to the reference's length minus 1 */
    CHECK(se_locate(r.resp, cfg.reference_length - 1, LT_FS, &cfg, &res, &err) == SE_ERR_DATA);
    CHECK(err.message[0] != '\0');
    CHECK(res.n_events == 0);

    /* the record ends just after the direct arrival: nothing can be searched */
    st = se_locate(r.resp, r.ref_end + 8, LT_FS, &cfg, &res, &err);
    CHECK(st == SE_ERR_DATA);
    if (st != SE_OK)
        CHECK(err.message[0] != '\0');
    se_locate_result_free(&res);

    /* all zero: with every kind of reference, an error, never events */
    zero = calloc(r.n, sizeof *zero);
    if (CHECK(zero != NULL)) {
        size_t k;
        for (k = 0; k < 3; k++) {
            lt_config(&cfg, &r, 0.0);
            if (k == 1)
                cfg.reference_offset = SIZE_MAX, cfg.reference_kind = SE_REF_SYNTHETIC;
            if (k == 2)
                cfg.reference_kind = SE_REF_SELF;
            st = se_locate(zero, r.n, LT_FS, &cfg, &res, &err);
            if (!se_check(st == SE_ERR_DATA || st == SE_ERR_NOTFOUND, __FILE__, __LINE__,
                          k == 0 ? "all-zero response, pulse channel: SE_ERR_DATA or NOTFOUND"
                          : k == 1
                              ? "all-zero response, synthetic reference: SE_ERR_DATA or NOTFOUND"
                              : "all-zero response, self reference: SE_ERR_DATA or NOTFOUND"))
                fprintf(stderr, "  got status %d (%s), %zu events\n", (int)st, err.message,
                        res.n_events);
            CHECK(res.n_events == 0);
            se_locate_result_free(&res);
        }
        free(zero);
    }
    /* a NaN sample is refused, not propagated into distances */
    lt_config(&cfg, &r, 0.0);
    r.resp[r.n / 2] = NAN;
    st = se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err);
    CHECK(st == SE_ERR_DATA);
    se_locate_result_free(&res);
    lt_free(&r);
}

/* A response with no pulse in it (noise only, the pulse channel or a synthetic shape given): the
 * locator must say so (SE_ERR_NOTFOUND) rather than take a noise peak as the direct arrival and
 * report echoes from it. */
static void test_no_pulse(void)
{
    se_sim_reflector rf = {20.0, -0.3};
    lt_rec r;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    size_t i, k;
    se_status st;
    if (!lt_make(&r, &rf, 1, 100.0, 0.0, 0.0, 0.5, 20.0, 3))
        return;
    /* keep the noise, remove the signal: simulate again noise-free and subtract */
    {
        lt_rec clean;
        if (!lt_make(&clean, &rf, 1, 100.0, 0.0, 0.0, 0.5, INFINITY, 3)) {
            lt_free(&r);
            return;
        }
        for (i = 0; i < r.n; i++)
            r.resp[i] -= clean.resp[i];
        lt_free(&clean);
    }
    for (k = 0; k < 3; k++) {
        char what[SE_ERROR_MESSAGE_SIZE + 160];
        lt_config(&cfg, &r, 0.0);
        if (k == 1)
            cfg.reference_offset = SIZE_MAX, cfg.reference_kind = SE_REF_SYNTHETIC;
        if (k == 2)
            cfg.reference_kind = SE_REF_SELF;
        st = se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err);
        snprintf(what, sizeof what,
                 "noise only, %s reference: SE_ERR_NOTFOUND (got status %d, %zu events%s%s)",
                 k == 0   ? "pulse channel"
                 : k == 1 ? "synthetic"
                          : "self",
                 (int)st, res.n_events, st != SE_OK ? ": " : "", st != SE_OK ? err.message : "");
        se_check(st == SE_ERR_NOTFOUND, __FILE__, __LINE__, what);
        se_locate_result_free(&res);
    }
    lt_free(&r);
}

/* The dead zone is reported as a time and as a distance (d = v t / 2), and nothing is reported
 * inside it even when a reflector sits there; a reflector just beyond it is found. */
static void test_dead_zone(void)
{
    se_sim_reflector probe = {40.0, -0.3};
    lt_rec r;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    double dz;
    size_t i;
    if (!lt_make(&r, &probe, 1, 100.0, 0.0, 0.0, 0.7, 40.0, 4))
        return;
    lt_config(&cfg, &r, 0.0);
    if (!CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_OK)) {
        lt_free(&r);
        return;
    }
    dz = res.dead_zone_m;
    CHECK(dz > 0.0);
    CHECK_CLOSE(res.dead_zone_m, 0.5 * LT_V * res.dead_zone_s, 1e-9 * dz, "dead zone: d = v t / 2");
    /* at least the pulse itself: hann:4ms is 4 ms long, 0.5 * 141.4 * 4e-3 = 0.283 m */
    CHECK(res.dead_zone_m >= 0.5 * LT_V * 4e-3 * 0.99);
    se_locate_result_free(&res);
    lt_free(&r);
    {
        se_sim_reflector two[2];
        two[0].distance_m = 0.5 * dz; /* inside */
        two[0].reflection = 0.4;
        two[1].distance_m = dz + 10.0; /* well beyond */
        two[1].reflection = -0.3;
        if (!lt_make(&r, two, 2, 100.0, 0.0, 0.0, 0.7, 40.0, 5))
            return;
        lt_config(&cfg, &r, 0.0);
        if (CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_OK)) {
            CHECK_CLOSE(res.dead_zone_m, dz, 0.05 * dz, "dead zone: same pulse, same width");
            for (i = 0; i < res.n_events; i++) {
                char what[128];
                snprintf(what, sizeof what, "event %zu at %.4g m is inside the dead zone (%.4g m)",
                         i, res.events[i].distance_m, res.dead_zone_m);
                se_check(res.events[i].distance_m >= res.dead_zone_m, __FILE__, __LINE__, what);
            }
            CHECK(lt_at(&res, two[1].distance_m, NULL) != NULL);
        }
        se_locate_result_free(&res);
        lt_free(&r);
    }
}

/* Two runs on the same input give bit-identical results. */
static void test_repeatable(void)
{
    se_sim_reflector rf[3] = {{15.0, -0.3}, {33.0, 0.2}, {47.0, -0.25}};
    lt_rec r;
    se_locate_config cfg;
    se_locate_result a, b;
    se_error err;
    if (!lt_make(&r, rf, 3, 100.0, 0.0, 0.0, 0.8, 50.0, 6))
        return;
    lt_config(&cfg, &r, 0.0);
    if (CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &a, &err) == SE_OK) &&
        CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &b, &err) == SE_OK)) {
        CHECK(a.n_events == b.n_events);
        CHECK(a.n_events >= 3);
        if (a.n_events == b.n_events && a.n_events > 0)
            CHECK(memcmp(a.events, b.events, a.n_events * sizeof *a.events) == 0);
        CHECK(memcmp(&a.t0_s, &b.t0_s, sizeof a.t0_s) == 0);
        CHECK(memcmp(&a.noise_level, &b.noise_level, sizeof a.noise_level) == 0);
        CHECK(memcmp(&a.threshold, &b.threshold, sizeof a.threshold) == 0);
        CHECK(memcmp(&a.dead_zone_m, &b.dead_zone_m, sizeof a.dead_zone_m) == 0);
        se_locate_result_free(&b);
        /* the input is not modified (const) */
        {
            lt_rec again;
            if (lt_make(&again, rf, 3, 100.0, 0.0, 0.0, 0.8, 50.0, 6)) {
                CHECK(memcmp(again.resp, r.resp, r.n * sizeof *r.resp) == 0);
                lt_free(&again);
            }
        }
    }
    se_locate_result_free(&a);
    lt_free(&r);
}

/* max_events = 3 on a line of five reflectors: three events, the three strongest. */
static void test_max_events(void)
{
    se_sim_reflector rf[5] = {{12.0, 0.1}, {25.0, -0.4}, {38.0, 0.12}, {51.0, 0.35}, {64.0, -0.3}};
    lt_rec r;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    if (!lt_make(&r, rf, 5, 110.0, 0.0, 0.0, 1.0, 40.0, 7))
        return;
    lt_config(&cfg, &r, 0.0);
    cfg.max_events = 3;
    if (CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_OK)) {
        CHECK(res.n_events == 3);
        CHECK(lt_at(&res, 25.0, NULL) != NULL);
        CHECK(lt_at(&res, 51.0, NULL) != NULL);
        CHECK(lt_at(&res, 64.0, NULL) != NULL);
    }
    se_locate_result_free(&res);
    cfg.max_events = 0; /* 0 = the default 64: all five found */
    if (CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_OK)) {
        size_t k;
        CHECK(res.n_events >= 5 && res.n_events <= 64);
        for (k = 0; k < 5; k++)
            CHECK(lt_at(&res, rf[k].distance_m, NULL) != NULL);
    }
    se_locate_result_free(&res);
    lt_free(&r);
}

/* Two reflectors, r1 = 0.5 at 20 m and r2 = 0.6 at 35 m: the multiple between them arrives at
 * 2 t2 - t1 (50 m apparent) with -r1 r2^2 (1 - r1^2) = -0.135 (Goupillaud lattice: down through 1,
 * off 2, off the far side of 1 (-r1), off 2, up through 1). It must be labelled multiple_of
 * {primary 1, primary 2}; the primaries must not be labelled; and nothing that is not a primary may
 * be left unlabelled (the second-order multiple at 3 t2 - 2 t1, 65 m apparent, with r1^2 r2^3
 * (1 - r1^2) = +0.0405, included). */
static void test_multiple_between(void)
{
    se_sim_reflector rf[2] = {{20.0, 0.5}, {35.0, 0.6}};
    lt_rec r;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    if (!lt_make(&r, rf, 2, 150.0, 0.0, 0.0, 1.2, 50.0, 8))
        return;
    lt_config(&cfg, &r, 0.0);
    if (CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_OK)) {
        int i1 = -1, i2 = -1, im = -1, i3 = -1;
        const se_event *p1 = lt_at(&res, 20.0, &i1), *p2 = lt_at(&res, 35.0, &i2);
        const se_event *m = lt_at(&res, 50.0, &im), *m2 = lt_at(&res, 65.0, &i3);
        size_t i;
        if (CHECK(p1 != NULL && p2 != NULL)) {
            CHECK(p1->multiple == 0 && p2->multiple == 0);
            CHECK_CLOSE(p2->reflection, 0.6 * 0.75, 0.01, "second primary: r2 (1 - r1^2)");
        }
        if (CHECK(m != NULL)) {
            CHECK_CLOSE(m->reflection, -0.135, 0.01,
                        "between-reflector multiple: -r1 r2^2 (1 - r1^2)");
            CHECK(m->multiple == 1);
            CHECK(m->multiple_of[0] == i1 && m->multiple_of[1] == i2);
        }
        if (CHECK(m2 != NULL)) {
            CHECK_CLOSE(m2->reflection, 0.25 * 0.216 * 0.75, 0.01, "second-order multiple");
            if (!CHECK(m2->multiple == 1))
                fprintf(stderr,
                        "  second-order multiple at %.4g m (r %+.4f) reported as a primary\n",
                        m2->distance_m, m2->reflection);
        }
        (void)i3;
        for (i = 0; i < res.n_events; i++) {
            char what[160];
            if ((int)i == i1 || (int)i == i2)
                continue;
            snprintf(what, sizeof what,
                     "event %zu at %.4g m (r %+.4f, SNR %.1f dB) is not a primary "
                     "but not labelled a multiple",
                     i, res.events[i].distance_m, res.events[i].reflection, res.events[i].snr_db);
            se_check(res.events[i].multiple == 1, __FILE__, __LINE__, what);
        }
    }
    se_locate_result_free(&res);
    lt_free(&r);
}

/* A reflecting source end r_s = +0.5: the reflector at 20 m (r = 0.4) repeats at 2 t (40 m
 * apparent) with r_s r^2 = 0.08 (REFERENCE.md 2, Backus), labelled multiple_of {0, 0}. */
static void test_multiple_source_end(void)
{
    se_sim_reflector rf = {20.0, 0.4};
    lt_rec r;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    if (!lt_make(&r, &rf, 1, 150.0, 0.0, 0.5, 0.8, 40.0, 9))
        return;
    lt_config(&cfg, &r, 0.5);
    if (CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_OK)) {
        int i1 = -1, im = -1;
        const se_event *p = lt_at(&res, 20.0, &i1), *m = lt_at(&res, 40.0, &im);
        if (CHECK(p != NULL)) {
            CHECK(p->multiple == 0);
            /* corrected for the (1 + r_s) seen at the sensor (locate.h) */
            CHECK_CLOSE(p->reflection, 0.4, 0.01, "primary, source end corrected");
        }
        if (CHECK(m != NULL)) {
            CHECK_CLOSE(m->reflection, 0.5 * 0.4 * 0.4, 0.01, "source-end multiple r_s r^2");
            CHECK(m->multiple == 1);
            CHECK(m->multiple_of[0] == i1 && m->multiple_of[1] == i1);
        }
    }
    se_locate_result_free(&res);
    lt_free(&r);
}

/* A break (free end, +1 in velocity) at 30 m behind a reflector at 10 m (r = -0.2), source end
 * r_s = -0.5: after the break nothing real is seen (REFERENCE.md 2), so every event after it is
 * labelled a multiple and the break is among the events it is a multiple of (the source-end
 * multiple of reflector and break at 40 m, the peg-leg at 50 m, the break's own repeat at 60 m all
 * involve it); the two primaries are not labelled. */
static void test_after_full_reflection(void)
{
    se_sim_reflector rf = {10.0, -0.2};
    lt_rec r;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    if (!lt_make(&r, &rf, 1, 30.0, 1.0, -0.5, 1.5, 40.0, 10))
        return;
    lt_config(&cfg, &r, -0.5);
    if (CHECK(se_locate(r.resp, r.n, LT_FS, &cfg, &res, &err) == SE_OK)) {
        int i1 = -1, ie = -1;
        const se_event *p = lt_at(&res, 10.0, &i1), *e = lt_at(&res, 30.0, &ie);
        size_t i, after = 0;
        if (CHECK(p != NULL && e != NULL)) {
            CHECK(p->multiple == 0 && e->multiple == 0);
            /* (1 + r)(1 - r) = 0.96 through the reflector in front */
            CHECK_CLOSE(e->reflection, 0.96, 0.02, "break seen through the reflector");
            for (i = (size_t)ie + 1; i < res.n_events; i++) {
                char what[160];
                after++;
                snprintf(what, sizeof what, "event %zu at %.4g m after the break: multiple of it",
                         i, res.events[i].distance_m);
                se_check(res.events[i].multiple == 1 && (res.events[i].multiple_of[0] == ie ||
                                                         res.events[i].multiple_of[1] == ie),
                         __FILE__, __LINE__, what);
                se_check(res.events[i].multiple_of[0] >= 0 &&
                             res.events[i].multiple_of[0] < (int)i &&
                             res.events[i].multiple_of[1] < (int)i,
                         __FILE__, __LINE__, what);
            }
            /* the break repeats off the source end at 60 m apparent: r_s r^2 = -0.46 */
            CHECK(after >= 1);
            CHECK(lt_at(&res, 60.0, NULL) != NULL);
        }
    }
    se_locate_result_free(&res);
    lt_free(&r);
}

int main(void)
{
    test_arguments();
    test_data_errors();
    test_no_pulse();
    test_dead_zone();
    test_repeatable();
    test_max_events();
    test_multiple_between();
    test_multiple_source_end();
    test_after_full_reflection();
    return se_test_done("test_locate");
}
