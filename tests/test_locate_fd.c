/* strandecho tests: the locator on recordings made by the finite-difference model, physics it does
 * not share (fdmodel.h; the locator was developed beside the lattice model of simulate.h).
 *
 * The recordings are the committed fixtures/validation/{tether,cable,mooring-leg}-fd.wav, made by
 * fixtures/validation/make-validation-data.sh (`strandecho simulate --model fd`). This test rebuilds
 * the same three models in-process (fdline.h), checks each committed recording is what the model
 * makes (to float32 rounding), locates the recording as shipped and compares every event with the
 * true delay of its feature on the FD grid, se_fd_grid_delay() (docs/fd-model.md section 2: the
 * grid places features on nodes by cumulative travel time; its delays are the truth).
 *
 * Accuracy required (the "meets its accuracy"), measured values in the comments:
 *  - tether, 141.42 m/s transverse at 48 kHz (1.47 mm per sample of round trip): every feature
 *    within 3 mm ("a few mm");
 *  - cable, VF 0.66 at 1 GS/s (9.9 cm per sample), features at thirds of a sample (3 FD steps per
 *    sample): every delay within 0.1 sample ("a fraction of a sample");
 *  - mooring leg (chain / polyester / chain, axial): each junction and the end matched to its
 *    expected event and within its stated distance uncertainty, delays within 0.1 sample.
 * Each case is located twice: the fixture as shipped (noise-free, float32) and the in-process run
 * with Gaussian noise of 1e-3 of the direct peak. Measured (gcc, this tree): tether within 0.24 mm
 * (the end, beside its own multiple; the steps 0.00 mm noise-free, 0.12 mm with noise); cable
 * within 0.042 sample; mooring leg within 0.016 sample. The script is also rerun through the CLI
 * and its output compared with the committed files. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/fdline.h"
#include "strandecho/fdmodel.h"
#include "strandecho/line.h"
#include "strandecho/locate.h"
#include "strandecho/pulse.h"
#include "strandecho/recording.h"
#include "strandecho/wave.h"
#include "testutil.h"

#define GAIN 0.5 /* the CLI's default --gain */
#define MAXF 4

typedef struct lfd_case {
    const char *name;
    const char *fixture;   /* under fixtures/validation */
    const char *line_file; /* NULL: uniform line */
    se_quantity q;
    double speed, z1, length; /* uniform line */
    const char *end;
    double refl_d[MAXF], refl_r[MAXF]; /* --reflector D:R */
    double step_d[MAXF], step_ratio[MAXF]; /* --step D:RATIO */
    const char *pulse;
    double rate, duration, pulse_start;
    size_t cells;
    double feature_d[MAXF]; /* features to find, distances as built; 0 ends */
    double tol_m;           /* > 0: distance tolerance, m */
    double tol_samples;     /* > 0: delay tolerance, samples */
} lfd_case;

static const lfd_case g_cases[] = {
    {"tether", "tether-fd.wav", NULL, SE_Q_VELOCITY, 141.4213562373095, 707.1067811865476, 60.0,
     "fixed", {17.30, 38.90, 0, 0}, {-0.30, 0.15, 0, 0}, {0}, {0}, "hann:20ms", 48000.0, 1.0,
     0.040, 0, {17.30, 38.90, 60.0, 0}, 3e-3, 0.0},
    {"cable", "cable-fd.wav", NULL, SE_Q_VOLTAGE, 0.66 * SE_SPEED_OF_LIGHT, 50.0, 150.0, "open",
     {101.5, 0, 0, 0}, {-0.1, 0, 0, 0}, {48.0, 0, 0, 0}, {1.5, 0, 0, 0}, "gauss:20ns", 1e9, 1.75e-6,
     40e-9, 60, {48.0, 101.5, 150.0, 0}, 0.0, 0.1},
    {"mooring leg", "mooring-leg-fd.wav", "mooring-leg.yaml", SE_Q_VELOCITY, 0, 0, 0, NULL, {0},
     {0}, {0}, {0}, "hann:5ms", 20000.0, 1.3, 0.010, 0, {120.0, 1020.0, 1320.0, 0}, 0.0, 0.1},
};

static void run_case(const lfd_case *k)
{
    char path[1024], what[200];
    se_error err;
    se_line *ln = NULL;
    se_fd_line *m = NULL;
    se_fd_config cfg;
    se_recording *rec = NULL;
    se_locate_config lc;
    se_locate_result res;
    se_expected_event *exp = NULL;
    size_t nexp = 0, frames, i, j, b, e;
    double *sim = NULL, peak, maxdiff = 0.0, simpeak = 0.0;
    int pass;

    se_error_clear(&err);
    memset(&cfg, 0, sizeof cfg);
    memset(&res, 0, sizeof res);
    if (!CHECK(se_pulse_parse(k->pulse, &cfg.pulse, &err) == SE_OK))
        return;
    if (k->line_file != NULL) {
        char rel[256];
        snprintf(rel, sizeof rel, "fixtures/validation/%s", k->line_file);
        ln = se_line_read(se_test_source_path(path, sizeof path, rel), &err);
        if (!CHECK(ln != NULL)) {
            fprintf(stderr, "  %s: %s\n", k->name, err.message);
            return;
        }
        /* the hanging-step size the CLI uses */
        m = se_fd_line_from_line(ln, fmax(0.25 / k->rate, cfg.pulse.duration_s / 16.0), &err);
    } else {
        double rs = 0.0, rend;
        if (!CHECK(se_termination_parse(k->end, k->q, &rend, &err) == SE_OK))
            return;
        m = se_fd_line_uniform(k->speed, k->z1, k->length, k->q, rs, rend, &err);
        for (i = 0; m != NULL && i < MAXF && k->refl_d[i] > 0.0; i++)
            CHECK(se_fd_line_add_reflector(m, k->refl_d[i], k->refl_r[i], &err) == SE_OK);
        for (i = 0; m != NULL && i < MAXF && k->step_d[i] > 0.0; i++)
            CHECK(se_fd_line_add_step(m, k->step_d[i], k->step_ratio[i], &err) == SE_OK);
    }
    if (!CHECK(m != NULL)) {
        fprintf(stderr, "  %s: %s\n", k->name, err.message);
        goto done;
    }
    se_fd_line_config(m, &cfg);
    cfg.pulse_amplitude_n = 1.0;
    cfg.pulse_start_s = k->pulse_start;
    cfg.rate_hz = k->rate;
    cfg.duration_s = k->duration;
    cfg.min_cells_per_pulse = k->cells;

    /* the committed recording is what this model makes */
    {
        char rel[256];
        snprintf(rel, sizeof rel, "fixtures/validation/%s", k->fixture);
        rec = se_recording_read(se_test_source_path(path, sizeof path, rel), NULL, &err);
    }
    if (!CHECK(rec != NULL)) {
        fprintf(stderr, "  %s: %s (regenerate with fixtures/validation/make-validation-data.sh)\n",
                k->name, err.message);
        goto done;
    }
    frames = se_fd_frames(&cfg);
    snprintf(what, sizeof what, "%s: fixture has the model's %zu frames at its rate", k->name, frames);
    if (!CHECK(rec->frames == frames && rec->channels == 2 && rec->rate == k->rate)) {
        fprintf(stderr, "  %s\n", what);
        goto done;
    }
    sim = calloc(frames, sizeof *sim);
    if (!CHECK(sim != NULL) || !CHECK(se_fd_simulate(&cfg, sim, NULL, frames, NULL, &err) == SE_OK) ||
        !CHECK(se_fd_direct_peak(&cfg, &peak, &err) == SE_OK)) {
        fprintf(stderr, "  %s: %s\n", k->name, err.message);
        goto done;
    }
    for (i = 0; i < frames; i++) {
        double want = GAIN * sim[i] / peak;
        maxdiff = fmax(maxdiff, fabs(rec->data[i] - want));
        simpeak = fmax(simpeak, fabs(want));
    }
    snprintf(what, sizeof what, "%s: fixture channel 1 = the in-process FD run (float32)", k->name);
    CHECK_CLOSE(maxdiff / simpeak, 0.0, 1e-6, what);
    CHECK_CLOSE(simpeak, GAIN, 0.02 * GAIN, "direct wave normalised to the gain");

    /* locate the recording as shipped, then the in-process run with noise 1e-3 of the direct peak
     * (seed 5): the noisy case must meet the same tolerances */
    for (i = 0; i < frames; i++)
        sim[i] = GAIN * sim[i] / peak;
    if (!CHECK(se_fd_add_noise(sim, frames, GAIN * 1e-3, 5, &err) == SE_OK))
        goto done;
    for (pass = 0; pass < 2; pass++) {
        const double *trace = pass == 0 ? rec->data : sim;
        const char *tag = pass == 0 ? "fixture" : "noisy";
        se_locate_result_free(&res);
        free(exp);
        exp = NULL;
    se_locate_config_init(&lc);
    lc.quantity = k->q;
    if (ln != NULL) {
        lc.map = se_line_distmap(ln);
        lc.source_reflection = ln->source_end_r;
        if (!CHECK(se_line_expected_events(ln, &exp, &nexp, &err) == SE_OK))
            goto done;
        lc.expected = exp;
        lc.n_expected = nexp;
    } else {
        lc.speed_m_s = k->speed;
    }
    if (!CHECK(se_pulse_support(rec->data + frames, frames, &b, &e, &err) == SE_OK))
        goto done;
    lc.reference = rec->data + frames + b;
    lc.reference_length = e - b;
    lc.reference_offset = b;
    lc.reference_kind = SE_REF_CHANNEL;
    if (!CHECK(se_locate(trace, frames, rec->rate, &lc, &res, &err) == SE_OK)) {
        fprintf(stderr, "  %s: %s\n", k->name, err.message);
        goto done;
    }
    for (j = 0; j < MAXF && k->feature_d[j] > 0.0; j++) {
        double tau, best = INFINITY, dtrue, d_err, t_err;
        const se_event *ev = NULL;
        if (!CHECK(se_fd_grid_delay(&cfg, k->feature_d[j], &tau, &err) == SE_OK))
            goto done;
        for (i = 0; i < res.n_events; i++) {
            double dt = fabs(res.events[i].delay_s - 2.0 * tau);
            if (!res.events[i].multiple && dt < best) {
                best = dt;
                ev = &res.events[i];
            }
        }
        snprintf(what, sizeof what, "%s %s: an event for the feature at %g m", k->name, tag,
                 k->feature_d[j]);
        if (!se_check(ev != NULL && best < 10.0 / k->rate, __FILE__, __LINE__, what))
            continue;
        t_err = (ev->delay_s - 2.0 * tau) * k->rate;
        dtrue = ln != NULL ? NAN : k->speed * tau;
        d_err = ev->distance_m - dtrue;
        printf("  %-12s %-7s %8.3f m: grid delay %.9g s, located %.9g s (%+.4f samples)", k->name,
               tag, k->feature_d[j], 2.0 * tau, ev->delay_s, t_err);
        if (ln == NULL)
            printf(", distance %.5f m vs grid %.5f m (%+.2f mm)", ev->distance_m, dtrue, 1e3 * d_err);
        printf("\n");
        if (k->tol_m > 0.0) {
            snprintf(what, sizeof what, "%s %s: distance at %g m within %g mm of the grid's", k->name, tag,
                     k->feature_d[j], 1e3 * k->tol_m);
            CHECK_CLOSE(d_err, 0.0, k->tol_m, what);
        }
        if (k->tol_samples > 0.0) {
            snprintf(what, sizeof what, "%s %s: delay at %g m within %g sample of the grid's", k->name, tag,
                     k->feature_d[j], k->tol_samples);
            CHECK_CLOSE(t_err, 0.0, k->tol_samples, what);
        }
        if (ln != NULL) {
            /* the junction is found as the expected event, within its stated uncertainty */
            snprintf(what, sizeof what, "%s: event at %g m matched to an expected event", k->name,
                     k->feature_d[j]);
            if (se_check(ev->expected >= 0 && (size_t)ev->expected < nexp, __FILE__, __LINE__,
                         what)) {
                const se_expected_event *x = &exp[ev->expected];
                snprintf(what, sizeof what, "%s: %s within its distance uncertainty (%.3g m)",
                         k->name, x->name, x->distance_sigma_m);
                CHECK_CLOSE(ev->distance_m, x->distance_m, fmax(x->distance_sigma_m, 1e-3), what);
                CHECK_CLOSE(x->distance_m, k->feature_d[j], 1e-6, "expected event where built");
            }
        }
    }
    }
done:
    se_locate_result_free(&res);
    free(exp);
    free(sim);
    se_recording_free(rec);
    se_fd_line_free(m);
    se_line_free(ln);
}

/* The committed recordings are what the script makes now through the CLI (`simulate --model fd`):
 * regenerate them into the build tree and compare sample by sample (float32 files; 1e-6 allows a
 * compiler's last-bit differences). */
static void test_script_regenerates(void)
{
    static const char *const names[] = {"tether-fd.wav", "cable-fd.wav", "mooring-leg-fd.wav"};
    char cli[1024], dir[1024], script[1024], cmd[8192], out[4096], a[1200], b[2400], what[256];
    char *slash;
    size_t i, j;
    int rc;
    snprintf(cli, sizeof cli, "%s", se_test_cli());
    slash = strrchr(cli, '/');
    if (slash == NULL)
        snprintf(cli, sizeof cli, ".");
    else
        *slash = '\0';
    se_test_binary_path(dir, sizeof dir, "validation-fd");
    se_test_source_path(script, sizeof script, "fixtures/validation/make-validation-data.sh");
    snprintf(cmd, sizeof cmd, "mkdir -p '%s' && sh '%s' '%s' '%s'", dir, script, cli, dir);
    rc = se_test_run(cmd, out, sizeof out);
    if (!CHECK(rc == 0)) {
        fprintf(stderr, "  %s\n  %s\n", cmd, out);
        return;
    }
    for (i = 0; i < sizeof names / sizeof names[0]; i++) {
        se_error err;
        se_recording *x, *y;
        double worst = 0.0, peak = 0.0;
        char rel[256];
        snprintf(rel, sizeof rel, "fixtures/validation/%s", names[i]);
        se_test_source_path(a, sizeof a, rel);
        snprintf(b, sizeof b, "%s/%s", dir, names[i]);
        x = se_recording_read(a, NULL, &err);
        y = se_recording_read(b, NULL, &err);
        snprintf(what, sizeof what, "%s: the script's output matches the committed file", names[i]);
        if (se_check(x != NULL && y != NULL && x->frames == y->frames && x->channels == y->channels,
                     __FILE__, __LINE__, what)) {
            for (j = 0; j < x->frames * x->channels; j++) {
                worst = fmax(worst, fabs(x->data[j] - y->data[j]));
                peak = fmax(peak, fabs(x->data[j]));
            }
            CHECK_CLOSE(worst / peak, 0.0, 1e-6, what);
        }
        se_recording_free(x);
        se_recording_free(y);
    }
}

int main(void)
{
    size_t i;
    test_script_regenerates();
    for (i = 0; i < sizeof g_cases / sizeof g_cases[0]; i++)
        run_case(&g_cases[i]);
    return se_test_done("test_locate_fd");
}
