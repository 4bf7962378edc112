/* strandecho: building finite-difference line models (fdmodel.h) from the inputs the rest of the
 * tool speaks: a uniform line with reflectors given as coefficients in the observed convention, a
 * described line (line.h), point masses and springs, named terminations.
 *
 * A model is a chain of uniform segments, each with a speed c and an impedance Z, stored as the
 * se_fd_segment pair tension_n = Z c, mu_kg_m = Z / c (so sqrt(T/mu) = c and sqrt(T mu) = Z: the
 * physical T and mu for a string or rope, EA and mu for axial waves, 1/C' and L' electrically).
 *
 * Reflectors are impedance STEPS, the same thing the lattice model (simulate.h) means by an
 * interface: a reflector at d with observed coefficient r makes Z(d+) = Z(d-) (1 - R)/(1 + R),
 * R = se_quantity_sign(q) r the displacement-convention coefficient, and every segment beyond d is
 * scaled by that ratio (speed kept), so the coefficients of the other interfaces stay what they
 * were. A step or reflector therefore reflects r in the observed quantity at every frequency,
 * transmits 1 + r going out and 1 - r coming back, exactly as the lattice does.
 *
 * Terminations are mapped by the sign rule: the far end's observed coefficient r becomes
 * R = sign(q) r; R = -1 is a fixed end (a clamp; an open circuit), R = +1 free (a break; a short),
 * R = 0 absorbing (a matched, continuing line); any other R is a final step of ratio
 * (1 - R)/(1 + R) into an absorbing tail one hundredth of the line long. The source end: R = 0
 * (matched, continuing) is a force source with a matched termination, R = +1 a force source at a
 * free end; other values cannot be modelled (SE_ERR_RANGE).
 *
 * Life: se_fd_line_uniform or se_fd_line_from_line, then any se_fd_line_add_* / se_fd_line_cut,
 * then se_fd_line_config to point an se_fd_config at it (borrowed: the model must outlive the
 * config's use), se_fd_line_free. Nothing is global; every function is reentrant. */
#ifndef SE_FDLINE_H
#define SE_FDLINE_H

#include <stddef.h>

#include "strandecho/error.h"
#include "strandecho/fdmodel.h"
#include "strandecho/wave.h"

#ifdef __cplusplus
extern "C" {
#endif

struct se_line;

typedef struct se_fd_line {
    se_fd_segment *segments; /* owned [size: n_segments], from the sensor outwards */
    size_t n_segments;
    size_t cap_segments;     /* allocated entries (internal) */
    se_fd_point *points;     /* owned [size: n_points] */
    size_t n_points;
    size_t cap_points;       /* allocated entries (internal) */
    se_fd_source source;
    se_fd_end far_end;
    se_quantity quantity;    /* the recorded quantity: sign rule of coefficients, fd output */
    double end_m;            /* distance of the far end (or of the step into the absorbing tail), m */
    int has_tail;            /* 1 when the last segment is the absorbing tail of a partial end */
} se_fd_line;

/* A uniform line of speed speed_m_s (> 0) and impedance impedance (> 0: N s/m, or ohm), length_m
 * (> 0) long, recorded in quantity q, with the observed coefficients source_r of the source end
 * and end_r of the far end (each in [-1, 1], see above). NULL and err on failure. */
se_fd_line *se_fd_line_uniform(double speed_m_s, double impedance, double length_m, se_quantity q,
                               double source_r, double end_r, se_error *err);

/* The model of a prepared described line: one FD segment between consecutive lattice interfaces
 * of se_line_interfaces(line, step_s) (junctions, features with a known coefficient, the steps of
 * hanging segments), speed = length / one-way time of the interval, impedance from the first
 * segment's near-end impedance (1 when the line does not give it: only ratios matter) times the
 * ratio of every interface passed, so each interface reflects its line coefficient; ends from the
 * line's source_end_r and end_r. step_s > 0 (s). NULL and err on failure. */
se_fd_line *se_fd_line_from_line(const struct se_line *line, double step_s, se_error *err);

/* An impedance step at distance_m (0 < d < end_m): Z2 / Z1 = ratio (> 0, finite) from d on. */
se_status se_fd_line_add_step(se_fd_line *m, double distance_m, double ratio, se_error *err);

/* A reflector at distance_m (0 < d < end_m) with observed coefficient r_observed in (-1, 1): the
 * step of ratio (1 - R)/(1 + R), R = sign(q) r. */
se_status se_fd_line_add_reflector(se_fd_line *m, double distance_m, double r_observed,
                                   se_error *err);

/* A point element (copied; 0 <= x_m <= end_m, values >= 0 and finite). */
se_status se_fd_line_add_point(se_fd_line *m, const se_fd_point *point, se_error *err);

/* Cut the line at distance_m (0 < d < end_m): everything beyond is dropped and the end is free in
 * displacement (a break: free-like in velocity, short-like in voltage). Points beyond d are an
 * error (SE_ERR_RANGE). */
se_status se_fd_line_cut(se_fd_line *m, double distance_m, se_error *err);

/* Impedance and speed just beyond distance_m (0 <= d < end_m; at a step, the far side). */
se_status se_fd_line_at(const se_fd_line *m, double distance_m, double *impedance,
                        double *speed_m_s, se_error *err);

/* Point cfg's segments, points, source, far_end and output at the model (borrowed). The other
 * fields of cfg are left as they are. */
void se_fd_line_config(const se_fd_line *m, se_fd_config *cfg);

/* Free a model (NULL accepted). */
void se_fd_line_free(se_fd_line *m);

/* Peak |value| of the direct (outgoing) wave as the sensor at x = 0 records it in cfg->output,
 * before any echo: the launched wave is (1/(k Z1)) int F dt in displacement (k = 1 free source,
 * 2 matched), F/(k Z1) in velocity and current, F'/(k Z1) in acceleration, F/k in force and voltage
 * (a free source: F itself, and no echo is ever seen there), F/(k T1) in strain. Evaluated on a grid
 * of 64 points per output sample over the pulse. Dividing a recording by it puts the direct arrival
 * at unit peak, the scale of the lattice model's records. Returns SE_OK or the errors of
 * se_fd_plan; SE_ERR_ARG for a NULL peak. */
se_status se_fd_direct_peak(const se_fd_config *cfg, double *peak, se_error *err);

/* Add Gaussian noise of rms noise_rms (>= 0) to x[size: n] in order 0, 1, ... from GSL's mt19937
 * seeded with seed through gsl_ran_gaussian_ziggurat: the noise se_simulate adds for the same
 * seed and rms. Returns SE_OK, SE_ERR_ARG, SE_ERR_RANGE or SE_ERR_NOMEM. */
se_status se_fd_add_noise(double *x, size_t n, double noise_rms, unsigned long seed, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_FDLINE_H */
