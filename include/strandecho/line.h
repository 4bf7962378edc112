/* strandecho: the line description. A line is a chain of segments laid end to end from the sensor
 * (the source end) to the far end, each with its own wave speed and impedance, optional listed
 * features (splices, shackles, joints, clamps) and optional hanging-line (elastic catenary)
 * description. The file format is documented in docs/line-file.md.
 *
 * Distances are measured along the line from the sensor (m), times are round trip (s) unless a
 * name says one-way. Reflection coefficients are in the OBSERVED convention of the line's
 * quantity: r = sign(q) (Z1 - Z2) / (Z1 + Z2) going from Z1 into Z2, sign(q) = se_quantity_sign
 * (+1 displacement, velocity, acceleration, current; -1 force, strain, voltage).
 *
 * Life: se_line_read / se_line_parse_string, or se_line_create + se_line_add_segment +
 * se_line_set_*_end + se_line_prepare. Derived fields are valid only after se_line_prepare
 * (the readers call it); a prepared line is read-only and may be shared between threads. */
#ifndef SE_LINE_H
#define SE_LINE_H

#include <stddef.h>

#include "strandecho/catenary.h"
#include "strandecho/distmap.h"
#include "strandecho/error.h"
#include "strandecho/wave.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Kind of wave the survey uses. */
typedef enum se_wave_kind {
    SE_WAVE_TRANSVERSE,   /* string waves: v = sqrt(T / mu), Z = sqrt(T mu) (N s/m) */
    SE_WAVE_LONGITUDINAL, /* axial waves: v = sqrt(EA / mu), Z = sqrt(EA mu) (N s/m) */
    SE_WAVE_ELECTRICAL    /* transmission line: v = VF c, Z = Z0 (ohm) */
} se_wave_kind;

/* How a segment's speed is defined (exactly one per segment). */
typedef enum se_speed_source {
    SE_SPEED_UNSET = 0,       /* not yet given */
    SE_SPEED_TENSION,         /* tension + mass_per_length (transverse) */
    SE_SPEED_AXIAL_STIFFNESS, /* axial_stiffness + mass_per_length (longitudinal) */
    SE_SPEED_GIVEN,           /* speed */
    SE_SPEED_VELOCITY_FACTOR, /* velocity_factor (electrical) */
    SE_SPEED_HANGING          /* tension from the hanging: block (transverse) */
} se_speed_source;

/* Kind of an expected event. */
typedef enum se_event_type {
    SE_EVENT_JUNCTION, /* change of segment */
    SE_EVENT_FEATURE,  /* a listed feature */
    SE_EVENT_END       /* the far end */
} se_event_type;

/* A listed feature of a segment. */
typedef struct se_feature {
    char *name;          /* display name (owned); generated "<segment> <kind> at <at> m" if not given */
    char *kind;          /* free word: shackle, splice, joint, clamp, connector... (owned) */
    double at_m;         /* position from the START of its segment (m), 0 <= at <= length */
    int has_reflection;  /* 1 if an expected coefficient is given */
    double reflection;   /* expected coefficient, observed convention, |r| <= 1 */
    unsigned src_line;   /* 1-based position in the file (0 if not from a file) */
    unsigned src_column;
} se_feature;

/* Hanging-line description of a segment (see catenary.h for the combinations accepted). */
typedef struct se_hanging {
    int enabled;                 /* 1 if the segment hangs */
    double weight_in_water_n_m;  /* submerged weight per length w (N/m), > 0 */
    double top_tension_n;        /* tension at the upper end (N) or NAN */
    double horizontal_tension_n; /* H (N) or NAN */
    double lower_vertical_n;     /* V_A at the lower end of the suspended part (N) or NAN */
    double on_seabed_m;          /* unstretched length on the seabed (m) or NAN */
    double depth_m;              /* vertical rise of the suspended part (m) or NAN */
    double seabed_friction;      /* C_B (dimensionless) >= 0, default 0 */
    double axial_stiffness_n;    /* EA for stretch (N); NAN = the segment's axial_stiffness, else inextensible */
    int lower_end_near;          /* 0 (default): the far end of the segment is its lower end; 1: the near end */
} se_hanging;

/* A segment: inputs first (NAN = not given), then derived values filled by se_line_prepare. */
typedef struct se_segment {
    char *name;                    /* owned */
    double length_m;               /* unstretched length (m), > 0 */
    double mass_per_length_kg_m;   /* mu (kg/m), > 0, or NAN */
    se_speed_source speed_source;  /* which value defines the speed (derived: set by se_line_prepare) */
    double tension_n;              /* T (N) or NAN */
    double axial_stiffness_n;      /* EA (N) or NAN */
    double speed_given_m_s;        /* v (m/s) or NAN */
    double velocity_factor;        /* VF, 0 < VF <= 1, or NAN */
    double impedance_given;        /* explicit impedance (N s/m mechanical, ohm electrical) or NAN */
    double speed_uncertainty;      /* relative 1-sigma speed uncertainty (0.02 = 2 %), >= 0 */
    double speed_scale;            /* calibration factor on the derived speed, > 0, default 1 */
    double diameter_m;             /* hydrodynamic diameter D (m) for added mass in water, or NAN (in air) */
    double water_density_kg_m3;    /* rho_w (kg/m^3), default 1025 (seawater) */
    double added_mass_coefficient; /* C_a, default 1 (Bureau Veritas NR493) */
    double skin_loss_s05_per_m;    /* skin-effect loss K (s^0.5/m) of an electrical segment (skin.h:
                                      H(s) = exp(-K l sqrt(s))), 0 <= K <= SE_SKIN_LOSS_MAX (units.h);
                                      0 = none (the default, and the only value on a mechanical line).
                                      File key skin_loss: K or a datasheet figure (se_skin_loss_parse) */
    se_hanging hanging;
    se_feature *features;          /* owned [size: n_features], sorted by at_m by se_line_prepare */
    size_t n_features;
    unsigned src_line;             /* 1-based position of the segment in the file (0 if none) */
    unsigned src_column;

    /* derived (se_line_prepare) */
    double mu_eff_kg_m;            /* mu + C_a rho_w pi D^2 / 4 for transverse waves in water, else mu (kg/m); NAN if mu unknown */
    double speed_m_s;              /* uniform speed, or mean speed L / one_way_s of a hanging segment (m/s) */
    double speed_near_m_s;         /* local speed at the near end (m/s) */
    double speed_far_m_s;          /* local speed at the far end (m/s) */
    double impedance_near;         /* local impedance at the near end (N s/m or ohm), NAN if unknown */
    double impedance_far;          /* local impedance at the far end, NAN if unknown */
    double one_way_s;              /* one-way travel time through the segment (s) */
    double start_m;                /* distance of the near end from the sensor (m) */
    double start_round_trip_s;     /* round-trip time to the near end (s) */
    char *junction_name;           /* "<this> / <next>" for the junction at the far end (owned), NULL for the last */
    se_catenary *catenary;         /* solved catenary of a hanging segment (owned), else NULL */
} se_segment;

/* A whole line. */
typedef struct se_line {
    char *name;                /* free text from `line:` (owned), "" if not given */
    char *source_name;         /* file name used in messages (owned) */
    se_wave_kind wave;
    se_quantity quantity;      /* what the sensor measures */
    char *source_end_name;     /* termination word or number as written (owned), default "continuing" */
    double source_end_r;       /* source-end coefficient, observed convention (0 for continuing/matched) */
    char *end_name;            /* far-end termination as written (owned) */
    double end_r;              /* far-end coefficient, observed convention */
    se_segment *segments;      /* owned [size: n_segments] */
    size_t n_segments;
    size_t cap_segments;       /* allocated entries (internal) */

    /* derived (se_line_prepare) */
    int prepared;              /* 1 after a successful se_line_prepare */
    double length_m;           /* total length (m) */
    double round_trip_s;       /* total round trip to the far end (s) */
    se_distmap *distmap;       /* owned delay <-> distance map, one piece per segment */
} se_line;

/* Profile values at a point of the line. */
typedef struct se_line_point {
    size_t segment;         /* index of the segment */
    double distance_m;      /* from the sensor (m) */
    double round_trip_s;    /* round trip to the point (s) */
    double tension_n;       /* local tension (N); NAN if not a transverse/hanging quantity */
    double speed_m_s;       /* local speed (m/s) */
    double impedance;       /* local impedance (N s/m or ohm), NAN if unknown */
} se_line_point;

/* An event expected in the record. */
typedef struct se_expected_event {
    se_event_type type;
    const char *name;        /* borrowed from the line: junction name, feature name or "end" */
    const char *kind;        /* borrowed: "junction", the feature's kind, or the end's termination word */
    size_t segment;          /* segment containing it (junction: the nearer segment) */
    double distance_m;       /* from the sensor (m) */
    double distance_sigma_m; /* 1-sigma distance uncertainty (m): sqrt(sum (e_j l_j)^2), see distmap.h */
    double round_trip_s;     /* predicted delay (s) */
    double round_trip_sigma_s; /* 1-sigma delay uncertainty (s): sqrt(sum (e_j t_j)^2) */
    int has_reflection;      /* 0 if the coefficient is unknown (feature without reflection, missing impedance) */
    double reflection;       /* coefficient at the discontinuity, observed convention */
    double transmission;     /* two-way transmission through every interface in front: prod (1 - r_k^2) */
    double amplitude;        /* expected echo at the sensor relative to the incident pulse: reflection * transmission */
} se_expected_event;

/* A reflecting interface for a lattice (equal-travel-time) simulator. */
typedef struct se_line_interface {
    double one_way_s;    /* one-way time from the sensor (s) */
    double distance_m;   /* from the sensor (m) */
    double reflection;   /* coefficient, observed convention, going away from the sensor */
    size_t segment;      /* segment index */
    se_event_type type;  /* junction (also the steps of a hanging gradient), feature, or end */
} se_line_interface;

/* Result of a speed calibration. */
typedef struct se_calibration {
    double scale;               /* factor k on the speed(s): v_true = k v_line */
    double scale_sigma;         /* 1-sigma of k */
    double distance_m;          /* reference distance used (m) */
    double nominal_round_trip_s;/* round trip the line predicts to it before calibration (s) */
    size_t segment;             /* calibrated segment, or SE_LINE_ALL_SEGMENTS */
} se_calibration;

#define SE_LINE_ALL_SEGMENTS ((size_t)-1)

/* Defaults: seawater density (kg/m^3) and added-mass coefficient (Bureau Veritas NR493). */
#define SE_SEAWATER_DENSITY 1025.0
#define SE_ADDED_MASS_COEFFICIENT 1.0

/* Wave kind names "transverse", "longitudinal", "electrical". */
const char *se_wave_kind_name(se_wave_kind kind);
se_status se_wave_kind_parse(const char *text, se_wave_kind *kind, se_error *err);
/* 1 if the quantity can be measured on this kind of wave (voltage/current only electrical). */
int se_wave_quantity_compatible(se_wave_kind kind, se_quantity q);

/* Read and prepare a line file. NULL and err ("FILE:LINE:COLUMN: what") on any error. */
se_line *se_line_read(const char *path, se_error *err);
/* Same from a string; name_for_messages stands for the file name in messages (NULL: "<string>"). */
se_line *se_line_parse_string(const char *text, const char *name_for_messages, se_error *err);
/* Free a line and everything it owns (NULL accepted). */
void se_line_free(se_line *line);

/* Programmatic construction. An empty line: source end "continuing" (0), far end unset (set it
 * with se_line_set_end before se_line_prepare). name may be NULL. Free with se_line_free. */
se_line *se_line_create(const char *name, se_wave_kind wave, se_quantity quantity, se_error *err);
/* Fill a segment with defaults: every value NAN, uncertainty 0, scale 1, rho_w 1025, C_a 1,
 * skin loss 0. */
void se_segment_init(se_segment *seg);
/* Append a deep copy of seg (name and features copied); derived fields ignored. */
se_status se_line_add_segment(se_line *line, const se_segment *seg, se_error *err);
/* Set a termination from its word or number (se_termination_parse in the line's quantity). */
se_status se_line_set_source_end(se_line *line, const char *text, se_error *err);
se_status se_line_set_end(se_line *line, const char *text, se_error *err);
/* Check every value and compute speeds, impedances, catenaries and the distance map. */
se_status se_line_prepare(se_line *line, se_error *err);

/* Borrowed map of the prepared line (owned by the line). */
const se_distmap *se_line_distmap(const se_line *line);

/* Profile at distance_m (0 <= d <= length). Hanging segments vary along their length. */
se_status se_line_profile(const se_line *line, double distance_m, se_line_point *out, se_error *err);

/* Expected events sorted by distance: every junction, every feature, then the end. *events is
 * malloc'd (free with free()); names are borrowed from the line. Transmission losses use only
 * known coefficients; the smooth gradient of a hanging segment is taken as lossless (its two-way
 * product of (1 - r^2) tends to 1 as the steps shrink). */
se_status se_line_expected_events(const se_line *line, se_expected_event **events, size_t *n_events,
                                  se_error *err);

/* Interfaces for a lattice simulator: every junction, every feature with a known coefficient, the
 * steps of hanging segments and, last, the end (its reflection = end_r). A hanging segment with
 * varying impedance is cut into equal one-way-time steps of at most step_s (> 0; e.g. the
 * simulator's cell time): each step takes the impedance at its middle, and an interface carries
 * the coefficient between neighbouring steps. *out malloc'd (free()). The source-end coefficient
 * is line->source_end_r. */
se_status se_line_interfaces(const se_line *line, double step_s, se_line_interface **out, size_t *n_out,
                             se_error *err);

/* Distance (m) of a named event: a feature name, a junction name or "end". SE_ERR_NOTFOUND if none. */
se_status se_line_event_distance(const se_line *line, const char *name, double *distance_m, se_error *err);

/* Calibrate: a reflector at distance_m (sigma distance_sigma_m) measured at round_trip_s (sigma
 * round_trip_sigma_s). segment = SE_LINE_ALL_SEGMENTS scales every speed by k = t_line(d) / t_meas;
 * a segment index scales only that segment (k = t_seg(d) / (t_meas - t_others(d))), and then the
 * others' speed uncertainties enter sigma_k. Linear (first-order) error propagation. */
se_status se_line_calibrate(const se_line *line, double distance_m, double distance_sigma_m,
                            double round_trip_s, double round_trip_sigma_s, size_t segment,
                            se_calibration *out, se_error *err);

/* The line-file value that realises scale k on segment i: key "tension" (k^2 T), "axial_stiffness"
 * (k^2 EA), "speed" (k v), "velocity_factor" (k VF; SE_ERR_RANGE if above 1) or "speed_scale" for
 * hanging segments; *key is static text, *value is SI (N, m/s or dimensionless). */
se_status se_line_calibrated_value(const se_line *line, size_t segment, double k, const char **key,
                                   double *value, se_error *err);

/* Apply a scale k to segment i (or all) in place: multiplies speed_scale and re-prepares. */
se_status se_line_apply_scale(se_line *line, size_t segment, double k, se_error *err);

/* The ONE skin-loss constant for a locator or simulator that takes one K and one speed (skin.h
 * se_skin_config.k_s05_per_m): the length-weighted mean over the segments,
 *     K = sum_i K_i l_i / sum_i l_i   (s^0.5/m; 0 when no segment has a skin_loss).
 * Loss adds along the path (the H of segments in series multiply: exp(-sqrt(s) sum K_i l_i)), so
 * with the line's mean speed v = length_m / (round_trip_s / 2) as the one speed, this K gives the
 * far end's echo exactly its loss a = 2 sum K_i l_i; an echo at distance d gets
 * K 2 d instead of se_line_skin_path(d), exact where every segment has the same K.
 *   line         prepared (se_line_prepare); borrowed
 *   k_s05_per_m  [out] K, s^0.5/m; untouched on failure
 * Returns SE_OK or SE_ERR_ARG (NULL or not prepared). */
se_status se_line_skin_loss(const se_line *line, double *k_s05_per_m, se_error *err);

/* The exact skin loss of the round trip to distance_m and back, a = 2 integral_0^d K(x) dx
 * (s^0.5), the a of skin.h for an echo from d (segment by segment, unstretched lengths).
 *   distance_m   0 <= d <= line->length_m (a rounding excess of 1e-9 relative is clamped)
 *   a_sqrt_s     [out] a, s^0.5; untouched on failure
 * Returns SE_OK, SE_ERR_ARG (NULL or not prepared) or SE_ERR_RANGE (d outside the line). */
se_status se_line_skin_path(const se_line *line, double distance_m, double *a_sqrt_s, se_error *err);

#ifdef __cplusplus
}
#endif

#endif /* SE_LINE_H */
