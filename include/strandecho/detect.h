/* strandecho: detection on the matched-filter output r (see xcorr.h): robust noise scale, Rice
 * thresholds, the reference pulse's autocorrelation, CLEAN peak search and band-limited sub-sample
 * refinement.
 *
 * Units: lags and widths in samples of r (index into r), bandwidths in rad/sample, amplitudes in
 * r's units (for se_xcorr's normalisation, the reflection coefficient times losses).
 *
 * Threads: se_acf_create plans FFTW transforms (FFTW_ESTIMATE): call it from one thread at a time.
 * Everything else here is reentrant: a const se_acf may be shared between threads.
 */
#ifndef SE_DETECT_H
#define SE_DETECT_H

#include <stddef.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Autocorrelation of the reference pulse s [size: m], normalised acf(0) = 1:
 *   acf(k) = (1/E_s) sum_j s[j+k] s[j],  |k| <= m-1,  0 beyond.
 * An echo a * s delayed by tau samples gives r(k) = a acf(k - tau). Fractional lags use the
 * band-limited (trigonometric) interpolant of the integer-lag sequence, tabulated at 1/32 sample
 * (fewer for very long pulses) and read by cubic Hermite interpolation. */
typedef struct se_acf se_acf;
/* pulse [size: m] is read, not kept. NULL and err on: NULL pulse, m = 0, non-finite sample (named),
 * zero energy, allocation or FFT planning failure. */
se_acf *se_acf_create(const double *pulse, size_t m, se_error *err);
/* NULL accepted. */
void se_acf_destroy(se_acf *a);
/* m - 1: the support is lags [-(m-1), m-1]. */
size_t se_acf_half_length(const se_acf *a);
/* Band-limited value at a fractional lag (samples); even in lag; 0 for |lag| > m-1 or NaN lag. */
double se_acf_value(const se_acf *a, double lag);
/* beta_d of the pulse, rad/sample: sqrt(-acf''(0)) = sqrt(int w^2 |S|^2 / int |S|^2) over (-pi, pi]
 * (Kay 1993, ch. 3), computed exactly from the integer lags:
 *   -acf''(0) = pi^2/3 + 4 sum_{k>=1} (-1)^k acf(k) / k^2.
 * Gaussian pulse exp(-t^2/(2 w^2)): 1/(sqrt(2) w). */
double se_acf_rms_bandwidth(const se_acf *a);
/* Half width of the main lobe, samples: the lag of the first zero crossing of acf, or of its first
 * local minimum, whichever comes first; for a lobe that decays monotonically without either (a
 * Gaussian pulse) the lag where acf first falls below 1e-3. At most m - 1. */
double se_acf_mainlobe_half_width(const se_acf *a);
/* Smallest L such that |acf(k)| < level for every integer |k| > L (level in (0,1)); 0 for a level
 * outside (0,1). */
size_t se_acf_extent(const se_acf *a, double level);

/* Robust noise scale of r. */
typedef struct se_noise {
    double sigma;   /* 1.4826 * median |r - median r| (MAD; Rousseeuw & Croux, JASA 88, 1993) */
    double median;  /* median of r over the samples used */
    size_t n_used;  /* number of samples used */
    double beta;    /* rad/sample, measured from the data: sigma of the first differences r[i+1]-r[i]
                       (same MAD estimator) over sigma; ~ sqrt(-rho''(0)) for an oversampled
                       process, the bandwidth Rice's formula needs. 0 if fewer than 2 samples. */
} se_noise;
/* Noise of r[start..end) [r size: >= end]. If the range holds more than max_samples values
 * (0 = 1<<20), a strided sample of at most max_samples of them is used (with the difference at each
 * sampled position). Medians by O(n) selection (quickselect), no full sort. Errors: NULL r/out,
 * empty range or end before start (SE_ERR_ARG), a non-finite sample (named, SE_ERR_DATA),
 * allocation. */
se_status se_noise_mad(const double *r, size_t start, size_t end, size_t max_samples, se_noise *out,
                       se_error *err);

/* Rice (S.O. Rice, BSTJ 23-24, 1944-45): the expected number of peaks of |r| above k sigma in
 * n_lags lags of a Gaussian process of rms bandwidth beta (rad/sample) is about
 * n_lags beta/pi exp(-k^2/2) (upcrossings of +k sigma and downcrossings of -k sigma). Returns
 * k = sqrt(2 ln(n_lags beta / (pi false_alarms))) for the stated false-alarm count per record,
 * clamped to k >= 3. REFERENCE.md: n = 2^22, Gaussian w = 2 -> k = 5.1 for 1, 5.9 for 0.01.
 * Returns NaN if an argument is not positive and finite. */
double se_rice_k(double n_lags, double beta_rad_per_sample, double false_alarms);

/* Non-stationary noise: a sliding-window robust noise profile of r (cfar.c).
 * The searched lags [start, end) are cut into blocks of se_noise_block_length(m) lags (the last
 * block takes the remainder, so it holds between one and two blocks' lags); each block's noise is
 * the MAD sigma of its own lags (se_noise_mad on the block, at most SE_NOISE_BLOCK_SAMPLES of them,
 * strided). When the largest block sigma is less than SE_NOISE_VARY_RATIO times the smallest the
 * noise is taken as stationary and no profile is used (the global Rice threshold holds unchanged).
 * Otherwise blocks are grouped into runs of neighbours within a factor SE_NOISE_RUN_RATIO of each
 * other; a block of a run of two or more takes the mean sigma of the blocks of its run within 4
 * blocks of it (a piecewise-constant level estimated on many lags); a block alone in its run (a
 * change of level falls inside it, or an outlier) takes the largest of its own and its
 * neighbours' raw sigmas. Within `guard` lags (the reference length) of a block edge the larger
 * of the two blocks' levels is used, since r mixes the noise of both sides over one pulse length.
 * The threshold at lag j is then k sigma(j), k from se_rice_k on the whole record: the stated
 * false-alarm count per record holds, spread over the record in proportion to the lags. */
#define SE_NOISE_BLOCK_SAMPLES ((size_t)1 << 10)
/* ... and at most this many of each of its 8 parts (their MADs show a loud minority) */
#define SE_NOISE_PART_SAMPLES ((size_t)1 << 8)
#define SE_NOISE_VARY_RATIO 2.0
#define SE_NOISE_RUN_RATIO 1.5
typedef struct se_noise_profile {
    size_t start;    /* first lag of block 0 */
    size_t block;    /* lags per block (the last block runs to the end of the range) */
    size_t n_blocks;
    size_t guard;    /* lags near a block edge that take the larger neighbouring level */
    double *sigma;   /* [size: n_blocks] level of each block, r units; owned (se_noise_profile_free) */
    double *raw;     /* [size: n_blocks] each block's own MAD sigma before grouping; owned */
    double min_sigma, max_sigma; /* extremes of sigma */
} se_noise_profile;
/* Block length (lags) for a reference pulse of m samples: max(4096, 256 m). A block then holds
 * several hundred independent noise values, so its MAD sigma scatters by a few per cent. */
size_t se_noise_block_length(size_t m);
/* Number of blocks for the lag range [start, end) and block length L: (end - start) / L
 * (0 when the range is shorter than one block). Block b covers [start + b L, start + (b+1) L),
 * the last one [start + (nb-1) L, end). */
size_t se_noise_block_count(size_t start, size_t end, size_t block);
/* One block's lags r_block [size: len]: *sigma its MAD sigma (se_noise_mad from 0 to len, at most
 * SE_NOISE_BLOCK_SAMPLES values), *hi the largest of *sigma and the MAD sigmas (on at most
 * SE_NOISE_PART_SAMPLES values each) of its 8 equal parts
 * (part q covers [q len/8, (q+1) len/8), the last to len; parts under 16 lags are skipped). The MAD
 * of a block ignores a loud minority of its lags; its parts do not. These are the values
 * se_noise_profile_estimate takes for the block. */
se_status se_noise_block_sigma(const double *r_block, size_t len, double *sigma, double *hi,
                               se_error *err);
/* The same from the block's sampled lags only, for a caller that sees the block go by in pieces
 * (the streaming locate) and need not keep it: se_noise_block_taps fills idx [size:
 * SE_NOISE_BLOCK_TAPS] with the offsets in [0, len) that se_noise_block_sigma reads (the block's
 * strided offsets, then each part's; an offset may appear twice) and returns their count nt
 * (idx NULL: only counted); if first is not NULL, first [size: 9] receives where the block's and
 * each part's offsets start in idx (first[8] = nt). 0 for len = 0. se_noise_block_sigma_taps then takes
 * vals[i] = r_block[idx[i]] [size: nt] and gives se_noise_block_sigma's values bit for bit.
 * Errors: NULL arguments, len = 0 (SE_ERR_ARG); a non-finite value (its offset named,
 * SE_ERR_DATA). */
#define SE_NOISE_BLOCK_TAPS (SE_NOISE_BLOCK_SAMPLES + 8 * SE_NOISE_PART_SAMPLES)
size_t se_noise_block_taps(size_t len, size_t *idx, size_t *first);
se_status se_noise_block_sigma_taps(const double *vals, size_t len, double *sigma, double *hi,
                                    se_error *err);
/* From the block sigmas raw and hi [size: nb >= 1] (se_noise_block_sigma; read, not kept), each
 * raw floored at floor (>= 0): a block whose hi exceeds SE_NOISE_RUN_RATIO times its raw sigma
 * holds a change of level and is treated as a block alone in its run (its level: the largest of
 * its hi and its neighbours' raw sigmas). Non-stationary when max(raw, hi) >= SE_NOISE_VARY_RATIO
 * min(raw). Fills
 * *out and sets *varies = 1 when the noise is found non-stationary (nb >= 3 and the max/min
 * ratio reaches SE_NOISE_VARY_RATIO); else *varies = 0 and *out is left empty (zeroed).
 * Errors: NULL arguments, nb = 0 or block = 0 (SE_ERR_ARG), allocation. */
se_status se_noise_profile_from_blocks(const double *raw, const double *hi, size_t nb, size_t start,
                                       size_t block, size_t guard, double floor,
                                       se_noise_profile *out, int *varies, se_error *err);
/* Blocks of r [size: >= end] over [start, end) measured and passed to
 * se_noise_profile_from_blocks. With fewer than 3 blocks *varies = 0. */
se_status se_noise_profile_estimate(const double *r, size_t start, size_t end, size_t block,
                                    size_t guard, double floor, se_noise_profile *out, int *varies,
                                    se_error *err);
/* Noise level at lag (samples, index into r): the block's level, or the larger of two
 * neighbouring levels within guard of their common edge; lags before the range take block 0's,
 * after it the last block's. */
double se_noise_profile_sigma(const se_noise_profile *p, double lag);
/* Frees the arrays and zeroes *p; NULL accepted. */
void se_noise_profile_free(se_noise_profile *p);

typedef struct se_peak {
    double lag;        /* refined fractional lag, samples (index into r; from se_detect, plus
                          the config's origin) */
    double amplitude;  /* signed r value at the refined lag (band-limited), in r's units */
    size_t index;      /* integer argmax it came from (the same origin) */
} se_peak;

typedef struct se_detect_config {
    size_t start, end;    /* lag range [start, end) searched */
    double threshold;     /* absolute threshold on |r| (> 0), r's units */
    size_t max_peaks;     /* stop after this many (0 = 256) */
    const se_acf *acf;    /* for CLEAN subtraction of each found echo's sidelobes; required, borrowed */
    const se_peak *known; /* [size: n_known] echoes already found outside the range (e.g. the direct */
    size_t n_known;       /* arrival) whose sidelobes are subtracted first; may be NULL/0 */
    /* Optional non-stationary noise (borrowed; NULL = the one threshold above): the threshold at
     * lag j is profile_sigmas * se_noise_profile_sigma(profile, j), and CLEAN takes the largest
     * |residual| relative to its own lag's threshold first. threshold must still be > 0. */
    const se_noise_profile *profile;
    double profile_sigmas;
    /* Record index of r[0] when r is a window of a longer matched-filter output (0: r is the
     * whole of it). The lags of known and of the peaks returned, and the peaks' index, are then
     * record indices, and CLEAN's arithmetic is done on them (the acf evaluated at record index
     * minus record lag, each lag formed as integer peak plus offset, rounded once): a window
     * holding the same r values gives the peaks of the whole r bit for bit. start, end and
     * the profile stay indices into r. */
    size_t origin;
} se_detect_config;

/* CLEAN (J. Hogbom, A&AS 15, 1974) on r [size: n]: repeatedly take the largest |residual| in
 * [start, end), refine it (se_refine_peak on the residual, window from the acf extent at 1e-6, at
 * least 16), record it, subtract amplitude * acf(k - lag) from the residual, until the largest is
 * below threshold or max_peaks are found. After each new echo, the echoes whose acf supports overlap
 * it are put back, re-refined and subtracted again (back-fitting, up to 8 sweeps), so overlapping
 * echoes leave no residual lobes to be reported as false peaks. r is not modified (the residual is a private copy of the
 * range plus margins). *peaks: malloc'd array sorted by lag (caller frees), NULL when none;
 * *npeaks: its length. Errors: NULL arguments, missing acf, bad range or threshold (SE_ERR_ARG);
 * non-finite r in the range or its margins (named, SE_ERR_DATA); allocation. */
se_status se_detect(const double *r, size_t n, const se_detect_config *cfg, se_peak **peaks,
                    size_t *npeaks, se_error *err);

/* Band-limited sub-sample refinement of the peak of |r| near integer index k, r [size: n].
 * k is first moved uphill to the local maximum of |r|. A window of r around it, window_half samples
 * each side (0 = auto from the data: doubled from 16 while the envelope at its edges still falls
 * and exceeds 1e-7 of the peak), tapered to zero over its outer half (cosine), is interpolated by its
 * trigonometric (DFT) interpolant, evaluated through the Dirichlet kernel (the same values as
 * zero-padded FFT upsampling, without planning an FFT per call), and |interpolant| is maximised over
 * (k-1, k+1) with GSL's Brent minimiser (gsl_min_fminimizer_brent) to 1e-9 sample.
 * *lag: refined lag (samples, index into r); *amp: signed interpolant value there.
 * Noise-free bias ~1e-8 sample for the Gaussian w = 2 and Ricker f0 = 0.1 pulses (tests/test_refine.c).
 * Errors: NULL arguments, k >= n, n < 3 (SE_ERR_ARG); non-finite r in the window (SE_ERR_DATA);
 * |r| zero at the peak (SE_ERR_DATA); allocation. A minimiser that does not converge in 100
 * iterations returns SE_ERR_NUMERIC. GSL's error handler is not called for valid inputs (the
 * bracket is checked first), except on GSL's own allocation failure. */
se_status se_refine_peak(const double *r, size_t n, size_t k, size_t window_half, double *lag,
                         double *amp, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_DETECT_H */
