/* Honest intervals for echoes a model of independent echoes cannot place. A splice (+0.2) 0.283 m
 * in front of a clamp (-0.8) on a tether tapped with a 20 ms Hann pulse at 48 kHz lies a fifth of
 * the main lobe apart, and the lattice record holds their internal reverberation too (the clamp's
 * echo bounced between them: -0.123 at 40.566 m, ...): a fit of independent echoes places them
 * biased by decimetres while its covariance says millimetres. The locator sees that the residual
 * still holds an echo above the threshold and then fits the layered model (se_layerfit: the two
 * primaries generate every internal multiple), which explains the window: two events, not low
 * confidence, intervals below 5 cm, covering the truth in at least 34 of 40 (20 seeds) and within
 * twice the interval in all. The end at 150 m, with the pair's transmission reverberation behind
 * it, is checked for what holds (see case 1). A pair 0.8 m apart (resolved) keeps its narrow
 * intervals, and its reverberation, each path seen as its own event, is all labelled multiple.
 * Records from the lattice simulator (P.L. Goupillaud's equal-travel-time lattice), seeds fixed;
 * tolerances are common practice, no source. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/fdline.h"
#include "strandecho/locate.h"
#include "strandecho/pulse.h"
#include "strandecho/simulate.h"
#include "testutil.h"

static const double fs = 48000.0;
#define SE_SEEDS 20 /* noise seeds of case 1 */

static int run(double splice_m, double clamp_m, unsigned long seed, se_locate_result *res)
{
    const double v = sqrt(100000.0 / 5.0);
    se_sim_reflector rf[2] = {{0.0, 0.2}, {0.0, -0.8}};
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_locate_config cfg;
    se_error err;
    double *x = NULL, *p = NULL;
    size_t n, b, e;
    int ok = 0;

    rf[0].distance_m = splice_m;
    rf[1].distance_m = clamp_m;
    memset(&rec, 0, sizeof rec);
    memset(res, 0, sizeof *res);
    rec.rate_hz = fs;
    rec.duration_s = 3.0;
    rec.seed = 1;
    if (!CHECK(se_pulse_parse("hann:20ms", &rec.pulse, &err) == SE_OK) ||
        !CHECK(se_sim_uniform_line(v, rf, 2, 150.0, -1.0, 0.0, 0.0, &ifs, &line, &err) == SE_OK))
        return 0;
    n = se_sim_frames(&rec);
    x = malloc(n * sizeof *x);
    p = malloc(n * sizeof *p);
    if (!CHECK(x != NULL && p != NULL) || !CHECK(se_simulate(&line, &rec, x, p, n, &err) == SE_OK) ||
        !CHECK(se_fd_add_noise(x, n, 0.003, seed, &err) == SE_OK) ||
        !CHECK(se_pulse_support(p, n, &b, &e, &err) == SE_OK))
        goto out;
    se_locate_config_init(&cfg);
    cfg.speed_m_s = v;
    cfg.reference = p + b;
    cfg.reference_length = e - b;
    cfg.reference_offset = b;
    cfg.reference_kind = SE_REF_CHANNEL;
    cfg.pilot = p;
    if (!CHECK(se_locate(x, n, fs, &cfg, res, &err) == SE_OK)) {
        fprintf(stderr, "  %s\n", err.message);
        goto out;
    }
    ok = 1;
out:
    free(x);
    free(p);
    free(ifs);
    return ok;
}

/* The event of the given sign nearest to d_m (within 3 m), or NULL. */
static const se_event *nearest(const se_locate_result *res, double d_m, int polarity)
{
    const se_event *best = NULL;
    size_t i;
    for (i = 0; i < res->n_events; i++) {
        const se_event *ev = &res->events[i];
        if (ev->polarity != polarity || ev->multiple || fabs(ev->distance_m - d_m) > 3.0)
            continue;
        if (best == NULL || fabs(ev->distance_m - d_m) < fabs(best->distance_m - d_m))
            best = ev;
    }
    return best;
}

static void show(const char *what, const se_locate_result *res)
{
    size_t i;
    printf("%s: %zu events\n", what, res->n_events);
    for (i = 0; i < res->n_events; i++)
        printf("  %9.4f m +/- %.4f  %+.4f (predicted %+.4f)  fitted %d  low confidence %d%s\n", res->events[i].distance_m,
               res->events[i].distance_uncertainty_m, res->events[i].reflection, res->events[i].predicted, res->events[i].fitted,
               res->events[i].low_confidence, res->events[i].multiple ? "  multiple" : "");
}

int main(void)
{
    se_locate_result res;
    const se_event *s, *c;

    /* 1. A fifth of the main lobe apart: the independent fit is flagged; the layered fit
     * (se_layerfit: the two primaries generate their internal multiples) explains the window and
     * gives two events, not low confidence, with narrow intervals that cover the truth. */
    {
        unsigned long seed;
        size_t inside = 0, events = 0, wide = 0, end_inside = 0, tail = 0;
        for (seed = 1; seed <= SE_SEEDS; seed++) {
            if (!run(40.0, 40.283, seed, &res))
                break;
            if (seed == 7 || getenv("SE_SHOW") != NULL)
                show("splice 0.283 m before the clamp", &res);
            s = nearest(&res, 40.0, +1);
            c = nearest(&res, 40.283, -1);
            if (CHECK(s != NULL && c != NULL)) {
                CHECK(!s->low_confidence && !c->low_confidence);
                CHECK(s->distance_uncertainty_m < 0.05 && c->distance_uncertainty_m < 0.05);
                /* no gross error: within twice the stated interval in every trial */
                CHECK_CLOSE(s->distance_m, 40.0, 2.0 * s->distance_uncertainty_m,
                            "the splice within twice its stated 95 % interval");
                CHECK_CLOSE(c->distance_m, 40.283, 2.0 * c->distance_uncertainty_m,
                            "the clamp within twice its stated 95 % interval");
                inside += fabs(s->distance_m - 40.0) <= s->distance_uncertainty_m;
                inside += fabs(c->distance_m - 40.283) <= c->distance_uncertainty_m;
                events += 2;
            }
            {
                /* The end at 150 m comes back through the pair twice: its echo E is followed by
                 * the pair's transmission reverberation E (n + 1) q^n at n 0.283 m, q = -r1 r2
                 * (0.32 E, 0.077 E, 0.016 E): no layer, so neither fit models it. What holds:
                 * the end is a primary within twice its interval (the independent fit of the
                 * train biases it by up to 3 mm, beyond its stated 1.7 mm in some trials), the
                 * first follower (150.283 m) is labelled a multiple, and nothing else is a
                 * primary: the train's remainder within a metre behind the end (the next two
                 * paths fitted as one echo) lies past the end's full reflection, farther than a
                 * quarter of the main lobe, so it is labelled too (it was a primary in 14 of
                 * 20 seeds while that rule waited a whole main-lobe half width). */
                const se_event *end = nearest(&res, 150.0, -1);
                size_t i;
                int follower = 0, stray = 0;
                if (CHECK(end != NULL)) {
                    CHECK_CLOSE(end->distance_m, 150.0, 2.0 * end->distance_uncertainty_m,
                                "the end within twice its stated 95 % interval");
                    end_inside += fabs(end->distance_m - 150.0) <= end->distance_uncertainty_m;
                    wide += end->low_confidence;
                }
                for (i = 0; i < res.n_events; i++) {
                    const se_event *ev = &res.events[i];
                    if (ev->multiple && fabs(ev->distance_m - 150.3) < 0.05)
                        follower = 1;
                    if (!ev->multiple && ev != s && ev != c && ev != end) {
                        if (ev->distance_m > 150.5 && ev->distance_m < 151.0 &&
                            fabs(ev->reflection) < 0.03)
                            tail++;
                        else
                            stray = 1;
                    }
                }
                CHECK(follower);
                CHECK(!stray);
            }
            se_locate_result_free(&res);
        }
        printf("case 1: %zu of %zu events within their stated 95 %% interval; the end within its "
               "interval in %zu of %d, its group flagged in %zu, the train's remainder a primary "
               "in %zu\n", inside, events, end_inside, SE_SEEDS, wide, tail);
        /* a 95 % interval: at least 34 of 40 (measured 36 of 40 here, 80 of 88 in 44 seeds: the
         * linearised covariance is about 1.3 times optimistic at this separation) */
        CHECK(events == 2 * SE_SEEDS && inside >= 34);
        CHECK(tail == 0);
    }

    /* 2. 0.8 m apart (about half the main lobe): resolved, narrow intervals, not flagged. */
    if (run(40.0, 40.8, 7, &res)) {
        show("splice 0.8 m before the clamp", &res);
        s = nearest(&res, 40.0, +1);
        c = nearest(&res, 40.8, -1);
        if (CHECK(s != NULL && c != NULL)) {
            CHECK(!s->low_confidence && !c->low_confidence);
            CHECK(s->distance_uncertainty_m < 0.05 && c->distance_uncertainty_m < 0.05);
            CHECK_CLOSE(s->distance_m, 40.0, s->distance_uncertainty_m + 0.002,
                        "the splice within its stated 95 % interval");
            CHECK_CLOSE(c->distance_m, 40.8, c->distance_uncertainty_m + 0.002,
                        "the clamp within its stated 95 % interval");
        }
        {
            /* the reverberation between them (41.6, 42.4, ... m, and behind the end) is all
             * labelled: exactly the splice, the clamp and the end are primaries */
            size_t i, prim = 0;
            for (i = 0; i < res.n_events; i++)
                prim += !res.events[i].multiple;
            CHECK(prim == 3);
            CHECK(nearest(&res, 150.0, -1) != NULL);
        }
    }
    se_locate_result_free(&res);
    return se_test_done("test_fit_honesty");
}
