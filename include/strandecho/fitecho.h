/* strandecho: model-based least squares of overlapping echoes.
 *
 * The response x near a group of echoes is modelled as
 *     x[i] = sum_k a_k s(i - tau_k) + noise,     i in [begin, end)
 * where s is the band-limited (trigonometric) interpolant of the reference pulse samples s[0..m-1]
 * and tau_k is the lag of echo k in the matched-filter output r (se_xcorr's normalisation: an echo
 * a s starting at sample tau gives r(tau) = a). The amplitudes a_k and delays tau_k are fitted by
 * nonlinear least squares (GSL gsl_multifit_nlinear, Levenberg-Marquardt trust region, analytic
 * Jacobian df/da = -s(i - tau), df/dtau = a s'(i - tau)), started from greedy subtraction (CLEAN,
 * se_detect) and from two starts that no greedy pick can mislead (see se_fitecho). The number of
 * echoes is chosen by the Bayesian information criterion
 *     BIC(K) = RSS_K / sigma^2 + 2 K ln N       (N samples, 2 parameters per echo)
 * (R. Demirli & J. Saniie, IEEE TUFFC 48(3), 2001). The covariance of each echo is
 * sigma^2 (J^T J)^-1 (REFERENCE.md 2, "Overlapping echoes").
 *
 * For a single isolated echo the fit maximises <x, s_tau> = E_s r(tau): the same estimator as the
 * band-limited peak of r (se_refine_peak), so nothing is lost when the echoes do not overlap.
 *
 * Threads: se_echo_model_create plans FFTW transforms (FFTW_ESTIMATE): one thread at a time.
 * se_fitecho only reads the model: a const se_echo_model may be shared between threads.
 */
#ifndef SE_FITECHO_H
#define SE_FITECHO_H

#include <stddef.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The reference pulse and its derivative tabulated at 1/16 sample (fewer points per sample for
 * very long pulses), read by cubic Hermite interpolation. */
typedef struct se_echo_model se_echo_model;
/* pulse [size: m] is read, not kept. NULL and err on: NULL pulse, m < 2, a non-finite sample
 * (named), zero energy, allocation or planning failure. */
se_echo_model *se_echo_model_create(const double *pulse, size_t m, se_error *err);
/* NULL accepted. */
void se_echo_model_destroy(se_echo_model *mdl);
/* Pulse length m, samples. */
size_t se_echo_model_length(const se_echo_model *mdl);
/* s(t) at a fractional sample time t (0 = first pulse sample); *deriv (may be NULL) receives
 * ds/dt per sample. 0 well outside the pulse (more than 1.5 m samples away) or for NaN t. */
double se_echo_model_value(const se_echo_model *mdl, double t, double *deriv);

/* One fitted echo. */
typedef struct se_echo {
    double lag;          /* delay, samples (lag in r, the start of the echo in x) */
    double amplitude;    /* a, in r's units (x units / pulse units) */
    double lag_sd;       /* one standard uncertainty of lag, samples */
    double amplitude_sd; /* one standard uncertainty of amplitude */
    double corr;         /* correlation coefficient of the lag and amplitude errors */
} se_echo;

typedef struct se_fitecho_config {
    size_t begin, end;    /* window of x fitted, [begin, end); 0, 0 = from the initial echoes:
                             the first lag minus m/2 to the last lag plus 3m/2, clipped to x */
    size_t max_echoes;    /* upper limit of the number of echoes (0 = 6) */
    double sigma;         /* noise standard deviation of x per sample (white); 0 = estimate
                             from the residual of the chosen fit, RSS / (N - 2K) */
    double min_amplitude; /* an echo is only kept when |a| >= min_amplitude and
                             |a| >= 3 amplitude_sd (0 = the second test only) */
    double min_separation;/* two echoes closer than this (samples) are one (0 = 0.1) */
} se_fitecho_config;

/* Zeroes cfg: window from the initial echoes, up to 6 echoes, sigma from the residual. */
void se_fitecho_config_init(se_fitecho_config *cfg);

/* Fit x [size: n] in the window with init [size: n_init >= 1] as the starting echoes (lags as
 * above). The number of echoes is then chosen by BIC: an echo is added where the residual's
 * correlation with the pulse is largest, and each echo is tried removed, while BIC falls (echoes
 * failing the amplitude tests are removed). The same search is also run from two other starts:
 * one echo at the largest matched-filter output of the window, and (max_echoes >= 2) the pair of
 * integer lags within m/2 of the initial echoes' span, closer than m, that explains most of the
 * window by linear least squares (exhaustive; O(L m) for L candidate lags). The model with the
 * lowest BIC is kept, the greedy start's on ties; with a single initial echo (n_init = 1) another
 * start's model is only taken when its echoes are at least the pulse's main-lobe half width
 * apart (first zero or minimum of its autocorrelation): closer, at high SNR, a small error of the
 * pulse shape is fitted as well by two echoes. The extra starts matter for an oscillating
 * pulse: two same-sign echoes add their side lobes between them, and CLEAN's first pick there
 * leads the search from a comb of false echoes. *out: malloc'd array sorted by lag (caller frees),
 * *n_out its length (>= 1 unless every echo failed the tests, then 0 and *out NULL).
 * *bic (may be NULL): BIC of the chosen model. *sigma_used (may be NULL): the sigma used.
 * Errors: NULL arguments, n_init = 0, a window outside x or shorter than 4 K samples
 * (SE_ERR_ARG); a non-finite x in the window (SE_ERR_DATA, named); allocation (SE_ERR_NOMEM);
 * no start whose first fit converged (SE_ERR_NUMERIC). */
se_status se_fitecho(const se_echo_model *mdl, const double *x, size_t n,
                     const se_fitecho_config *cfg, const se_echo *init, size_t n_init,
                     se_echo **out, size_t *n_out, double *bic, double *sigma_used, se_error *err);

/* Layered fit: two interfaces whose echoes include their internal reverberation.
 *
 * Two reflection coefficients r1 (first) and r2 at lags tau1 < tau2 (samples), seen through a gain
 * g (everything between the source and the first interface: transmissions, losses; 1 for
 * interfaces seen directly) give, in seen amplitudes (r's units, the lattice's sign convention)
 *     g r1                             at tau1            (first primary)
 *     g (1 - r1^2) r2                  at tau2            (second primary)
 *     g (1 - r1^2) r2 (-r1 r2)^n       at tau2 + n (tau2 - tau1), n = 1, 2, ...  (internal multiples)
 * kept down to min_fraction of the larger primary. The parameters (tau1, tau2, r1, r2 and, unless
 * fixed, g) are fitted by nonlinear least squares (gsl_multifit_nlinear, as se_fitecho, with the
 * analytic Jacobian from the pulse derivative); |r_i| < 1 is required of the result. A model of
 * independent echoes cannot place such a train when the interfaces are a fraction of the main
 * lobe apart (each multiple is then inside the lobe of the primaries); this one explains every
 * arrival of the train by the two primaries. */
typedef struct se_layerfit_config {
    size_t begin, end;   /* window of x fitted, [begin, end) (required: end > begin) */
    double min_fraction; /* multiples kept down to this fraction of the larger primary (0 = 1e-4) */
    double gain;         /* g when fix_gain (0 = 1) */
    int fix_gain;        /* nonzero: g fixed at gain (4 parameters); 0: g fitted too (5) */
    double sigma;        /* noise standard deviation per sample; 0 = from the residual,
                            RSS / (N - p) */
} se_layerfit_config;

/* Zeroes cfg: multiples down to 1e-4, gain fitted, sigma from the residual. */
void se_layerfit_config_init(se_layerfit_config *cfg);

typedef struct se_layerfit_result {
    se_echo primary[2];  /* the two primaries: lag (samples), seen amplitude (g r1, and
                            g (1 - r1^2) r2), their standard uncertainties from the covariance
                            sigma^2 (J^T J)^-1 propagated to the seen amplitudes, and corr */
    double r[2], r_sd[2];/* interface coefficients and their standard uncertainties */
    double gain, gain_sd;/* g (gain_sd 0 when fixed) */
    size_t n_arrivals;   /* arrivals in the model (2 primaries + multiples kept) */
    double rss;          /* residual sum of squares over the window */
    double sigma;        /* the sigma used */
} se_layerfit_result;

/* Fit x [size: n] in cfg's window, started from init [size: 2] (two echoes, lags as in se_echo,
 * e.g. se_fitecho's; sorted here; r1 = a1 / g, r2 = a2 / (g (1 - r1^2)) with g = 1 or the fixed
 * gain). A valid fit from there (converged, |r| < 1, tau1 < tau2, both primaries overlapping
 * the window) is kept; when there is none, the fit is started from 8 separations (1/8 .. 1 of the
 * pulse's main-lobe half width) about their amplitude-weighted centre and the valid fit with the
 * lowest RSS is kept.
 * resid (may be NULL) [size: end - begin] receives x - model over the window.
 * Errors: NULL arguments, a window outside x or shorter than 16 samples, non-finite starts
 * (SE_ERR_ARG); a non-finite x in the window (SE_ERR_DATA, named); allocation (SE_ERR_NOMEM); no
 * start converged to a valid fit (SE_ERR_NUMERIC). */
se_status se_layerfit(const se_echo_model *mdl, const double *x, size_t n,
                      const se_layerfit_config *cfg, const se_echo init[2],
                      se_layerfit_result *out, double *resid, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_FITECHO_H */
