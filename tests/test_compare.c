/* strandecho tests: se_compare, change since a baseline.
 *
 * Oracle: the simulated lines themselves (the sparse lattice model of simulate.h). A baseline of an
 * invented tether (clamp, chafe, fixed sinker) and a later recording of the same tether with one
 * new reflector, the wave speed 0.3 % higher (every delay 1/1.003 as long) and the response 10 %
 * louder: exactly one finding that is not a multiple, the new reflector, where it was put; the
 * stretch equals 1/1.003. Controls: the same line recorded again with other noise gives no
 * finding; a reflector that weakened is reported as changed in strength, one removed as gone.
 * Tolerances are stated beside each check (common practice, no source: a few resolution cells). */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/compare.h"
#include "strandecho/locate.h"
#include "strandecho/pulse.h"
#include "strandecho/simulate.h"
#include "testutil.h"

/* sqrt(T/mu) with T = 100 kN, mu = 5 kg/m: 141.42 m/s (REFERENCE.md 1 [calc]) */
#define TC_V 141.42
#define TC_FS 8000.0
#define TC_NOISE 0.003

typedef struct tc_rec {
    double *resp, *inj;
    size_t n;
} tc_rec;

static int tc_make(tc_rec *r, const se_sim_reflector *refl, size_t nrefl, double speed, double gain,
                   unsigned long seed);
static int tc_locate(const tc_rec *r, se_locate_result *res);
static void test_new_reflector(void);
static void test_no_change(void);
static void test_strength_and_gone(void);
static void test_errors(void);
static void test_moved(void);

static int tc_make(tc_rec *r, const se_sim_reflector *refl, size_t nrefl, double speed, double gain,
                   unsigned long seed)
{
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_error err;
    size_t i;
    memset(r, 0, sizeof *r);
    if (se_sim_uniform_line(speed, refl, nrefl, 180.0, -1.0, 0.0, 0.0, &ifs, &line, &err) != SE_OK)
        return 0;
    memset(&rec, 0, sizeof rec);
    rec.rate_hz = TC_FS;
    rec.duration_s = 3.0;
    rec.pulse_start_s = 0.05;
    if (se_pulse_parse("hann:20ms", &rec.pulse, &err) != SE_OK) {
        free(ifs);
        return 0;
    }
    rec.noise_rms = TC_NOISE;
    rec.seed = seed;
    r->n = se_sim_frames(&rec);
    r->resp = calloc(r->n, sizeof *r->resp);
    r->inj = calloc(r->n, sizeof *r->inj);
    if (r->resp == NULL || r->inj == NULL ||
        se_simulate(&line, &rec, r->resp, r->inj, r->n, &err) != SE_OK) {
        free(ifs);
        return 0;
    }
    for (i = 0; i < r->n; i++)
        r->resp[i] *= gain;
    free(ifs);
    return 1;
}

static int tc_locate(const tc_rec *r, se_locate_result *res)
{
    se_locate_config cfg;
    se_error err;
    size_t b, e;
    se_locate_config_init(&cfg);
    cfg.speed_m_s = TC_V;
    cfg.keep_trace = 1;
    if (se_pulse_support(r->inj, r->n, &b, &e, &err) != SE_OK)
        return 0;
    cfg.reference = r->inj + b;
    cfg.reference_length = e - b;
    cfg.reference_offset = b;
    cfg.reference_kind = SE_REF_CHANNEL;
    if (se_locate(r->resp, r->n, TC_FS, &cfg, res, &err) != SE_OK) {
        fprintf(stderr, "locate: %s\n", err.message);
        return 0;
    }
    return 1;
}

static void tc_free(tc_rec *r)
{
    free(r->resp);
    free(r->inj);
}

static const se_sim_reflector tc_base[2] = {{42.70, -0.35}, {96.30, 0.12}};

static void test_new_reflector(void)
{
    se_sim_reflector now_refl[3] = {{42.70, -0.35}, {96.30, 0.12}, {130.0, -0.15}};
    tc_rec b, n;
    se_locate_result rb, rn;
    se_compare_result cr;
    se_error err;
    size_t i, faults = 0;
    const se_change *found = NULL;
    memset(&rb, 0, sizeof rb);
    memset(&rn, 0, sizeof rn);
    CHECK(tc_make(&b, tc_base, 2, TC_V, 1.0, 11));
    CHECK(tc_make(&n, now_refl, 3, TC_V * 1.003, 1.10, 12));
    CHECK(tc_locate(&b, &rb));
    CHECK(tc_locate(&n, &rn));
    CHECK(rb.trace != NULL && rb.trace_length == b.n);
    CHECK(se_compare(&rb, &rn, NULL, &cr, &err) == SE_OK);
    for (i = 0; i < cr.n_changes; i++) {
        const se_change *c = &cr.changes[i];
        printf("  change %zu: %s at %.2f m, r %.3f, significance %.1f%s\n", i + 1,
               se_change_kind_name(c->kind), c->distance_m, c->reflection_now, c->significance,
               c->secondary ? " (secondary)" : "");
        if (!c->secondary) {
            faults++;
            found = c;
        }
    }
    CHECK(faults == 1);
    CHECK(cr.n_faults == 1);
    if (found != NULL) {
        CHECK(found->kind == SE_CHANGE_NEW);
        /* the now recording read with the baseline's speed: 130 m / 1.003; within 0.5 m (about a
         * tenth of the 20 ms pulse's resolution cell at 141 m/s) */
        CHECK_CLOSE(found->distance_m, 130.0 / 1.003, 0.5, "new reflector distance");
        /* -0.15 seen through the clamp and the chafe: x (1 - 0.35^2)(1 - 0.12^2) = -0.130 */
        CHECK_CLOSE(found->reflection_now, -0.15 * (1 - 0.35 * 0.35) * (1 - 0.12 * 0.12), 0.01,
                    "new reflector coefficient");
        CHECK(found->significance > cr.threshold_sigma);
    }
    /* now delays are baseline delays / 1.003; the fit is held to 1e-4 (0.03 of the change) */
    printf("  stretch error %.3g, common %zu, sigma %.3g thr %.3g\n", cr.stretch - 1.0 / 1.003, cr.n_common, cr.residual_sigma, cr.threshold);
    CHECK_CLOSE(cr.stretch, 1.0 / 1.003, 1e-4, "stretch");
    CHECK_CLOSE(cr.speed_change, 0.003, 1e-4, "speed change");
    CHECK(cr.stretch_from_echoes && cr.n_common >= 2);
    /* both traces are normalised to their outgoing pulse: the 10 % louder response cancels */
    CHECK_CLOSE(cr.gain, 1.0, 0.03, "gain after normalisation");
    CHECK(cr.correlation > 0.9);
    CHECK(cr.n == rn.trace_length && cr.residual != NULL && cr.aligned_baseline != NULL);
    /* the sentence a summary table shows: the speed change and exactly the one new reflector */
    if (found != NULL) {
        char sentence[256], want[160], small[110];
        CHECK(se_compare_sentence(&cr, "the 2025 survey", 1.0, "m", sentence, sizeof sentence, &err) == SE_OK);
        snprintf(want, sizeof want, "since the 2025 survey (%+.2f %%): new reflection at %.1f m, %.0f sigma",
                 cr.speed_change * 100.0, found->distance_m, found->significance);
        snprintf(want, sizeof want, "since the 2025 survey (speed %+.2f %%): new reflection at %.1f m, %.0f sigma",
                 cr.speed_change * 100.0, found->distance_m, found->significance);
        printf("  sentence: %s\n", sentence);
        CHECK(strcmp(sentence, want) == 0);
        CHECK(strstr(sentence, "(speed +0.30 %)") != NULL);
        /* feet and the default label */
        CHECK(se_compare_sentence(&cr, NULL, 1.0 / 0.3048, "ft", sentence, sizeof sentence, &err) == SE_OK);
        snprintf(want, sizeof want, "new reflection at %.1f ft", found->distance_m / 0.3048);
        CHECK(strncmp(sentence, "since the baseline (", 20) == 0 && strstr(sentence, want) != NULL);
        /* a buffer too small for the change: summed up, never cut mid-word */
        CHECK(se_compare_sentence(&cr, "a survey with a very long name given by the caller", 1.0, "m", small,
                                  sizeof small, &err) == SE_OK);
        printf("  cut: %s\n", small);
        CHECK(strcmp(small, "since a survey with a very long name given by the caller (speed +0.30 %): 1 change "
                            "that may be a fault") == 0);
        CHECK(strlen(small) < sizeof small);
        CHECK(se_compare_sentence(&cr, NULL, 1.0, "m", small, 50, &err) == SE_ERR_ARG);
        CHECK(se_compare_sentence(&cr, NULL, 0.0, "m", sentence, sizeof sentence, &err) == SE_ERR_ARG);
    }
    se_compare_result_free(&cr);
    se_locate_result_free(&rb);
    se_locate_result_free(&rn);
    tc_free(&b);
    tc_free(&n);
}

static void test_no_change(void)
{
    tc_rec b, n;
    se_locate_result rb, rn;
    se_compare_result cr;
    se_error err;
    memset(&rb, 0, sizeof rb);
    memset(&rn, 0, sizeof rn);
    CHECK(tc_make(&b, tc_base, 2, TC_V, 1.0, 21));
    CHECK(tc_make(&n, tc_base, 2, TC_V * 0.998, 0.9, 22));
    CHECK(tc_locate(&b, &rb));
    CHECK(tc_locate(&n, &rn));
    CHECK(se_compare(&rb, &rn, NULL, &cr, &err) == SE_OK);
    CHECK(cr.n_faults == 0);
    CHECK_CLOSE(cr.stretch, 1.0 / 0.998, 1e-4, "stretch of a 0.2 % slower line");
    {
        char sentence[160];
        CHECK(se_compare_sentence(&cr, NULL, 1.0, "m", sentence, sizeof sentence, &err) == SE_OK);
        CHECK(strncmp(sentence, "no change that may be a fault since the baseline (speed -0.20 %)", 64) == 0);
    }
    se_compare_result_free(&cr);
    se_locate_result_free(&rb);
    se_locate_result_free(&rn);
    tc_free(&b);
    tc_free(&n);
}

static void test_strength_and_gone(void)
{
    se_sim_reflector now_refl[1] = {{42.70, -0.20}};
    tc_rec b, n;
    se_locate_result rb, rn;
    se_compare_result cr;
    se_error err;
    size_t i;
    int strength = 0, gone = 0, other = 0;
    memset(&rb, 0, sizeof rb);
    memset(&rn, 0, sizeof rn);
    CHECK(tc_make(&b, tc_base, 2, TC_V, 1.0, 31));
    CHECK(tc_make(&n, now_refl, 1, TC_V, 1.0, 32));
    CHECK(tc_locate(&b, &rb));
    CHECK(tc_locate(&n, &rn));
    CHECK(se_compare(&rb, &rn, NULL, &cr, &err) == SE_OK);
    for (i = 0; i < cr.n_changes; i++) {
        const se_change *c = &cr.changes[i];
        if (c->secondary)
            continue;
        if (c->kind == SE_CHANGE_STRENGTH && fabs(c->distance_m - 42.70) < 1.0) {
            strength++;
            CHECK_CLOSE(c->reflection_now, -0.20, 0.03, "weakened clamp now");
            CHECK_CLOSE(c->reflection_baseline, -0.35 * cr.gain, 0.04, "clamp before");
        } else if (c->kind == SE_CHANGE_GONE && fabs(c->distance_m - 96.30) < 1.0) {
            gone++;
        } else {
            other++;
            printf("  unexpected change: %s at %.2f m\n", se_change_kind_name(c->kind),
                   c->distance_m);
        }
    }
    CHECK(strength == 1);
    CHECK(gone == 1);
    CHECK(other == 0);
    se_compare_result_free(&cr);
    se_locate_result_free(&rb);
    se_locate_result_free(&rn);
    tc_free(&b);
    tc_free(&n);
}

/* The clamp slid 0.5 m down the line (less than the 1.2 m resolution cell): one change, moved, by
 * +0.5 m (to 5 cm: the delays are good to a fraction of a millimetre at this SNR). */
static void test_moved(void)
{
    se_sim_reflector now_refl[2] = {{43.20, -0.35}, {96.30, 0.12}};
    tc_rec b, n;
    se_locate_result rb, rn;
    se_compare_result cr;
    se_error err;
    size_t i, faults = 0;
    memset(&rb, 0, sizeof rb);
    memset(&rn, 0, sizeof rn);
    CHECK(tc_make(&b, tc_base, 2, TC_V, 1.0, 41));
    CHECK(tc_make(&n, now_refl, 2, TC_V * 1.001, 1.0, 42));
    CHECK(tc_locate(&b, &rb));
    CHECK(tc_locate(&n, &rn));
    CHECK(se_compare(&rb, &rn, NULL, &cr, &err) == SE_OK);
    for (i = 0; i < cr.n_changes; i++) {
        const se_change *c = &cr.changes[i];
        if (c->secondary)
            continue;
        faults++;
        CHECK(c->kind == SE_CHANGE_MOVED);
        CHECK_CLOSE(c->shift_m, 0.5 / 1.001, 0.05, "clamp moved by");
        CHECK_CLOSE(c->distance_m, 43.20 / 1.001, 0.05, "clamp now at");
    }
    CHECK(faults == 1);
    se_compare_result_free(&cr);
    se_locate_result_free(&rb);
    se_locate_result_free(&rn);
    tc_free(&b);
    tc_free(&n);
}

static void test_errors(void)
{
    se_locate_result a, b;
    se_compare_result cr;
    se_error err;
    memset(&a, 0, sizeof a);
    memset(&b, 0, sizeof b);
    CHECK(se_compare(NULL, &b, NULL, &cr, &err) == SE_ERR_ARG);
    CHECK(se_compare(&a, &b, NULL, &cr, &err) == SE_ERR_ARG); /* no traces */
    CHECK(strstr(err.message, "keep_trace") != NULL);
    CHECK(se_compare(&a, &b, NULL, NULL, &err) == SE_ERR_ARG);
    CHECK(strcmp(se_change_kind_name(SE_CHANGE_STRENGTH), "changed") == 0);
}

int main(void)
{
    test_errors();
    test_new_reflector();
    test_no_change();
    test_strength_and_gone();
    test_moved();
    return se_test_done("test_compare");
}
