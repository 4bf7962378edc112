/* The locator on a skin-effect cable (se_locate_config.skin_k_s05_per_m, skin.h): a cable
 * simulated by the lattice with every arrival shaped by the loss of its own path
 * (se_simulate_skin), located three ways. Without the correction each distorted echo comes out
 * late and split into several events (the failure this guards against, asserted so the test
 * cannot pass by accident); with K given, and with K estimated, exactly the three reflectors are
 * reported, each within its own stated 95 % interval (plus a small margin) of the lattice's
 * distance, with the pieces counted as explained. Tolerances are common practice, no source. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/fdline.h"
#include "strandecho/locate.h"
#include "strandecho/pulse.h"
#include "strandecho/simulate.h"
#include "strandecho/wave.h"
#include "testutil.h"

#define FS 1e9
#define SKIN_K 4e-7 /* s^0.5/m: 6.2 dB per 100 m at 100 MHz taken as conductor loss */
#define NREFL 3

static const double where[NREFL] = {120.0, 250.0, 330.0};
static const double coef[NREFL] = {0.3, -0.4, 0.5};

/* Locate the cable with skin loss k (0 = none, NaN = estimate); returns 0 on failure. */
static int run(double k, double noise, se_locate_result *res)
{
    const double v = 0.66 * SE_SPEED_OF_LIGHT;
    se_sim_reflector rf[NREFL];
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_locate_config cfg;
    se_error err;
    double *x = NULL, *pl = NULL;
    size_t n, i, b, e;
    int ok = 0;

    memset(&rec, 0, sizeof rec);
    memset(res, 0, sizeof *res);
    for (i = 0; i < NREFL; i++) {
        rf[i].distance_m = where[i];
        rf[i].reflection = coef[i];
    }
    rec.rate_hz = FS;
    rec.duration_s = 3.8e-6;
    rec.pulse_start_s = 40e-9;
    rec.noise_rms = noise;
    rec.seed = 5;
    if (!CHECK(se_pulse_parse("gauss:16ns", &rec.pulse, &err) == SE_OK) ||
        !CHECK(se_sim_uniform_line(v, rf, NREFL, 5000.0, 0.0, 0.0, 0.0, &ifs, &line, &err) ==
               SE_OK))
        return 0;
    n = se_sim_frames(&rec);
    x = malloc(n * sizeof *x);
    pl = malloc(n * sizeof *pl);
    if (!CHECK(x != NULL && pl != NULL) ||
        !CHECK(se_simulate_skin(&line, &rec, SKIN_K, v, x, pl, n, &err) == SE_OK) ||
        !CHECK(se_pulse_support(pl, n, &b, &e, &err) == SE_OK))
        goto out;
    se_locate_config_init(&cfg);
    cfg.quantity = SE_Q_VOLTAGE;
    cfg.speed_m_s = v;
    cfg.reference = pl + b;
    cfg.reference_length = e - b;
    cfg.reference_offset = b;
    cfg.reference_kind = SE_REF_CHANNEL;
    cfg.pilot = pl;
    cfg.skin_k_s05_per_m = k;
    if (!CHECK(se_locate(x, n, FS, &cfg, res, &err) == SE_OK)) {
        fprintf(stderr, "  %s\n", err.message);
        goto out;
    }
    ok = 1;
out:
    free(x);
    free(pl);
    free(ifs);
    return ok;
}

static void show(const char *what, const se_locate_result *res)
{
    size_t i;
    printf("%s: %zu events, K %.5g (sd %.2g, estimated %d), %zu explained\n", what, res->n_events,
           res->skin_k_s05_per_m, res->skin_k_uncertainty, res->skin_k_estimated,
           res->skin_explained);
    for (i = 0; i < res->n_events && i < 12; i++)
        printf("  %9.4f m +/- %.4f  %+.4f  skin %d shift %.3g ns\n", res->events[i].distance_m,
               res->events[i].distance_uncertainty_m, res->events[i].reflection,
               res->events[i].skin_corrected, res->events[i].skin_shift_s * 1e9);
}

/* Exactly the three reflectors, each within its stated interval (+ 5 mm) of the truth. */
static void check_three(const se_locate_result *res, const char *what)
{
    size_t i;
    if (!CHECK(res->n_events == NREFL)) {
        fprintf(stderr, "  %s: %zu events\n", what, res->n_events);
        return;
    }
    for (i = 0; i < NREFL; i++) {
        const se_event *ev = &res->events[i];
        CHECK(ev->skin_corrected);
        CHECK(ev->polarity == (coef[i] > 0.0 ? 1 : -1));
        CHECK(ev->skin_shift_s > 0.0); /* the plain matched filter was late */
        CHECK_CLOSE(ev->distance_m, where[i], ev->distance_uncertainty_m + 0.005,
                    "corrected distance within its stated 95 % interval");
    }
    CHECK(res->skin_explained > 0);
}

int main(void)
{
    se_locate_result res;
    size_t i, near_first = 0;

    /* 1. No correction: late and split (what the correction is for). */
    if (run(0.0, 0.002, &res)) {
        show("lossless templates", &res);
        CHECK(res.n_events > NREFL);
        CHECK(isnan(res.skin_k_s05_per_m) && res.skin_explained == 0);
        for (i = 0; i < res.n_events; i++)
            if (fabs(res.events[i].distance_m - where[0]) < 5.0)
                near_first++;
        CHECK(near_first >= 2);
        CHECK(res.n_events > 0 && res.events[0].distance_m - where[0] > 0.1);
    }
    se_locate_result_free(&res);

    /* 2. K given. */
    if (run(SKIN_K, 0.002, &res)) {
        show("K given", &res);
        check_three(&res, "K given");
        CHECK(!res.skin_k_estimated && res.skin_k_s05_per_m == SKIN_K);
        CHECK(isnan(res.skin_k_uncertainty));
    }
    se_locate_result_free(&res);

    /* 3. K estimated from the echoes' shapes. */
    if (run(NAN, 0.002, &res)) {
        show("K estimated", &res);
        check_three(&res, "K estimated");
        CHECK(res.skin_k_estimated && res.skin_fit_echoes >= 2);
        CHECK(res.skin_k_uncertainty > 0.0);
        CHECK_CLOSE(res.skin_k_s05_per_m, SKIN_K, 4.0 * res.skin_k_uncertainty,
                    "estimated K within 4 stated sigma");
    }
    se_locate_result_free(&res);
    return se_test_done("test_skin_locate");
}
