/* strandecho: explicit finite-difference (leapfrog) forward model of a line.
 *
 * Solves mu(x) y_tt + 2 alpha mu y_t + alpha^2 mu y = (T(x) y_x)_x on 0 <= x <= L for a line of
 * uniform segments with lumped point elements (mass, spring to ground, dashpot to ground), driven by
 * a force pulse at x = 0, and records one quantity at a sensor. It is a second, independent forward
 * model used to make validation recordings: it shares no code or logic with the lattice model of
 * simulate.h. The physics, the grid and its accuracy are described in docs/fd-model.md.
 *
 * Physics: transverse waves (T tension, N; mu mass per length, kg/m; y transverse displacement),
 * longitudinal waves (T -> EA, N; y axial displacement) and, by analogy, the telegrapher equations
 * (mu -> L' H/m, T -> 1/C' m/F, y -> charge C; force -> voltage V, velocity -> current A).
 * Speed c = sqrt(T/mu), impedance Z = sqrt(T mu).
 *
 * Grid: one time step dt = 1 / (K rate_hz) (K a positive integer, so every output sample is a grid
 * time) and, in segment i, cells of length c_i dt / C (C the Courant number, 1 by default). At C = 1
 * the scheme is exact at the grid times for piecewise-uniform lines (d'Alembert, and the interface
 * nodes reflect and transmit exactly); segment ends, points and the sensor are placed on the nearest
 * node by their cumulative one-way travel time from x = 0, so each travel time is off by at most
 * dt / (2 C) (a position error of at most c dt / (2 C)). K is the smallest integer that gives at
 * least min_cells_per_pulse cells per pulse width and at least one cell per segment.
 *
 * Source: a force A p(t - t0) (p = se_pulse_value of cfg->pulse, A = pulse_amplitude_n, t0 =
 * pulse_start_s) acts on the node at x = 0. Each step applies the mean of the force over the two
 * steps around it, which makes the injected wave exact at C = 1: a free source end launches the
 * velocity F/Z1, a matched one F/(2 Z1) (the other half goes into the termination).
 *
 * Sign conventions: positive force pushes the end in +y; the force output is the line force
 * -T y_x (the pull of the part x' < x on the part x' > x, in +y), so a wave going to +x has force
 * +Z v, a wave going to -x has force -Z v; strain is y_x. Reflection at Z1 -> Z2 is
 * (Z1 - Z2)/(Z1 + Z2) in displacement, velocity, acceleration, current and the opposite sign in
 * force, strain, voltage (REFERENCE.md section 1). */
#ifndef SE_FDMODEL_H
#define SE_FDMODEL_H

#include <stddef.h>

#include "strandecho/error.h"
#include "strandecho/pulse.h"
#include "strandecho/wave.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Default minimum number of cells per pulse width (REFERENCE.md section 2). */
#define SE_FD_DEFAULT_MIN_CELLS 15
/* Default largest grid (cells). */
#define SE_FD_DEFAULT_MAX_CELLS ((size_t)1 << 24)

/* One uniform segment. tension_n is T for transverse waves, EA for longitudinal, 1/C' for the
 * electrical analogue (all > 0, finite); mu_kg_m the mass per length (L' electrically); length in m. */
typedef struct se_fd_segment {
    double length_m;
    double tension_n;
    double mu_kg_m;
} se_fd_segment;

/* A lumped fitting or clamp at x_m (0 <= x_m <= L, metres from the driven end): point mass (kg),
 * spring to ground (N/m) and dashpot to ground (N s/m), each >= 0 and finite. Several points may
 * share a node; their values add. */
typedef struct se_fd_point {
    double x_m;
    double mass_kg;
    double spring_n_m;
    double damping_n_s_m;
} se_fd_point;

/* Far-end condition at x = L: y = 0 (clamp; electrically an open circuit), free (no force;
 * electrically a short), absorbing (terminated in the last segment's impedance). */
typedef enum se_fd_end { SE_FD_END_FIXED, SE_FD_END_FREE, SE_FD_END_ABSORBING } se_fd_end;

/* The driven end x = 0: a force pulse applied to a free end (returning waves see a free end and
 * reflect with +1 in displacement), or to an end terminated in its own impedance Z1 (returning waves
 * are absorbed: the "continuing line" case). */
typedef enum se_fd_source { SE_FD_SOURCE_FREE, SE_FD_SOURCE_MATCHED } se_fd_source;

typedef struct se_fd_config {
    const se_fd_segment *segments; /* [size: n_segments], borrowed; n_segments >= 1 */
    size_t n_segments;
    const se_fd_point *points;     /* [size: n_points], borrowed; may be NULL when n_points = 0 */
    size_t n_points;
    se_fd_source source;
    se_fd_end far_end;
    se_pulse_shape pulse;          /* checked with se_pulse_check */
    double pulse_amplitude_n;      /* peak force A (N; V for the electrical analogue), finite */
    double pulse_start_s;          /* t0 >= 0: the pulse starts t0 s after the first sample */
    se_quantity output;            /* what the sensor records (voltage as force, current as velocity) */
    double rate_hz;                /* output sampling rate, > 0 */
    double duration_s;             /* recording length, >= 0: frames = floor(duration*rate) + 1 */
    double courant;                /* 0 = 1.0 (exact and the largest stable value); else (0, 1] */
    size_t min_cells_per_pulse;    /* 0 = SE_FD_DEFAULT_MIN_CELLS */
    double loss_np_per_s;          /* alpha >= 0: waves decay as exp(-alpha t), shape kept (0 = none) */
    size_t max_cells;              /* refuse grids with more cells (0 = SE_FD_DEFAULT_MAX_CELLS) */
} se_fd_config;

typedef struct se_fd_stats {
    size_t cells;        /* cells of the whole line (nodes = cells + 1) */
    double dx_min_m;     /* smallest cell length, m */
    double dt_s;         /* time step, s (1 / (K rate_hz)) */
    double courant_max;  /* largest c dt / dx over the cells */
    double energy_drift; /* largest |E + dissipated - injected work| / max(energy, work) seen: the
                            scheme's discrete energy balance, roundoff-sized for a sound run */
} se_fd_stats;

/* Number of output samples: floor(duration_s * rate_hz) + 1, the product rounded to the nearest
 * integer first when within 1e-9 relative of it. 0 for NULL or a non-finite / non-positive rate or a
 * negative / non-finite duration. */
size_t se_fd_frames(const se_fd_config *cfg);

/* Check a configuration and work out its grid without running it.
 *  stats : [out, may be NULL] cells, dx_min_m, dt_s, courant_max (energy_drift 0).
 * Returns SE_OK; SE_ERR_ARG for NULL, no segments, NULL points with n_points > 0, a bad enum;
 * SE_ERR_RANGE for a non-positive / non-finite length, tension, mass per length, rate, a negative
 * duration, start, loss or point value, a point off the line, a Courant number outside (0, 1], a bad
 * pulse; SE_ERR_NOMEM when the grid would exceed max_cells (the message gives the count). */
se_status se_fd_plan(const se_fd_config *cfg, se_fd_stats *stats, se_error *err);

/* One-way travel time from x = 0 to the grid node that stands for position x_m (0 <= x <= L), as
 * the grid represents it: j dt / C for node j. It differs from the nominal travel time by at most
 * dt / (2 C); validation against a recording of this model should use it as the true delay.
 *  tau_s : [out] seconds.
 * Returns SE_OK or the errors of se_fd_plan; SE_ERR_ARG for a NULL tau_s; SE_ERR_RANGE for x off
 * the line. */
se_status se_fd_grid_delay(const se_fd_config *cfg, double x_m, double *tau_s, se_error *err);

/* Run the model with the sensor at x = 0.
 *  response : [out] sensor output [size: frames], sample i at t = i / rate_hz, in the unit of
 *             cfg->output (m, m/s, m/s^2, N, strain 1; V and A for the analogue).
 *  force    : [out, may be NULL] injected force A p(i / rate_hz - t0), N [size: frames].
 *  frames   : must equal se_fd_frames(cfg).
 *  stats    : [out, may be NULL] grid figures and the energy balance of the run.
 * Returns SE_OK or the errors of se_fd_plan; SE_ERR_ARG for a NULL response or a wrong frames;
 * SE_ERR_NOMEM when an allocation fails. */
se_status se_fd_simulate(const se_fd_config *cfg, double *response, double *force, size_t frames,
                         se_fd_stats *stats, se_error *err);

/* As se_fd_simulate with the sensor at sensor_x_m (0 <= x <= L, nearest node), and the discrete
 * energy of the line recorded as well.
 *  energy : [out, may be NULL] energy in the line (kinetic + strain + point springs, J) at each frame
 *           [size: frames]: the quantity the leapfrog scheme conserves, with kinetic energy from the
 *           half-step velocity (y^n - y^(n-1)) / dt and strain energy from the product of the strains
 *           at steps n-1 and n, evaluated between the steps n-1 and n at frame n = i K. It tends to
 *           the continuum kinetic + strain energy as dt -> 0. Asking for it makes the whole line be
 *           simulated (otherwise nodes the sensor cannot hear within the recording are skipped).
 * At a sensor away from x = 0, displacement, velocity and acceleration are as exact as at x = 0;
 * force and strain are the mean of the line forces of the two cells beside the node (second order,
 * relative error about (w dt)^2 / 6; one cell only at the far end). Strain uses the tension of the
 * segment on the far side of the sensor node (near side at x = L). */
se_status se_fd_simulate_at(const se_fd_config *cfg, double sensor_x_m, double *response,
                            double *force, double *energy, size_t frames, se_fd_stats *stats,
                            se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_FDMODEL_H */
