/* strandecho tests: the finite-difference model (fdmodel.h, built by fdline.h) against the lattice
 * model (simulate.h) on stepped lines.
 *
 * The two models share no code. The FD model integrates mu y_tt = (T y_x)_x; the lattice scatters
 * up- and down-going waves at interfaces of coefficient r (P.L. Goupillaud, Geophysics 26(6), 1961).
 * A step Z1 -> Z2 is the lattice interface of observed coefficient
 *     r = sign(q) (Z1 - Z2)/(Z1 + Z2)           (REFERENCE.md section 1 sign rule)
 * with sign(q) = +1 for velocity and current, -1 for force and voltage. The sensor at the source end
 * records, per unit launched wave, p + (1 + r_s) sum_j a_j p(t - t_j) in the lattice; the FD record
 * is that times the launched amplitude 1/(k Z1) (velocity; k = 2 for a matched source, 1 for a free
 * one) or 1/k (force, voltage). So fd * (k Z1) (or fd * k) must equal the lattice record.
 *
 * Tolerances (stated, and why):
 *  - features on FD grid nodes and on lattice cells (Courant 1, K FD steps per sample, lattice
 *    quantum dt / 1024): both models are exact, the traces agree to 1e-9 of the direct peak
 *    (roundoff of some 10^7 node updates) plus one lattice cell of rounding of an interface time,
 *    cell max|p'| sum_j |(1 + r_s) a_j| in the cable cases (5 ns pulse, 3 FD steps per sample; the
 *    10 kHz cases are held to 1e-9);
 *  - features anywhere: each FD arrival can be up to one step dt early or late (cumulative travel
 *    times rounded to nodes, docs/fd-model.md section 2), so the difference is bounded by
 *    (dt + lattice quantum) max|p'| sum_j |(1 + r_s) a_j|, the sum over the lattice arrivals; and
 *    comparing the lattice made with the FD grid delays (se_fd_grid_delay) shrinks it to 1e-9. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/fdline.h"
#include "strandecho/fdmodel.h"
#include "strandecho/pulse.h"
#include "strandecho/simulate.h"
#include "strandecho/wave.h"
#include "testutil.h"

#define RATE 10000.0
#define MAXSTEPS 4

typedef struct fvl_case {
    const char *name;
    se_quantity q;
    double speed;     /* m/s */
    double z1;        /* N s/m or ohm */
    double length;    /* m */
    const char *source; /* termination word */
    const char *end;    /* termination word or coefficient */
    double step_d[MAXSTEPS];  /* distances; 0 ends the list */
    double ratio[MAXSTEPS];   /* Z2/Z1 at each */
    int on_grid;      /* 1: distances are snapped to FD nodes (exact comparison) */
    double duration;  /* s */
    double rate;      /* Hz */
    const char *pulse;
} fvl_case;

static const fvl_case g_cases[] = {
    /* velocity, matched source, heavier then lighter stretch, fixed end: the demo's kind of line */
    {"velocity/matched/fixed", SE_Q_VELOCITY, 100.0, 10.0, 30.0, "continuing", "fixed",
     {7.0, 16.0, 0, 0}, {2.0, 0.6, 0, 0}, 1, 0.8, RATE, "hann:2ms"},
    /* velocity, free source and free end: every multiple stays in the line */
    {"velocity/free/free", SE_Q_VELOCITY, 100.0, 10.0, 20.0, "free", "free",
     {5.0, 12.5, 0, 0}, {3.0, 0.5, 0, 0}, 1, 0.9, RATE, "hann:2ms"},
    /* force, matched source: coefficients change sign */
    {"force/matched/fixed", SE_Q_FORCE, 100.0, 10.0, 25.0, "matched", "fixed",
     {6.0, 14.0, 19.0, 0}, {4.0, 0.25, 1.5, 0}, 1, 0.7, RATE, "halfsine:2ms"},
    /* electrical analogue: 50 ohm, VF 0.66, a 75 ohm section, open end (fixed in the FD model) */
    {"voltage/matched/open", SE_Q_VOLTAGE, 0.66 * SE_SPEED_OF_LIGHT, 50.0, 60.0, "matched", "open",
     {20.0, 40.0, 0, 0}, {1.5, 1.0 / 1.5, 0, 0}, 1, 0.7e-6, 1e9, "gauss:5ns"},
    /* current, short end (free in the FD model) */
    {"current/matched/short", SE_Q_CURRENT, 0.66 * SE_SPEED_OF_LIGHT, 50.0, 60.0, "matched", "short",
     {25.0, 0, 0, 0}, {0.5, 0, 0, 0}, 1, 0.7e-6, 1e9, "gauss:5ns"},
    /* velocity, features off the grid, a partial end (a step into an absorbing tail) */
    {"velocity/off-grid/partial end", SE_Q_VELOCITY, 100.0, 10.0, 30.0, "continuing", "0.4",
     {7.013, 16.2071, 0, 0}, {2.0, 0.6, 0, 0}, 0, 0.8, RATE, "hann:2ms"},
    /* force, free source: the line force at a free driven end is the applied force, no echo */
    {"force/free source/no echo", SE_Q_FORCE, 100.0, 10.0, 20.0, "free", "fixed",
     {5.0, 0, 0, 0}, {3.0, 0, 0, 0}, 1, 0.6, RATE, "hann:2ms"},
};

/* max |p'| of the pulse, by central differences on a fine grid. */
static double max_slope(const se_pulse_shape *p)
{
    double best = 0.0, h = p->duration_s / 20000.0;
    size_t i;
    for (i = 1; i < 20000; i++) {
        double d = (se_pulse_value(p, (double)(i + 1) * h) - se_pulse_value(p, (double)(i - 1) * h)) /
                   (2.0 * h);
        best = fmax(best, fabs(d));
    }
    return best;
}

static void run_case(const fvl_case *k)
{
    se_error err;
    se_pulse_shape pulse;
    se_fd_line *m = NULL;
    se_fd_config cfg;
    se_fd_stats st;
    se_sim_reflector refl[MAXSTEPS];
    se_sim_interface *ifs = NULL;
    se_sim_line line;
    se_sim_record rec;
    se_sim_arrival *arr = NULL;
    double rs, rend, d[MAXSTEPS], zs[MAXSTEPS + 1], *fd = NULL, *lat = NULL, scale, sum = 0.0;
    double maxdiff = 0.0, peak = 0.0, tol, length;
    size_t nsteps = 0, i, frames, narr = 0, kfd, imax = 0;
    int sign = se_quantity_sign(k->q);
    char what[160];

    se_error_clear(&err);
    memset(&cfg, 0, sizeof cfg);
    memset(&rec, 0, sizeof rec);
    if (!CHECK(se_pulse_parse(k->pulse, &pulse, &err) == SE_OK) ||
        !CHECK(se_termination_parse(k->source, k->q, &rs, &err) == SE_OK) ||
        !CHECK(se_termination_parse(k->end, k->q, &rend, &err) == SE_OK))
        return;
    while (nsteps < MAXSTEPS && k->step_d[nsteps] > 0.0)
        nsteps++;

    /* grid first (uniform line, no steps): it fixes dt, so on-grid distances can be snapped */
    m = se_fd_line_uniform(k->speed, k->z1, k->length, k->q, rs, rend, &err);
    if (!CHECK(m != NULL)) {
        fprintf(stderr, "  %s: %s\n", k->name, err.message);
        return;
    }
    se_fd_line_config(m, &cfg);
    cfg.pulse = pulse;
    cfg.pulse_amplitude_n = 1.0;
    cfg.pulse_start_s = 2.0 * pulse.duration_s;
    cfg.rate_hz = k->rate;
    cfg.duration_s = k->duration;
    if (!CHECK(se_fd_plan(&cfg, &st, &err) == SE_OK))
        goto done;
    /* K FD steps per sample; the lattice cell is dt / 1024, so on-grid features are on both grids */
    kfd = (size_t)llround(1.0 / (st.dt_s * k->rate));
    CHECK(fabs(st.dt_s * k->rate * (double)kfd - 1.0) < 1e-12);
    length = k->length;
    if (k->on_grid) {
        length = round(length / (k->speed * st.dt_s)) * k->speed * st.dt_s;
        se_fd_line_free(m);
        m = se_fd_line_uniform(k->speed, k->z1, length, k->q, rs, rend, &err);
        if (!CHECK(m != NULL))
            return;
    }
    zs[0] = k->z1;
    for (i = 0; i < nsteps; i++) {
        d[i] = k->step_d[i];
        if (k->on_grid)
            d[i] = round(d[i] / (k->speed * st.dt_s)) * k->speed * st.dt_s;
        if (!CHECK(se_fd_line_add_step(m, d[i], k->ratio[i], &err) == SE_OK))
            goto done;
        zs[i + 1] = zs[i] * k->ratio[i];
        /* the lattice interface of a step: the observed-convention (Z1 - Z2)/(Z1 + Z2) */
        refl[i].distance_m = d[i];
        refl[i].reflection = se_reflection_observed(k->q, zs[i], zs[i + 1]);
        CHECK_CLOSE(refl[i].reflection, sign * (zs[i] - zs[i + 1]) / (zs[i] + zs[i + 1]), 1e-15,
                    "lattice coefficient of a step = sign(q) (Z1-Z2)/(Z1+Z2)");
    }
    se_fd_line_config(m, &cfg);

    frames = se_fd_frames(&cfg);
    fd = calloc(frames, sizeof *fd);
    lat = calloc(frames, sizeof *lat);
    if (!CHECK(fd != NULL && lat != NULL))
        goto done;
    if (!CHECK(se_fd_simulate(&cfg, fd, NULL, frames, &st, &err) == SE_OK)) {
        fprintf(stderr, "  %s: %s\n", k->name, err.message);
        goto done;
    }
    CHECK(st.energy_drift < 1e-9);

    /* lattice: same pulse, same start, interfaces at the same distances */
    rec.rate_hz = k->rate;
    rec.duration_s = k->duration;
    rec.pulse_start_s = cfg.pulse_start_s;
    rec.pulse = pulse;
    rec.oversample = 1024 * kfd;
    rec.amplitude_floor = 1e-12;
    if (!CHECK(se_sim_uniform_line(k->speed, refl, nsteps, length, rend, rs, 0.0, &ifs, &line,
                                   &err) == SE_OK))
        goto done;
    if (!CHECK(se_sim_frames(&rec) == frames) ||
        !CHECK(se_simulate(&line, &rec, lat, NULL, frames, &err) == SE_OK)) {
        fprintf(stderr, "  %s: %s\n", k->name, err.message);
        goto done;
    }
    if (!CHECK(se_sim_arrivals_floor(&line, k->duration, 1.0 / (k->rate * (double)rec.oversample), 1e-12, &arr,
                                     &narr, &err) == SE_OK))
        goto done;
    for (i = 0; i < narr; i++)
        sum += fabs((1.0 + rs) * arr[i].amplitude);

    /* launched amplitude of the FD source per newton */
    {
        double kk = cfg.source == SE_FD_SOURCE_MATCHED ? 2.0 : 1.0;
        scale = (k->q == SE_Q_FORCE || k->q == SE_Q_VOLTAGE) ? kk : kk * k->z1;
    }
    for (i = 0; i < frames; i++) {
        if (fabs(fd[i] * scale - lat[i]) > maxdiff)
            imax = i;
        maxdiff = fmax(maxdiff, fabs(fd[i] * scale - lat[i]));
        peak = fmax(peak, fabs(lat[i]));
    }
    {
        double cell = 1.0 / (k->rate * (double)rec.oversample), slope = max_slope(&pulse);
        /* at 10 kHz every interface time here is a whole number of lattice cells: exact */
        tol = k->on_grid ? (k->rate == RATE ? 1e-9 : 1e-9 + 1.05 * cell * slope * sum / peak)
                         : 1.05 * (st.dt_s + cell) * slope * sum / peak;
    }
    snprintf(what, sizeof what, "%s: FD x launched scale = lattice (max diff / peak, %zu arrivals)",
             k->name, narr);
    CHECK_CLOSE(maxdiff / peak, 0.0, tol, what);
    printf("  %-32s arrivals %4zu  max |fd - lattice| / peak %.3g at sample %zu (tolerance %.3g)\n",
           k->name, narr, maxdiff / peak, imax, tol);

    if (!k->on_grid) {
        /* the same lattice with the FD grid's delays: exact again */
        double maxd2 = 0.0, tau;
        for (i = 0; i < nsteps; i++) {
            if (!CHECK(se_fd_grid_delay(&cfg, d[i], &tau, &err) == SE_OK))
                goto done;
            refl[i].distance_m = tau * k->speed;
        }
        free(ifs);
        ifs = NULL;
        if (!CHECK(se_fd_grid_delay(&cfg, length, &tau, &err) == SE_OK) ||
            !CHECK(se_sim_uniform_line(k->speed, refl, nsteps, tau * k->speed, rend, rs, 0.0, &ifs,
                                       &line, &err) == SE_OK) ||
            !CHECK(se_simulate(&line, &rec, lat, NULL, frames, &err) == SE_OK))
            goto done;
        for (i = 0; i < frames; i++)
            maxd2 = fmax(maxd2, fabs(fd[i] * scale - lat[i]));
        snprintf(what, sizeof what, "%s: with the grid delays (se_fd_grid_delay) exact", k->name);
        CHECK_CLOSE(maxd2 / peak, 0.0, 1e-6, what);
        printf("  %-32s with grid delays: max diff / peak %.3g\n", k->name, maxd2 / peak);
        CHECK(maxd2 < maxdiff); /* the placement was the whole difference */
    }
done:
    free(arr);
    free(ifs);
    free(fd);
    free(lat);
    se_fd_line_free(m);
}

/* The reflector form of fdline builds the same steps: a reflector of observed coefficient r is
 * the ratio (1 - R)/(1 + R), R = sign(q) r, for every quantity. */
static void test_reflector_is_step(void)
{
    static const se_quantity qs[] = {SE_Q_VELOCITY, SE_Q_FORCE, SE_Q_VOLTAGE, SE_Q_CURRENT};
    size_t i;
    for (i = 0; i < sizeof qs / sizeof qs[0]; i++) {
        se_error err;
        double z, v, r = -0.35;
        se_fd_line *m = se_fd_line_uniform(141.42, 707.1, 180.0, qs[i], 0.0, 0.0, &err);
        if (!CHECK(m != NULL))
            continue;
        CHECK(se_fd_line_add_reflector(m, 42.7, r, &err) == SE_OK);
        CHECK(se_fd_line_at(m, 50.0, &z, &v, &err) == SE_OK);
        CHECK_CLOSE(se_reflection_observed(qs[i], 707.1, z), r, 1e-12,
                    "reflector -> step -> the observed coefficient back");
        CHECK_CLOSE(v, 141.42, 1e-9, "a reflector keeps the speed");
        CHECK(m->n_segments == 2);
        se_fd_line_free(m);
    }
}

int main(void)
{
    size_t i;
    test_reflector_is_step();
    for (i = 0; i < sizeof g_cases / sizeof g_cases[0]; i++)
        run_case(&g_cases[i]);
    return se_test_done("test_fd_vs_lattice");
}
