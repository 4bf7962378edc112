/* strandecho: forward model of a line, every multiple included, and synthetic recordings.
 *
 * The line is a sequence of interfaces placed by their one-way travel time from the sensor. Waves are
 * propagated by the equal-travel-time lattice (P.L. Goupillaud, Geophysics 26(6), 1961): at an
 * interface with coefficient r (for a wave arriving from the sensor side)
 *     D_out = (1 + r) D_in - r U_in        (down-going wave leaving towards the far end)
 *     U_out = r D_in + (1 - r) U_in        (up-going wave leaving towards the sensor)
 * so a wave from the far side sees -r, transmission is 1 + r down and 1 - r up. The source/sensor end
 * reflects an up-going wave U as a down-going r_s U; the last interface is the far end, its r is the
 * end termination and nothing exists beyond it (r = 0 there is a matched, absorbing end).
 *
 * All coefficients are in the OBSERVED convention: the sign the sensor's quantity sees (the caller
 * applies the sign rule of the measured quantity, REFERENCE.md section 1).
 *
 * The lattice is run exactly but sparsely: interface times are quantised to a cell of time_quantum_s
 * (nearest cell), only nonzero waves are kept (the empty cells between interfaces are pure delays, kept
 * as one delay line per segment and direction), waves meeting at an interface in the same cell are
 * merged before scattering, exactly as the full lattice does. Loss: a wave's amplitude decays by
 * exp(-alpha * time travelled), alpha in nepers per second of one-way travel, applied per segment
 * (the lattice's loss per cell). A wave is dropped when its amplitude on arrival at the next interface
 * is below the amplitude floor, or when it could no longer reach the sensor within the horizon.
 *
 * Recording model (se_simulate): with p(t) = se_pulse_value(&rec->pulse, t), fs = rate_hz,
 * t0 = pulse_start_s and the arrivals (t_j, a_j) of the impulse response,
 *     response[n] = p(n/fs - t0) + (1 + r_s) * sum_j a_j p(n/fs - t0 - t_j) + noise[n]
 *     pulse[n]    = p(n/fs - t0)                                          (noise-free)
 * The sensor sits at the source end: it sees the injected pulse once, and each returning up-going wave
 * together with its own reflection off the source end, hence the factor (1 + r_s). The arguments are
 * evaluated as (double)n / fs - t0 - t_j. noise[n] is Gaussian with rms noise_rms, drawn in order
 * n = 0, 1, ... by gsl_ran_gaussian_ziggurat from GSL's mt19937 seeded with seed (gsl_rng_set
 * semantics: seed 0 means mt19937's default seed 4357); noise_rms = 0 adds nothing. The same inputs
 * give bit-identical output.
 *
 * Energy check for a lossless line (any sign convention, since it is measured in the sensor section):
 * with a matched source end (r_s = 0) and a total reflector (|r| = 1) at the far end, all injected
 * energy comes back through the first section, so sum_j a_j^2 -> 1 as the horizon grows.
 *
 * Cost: propagation is proportional to the number of distinct (time cell, interface) wave meetings;
 * synthesis to arrivals x pulse length in samples. A lossless line closed at both ends keeps all its
 * energy and its impulse response becomes dense: add loss, raise the floor or shorten the record; more
 * than SE_SIM_MAX_ARRIVALS arrivals is an error (SE_ERR_NOMEM) rather than an unbounded run. */
#ifndef SE_SIMULATE_H
#define SE_SIMULATE_H

#include <stddef.h>

#include "strandecho/error.h"
#include "strandecho/pulse.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Most arrivals one impulse response may hold (4 Mi, 64 MiB; synthesis costs arrivals x pulse length). */
#define SE_SIM_MAX_ARRIVALS ((size_t)1 << 22)
/* Most frames one record may hold (2^31). */
#define SE_SIM_MAX_FRAMES ((size_t)1 << 31)
/* Default fine cells per sample and default relative amplitude floor. */
#define SE_SIM_DEFAULT_OVERSAMPLE 1024
#define SE_SIM_DEFAULT_FLOOR 1e-9

/* One interface of the line. */
typedef struct se_sim_interface {
    double one_way_s;    /* one-way travel time from the sensor to the interface, s (> 0, increasing) */
    double reflection;   /* coefficient for a wave arriving from the sensor side, observed convention,
                            [-1, 1]; from the far side it is -reflection; transmission 1 + r (down)
                            and 1 - r (up) */
} se_sim_interface;

/* The line: interfaces are borrowed (not copied), they must outlive every call using the line. */
typedef struct se_sim_line {
    const se_sim_interface *interfaces; /* [size: n_interfaces], the last one is the far end (its r is
                                           the end termination; nothing beyond it) */
    size_t n_interfaces;                /* >= 1 */
    double source_reflection;           /* r_s at the sensor/source end, observed convention, [-1, 1]
                                           (0 = continuing, matched line) */
    double loss_np_per_s;               /* amplitude loss, nepers per second of one-way travel, >= 0
                                           (0 = none) */
} se_sim_line;

/* What to record. */
typedef struct se_sim_record {
    double rate_hz;             /* sample rate, Hz, (0, 1e9] */
    double duration_s;          /* record length, s, > 0 (frames: see se_sim_frames) */
    double pulse_start_s;       /* t0: injection time, s, [0, duration_s] */
    se_pulse_shape pulse;       /* injected pulse (checked by se_pulse_check) */
    double noise_rms;           /* Gaussian noise rms in response units, >= 0 */
    unsigned long seed;         /* noise seed (mt19937) */
    size_t oversample;          /* fine time cells per sample, 0 = 1024, at most 1048576; the time
                                   quantum is 1 / (rate_hz * oversample) */
    double amplitude_floor;     /* drop waves below this fraction of the injected amplitude,
                                   0 = 1e-9, else in (0, 1) */
} se_sim_record;

/* One arrival of the impulse response at the sensor. */
typedef struct se_sim_arrival {
    double time_s;      /* after t0, s, already quantised: an integer number of time quanta */
    double amplitude;   /* up-going amplitude for a unit injected impulse, before the (1 + r_s)
                           sensor factor */
} se_sim_arrival;

/* Impulse response at the sensor for a unit impulse injected down the line at time 0: every arrival
 * with time <= horizon_s (a horizon within 1e-9 relative of a whole cell is that cell), sorted by increasing time, distinct times, exact
 * zeros omitted. Amplitude floor: the default 1e-9.
 *   line            the line (validated: see the struct)
 *   horizon_s       last arrival time wanted, s, >= 0
 *   time_quantum_s  lattice cell, s, > 0; interface times and the horizon must be < 2^52 cells, and
 *                   no two interfaces may fall in the same cell (SE_ERR_RANGE)
 *   arrivals        out: malloc'd [size: *n] (caller frees; may be NULL when *n is 0)
 * Returns SE_OK, SE_ERR_ARG (NULL pointers), SE_ERR_RANGE (bad values), SE_ERR_NOMEM. On failure
 * *arrivals is NULL and *n is 0. */
se_status se_sim_arrivals(const se_sim_line *line, double horizon_s, double time_quantum_s,
                          se_sim_arrival **arrivals, size_t *n, se_error *err);

/* As se_sim_arrivals with an explicit absolute amplitude floor (>= 0, < 1; 0 keeps every nonzero
 * wave, which is exact but only practical for short horizons). */
se_status se_sim_arrivals_floor(const se_sim_line *line, double horizon_s, double time_quantum_s,
                                double amplitude_floor, se_sim_arrival **arrivals, size_t *n,
                                se_error *err);

/* Frames of a record: floor(duration_s * rate_hz) + 1, the samples n/rate_hz for
 * 0 <= n/rate_hz <= duration_s (both ends included); a product within 1e-9 relative of an integer is
 * taken as that integer first (1 s at 48 kHz is 48001 frames). Returns 0 if rate or duration is not
 * finite or out of range, or if the count would exceed SE_SIM_MAX_FRAMES. */
size_t se_sim_frames(const se_sim_record *rec);

/* Write frames samples of the response and of the injected pulse (either may be NULL to skip; both
 * [size: frames], caller-owned). frames must equal se_sim_frames(rec). The record is validated before
 * anything is allocated (too many frames: SE_ERR_NOMEM). Returns SE_OK or an error as for
 * se_sim_arrivals; on failure the buffers' contents are unspecified. */
se_status se_simulate(const se_sim_line *line, const se_sim_record *rec, double *response,
                      double *pulse, size_t frames, se_error *err);

/* As se_simulate, with skin-effect loss on every arrival: arrival j (time t_j after t0, path length
 * l_j = speed_m_s t_j on a line of uniform speed) is shaped by H(s) = exp(-a_j sqrt(s)),
 * a_j = skin_k_s05_per_m l_j (skin.h; R.L. Wigington & N.S. Nahman, Proc. IRE 45(2), 1957), causal
 * (magnitude and minimum phase), its pure delay t_j unchanged; the injected pulse (path 0) is not.
 * Synthesis is spectral: each arrival's pulse sampled analytically at its sub-sample offset,
 * transformed on a power-of-two length N >= 2 frames, multiplied by H and its integer delay, summed,
 * transformed back; the loss tail beyond N that wraps onto the record is subtracted analytically
 * (pulse area times the periodic images of the impulse response, two images plus an integral).
 * skin_k_s05_per_m = 0 is se_simulate exactly (bit for bit). Cost: arrivals x N log N.
 *   skin_k_s05_per_m  K, s^0.5 per metre, finite >= 0
 *   speed_m_s         wave speed of the (uniform) line, m/s, finite > 0
 * Errors as se_simulate, and SE_ERR_RANGE for bad K or speed, SE_ERR_NOMEM when arrivals x N
 * exceeds 2^34 (too much work) or an allocation fails. */
se_status se_simulate_skin(const se_sim_line *line, const se_sim_record *rec, double skin_k_s05_per_m,
                           double speed_m_s, double *response, double *pulse, size_t frames,
                           se_error *err);

/* A reflector on a uniform line. */
typedef struct se_sim_reflector {
    double distance_m;  /* from the sensor, m, > 0 and < the far end */
    double reflection;  /* observed convention, [-1, 1] */
} se_sim_reflector;

/* Convenience for a uniform line of speed speed_m_s: the reflectors (any order: they are sorted; two
 * at the same distance or one at or beyond the far end is an error) at times d / v, then the far end
 * at end_distance_m with end_reflection. Loss in dB per metre of travel is converted to nepers per
 * second: alpha = loss_db_per_m * ln(10)/20 * v.
 *   refl         [size: n_refl], may be NULL when n_refl is 0; not modified
 *   interfaces   out: malloc'd [size: n_refl + 1] (caller frees), NULL on failure
 *   line         out: filled to point at *interfaces
 * Returns SE_OK, SE_ERR_ARG, SE_ERR_RANGE (non-finite or out-of-range values), SE_ERR_NOMEM. */
se_status se_sim_uniform_line(double speed_m_s, const se_sim_reflector *refl, size_t n_refl,
                              double end_distance_m, double end_reflection, double source_reflection,
                              double loss_db_per_m, se_sim_interface **interfaces, se_sim_line *line,
                              se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_SIMULATE_H */
