/* Source-end coefficient estimated from the data (se_locate with source_reflection = NaN) and the
 * line reported as a surveyor would describe it: four taps 7 s apart summed as `strandecho
 * simulate --shots` does, Hann 20 ms at 48 kHz, reflectors -0.5 at 60 m (clamp-like) and +0.2 at
 * 60.8 m (splice), fixed end at 150 m, source end +0.5, noise 0.01. The joint fit over the
 * first-order source-end multiples at t_i + t_j (M.M. Backus, Geophysics 24(2), 1959;
 * REFERENCE.md 2) must give r_s within 0.05 of 0.5 (tolerance common practice, no source). The
 * multiples are labelled from the predicted field of every lattice path of the primaries (P.L.
 * Goupillaud, Geophysics 26(6), 1961): exactly three primaries must remain (60, 60.8 and 150 m),
 * every other event a multiple, including 210.8 and 300 m where paths of opposite sign overlap
 * and the pair prediction alone was far off, and the previous taps' reverberation before 60 m
 * (the line rings for about 12 s, longer than the 7 s between taps: shots_overlap). Seeds fixed. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/fdline.h"
#include "strandecho/locate.h"
#include "strandecho/pulse.h"
#include "strandecho/simulate.h"
#include "testutil.h"

int main(void)
{
    const double v = sqrt(100000.0 / 5.0), fs = 48000.0, interval = 7.0;
    const double mult_at[] = {120.0, 120.8, 180.0, 210.0, 270.0};
    se_sim_reflector refl[2] = {{60.0, -0.5}, {60.8, 0.2}};
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    double *resp = NULL, *inj = NULL;
    size_t n, i, k, b, e, step = (size_t)llround(interval * fs);

    memset(&rec, 0, sizeof rec);
    memset(&res, 0, sizeof res);
    if (!CHECK(se_pulse_parse("hann:20ms", &rec.pulse, &err) == SE_OK) ||
        !CHECK(se_sim_uniform_line(v, refl, 2, 150.0, -1.0, 0.5, 0.0, &ifs, &line, &err) == SE_OK))
        return se_test_done("source_end");
    rec.rate_hz = fs;
    rec.duration_s = 30.0;
    rec.seed = 1;
    n = se_sim_frames(&rec);
    resp = malloc(n * sizeof *resp);
    inj = malloc(n * sizeof *inj);
    if (!CHECK(resp != NULL && inj != NULL) ||
        !CHECK(se_simulate(&line, &rec, resp, inj, n, &err) == SE_OK))
        goto out;
    for (i = n; i-- > 0;) /* four shots superposed, noise once afterwards (cmd_simulate.c) */
        for (k = 1; k < 4; k++)
            if (i >= k * step) {
                resp[i] += resp[i - k * step];
                inj[i] += inj[i - k * step];
            }
    if (!CHECK(se_fd_add_noise(resp, n, 0.01, rec.seed, &err) == SE_OK) ||
        !CHECK(se_pulse_support(inj, step, &b, &e, &err) == SE_OK))
        goto out;
    se_locate_config_init(&cfg);
    cfg.speed_m_s = v;
    cfg.source_reflection = NAN;
    cfg.reference = inj + b;
    cfg.reference_length = e - b;
    cfg.reference_offset = b;
    cfg.reference_kind = SE_REF_CHANNEL;
    cfg.pilot = inj; /* the taps found on the pulse channel, as `locate --pulse-channel` does */
    if (!CHECK(se_locate(resp, n, fs, &cfg, &res, &err) == SE_OK)) {
        fprintf(stderr, "  %s\n", err.message);
        goto out;
    }
    printf("r_s estimated %+.4f (true +0.5), flag %d, %zu events\n", res.source_reflection,
           res.source_reflection_estimated, res.n_events);
    CHECK(res.source_reflection_estimated);
    CHECK_CLOSE(res.source_reflection, 0.5, 0.05, "source-end coefficient from the multiples");
    for (k = 0; k < sizeof mult_at / sizeof mult_at[0]; k++)
        for (i = 0; i < res.n_events; i++) {
            char what[160];
            if (fabs(res.events[i].distance_m - mult_at[k]) > 0.3)
                continue;
            snprintf(what, sizeof what, "event at %.2f m (r %+.4f) is a source-end multiple",
                     res.events[i].distance_m, res.events[i].reflection);
            se_check(res.events[i].multiple, __FILE__, __LINE__, what);
        }
    {
        const double prim_at[] = {60.0, 60.8, 150.0};
        size_t found[3] = {0, 0, 0}, nprev = 0;
        CHECK(res.n_events <= 64); /* max_events (default 64) holds after refit and labels */
        for (i = 0; i < res.n_events; i++) {
            const se_event *ev = &res.events[i];
            int is_prim = 0;
            char what[160];
            for (k = 0; k < 3; k++)
                if (fabs(ev->distance_m - prim_at[k]) < 0.3) {
                    is_prim = 1;
                    found[k]++;
                }
            nprev += ev->multiple && ev->previous_shot > 0;
            snprintf(what, sizeof what, "event at %.2f m (r %+.4f, predicted %+.4f) is %s",
                     ev->distance_m, ev->reflection, ev->predicted,
                     is_prim ? "a primary" : "a multiple");
            se_check(is_prim ? !ev->multiple : ev->multiple, __FILE__, __LINE__, what);
            /* never a multiple promoted: a multiple has no expected match and is not the break */
            if (ev->multiple && ev->previous_shot == 0)
                CHECK(ev->multiple_of[0] >= 0);
        }
        for (k = 0; k < 3; k++)
            CHECK(found[k] == 1);
        printf("ring-down %.2f s, taps %.3f s apart, overlap %d, %zu events of earlier taps\n",
               res.ring_down_s, res.shot_interval_s, res.shots_overlap, nprev);
        CHECK_CLOSE(res.shot_interval_s, interval, 1e-3, "shot interval");
        CHECK(res.ring_down_s > interval && res.shots_overlap);
        CHECK(nprev > 0);
        if (found[0] == 1 && found[1] == 1) { /* the splice beside the clamp: signs kept */
            for (i = 0; i < res.n_events; i++)
                if (fabs(res.events[i].distance_m - 60.0) < 0.3)
                    CHECK(res.events[i].reflection < -0.4);
                else if (fabs(res.events[i].distance_m - 60.8) < 0.3)
                    CHECK(res.events[i].reflection > 0.1);
        }
    }
out:
    se_locate_result_free(&res);
    free(resp);
    free(inj);
    free(ifs);
    return se_test_done("source_end");
}
