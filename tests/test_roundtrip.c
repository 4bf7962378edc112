/* strandecho tests: round trips through the library. Lines with known reflectors are simulated
 * (se_sim_uniform_line + se_simulate, every multiple included) and located (se_locate); distances,
 * polarities, classes and amplitudes are checked against what the line was built with, for three
 * wave speeds, five pulse shapes, three SNRs, four fractional delays and the three kinds of
 * reference.
 *
 * Oracles: the line itself (distance d, coefficient r); d = v t / 2 (REFERENCE.md 1, "Delay to
 * distance"); the amplitude seen at the sensor, r_i times the two-way transmissions (1 + r_j)(1 -
 * r_j) through every reflector j in front (REFERENCE.md 2, Goupillaud lattice: transmission 1 + r
 * down and 1 - r up); the reported 95 % intervals checked for coverage over 50 noise seeds. */
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

/* Most reflectors in one case. */
#define RT_MAX_REFL 4

typedef enum rt_ref { RT_REF_CHANNEL, RT_REF_SYNTHETIC, RT_REF_SELF } rt_ref;

/* One round-trip case: a line, a record and what to check. */
typedef struct rt_case {
    const char *name;
    double speed_m_s;
    double rate_hz;
    const char *pulse; /* pulse.h spec */
    se_quantity quantity;
    se_sim_reflector refl[RT_MAX_REFL];
    size_t n_refl;
    double end_m;    /* far end distance */
    double end_r;    /* far end coefficient (observed convention) */
    double source_r; /* source-end coefficient (observed convention) */
    double duration_s;
    double snr_db; /* energy SNR of the weakest primary (INFINITY: noise-free) */
    unsigned long seed;
    rt_ref ref;
    /* tolerances */
    double tol_lag_samples; /* |lag error| in samples */
    double tol_refl;        /* |reflection error|, absolute */
} rt_case;

/* What one run gave for one primary. */
typedef struct rt_outcome {
    int found;
    double err_m;    /* reported - true distance */
    double unc_m;    /* reported 95 % half width */
    double err_refl; /* reported - seen reflection */
    double snr_db;   /* reported SNR */
    size_t phantoms; /* events with no true arrival near them */
} rt_outcome;

static double rt_quantum(double rate_hz);
static double rt_seen_amplitude(const rt_case *c, size_t i);
static double rt_true_distance(const rt_case *c, double d);
static const se_event *rt_nearest(const se_locate_result *res, double d);
static int rt_run(const rt_case *c, rt_outcome *out, int verbose);
static void test_speeds_and_shapes(void);
static void test_fractional_delays(void);
static void test_references(void);
static void test_terminations(void);
static void test_moderate_snr(void);
static void test_coverage(void);

/* The simulator's fine time cell at the default oversampling (simulate.h: 1 / (rate * 1024)). */
static double rt_quantum(double rate_hz)
{
    return 1.0 / (rate_hz * (double)SE_SIM_DEFAULT_OVERSAMPLE);
}

/* Amplitude of primary i as it comes back to the sensor, before the (1 + r_s) sensor factor:
 * r_i prod_{j in front} (1 + r_j)(1 - r_j) (Goupillaud lattice, simulate.h). The reflectors of a
 * case are listed in increasing distance. */
static double rt_seen_amplitude(const rt_case *c, size_t i)
{
    double a = c->refl[i].reflection;
    size_t j;
    for (j = 0; j < i; j++)
        a *= (1.0 + c->refl[j].reflection) * (1.0 - c->refl[j].reflection);
    return a;
}

/* The distance the simulator really used: its one-way time d / v is quantised to the nearest fine
 * cell (simulate.h), so the true round trip is 2 round(d / v / q) q. */
static double rt_true_distance(const rt_case *c, double d)
{
    double q = rt_quantum(c->rate_hz);
    return c->speed_m_s * nearbyint(d / c->speed_m_s / q) * q;
}

/* The strongest event within one main-lobe half width of d (or the nearest one when none is that
 * close): in a noise-free record weak residues may sit closer than the echo itself. */
static const se_event *rt_nearest(const se_locate_result *res, double d)
{
    const se_event *best = NULL, *near = NULL;
    double win = res->resolution_m > 0.0 ? res->resolution_m : 0.0;
    size_t i;
    for (i = 0; i < res->n_events; i++) {
        const se_event *ev = &res->events[i];
        if (near == NULL || fabs(ev->distance_m - d) < fabs(near->distance_m - d))
            near = ev;
        if (fabs(ev->distance_m - d) <= win &&
            (best == NULL || fabs(ev->reflection) > fabs(best->reflection)))
            best = ev;
    }
    return best != NULL ? best : near;
}

/* Simulate, locate, check every primary of c. out[size: c->n_refl] (may be NULL). Returns the
 * number of failed checks of this run. */
static int rt_run(const rt_case *c, rt_outcome *out, int verbose)
{
    int before = se_test_failures;
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    double *resp = NULL, *inj = NULL, *synth = NULL;
    size_t frames, i, b = 0, e = 0, nsynth = 0;
    double energy = 0.0, weakest = INFINITY, pstart;
    char what[256];

    memset(&res, 0, sizeof res);
    memset(&rec, 0, sizeof rec);
    se_error_clear(&err);
    if (!CHECK(se_pulse_parse(c->pulse, &rec.pulse, &err) == SE_OK)) {
        fprintf(stderr, "  %s: %s\n", c->name, err.message);
        return se_test_failures - before;
    }
    if (!CHECK(se_sim_uniform_line(c->speed_m_s, c->refl, c->n_refl, c->end_m, c->end_r,
                                   c->source_r, 0.0, &ifs, &line, &err) == SE_OK)) {
        fprintf(stderr, "  %s: %s\n", c->name, err.message);
        return se_test_failures - before;
    }
    rec.rate_hz = c->rate_hz;
    rec.duration_s = c->duration_s;
    /* start off the sample grid by a third of a sample, so nothing lines up by accident */
    pstart = 2.0 * rec.pulse.duration_s + (1.0 / 3.0) / c->rate_hz;
    rec.pulse_start_s = pstart;
    rec.seed = c->seed;
    /* noise for the stated energy SNR of the weakest primary: eta = A^2 E_s / sigma^2
     * (REFERENCE.md 2, Kay 1993 ch. 3), E_s the energy of the sampled pulse */
    if (isfinite(c->snr_db)) {
        double *p = NULL;
        size_t np = 0;
        CHECK(se_pulse_render(&rec.pulse, c->rate_hz, &p, &np, &err) == SE_OK);
        for (i = 0; i < np; i++)
            energy += p[i] * p[i];
        free(p);
        for (i = 0; i < c->n_refl; i++) {
            double a = fabs(rt_seen_amplitude(c, i) * (1.0 + c->source_r));
            if (a < weakest)
                weakest = a;
        }
        rec.noise_rms = weakest * sqrt(energy) / pow(10.0, c->snr_db / 20.0);
    }
    frames = se_sim_frames(&rec);
    resp = malloc(frames * sizeof *resp);
    inj = malloc(frames * sizeof *inj);
    if (!CHECK(resp != NULL && inj != NULL))
        goto done;
    if (!CHECK(se_simulate(&line, &rec, resp, inj, frames, &err) == SE_OK)) {
        fprintf(stderr, "  %s: %s\n", c->name, err.message);
        goto done;
    }

    se_locate_config_init(&cfg);
    cfg.quantity = c->quantity;
    cfg.speed_m_s = c->speed_m_s;
    cfg.source_reflection = c->source_r;
    switch (c->ref) {
    case RT_REF_CHANNEL:
        /* the injected pulse channel, as the CLI does: its support, and where it starts */
        if (!CHECK(se_pulse_support(inj, frames, &b, &e, &err) == SE_OK))
            goto done;
        cfg.reference = inj + b;
        cfg.reference_length = e - b;
        cfg.reference_offset = b;
        cfg.reference_kind = SE_REF_CHANNEL;
        break;
    case RT_REF_SYNTHETIC:
        if (!CHECK(se_pulse_render(&rec.pulse, c->rate_hz, &synth, &nsynth, &err) == SE_OK))
            goto done;
        cfg.reference = synth;
        cfg.reference_length = nsynth;
        cfg.reference_offset = SIZE_MAX;
        cfg.reference_kind = SE_REF_SYNTHETIC;
        break;
    case RT_REF_SELF:
        cfg.reference_kind = SE_REF_SELF;
        break;
    }
    if (!CHECK(se_locate(resp, frames, c->rate_hz, &cfg, &res, &err) == SE_OK)) {
        fprintf(stderr, "  %s: se_locate: %s\n", c->name, err.message);
        goto done;
    }
    if (verbose) {
        printf("%s: %zu events, noise %.3g, threshold %.3g, dead zone %.4g m, t0 %.9g s\n", c->name,
               res.n_events, res.noise_level, res.threshold, res.dead_zone_m, res.t0_s);
        for (i = 0; i < res.n_events; i++)
            if (fabs(res.events[i].reflection) > 1e-2)
                printf("  %2zu %12.6f m +/- %.6f  lag %.5f  r %+.6f  snr %.1f  mult %d\n", i,
                       res.events[i].distance_m, res.events[i].distance_uncertainty_m,
                       res.events[i].lag_samples, res.events[i].reflection, res.events[i].snr_db,
                       res.events[i].multiple);
    }
    /* The direct arrival is the time origin. The correlation peaks where the reference window
     * lines up with the response: at the pulse start for a synthetic reference (it starts at t = 0
     * of the shape), at the window start b for a channel or self reference (the window is cut from
     * the same time base). */
    {
        double t0 = pstart;
        if (c->ref == RT_REF_CHANNEL)
            t0 = (double)b / c->rate_hz;
        else if (c->ref == RT_REF_SELF &&
                 CHECK(se_pulse_support(resp, frames, &b, &e, &err) == SE_OK))
            t0 = (double)b / c->rate_hz;
        /* noisy: 5 sigma of the direct arrival's own delay bound, noise / (A0 beta_d) samples */
        double beta = 2.0 * 3.14159265358979323846 * res.rms_bandwidth_hz / c->rate_hz;
        double tol = isfinite(c->snr_db) ? 0.01 + 5.0 * res.noise_level / beta : 0.01;
        snprintf(what, sizeof what, "%s: time origin (s)", c->name);
        CHECK_CLOSE(res.t0_s, t0, tol / c->rate_hz, what);
    }
    CHECK(res.quantity == c->quantity);
    CHECK_CLOSE(res.speed_m_s, c->speed_m_s, 1e-12 * c->speed_m_s, "speed reported back");

    for (i = 0; i < c->n_refl; i++) {
        double d = rt_true_distance(c, c->refl[i].distance_m);
        double seen = rt_seen_amplitude(c, i);
        double tol_m = c->tol_lag_samples * c->speed_m_s / (2.0 * c->rate_hz);
        const se_event *ev = rt_nearest(&res, d);
        int sign = seen >= 0.0 ? 1 : -1;
        /* impedance increase when the displacement-convention coefficient is negative
         * (REFERENCE.md 1: R = (Z1 - Z2)/(Z1 + Z2); force/voltage carry the opposite sign) */
        int increase = seen * se_quantity_sign(c->quantity) < 0.0;
        snprintf(what, sizeof what, "%s: reflector %zu at %.6g m (r %+.3g, seen %+.4g)", c->name, i,
                 d, c->refl[i].reflection, seen);
        if (!se_check(ev != NULL, __FILE__, __LINE__, what))
            continue;
        if (out != NULL) {
            out[i].found = fabs(ev->distance_m - d) < 5.0 * ev->distance_uncertainty_m + tol_m;
            out[i].err_m = ev->distance_m - d;
            out[i].unc_m = ev->distance_uncertainty_m;
            out[i].err_refl = ev->reflection - seen;
            out[i].snr_db = ev->snr_db;
        }
        if (!isfinite(c->snr_db) && tol_m > 0.0) {
            se_check_close(ev->distance_m, d, tol_m, __FILE__, __LINE__, what);
            se_check_close(ev->delay_s, 2.0 * d / c->speed_m_s, c->tol_lag_samples / c->rate_hz,
                           __FILE__, __LINE__, what);
        } else if (out == NULL) {
            /* in noise: within twice the reported 95 % half width (about 4 sigma), plus a floor */
            se_check_close(ev->distance_m, d, 2.0 * ev->distance_uncertainty_m + tol_m, __FILE__,
                           __LINE__, what);
        }
        se_check(ev->polarity == sign, __FILE__, __LINE__, what);
        se_check(ev->impedance_increase == increase, __FILE__, __LINE__, what);
        se_check(strcmp(se_event_class(&res, ev), se_class_name(c->quantity, increase)) == 0,
                 __FILE__, __LINE__, what);
        se_check(ev->multiple == 0, __FILE__, __LINE__, what);
        if (c->tol_refl > 0.0)
            se_check_close(ev->reflection, seen,
                           c->tol_refl +
                               (isfinite(c->snr_db) ? 5.0 * ev->reflection_uncertainty : 0.0),
                           __FILE__, __LINE__, what);
        /* d = v t / 2 holds between the reported fields themselves */
        se_check_close(ev->distance_m, 0.5 * c->speed_m_s * ev->delay_s, 1e-9 * d + 1e-12, __FILE__,
                       __LINE__, what);
        if (isfinite(c->snr_db) && c->n_refl == 1 && out == NULL)
            /* the reported SNR estimates the one we set: amplitude noise 1/sqrt(eta) and a MAD
             * over a few hundred independent lags, each under 1 dB; 3 dB is ~4 sigma */
            se_check_close(ev->snr_db, c->snr_db, 3.0, __FILE__, __LINE__, what);
    }
    /* No phantom events: every event must sit on a true arrival of the line (a primary or one of
     * its multiples, from the simulator's own impulse response), within a main-lobe half width or
     * three of its standard uncertainties. */
    {
        se_sim_arrival *arr = NULL;
        size_t narr = 0, phantoms = 0, j;
        double horizon = (double)frames / c->rate_hz;
        if (CHECK(se_sim_arrivals(&line, horizon, rt_quantum(c->rate_hz), &arr, &narr, &err) ==
                  SE_OK)) {
            for (i = 0; i < res.n_events; i++) {
                const se_event *ev = &res.events[i];
                double tol = res.resolution_s + 3.0 * ev->delay_uncertainty_s, best = INFINITY;
                for (j = 0; j < narr; j++)
                    if (fabs(arr[j].time_s - ev->delay_s) < best)
                        best = fabs(arr[j].time_s - ev->delay_s);
                if (best > tol) {
                    if (phantoms < 3)
                        fprintf(stderr,
                                "  %s: phantom event at %.6g m (r %+.3g, SNR %.1f dB): "
                                "nearest true arrival %.3g samples away\n",
                                c->name, ev->distance_m, ev->reflection, ev->snr_db,
                                best * c->rate_hz);
                    phantoms++;
                }
            }
        }
        snprintf(what, sizeof what, "%s: %zu of %zu events are phantoms (no true arrival there)",
                 c->name, phantoms, res.n_events);
        if (out != NULL)
            out[0].phantoms = phantoms; /* counted over many seeds by the caller */
        else
            se_check(phantoms == 0, __FILE__, __LINE__, what);
        free(arr);
    }
done:
    if (se_test_failures != before)
        fprintf(stderr, "  (case %s)\n", c->name);
    se_locate_result_free(&res);
    free(synth);
    free(resp);
    free(inj);
    free(ifs);
    return se_test_failures - before;
}

/* speeds used throughout: a tether at 141.4 m/s (T = 100 N on mu = 5e-3 kg/m, v = sqrt(T/mu),
 * REFERENCE.md 1 [calc]), studless chain axial 2069 m/s (REFERENCE.md 3, DNV-OS-E301 via the NREL
 * open mooring models), a solid-PE cable at VF 0.66 of the exact SI c (BIPM SI brochure, 9th ed.)
 */
#define V_TETHER 141.4
#define V_CHAIN 2069.0
#define V_CABLE (0.66 * SE_SPEED_OF_LIGHT)

/* Noise-free, pulse channel as the reference: three speeds, five shapes. Tolerances: a tenth of a
 * sample in lag when noise-free (the band-limited refinement is good to ~1e-6 sample alone,
 * detect.h; the rest is the CLEAN residue of neighbouring echoes and multiples) and 1e-3 in
 * reflection. */
static void test_speeds_and_shapes(void)
{
    static const rt_case cases[] = {
        {"tether hann:4ms",
         V_TETHER,
         48000.0,
         "hann:4ms",
         SE_Q_VELOCITY,
         {{23.7, -0.3}, {61.2, 0.25}},
         2,
         120.0,
         0.0,
         0.0,
         1.2,
         INFINITY,
         1,
         RT_REF_CHANNEL,
         0.02,
         1e-3},
        {"tether ricker:500Hz",
         V_TETHER,
         48000.0,
         "ricker:500Hz",
         SE_Q_VELOCITY,
         {{11.11, 0.4}, {47.0, -0.5}, {80.3, 0.2}},
         3,
         120.0,
         0.0,
         0.0,
         1.3,
         INFINITY,
         1,
         RT_REF_CHANNEL,
         0.02,
         1e-3},
        {"chain halfsine:2ms",
         V_CHAIN,
         20000.0,
         "halfsine:2ms",
         SE_Q_FORCE,
         {{150.0, 0.3}, {420.0, -0.2}, {700.0, 0.15}},
         3,
         900.0,
         0.0,
         0.0,
         0.8,
         INFINITY,
         1,
         RT_REF_CHANNEL,
         0.02,
         1e-3},
        {"chain burst:3@1kHz",
         V_CHAIN,
         20000.0,
         "burst:3@1kHz",
         SE_Q_VELOCITY,
         {{210.0, -0.25}, {555.5, 0.35}},
         2,
         900.0,
         0.0,
         0.0,
         0.7,
         INFINITY,
         1,
         RT_REF_CHANNEL,
         0.02,
         1e-3},
        {"cable gauss:8ns",
         V_CABLE,
         1e9,
         "gauss:8ns",
         SE_Q_VOLTAGE,
         {{37.3, 0.2}, {88.8, -1.0 / 3.0}},
         2,
         200.0,
         0.0,
         0.0,
         1.2e-6,
         INFINITY,
         1,
         RT_REF_CHANNEL,
         0.02,
         1e-3},
        {"cable hann:20ns single, synthetic ref",
         V_CABLE,
         1e9,
         "hann:20ns",
         SE_Q_CURRENT,
         {{60.0, 0.5}},
         1,
         200.0,
         0.0,
         0.0,
         1.2e-6,
         INFINITY,
         1,
         RT_REF_SYNTHETIC,
         0.02,
         1e-3},
        {"cable hann:20ns",
         V_CABLE,
         1e9,
         "hann:20ns",
         SE_Q_CURRENT,
         {{12.5, -0.1}, {60.0, 0.5}, {101.0, -0.2}},
         3,
         200.0,
         0.0,
         0.0,
         1.2e-6,
         INFINITY,
         1,
         RT_REF_CHANNEL,
         0.02,
         1e-3},
    };
    size_t k;
    for (k = 0; k < sizeof cases / sizeof cases[0]; k++)
        rt_run(&cases[k], NULL, getenv("RT_VERBOSE") != NULL);
}

/* Round trips falling at k + 0.0, 0.25, 0.5 and 0.73 samples after the direct arrival (d = v (k +
 * f) / (2 fs)), on the cable and the tether. Noise-free (tolerance 0.01 sample: the refinement
 * alone is good to ~1e-4 sample on these pulses, measured with se_refine_peak on an exact
 * correlation) and at 60 dB energy SNR (tolerance 5 reported standard uncertainties, at least 0.005
 * sample). */
static void test_fractional_delays(void)
{
    static const double fracs[4] = {0.0, 0.25, 0.5, 0.73};
    size_t f, s;
    for (s = 0; s < 2; s++) {
        for (f = 0; f < 4; f++) {
            rt_case c;
            char name[96];
            double snr = s == 0 ? INFINITY : 60.0;
            memset(&c, 0, sizeof c);
            /* the pulse starts 1/3 sample off the grid; the echo lag is measured from the direct
             * arrival, so k + f here is the lag itself */
            if (f % 2 == 0) {
                c.speed_m_s = V_CABLE;
                c.rate_hz = 1e9;
                c.pulse = "hann:20ns";
                c.quantity = SE_Q_VOLTAGE;
                c.refl[0].distance_m = V_CABLE * (700.0 + fracs[f]) / (2.0 * 1e9);
                c.refl[0].reflection = -0.4;
                c.end_m = 150.0;
                c.duration_s = 1.0e-6;
            } else {
                c.speed_m_s = V_TETHER;
                c.rate_hz = 48000.0;
                c.pulse = "hann:4ms";
                c.quantity = SE_Q_VELOCITY;
                c.refl[0].distance_m = V_TETHER * (30011.0 + fracs[f]) / (2.0 * 48000.0);
                c.refl[0].reflection = 0.35;
                c.end_m = 100.0;
                c.duration_s = 1.0;
            }
            snprintf(name, sizeof name, "fraction %.2f, %s, %s", fracs[f], c.pulse,
                     s == 0 ? "noise-free" : "60 dB");
            c.name = name;
            c.n_refl = 1;
            c.snr_db = snr;
            c.seed = 7 + (unsigned long)f;
            c.ref = RT_REF_CHANNEL;
            c.tol_lag_samples = s == 0 ? 0.01 : 0.02;
            c.tol_refl = s == 0 ? 1e-3 : 5e-3;
            rt_run(&c, NULL, getenv("RT_VERBOSE") != NULL);
        }
    }
}

/* The three references on one tether line at 40 dB: the pulse channel (reference_offset known), a
 * synthetic spec, and the direct arrival itself. Tolerance 0.1 sample (40 dB: sigma_tau about
 * 1 / (100 beta_d) = 0.03 sample for hann:4ms, beta_d ~ 0.3 rad/sample... see rt_run's SNR check)
 * and 0.01 in reflection (std(A)/A >= 1/sqrt(eta) = 1 %, Kay 1993 ch. 3, on the weakest). */
static void test_references(void)
{
    static const rt_ref refs[3] = {RT_REF_CHANNEL, RT_REF_SYNTHETIC, RT_REF_SELF};
    static const char *names[3] = {"reference: pulse channel", "reference: synthetic hann:4ms",
                                   "reference: self"};
    size_t k;
    for (k = 0; k < 3; k++) {
        rt_case c = {
            NULL, V_TETHER,       48000.0, "hann:4ms", SE_Q_VELOCITY, {{18.4, -0.35}, {52.9, 0.3}},
            2,    120.0,          0.0,     0.0,        1.0,           40.0,
            11,   RT_REF_CHANNEL, 0.1,     0.02};
        c.name = names[k];
        c.ref = refs[k];
        rt_run(&c, NULL, getenv("RT_VERBOSE") != NULL);
    }
}

/* A source end that reflects (r_s = +0.5 in velocity, a partly free end): the locator divides the
 * echoes by (1 + r_s) (locate.h), so the estimates are again the up-going amplitudes; and a
 * lossless far end that is free (+1) inside the record. 40 dB. */
static void test_terminations(void)
{
    rt_case c = {"source end r_s = +0.5",
                 V_CHAIN,
                 20000.0,
                 "hann:3ms",
                 SE_Q_VELOCITY,
                 {{300.0, -0.3}},
                 1,
                 650.0,
                 1.0,
                 0.5,
                 0.8,
                 40.0,
                 5,
                 RT_REF_CHANNEL,
                 0.1,
                 0.02};
    rt_run(&c, NULL, getenv("RT_VERBOSE") != NULL);
}

/* 25 dB on every speed: the events are found (tolerance 3 x the reported 95 % half width, i.e.
 * ~6 sigma, through rt_run's 0.5-sample lag bound relaxed here), signs right. */
static void test_moderate_snr(void)
{
    static const rt_case cases[] = {
        {"tether 25 dB",
         V_TETHER,
         48000.0,
         "hann:4ms",
         SE_Q_VELOCITY,
         {{33.3, -0.4}},
         1,
         120.0,
         0.0,
         0.0,
         0.7,
         25.0,
         3,
         RT_REF_CHANNEL,
         0.5,
         0.1},
        {"chain 25 dB gauss",
         V_CHAIN,
         20000.0,
         "gauss:3ms",
         SE_Q_FORCE,
         {{400.0, 0.3}},
         1,
         900.0,
         0.0,
         0.0,
         0.6,
         25.0,
         3,
         RT_REF_CHANNEL,
         0.5,
         0.1},
        {"cable 25 dB halfsine",
         V_CABLE,
         1e9,
         "halfsine:10ns",
         SE_Q_VOLTAGE,
         {{55.0, -0.3}},
         1,
         150.0,
         0.0,
         0.0,
         0.8e-6,
         25.0,
         3,
         RT_REF_CHANNEL,
         0.5,
         0.1},
    };
    size_t k;
    for (k = 0; k < sizeof cases / sizeof cases[0]; k++)
        rt_run(&cases[k], NULL, getenv("RT_VERBOSE") != NULL);
}

/* Coverage of the reported 95 % distance intervals over 50 noise seeds at 40 and 25 dB (one
 * reflector, tether, pulse channel). If the intervals are right, the count inside is Binomial(50,
 * 0.95): P(X <= 42) = 0.32 %, so we require >= 43 of 50 (a correct interval fails this 1 time in
 * 300; the seeds are fixed, so the test is deterministic). Intervals that are far too wide would
 * always pass that, so the spread is checked too: the RMS error over the mean reported sigma
 * (half width / 1.96) must lie in [0.6, 1.5] (for 50 Gaussian errors the RMS has a relative
 * standard deviation of about 1/sqrt(100) = 10 %, so the window is 4 to 5 of those). */
static void test_coverage(void)
{
    static const double snrs[2] = {40.0, 25.0};
    size_t s, k;
    for (s = 0; s < 2; s++) {
        size_t inside = 0, found = 0, phantoms = 0;
        double sum2 = 0.0, sumsig = 0.0, sumsnr = 0.0;
        char what[160];
        for (k = 0; k < 50; k++) {
            rt_case c = {
                "coverage", V_TETHER,       48000.0, "hann:4ms", SE_Q_VELOCITY, {{27.31, -0.3}},
                1,          120.0,          0.0,     0.0,        0.5,           25.0,
                0,          RT_REF_CHANNEL, 0.0,     0.0};
            rt_outcome o;
            memset(&o, 0, sizeof o);
            c.snr_db = snrs[s];
            c.seed = 1000 * (s + 1) + (unsigned long)k;
            rt_run(&c, &o, 0);
            phantoms += o.phantoms;
            if (!o.found)
                continue;
            found++;
            inside += fabs(o.err_m) <= o.unc_m;
            sum2 += o.err_m * o.err_m;
            sumsig += o.unc_m / 1.959963984540054;
            sumsnr += o.snr_db;
        }
        /* false alarms: the target is 0.01 per record (locate.h default), so 0.5 expected over 50
         * records; Poisson(0.5) gives P(X >= 4) = 0.18 % */
        snprintf(what, sizeof what, "coverage at %.0f dB: %zu false events over 50 records (<= 3)",
                 snrs[s], phantoms);
        se_check(phantoms <= 3, __FILE__, __LINE__, what);
        /* the mean reported SNR estimates the set one (50 runs: ~0.15 dB standard error) */
        if (found > 0) {
            snprintf(what, sizeof what, "coverage at %.0f dB: mean reported SNR", snrs[s]);
            se_check_close(sumsnr / (double)found, snrs[s], 1.0, __FILE__, __LINE__, what);
        }
        snprintf(what, sizeof what, "coverage at %.0f dB: %zu of 50 found", snrs[s], found);
        se_check(found == 50, __FILE__, __LINE__, what);
        snprintf(what, sizeof what,
                 "coverage at %.0f dB: %zu of %zu errors inside the 95 %% interval "
                 "(need >= 43 of 50)",
                 snrs[s], inside, found);
        se_check(inside >= 43, __FILE__, __LINE__, what);
        if (found > 0) {
            double ratio = sqrt(sum2 / (double)found) / (sumsig / (double)found);
            snprintf(what, sizeof what, "coverage at %.0f dB: RMS error / reported sigma = %.3f",
                     snrs[s], ratio);
            se_check(ratio >= 0.6 && ratio <= 1.5, __FILE__, __LINE__, what);
            if (getenv("RT_VERBOSE"))
                printf("%s; %zu inside\n", what, inside);
        }
    }
}

int main(void)
{
    test_speeds_and_shapes();
    test_fractional_delays();
    test_references();
    test_terminations();
    test_moderate_snr();
    test_coverage();
    return se_test_done("test_roundtrip");
}
