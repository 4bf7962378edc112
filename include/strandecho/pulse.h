/* strandecho: synthetic reference / injected pulse shapes.
 *
 * Every shape is analytic, so the simulator can evaluate it at any time, and is zero outside its
 * support [0, duration_s]. The peak value is 1 for every shape (reached at the centre of the
 * support for all but the chirp, whose phase is referred to its centre so it also reaches 1
 * there). Times are seconds, frequencies hertz. No state; every function is reentrant.
 */
#ifndef SE_PULSE_H
#define SE_PULSE_H

#include <stddef.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum se_pulse_kind {
    SE_PULSE_HANN,     /* 0.5 (1 - cos(2 pi t / D)), raised cosine of total length D */
    SE_PULSE_HALFSINE, /* sin(pi t / D) */
    SE_PULSE_GAUSS,    /* exp(-(t - D/2)^2 / (2 sigma^2)), sigma = D / 8, cut at +-4 sigma */
    SE_PULSE_RICKER,   /* (1 - 2 a) exp(-a), a = (pi f (t - D/2))^2, D = 3 / f */
    SE_PULSE_TRIANGLE, /* 1 - |2 t / D - 1| */
    SE_PULSE_BURST,    /* Hann(t) cos(2 pi f (t - D/2)), D = cycles / f */
    SE_PULSE_CHIRP     /* Tukey(10 %) cos(phi(t) - phi(D/2)), linear sweep freq_hz -> freq2_hz */
} se_pulse_kind;

/* Number of shapes (for tables and loops over every kind). */
#define SE_PULSE_KIND_COUNT 7

typedef struct se_pulse_shape {
    se_pulse_kind kind;
    double duration_s; /* total support [0, duration_s]; the pulse is 0 outside */
    double freq_hz;    /* ricker peak frequency, burst carrier, chirp start frequency; else 0 */
    double freq2_hz;   /* chirp end frequency; else 0 */
    double cycles;     /* burst cycles; else 0 */
} se_pulse_shape;

/* Longest duration a spec may give (seconds): anything longer is a typing error. */
#define SE_PULSE_MAX_DURATION_S 3600.0
/* Largest sample count se_pulse_render() will produce (2^26). */
#define SE_PULSE_MAX_SAMPLES ((size_t)1 << 26)

/* Parse a pulse spec:
 *   "hann:4ms"             raised cosine of total length 4 ms
 *   "halfsine:2ms"         half sine
 *   "gauss:3ms"            Gaussian, support 3 ms, sigma = support / 8
 *   "ricker:200Hz"         Ricker wavelet of peak frequency 200 Hz, support 3 / f, centred
 *   "triangle:2ms"         triangle
 *   "burst:5@2kHz"         5 cycles of 2 kHz, Hann-windowed (cycles may be fractional, > 0)
 *   "chirp:100Hz-2kHz:50ms" linear chirp 100 Hz -> 2 kHz over 50 ms, Tukey taper of 10 %
 *                          (the start frequency may borrow the end's unit: "chirp:100-2000Hz:50ms")
 * Durations and frequencies take any time / frequency unit of units.h; a unit is required.
 *  spec : [borrowed] the text.
 *  out  : [out] the shape; untouched on failure.
 * Returns SE_OK; SE_ERR_ARG for NULL, an unknown shape name (the message lists the known ones),
 * a missing or malformed parameter; SE_ERR_UNIT for a missing or wrong unit; SE_ERR_RANGE for
 * non-positive values, a duration over SE_PULSE_MAX_DURATION_S, chirp f2 == f1. */
se_status se_pulse_parse(const char *spec, se_pulse_shape *out, se_error *err);

/* 1 if text starts with a known shape name followed by ':' (so the CLI can tell a spec from a
 * file name), else 0 (also for NULL). Does not check the parameters. */
int se_pulse_is_spec(const char *text);

/* Canonical lower-case name of a kind ("hann", ...); NULL out of range. */
const char *se_pulse_kind_name(se_pulse_kind kind);

/* Check a shape filled by hand (same rules as se_pulse_parse). Returns SE_OK or the error. */
se_status se_pulse_check(const se_pulse_shape *p, se_error *err);

/* Value at time t_s (seconds after the pulse start). 0 outside [0, duration_s]; NaN for a NULL
 * p or NaN t_s. The shape is not validated here (use se_pulse_check once). */
double se_pulse_value(const se_pulse_shape *p, double t_s);

/* Render at rate_hz: n = floor(duration_s * rate_hz) + 1 samples (the product is rounded to the
 * nearest integer first when within 1e-9 relative of it, so 4 ms at 48 kHz is 193 samples, not
 * 192 from a rounding error), sample k = se_pulse_value(p, k / rate_hz).
 *  samples : [out] malloc'd array [size: n]; the caller frees it with free(). NULL on failure.
 *  n       : [out] number of samples.
 * Returns SE_OK; SE_ERR_ARG for NULL pointers or a non-positive / non-finite rate; the errors of
 * se_pulse_check; SE_ERR_RANGE when n < 3 ("pulse hann:1us has only 1 sample at 48 kHz") or
 * n > SE_PULSE_MAX_SAMPLES; SE_ERR_NOMEM. */
se_status se_pulse_render(const se_pulse_shape *p, double rate_hz, double **samples, size_t *n,
                          se_error *err);

/* Canonical spec text, e.g. "hann:4ms", "burst:5@2kHz", "chirp:100Hz-2kHz:50ms". Parsing the
 * text gives back the same shape bit for bit. Truncated to size (always NUL-terminated when
 * size > 0). */
void se_pulse_describe(const se_pulse_shape *p, char *buf, size_t size);

/* RMS bandwidth of a sampled pulse, beta_d = sqrt(sum s'^2 / sum s^2) in rad/sample, with s' the
 * derivative of the band-limited (sinc) interpolant of s, i.e.
 *   beta_d^2 = (1 / 2 pi) int_{-pi}^{pi} w^2 |S(w)|^2 dw / sum s^2
 *            = (pi^2/3 R[0] + sum_{m >= 1} 4 (-1)^m R[m] / m^2) / R[0],
 * R the autocorrelation of s (direct for short pulses, by FFT for long ones). Used for the
 * Cramer-Rao delay bound var(tau) >= 1 / (eta beta_d^2) samples^2.
 *  s : [size: n] samples. Returns NaN for NULL, n == 0, non-finite samples, an all-zero pulse or
 *      a failed allocation. */
double se_pulse_rms_bandwidth(const double *s, size_t n);

/* Same, always by the direct O(n^2) autocorrelation (the oracle for the FFT path). */
double se_pulse_rms_bandwidth_direct(const double *s, size_t n);

#ifdef __cplusplus
}
#endif

#endif /* SE_PULSE_H */
