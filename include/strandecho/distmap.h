/* strandecho: delay <-> distance along a line.
 *
 * The map holds the cumulative two-way (round-trip) time t(d) = 2 * integral_0^d ds / v(s)
 * tabulated along the line, piece by piece (one piece per segment of a line description). Inside
 * a piece of two nodes the speed is uniform and the map is linear (exact: a uniform line gives
 * d = v t / 2 to rounding); a piece of three or more nodes (a hanging segment) is interpolated by
 * GSL's monotone Steffen spline, and the inverse d(t) is found on that spline by Brent's method,
 * so t(d(t)) = t to 1e-12 relative. Pieces are never interpolated across each other, so the
 * kink of the speed at a junction is kept.
 *
 * Uncertainty: each piece carries a relative 1-sigma speed uncertainty e_j. The error is taken
 * fully correlated within a piece (one scale error for the whole piece) and independent between
 * pieces. Distance is the integral of v dt over the time spent in each piece, so for a delay that
 * reaches into piece k, having traversed l_j metres of each piece j <= k,
 *     sigma_d^2 = sum_j (e_j l_j)^2,
 * and a round-trip time t = sum_j t_j (t_j = time spent in piece j) has
 *     sigma_t^2 = sum_j (e_j t_j)^2     (first order: dt_j / t_j = -dv_j / v_j).
 * Beyond the last node the map extrapolates with the mean speed of the last piece (a multiple of
 * the end echo maps beyond the length: callers compare with se_distmap_length).
 *
 * A map is immutable after creation and may be shared between threads. */
#ifndef SE_DISTMAP_H
#define SE_DISTMAP_H

#include <stddef.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One piece of a line, as given to se_distmap_create. Arrays are borrowed for the call (copied). */
typedef struct se_distmap_piece {
    size_t n;                 /* number of nodes, >= 2 */
    const double *s;          /* distance from the piece start (m) [size: n], s[0] = 0, strictly increasing */
    const double *t;          /* two-way time from the piece start (s) [size: n], t[0] = 0, strictly increasing */
    double speed_uncertainty; /* relative 1-sigma speed uncertainty of the piece (0.02 = 2 %), >= 0 */
} se_distmap_piece;

/* Opaque map. */
typedef struct se_distmap se_distmap;

/* Map from pieces laid end to end from the sensor. NULL and err on bad input. */
se_distmap *se_distmap_create(const se_distmap_piece *pieces, size_t n_pieces, se_error *err);

/* Map of a uniform line of one speed (m/s, > 0) and relative speed uncertainty (>= 0). length_m
 * (> 0) sets se_distmap_length; INFINITY gives an unbounded line (locate without a line file). */
se_distmap *se_distmap_create_uniform(double speed_m_s, double speed_uncertainty, double length_m,
                                      se_error *err);

/* Free (NULL accepted). */
void se_distmap_destroy(se_distmap *map);

/* Distance from the sensor (m) of a reflector with round-trip delay round_trip_s (>= 0). */
se_status se_distmap_distance(const se_distmap *map, double round_trip_s, double *distance_m, se_error *err);

/* Round-trip time (s) to a reflector at distance_m (>= 0) from the sensor. */
se_status se_distmap_time(const se_distmap *map, double distance_m, double *round_trip_s, se_error *err);

/* 1-sigma distance uncertainty (m) of the distance found for a delay (rule in the file comment). */
se_status se_distmap_distance_sigma(const se_distmap *map, double round_trip_s, double *sigma_m,
                                    se_error *err);

/* 1-sigma uncertainty (s) of the predicted round-trip time to a reflector at distance_m. */
se_status se_distmap_time_sigma(const se_distmap *map, double distance_m, double *sigma_s, se_error *err);

/* Local wave speed (m/s) at distance_m: v = 2 / (dt/dd) of the map. */
se_status se_distmap_speed(const se_distmap *map, double distance_m, double *speed_m_s, se_error *err);

/* Total length (m; INFINITY for an unbounded uniform map) and total round trip (s; INFINITY too). */
double se_distmap_length(const se_distmap *map);
double se_distmap_round_trip(const se_distmap *map);

/* Number of pieces, and the index of the piece containing distance_m (the last piece beyond the end). */
size_t se_distmap_piece_count(const se_distmap *map);
size_t se_distmap_piece_at(const se_distmap *map, double distance_m);

#ifdef __cplusplus
}
#endif

#endif /* SE_DISTMAP_H */
