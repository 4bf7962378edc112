/* strandecho: the locator pipeline. Reference -> matched filter -> time origin -> noise and
 * threshold -> dead zone -> CLEAN detection with band-limited refinement -> classification and
 * distances with uncertainties. */
#include "strandecho/skin.h"
#include "strandecho/locate.h"

#include <float.h>
#include <pthread.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_cdf.h>

#include "internal.h"
#include "strandecho/detect.h"
#include "strandecho/distmap.h"
#include "strandecho/fitecho.h"
#include "strandecho/line.h"
#include "strandecho/simulate.h"
#include "strandecho/stack.h"
#include "strandecho/xcorr.h"

/* Lags of r sampled (strided) for the MAD noise estimate; stream.c uses the same number. */
#define SE_LOCATE_NOISE_SAMPLES ((size_t)1 << 16)
/* Noise floor relative to the direct arrival (80 dB): see se_locate. */
#define SE_LOCATE_NOISE_FLOOR 1e-4
/* A run of at least this many equal samples at the trace's extreme is clipping. */
#define SE_CLIP_RUN 5

static double se_robust_sigma(const double *x, size_t n, se_error *err, int *ok);
static se_status se_find_direct(const double *r, size_t n, const se_locate_config *cfg,
                                size_t ref_begin, size_t m, size_t *k0, se_error *err);
struct se_locate_stage;
static se_status se_label_multiples(se_event *ev, size_t n, const se_locate_stage *sg,
                                    se_locate_result *res, double *spread_out, se_error *err);
static void se_ring_and_decay(const se_locate_stage *sg, se_locate_result *res,
                              const double *spread);
static void se_find_clipping(const double *x, size_t n, se_locate_result *res);
static int se_window_clipped(const se_locate_result *res, size_t start, size_t m);
/* Longest pulse (samples) for which overlapping echoes are refitted by least squares. */
#define SE_FIT_MAX_PULSE 4096
static se_status se_locate_stack(double **x, size_t *n, const double *pulse, size_t m,
                                 const se_locate_config *cfg, double rate_hz,
                                 se_locate_result *res, size_t *pre, int *stacked,
                                 double **prev_w, se_error *err);
static se_status se_refit_overlaps(const se_sample_reader *x, se_echo_model **mdlp,
                                   const double *ref, size_t m, const se_locate_result *res,
                                   const se_peak *direct,
                                   double thr, const se_noise_profile *prof, double kthr,
                                   double hw, se_peak **peaks, size_t *npeaks, double **lag_sd,
                                   double **amp_sd, se_error *err);
static se_status se_read_array(void *ctx, size_t pos, size_t count, double *out, se_error *err);
static void se_keep_largest(se_peak *peaks, size_t *npeaks, double *lag_sd, double *amp_sd,
                            size_t maxp);
static double se_estimate_source(const se_peak *peaks, size_t npeaks, double lag0, double a0,
                                 double hw, double sigma, const se_noise_profile *prof,
                                 int *found);
static void se_apply_losses(const se_locate_config *cfg, se_locate_result *res);
static se_status se_dead_zone_scan(const se_sample_reader *x, const se_echo_model *mdl,
                                   const se_peak *direct, const se_peak *peaks, size_t npeaks,
                                   size_t dead, double thr, double sigma, double hw, double rs,
                                   double rate_hz, double z, const se_distmap *map,
                                   se_locate_result *res, se_error *err);
static se_status se_event_uncertainty(const se_distmap *map, double z, double sl, double sl0,
                                       double rate_hz, se_event *ev, se_error *err);
static se_status se_locate_skin(const double *x, size_t n, const double *ref, size_t m,
                                double rate_hz, double lag0, const se_locate_config *cfg,
                                const se_distmap *map, double thr, se_peak *peaks, size_t *npeaks,
                                double *skin_sd, double *plain_lag, se_locate_result *res,
                                se_error *err);

void se_locate_config_init(se_locate_config *cfg)
{
    memset(cfg, 0, sizeof *cfg);
    cfg->quantity = SE_Q_VELOCITY;
    cfg->false_alarms = 0.01;
    cfg->max_events = 64;
    cfg->confidence = 0.95;
    cfg->low_snr_db = 20.0;
    cfg->reference_offset = SIZE_MAX;
    cfg->reference_kind = SE_REF_SELF;
    cfg->stacking = SE_STACKING_AUTO;
    cfg->attenuation_db_per_m = NAN;
    cfg->fit_overlaps = 1;
    cfg->noise_tracking = 1;
    cfg->skin_k_s05_per_m = 0.0;
}

void se_locate_result_free(se_locate_result *res)
{
    if (res == NULL)
        return;
    free(res->events);
    res->events = NULL;
    res->n_events = 0;
    free(res->expected_found);
    res->expected_found = NULL;
    res->n_expected = 0;
    free(res->trace);
    res->trace = NULL;
    res->trace_length = 0;
    free(res->dead_zone_events);
    res->dead_zone_events = NULL;
    res->n_dead_zone_events = 0;
}

const char *se_event_polarity(const se_event *ev)
{
    return ev->polarity >= 0 ? "upright" : "inverted";
}

const char *se_event_impedance(const se_event *ev)
{
    return ev->impedance_increase ? "increase" : "decrease";
}

const char *se_event_class(const se_locate_result *res, const se_event *ev)
{
    return se_class_name(res->quantity, ev->impedance_increase);
}

/* 1.4826 * MAD of x, on a strided sample of at most 2^18 values (O(n) selection inside
 * se_noise_mad). */
static double se_robust_sigma(const double *x, size_t n, se_error *err, int *ok)
{
    se_noise nz;
    *ok = se_noise_mad(x, 0, n, (size_t)1 << 18, &nz, err) == SE_OK;
    return *ok ? nz.sigma : 0.0;
}

se_status se_pulse_support(const double *x, size_t n, size_t *begin, size_t *end, se_error *err)
{
    double peak = 0.0, sigma, hi, lo;
    size_t i, first = SIZE_MAX, last, quiet, gap, b, e, pad;
    int ok;

    if (x == NULL || n < 3)
        return se_fail(err, SE_ERR_DATA, "pulse search: trace has %zu samples, need at least 3", n);
    for (i = 0; i < n; i++)
        if (fabs(x[i]) > peak)
            peak = fabs(x[i]);
    if (!(peak > 0.0))
        return se_fail(err, SE_ERR_DATA, "pulse search: the trace is all zero");
    for (i = 1; i < n && x[i] == x[0]; i++) {
    }
    if (i == n)
        return se_fail(err, SE_ERR_DATA, "pulse search: the trace is constant (%.6g)", x[0]);
    sigma = se_robust_sigma(x, n, err, &ok);
    if (!ok)
        return err ? err->code : SE_ERR_DATA;
    hi = fmax(8.0 * sigma, 0.2 * peak);
    for (i = 0; i < n; i++)
        if (fabs(x[i]) > hi) {
            first = i;
            break;
        }
    if (first == SIZE_MAX || hi >= peak)
        return se_fail(err, SE_ERR_NOTFOUND,
                       "pulse search: no excursion stands above the noise (peak %.3g, noise %.3g)",
                       peak, sigma);
    /* The local peak of this first excursion sets the tail level. */
    {
        double local = 0.0;
        lo = fmax(3.0 * sigma, 1e-3 * hi);
        for (i = first, quiet = 0; i < n; i++) {
            size_t len = i - first;
            gap = 8 + len / 16;
            if (fabs(x[i]) > local)
                local = fabs(x[i]);
            lo = fmax(3.0 * sigma, 1e-3 * local);
            if (fabs(x[i]) < lo) {
                if (++quiet >= gap)
                    break;
            } else {
                quiet = 0;
            }
        }
        last = i >= n ? n : i + 1 - quiet;
    }
    /* Backwards from the first crossing to where the leading tail falls under lo. */
    for (b = first, quiet = 0; b > 0; b--) {
        if (fabs(x[b - 1]) < lo) {
            if (++quiet >= 8)
                break;
        } else {
            quiet = 0;
        }
    }
    b = b + quiet > first ? first : b + quiet;
    e = last;
    pad = 2 + (e - b) / 50;
    b = b > pad ? b - pad : 0;
    e = e + pad < n ? e + pad : n;
    *begin = b;
    *end = e;
    return SE_OK;
}

se_status se_to_velocity(double *x, size_t n, double rate_hz, se_quantity q, size_t pre_trigger,
                         se_error *err)
{
    size_t i;
    if (q != SE_Q_ACCELERATION && q != SE_Q_DISPLACEMENT)
        return SE_OK;
    if (x == NULL || n < 3 || !(rate_hz > 0.0))
        return se_fail(err, SE_ERR_DATA, "cannot convert a %zu-sample trace to velocity", n);
    if (q == SE_Q_DISPLACEMENT) {
        /* central differences; one-sided at the ends */
        double prev = x[0], cur;
        double d0 = (x[1] - x[0]) * rate_hz;
        for (i = 1; i + 1 < n; i++) {
            cur = x[i];
            x[i] = (x[i + 1] - prev) * 0.5 * rate_hz;
            prev = cur;
        }
        x[n - 1] = (x[n - 1] - prev) * rate_hz;
        x[0] = d0;
        return SE_OK;
    }
    /* acceleration: remove the pre-trigger offset, integrate by trapezoids, fit out a line */
    {
        double mean = 0.0, acc = 0.0, prev;
        double sx = 0, sy = 0, sxx = 0, sxy = 0, slope, icpt, den;
        size_t np = pre_trigger ? pre_trigger : n / 100;
        if (np < 1)
            np = 1;
        if (np > n)
            np = n;
        for (i = 0; i < np; i++)
            mean += x[i];
        mean /= (double)np;
        prev = x[0] - mean;
        x[0] = 0.0;
        for (i = 1; i < n; i++) {
            double a = x[i] - mean;
            acc += 0.5 * (a + prev) / rate_hz;
            prev = a;
            x[i] = acc;
        }
        for (i = 0; i < n; i++) {
            double t = (double)i;
            sx += t;
            sy += x[i];
            sxx += t * t;
            sxy += t * x[i];
        }
        den = (double)n * sxx - sx * sx;
        slope = den != 0.0 ? ((double)n * sxy - sx * sy) / den : 0.0;
        icpt = (sy - slope * sx) / (double)n;
        for (i = 0; i < n; i++)
            x[i] -= icpt + slope * (double)i;
    }
    return SE_OK;
}

/* Integer lag of the direct arrival in r. */
static se_status se_find_direct(const double *r, size_t n, const se_locate_config *cfg,
                                size_t ref_begin, size_t m, size_t *k0, se_error *err)
{
    size_t lo = 0, hi = n, i, best = SIZE_MAX;
    double bestv = 0.0, gmax = 0.0;

    if (cfg->reference_kind == SE_REF_SELF) {
        *k0 = ref_begin;
        return SE_OK;
    }
    if (cfg->reference_offset != SIZE_MAX) {
        /* a channel of the same recording: the sensor sits at (or near) the injection point */
        lo = cfg->reference_offset > m ? cfg->reference_offset - m : 0;
        hi = cfg->reference_offset + 2 * m + 1 < n ? cfg->reference_offset + 2 * m + 1 : n;
        for (i = lo; i < hi; i++)
            if (fabs(r[i]) > bestv) {
                bestv = fabs(r[i]);
                best = i;
            }
    } else {
        /* no time base: the first lag that reaches half the record's largest correlation, then
         * its local maximum within one pulse length */
        for (i = 0; i < n; i++)
            if (fabs(r[i]) > gmax)
                gmax = fabs(r[i]);
        for (i = 0; i < n; i++)
            if (fabs(r[i]) >= 0.5 * gmax)
                break;
        lo = i;
        hi = lo + m + 1 < n ? lo + m + 1 : n;
        for (i = lo; i < hi; i++)
            if (fabs(r[i]) > bestv) {
                bestv = fabs(r[i]);
                best = i;
            }
    }
    if (best == SIZE_MAX || !(bestv > 0.0))
        return se_fail(err, SE_ERR_NOTFOUND,
                       "the outgoing pulse does not appear in the response (no correlation peak)");
    *k0 = best;
    return SE_OK;
}

se_status se_locate(const double *response, size_t n, double rate_hz, const se_locate_config *cfg,
                    se_locate_result *res, se_error *err)
{
    se_status st = SE_OK;
    double *x = NULL, *ref = NULL, *r = NULL;
    se_xcorr *xc = NULL;
    se_xcorr_work *xw = NULL;
    se_acf *acf = NULL;
    se_peak *peaks = NULL;
    size_t npeaks = 0, m, ref_begin = 0, ref_end = 0, k0 = 0, i, dead, start, end;
    double lag0, a0, sigma, beta, kthr, thr, one_plus_rs;
    se_noise nz;
    se_detect_config dc;
    se_peak direct;
    se_distmap *own_map = NULL;
    const se_distmap *map;
    double beta_crb;
    se_locate_config lc;
    int rs_unknown;
    se_noise_profile prof;
    int varies = 0, skin = 0;
    double *skin_sd = NULL, *plain_lag = NULL, *prev_w = NULL;

    memset(&prof, 0, sizeof prof);
    if (res == NULL)
        return se_fail(err, SE_ERR_ARG, "locate: no result record");
    memset(res, 0, sizeof *res);
    if (response == NULL || cfg == NULL)
        return se_fail(err, SE_ERR_ARG, "locate: no response or no configuration");
    if (!(rate_hz > 0.0) || !isfinite(rate_hz))
        return se_fail(err, SE_ERR_ARG, "locate: sample rate %g Hz is not positive", rate_hz);
    if (cfg->map == NULL && se_check_speed(cfg->speed_m_s, err) != SE_OK)
        return err ? err->code : SE_ERR_RANGE;
    map = cfg->map;
    if (!(cfg->speed_uncertainty >= 0.0) || cfg->speed_uncertainty >= 1.0)
        return se_fail(err, SE_ERR_RANGE, "locate: speed uncertainty %g %% is not in [0, 100)",
                       cfg->speed_uncertainty * 100.0);
    if (!(cfg->false_alarms > 0.0) || cfg->false_alarms > 1000.0)
        return se_fail(err, SE_ERR_RANGE, "locate: false-alarm target %g per record is not in (0, 1000]",
                       cfg->false_alarms);
    if (!(cfg->confidence > 0.0 && cfg->confidence < 1.0))
        return se_fail(err, SE_ERR_RANGE, "locate: confidence %g is not in (0, 1)", cfg->confidence);
    lc = *cfg;
    rs_unknown = isnan(cfg->source_reflection);
    if (rs_unknown)
        lc.source_reflection = 0.0; /* estimated below, once the echoes are known */
    one_plus_rs = 1.0 + lc.source_reflection;
    if (!(lc.source_reflection >= -1.0 && lc.source_reflection <= 1.0) || fabs(one_plus_rs) < 1e-6)
        return se_fail(err, SE_ERR_RANGE,
                       "locate: source-end coefficient %g leaves nothing to measure at the sensor",
                       cfg->source_reflection);
    if (!(cfg->stacking >= SE_STACKING_AUTO && cfg->stacking <= SE_STACKING_ROBUST))
        return se_fail(err, SE_ERR_ARG, "locate: stacking mode %d is not one of auto, off, robust",
                       cfg->stacking);
    if (cfg->reference_kind != SE_REF_SELF && (cfg->reference == NULL || cfg->reference_length < 3))
        return se_fail(err, SE_ERR_ARG, "locate: the reference pulse has fewer than 3 samples");
    if (!(cfg->skin_k_s05_per_m >= 0.0) && !isnan(cfg->skin_k_s05_per_m))
        return se_fail(err, SE_ERR_RANGE, "locate: skin-effect loss %g s^0.5/m is negative",
                       cfg->skin_k_s05_per_m);
    if (isinf(cfg->skin_k_s05_per_m))
        return se_fail(err, SE_ERR_RANGE, "locate: skin-effect loss is not finite");
    skin = cfg->skin_k_s05_per_m != 0.0; /* NaN (estimate) included */
    if (n < 16)
        return se_fail(err, SE_ERR_DATA, "locate: the response has only %zu samples", n);

    if (map == NULL) {
        own_map = se_distmap_create_uniform(cfg->speed_m_s, cfg->speed_uncertainty, INFINITY, err);
        if (own_map == NULL)
            return err ? err->code : SE_ERR_NOMEM;
        map = own_map;
    }
    x = se_calloc(n, sizeof *x, "response copy", err);
    if (x == NULL) {
        se_distmap_destroy(own_map);
        return SE_ERR_NOMEM;
    }
    memcpy(x, response, n * sizeof *x);
    for (i = 1; i < n && response[i] == response[0]; i++) {
    }
    if (i == n) {
        st = se_fail(err, SE_ERR_DATA, "the response is constant (every sample is %.6g)", response[0]);
        goto done;
    }
    se_find_clipping(response, n, res);
    st = se_to_velocity(x, n, rate_hz, cfg->quantity, 0, err);
    if (st != SE_OK)
        goto done;

    /* Reference pulse. */
    if (cfg->reference_kind == SE_REF_SELF) {
        st = se_pulse_support(x, n, &ref_begin, &ref_end, err);
        if (st != SE_OK) {
            char why[SE_ERROR_MESSAGE_SIZE];
            snprintf(why, sizeof why, "%s", err ? err->message : "no direct arrival");
            se_fail(err, st, "self reference: %s", why);
            goto done;
        }
        m = ref_end - ref_begin;
        ref = se_calloc(m, sizeof *ref, "reference", err);
        if (ref == NULL) {
            st = SE_ERR_NOMEM;
            goto done;
        }
        memcpy(ref, x + ref_begin, m * sizeof *ref);
    } else {
        m = cfg->reference_length;
        ref = se_calloc(m, sizeof *ref, "reference", err);
        if (ref == NULL) {
            st = SE_ERR_NOMEM;
            goto done;
        }
        memcpy(ref, cfg->reference, m * sizeof *ref);
    }
    res->shots_found = res->shots_used = 1;
    res->stack_expected_gain_db = 0.0;
    if ((cfg->stacking != SE_STACKING_OFF || cfg->given_stack != NULL) && m < n) {
        size_t pre = 0;
        int stacked = 0;
        st = se_locate_stack(&x, &n, ref, m, cfg, rate_hz, res, &pre, &stacked, &prev_w, err);
        if (st != SE_OK)
            goto done;
        if (stacked) {
            /* the first used shot's pulse now starts at sample pre of the stacked trace */
            if (lc.reference_offset != SIZE_MAX)
                lc.reference_offset = pre;
            res->n_clip_runs = 0; /* clipped shots were left out */
            if (cfg->reference_kind == SE_REF_SELF) {
                st = se_pulse_support(x, n, &ref_begin, &ref_end, err);
                if (st != SE_OK)
                    goto done;
                m = ref_end - ref_begin;
                free(ref);
                ref = se_calloc(m, sizeof *ref, "reference", err);
                if (ref == NULL) {
                    st = SE_ERR_NOMEM;
                    goto done;
                }
                memcpy(ref, x + ref_begin, m * sizeof *ref);
            }
        }
    }
    if (m >= n) {
        st = se_fail(err, SE_ERR_DATA,
                     "the response (%zu samples) is not longer than the reference pulse (%zu samples)",
                     n, m);
        goto done;
    }

    /* Matched filter. */
    r = se_calloc(n, sizeof *r, "correlation", err);
    if (r == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    xc = se_xcorr_create(ref, m, 0, err);
    if (xc == NULL) {
        st = err ? err->code : SE_ERR_NOMEM;
        goto done;
    }
    xw = se_xcorr_work_create(xc, err);
    if (xw == NULL) {
        st = err ? err->code : SE_ERR_NOMEM;
        goto done;
    }
    st = se_xcorr_run(xc, xw, x, n, r, err);
    if (st != SE_OK)
        goto done;
    acf = se_acf_create(ref, m, err);
    if (acf == NULL) {
        st = err ? err->code : SE_ERR_NOMEM;
        goto done;
    }

    /* Time origin: the direct arrival as it appears in the response. */
    st = se_find_direct(r, n, &lc, ref_begin, m, &k0, err);
    if (st != SE_OK)
        goto done;
    st = se_refine_peak(r, n, k0, 0, &lag0, &a0, err);
    if (st != SE_OK)
        goto done;
    if (!(fabs(a0) > 0.0)) {
        st = se_fail(err, SE_ERR_NOTFOUND, "the outgoing pulse does not appear in the response");
        goto done;
    }

    /* Noise of the matched-filter output beyond the direct arrival, and the Rice threshold. */
    start = k0 + m < n ? k0 + m : n;
    end = n > m ? n - m + 1 : 0;
    if (end <= start + 16) {
        st = se_fail(err, SE_ERR_DATA,
                     "the record ends %.6g s after the direct arrival: too short to search for echoes",
                     (double)(n - k0) / rate_hz);
        goto done;
    }
    /* 2^16 strided lags: the MAD's own spread is then ~0.5 %, below what the correlation of
     * neighbouring lags leaves of a longer sample (REFERENCE.md 2: estimate on a sample) */
    st = se_noise_mad(r, start, end, SE_LOCATE_NOISE_SAMPLES, &nz, err);
    if (st != SE_OK)
        goto done;
    sigma = nz.sigma;
    /* Rice needs the bandwidth of the noise as it is in r (coloured noise included); the delay
     * bound needs the pulse's own RMS bandwidth. */
    beta_crb = se_acf_rms_bandwidth(acf);
    beta = (isfinite(nz.beta) && nz.beta > 0.0) ? nz.beta : beta_crb;
    /* Dynamic-range floor: CLEAN subtracts each echo with the sampled reference's autocorrelation,
     * which leaves residues near 1e-4..1e-2 of an echo on noise-free records; below 60 dB under
     * the outgoing pulse (80 dB) the floor takes over from the measured noise. */
    if (!(sigma >= SE_LOCATE_NOISE_FLOOR * fabs(a0))) {
        sigma = SE_LOCATE_NOISE_FLOOR * fabs(a0);
        res->noise_floored = 1;
    }
    kthr = se_rice_k((double)(end - start), beta, cfg->false_alarms);
    thr = kthr * sigma;
    /* Non-stationary noise (cfar.c): block MAD sigmas along r; when they differ by a factor of
     * two or more each lag is held to k times its own level (never on noise-floored records,
     * whose r is echoes and residue, not noise). */
    if (cfg->noise_tracking && !res->noise_floored) {
        st = se_noise_profile_estimate(r, start, end, se_noise_block_length(m), m,
                                       SE_LOCATE_NOISE_FLOOR * fabs(a0), &prof, &varies, err);
        if (st != SE_OK)
            goto done;
    }
    if (fabs(a0) < 2.0 * thr) {
        st = se_fail(err, SE_ERR_NOTFOUND,
                     "the outgoing pulse does not stand above the noise of the matched filter (peak "
                     "%.3g, threshold %.3g): wrong channel or wrong reference?",
                     fabs(a0), thr);
        goto done;
    }

    /* Dead zone: the outgoing pulse itself, and as far as its sidelobes stand above half the
     * threshold. */
    {
        double level = 0.5 * thr / fabs(a0);
        size_t ext;
        if (varies) /* the noise where the search starts */
            level = fmin(level, 0.5 * kthr * se_noise_profile_sigma(&prof, (double)start) / fabs(a0));
        ext = level < 1.0 ? se_acf_extent(acf, level) : 0;
        dead = ext > m ? ext : m;
    }
    start = k0 + dead < n ? k0 + dead : n;
    if (start >= end) {
        st = se_fail(err, SE_ERR_DATA, "the record ends inside the dead zone");
        goto done;
    }

    /* CLEAN detection, the direct arrival's sidelobes subtracted first. */
    direct.lag = lag0;
    direct.amplitude = a0;
    direct.index = k0;
    memset(&dc, 0, sizeof dc);
    dc.start = start;
    dc.end = end;
    dc.threshold = thr;
    dc.max_peaks = cfg->max_events ? cfg->max_events : 64;
    /* a lossless matched filter splits each skin-distorted echo into several peaks: room for the
     * pieces, which se_locate_skin drops before the cap is applied */
    if (skin)
        dc.max_peaks = dc.max_peaks * 4 < 1024 ? dc.max_peaks * 4 : 1024;
    dc.acf = acf;
    dc.known = &direct;
    dc.n_known = 1;
    if (varies) {
        dc.profile = &prof;
        dc.profile_sigmas = kthr;
    }
    st = se_detect(r, n, &dc, &peaks, &npeaks, err);
    if (st != SE_OK)
        goto done;

    /* Skin-effect loss: every detection matched with its own loss-shaped template (skin.h). */
    if (skin && npeaks > 0) {
        skin_sd = se_calloc(npeaks, sizeof *skin_sd, "skin-effect fit", err);
        plain_lag = se_calloc(npeaks, sizeof *plain_lag, "skin-effect fit", err);
        if (skin_sd == NULL || plain_lag == NULL) {
            st = SE_ERR_NOMEM;
            goto done;
        }
        st = se_locate_skin(x, n, ref, m, rate_hz, lag0, cfg, map, thr, peaks, &npeaks, skin_sd,
                            plain_lag, res, err);
        if (st != SE_OK)
            goto done;
        se_keep_largest(peaks, &npeaks, skin_sd, plain_lag, cfg->max_events ? cfg->max_events : 64);
    } else if (skin) {
        res->skin_k_s05_per_m = cfg->skin_k_s05_per_m;
        res->skin_k_uncertainty = NAN;
    } else {
        res->skin_k_s05_per_m = NAN;
        res->skin_k_uncertainty = NAN;
    }

    /* Overlapping echoes, the source end, the events, the losses and the dead zone. */
    {
        se_locate_stage sg;
        se_sample_reader rd;
        memset(&sg, 0, sizeof sg);
        sg.map = map;
        sg.rate_hz = rate_hz;
        sg.lag0 = lag0;
        sg.a0 = a0;
        sg.k0 = k0;
        sg.m = m;
        sg.dead = dead;
        sg.end = end;
        sg.sigma = sigma;
        sg.kthr = kthr;
        sg.thr = thr;
        sg.beta_crb = beta_crb;
        sg.mainlobe_half_width = se_acf_mainlobe_half_width(acf);
        sg.profile = varies ? &prof : NULL;
        sg.prev_weight = prev_w;
        sg.n_prev_weight = prev_w != NULL ? res->shots_found : 0;
        rd.read = se_read_array;
        rd.ctx = x;
        rd.n = n;
        st = se_locate_finish(&sg, &lc, rs_unknown, &rd, ref, &direct, skin, skin_sd, plain_lag,
                              &peaks, &npeaks, res, err);
        if (st != SE_OK)
            goto done;
        one_plus_rs = 1.0 + lc.source_reflection;
    }
    if (cfg->keep_trace) {
        /* hand the correlation over, scaled to reflection units like res->threshold */
        double g = 1.0 / (a0 * one_plus_rs);
        for (i = 0; i < n; i++)
            r[i] *= g;
        res->trace = r;
        res->trace_length = n;
        r = NULL;
    }

done:
    free(prev_w);
    se_noise_profile_free(&prof);
    free(skin_sd);
    free(plain_lag);
    free(peaks);
    se_acf_destroy(acf);
    se_xcorr_work_destroy(xw);
    se_xcorr_destroy(xc);
    free(r);
    free(ref);
    free(x);
    se_distmap_destroy(own_map);
    if (st != SE_OK)
        se_locate_result_free(res);
    return st;
}

/* The response held in memory, as an se_sample_reader (ctx: the array). */
static se_status se_read_array(void *ctx, size_t pos, size_t count, double *out, se_error *err)
{
    (void)err;
    memcpy(out, (const double *)ctx + pos, count * sizeof *out);
    return SE_OK;
}

se_status se_locate_finish(se_locate_stage *sgp, se_locate_config *lcp, int rs_unknown,
                           const se_sample_reader *xr, const double *ref, const se_peak *direct,
                           int skin, const double *skin_sd, const double *plain_lag,
                           se_peak **peaksp, size_t *npeaksp, se_locate_result *res, se_error *err)
{
    se_status st = SE_OK;
    const se_locate_config *const cfg = lcp; /* the fields read here are the caller's own */
    se_locate_config lc;
    se_echo_model *mdl = NULL;
    double *lag_sd = NULL, *amp_sd = NULL, one_plus_rs;
    se_peak *peaks = *peaksp;
    size_t npeaks = *npeaksp, i, m = sgp->m, dead = sgp->dead, start = sgp->k0 + sgp->dead;
    const se_distmap *map = sgp->map;
    const se_noise_profile *prof = sgp->profile;
    double lag0 = sgp->lag0, a0 = sgp->a0, sigma = sgp->sigma, kthr = sgp->kthr, thr = sgp->thr;
    double beta_crb = sgp->beta_crb, rate_hz = sgp->rate_hz, hw = sgp->mainlobe_half_width;
    int rs_found = 0, varies = prof != NULL;

    lc = *lcp;
    one_plus_rs = 1.0 + lc.source_reflection;
    /* Overlapping echoes: least squares on the response, started from CLEAN (fitecho.h). The
     * echo model is made when a group is first fitted (none on noise-floored records or with
     * weak lone echoes only), or for the dead-zone scan below. */
    if (m <= SE_FIT_MAX_PULSE && cfg->fit_overlaps && npeaks > 0 && !skin) {
        st = se_refit_overlaps(xr, &mdl, ref, m, res, direct, res->noise_floored ? INFINITY : thr,
                               prof, kthr, hw, &peaks, &npeaks, &lag_sd, &amp_sd, err);
        if (st != SE_OK)
            goto out;
        /* the refit may split echoes: the cap holds on what is reported */
        se_keep_largest(peaks, &npeaks, lag_sd, amp_sd, cfg->max_events ? cfg->max_events : 64);
    }

    /* Source-end coefficient from the data when it was not given. */
    if (rs_unknown) {
        lc.source_reflection = se_estimate_source(peaks, npeaks, lag0, a0, hw, sigma, prof,
                                                  &rs_found);
        one_plus_rs = 1.0 + lc.source_reflection;
    }

    /* Events. */
    {
        se_locate_stage sg = *sgp;
        sg.cfg = &lc;
        st = se_locate_events(&sg, peaks, npeaks, res, err);
        if (st != SE_OK)
            goto out;
        /* fitted echoes carry the uncertainty of their own fit (covariance) */
        for (i = 0; lag_sd != NULL && i < res->n_events; i++) {
            se_event *ev = &res->events[i];
            double z = gsl_cdf_ugaussian_Pinv(0.5 + 0.5 * cfg->confidence);
            if (!isfinite(lag_sd[i]))
                continue;
            ev->fitted = 1;
            /* a fit whose timing reaches the main lobe (low SNR, or a group the model does not
             * explain, se_refit_overlaps) is low confidence */
            if (lag_sd[i] >= hw)
                ev->low_confidence = 1;
            ev->reflection_uncertainty = amp_sd[i] / fabs(a0) / fabs(one_plus_rs);
            /* the direct arrival's timing noise: the record's sigma (as se_locate_events) */
            st = se_event_uncertainty(map, z, lag_sd[i], sigma / (fabs(a0) * beta_crb), rate_hz, ev,
                                      err);
            if (st != SE_OK)
                goto out;
        }
        /* skin-corrected echoes carry the template fit's timing uncertainty */
        for (i = 0; skin_sd != NULL && i < res->n_events && i < npeaks; i++) {
            se_event *ev = &res->events[i];
            double z = gsl_cdf_ugaussian_Pinv(0.5 + 0.5 * cfg->confidence);
            if (!isfinite(skin_sd[i]))
                continue;
            ev->skin_corrected = 1;
            ev->skin_shift_s = (plain_lag[i] - peaks[i].lag) / rate_hz;
            st = se_event_uncertainty(map, z, skin_sd[i], sigma / (fabs(a0) * beta_crb), rate_hz, ev,
                                      err);
            if (st != SE_OK)
                goto out;
        }
    }
    res->source_reflection = lc.source_reflection;
    res->source_reflection_estimated = rs_unknown && rs_found;
    se_apply_losses(&lc, res);
    /* Echoes inside the dead zone: flagged, never hidden (only with the pulse channel as the
     * reference, whose shape is the direct arrival's, and on records with measured noise). */
    if (m <= SE_FIT_MAX_PULSE && cfg->reference_kind == SE_REF_CHANNEL && !res->noise_floored) {
        double szone = varies ? se_noise_profile_sigma(prof, (double)start) : sigma;
        if (mdl == NULL && (mdl = se_echo_model_create(ref, m, err)) == NULL) {
            st = err ? err->code : SE_ERR_NOMEM;
            goto out;
        }
        st = se_dead_zone_scan(xr, mdl, direct, peaks, npeaks, dead, kthr * szone, szone, hw,
                               lc.source_reflection, rate_hz, gsl_cdf_ugaussian_Pinv(0.5 + 0.5 * cfg->confidence), map, res, err);
        if (st != SE_OK)
            goto out;
    }
out:
    *lcp = lc;
    *peaksp = peaks;
    *npeaksp = npeaks;
    free(lag_sd);
    free(amp_sd);
    se_echo_model_destroy(mdl);
    return st;
}

/* Multiples from a forward model of the primaries (REFERENCE.md 2; P.L. Goupillaud, Geophysics
 * 26(6), 1961; M.M. Backus, Geophysics 24(2), 1959). Events are taken in delay order. The
 * primaries found so far make a line (simulate.h): an interface at half each primary's delay,
 * its coefficient the seen amplitude with the two-way transmissions of the primaries before it
 * removed (the losses stay inside the coefficients, which is exact for the first bounce and the
 * end's repeats), the source end r_s; se_sim_arrivals gives every path of it (all orders, to
 * the record's range, down to a twentieth of the threshold). The field predicted at an event is
 * the sum of those paths within the main lobe, each weighted by a Gaussian of the pulse's RMS
 * bandwidth (the autocorrelation's curvature), the primaries' own first bounces left out; with
 * several taps the previous shots' paths are added at t + k I, weight (N - k) / N in the mean
 * stack. An event is a multiple when the seen amplitude lies within 3 of its standard
 * uncertainties plus 30 % of the summed path magnitudes of this tap's prediction (the
 * primaries' amplitude errors, r_s and losses not modelled, paths that CLEAN sees partly merged)
 * plus 60 % of the previous taps' (SE_LBL_PREV_F), else a primary with amplitude seen minus
 * predicted (a reflector hidden under a multiple). Past a full reflection (|r| > 0.9 at the
 * discontinuity) nothing real is seen. The previous taps' field needs the whole line, whose
 * early part may hold their echoes: with several taps the line is first built strongest event
 * first (see below), then the delay-order pass runs with that line's previous-tap field. The
 * arrival counts are bounded by the floor (raised tenfold up to three times when the lattice
 * would exceed SE_SIM_MAX_ARRIVALS; without a model no event is labelled by prediction). */
#define SE_LBL_MAX_P 16
#define SE_LBL_Q 64.0 /* lattice cells per sample */
/* The previous taps' paths are of high order (several round trips): the errors of r_s and of the
 * primaries' amplitudes compound along them, so their allowance is 60 % of their size. */
#define SE_LBL_PREV_F 0.6
typedef struct se_lbl_field {
    se_sim_arrival *a;
    size_t n;
} se_lbl_field;

static se_status se_lbl_model(const double *tp, const double *ap, size_t np, double rs,
                              double horizon_s, double quantum_s, double floor_abs,
                              se_lbl_field *f, double *rdisc, se_error *err)
{
    se_sim_interface ifs[SE_LBL_MAX_P];
    se_sim_line line;
    double t2 = 1.0, fl = floor_abs, cut = 0.0;
    size_t i, k, nm = 0;
    se_status st = SE_OK;
    free(f->a);
    f->a = NULL;
    f->n = 0;
    /* the SE_LBL_MAX_P strongest primaries make the model (at least the cut's size) */
    if (np > SE_LBL_MAX_P) {
        for (i = 0; i < np; i++) {
            size_t larger = 0;
            for (k = 0; k < np; k++)
                larger += fabs(ap[k]) > fabs(ap[i]);
            if (larger < SE_LBL_MAX_P && (cut == 0.0 || fabs(ap[i]) < cut))
                cut = fabs(ap[i]);
        }
    }
    for (i = 0; i < np; i++)
        rdisc[i] = 0.0;
    for (i = 0; i < np && nm < SE_LBL_MAX_P; i++) {
        double r = ap[i] / t2;
        if (fabs(ap[i]) < cut)
            continue;
        r = r > 1.0 ? 1.0 : (r < -1.0 ? -1.0 : r);
        ifs[nm].one_way_s = 0.5 * tp[i];
        ifs[nm].reflection = r;
        nm++;
        rdisc[i] = r;
        t2 *= 1.0 - r * r;
        if (t2 < 1e-6) /* nothing passes a full reflection */
            break;
    }
    if (nm == 0)
        return SE_OK;
    line.interfaces = ifs;
    line.n_interfaces = nm;
    line.source_reflection = rs;
    line.loss_np_per_s = 0.0;
    /* a lossless line closed at both ends rings for ever: a higher floor keeps the paths few */
    for (k = 0; k < 4; k++, fl *= 10.0) {
        se_error e2;
        if (!(fl < 1.0))
            break;
        st = se_sim_arrivals_floor(&line, horizon_s, quantum_s, fl, &f->a, &f->n, &e2);
        if (st == SE_OK)
            return SE_OK;
        if (st != SE_ERR_NOMEM)
            break; /* a line the lattice cannot take: no prediction */
    }
    (void)err;
    f->a = NULL;
    f->n = 0;
    return SE_OK;
}

/* Predicted field at time t (after the direct arrival) from f shifted by -shift: sum of the
 * paths within hw_s weighted exp(-(beta dt)^2 / 2); *spread gets the sum of their magnitudes.
 * Paths within two cells of a primary's own time tp[] (its first bounce) are left out, and so
 * are paths nearer another detected event ev[nev] than t: that event, resolved by CLEAN or the
 * fit, carries them (two echoes 0.8 main lobe apart are seen apart, not summed). */
static double se_lbl_at(const se_lbl_field *f, double t, double shift, double hw_s, double beta,
                        const double *tp, size_t np, double cell, const se_event *ev, size_t nev,
                        double *spread)
{
    double sum = 0.0;
    size_t lo = 0, hi = f->n, j, q;
    *spread = 0.0;
    while (lo < hi) { /* first path at or after t + shift - hw_s */
        size_t mid = lo + (hi - lo) / 2;
        if (f->a[mid].time_s < t + shift - hw_s)
            lo = mid + 1;
        else
            hi = mid;
    }
    for (j = lo; j < f->n && f->a[j].time_s <= t + shift + hw_s; j++) {
        double dt = t + shift - f->a[j].time_s, w = exp(-0.5 * beta * beta * dt * dt);
        int own = 0;
        for (q = 0; q < np && shift == 0.0; q++)
            if (fabs(f->a[j].time_s - tp[q]) < 2.0 * cell)
                own = 1;
        for (q = 0; q < nev && !own; q++) {
            double pt = f->a[j].time_s - shift;
            if (fabs(pt - ev[q].delay_s) < fabs(pt - t) - 0.5 * cell)
                own = 1; /* nearer another event */
        }
        if (own)
            continue;
        sum += f->a[j].amplitude * w;
        *spread += fabs(f->a[j].amplitude) * w;
    }
    return sum;
}

/* The field of model f at t (own: shift 0, the model's primaries tp[np] left out) plus the
 * previous taps' (shifts k I, k < nshots, weights pw[k], or (N - k) / N when pw is NULL: every
 * tap stacked); *s_own, *s_prev get the summed magnitudes, *kbest the tap that contributes most. */
static void se_lbl_fields(const se_lbl_field *own, const se_lbl_field *prev, double t,
                          double hw_s, double beta, const double *tp, size_t np, double cell,
                          const se_event *ev, size_t nev, size_t nshots, const double *pw,
                          double interval, double *p_own, double *s_own, double *p_prev,
                          double *s_prev, int *kbest)
{
    size_t k;
    double best = 0.0;
    *p_own = se_lbl_at(own, t, 0.0, hw_s, beta, tp, np, cell, ev, nev, s_own);
    *p_prev = *s_prev = 0.0;
    *kbest = 0;
    for (k = 1; k < nshots && prev != NULL && prev->n > 0; k++) {
        double s1, p1 = se_lbl_at(prev, t, (double)k * interval, hw_s, beta, tp, 0, cell, ev, nev,
                                  &s1);
        double wk = pw != NULL ? pw[k] : (double)(nshots - k) / (double)nshots;
        *p_prev += wk * p1;
        *s_prev += wk * s1;
        if (wk * s1 > best) {
            best = wk * s1;
            *kbest = (int)k;
        }
    }
}

static se_status se_label_multiples(se_event *ev, size_t n, const se_locate_stage *sg,
                                    se_locate_result *res, double *spread_out, se_error *err)
{
    const double rs = sg->cfg->source_reflection, rate = sg->rate_hz;
    const double hw_s = sg->mainlobe_half_width / rate, beta = sg->beta_crb * rate;
    const double cell = 1.0 / (rate * SE_LBL_Q);
    const double thr = sg->thr / fabs(sg->a0) / fabs(1.0 + rs);
    const double horizon = (double)(sg->end - 1 - sg->k0) / rate + hw_s;
    /* the taps before each stacked shot: up to the first found (sg->prev_weight), else as if
     * every tap were stacked */
    const double *pw = sg->prev_weight;
    const size_t nshots = pw != NULL ? sg->n_prev_weight : res->shots_used;
    const double interval = res->shot_interval_s;
    const int taps = res->shots_used >= 2 && nshots >= 2 && interval > 0.0;
    double *tp = NULL, *ap, *rd;
    size_t e, i, j, k, np = 0, full = SIZE_MAX;
    se_lbl_field own = {NULL, 0}, prev = {NULL, 0};
    int *taken = NULL;
    se_status st = SE_OK;

    if (n == 0)
        return SE_OK;
    tp = se_calloc(3 * n, sizeof *tp, "multiple labels", err);
    taken = se_calloc(n, sizeof *taken, "multiple labels", err);
    if (tp == NULL || taken == NULL) {
        free(tp);
        free(taken);
        return SE_ERR_NOMEM;
    }
    ap = tp + n;
    rd = ap + n;
    if (taps) {
        /* The previous taps' field needs the whole line, whose early part may hold their
         * echoes: the line is first built strongest event first (a multiple is a product of
         * coefficients, weaker than its factors), each event kept only when the model of the
         * stronger ones (this tap and the previous ones) does not explain it. */
        size_t c;
        double full_t = INFINITY;
        for (c = 0; c < n; c++) {
            size_t best = SIZE_MAX, pos;
            double po, so, pp, spp, tot;
            int kb;
            for (i = 0; i < n; i++) /* the c-th largest, ties by delay */
                if (!taken[i] && (best == SIZE_MAX || fabs(ev[i].reflection) >
                                                          fabs(ev[best].reflection)))
                    best = i;
            taken[best] = 1;
            se_lbl_fields(&prev, &prev, ev[best].delay_s, hw_s, beta, tp, np, cell, ev, n,
                          nshots, pw, interval, &po, &so, &pp, &spp, &kb);
            tot = po + pp;
            if ((so + spp > 0.0 && fabs(ev[best].reflection - tot) <=
                                       3.0 * ev[best].reflection_uncertainty + 0.3 * so +
                                           SE_LBL_PREV_F * spp) ||
                ev[best].delay_s > full_t + hw_s)
                continue;
            for (pos = np; pos > 0 && tp[pos - 1] > ev[best].delay_s; pos--) {
                tp[pos] = tp[pos - 1];
                ap[pos] = ap[pos - 1];
            }
            tp[pos] = ev[best].delay_s;
            ap[pos] = ev[best].reflection - tot;
            np++;
            st = se_lbl_model(tp, ap, np, rs, horizon + (double)(nshots - 1) * interval, cell,
                              0.1 * thr, &prev, rd, err);
            if (st != SE_OK)
                goto done;
            full_t = INFINITY;
            for (i = 0; i < np; i++)
                if (fabs(rd[i]) > 0.9) {
                    full_t = tp[i];
                    break;
                }
        }
        np = 0;
    }
    /* this tap's multiples, in delay order, with the previous taps' field added */
    for (e = 0; e < n; e++) {
        double te = ev[e].delay_s, ae = ev[e].reflection, sa = ev[e].reflection_uncertainty;
        double p_own, s_own, p_prev, s_prev, tot, sp;
        int kprev;
        se_lbl_fields(&own, taps ? &prev : NULL, te, hw_s, beta, tp, np, cell, ev, n, nshots, pw,
                      interval, &p_own, &s_own, &p_prev, &s_prev, &kprev);
        tot = p_own + p_prev;
        sp = s_own + s_prev;
        ev[e].multiple = 0;
        ev[e].multiple_of[0] = ev[e].multiple_of[1] = -1;
        ev[e].previous_shot = 0;
        ev[e].predicted = tot;
        spread_out[e] = sp;
        if (sp > 0.0 && fabs(ae - tot) <= 3.0 * sa + 0.3 * s_own + SE_LBL_PREV_F * s_prev) {
            ev[e].multiple = 1;
            ev[e].previous_shot = s_prev > s_own ? kprev : 0;
        } else if (full != SIZE_MAX && te > ev[full].delay_s + 0.25 * hw_s) {
            /* past a full reflection nothing real is seen; closer than a quarter of the main
             * lobe (fitecho's separation limit) a detection is that reflection's own */
            ev[e].multiple = 1;
            ev[e].multiple_of[0] = (int)full;
        }
        if (ev[e].multiple && ev[e].previous_shot == 0 && ev[e].multiple_of[0] < 0) {
            /* the main contributing pair: a source-end pair sum t_i + t_j (any earlier events)
             * or a peg-leg t_k + t_j - t_i (i < j primaries, k at or beyond j) */
            double best = 0.0;
            for (i = 0; i < e; i++)
                for (j = i; j < e; j++) {
                    double dt = te - ev[i].delay_s - ev[j].delay_s, sc;
                    if (ev[i].previous_shot > 0 || ev[j].previous_shot > 0)
                        continue;
                    if (fabs(dt) < hw_s && rs != 0.0) {
                        sc = fabs(rs * ev[i].reflection * ev[j].reflection) * (i == j ? 1.0 : 2.0) *
                             exp(-0.5 * beta * beta * dt * dt);
                        if (sc > best) {
                            best = sc;
                            ev[e].multiple_of[0] = (int)i;
                            ev[e].multiple_of[1] = (int)j;
                        }
                    }
                    if (j > i && !ev[i].multiple && !ev[j].multiple)
                        for (k = j; k < e; k++) {
                            if (ev[k].previous_shot > 0)
                                continue;
                            dt = te - (ev[k].delay_s + ev[j].delay_s - ev[i].delay_s);
                            if (!(fabs(dt) < hw_s))
                                continue;
                            sc = fabs(ev[k].reflection * ev[i].reflection * ev[j].reflection) *
                                 exp(-0.5 * beta * beta * dt * dt);
                            if (sc > best) {
                                best = sc;
                                ev[e].multiple_of[0] = (int)i;
                                ev[e].multiple_of[1] = (int)k;
                            }
                        }
                }
        }
        if (ev[e].multiple)
            continue;
        /* a primary: its own amplitude is what the prediction does not explain */
        tp[np] = te;
        ap[np] = ae - tot;
        np++;
        st = se_lbl_model(tp, ap, np, rs, horizon, cell, 0.05 * thr, &own, rd, err);
        if (st != SE_OK)
            goto done;
        if (full == SIZE_MAX && fabs(rd[np - 1]) > 0.9)
            full = e;
    }
done:
    free(own.a);
    free(prev.a);
    free(tp);
    free(taken);
    return st;
}

/* Ring-down and attenuation from the end's repeats, once the events are labelled (see
 * se_locate_result): the primaries' own amplitudes are reflection - predicted. */
static void se_ring_and_decay(const se_locate_stage *sg, se_locate_result *res,
                              const double *spread)
{
    const se_locate_config *cfg = sg->cfg;
    const double rs = cfg->source_reflection, rate = sg->rate_hz;
    const double thr = sg->thr / fabs(sg->a0) / fabs(1.0 + rs), hw_s = sg->mainlobe_half_width / rate;
    double ring = 0.0, t2 = 1.0, t2_end = 1.0;
    size_t i, last = SIZE_MAX;
    for (i = 0; i < res->n_events; i++) {
        const se_event *ev = &res->events[i];
        double a = ev->reflection - ev->predicted, rho = fabs(rs * a), r, ti;
        if (ev->multiple)
            continue;
        ti = ev->delay_s;
        if (fabs(a) > thr && rs != 0.0)
            ti = rho >= 1.0 ? INFINITY : ev->delay_s * (1.0 + log(thr / fabs(a)) / log(rho));
        ring = fmax(ring, ti);
        r = a / t2;
        r = r > 1.0 ? 1.0 : (r < -1.0 ? -1.0 : r);
        t2_end = t2;
        t2 *= 1.0 - r * r;
        last = i;
    }
    res->ring_down_s = ring;
    res->shots_overlap = res->shots_used >= 2 && res->shot_interval_s > 0.0 &&
                         res->shot_interval_s < ring;
    res->attenuation_uncertainty_db_per_m = NAN;
    res->attenuation_repeats = 0;
    if (isfinite(cfg->attenuation_db_per_m)) {
        res->attenuation_db_per_m = cfg->attenuation_db_per_m;
        res->attenuation_method = SE_ATTEN_GIVEN;
        return;
    }
    res->attenuation_db_per_m = NAN;
    res->attenuation_method = SE_ATTEN_NONE;
    res->attenuation_estimated = 0;
    if (last == SIZE_MAX || rs == 0.0)
        return;
    {
        /* weighted straight line y_k = b + s k, y = log |A_k|, sigma_y = sigma_A / |A_k| */
        const se_event *le = &res->events[last];
        double a1 = le->reflection - le->predicted, sw = 0.0, swk = 0.0, swkk = 0.0, swy = 0.0,
               swky = 0.0, det, s, b, vs, vb, cbs, loge, sle, g2, alpha, salpha;
        size_t k, nk = 0, e = last;
        for (k = 1; k < 64; k++) {
            double tk = (double)k * le->delay_s, ak, sa, w, y, best = INFINITY;
            size_t hit = SIZE_MAX, j;
            if (k == 1) {
                ak = a1;
                sa = le->reflection_uncertainty;
            } else {
                double pure = pow(rs, (double)(k - 1)) * pow(a1, (double)k);
                for (j = e; j < res->n_events; j++)
                    if (fabs(res->events[j].delay_s - tk) < best) {
                        best = fabs(res->events[j].delay_s - tk);
                        hit = j;
                    }
                if (hit == SIZE_MAX ||
                    best > fmax(3.0 * res->events[hit].delay_uncertainty_s, 0.25 * hw_s))
                    break;
                /* the pure repeat must make the prediction there: no other path near it (the
                 * lattice merges paths of equal time, so the predicted sum tells) */
                if (!res->events[hit].multiple || res->events[hit].previous_shot != 0 ||
                    res->events[hit].low_confidence ||
                    fabs(res->events[hit].predicted - pure) > 0.2 * fabs(pure) ||
                    fabs(pure) < 0.8 * spread[hit])
                    break;
                ak = res->events[hit].reflection;
                sa = res->events[hit].reflection_uncertainty;
                e = hit;
            }
            if (!(fabs(ak) > 3.0 * sa))
                break;
            /* as seen, relative to the direct arrival: (1 + r_s) A_k, so that r_s is the fit's
             * own and not the one the amplitudes were corrected with */
            y = log(fabs(ak * (1.0 + rs)));
            w = ak * ak / (sa * sa); /* 1 / sigma_y^2, sigma_y = sigma_A / |A_k| */
            sw += w;
            swk += w * (double)k;
            swkk += w * (double)k * (double)k;
            swy += w * y;
            swky += w * (double)k * y;
            nk++;
        }
        if (nk < 2)
            return;
        det = sw * swkk - swk * swk;
        if (!(det > 0.0))
            return;
        s = (sw * swky - swk * swy) / det;
        b = (swkk * swy - swk * swky) / det;
        vs = sw / det;
        vb = swkk / det;
        cbs = -swk / det;
        /* b = log |1 + r_s| - log |r_s|: r_s on the side of the coefficient used */
        {
            double eb = exp(b), rfit, dd, sa0;
            if (rs > 0.0 ? !(eb > 1.0) : 0)
                return;
            rfit = rs > 0.0 ? 1.0 / (eb - 1.0) : 1.0 / (eb + 1.0);
            if (!(rfit > 0.0 && rfit <= 1.0))
                return;
            loge = s - log(rfit); /* log |r_end g^2 T^2| */
            dd = rs > 0.0 ? eb / (eb - 1.0) : eb / (eb + 1.0); /* d loge / d b */
            /* the direct arrival's own noise moves every log A_k alike (through b) */
            sa0 = sg->sigma / fabs(sg->a0);
            sle = sqrt(fmax(vs + dd * dd * vb + 2.0 * dd * cbs + dd * dd * sa0 * sa0, 0.0));
        }
        g2 = exp(loge) / t2_end; /* |r_end| = 1 */
        if (!(le->distance_m > 0.0) || !(g2 > 0.0))
            return;
        alpha = -20.0 / log(10.0) * log(g2) / (2.0 * le->distance_m);
        salpha = 20.0 / log(10.0) * sle / (2.0 * le->distance_m);
        if (alpha < 0.0) { /* gain: only noise may make it so */
            if (alpha < -3.0 * salpha)
                return;
            alpha = 0.0;
        }
        res->attenuation_db_per_m = alpha;
        res->attenuation_uncertainty_db_per_m = salpha;
        res->attenuation_method = SE_ATTEN_END_MULTIPLES;
        res->attenuation_estimated = 1;
        res->attenuation_repeats = nk;
    }
}

int se_locate_overlap_warning(const se_locate_result *res, char *buf, size_t size)
{
    size_t i, nprev = 0;
    if (buf == NULL || size == 0)
        return 0;
    buf[0] = '\0';
    if (res == NULL || !res->shots_overlap)
        return 0;
    for (i = 0; i < res->n_events; i++)
        nprev += res->events[i].multiple && res->events[i].previous_shot > 0;
    if (isfinite(res->ring_down_s))
        snprintf(buf, size,
                 "the taps are %.1f s apart but the line rings for %.1f s: echoes of the previous "
                 "tap overlap this one (%zu event%s labelled as such); tap at least %.0f s apart, "
                 "or damp the line before each tap",
                 res->shot_interval_s, res->ring_down_s, nprev, nprev == 1 ? "" : "s",
                 ceil(res->ring_down_s));
    else
        snprintf(buf, size,
                 "the taps are %.1f s apart but the line hardly loses energy (it rings on past any "
                 "interval): echoes of the previous tap overlap this one (%zu event%s labelled as "
                 "such); damp the line before each tap, or take single taps",
                 res->shot_interval_s, nprev, nprev == 1 ? "" : "s");
    return 1;
}

/* Runs of SE_CLIP_RUN or more equal samples at the trace's maximum or minimum: a sensor or
 * converter at full scale. Records the count, the first clipped sample and up to
 * SE_MAX_CLIP_RUNS runs for se_window_clipped. */
static void se_find_clipping(const double *x, size_t n, se_locate_result *res)
{
    double vmax = x[0], vmin = x[0];
    size_t i, j;
    res->clipped_samples = 0;
    res->first_clipped = SIZE_MAX;
    res->n_clip_runs = 0;
    for (i = 1; i < n; i++) {
        if (x[i] > vmax)
            vmax = x[i];
        if (x[i] < vmin)
            vmin = x[i];
    }
    for (i = 0; i < n; i = j) {
        j = i + 1;
        if (x[i] != vmax && x[i] != vmin)
            continue;
        while (j < n && x[j] == x[i])
            j++;
        if (j - i >= SE_CLIP_RUN) {
            if (res->first_clipped == SIZE_MAX)
                res->first_clipped = i;
            res->clipped_samples += j - i;
            if (res->n_clip_runs < SE_MAX_CLIP_RUNS) {
                res->clip_runs[res->n_clip_runs][0] = i;
                res->clip_runs[res->n_clip_runs][1] = j;
                res->n_clip_runs++;
            }
        }
    }
}

/* 1 when a correlation window [start, start + m) of the response touches a clipped run (or when
 * more runs were clipped than recorded: then every event is suspect). */
static int se_window_clipped(const se_locate_result *res, size_t start, size_t m)
{
    size_t k;
    if (res->clipped_samples == 0)
        return 0;
    if (res->n_clip_runs == SE_MAX_CLIP_RUNS)
        return 1;
    for (k = 0; k < res->n_clip_runs; k++)
        if (res->clip_runs[k][0] < start + m && res->clip_runs[k][1] > start)
            return 1;
    return 0;
}

se_status se_locate_events(const se_locate_stage *sg, const se_peak *peaks, size_t npeaks,
                           se_locate_result *res, se_error *err)
{
    const se_locate_config *cfg = sg->cfg;
    const se_distmap *map = sg->map;
    const double rate_hz = sg->rate_hz, lag0 = sg->lag0, a0 = sg->a0, sigma = sg->sigma;
    const double beta_crb = sg->beta_crb, hw = sg->mainlobe_half_width, thr = sg->thr;
    const double kthr = sg->kthr, one_plus_rs = 1.0 + cfg->source_reflection;
    const size_t k0 = sg->k0, m = sg->m, dead = sg->dead, end = sg->end;
    double z, v0;
    size_t i;
    se_status st;

    z = gsl_cdf_ugaussian_Pinv(0.5 + 0.5 * cfg->confidence);
    st = se_distmap_speed(map, 0.0, &v0, err);
    if (st != SE_OK)
        return st;
    if (npeaks > 0) {
        res->events = se_calloc(npeaks, sizeof *res->events, "events", err);
        if (res->events == NULL)
            return SE_ERR_NOMEM;
    }
    for (i = 0; i < npeaks; i++) {
        se_event *ev = &res->events[i];
        double lagrel = peaks[i].lag - lag0;
        /* the noise where the echo lies (non-stationary noise), else the record's */
        double sig = sg->profile != NULL ? se_noise_profile_sigma(sg->profile, peaks[i].lag) : sigma;
        double snr = fabs(peaks[i].amplitude) / sig;
        double sl = 1.0 / (snr * beta_crb), sl0 = sigma / (fabs(a0) * beta_crb);
        double sd_t, sd_v, refl_d, vloc;
        ev->lag_samples = lagrel;
        ev->delay_s = lagrel / rate_hz;
        ev->reflection = peaks[i].amplitude / a0 / one_plus_rs;
        ev->reflection_uncertainty = sig / fabs(a0) / fabs(one_plus_rs);
        ev->polarity = ev->reflection >= 0.0 ? 1 : -1;
        refl_d = ev->reflection * (double)se_quantity_sign(cfg->quantity);
        ev->impedance_increase = refl_d < 0.0;
        ev->snr_db = 20.0 * log10(snr);
        ev->low_confidence = ev->snr_db < cfg->low_snr_db;
        if (ev->low_confidence && sl < hw) /* below the threshold region the bound is not met */
            sl = hw;
        ev->delay_uncertainty_s = sqrt(sl * sl + sl0 * sl0) / rate_hz;
        st = se_distmap_distance(map, ev->delay_s, &ev->distance_m, err);
        if (st == SE_OK)
            st = se_distmap_speed(map, ev->distance_m, &vloc, err);
        if (st == SE_OK)
            st = se_distmap_distance_sigma(map, ev->delay_s, &sd_v, err);
        if (st != SE_OK)
            return st;
        sd_t = 0.5 * vloc * ev->delay_uncertainty_s;
        ev->distance_uncertainty_m = z * sqrt(sd_t * sd_t + sd_v * sd_v);
        ev->multiple = 0;
        ev->multiple_of[0] = ev->multiple_of[1] = -1;
        ev->expected = -1;
        ev->clipped = se_window_clipped(res, (size_t)floor(peaks[i].lag), m);
        ev->reflection_at_discontinuity = ev->reflection; /* losses: se_locate */
    }
    res->n_events = npeaks;
    if (npeaks > 0) {
        double *spread = se_calloc(npeaks, sizeof *spread, "multiple field", err);
        if (spread == NULL)
            return SE_ERR_NOMEM;
        st = se_label_multiples(res->events, npeaks, sg, res, spread, err);
        if (st == SE_OK)
            se_ring_and_decay(sg, res, spread);
        free(spread);
        if (st != SE_OK)
            return st;
    } else {
        se_ring_and_decay(sg, res, NULL);
    }
    res->record_range_s = (double)(end - 1 - k0) / rate_hz;
    res->resolution_s = hw / rate_hz;
    res->break_event = -1;
    if (cfg->n_expected > 0) {
        st = se_match_expected(res, cfg->expected, cfg->n_expected, z, err);
        if (st != SE_OK)
            return st;
    }
    res->rate_hz = rate_hz;
    res->t0_s = lag0 / rate_hz;
    res->direct_amplitude = a0;
    res->noise_level = sigma / fabs(a0) / fabs(one_plus_rs);
    res->threshold = thr / fabs(a0) / fabs(one_plus_rs);
    res->threshold_sigma = kthr;
    res->noise_varies = sg->profile != NULL;
    res->noise_level_min = res->noise_level_max = NAN;
    if (sg->profile != NULL) {
        res->noise_level_min = sg->profile->min_sigma / fabs(a0) / fabs(one_plus_rs);
        res->noise_level_max = sg->profile->max_sigma / fabs(a0) / fabs(one_plus_rs);
    }
    res->dead_zone_s = (double)dead / rate_hz;
    st = se_distmap_distance(map, res->dead_zone_s, &res->dead_zone_m, err);
    if (st == SE_OK)
        st = se_distmap_distance(map, (double)(end - 1 - k0) / rate_hz, &res->record_range_m, err);
    if (st != SE_OK)
        return st;
    res->resolution_s = hw / rate_hz;
    res->resolution_m = 0.5 * v0 * res->resolution_s;
    res->rms_bandwidth_hz = beta_crb / (2.0 * SE_PI) * rate_hz;
    res->reference_length = m;
    res->direct_clipped = se_window_clipped(res, k0, m);
    res->speed_m_s = v0;
    res->electrical = se_quantity_is_electrical(cfg->quantity);
    res->quantity = cfg->quantity;
    res->source_reflection = cfg->source_reflection;
    if (res->shots_found == 0)
        res->shots_found = res->shots_used = 1;

    return SE_OK;
}

/* The weights of the previous taps' echoes in the mean stack of the shots marked used in
 * status [size: nf] (in onset order): w[k] = the share of used shots with at least k taps before
 * them, k = 1 .. nf - 1 (w[0] = 1). NULL on allocation failure. */
static double *se_prev_weights(const se_shot_status *status, size_t nf, se_error *err)
{
    double *w = se_calloc(nf > 0 ? nf : 1, sizeof *w, "stack weights", err);
    size_t i, k, nu = 0;
    if (w == NULL)
        return NULL;
    for (i = 0; i < nf; i++)
        nu += status[i] == SE_SHOT_USED;
    w[0] = 1.0;
    for (k = 1; k < nf && nu > 0; k++) {
        size_t c = 0;
        for (i = k; i < nf; i++)
            c += status[i] == SE_SHOT_USED;
        w[k] = (double)c / (double)nu;
    }
    return w;
}

/* Repeated shots: stack the recording in *x [size: *n] when it holds several (stack.h). With a
 * pilot two shots suffice; on the response's own direct arrivals three consistent ones must be
 * found and used (two equal arrivals may be a full reflection). On success with a stack, *x and *n are replaced
 * by the stack and *pre receives the sample where the first used shot's pulse starts. When
 * several credible shots were found but fewer than two are usable, the record is cut to the first
 * usable (or the first) shot's segment so that later shots are not taken for echoes (with a
 * pilot only). On the response the shots must also keep a rhythm (longest interval at most 1.5
 * times the shortest). */
static se_status se_locate_stack(double **x, size_t *n, const double *pulse, size_t m,
                                 const se_locate_config *cfg, double rate_hz,
                                 se_locate_result *res, size_t *pre, int *stacked,
                                 double **prev_w, se_error *err)
{
    se_stack_config sc;
    se_stack_result sr;
    se_status st;
    size_t need = cfg->pilot != NULL ? 2 : 3;

    if (cfg->given_stack != NULL) {
        /* stacked outside (stream.c): *x already is the stack or the one shot's segment, made as
         * below from a pilot, so only the report and the time origin follow */
        const se_stack_result *g = cfg->given_stack;
        if (g->n_found >= 2 && g->n_used >= 2) {
            if (g->status != NULL && (*prev_w = se_prev_weights(g->status, g->n_found, err)) == NULL)
                return SE_ERR_NOMEM;
            *pre = g->pre;
            res->shots_found = g->n_found;
            res->shots_used = g->n_used;
            res->stack_gain_db = g->gain_db;
            res->stack_expected_gain_db = g->expected_gain_db;
            res->shot_interval_s = (g->onsets[g->n_found - 1] - g->onsets[0]) /
                                   (double)(g->n_found - 1) / rate_hz;
            *stacked = 1;
        } else if (g->n_found >= 2) {
            double o = floor(g->onsets[g->n_used > 0 ? g->first_used : 0]);
            size_t b = o > (double)g->pre ? (size_t)o - g->pre : 0;
            *pre = (size_t)o - b;
            res->shots_found = g->n_found;
            res->shots_used = 1;
            *stacked = 1;
        }
        return SE_OK;
    }

    se_stack_config_init(&sc);
    sc.pilot = cfg->pilot;
    sc.pulse = pulse;
    sc.pulse_length = m;
    sc.mode = cfg->stacking == SE_STACKING_ROBUST ? SE_STACK_TRIMMED : SE_STACK_MEAN;
    st = se_stack_shots(*x, *n, &sc, &sr, err);
    if (st == SE_ERR_NOTFOUND) { /* no trigger: leave it to the pipeline to say why */
        se_stack_result_free(&sr);
        return SE_OK;
    }
    if (st != SE_OK) {
        se_stack_result_free(&sr);
        return st;
    }
    if (cfg->pilot == NULL && sr.n_found >= 2) {
        /* on the response, shots come in a rhythm: glitches and echoes do not */
        size_t i;
        double lo = INFINITY, hi = 0.0;
        for (i = 1; i < sr.n_found; i++) {
            double d = sr.onsets[i] - sr.onsets[i - 1];
            lo = fmin(lo, d);
            hi = fmax(hi, d);
        }
        if (hi > 1.5 * lo)
            sr.n_found = 1;
    }
    if (sr.n_found >= need && sr.n_used >= need && sr.stacked != NULL) {
        if ((*prev_w = se_prev_weights(sr.status, sr.n_found, err)) == NULL) {
            se_stack_result_free(&sr);
            return SE_ERR_NOMEM;
        }
        free(*x);
        *x = sr.stacked;
        *n = sr.length;
        *pre = sr.pre;
        sr.stacked = NULL;
        res->shots_found = sr.n_found;
        res->shots_used = sr.n_used;
        res->stack_gain_db = sr.gain_db;
        res->stack_expected_gain_db = sr.expected_gain_db;
        /* the mean interval between the shots found (their echoes' overlap, se_locate_events) */
        res->shot_interval_s = (sr.onsets[sr.n_found - 1] - sr.onsets[0]) /
                               (double)(sr.n_found - 1) / rate_hz;
        *stacked = 1;
    } else if (cfg->pilot != NULL && sr.n_found >= 2 && sr.length > 0) {
        size_t k = sr.n_used > 0 ? sr.first_used : 0, b, len = sr.length, i;
        double o = floor(sr.onsets[k]);
        b = o > (double)sr.pre ? (size_t)o - sr.pre : 0;
        if (b + len > *n)
            len = *n - b;
        for (i = 0; i < len; i++)
            (*x)[i] = (*x)[b + i];
        *n = len;
        *pre = (size_t)o - b;
        res->shots_found = sr.n_found;
        res->shots_used = 1;
        *stacked = 1;
    }
    se_stack_result_free(&sr);
    return SE_OK;
}

/* The largest |matched filter| of a residual res [size: len > m] over the lags from..to (rounded
 * out, clipped to [0, len - m]): r[k] = sum_j res[k + j] ref[j] / E_s as se_xcorr_direct gives it,
 * computed for those lags only. */
static double se_residual_peak(const double *res, size_t len, const double *ref, size_t m,
                               double from, double to)
{
    size_t k0 = 0, k1 = len - m, k, j;
    double a = floor(from), z = ceil(to), e = 0.0, best = 0.0;
    if (a > 0.0)
        k0 = (size_t)a;
    if (z < (double)k1)
        k1 = z > 0.0 ? (size_t)z : 0;
    for (j = 0; j < m; j++)
        e += ref[j] * ref[j];
    if (!(e > 0.0))
        return 0.0;
    for (k = k0; k <= k1 && k < len; k++) {
        double acc = 0.0;
        size_t jmax = len - k < m ? len - k : m;
        for (j = 0; j < jmax; j++)
            acc += res[k + j] * ref[j];
        best = fmax(best, fabs(acc / e));
    }
    return best;
}

/* One group of se_refit_overlaps: the peaks in[g0, g1), and what its fit gave. */
typedef struct se_rgroup {
    size_t g0, g1, b, len;
    int close, todo;  /* todo: the group is fitted (else CLEAN's estimates are kept) */
    double split_thr;
    int fitted;       /* the fit's echoes replace CLEAN's */
    se_echo *echo;    /* [size: no], lags in the window (from b), malloc'd */
    size_t no;
    int mismatch;
    double rmax;
} se_rgroup;

/* The groups' fits, shared by the threads that take them in turn (se_refit_run). */
typedef struct se_refit_job {
    const se_sample_reader *x;
    const se_echo_model *mdl;
    const double *ref;
    const se_peak *in, *direct;
    size_t np, m;
    double hw;
    se_rgroup *gr;
    size_t ngr, next;
    pthread_mutex_t *mu; /* NULL with one thread; else guards next, st and the reads of x */
    se_status st;        /* the first failure that ends the refit (allocation, reading) */
    se_error err;
} se_refit_job;

/* Fit group g (its window read, the other echoes and the direct arrival taken out) with the
 * buffers w, resid [size: 4 m + 8 each]. Returns SE_OK also when the fit fails and CLEAN's
 * estimates stay (g->fitted 0); an error only for allocation or reading (in *err). */
static se_status se_refit_group(se_refit_job *jb, se_rgroup *g, double *w, double *resid,
                                se_error *err)
{
    const se_echo_model *mdl = jb->mdl;
    const se_peak *in = jb->in;
    size_t m = jb->m, np = jb->np, b = g->b, len = g->len, e = b + len, ng = g->g1 - g->g0, no = 0;
    size_t i, j, q, g0 = g->g0, g1 = g->g1;
    double lo = in[g0].lag, hi = in[g1 - 1].lag, hw = jb->hw, split_thr = g->split_thr;
    se_echo init[16], *fit = NULL;
    se_fitecho_config fc;
    se_status st;
    if (jb->mu != NULL)
        pthread_mutex_lock(jb->mu);
    st = jb->x->read(jb->x->ctx, b, len, w, err);
    if (jb->mu != NULL)
        pthread_mutex_unlock(jb->mu);
    if (st != SE_OK)
        return st;
    for (j = 0; j <= np; j++) {
        const se_peak *o = j < np ? &in[j] : jb->direct;
        if (j >= g0 && j < g1)
            continue;
        if (o->lag + (double)m + 2.0 < (double)b || o->lag - 2.0 > (double)e)
            continue;
        for (i = 0; i < len; i++)
            w[i] -= o->amplitude * se_echo_model_value(mdl, (double)(b + i) - o->lag, NULL);
    }
    for (q = 0; q < ng; q++) {
        init[q].lag = in[g0 + q].lag - (double)b;
        init[q].amplitude = in[g0 + q].amplitude;
    }
    se_fitecho_config_init(&fc);
    fc.begin = 0;
    fc.end = len;
    /* the noise from the window's own residual: the record's sigma may be too low where the
     * noise is not stationary, and BIC would then fit noise as echoes */
    fc.sigma = 0.0;
    {
        double amax = 0.0;
        for (q = 0; q < ng; q++)
            amax = fmax(amax, fabs(in[g0 + q].amplitude));
        fc.max_echoes = amax > 10.0 * split_thr ? (ng + 2 < 16 ? ng + 2 : 16) : ng;
    }
    fc.min_amplitude = isfinite(split_thr) ? split_thr : 0.0;
    fc.min_separation = 0.25 * hw;
    if (se_fitecho(mdl, w, len, &fc, init, ng, &fit, &no, NULL, NULL, err) != SE_OK) {
        free(fit);
        return err != NULL && err->code == SE_ERR_NOMEM ? SE_ERR_NOMEM : SE_OK;
    }
    if (no == 0 || (no == ng && !g->close) || (no > ng && !isfinite(split_thr))) {
        free(fit);
        return SE_OK;
    }
    {
        /* Does the model explain the window? The matched filter of the fit's residual must
         * stay below the detection threshold over the group. When it does not (echoes the
         * fit cannot place, e.g. a splice and a clamp a fraction of the main lobe apart with
         * their internal reverberation), the fitted positions are biased far beyond their
         * covariance: the group is kept but low confidence, its timing widened to the main
         * lobe (as below the SNR limit) and its amplitudes to what the model misses. */
        double rmax = 0.0;
        int mismatch = 0;
        if (isfinite(split_thr) && len > m) {
            for (i = 0; i < len; i++) {
                resid[i] = w[i];
                for (q = 0; q < no; q++)
                    resid[i] -= fit[q].amplitude *
                                se_echo_model_value(mdl, (double)i - fit[q].lag, NULL);
            }
            rmax = se_residual_peak(resid, len, jb->ref, m, lo - (double)b - hw,
                                    hi - (double)b + hw);
            mismatch = rmax > split_thr;
        }
        if (mismatch && (no == 2 || no == 3)) {
            /* Two interfaces a fraction of the main lobe apart reverberate between each
             * other: the train g r1, g (1 - r1^2) r2 (-r1 r2)^n follows from the two
             * primaries alone (se_layerfit), so a third fitted echo may be its first
             * multiple. Each pair of the fitted echoes is tried as the two interfaces (in
             * lag order: first, first and third, second and third); the first whose
             * residual passes the same check is taken. Then only its two primaries are
             * reported, with their covariance intervals: the internal multiples are not
             * events, they are explained inside the fit (and so are not passed on to the
             * multiple labelling either). Otherwise the group stays flagged. */
            static const size_t pairs[3][2] = {{0, 1}, {0, 2}, {1, 2}};
            size_t pi;
            for (pi = 0; pi < (no == 2 ? 1u : 3u) && mismatch; pi++) {
                se_layerfit_config lc;
                se_layerfit_result lr;
                se_error lerr;
                se_echo two[2];
                se_status ls;
                double lmax;
                two[0] = fit[pairs[pi][0]];
                two[1] = fit[pairs[pi][1]];
                se_layerfit_config_init(&lc);
                lc.begin = 0;
                lc.end = len;
                ls = se_layerfit(mdl, w, len, &lc, two, &lr, resid, &lerr);
                if (ls == SE_ERR_NOMEM) {
                    if (err != NULL)
                        *err = lerr;
                    free(fit);
                    return SE_ERR_NOMEM;
                }
                if (ls != SE_OK)
                    continue; /* no layered fit from this pair (lerr not passed on) */
                lmax = se_residual_peak(resid, len, jb->ref, m, lo - (double)b - hw,
                                        hi - (double)b + hw);
                if (lmax <= split_thr) {
                    fit[0] = lr.primary[0];
                    fit[1] = lr.primary[1];
                    no = 2;
                    mismatch = 0;
                }
            }
        }
        g->fitted = 1;
        g->echo = fit;
        g->no = no;
        g->mismatch = mismatch;
        g->rmax = rmax;
    }
    return SE_OK;
}

/* Take the next group to fit until none is left or the refit has failed. */
static void *se_refit_run(void *arg)
{
    se_refit_job *jb = arg;
    size_t m = jb->m;
    double *w = malloc((4 * m + 8) * sizeof *w), *resid = malloc((4 * m + 8) * sizeof *resid);
    se_error err;
    se_error_clear(&err);
    for (;;) {
        se_rgroup *g = NULL;
        se_status st;
        if (jb->mu != NULL)
            pthread_mutex_lock(jb->mu);
        while (jb->st == SE_OK && jb->next < jb->ngr && !jb->gr[jb->next].todo)
            jb->next++;
        if (jb->st == SE_OK && jb->next < jb->ngr)
            g = &jb->gr[jb->next++];
        if (g != NULL && (w == NULL || resid == NULL)) {
            jb->st = se_fail(&jb->err, SE_ERR_NOMEM, "refit: cannot allocate a window of %zu samples",
                             4 * m + 8);
            g = NULL;
        }
        if (jb->mu != NULL)
            pthread_mutex_unlock(jb->mu);
        if (g == NULL)
            break;
        if ((st = se_refit_group(jb, g, w, resid, &err)) != SE_OK) {
            if (jb->mu != NULL)
                pthread_mutex_lock(jb->mu);
            if (jb->st == SE_OK) {
                jb->st = st;
                jb->err = err;
            }
            if (jb->mu != NULL)
                pthread_mutex_unlock(jb->mu);
            break;
        }
    }
    free(w);
    free(resid);
    return NULL;
}

/* Least squares of groups of overlapping echoes (fitecho.h) on the response x [size: n]. A group
 * is a run of peaks less than one pulse length apart; the other echoes and the direct arrival are
 * subtracted from its window first. The fit replaces CLEAN's estimates when the group holds echoes
 * closer than the main lobe (2 hw), or when BIC splits or merges it. A lone peak is only tried for
 * a split when split_thr is finite (not on noise-floored records, where the model's own residue
 * would be fitted); added echoes must exceed split_thr. Groups touching clipped samples keep
 * CLEAN's estimates. A fit whose residual still holds an echo above split_thr is, for 2 or 3
 * echoes, refitted as two layered interfaces with their internal multiples (se_layerfit) and
 * taken when that residual passes; otherwise kept low confidence (intervals widened to the main
 * lobe). The groups are independent (each window takes out CLEAN's estimates of the others), so
 * two threads fit them in turn, the reads of x one at a time; the answer is the one thread's.
 * *mdlp is made (from ref [size: m]) when a group is to be fitted. *lag_sd, *amp_sd:
 * [size: *npeaks], NaN where CLEAN's estimate was kept. */
static se_status se_refit_overlaps(const se_sample_reader *x, se_echo_model **mdlp,
                                   const double *ref, size_t m, const se_locate_result *res,
                                   const se_peak *direct,
                                   double thr_all, const se_noise_profile *prof, double kthr,
                                   double hw, se_peak **peaks, size_t *npeaks, double **lag_sd,
                                   double **amp_sd, se_error *err)
{
    size_t np = *npeaks, g0, g1, nout = 0, cap, n = x->n, ngr = 0, ntodo = 0, q, k;
    se_peak *in = *peaks, *out = NULL;
    double *lsd = NULL, *asd = NULL;
    se_rgroup *gr = NULL;
    se_refit_job jb;
    se_status st = SE_OK;

    cap = np + 16;
    out = se_calloc(cap, sizeof *out, "fitted peaks", err);
    lsd = se_calloc(cap, sizeof *lsd, "fitted peaks", err);
    asd = se_calloc(cap, sizeof *asd, "fitted peaks", err);
    gr = se_calloc(np > 0 ? np : 1, sizeof *gr, "fitted groups", err);
    if (out == NULL || lsd == NULL || asd == NULL || gr == NULL) {
        st = SE_ERR_NOMEM;
        goto fail;
    }
    /* the groups, and which are fitted */
    for (g0 = 0; g0 < np; g0 = g1) {
        se_rgroup *g = &gr[ngr++];
        double bb, ee;
        size_t b, e, ng;
        g->close = 0;
        for (g1 = g0 + 1; g1 < np && in[g1].lag - in[g1 - 1].lag < (double)m; g1++)
            if (in[g1].lag - in[g1 - 1].lag < 2.0 * hw)
                g->close = 1;
        g->g0 = g0;
        g->g1 = g1;
        ng = g1 - g0;
        g->split_thr = thr_all;
        /* with non-stationary noise the group's own threshold (the larger of its two ends) */
        if (prof != NULL && isfinite(thr_all))
            g->split_thr = kthr * fmax(se_noise_profile_sigma(prof, in[g0].lag),
                                       se_noise_profile_sigma(prof, in[g1 - 1].lag));
        /* a lone peak is tried for a split only when strong (10 thresholds): near the threshold
         * the noise, not a second echo, decides */
        if (ng > 8 || (ng == 1 && !(fabs(in[g0].amplitude) > 10.0 * g->split_thr)))
            continue;
        bb = floor(in[g0].lag - 0.5 * (double)m);
        ee = ceil(in[g1 - 1].lag + 1.5 * (double)m);
        b = bb > 0.0 ? (size_t)bb : 0;
        e = ee < (double)n ? (size_t)ee : n;
        g->b = b;
        g->len = e > b ? e - b : 0;
        if (g->len < 16 || g->len > 4 * m + 8 || se_window_clipped(res, b, g->len))
            continue; /* a clipped echo does not follow the model */
        g->todo = 1;
        ntodo++;
    }
    if (ntodo > 0 && *mdlp == NULL && (*mdlp = se_echo_model_create(ref, m, err)) == NULL) {
        st = err ? err->code : SE_ERR_NOMEM;
        goto fail;
    }
    memset(&jb, 0, sizeof jb);
    jb.x = x;
    jb.mdl = *mdlp;
    jb.ref = ref;
    jb.in = in;
    jb.direct = direct;
    jb.np = np;
    jb.m = m;
    jb.hw = hw;
    jb.gr = gr;
    jb.ngr = ngr;
    jb.st = SE_OK;
    if (ntodo > 0) {
        pthread_mutex_t mu;
        pthread_t tid;
        int started = 0;
        if (ntodo > 1 && pthread_mutex_init(&mu, NULL) == 0) {
            jb.mu = &mu;
            started = pthread_create(&tid, NULL, se_refit_run, &jb) == 0;
        }
        se_refit_run(&jb);
        if (started)
            pthread_join(tid, NULL);
        if (jb.mu != NULL)
            pthread_mutex_destroy(&mu);
        jb.mu = NULL;
        if (jb.st != SE_OK) {
            st = jb.st;
            if (err != NULL)
                *err = jb.err;
            goto fail;
        }
    }
    /* in group order: the fitted echoes, or CLEAN's */
    for (k = 0; k < ngr; k++) {
        se_rgroup *g = &gr[k];
        if (g->fitted && nout + g->no <= cap) {
            for (q = 0; q < g->no; q++) {
                out[nout].lag = g->echo[q].lag + (double)g->b;
                out[nout].amplitude = g->echo[q].amplitude;
                out[nout].index = (size_t)floor(out[nout].lag + 0.5);
                lsd[nout] = g->mismatch ? fmax(g->echo[q].lag_sd, hw) : g->echo[q].lag_sd;
                asd[nout] = g->mismatch ? fmax(g->echo[q].amplitude_sd, g->rmax)
                                        : g->echo[q].amplitude_sd;
                nout++;
            }
            continue;
        }
        for (q = g->g0; q < g->g1; q++) {
            if (nout == cap)
                break;
            out[nout] = in[q];
            lsd[nout] = asd[nout] = NAN;
            nout++;
        }
    }
    for (k = 0; k < ngr; k++)
        free(gr[k].echo);
    free(gr);
    free(*peaks);
    *peaks = out;
    *npeaks = nout;
    *lag_sd = lsd;
    *amp_sd = asd;
    return SE_OK;
fail:
    for (k = 0; gr != NULL && k < ngr; k++)
        free(gr[k].echo);
    free(gr);
    free(out);
    free(lsd);
    free(asd);
    return st;
}

/* The maxp largest |amplitude| of peaks [size: *npeaks] (with their lag_sd, amp_sd, which may be
 * NULL), kept in lag order; ties keep the earlier peak. */
static void se_keep_largest(se_peak *peaks, size_t *npeaks, double *lag_sd, double *amp_sd,
                            size_t maxp)
{
    size_t np = *npeaks, i, j, out = 0;
    double cut;
    size_t above = 0, at_cut;
    if (np <= maxp || maxp == 0)
        return;
    /* the maxp-th largest magnitude by selection on a copy would need memory; n is small (at most
     * max_peaks + 16 after the refit), so count by pairs */
    cut = INFINITY;
    for (i = 0; i < np; i++) {
        size_t larger = 0;
        for (j = 0; j < np; j++)
            larger += fabs(peaks[j].amplitude) > fabs(peaks[i].amplitude);
        if (larger < maxp && fabs(peaks[i].amplitude) < cut)
            cut = fabs(peaks[i].amplitude);
    }
    for (i = 0; i < np; i++)
        above += fabs(peaks[i].amplitude) > cut;
    at_cut = maxp - above; /* how many of the magnitude equal to cut are kept */
    for (i = 0; i < np; i++) {
        double a = fabs(peaks[i].amplitude);
        if (a < cut || (a == cut && at_cut == 0))
            continue;
        if (a == cut)
            at_cut--;
        peaks[out] = peaks[i];
        if (lag_sd != NULL)
            lag_sd[out] = lag_sd[i];
        if (amp_sd != NULL)
            amp_sd[out] = amp_sd[i];
        out++;
    }
    *npeaks = out;
}

/* Source-end coefficient from the data, jointly over every first-order source-end multiple of the
 * strong primaries (REFERENCE.md 2, Backus 1959). In seen amplitudes s = A / A_0 (relative to
 * the outgoing pulse, r_s = 0 assumed) a primary is s_i = (1 + r_s) a_i and the multiple at
 * t_i + t_j is (1 + r_s) r_s a_i a_j m_ij (m_ij = 2 for i != j: two paths), so
 *   s_ij = q m_ij s_i s_j,   q = r_s / (1 + r_s),   r_s = q / (1 - q),
 * whatever the losses and transmissions (they are inside the a's). q is the weighted least
 * squares slope sum w x y / sum w x^2 (x = m s_i s_j, y = s_ij, w = 1 / sigma^2 at t_i + t_j:
 * SNR-weighted), iterated to convergence because which peaks are primaries (timing, and "past a
 * full reflection" |s| / (1 + r_s) > 0.9) and the size of the arrivals that may overlap a
 * candidate depend on r_s. The strong peaks (|s| >= max(0.1 max |s|, 10 sigma)) are classified in
 * delay order by timing alone: a multiple falls at a pair sum of primaries, at a peg-leg
 * t_k + t_j - t_i (i < j primaries, k any earlier strong peak at or beyond j), at t_k + t_j (k an
 * earlier multiple, j a primary), or past a full reflection; the rest are primaries (at most
 * SE_RS_MAX_P). A candidate is dropped when other predicted arrivals within half the main-lobe
 * half width add up to more than a fifth of its own prediction (primaries, other pair sums,
 * peg-legs, t_k + t_j and second-order sums t_i + t_j + t_k), and then the least consistent one
 * at a time while its residual exceeds 3 sigma + 25 % of its prediction (sign and size). *found
 * = 0 and 0 returned when no candidate is left, q is not 3 standard errors from 0, or r_s falls
 * outside [-1, 1] by more than 3 standard errors (inside that, clamped to the bound). */
#define SE_RS_MAX_P 16
#define SE_RS_MAX_STRONG 256
#define SE_RS_MAX_CAND (SE_RS_MAX_P * (SE_RS_MAX_P + 1) / 2)
static double se_estimate_source(const se_peak *peaks, size_t npeaks, double lag0, double a0,
                                 double hw, double sigma, const se_noise_profile *prof,
                                 int *found)
{
    size_t strong[SE_RS_MAX_STRONG], pr[SE_RS_MAX_P], ns = 0, np, i, j, k, it;
    int role[SE_RS_MAX_STRONG];
    double cx[SE_RS_MAX_CAND], cy[SE_RS_MAX_CAND], cw[SE_RS_MAX_CAND], cs[SE_RS_MAX_CAND];
    double smax = 0.0, sn = sigma / fabs(a0), pmin, tol = fmax(2.0, 0.5 * hw), win = 0.5 * hw;
    double rs = 0.0, q_use = 0.5; /* no estimate yet: the largest q (r_s = 1) sizes the overlaps */
    *found = 0;
    if (!(fabs(a0) > 0.0) || !(sn > 0.0))
        return 0.0;
    for (i = 0; i < npeaks; i++)
        if (peaks[i].lag > lag0 && fabs(peaks[i].amplitude / a0) > smax)
            smax = fabs(peaks[i].amplitude / a0);
    pmin = fmax(0.1 * smax, 10.0 * sn);
    for (i = 0; i < npeaks && ns < SE_RS_MAX_STRONG; i++) /* in lag order (insertion) */
        if (peaks[i].lag > lag0 && fabs(peaks[i].amplitude / a0) >= pmin) {
            for (j = ns; j > 0 && peaks[strong[j - 1]].lag > peaks[i].lag; j--)
                strong[j] = strong[j - 1];
            strong[j] = i;
            ns++;
        }
    for (it = 0; it < 30; it++) {
        double sxy = 0.0, sxx = 0.0, q, sq, rs_new;
        size_t nc = 0, c, used;
        int full = 0;
#define SE_T(p) (peaks[p].lag - lag0)
#define SE_S(p) (peaks[p].amplitude / a0)
        /* primaries and multiples of the strong peaks, by timing */
        np = 0;
        for (k = 0; k < ns; k++) {
            double t = SE_T(strong[k]);
            int expl = full;
            for (i = 0; i < np && !expl; i++)
                for (j = i; j < np && !expl; j++) {
                    size_t k2;
                    if (fabs(t - SE_T(pr[i]) - SE_T(pr[j])) < tol)
                        expl = 1;
                    for (k2 = 0; k2 < k && !expl && j > i; k2++)
                        if (SE_T(strong[k2]) > SE_T(pr[j]) - tol &&
                            fabs(t - (SE_T(strong[k2]) + SE_T(pr[j]) - SE_T(pr[i]))) < tol)
                            expl = 1;
                }
            for (i = 0; i < k && !expl; i++)
                for (j = 0; j < np && !expl && role[i] == 2; j++)
                    if (fabs(t - SE_T(strong[i]) - SE_T(pr[j])) < tol)
                        expl = 1;
            role[k] = expl || np == SE_RS_MAX_P ? 2 : 1;
            if (role[k] == 1) {
                pr[np++] = strong[k];
                if (fabs(SE_S(strong[k])) / (1.0 + rs) > 0.9)
                    full = 1;
            }
        }
        /* candidates: every pair of primaries with a peak at t_i + t_j, not overlapped */
        for (i = 0; i < np; i++)
            for (j = i; j < np; j++) {
                double tt = SE_T(pr[i]) + SE_T(pr[j]), x, pred, over = 0.0, best = tol, y = 0.0;
                size_t a, b, d, hit = SIZE_MAX;
                x = (i == j ? 1.0 : 2.0) * SE_S(pr[i]) * SE_S(pr[j]);
                pred = fabs(q_use * x);
                for (a = 0; a < npeaks; a++)
                    if (fabs(SE_T(a) - tt) < best) {
                        best = fabs(SE_T(a) - tt);
                        hit = a;
                    }
                if (hit == SIZE_MAX)
                    continue;
                y = SE_S(hit);
                for (a = 0; a < np; a++) {
                    double ai = SE_S(pr[a]) / (1.0 + rs);
                    if (fabs(SE_T(pr[a]) - tt) < win)
                        over += fabs(SE_S(pr[a]));
                    for (b = a; b < np; b++) {
                        double tab = SE_T(pr[a]) + SE_T(pr[b]);
                        if ((a != i || b != j) && fabs(tab - tt) < win)
                            over += fabs(q_use * (a == b ? 1.0 : 2.0) * SE_S(pr[a]) * SE_S(pr[b]));
                        for (d = b; d < np; d++) /* second order: 1, 3 or 6 orderings */
                            if (fabs(tab + SE_T(pr[d]) - tt) < win)
                                over += q_use * q_use * fabs(SE_S(pr[a]) * SE_S(pr[b]) * SE_S(pr[d])) *
                                        (a == b && b == d ? 1.0 : (a == b || b == d ? 3.0 : 6.0));
                        for (d = 0; d < ns && b > a && fabs(ai) < 1.0; d++) /* peg-legs */
                            if (SE_T(strong[d]) > SE_T(pr[b]) - tol &&
                                fabs(SE_T(strong[d]) + SE_T(pr[b]) - SE_T(pr[a]) - tt) < win)
                                over += fabs(SE_S(strong[d]) * ai * SE_S(pr[b]) / (1.0 + rs)) /
                                        (1.0 - ai * ai);
                    }
                    for (d = 0; d < ns; d++) /* an earlier multiple and one more bounce */
                        if (role[d] == 2 && strong[d] != hit &&
                            fabs(SE_T(strong[d]) + SE_T(pr[a]) - tt) < win)
                            over += fabs(q_use * SE_S(strong[d]) * SE_S(pr[a]));
                }
                if (over > 0.2 * pred || nc == SE_RS_MAX_CAND)
                    continue;
                cs[nc] = prof != NULL ? se_noise_profile_sigma(prof, lag0 + tt) / fabs(a0) : sn;
                if (!(cs[nc] > 0.0))
                    cs[nc] = sn;
                cx[nc] = x;
                cy[nc] = y;
                cw[nc] = 1.0 / (cs[nc] * cs[nc]);
                nc++;
            }
#undef SE_T
#undef SE_S
        /* weighted least squares; the least consistent candidate dropped while one is off */
        used = nc;
        for (;;) {
            double worst = 1.0;
            size_t wi = SIZE_MAX;
            sxy = sxx = 0.0;
            for (c = 0; c < nc; c++)
                if (cw[c] > 0.0) {
                    sxy += cw[c] * cx[c] * cy[c];
                    sxx += cw[c] * cx[c] * cx[c];
                }
            if (used == 0 || !(sxx > 0.0))
                return 0.0;
            q = sxy / sxx;
            for (c = 0; c < nc; c++) {
                double z;
                if (!(cw[c] > 0.0))
                    continue;
                z = fabs(cy[c] - q * cx[c]) / (3.0 * cs[c] + 0.25 * fabs(q * cx[c]));
                if (z > worst) {
                    worst = z;
                    wi = c;
                }
            }
            if (wi == SIZE_MAX)
                break;
            cw[wi] = 0.0;
            used--;
        }
        sq = 1.0 / sqrt(sxx);
        if (!(fabs(q) >= 3.0 * sq))
            return 0.0;
        if (q >= 1.0) /* r_s = q / (1 - q) has no finite value */
            return 0.0;
        rs_new = q / (1.0 - q);
        if (rs_new > 1.0 || rs_new < -1.0) { /* within 3 standard errors of the bound: clamped */
            double qb = rs_new > 1.0 ? 0.5 : -INFINITY;
            if (rs_new > 1.0 ? q - 3.0 * sq > qb : 1.0 / (1.0 - q) - 1.0 < -1.0 - 3.0 * sq / ((1.0 - q) * (1.0 - q)))
                return 0.0;
            rs_new = rs_new > 1.0 ? 1.0 : -1.0;
        }
        q_use = q;
        if (it > 0 && fabs(rs_new - rs) < 1e-6) {
            rs = rs_new;
            break;
        }
        rs = rs_new;
    }
    *found = 1;
    return rs;
}

/* Losses: the attenuation given, or estimated from the farthest matched expected event with a
 * known coefficient of at least 0.3 (g = |seen / amplitude expected|, the expected amplitude
 * carrying the two-way transmissions in front); then every event's coefficient at the
 * discontinuity: reflection / (g(d) prod (1 - r_j^2)) over the primaries before it (multiples are
 * left as seen). */
static void se_apply_losses(const se_locate_config *cfg, se_locate_result *res)
{
    double alpha = res->attenuation_db_per_m, trans = 1.0; /* dB/m one way */
    size_t i;
    /* given, or from the end's repeats (se_locate_events); a known reflector is preferred */
    if (!isfinite(cfg->attenuation_db_per_m) && cfg->expected != NULL &&
        res->expected_found != NULL) {
        size_t k, best = SIZE_MAX;
        for (k = 0; k < res->n_expected; k++) {
            const se_expected_event *xe = &cfg->expected[k];
            if (res->expected_found[k] < 0 || !xe->has_reflection || fabs(xe->amplitude) < 0.3 ||
                !(xe->distance_m > 0.0))
                continue;
            if (best == SIZE_MAX || xe->distance_m > cfg->expected[best].distance_m)
                best = k;
        }
        if (best != SIZE_MAX) {
            const se_event *ev = &res->events[res->expected_found[best]];
            double g = fabs(ev->reflection / cfg->expected[best].amplitude);
            if (g > 0.0 && g <= 1.0 + 3.0 * fabs(ev->reflection_uncertainty /
                                                 cfg->expected[best].amplitude)) {
                alpha = -20.0 * log10(fmin(g, 1.0)) / (2.0 * cfg->expected[best].distance_m);
                res->attenuation_db_per_m = alpha;
                res->attenuation_estimated = 1;
                res->attenuation_method = SE_ATTEN_KNOWN_REFLECTOR;
                res->attenuation_repeats = 0;
                /* the seen amplitude's uncertainty through g */
                res->attenuation_uncertainty_db_per_m =
                    20.0 / log(10.0) * fabs(ev->reflection_uncertainty / ev->reflection) /
                    (2.0 * cfg->expected[best].distance_m);
            }
        }
    }
    for (i = 0; i < res->n_events; i++) {
        se_event *ev = &res->events[i];
        double g = isfinite(alpha) ? pow(10.0, -2.0 * alpha * ev->distance_m / 20.0) : 1.0;
        if (ev->multiple) { /* no single discontinuity: left as seen */
            ev->reflection_at_discontinuity = ev->reflection;
            continue;
        }
        ev->reflection_at_discontinuity = ev->reflection / (g * trans);
        if (!ev->multiple && fabs(ev->reflection_at_discontinuity) < 1.0)
            trans *= 1.0 - ev->reflection_at_discontinuity * ev->reflection_at_discontinuity;
    }
}

/* Delay and distance uncertainty of an event from its lag uncertainty sl and the direct
 * arrival's sl0 (samples), as se_locate_events does from the bound. */
static se_status se_event_uncertainty(const se_distmap *map, double z, double sl, double sl0,
                                      double rate_hz, se_event *ev, se_error *err)
{
    double vloc, sd_v, sd_t;
    se_status st;
    ev->delay_uncertainty_s = sqrt(sl * sl + sl0 * sl0) / rate_hz;
    st = se_distmap_speed(map, ev->distance_m, &vloc, err);
    if (st == SE_OK)
        st = se_distmap_distance_sigma(map, ev->delay_s, &sd_v, err);
    if (st != SE_OK)
        return st;
    sd_t = 0.5 * vloc * ev->delay_uncertainty_s;
    ev->distance_uncertainty_m = z * sqrt(sd_t * sd_t + sd_v * sd_v);
    return SE_OK;
}

/* Echoes inside the dead zone: the response from half a pulse before the direct arrival to one
 * pulse past the dead zone, the echoes found beyond it subtracted, fitted from the direct arrival
 * alone with echoes added by BIC (fitecho.h, at most 3 more, each above the threshold). Fitted
 * echoes more than a quarter of the main-lobe half width (fitecho's separation limit) after the
 * direct arrival and before the end of the dead zone go to res->dead_zone_events, low confidence. */
static se_status se_dead_zone_scan(const se_sample_reader *x, const se_echo_model *mdl,
                                   const se_peak *direct, const se_peak *peaks, size_t npeaks,
                                   size_t dead, double thr, double sigma, double hw, double rs,
                                   double rate_hz, double z, const se_distmap *map,
                                   se_locate_result *res, se_error *err)
{
    size_t m = se_echo_model_length(mdl), b, e, len, i, j, no = 0, nd = 0, n = x->n;
    double bb = floor(direct->lag - 0.5 * (double)m), *w;
    se_echo init, *fit = NULL;
    se_fitecho_config fc;
    se_status st;
    double origin = direct->lag, a_direct = direct->amplitude;

    b = bb > 0.0 ? (size_t)bb : 0;
    e = (size_t)floor(direct->lag) + dead + m;
    if (e > n)
        e = n;
    if (e <= b + 16)
        return SE_OK;
    len = e - b;
    w = se_calloc(len, sizeof *w, "dead-zone window", err);
    if (w == NULL)
        return SE_ERR_NOMEM;
    if ((st = x->read(x->ctx, b, len, w, err)) != SE_OK) {
        free(w);
        return st;
    }
    for (j = 0; j < npeaks; j++)
        if (peaks[j].lag - 2.0 < (double)e)
            for (i = 0; i < len; i++)
                w[i] -= peaks[j].amplitude * se_echo_model_value(mdl, (double)(b + i) - peaks[j].lag,
                                                                 NULL);
    init.lag = direct->lag - (double)b;
    init.amplitude = direct->amplitude;
    se_fitecho_config_init(&fc);
    fc.begin = 0;
    fc.end = len;
    fc.max_echoes = 4;
    fc.min_amplitude = thr;
    fc.min_separation = 0.25 * hw;
    st = se_fitecho(mdl, w, len, &fc, &init, 1, &fit, &no, NULL, NULL, err);
    free(w);
    if (st != SE_OK) {
        free(fit);
        return st == SE_ERR_NOMEM ? st : SE_OK; /* a failed fit reports nothing */
    }
    /* the time origin: the fitted direct arrival (CLEAN's is pulled by the echoes on it) */
    {
        double best = INFINITY;
        for (i = 0; i < no; i++)
            if (fabs(fit[i].lag + (double)b - direct->lag) < best) {
                best = fabs(fit[i].lag + (double)b - direct->lag);
                origin = fit[i].lag + (double)b;
                a_direct = fit[i].amplitude;
            }
    }
    for (i = 0; i < no; i++) {
        double lag = fit[i].lag + (double)b - origin;
        if (lag > 0.25 * hw && lag < (double)dead)
            nd++;
    }
    if (nd > 0) {
        res->dead_zone_events = se_calloc(nd, sizeof *res->dead_zone_events, "dead-zone events", err);
        if (res->dead_zone_events == NULL) {
            free(fit);
            return SE_ERR_NOMEM;
        }
    }
    for (i = 0, j = 0; i < no && j < nd; i++) {
        se_event *ev = &res->dead_zone_events[j];
        double lag = fit[i].lag + (double)b - origin;
        if (!(lag > 0.25 * hw && lag < (double)dead))
            continue;
        ev->lag_samples = lag;
        ev->delay_s = lag / rate_hz;
        ev->delay_uncertainty_s = fit[i].lag_sd / rate_hz;
        ev->reflection = fit[i].amplitude / a_direct / (1.0 + rs);
        ev->reflection_uncertainty = fit[i].amplitude_sd / fabs(a_direct) / fabs(1.0 + rs);
        ev->reflection_at_discontinuity = ev->reflection;
        ev->polarity = ev->reflection >= 0.0 ? 1 : -1;
        ev->impedance_increase = ev->reflection * (double)se_quantity_sign(res->quantity) < 0.0;
        ev->snr_db = 20.0 * log10(fabs(fit[i].amplitude) / sigma);
        ev->low_confidence = 1;
        ev->in_dead_zone = 1;
        ev->fitted = 1;
        ev->multiple_of[0] = ev->multiple_of[1] = -1;
        ev->expected = -1;
        st = se_distmap_distance(map, ev->delay_s, &ev->distance_m, err);
        if (st != SE_OK) {
            free(fit);
            return st;
        }
        ev->distance_uncertainty_m = z * 0.5 * res->speed_m_s * ev->delay_uncertainty_s;
        j++;
    }
    res->n_dead_zone_events = j;
    free(fit);
    return SE_OK;
}

/* Skin-effect loss (skin.h): the detections peaks [size: *npeaks, lag order] are corrected in place
 * with their loss-shaped templates, those explained by a stronger echo's loss tail dropped;
 * skin_sd[i] gets the corrected echo's lag uncertainty (samples; NaN when not corrected) and
 * plain_lag[i] its plain matched-filter lag, both [size: *npeaks], kept in step with peaks. The
 * speed: cfg->speed_m_s, or with a distance map the mean over the round trip to the farthest
 * detection. K and how it was found go to res. */
static se_status se_locate_skin(const double *x, size_t n, const double *ref, size_t m,
                                double rate_hz, double lag0, const se_locate_config *cfg,
                                const se_distmap *map, double thr, se_peak *peaks, size_t *npeaks,
                                double *skin_sd, double *plain_lag, se_locate_result *res,
                                se_error *err)
{
    size_t np = *npeaks, i, out = 0;
    se_skin_echo *ec;
    se_skin_config sk;
    se_skin_result sr;
    se_status st;
    double speed = cfg->speed_m_s;

    if (cfg->map != NULL) {
        double far = peaks[np - 1].lag, t = (far - lag0) / rate_hz, d;
        st = t > 0.0 ? se_distmap_distance(map, t, &d, err)
                     : se_distmap_speed(map, 0.0, &speed, err);
        if (st != SE_OK)
            return st;
        if (t > 0.0)
            speed = 2.0 * d / t;
    }
    ec = se_calloc(np, sizeof *ec, "skin-effect fit", err);
    if (ec == NULL)
        return SE_ERR_NOMEM;
    for (i = 0; i < np; i++) {
        ec[i].lag = peaks[i].lag;
        ec[i].amplitude = peaks[i].amplitude;
    }
    se_skin_config_init(&sk);
    sk.rate_hz = rate_hz;
    sk.lag0 = lag0;
    sk.speed_m_s = speed;
    sk.k_s05_per_m = cfg->skin_k_s05_per_m;
    sk.threshold = isfinite(thr) ? thr : 0.0;
    memset(&sr, 0, sizeof sr);
    st = se_skin_correct(x, n, ref, m, &sk, ec, np, &sr, err);
    if (st != SE_OK) {
        free(ec);
        return st;
    }
    for (i = 0; i < np; i++) {
        if (ec[i].explained) {
            res->skin_explained++;
            continue;
        }
        plain_lag[out] = ec[i].lag_plain;
        skin_sd[out] = ec[i].corrected ? ec[i].lag_sd : NAN;
        peaks[out] = peaks[i];
        peaks[out].lag = ec[i].lag;
        peaks[out].amplitude = ec[i].amplitude;
        peaks[out].index = (size_t)floor(ec[i].lag + 0.5);
        out++;
    }
    free(ec);
    /* the corrected lags may have moved past each other: keep lag order */
    for (i = 1; i < out; i++) {
        size_t j = i;
        while (j > 0 && peaks[j - 1].lag > peaks[j].lag) {
            se_peak tp = peaks[j];
            double ts = skin_sd[j], tl = plain_lag[j];
            peaks[j] = peaks[j - 1];
            skin_sd[j] = skin_sd[j - 1];
            plain_lag[j] = plain_lag[j - 1];
            peaks[j - 1] = tp;
            skin_sd[j - 1] = ts;
            plain_lag[j - 1] = tl;
            j--;
        }
    }
    *npeaks = out;
    res->skin_k_s05_per_m = sr.k_s05_per_m;
    res->skin_k_uncertainty = sr.estimated ? sr.k_sd : NAN;
    res->skin_k_estimated = sr.estimated;
    res->skin_fit_echoes = sr.fit_echoes;
    return SE_OK;
}
