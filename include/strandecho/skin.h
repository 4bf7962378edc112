/* strandecho: skin-effect loss on cables — loss-shaped templates, delay correction of located
 * echoes and estimation of the loss constant from the echoes' shapes.
 *
 * Model (REFERENCE.md 2, "Forward models"; R.L. Wigington & N.S. Nahman, Proc. IRE 45(2), 1957):
 * a cable of length l with skin-effect loss transfers
 *     H(s) = exp(-a sqrt(s)),   a = K l   (K in s^0.5 per metre, a in s^0.5),
 * whose step response is erfc(a / (2 sqrt t)) (50 % at t = 1.099 a^2) and impulse response
 *     h(t) = a / (2 sqrt(pi)) t^(-3/2) exp(-a^2 / (4 t)),  t > 0.
 * On the j omega axis sqrt(j omega) = sqrt(omega / 2) (1 + j): the filter is applied with both its
 * magnitude exp(-a sqrt(omega/2)) and its (minimum-phase, causal) phase -a sqrt(omega/2). The pure
 * propagation delay is NOT part of H (it is the wave speed's): the filter adds only the distortion,
 * and H(0) = 1 (the area of a pulse is kept).
 *
 * An echo of round-trip delay dt (s) after the direct arrival has travelled l = v dt, so its loss is
 * a = K v dt = kappa dt with kappa = K v (s^-0.5). Lags are in samples from the record start,
 * exactly as the locator's matched filter r[k] = sum_j x[k+j] s[j] / E_s gives them (se_peak.lag):
 * the lag of an echo is where the (unshaped) reference would start in x.
 *
 * Truncation (stated and checked in tests/test_skin.c): a template is the pulse's m samples plus a
 * tail of SE_SKIN_TAIL_FACTOR a^2 fs samples (+ 2). Beyond it the loss's slow t^(-3/2) tail holds
 * about a^4 / (8 T^2) = 7.8e-7 of the impulse response's energy (T = 400 a^2). The transform is
 * done on a power-of-two length N >= 2 (template length) and the circular wrap of the tail beyond N
 * is subtracted analytically (the pulse's area at its centroid times the periodic sum of h, four
 * terms and the remaining integral, erf(a / (2 sqrt T)) / N).
 *
 * Every function plans FFTW with FFTW_ESTIMATE (the arrays are not touched while planning): when
 * calling from several threads, call fftw_make_planner_thread_safe() once first (as survey.c does).
 * No state is kept between calls. */
#ifndef SE_SKIN_H
#define SE_SKIN_H

#include <stddef.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Template tail, in units of a^2 fs samples (see the truncation above). */
#define SE_SKIN_TAIL_FACTOR 400.0
/* Longest template accepted, samples (2^24): larger a is an error (SE_ERR_RANGE). */
#define SE_SKIN_MAX_TEMPLATE ((size_t)1 << 24)

/* Length of the template for a pulse of m samples: m + ceil(SE_SKIN_TAIL_FACTOR a^2 fs) + 2, and m
 * for a = 0. Returns 0 when a or rate_hz is not finite, a < 0, rate_hz <= 0, m = 0 or the length
 * exceeds SE_SKIN_MAX_TEMPLATE. */
size_t se_skin_template_length(size_t m, double rate_hz, double a_sqrt_s);

/* The loss-shaped template: out[k] = (h_a * p)(k - shift) for k = 0 .. *n_out - 1, the band-limited
 * pulse p [size: m] delayed by shift samples and passed through H(s) = exp(-a sqrt(s)).
 *   pulse      [size: m], m >= 1, finite; borrowed
 *   rate_hz    sample rate, Hz (> 0)
 *   a_sqrt_s   a = K l, s^0.5, >= 0. a = 0 with shift = 0 copies the pulse exactly (length m).
 *   shift      sub-sample delay, samples, in [0, 1)
 *   out        out: malloc'd [size: *n_out = se_skin_template_length(m, rate_hz, a) (+1 when
 *              shift > 0)], caller frees with free(); NULL on failure
 *   d2         out (may be NULL): sum over the template of (d out / dk)^2, samples^-2, from the
 *              spectrum (band-limited derivative), for the delay bound
 * Returns SE_OK, SE_ERR_ARG (NULL, m = 0, bad rate or shift), SE_ERR_DATA (non-finite pulse),
 * SE_ERR_RANGE (a < 0 or the template too long), SE_ERR_NOMEM. */
se_status se_skin_template(const double *pulse, size_t m, double rate_hz, double a_sqrt_s,
                           double shift, double **out, size_t *n_out, double *d2, se_error *err);

/* The loss's impulse response sampled per sample, h(t / fs) / fs with t in samples (so that its
 * samples sum to about its integral 1): h(t) = a / (2 sqrt(pi)) t^(-3/2) exp(-a^2 / (4 t)) for
 * t > 0, 0 otherwise (and for rate_hz <= 0). */
double se_skin_impulse(double t_samples, double a_sqrt_s, double rate_hz);

/* Take out of y [size: len] what a circular transform of length n_fft (>= 2 len) wrapped in from
 * the slow tail of a pulse of the given area and centroid (samples) passed through the loss a:
 * y[k] -= area sum_{j >= 1} h(k + j n_fft - centroid), four images and the rest as the integral
 * erf(a / (2 sqrt T)) / n_fft, evaluated every 64 samples and interpolated linearly between. */
void se_skin_unwrap(double *y, size_t len, size_t n_fft, double centroid, double area,
                    double a_sqrt_s, double rate_hz);

/* One located echo for the correction: in, the locator's estimate; out, the corrected one. */
typedef struct se_skin_echo {
    double lag;             /* in: lag, samples from the record start (se_peak.lag, late under
                               skin loss); out: corrected lag (the unshaped pulse's start) */
    double amplitude;       /* in: signed amplitude as seen (r units); out: the template's
                               amplitude, the reflection at the discontinuity with the loss shape
                               removed (same units: x = amplitude * template) */
    double lag_plain;       /* out: the input lag, kept */
    double a_sqrt_s;        /* out: a = kappa (lag - lag0) / rate_hz used for the final template */
    double lag_sd;          /* out: one standard uncertainty of lag, samples: the delay bound
                               noise / (|amplitude| sqrt(sum template'^2)) combined with the
                               estimated K's uncertainty (dlag/dK sd_K) when K was estimated */
    double noise_rms;       /* out: noise of x used for lag_sd (given, or the rms of the fit
                               residual in this echo's window) */
    size_t iterations;      /* out: template rebuilds until the lag moved < 1e-6 sample */
    int corrected;          /* out: 1 when corrected; 0 for echoes at or before the direct arrival
                               (a = 0: nothing to do) and for explained ones */
    int explained;          /* out: 1 when the detection is explained by the loss-shaped tail of
                               a stronger echo (with cfg.threshold > 0: its plain matched filter on
                               x minus the stronger echoes' fitted templates is below threshold):
                               not a reflection of its own, drop it; lag and amplitude unchanged */
} se_skin_echo;

typedef struct se_skin_config {
    double rate_hz;         /* sample rate, Hz (> 0) */
    double lag0;            /* lag of the direct arrival (a = 0), samples from the record start */
    double speed_m_s;       /* wave speed, m/s (> 0): round trip l = speed (lag - lag0) / rate */
    double k_s05_per_m;     /* K, s^0.5 per metre, >= 0 (0 = no skin loss: echoes unchanged);
                               NaN = estimate from the data (se_skin_result) */
    double noise_rms;       /* noise of x per sample (x units), > 0; 0 or NaN = from the fit
                               residuals */
    size_t max_fit_echoes;  /* estimation: the strongest echoes fitted jointly (0 = 4), each more
                               than 16 m + 256 samples from the others */
    double threshold;       /* detection threshold of the plain matched filter, r units (> 0):
                               detections that the stronger echoes' loss-shaped templates explain
                               are marked explained (a matched filter with the lossless pulse
                               splits a distorted echo into several peaks); 0 = keep every echo */
} se_skin_config;

/* Defaults: everything 0 (threshold 0: no pruning) but k_s05_per_m = NaN (estimate) and
 * noise_rms = NaN. */
void se_skin_config_init(se_skin_config *cfg);

typedef struct se_skin_result {
    double k_s05_per_m;     /* K used, s^0.5/m (given or estimated) */
    double k_sd;            /* one standard uncertainty of an estimated K from the curvature of
                               the residual, var = 2 s^2 / S''(K) with s^2 = S_min / (points -
                               parameters); NaN when given or when the curvature is not positive */
    int estimated;          /* 1 when K was estimated from the data */
    size_t fit_echoes;      /* echoes used for the estimate */
    double residual;        /* S_min: sum of squared residuals of the fit windows (x units^2) */
} se_skin_result;

/* Correct located echoes for skin-effect distortion. With cfg.threshold > 0 the detections that
 * stronger echoes' loss-shaped templates explain are marked first (se_skin_echo.explained). For each
 * remaining echo after the direct arrival:
 * a = kappa (lag - lag0) / rate (kappa = K speed), the template for a (se_skin_template) is
 * correlated with x around the echo (normalised by its energy), the peak refined band-limited
 * (se_refine_peak), the lag updated and a rebuilt, until the lag moves less than 1e-6 sample (at
 * most 50 rebuilds, else SE_ERR_NUMERIC). The amplitude is then the template's. All echoes are
 * fitted together (Gauss-Seidel, two sweeps: each one fitted on x minus the others' shifted
 * templates), so the slow t^-1.5 tails of earlier echoes do not bias later ones.
 * With K = NaN, K is first estimated: for each trial K the max_fit_echoes strongest well-separated
 * echoes are fitted as above and the squared residual of x minus amplitude * template (sub-sample shifted)
 * summed over a window per echo that does not depend on K (half-way to the neighbouring echoes,
 * at most 16 m + 256 samples beyond the echo); the minimum over K is bracketed on a grid of a^2 fs
 * at the farthest fitted echo (0 and 0.05 x 2^j samples, up to half its delay, stopped 3 points past
 * the lowest) and refined by
 * gsl_min_fminimizer_brent.
 *   x        [size: n] the response the locator correlates (after its conversions); borrowed
 *   pulse    [size: m] the reference pulse of the matched filter; borrowed
 *   echoes   [size: n_echoes] in/out (see se_skin_echo); any order
 *   res      out (may be NULL): K used and how it was found
 * Echoes whose window leaves the record are fitted on the part inside it; with no echo after the
 * direct arrival nothing is estimated (res: K NaN, estimated 0). Returns SE_OK, SE_ERR_ARG (NULL,
 * bad config), SE_ERR_DATA (non-finite x or pulse), SE_ERR_RANGE (a template too long),
 * SE_ERR_NOTFOUND (an echo's fit left the record), SE_ERR_NUMERIC, SE_ERR_NOMEM; on failure the
 * echoes are unchanged. Cost: per echo and rebuild two transforms of a power of two >= 2 (m + 400
 * a^2 fs); the estimate repeats the joint fit some 20-30 times (tests/test_skin.c: 4 s for 4 cases). */
se_status se_skin_correct(const double *x, size_t n, const double *pulse, size_t m,
                          const se_skin_config *cfg, se_skin_echo *echoes, size_t n_echoes,
                          se_skin_result *res, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_SKIN_H */
