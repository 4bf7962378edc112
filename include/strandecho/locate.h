/* strandecho: the locator. From a response trace and a reference pulse to located, classified
 * reflections with distances, uncertainties, polarities and reflection-coefficient estimates. */
#ifndef SE_LOCATE_H
#define SE_LOCATE_H

#include <stddef.h>

#include "strandecho/error.h"
#include "strandecho/wave.h"

#ifdef __cplusplus
extern "C" {
#endif

struct se_distmap;
struct se_stack_result;
struct se_expected_event;

/* Where the reference pulse came from (for the report). */
typedef enum se_reference_kind {
    SE_REF_CHANNEL,   /* a channel of the same recording (the injected pulse) */
    SE_REF_FILE,      /* a separate recording */
    SE_REF_SYNTHETIC, /* a synthetic shape (pulse.h spec) */
    SE_REF_SELF       /* the direct arrival found in the response itself */
} se_reference_kind;

typedef struct se_locate_config {
    se_quantity quantity;       /* what the response channel measures */
    double speed_m_s;           /* wave speed of a uniform line (ignored when map is given) */
    double speed_uncertainty;   /* one standard uncertainty of the speed, as a fraction (0.02 = 2 %) */
    const struct se_distmap *map; /* optional delay-to-distance map of a described line (borrowed) */
    double false_alarms;        /* expected false detections per record (default 0.01) */
    size_t max_events;          /* 0 = 64 */
    double source_reflection;   /* source-end coefficient, observed convention (0 = continuing line);
                                   echoes seen at the sensor are (1 + r_s) times the arriving wave */
    double confidence;          /* coverage of the reported intervals (default 0.95) */
    double low_snr_db;          /* events below this energy SNR are marked low confidence (default 20) */
    /* Reference: exactly one of these. reference[size: reference_length] is copied. With
     * reference_offset the reference is known to start at that sample of the response's time base
     * (a channel of the same recording); SIZE_MAX = unknown (search the record). */
    const double *reference;
    size_t reference_length;
    size_t reference_offset;
    se_reference_kind reference_kind;
    /* Optional expected events of a described line (line.h), sorted by delay, borrowed: detected
     * events are matched to them within their uncertainties. */
    const struct se_expected_event *expected;
    size_t n_expected;
    int keep_trace;             /* 1: keep the matched-filter output in se_locate_result.trace */
    /* Repeated shots (stack.h): with SE_STACKING_AUTO (the default) a recording holding several
     * shots is stacked before locating. The shots are found on pilot [size: n, the response's
     * length] when given (the pulse channel, borrowed), else on the direct arrivals in the
     * response (then at least three consistent shots are needed). */
    int stacking;               /* SE_STACKING_AUTO, SE_STACKING_OFF or SE_STACKING_ROBUST */
    const double *pilot;
    /* A stack made outside se_locate (the streaming pipeline, stream.c), borrowed, or NULL: the
     * response is then already the stacked trace (n_used >= 2) or, with fewer usable shots, the
     * first usable (or first) shot's segment starting max(0, floor(onsets[k]) - pre) of the
     * record, and se_locate reports these shots (n_found, n_used, first_used, pre, onsets
     * [size: n_found], gain_db, expected_gain_db are read) instead of searching for them. */
    const struct se_stack_result *given_stack;
    /* Losses: attenuation of the line in dB per metre, one way (NaN = unknown: estimated from a
     * matched expected event of known coefficient, see se_locate_result.attenuation_db_per_m). */
    double attenuation_db_per_m;
    /* Overlapping echoes: 1 (default) refits groups of echoes closer than the main lobe by least
     * squares (fitecho.h) and splits merged ones; 0 keeps CLEAN's estimates. */
    int fit_overlaps;
    /* Non-stationary noise: 1 measures the noise of the matched-filter output in blocks along the
     * record (detect.h se_noise_profile) and, where it changes by a factor of two or more, holds
     * each lag to threshold_sigma times its own level, so cfg.false_alarms holds in loud and quiet
     * parts alike and weak echoes in the quiet parts are kept; stationary records keep the one
     * threshold (default; se_locate_stream follows it with the same results). 0 keeps one
     * threshold for the whole record. */
    int noise_tracking;
    /* Skin-effect loss of a cable (skin.h): K in s^0.5 per metre, H(s) = exp(-K l sqrt(s)) over a
     * length l. 0 (default) = none; NaN = estimate K from the echoes' shapes. With skin loss each
     * detection is matched with its own loss-shaped template (the matched filter with the
     * lossless pulse puts distorted echoes late and splits them into several peaks): the delays
     * and amplitudes become the templates', the pieces of a split echo are dropped, and the
     * overlap refit (a lossless model) is not run. One speed: cfg.speed_m_s, or with a map the
     * mean speed to the farthest detection. Whole-record only: se_locate_stream refuses it. */
    double skin_k_s05_per_m;
} se_locate_config;

#define SE_STACKING_AUTO 0   /* stack when several shots are found (mean) */
#define SE_STACKING_OFF 1    /* never stack */
#define SE_STACKING_ROBUST 2 /* stack when several shots are found (20 % trimmed mean) */

/* Defaults: velocity, speed 0 (must be set), no speed uncertainty, 0.01 false alarms per record,
 * 95 % intervals, 20 dB low-confidence limit, self reference, automatic stacking, unknown
 * attenuation, overlap fitting on. source_reflection = NaN asks se_locate to estimate the
 * source-end coefficient from the data (see se_locate_result.source_reflection). */
void se_locate_config_init(se_locate_config *cfg);

typedef struct se_event {
    double delay_s;                /* round-trip delay after the direct arrival, s */
    double delay_uncertainty_s;    /* one standard uncertainty of the delay, s */
    double distance_m;             /* from the sensor, m */
    double distance_uncertainty_m; /* half-width of the cfg.confidence interval (timing + speed), m */
    int polarity;                  /* +1 upright, -1 inverted, in the recorded quantity */
    int impedance_increase;        /* 1: impedance increase (fixed-like / open-like), 0: decrease */
    double reflection;             /* signed coefficient estimate in the recorded quantity's convention,
                                      relative to the outgoing pulse, corrected for the source end */
    double reflection_uncertainty; /* one standard uncertainty of reflection */
    double snr_db;                 /* energy SNR of the echo, 20 log10(|A| / sigma), dB */
    double lag_samples;            /* refined lag in the correlation, samples after the direct arrival */
    int low_confidence;            /* below cfg.low_snr_db: the timing may jump to a wrong peak */
    int multiple;                  /* 1 when explained as a multiple of earlier events */
    int multiple_of[2];            /* indices of the primaries (or -1) when multiple */
    int clipped;                   /* 1 when the echo's window touches clipped samples: unreliable */
    int expected;                  /* index of the matched expected event, -1 when unexpected (or
                                      when no line was described) */
    double reflection_at_discontinuity; /* reflection with the losses removed: divided by the
                                      attenuation over the round trip and by the two-way
                                      transmissions (1 - r^2) of the primaries before it; equals
                                      reflection when the attenuation is unknown and nothing
                                      lies before it, and for multiples */
    int fitted;                    /* 1 when the delay and amplitude come from the least-squares
                                      fit of overlapping echoes (fitecho.h) */
    int in_dead_zone;              /* 1 for an echo found inside the dead zone (in
                                      se_locate_result.dead_zone_events only): low confidence */
    int previous_shot;             /* with multiple: 0 when the reverberation of this shot explains
                                      it, k >= 1 when the echoes of the shot k taps earlier do
                                      (taps closer than the line's ring-down) */
    int skin_corrected;            /* 1 when the delay and amplitude come from the loss-shaped
                                      template (skin.h); delay_uncertainty_s is then the template
                                      fit's (with the estimated K's share) */
    double skin_shift_s;           /* with skin_corrected: how much earlier than the plain matched
                                      filter's peak the echo was placed, s (>= 0 in practice) */
    double predicted;              /* the multiple field predicted at the event from the primaries
                                      before it (and the previous shots'), reflection units: the
                                      sum of every lattice path within the main lobe, weighted by
                                      the autocorrelation; 0 when nothing is predicted there */
} se_event;

/* How se_locate_result.attenuation_db_per_m was obtained. */
#define SE_ATTEN_NONE 0            /* unknown (NaN) */
#define SE_ATTEN_GIVEN 1           /* cfg.attenuation_db_per_m */
#define SE_ATTEN_KNOWN_REFLECTOR 2 /* a matched expected event of known coefficient */
#define SE_ATTEN_END_MULTIPLES 3   /* the decay of the end's repeats at k t_end */

/* Clipped runs remembered per result (more: every event is flagged). */
#define SE_MAX_CLIP_RUNS 64

typedef struct se_locate_result {
    se_event *events;        /* [size: n_events], sorted by delay; owned, freed by se_locate_result_free */
    size_t n_events;
    double rate_hz;          /* sample rate of the trace */
    double t0_s;             /* time of the direct arrival in the record, s */
    double direct_amplitude; /* correlation amplitude of the direct arrival (response units) */
    double noise_level;      /* robust noise of the matched-filter output, reflection units */
    double threshold;        /* detection threshold, reflection units */
    double threshold_sigma;  /* threshold as a multiple of noise_level (Rice, cfg.false_alarms) */
    int noise_varies;        /* 1 when the noise level changes along the record (block MAD sigmas
                                differ by 2x or more, detect.h se_noise_profile): each lag is then
                                held to threshold_sigma times the noise where it lies, and each
                                event's snr_db and reflection_uncertainty use that level */
    double noise_level_min;  /* with noise_varies: lowest and highest level along the record, */
    double noise_level_max;  /* reflection units; NaN otherwise */
    double dead_zone_s;      /* round-trip time after the direct arrival searched for nothing */
    double dead_zone_m;      /* the same as a distance from the sensor */
    double resolution_s;     /* main-lobe half width of the pulse autocorrelation, s */
    double resolution_m;     /* the same as a distance (two echoes closer may merge) */
    double rms_bandwidth_hz; /* RMS bandwidth of the reference, Hz (beta / 2 pi * rate) */
    double record_range_m;   /* farthest distance the record reaches */
    double record_range_s;   /* the same as a round-trip delay after the direct arrival, s */
    size_t reference_length; /* samples of the reference used */
    double speed_m_s;        /* speed at the sensor (uniform line: the speed used) */
    int electrical;          /* 1 for voltage/current (class words open-like/short-like) */
    se_quantity quantity;    /* quantity the events are classified in */
    /* With expected events: expected_found[k] is the event index matched to expected event k,
     * or -1 when it is missing; owned. */
    int *expected_found;     /* [size: n_expected] */
    size_t n_expected;
    int noise_floored;       /* 1 when the noise was below the 80 dB dynamic-range floor and the
                                floor was used instead (noise-free or nearly noise-free records) */
    size_t clipped_samples;  /* samples of the response in runs at its extreme value (clipping) */
    size_t first_clipped;    /* first clipped sample (0-based), SIZE_MAX when none */
    size_t clip_runs[SE_MAX_CLIP_RUNS][2]; /* [begin, end) of the first clipped runs */
    size_t n_clip_runs;
    int direct_clipped;      /* 1 when the direct arrival itself is clipped: every reflection
                                estimate is then unreliable */
    int end_missing;         /* 1 when the line's end was expected within the record but not found */
    int break_event;         /* with the end missing: index of the first strong unexpected
                                impedance-decrease (free-like / short-like) event before it, the
                                likely break or open fault; -1 otherwise */
    double *trace;           /* with cfg.keep_trace: the full-record matched-filter output
                                [size: trace_length = n], in reflection units (divided by the direct
                                amplitude and 1 + r_s, the scale of threshold and reflection);
                                sample i lies at delay i / rate_hz - t0_s; owned; else NULL */
    size_t trace_length;
    /* Repeated shots. */
    size_t shots_found;      /* shots found in the recording (1 for a single shot) */
    size_t shots_used;       /* shots stacked (1 when not stacked) */
    double stack_gain_db;    /* measured SNR gain of the stack, dB (stack.h); 0 when not stacked */
    double stack_expected_gain_db; /* 10 log10 shots_used */
    /* Source end and losses. */
    double source_reflection;      /* source-end coefficient used (given or estimated) */
    int source_reflection_estimated; /* 1 when estimated from the data: a weighted least-squares
                                      fit over the first-order source-end multiples of the strong
                                      primaries, seen at t_i + t_j as q m_ij a_i a_j (amplitudes
                                      relative to the outgoing pulse, m_ij = 2 for i != j, 1 for
                                      i = j), q = r_s / (1 + r_s), so r_s = q / (1 - q); losses
                                      cancel; overlapped candidates are left out. 0 when nothing
                                      supports it (then r_s = 0 is used) */
    double attenuation_db_per_m;   /* one-way attenuation, dB/m (given or estimated); NaN unknown */
    int attenuation_estimated;     /* 1 when estimated (attenuation_method 2 or 3) */
    int attenuation_method;        /* SE_ATTEN_*: from a matched expected event of known
                                      coefficient (g = |A seen| / |(1 + r_s) r T|, alpha from
                                      g = 10^(-2 alpha d / 20)), or, with no such event, from the
                                      end's repeats: A_k = r_s^(k-1) (r_end g^2 T^2)^k at k t_end,
                                      seen as (1 + r_s) A_k (weighted straight-line fit of
                                      log |(1 + r_s) A_k| = k s + b over k, two unknowns: r_s from
                                      b = log |1 + r_s| - log |r_s|, so the r_s used does not
                                      bias it; only repeats the pure repeat predicts within 20 %,
                                      not low confidence), |r_end| = 1 assumed
                                      (fixed or free end, break): alpha = -20 log10 |g^2| / (2 L) */
    double attenuation_uncertainty_db_per_m; /* one standard uncertainty of an estimated
                                      attenuation (from the amplitude uncertainties), NaN else */
    size_t attenuation_repeats;    /* with SE_ATTEN_END_MULTIPLES: repeats fitted (k = 1..) */
    /* Ring-down: how long the line's reverberation (source end, strong reflectors, end) stays
     * above the detection threshold, from r_s and the primaries' seen amplitudes (which carry the
     * losses): max over primaries of t_i (1 + log(threshold / |a_i|) / log |r_s a_i|), the
     * slowest decay; +inf when some |r_s a_i| >= 1. With several shots (taps) shot_interval_s is
     * the mean interval, and shots_overlap = 1 when it is shorter than the ring-down: the
     * previous taps' echoes then lie in this one (events they explain are labelled multiple with
     * previous_shot = k). */
    /* Skin-effect loss (cfg.skin_k_s05_per_m != 0): K used (given or estimated), one standard
     * uncertainty of an estimated K (NaN else), whether estimated and from how many echoes, and
     * how many detections were dropped as pieces of a stronger echo's loss-shaped tail. NaN/0
     * without skin loss. */
    double skin_k_s05_per_m;
    double skin_k_uncertainty;
    int skin_k_estimated;
    size_t skin_fit_echoes;
    size_t skin_explained;
    double ring_down_s;
    double shot_interval_s;        /* 0 for a single shot */
    int shots_overlap;
    /* Echoes found inside the dead zone, flagged (never hidden, never in events): owned. */
    se_event *dead_zone_events;    /* [size: n_dead_zone_events] */
    size_t n_dead_zone_events;
} se_locate_result;

/* Locate reflections in response[size: n] sampled at rate_hz. Fills res (caller frees with
 * se_locate_result_free even on failure: it is zeroed first). */
se_status se_locate(const double *response, size_t n, double rate_hz, const se_locate_config *cfg,
                    se_locate_result *res, se_error *err);
void se_locate_result_free(se_locate_result *res);

/* Match the events of res to expected events (sorted by delay) within z standard uncertainties
 * (delay uncertainties combined) plus half the resolution, nearest first, signs agreeing where the
 * expected coefficient is known; multiples are never matched. Fills ev->expected,
 * res->expected_found, res->end_missing and res->break_event. */
se_status se_match_expected(se_locate_result *res, const struct se_expected_event *expected,
                            size_t n_expected, double z, se_error *err);

/* The field engineer's warning when the taps are closer together than the line's ring-down
 * (res->shots_overlap), written into buf[size: size] NUL-terminated (cut to fit); returns 1 when
 * there is a warning, 0 (buf set to "") when not. */
int se_locate_overlap_warning(const se_locate_result *res, char *buf, size_t size);

/* Class word of an event: "fixed-like", "free-like", "open-like" or "short-like". */
const char *se_event_class(const se_locate_result *res, const se_event *ev);
/* Polarity and impedance words: "upright"/"inverted", "increase"/"decrease". */
const char *se_event_polarity(const se_event *ev);
const char *se_event_impedance(const se_event *ev);

/* Bring an acceleration or displacement trace to velocity in place (integrate with the pre-trigger
 * mean removed and a linear drift fitted out, or differentiate by central differences). Any other
 * quantity is left unchanged. pre_trigger: samples before the pulse used for the offset (0 = 1 %). */
se_status se_to_velocity(double *x, size_t n, double rate_hz, se_quantity q, size_t pre_trigger,
                         se_error *err);

/* Find the support of a pulse in a channel: first and one-past-last sample where it stands above
 * max(3 noise sigma, 1e-3 of its peak), widened by a small margin. */
se_status se_pulse_support(const double *x, size_t n, size_t *begin, size_t *end, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_LOCATE_H */
