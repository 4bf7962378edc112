/* strandecho: change since a baseline. Two locate results of the same line (each with its
 * matched-filter trace, se_locate_config.keep_trace = 1) are put on one time base and differenced:
 *
 *  1. alignment on the outgoing pulse: both traces are in delay after their own direct arrival,
 *     refined to a fraction of a sample by the locator (se_locate_result.t0_s);
 *  2. speed change by time-stretch: now delay = stretch x baseline delay. A 1-D search maximises
 *     the correlation of the two traces over stretch in [1 - max_stretch, 1 + max_stretch], then
 *     the common primary echoes refine it: their median ratio of delays, then weighted least
 *     squares over the pairs that agree with it (so that a moved reflector does not pull the fit). The baseline is re-sampled (cubic
 *     interpolation) with a piecewise time shift: the shift is held constant over each baseline
 *     echo, so the pulse keeps its shape (a speed change moves echoes, it does not widen them);
 *  3. gain by least squares over the searched delays: gain = <now, b> / <b, b>;
 *  4. residual = now - gain x aligned baseline; its robust noise sigma (MAD) and a Rice threshold
 *     for cfg.false_alarms per record (the same rule as the locator's);
 *  5. every residual peak above the threshold is explained by the events of both results:
 *     a now event with no baseline echo near is NEW, a baseline echo with no now event is GONE,
 *     a pair whose delays differ by more than the threshold in standard uncertainties is MOVED,
 *     else the pair CHANGED in strength. Significance is |residual peak| / sigma (or the z of the
 *     move). Changes that involve only multiples, and strength changes that the transmission
 *     through new, gone or changed reflectors in front explains, are flagged secondary.
 *  The gain (step 3) is the least-squares ratio of the common primary echoes whose ratio, after the
 *  transmission correction, agrees with their median (the outgoing pulse counting as one more echo
 *  of ratio 1, so a real change cannot pull it), or, with
 *  no common echo, the least-squares ratio of the traces.
 *
 * Everything is in reflection units (the traces' scale) and seconds of round-trip delay in the now
 * recording's time base; distances through the given map (or the now result's uniform speed).
 * The module keeps no state and does no FFT (thread-safe). */
#ifndef SE_COMPARE_H
#define SE_COMPARE_H

#include <stddef.h>

#include "strandecho/distmap.h"
#include "strandecho/error.h"
#include "strandecho/locate.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct se_compare_config {
    double false_alarms;  /* expected false findings per comparison (default 0.01) */
    double max_stretch;   /* largest |stretch - 1| searched (default 0.05: a 5 % speed change) */
    const se_distmap *map;/* delay -> distance of the line (borrowed), or NULL: the now result's
                             speed, d = v t / 2 */
} se_compare_config;

/* Defaults: 0.01 false alarms, 5 % stretch range, no map. */
void se_compare_config_init(se_compare_config *cfg);

typedef enum se_change_kind {
    SE_CHANGE_NEW = 0,  /* a reflection now that the baseline does not have */
    SE_CHANGE_GONE,     /* a baseline reflection no longer seen */
    SE_CHANGE_MOVED,    /* the same reflection at a significantly different distance */
    SE_CHANGE_STRENGTH  /* the same reflection, significantly stronger or weaker */
} se_change_kind;

/* "new", "gone", "moved", "changed"; NULL out of range. */
const char *se_change_kind_name(se_change_kind kind);

typedef struct se_change {
    se_change_kind kind;
    double delay_s;             /* now time base, s (gone: the baseline echo's predicted delay) */
    double distance_m;          /* at delay_s, m */
    double baseline_delay_s;    /* the baseline echo's own delay, s (NAN for new) */
    double shift_m;             /* moved: now distance minus predicted distance, m (else 0) */
    double reflection_now;      /* signed, reflection units (NAN when gone and nothing is seen) */
    double reflection_baseline; /* the baseline's, times gain (NAN for new) */
    double significance;        /* |residual| / residual sigma; for moved, the z of the shift */
    int event_now;              /* index into now->events or -1 */
    int event_baseline;         /* index into baseline->events or -1 */
    int secondary;              /* 1 when explained without a fault here: the events are multiples,
                                   or a change in strength equals the change of the two-way
                                   transmission through the reflectors in front (a shadow of an
                                   earlier change) */
} se_change;

typedef struct se_compare_result {
    double stretch;          /* now delay / baseline delay */
    double speed_change;     /* 1 / stretch - 1: the fractional change of the wave speed */
    int stretch_from_echoes; /* 1 when common echoes refined the search's stretch */
    size_t n_common;         /* common primary echoes used for it */
    double gain;             /* now / baseline by least squares (see step 3) */
    double correlation;      /* normalised correlation of now and the aligned baseline */
    double residual_sigma;   /* robust noise of the residual, reflection units */
    double threshold;        /* detection threshold on |residual|, reflection units */
    double threshold_sigma;  /* threshold / residual_sigma */
    double search_from_s;    /* searched delays [search_from_s, search_to_s] (now time base) */
    double search_to_s;
    se_change *changes;      /* [size: n_changes] by delay; owned */
    size_t n_changes;
    size_t n_faults;         /* changes that are not secondary */
    /* On the now trace's samples [size: n] (sample i at delay i / rate_hz - t0_s): */
    double *aligned_baseline;/* gain x aligned baseline; owned (0 outside the baseline's record) */
    double *residual;        /* now - aligned_baseline; owned */
    size_t n;
    double rate_hz;
    double t0_s;
} se_compare_result;

/* Compare now with baseline (both with traces at the same sample rate). Fills out (zeroed first;
 * free with se_compare_result_free even on failure). Errors: SE_ERR_ARG (NULL, no trace, rates
 * differ, bad config), SE_ERR_DATA (no common delays to compare), SE_ERR_NOMEM. */
se_status se_compare(const se_locate_result *baseline, const se_locate_result *now,
                     const se_compare_config *cfg, se_compare_result *out, se_error *err);
void se_compare_result_free(se_compare_result *res);

/* The comparison in one sentence for a summary table or a report (no capital, no full stop):
 *   "since the 2025 survey (speed +0.30 %): new reflection at 112.2 m, 346 sigma"
 * listing every change that is not secondary ("new reflection at D", "reflection at D gone",
 * "reflection moved by +0.50 m to D", "reflection at D changed from -0.200 to -0.350", each with its
 * significance), or "no change that may be a fault since ... (speed ...)" followed by ", N secondary"
 * when only secondary changes were found. since: e.g. "the 2025 survey", NULL: "the baseline".
 * per_metre: display units per metre (1, or 1 / 0.3048 for feet); unit: "m", "ft" (NULL: "m").
 * Numbers use a point as the decimal separator whatever the locale. buf [size: size] receives the
 * NUL-terminated sentence; changes that do not fit are summed up as "; and N more" (": N changes
 * that may be a fault" when not even the first fits). Errors:
 * SE_ERR_ARG (NULL, per_metre not positive, size below 96). */
se_status se_compare_sentence(const se_compare_result *res, const char *since, double per_metre,
                              const char *unit, char *buf, size_t size, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_COMPARE_H */
