/* strandecho tests: the hand-made reflectogram shared by the plot and report tests. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "reflectogram_fixture.h"


double pulse(double dt)
{
    const double half = 0.0002;
    if (fabs(dt) >= half)
        return 0.0;
    return 0.5 * (1.0 + cos(3.14159265358979 * dt / half)) * cos(2.0 * 3.14159265358979 * 2500.0 * dt);
}

void make_fixture(fixture *f)
{
    static const double dist[5] = {250.0, 500.0, 600.0, 820.0, 1000.0};
    static const double refl[5] = {0.30, 0.09, -0.20, 0.03, -0.55};
    unsigned long long seed = 12345u;
    size_t i, k;
    memset(f, 0, sizeof *f);
    f->trace = calloc(NS, sizeof *f->trace);
    for (i = 0; i < NS; i++) {
        double t = (double)i / RATE, u;
        seed = seed * 6364136223846793005ull + 1442695040888963407ull;
        u = (double)(seed >> 11) / 9007199254740992.0 - 0.5;
        f->trace[i] = 0.004 * u + pulse(t - T0);
        for (k = 0; k < 5; k++)
            f->trace[i] += refl[k] * pulse(t - T0 - 2.0 * dist[k] / SPEED);
    }
    for (k = 0; k < 5; k++) {
        se_event *e = &f->ev[k];
        e->delay_s = 2.0 * dist[k] / SPEED;
        e->distance_m = dist[k];
        e->distance_uncertainty_m = 0.4;
        e->delay_uncertainty_s = 1e-6;
        e->reflection = refl[k];
        e->reflection_uncertainty = 0.003;
        e->polarity = refl[k] > 0 ? 1 : -1;
        e->impedance_increase = refl[k] < 0; /* velocity: an inverted echo is an increase */
        e->snr_db = k == 3 ? 14.0 : 35.0;
        e->low_confidence = k == 3;
        e->multiple = k == 1; /* 500 m = twice the 250 m reflector */
        e->multiple_of[0] = k == 1 ? 0 : -1;
        e->multiple_of[1] = -1;
        e->expected = -1;
    }
    f->res.events = f->ev;
    f->res.n_events = 5;
    f->res.rate_hz = RATE;
    f->res.t0_s = T0;
    f->res.direct_amplitude = 1.0;
    f->res.noise_level = 0.0012;
    f->res.threshold = 0.02;
    f->res.threshold_sigma = 5.2;
    f->res.dead_zone_s = 2.0 * 30.0 / SPEED;
    f->res.dead_zone_m = 30.0;
    f->res.resolution_s = 2.0 * 0.15 / SPEED * 2.0;
    f->res.resolution_m = 0.3;
    f->res.rms_bandwidth_hz = 3000.0;
    f->res.record_range_m = 1197.0;
    f->res.speed_m_s = SPEED;
    f->res.quantity = SE_Q_VELOCITY;
}

se_line *make_line(void)
{
    se_error err;
    se_line *ln = se_line_create("Leg <A> & test", SE_WAVE_LONGITUDINAL, SE_Q_VELOCITY, &err);
    se_segment seg;
    se_feature feat;
    if (ln == NULL)
        return NULL;
    se_segment_init(&seg);
    seg.name = "chain top";
    seg.length_m = 400.0;
    seg.speed_given_m_s = SPEED;
    memset(&feat, 0, sizeof feat);
    feat.name = "shackle S1";
    feat.kind = "shackle";
    feat.at_m = 250.0;
    seg.features = &feat;
    seg.n_features = 1;
    if (se_line_add_segment(ln, &seg, &err) != SE_OK)
        goto fail;
    se_segment_init(&seg);
    seg.name = "wire";
    seg.length_m = 600.0;
    seg.speed_given_m_s = SPEED;
    if (se_line_add_segment(ln, &seg, &err) != SE_OK || se_line_set_end(ln, "fixed", &err) != SE_OK ||
        se_line_prepare(ln, &err) != SE_OK)
        goto fail;
    return ln;
fail:
    fprintf(stderr, "line: %s\n", err.message);
    se_line_free(ln);
    return NULL;
}
