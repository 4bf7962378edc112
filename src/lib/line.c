/* strandecho: the line model: segment speeds and impedances, hanging segments, distance map,
 * expected events, lattice interfaces and calibration. The YAML reader is line_parse.c. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/line.h"
#include "strandecho/units.h"

/* Nodes of a hanging transverse segment in the distance map: the suspended part is sampled with
 * quadratic spacing from its lower end (cubic at a free end, where t ~ sqrt(s)), the seabed part
 * evenly. Measured against direct integration at 20001 points: worst distance error 0.65 mm
 * (time 29 us of 18 s) on a 200 m free vertical chain, 0.06 mm on a 300 m leg chain with 150 m
 * on the seabed under friction, 0.015 mm on a 45 m tether. Reading and preparing the three-segment
 * fixture leg takes about 0.3 ms; its lattice interfaces at a 5 us step (741 185) about 0.5 s. */
#define SE_LINE_SUSPENDED_NODES 320
#define SE_LINE_SEABED_NODES 96
/* Most lattice steps one hanging segment may be cut into. */
#define SE_LINE_MAX_STEPS 10000000u
#define SE_LINE_PI 3.14159265358979323846

static const char *se_line_src(const se_line *line);
static se_status se_line_prepare_segment(se_line *line, size_t i, se_error *err);
static se_status se_line_hanging_nodes(const se_line *line, const se_segment *seg, double **s_out,
                                       double **t_out, size_t *n_out, se_error *err);
static double se_line_local_tension(const se_segment *seg, double sseg);
static double se_line_local_speed(const se_line *line, const se_segment *seg, double sseg);
static double se_line_local_impedance(const se_line *line, const se_segment *seg, double sseg);
static double se_line_reflection(const se_line *line, double z1, double z2, int *known);
static int se_line_feature_cmp(const void *a, const void *b);
static int se_line_interface_cmp(const void *a, const void *b);
static void se_line_clear_derived(se_line *line);
static int se_line_varies(const se_line *line, const se_segment *seg);
static se_status se_line_set_termination(se_line *line, const char *text, char **name, double *r,
                                         se_error *err);

const char *se_wave_kind_name(se_wave_kind kind)
{
    switch (kind) {
    case SE_WAVE_TRANSVERSE:
        return "transverse";
    case SE_WAVE_LONGITUDINAL:
        return "longitudinal";
    case SE_WAVE_ELECTRICAL:
        return "electrical";
    }
    return "unknown";
}

se_status se_wave_kind_parse(const char *text, se_wave_kind *kind, se_error *err)
{
    if (text == NULL || kind == NULL)
        return se_fail(err, SE_ERR_ARG, "wave kind: NULL argument");
    if (strcmp(text, "transverse") == 0)
        *kind = SE_WAVE_TRANSVERSE;
    else if (strcmp(text, "longitudinal") == 0 || strcmp(text, "axial") == 0)
        *kind = SE_WAVE_LONGITUDINAL;
    else if (strcmp(text, "electrical") == 0)
        *kind = SE_WAVE_ELECTRICAL;
    else
        return se_fail(err, SE_ERR_ARG, "unknown wave kind '%s' (transverse, longitudinal or electrical)", text);
    return SE_OK;
}

int se_wave_quantity_compatible(se_wave_kind kind, se_quantity q)
{
    int electrical_q = (q == SE_Q_VOLTAGE || q == SE_Q_CURRENT);
    return kind == SE_WAVE_ELECTRICAL ? electrical_q : !electrical_q;
}

static const char *se_line_src(const se_line *line)
{
    return (line->source_name != NULL && line->source_name[0] != '\0') ? line->source_name : "<line>";
}

void se_segment_init(se_segment *seg)
{
    if (seg == NULL)
        return;
    memset(seg, 0, sizeof *seg);
    seg->length_m = NAN;
    seg->mass_per_length_kg_m = NAN;
    seg->tension_n = NAN;
    seg->axial_stiffness_n = NAN;
    seg->speed_given_m_s = NAN;
    seg->velocity_factor = NAN;
    seg->impedance_given = NAN;
    seg->speed_uncertainty = 0.0;
    seg->speed_scale = 1.0;
    seg->diameter_m = NAN;
    seg->water_density_kg_m3 = SE_SEAWATER_DENSITY;
    seg->added_mass_coefficient = SE_ADDED_MASS_COEFFICIENT;
    seg->skin_loss_s05_per_m = 0.0;
    seg->hanging.weight_in_water_n_m = NAN;
    seg->hanging.top_tension_n = NAN;
    seg->hanging.horizontal_tension_n = NAN;
    seg->hanging.lower_vertical_n = NAN;
    seg->hanging.on_seabed_m = NAN;
    seg->hanging.depth_m = NAN;
    seg->hanging.seabed_friction = 0.0;
    seg->hanging.axial_stiffness_n = NAN;
    seg->mu_eff_kg_m = NAN;
    seg->impedance_near = NAN;
    seg->impedance_far = NAN;
}

se_line *se_line_create(const char *name, se_wave_kind wave, se_quantity quantity, se_error *err)
{
    se_line *line = se_calloc(1, sizeof *line, "line", err);
    if (line == NULL)
        return NULL;
    line->wave = wave;
    line->quantity = quantity;
    line->name = se_strdup(name != NULL ? name : "", err);
    line->source_name = se_strdup("<line>", err);
    line->source_end_name = se_strdup("continuing", err);
    line->end_name = se_strdup("unset", err);
    line->end_r = NAN;
    line->source_end_r = 0.0;
    if (line->name == NULL || line->source_name == NULL || line->source_end_name == NULL ||
        line->end_name == NULL) {
        se_line_free(line);
        return NULL;
    }
    return line;
}

static void se_line_clear_derived(se_line *line)
{
    size_t i;
    for (i = 0; i < line->n_segments; i++) {
        se_segment *seg = &line->segments[i];
        free(seg->junction_name);
        seg->junction_name = NULL;
        se_catenary_destroy(seg->catenary);
        seg->catenary = NULL;
    }
    se_distmap_destroy(line->distmap);
    line->distmap = NULL;
    line->prepared = 0;
}

void se_line_free(se_line *line)
{
    size_t i, k;
    if (line == NULL)
        return;
    se_line_clear_derived(line);
    for (i = 0; i < line->n_segments; i++) {
        se_segment *seg = &line->segments[i];
        free(seg->name);
        for (k = 0; k < seg->n_features; k++) {
            free(seg->features[k].name);
            free(seg->features[k].kind);
        }
        free(seg->features);
    }
    free(line->segments);
    free(line->name);
    free(line->source_name);
    free(line->source_end_name);
    free(line->end_name);
    free(line);
}

se_status se_line_add_segment(se_line *line, const se_segment *seg, se_error *err)
{
    se_segment *dst;
    size_t k;
    if (line == NULL || seg == NULL)
        return se_fail(err, SE_ERR_ARG, "line: NULL argument");
    if (line->n_segments == line->cap_segments) {
        size_t cap = line->cap_segments == 0 ? 4 : 2 * line->cap_segments, bytes;
        se_segment *grown;
        if (se_mul_size(cap, sizeof *grown, &bytes) != 0)
            return se_fail(err, SE_ERR_NOMEM, "line: too many segments");
        grown = realloc(line->segments, bytes);
        if (grown == NULL)
            return se_fail(err, SE_ERR_NOMEM, "line: cannot allocate %zu segments", cap);
        line->segments = grown;
        line->cap_segments = cap;
    }
    se_line_clear_derived(line);
    dst = &line->segments[line->n_segments];
    *dst = *seg;
    dst->junction_name = NULL;
    dst->catenary = NULL;
    dst->features = NULL;
    dst->n_features = 0;
    dst->name = se_strdup(seg->name != NULL ? seg->name : "", err);
    if (dst->name == NULL)
        return SE_ERR_NOMEM;
    if (seg->n_features > 0) {
        dst->features = se_calloc(seg->n_features, sizeof *dst->features, "features", err);
        if (dst->features == NULL) {
            free(dst->name);
            return SE_ERR_NOMEM;
        }
        for (k = 0; k < seg->n_features; k++) {
            const se_feature *f = &seg->features[k];
            se_feature *g = &dst->features[k];
            char gen[256];
            *g = *f;
            if (f->name == NULL || f->name[0] == '\0') {
                snprintf(gen, sizeof gen, "%s %s at %g m", dst->name, f->kind != NULL ? f->kind : "feature",
                         f->at_m);
                g->name = se_strdup(gen, err);
            } else {
                g->name = se_strdup(f->name, err);
            }
            g->kind = se_strdup(f->kind != NULL ? f->kind : "feature", err);
            dst->n_features = k + 1;
            if (g->name == NULL || g->kind == NULL) {
                line->n_segments++; /* so se_line_free releases the partial copy */
                return SE_ERR_NOMEM;
            }
        }
    }
    line->n_segments++;
    return SE_OK;
}

static se_status se_line_set_termination(se_line *line, const char *text, char **name, double *r,
                                         se_error *err)
{
    double v;
    char *copy;
    se_status st;
    if (line == NULL || text == NULL)
        return se_fail(err, SE_ERR_ARG, "line: NULL termination");
    st = se_termination_parse(text, line->quantity, &v, err);
    if (st != SE_OK)
        return st;
    if (!(fabs(v) <= 1.0))
        return se_fail(err, SE_ERR_RANGE, "termination coefficient %g is impossible (|r| > 1)", v);
    copy = se_strdup(text, err);
    if (copy == NULL)
        return SE_ERR_NOMEM;
    free(*name);
    *name = copy;
    *r = v;
    line->prepared = 0;
    return SE_OK;
}

se_status se_line_set_source_end(se_line *line, const char *text, se_error *err)
{
    if (line == NULL)
        return se_fail(err, SE_ERR_ARG, "line: NULL argument");
    return se_line_set_termination(line, text, &line->source_end_name, &line->source_end_r, err);
}

se_status se_line_set_end(se_line *line, const char *text, se_error *err)
{
    if (line == NULL)
        return se_fail(err, SE_ERR_ARG, "line: NULL argument");
    return se_line_set_termination(line, text, &line->end_name, &line->end_r, err);
}

static int se_line_feature_cmp(const void *a, const void *b)
{
    const se_feature *fa = a, *fb = b;
    return (fa->at_m > fb->at_m) - (fa->at_m < fb->at_m);
}

/* A transverse hanging segment is the only one whose speed and impedance vary along it. */
static int se_line_varies(const se_line *line, const se_segment *seg)
{
    return seg->catenary != NULL && line->wave == SE_WAVE_TRANSVERSE;
}

/* Tension at sseg metres from the segment's near end (N), NAN if the segment has no tension. */
static double se_line_local_tension(const se_segment *seg, double sseg)
{
    if (seg->catenary != NULL) {
        double sc = seg->hanging.lower_end_near ? sseg : seg->length_m - sseg;
        return se_catenary_tension(seg->catenary, sc);
    }
    return seg->tension_n;
}

static double se_line_local_speed(const se_line *line, const se_segment *seg, double sseg)
{
    if (se_line_varies(line, seg))
        return sqrt(se_line_local_tension(seg, sseg) / seg->mu_eff_kg_m) * seg->speed_scale;
    return seg->speed_m_s;
}

/* Z = mu_eff v for mechanical lines (mass trusted, so a speed scale scales Z too); explicit wins. */
static double se_line_local_impedance(const se_line *line, const se_segment *seg, double sseg)
{
    if (!isnan(seg->impedance_given))
        return seg->impedance_given;
    if (line->wave == SE_WAVE_ELECTRICAL || isnan(seg->mu_eff_kg_m))
        return NAN;
    return seg->mu_eff_kg_m * se_line_local_speed(line, seg, sseg);
}

/* Observed coefficient from Z1 into Z2: sign(q) (Z1 - Z2)/(Z1 + Z2). */
static double se_line_reflection(const se_line *line, double z1, double z2, int *known)
{
    if (isnan(z1) || isnan(z2) || !(z1 + z2 > 0.0)) {
        *known = 0;
        return NAN;
    }
    *known = 1;
    return (double)se_quantity_sign(line->quantity) * (z1 - z2) / (z1 + z2) + 0.0; /* + 0.0: no -0 */
}

/* Cumulative two-way time nodes of a transverse hanging segment, from its near end. */
static se_status se_line_hanging_nodes(const se_line *line, const se_segment *seg, double **s_out,
                                       double **t_out, size_t *n_out, se_error *err)
{
    se_catenary_info info;
    size_t nb, ns, n, k, m = 0;
    int free_end;
    double *c, *s = NULL, *t = NULL, *dt = NULL;
    se_status st = SE_OK;
    (void)line;
    se_catenary_get_info(seg->catenary, &info);
    nb = info.seabed_length_m > 0.0 ? SE_LINE_SEABED_NODES : 0;
    ns = SE_LINE_SUSPENDED_NODES;
    n = nb + ns + 1;
    c = se_calloc(n, sizeof *c, "hanging nodes", err);
    s = se_calloc(n, sizeof *s, "hanging nodes", err);
    t = se_calloc(n, sizeof *t, "hanging nodes", err);
    dt = se_calloc(n, sizeof *dt, "hanging nodes", err);
    if (c == NULL || s == NULL || t == NULL || dt == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    /* catenary arc lengths from the lower end, ascending */
    for (k = 0; k < nb; k++)
        c[m++] = info.seabed_length_m * (double)k / (double)nb;
    /* a free lower end (T -> 0, t ~ sqrt(s)) gets cubic spacing, otherwise quadratic */
    free_end = info.seabed_length_m == 0.0 && se_catenary_tension(seg->catenary, 0.0) <= 0.0;
    for (k = 0; k <= ns; k++) {
        double q = (double)k / (double)ns;
        c[m++] = info.seabed_length_m + info.suspended_length_m * q * q * (free_end ? q : 1.0);
    }
    c[m - 1] = info.length_m;
    for (k = 1; k < m; k++) {
        st = se_catenary_transverse_time(seg->catenary, seg->mu_eff_kg_m, c[k - 1], c[k], &dt[k], err);
        if (st != SE_OK) {
            char msg[SE_ERROR_MESSAGE_SIZE];
            snprintf(msg, sizeof msg, "%s", err != NULL ? err->message : "");
            se_fail(err, st, "%s:%u:%u: segment '%s': %s", se_line_src(line), seg->src_line, seg->src_column,
                    seg->name, msg);
            goto done;
        }
        dt[k] /= seg->speed_scale;
    }
    /* to segment coordinates from the near end, two-way times */
    for (k = 0; k < m; k++) {
        if (seg->hanging.lower_end_near) {
            s[k] = c[k];
            t[k] = k == 0 ? 0.0 : t[k - 1] + 2.0 * dt[k];
        } else {
            s[k] = seg->length_m - c[m - 1 - k];
            t[k] = k == 0 ? 0.0 : t[k - 1] + 2.0 * dt[m - k];
        }
    }
    s[0] = 0.0;
    *n_out = m;
    *s_out = s;
    *t_out = t;
    s = NULL;
    t = NULL;
done:
    free(c);
    free(s);
    free(t);
    free(dt);
    return st;
}

static se_status se_line_prepare_segment(se_line *line, size_t i, se_error *err)
{
    se_segment *seg = &line->segments[i];
    const char *src = se_line_src(line);
    unsigned ln = seg->src_line, col = seg->src_column;
    int has_t = !isnan(seg->tension_n), has_ea = !isnan(seg->axial_stiffness_n);
    int has_v = !isnan(seg->speed_given_m_s), has_vf = !isnan(seg->velocity_factor);
    int has_mu = !isnan(seg->mass_per_length_kg_m), hang = seg->hanging.enabled;
    int ndef = 0;
    size_t k;

#define SE_SEGFAIL(code, ...)                                                                            \
    do {                                                                                                 \
        char se_m_[SE_ERROR_MESSAGE_SIZE];                                                               \
        snprintf(se_m_, sizeof se_m_, __VA_ARGS__);                                                      \
        return se_fail(err, code, "%s:%u:%u: segment '%s': %s", src, ln, col, seg->name, se_m_);         \
    } while (0)

    if (!(seg->length_m > 0.0) || !isfinite(seg->length_m))
        SE_SEGFAIL(SE_ERR_RANGE, "length must be positive (got %g m)", seg->length_m);
    if (has_mu && !(seg->mass_per_length_kg_m > 0.0))
        SE_SEGFAIL(SE_ERR_RANGE, "mass_per_length must be positive (got %g kg/m)", seg->mass_per_length_kg_m);
    if (has_t && !(seg->tension_n > 0.0))
        SE_SEGFAIL(SE_ERR_RANGE, "tension must be positive (got %g N)", seg->tension_n);
    if (has_ea && !(seg->axial_stiffness_n > 0.0))
        SE_SEGFAIL(SE_ERR_RANGE, "axial_stiffness must be positive (got %g N)", seg->axial_stiffness_n);
    if (has_v && !(seg->speed_given_m_s > 0.0))
        SE_SEGFAIL(SE_ERR_RANGE, "speed must be positive (got %g m/s)", seg->speed_given_m_s);
    if (has_v && seg->speed_given_m_s > SE_SPEED_OF_LIGHT)
        SE_SEGFAIL(SE_ERR_RANGE, "speed %g m/s is beyond the speed of light", seg->speed_given_m_s);
    if (has_vf && !(seg->velocity_factor > 0.0 && seg->velocity_factor <= 1.0))
        SE_SEGFAIL(SE_ERR_RANGE, "velocity_factor %g must be in (0, 1]", seg->velocity_factor);
    if (!isnan(seg->impedance_given) && !(seg->impedance_given > 0.0))
        SE_SEGFAIL(SE_ERR_RANGE, "impedance must be positive (got %g)", seg->impedance_given);
    if (!(seg->speed_uncertainty >= 0.0) || !isfinite(seg->speed_uncertainty) || seg->speed_uncertainty >= 1.0)
        SE_SEGFAIL(SE_ERR_RANGE, "speed_uncertainty %g %% must be in [0, 100) %%", 100.0 * seg->speed_uncertainty);
    if (!(seg->speed_scale > 0.0) || !isfinite(seg->speed_scale))
        SE_SEGFAIL(SE_ERR_RANGE, "speed_scale must be positive (got %g)", seg->speed_scale);
    if (!isnan(seg->diameter_m) && !(seg->diameter_m > 0.0))
        SE_SEGFAIL(SE_ERR_RANGE, "diameter must be positive (got %g m)", seg->diameter_m);
    if (!(seg->water_density_kg_m3 > 0.0))
        SE_SEGFAIL(SE_ERR_RANGE, "water_density must be positive (got %g kg/m3)", seg->water_density_kg_m3);
    if (!(seg->added_mass_coefficient >= 0.0))
        SE_SEGFAIL(SE_ERR_RANGE, "added_mass_coefficient must be >= 0 (got %g)", seg->added_mass_coefficient);
    if (!(seg->skin_loss_s05_per_m >= 0.0 && seg->skin_loss_s05_per_m <= SE_SKIN_LOSS_MAX))
        SE_SEGFAIL(SE_ERR_RANGE, "skin_loss K = %g s^0.5/m must be in [0, %g]", seg->skin_loss_s05_per_m,
                   SE_SKIN_LOSS_MAX);
    if (seg->skin_loss_s05_per_m > 0.0 && line->wave != SE_WAVE_ELECTRICAL)
        SE_SEGFAIL(SE_ERR_ARG, "skin_loss applies to electrical segments (a cable), not to a %s line",
                   se_wave_kind_name(line->wave));

    switch (line->wave) {
    case SE_WAVE_TRANSVERSE:
        if (has_vf)
            SE_SEGFAIL(SE_ERR_ARG, "velocity_factor applies to electrical lines, not to a transverse line");
        ndef = has_t + has_v + hang;
        break;
    case SE_WAVE_LONGITUDINAL:
        if (has_vf)
            SE_SEGFAIL(SE_ERR_ARG, "velocity_factor applies to electrical lines, not to a longitudinal line");
        if (has_t)
            SE_SEGFAIL(SE_ERR_ARG, "tension sets no longitudinal speed: give axial_stiffness or speed");
        ndef = has_ea + has_v;
        break;
    case SE_WAVE_ELECTRICAL:
        if (has_t || has_ea || has_mu || hang || !isnan(seg->diameter_m))
            SE_SEGFAIL(SE_ERR_ARG, "tension, axial_stiffness, mass_per_length, diameter and hanging are "
                                   "for mechanical lines, not an electrical one");
        ndef = has_vf + has_v;
        break;
    }
    if (ndef == 0)
        SE_SEGFAIL(SE_ERR_ARG, "no speed: give %s", line->wave == SE_WAVE_TRANSVERSE ? "tension, speed or hanging"
                                                    : line->wave == SE_WAVE_LONGITUDINAL ? "axial_stiffness or speed"
                                                                                          : "velocity_factor or speed");
    if (ndef > 1)
        SE_SEGFAIL(SE_ERR_ARG, "conflicting speed definitions: give only one of %s",
                   line->wave == SE_WAVE_TRANSVERSE ? "tension, speed or hanging"
                   : line->wave == SE_WAVE_LONGITUDINAL ? "axial_stiffness or speed"
                                                         : "velocity_factor or speed");
    if ((has_t || (has_ea && line->wave == SE_WAVE_LONGITUDINAL) || hang) && !has_mu)
        SE_SEGFAIL(SE_ERR_ARG, "mass_per_length is required with %s",
                   hang ? "hanging" : has_t ? "tension" : "axial_stiffness");

    /* added mass for transverse motion in water: mu + C_a rho_w pi D^2 / 4 (Bureau Veritas NR493) */
    seg->mu_eff_kg_m = seg->mass_per_length_kg_m;
    if (line->wave == SE_WAVE_TRANSVERSE && has_mu && !isnan(seg->diameter_m))
        seg->mu_eff_kg_m += seg->added_mass_coefficient * seg->water_density_kg_m3 * SE_LINE_PI * seg->diameter_m *
                            seg->diameter_m / 4.0;

    if (hang) {
        se_catenary_config cfg;
        const se_hanging *h = &seg->hanging;
        se_catenary_config_init(&cfg);
        cfg.length_m = seg->length_m;
        cfg.weight_n_m = h->weight_in_water_n_m;
        cfg.ea_n = !isnan(h->axial_stiffness_n) ? h->axial_stiffness_n
                   : has_ea                     ? seg->axial_stiffness_n
                                                : INFINITY;
        cfg.horizontal_tension_n = h->horizontal_tension_n;
        cfg.top_tension_n = h->top_tension_n;
        cfg.lower_vertical_n = h->lower_vertical_n;
        cfg.seabed_length_m = h->on_seabed_m;
        cfg.depth_m = h->depth_m;
        cfg.seabed_friction = h->seabed_friction;
        seg->catenary = se_catenary_create(&cfg, err);
        if (seg->catenary == NULL) {
            char msg[SE_ERROR_MESSAGE_SIZE];
            snprintf(msg, sizeof msg, "%s", err != NULL ? err->message : "bad hanging block");
            SE_SEGFAIL(err != NULL ? err->code : SE_ERR_ARG, "hanging: %.400s", msg);
        }
    }

    if (line->wave == SE_WAVE_TRANSVERSE && hang) {
        seg->speed_source = SE_SPEED_HANGING;
        seg->speed_m_s = NAN; /* mean speed set once the travel time is known */
    } else if (has_v) {
        seg->speed_source = SE_SPEED_GIVEN;
        seg->speed_m_s = seg->speed_given_m_s * seg->speed_scale;
    } else if (has_t) {
        seg->speed_source = SE_SPEED_TENSION;
        seg->speed_m_s = sqrt(seg->tension_n / seg->mu_eff_kg_m) * seg->speed_scale; /* v = sqrt(T/mu) */
    } else if (has_ea) {
        seg->speed_source = SE_SPEED_AXIAL_STIFFNESS;
        seg->speed_m_s = sqrt(seg->axial_stiffness_n / seg->mass_per_length_kg_m) * seg->speed_scale;
    } else {
        seg->speed_source = SE_SPEED_VELOCITY_FACTOR;
        seg->speed_m_s = seg->velocity_factor * SE_SPEED_OF_LIGHT * seg->speed_scale; /* v = VF c */
    }
    if (!isnan(seg->speed_m_s) && seg->speed_m_s > SE_SPEED_OF_LIGHT)
        SE_SEGFAIL(SE_ERR_RANGE, "speed %g m/s (after speed_scale %g) is beyond the speed of light",
                   seg->speed_m_s, seg->speed_scale);

    for (k = 0; k < seg->n_features; k++) {
        const se_feature *f = &seg->features[k];
        if (!(f->at_m >= 0.0) || !(f->at_m <= seg->length_m))
            return se_fail(err, SE_ERR_RANGE, "%s:%u:%u: feature '%s' at %g m is beyond its segment '%s' "
                                              "(0 to %g m)", src, f->src_line, f->src_column, f->name,
                           f->at_m, seg->name, seg->length_m);
        if (f->has_reflection && !(fabs(f->reflection) <= 1.0))
            return se_fail(err, SE_ERR_RANGE, "%s:%u:%u: feature '%s' reflection %g is impossible (|r| > 1)",
                           src, f->src_line, f->src_column, f->name, f->reflection);
    }
    if (seg->n_features > 1)
        qsort(seg->features, seg->n_features, sizeof *seg->features, se_line_feature_cmp);
#undef SE_SEGFAIL
    return SE_OK;
}

se_status se_line_prepare(se_line *line, se_error *err)
{
    se_distmap_piece *pieces = NULL;
    double **ns = NULL, **nt = NULL;
    double start = 0.0, rt = 0.0;
    size_t i;
    se_status st = SE_OK;
    if (line == NULL)
        return se_fail(err, SE_ERR_ARG, "line: NULL argument");
    se_line_clear_derived(line);
    if (line->n_segments == 0)
        return se_fail(err, SE_ERR_ARG, "%s: the line has no segments", se_line_src(line));
    if (!se_wave_quantity_compatible(line->wave, line->quantity))
        return se_fail(err, SE_ERR_ARG, "%s: a %s line cannot carry the measured quantity (voltage and current "
                                        "are electrical, mechanical quantities are not)",
                       se_line_src(line), se_wave_kind_name(line->wave));
    if (isnan(line->end_r))
        return se_fail(err, SE_ERR_ARG, "%s: the far end is not set", se_line_src(line));
    pieces = se_calloc(line->n_segments, sizeof *pieces, "distance map pieces", err);
    ns = se_calloc(line->n_segments, sizeof *ns, "distance map nodes", err);
    nt = se_calloc(line->n_segments, sizeof *nt, "distance map nodes", err);
    if (pieces == NULL || ns == NULL || nt == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    for (i = 0; i < line->n_segments; i++) {
        se_segment *seg = &line->segments[i];
        size_t n = 2;
        st = se_line_prepare_segment(line, i, err);
        if (st != SE_OK)
            goto done;
        if (se_line_varies(line, seg)) {
            st = se_line_hanging_nodes(line, seg, &ns[i], &nt[i], &n, err);
            if (st != SE_OK)
                goto done;
        } else {
            ns[i] = se_calloc(2, sizeof(double), "distance map nodes", err);
            nt[i] = se_calloc(2, sizeof(double), "distance map nodes", err);
            if (ns[i] == NULL || nt[i] == NULL) {
                st = SE_ERR_NOMEM;
                goto done;
            }
            ns[i][1] = seg->length_m;
            nt[i][1] = 2.0 * seg->length_m / seg->speed_m_s;
        }
        pieces[i].n = n;
        pieces[i].s = ns[i];
        pieces[i].t = nt[i];
        pieces[i].speed_uncertainty = seg->speed_uncertainty;
        seg->one_way_s = nt[i][n - 1] / 2.0;
        if (seg->speed_source == SE_SPEED_HANGING)
            seg->speed_m_s = seg->length_m / seg->one_way_s;
        seg->speed_near_m_s = se_line_local_speed(line, seg, 0.0);
        seg->speed_far_m_s = se_line_local_speed(line, seg, seg->length_m);
        seg->impedance_near = se_line_local_impedance(line, seg, 0.0);
        seg->impedance_far = se_line_local_impedance(line, seg, seg->length_m);
        seg->start_m = start;
        seg->start_round_trip_s = rt;
        start += seg->length_m;
        rt += nt[i][n - 1];
        if (i + 1 < line->n_segments) {
            size_t len = strlen(seg->name) + strlen(line->segments[i + 1].name) + 4;
            seg->junction_name = se_calloc(len, 1, "junction name", err);
            if (seg->junction_name == NULL) {
                st = SE_ERR_NOMEM;
                goto done;
            }
            snprintf(seg->junction_name, len, "%s / %s", seg->name, line->segments[i + 1].name);
        }
    }
    line->distmap = se_distmap_create(pieces, line->n_segments, err);
    if (line->distmap == NULL) {
        st = err != NULL ? err->code : SE_ERR_NUMERIC;
        goto done;
    }
    line->length_m = start;
    line->round_trip_s = rt;
    line->prepared = 1;
done:
    if (ns != NULL)
        for (i = 0; i < line->n_segments; i++)
            free(ns[i]);
    if (nt != NULL)
        for (i = 0; i < line->n_segments; i++)
            free(nt[i]);
    free(ns);
    free(nt);
    free(pieces);
    if (st != SE_OK)
        se_line_clear_derived(line);
    return st;
}

const se_distmap *se_line_distmap(const se_line *line)
{
    return (line != NULL && line->prepared) ? line->distmap : NULL;
}

se_status se_line_profile(const se_line *line, double d, se_line_point *out, se_error *err)
{
    const se_segment *seg;
    size_t i;
    double sseg;
    se_status st;
    if (line == NULL || out == NULL || !line->prepared)
        return se_fail(err, SE_ERR_ARG, "line profile: NULL or unprepared line");
    if (!(d >= 0.0) || !(d <= line->length_m))
        return se_fail(err, SE_ERR_RANGE, "line profile: distance %g m outside the line (0 to %g m)", d,
                       line->length_m);
    i = se_distmap_piece_at(line->distmap, d);
    seg = &line->segments[i];
    sseg = fmin(fmax(d - seg->start_m, 0.0), seg->length_m);
    out->segment = i;
    out->distance_m = d;
    st = se_distmap_time(line->distmap, d, &out->round_trip_s, err);
    if (st != SE_OK)
        return st;
    out->tension_n = line->wave == SE_WAVE_ELECTRICAL ? NAN : se_line_local_tension(seg, sseg);
    out->speed_m_s = se_line_local_speed(line, seg, sseg);
    out->impedance = se_line_local_impedance(line, seg, sseg);
    return SE_OK;
}

se_status se_line_expected_events(const se_line *line, se_expected_event **events, size_t *n_events,
                                  se_error *err)
{
    size_t n = 1, i, k, m = 0;
    se_expected_event *ev;
    double trans = 1.0;
    if (line == NULL || events == NULL || n_events == NULL || !line->prepared)
        return se_fail(err, SE_ERR_ARG, "expected events: NULL or unprepared line");
    for (i = 0; i < line->n_segments; i++)
        n += line->segments[i].n_features + (i + 1 < line->n_segments);
    ev = se_calloc(n, sizeof *ev, "expected events", err);
    if (ev == NULL)
        return SE_ERR_NOMEM;
    for (i = 0; i < line->n_segments; i++) {
        const se_segment *seg = &line->segments[i];
        for (k = 0; k < seg->n_features; k++) {
            const se_feature *f = &seg->features[k];
            se_expected_event *e = &ev[m++];
            e->type = SE_EVENT_FEATURE;
            e->name = f->name;
            e->kind = f->kind;
            e->segment = i;
            e->distance_m = seg->start_m + f->at_m;
            e->has_reflection = f->has_reflection;
            e->reflection = f->has_reflection ? f->reflection : NAN;
        }
        if (i + 1 < line->n_segments) {
            se_expected_event *e = &ev[m++];
            e->type = SE_EVENT_JUNCTION;
            e->name = seg->junction_name;
            e->kind = "junction";
            e->segment = i;
            e->distance_m = seg->start_m + seg->length_m;
            e->reflection = se_line_reflection(line, seg->impedance_far, line->segments[i + 1].impedance_near,
                                               &e->has_reflection);
        }
    }
    ev[m].type = SE_EVENT_END;
    ev[m].name = "end";
    ev[m].kind = line->end_name;
    ev[m].segment = line->n_segments - 1;
    ev[m].distance_m = line->length_m;
    ev[m].has_reflection = 1;
    ev[m].reflection = line->end_r;
    m++;
    /* already in distance order: features sorted inside their segment, junction after them */
    for (i = 0; i < m; i++) {
        se_expected_event *e = &ev[i];
        se_status st = se_distmap_time(line->distmap, e->distance_m, &e->round_trip_s, err);
        if (st == SE_OK)
            st = se_distmap_time_sigma(line->distmap, e->distance_m, &e->round_trip_sigma_s, err);
        if (st == SE_OK)
            st = se_distmap_distance_sigma(line->distmap, e->round_trip_s, &e->distance_sigma_m, err);
        if (st != SE_OK) {
            free(ev);
            return st;
        }
        /* the echo crosses every interface in front twice: (1 + r)(1 - r) = 1 - r^2 in either convention */
        e->transmission = trans;
        e->amplitude = e->has_reflection ? e->reflection * trans : NAN;
        if (e->has_reflection)
            trans *= 1.0 - e->reflection * e->reflection;
    }
    *events = ev;
    *n_events = m;
    return SE_OK;
}

static int se_line_interface_cmp(const void *a, const void *b)
{
    const se_line_interface *x = a, *y = b;
    if (x->one_way_s != y->one_way_s)
        return (x->one_way_s > y->one_way_s) - (x->one_way_s < y->one_way_s);
    return ((int)x->type > (int)y->type) - ((int)x->type < (int)y->type);
}

se_status se_line_interfaces(const se_line *line, double step_s, se_line_interface **out, size_t *n_out,
                             se_error *err)
{
    size_t i, k, n = 1, m = 0, *steps = NULL;
    double *zfirst = NULL, *zlast = NULL;
    se_line_interface *itf = NULL;
    se_status st = SE_OK;
    if (line == NULL || out == NULL || n_out == NULL || !line->prepared)
        return se_fail(err, SE_ERR_ARG, "interfaces: NULL or unprepared line");
    if (!(step_s > 0.0) || !isfinite(step_s))
        return se_fail(err, SE_ERR_RANGE, "interfaces: step must be positive (got %g s)", step_s);
    steps = se_calloc(line->n_segments, sizeof *steps, "interfaces", err);
    zfirst = se_calloc(line->n_segments, sizeof *zfirst, "interfaces", err);
    zlast = se_calloc(line->n_segments, sizeof *zlast, "interfaces", err);
    if (steps == NULL || zfirst == NULL || zlast == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    for (i = 0; i < line->n_segments; i++) {
        const se_segment *seg = &line->segments[i];
        steps[i] = 1;
        if (se_line_varies(line, seg)) {
            double ns = ceil(seg->one_way_s / step_s);
            if (ns > (double)SE_LINE_MAX_STEPS) {
                st = se_fail(err, SE_ERR_RANGE, "interfaces: step %g s cuts segment '%s' into more than %u steps",
                             step_s, seg->name, SE_LINE_MAX_STEPS);
                goto done;
            }
            steps[i] = ns < 1.0 ? 1 : (size_t)ns;
        }
        n += seg->n_features + steps[i]; /* steps - 1 inner interfaces + 1 junction */
    }
    itf = se_calloc(n, sizeof *itf, "interfaces", err);
    if (itf == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    for (i = 0; i < line->n_segments; i++) {
        const se_segment *seg = &line->segments[i];
        double t0 = seg->start_round_trip_s / 2.0, zprev = NAN;
        for (k = 0; k < seg->n_features; k++) {
            const se_feature *f = &seg->features[k];
            double rt;
            if (!f->has_reflection)
                continue; /* unknown coefficient: the simulator sees nothing there */
            st = se_distmap_time(line->distmap, seg->start_m + f->at_m, &rt, err);
            if (st != SE_OK)
                goto done;
            itf[m].one_way_s = rt / 2.0;
            itf[m].distance_m = seg->start_m + f->at_m;
            itf[m].reflection = f->reflection;
            itf[m].segment = i;
            itf[m].type = SE_EVENT_FEATURE;
            m++;
        }
        if (steps[i] == 1 && !se_line_varies(line, seg)) {
            zfirst[i] = zlast[i] = se_line_local_impedance(line, seg, 0.0);
            continue;
        }
        /* equal one-way-time steps; each takes Z at its middle, interfaces between neighbours */
        for (k = 0; k < steps[i]; k++) {
            double tm = t0 + seg->one_way_s * ((double)k + 0.5) / (double)steps[i], d, z;
            se_line_point pt;
            st = se_distmap_distance(line->distmap, 2.0 * tm, &d, err);
            if (st == SE_OK)
                st = se_line_profile(line, fmin(d, line->length_m), &pt, err);
            if (st != SE_OK)
                goto done;
            z = pt.impedance;
            if (k == 0) {
                zfirst[i] = z;
            } else {
                int known;
                double tb = t0 + seg->one_way_s * (double)k / (double)steps[i], db;
                double r = se_line_reflection(line, zprev, z, &known);
                st = se_distmap_distance(line->distmap, 2.0 * tb, &db, err);
                if (st != SE_OK)
                    goto done;
                if (known) {
                    itf[m].one_way_s = tb;
                    itf[m].distance_m = db;
                    itf[m].reflection = r;
                    itf[m].segment = i;
                    itf[m].type = SE_EVENT_JUNCTION;
                    m++;
                }
            }
            zprev = z;
        }
        zlast[i] = zprev;
    }
    for (i = 0; i + 1 < line->n_segments; i++) {
        int known;
        double r = se_line_reflection(line, zlast[i], zfirst[i + 1], &known);
        if (!known)
            continue;
        itf[m].one_way_s = line->segments[i + 1].start_round_trip_s / 2.0;
        itf[m].distance_m = line->segments[i + 1].start_m;
        itf[m].reflection = r;
        itf[m].segment = i;
        itf[m].type = SE_EVENT_JUNCTION;
        m++;
    }
    qsort(itf, m, sizeof *itf, se_line_interface_cmp);
    itf[m].one_way_s = line->round_trip_s / 2.0;
    itf[m].distance_m = line->length_m;
    itf[m].reflection = line->end_r;
    itf[m].segment = line->n_segments - 1;
    itf[m].type = SE_EVENT_END;
    m++;
    *out = itf;
    *n_out = m;
    itf = NULL;
done:
    free(itf);
    free(steps);
    free(zfirst);
    free(zlast);
    return st;
}

se_status se_line_event_distance(const se_line *line, const char *name, double *d, se_error *err)
{
    size_t i, k;
    if (line == NULL || name == NULL || d == NULL || !line->prepared)
        return se_fail(err, SE_ERR_ARG, "event distance: NULL or unprepared line");
    if (strcmp(name, "end") == 0) {
        *d = line->length_m;
        return SE_OK;
    }
    for (i = 0; i < line->n_segments; i++) {
        const se_segment *seg = &line->segments[i];
        for (k = 0; k < seg->n_features; k++)
            if (strcmp(seg->features[k].name, name) == 0) {
                *d = seg->start_m + seg->features[k].at_m;
                return SE_OK;
            }
        if (seg->junction_name != NULL && strcmp(seg->junction_name, name) == 0) {
            *d = seg->start_m + seg->length_m;
            return SE_OK;
        }
    }
    return se_fail(err, SE_ERR_NOTFOUND, "%s: no feature, junction or end named '%s'", se_line_src(line), name);
}

se_status se_line_calibrate(const se_line *line, double d, double sd, double tm, double stm, size_t segment,
                            se_calibration *out, se_error *err)
{
    double tnom, v, dtdd, k, var;
    size_t i, at;
    se_status st;
    if (line == NULL || out == NULL || !line->prepared)
        return se_fail(err, SE_ERR_ARG, "calibrate: NULL or unprepared line");
    if (!(d > 0.0) || !(d <= line->length_m * (1.0 + 1e-12)))
        return se_fail(err, SE_ERR_RANGE, "calibrate: known distance %g m must be within the line (0, %g] m", d,
                       line->length_m);
    if (!(tm > 0.0) || !isfinite(tm))
        return se_fail(err, SE_ERR_RANGE, "calibrate: measured round trip %g s must be positive", tm);
    if (!(sd >= 0.0) || !(stm >= 0.0))
        return se_fail(err, SE_ERR_RANGE, "calibrate: uncertainties must be >= 0");
    if (segment != SE_LINE_ALL_SEGMENTS && segment >= line->n_segments)
        return se_fail(err, SE_ERR_RANGE, "calibrate: segment %zu does not exist (%zu segments)", segment,
                       line->n_segments);
    d = fmin(d, line->length_m);
    st = se_distmap_time(line->distmap, d, &tnom, err);
    if (st == SE_OK)
        st = se_distmap_speed(line->distmap, d, &v, err);
    if (st != SE_OK)
        return st;
    dtdd = 2.0 / v;
    at = se_distmap_piece_at(line->distmap, d);
    if (segment == SE_LINE_ALL_SEGMENTS) {
        /* every travel time scales as 1/k: k = t_line(d) / t_meas */
        k = tnom / tm;
        var = (k * stm / tm) * (k * stm / tm) + (dtdd * sd / tm) * (dtdd * sd / tm);
    } else {
        const se_segment *seg = &line->segments[segment];
        double tj, to, den, dk;
        if (seg->start_m >= d)
            return se_fail(err, SE_ERR_RANGE, "calibrate: the reference at %g m lies before segment '%s' (from %g m)",
                           d, seg->name, seg->start_m);
        tj = (at == segment ? tnom : seg->start_round_trip_s + 2.0 * seg->one_way_s) - seg->start_round_trip_s;
        to = tnom - tj;
        den = tm - to;
        if (!(den > 0.0))
            return se_fail(err, SE_ERR_RANGE, "calibrate: the measured %g s is shorter than the %g s the other "
                                              "segments take", tm, to);
        k = tj / den;
        dk = (at == segment ? dtdd : k * dtdd) / den; /* dk/dd */
        var = (k * stm / den) * (k * stm / den) + (dk * sd) * (dk * sd);
        for (i = 0; i <= at; i++) {
            const se_segment *o = &line->segments[i];
            double ti;
            if (i == segment)
                continue;
            ti = (i == at ? tnom - o->start_round_trip_s : 2.0 * o->one_way_s);
            var += (k * ti * o->speed_uncertainty / den) * (k * ti * o->speed_uncertainty / den);
        }
    }
    out->scale = k;
    out->scale_sigma = sqrt(var);
    out->distance_m = d;
    out->nominal_round_trip_s = tnom;
    out->segment = segment;
    return SE_OK;
}

se_status se_line_calibrated_value(const se_line *line, size_t segment, double k, const char **key,
                                   double *value, se_error *err)
{
    const se_segment *seg;
    if (line == NULL || key == NULL || value == NULL || !line->prepared || segment >= line->n_segments)
        return se_fail(err, SE_ERR_ARG, "calibrated value: bad argument");
    if (!(k > 0.0) || !isfinite(k))
        return se_fail(err, SE_ERR_RANGE, "calibrated value: scale %g must be positive", k);
    seg = &line->segments[segment];
    k *= seg->speed_scale; /* fold an earlier scale into the file value */
    switch (seg->speed_source) {
    case SE_SPEED_TENSION:
        *key = "tension";
        *value = k * k * seg->tension_n; /* v ~ sqrt(T) */
        break;
    case SE_SPEED_AXIAL_STIFFNESS:
        *key = "axial_stiffness";
        *value = k * k * seg->axial_stiffness_n;
        break;
    case SE_SPEED_GIVEN:
        *key = "speed";
        *value = k * seg->speed_given_m_s;
        break;
    case SE_SPEED_VELOCITY_FACTOR:
        *key = "velocity_factor";
        *value = k * seg->velocity_factor;
        if (*value > 1.0)
            return se_fail(err, SE_ERR_RANGE, "calibrated velocity factor %g of segment '%s' exceeds 1", *value,
                           seg->name);
        break;
    default:
        *key = "speed_scale";
        *value = k;
        break;
    }
    return SE_OK;
}

se_status se_line_apply_scale(se_line *line, size_t segment, double k, se_error *err)
{
    size_t i;
    if (line == NULL)
        return se_fail(err, SE_ERR_ARG, "apply scale: NULL line");
    if (!(k > 0.0) || !isfinite(k))
        return se_fail(err, SE_ERR_RANGE, "apply scale: scale %g must be positive", k);
    if (segment != SE_LINE_ALL_SEGMENTS && segment >= line->n_segments)
        return se_fail(err, SE_ERR_RANGE, "apply scale: segment %zu does not exist", segment);
    for (i = 0; i < line->n_segments; i++)
        if (segment == SE_LINE_ALL_SEGMENTS || i == segment)
            line->segments[i].speed_scale *= k;
    return se_line_prepare(line, err);
}

se_status se_line_skin_loss(const se_line *line, double *k_s05_per_m, se_error *err)
{
    double kl = 0.0, l = 0.0;
    size_t i;
    if (line == NULL || k_s05_per_m == NULL)
        return se_fail(err, SE_ERR_ARG, "line: NULL argument to se_line_skin_loss");
    if (!line->prepared)
        return se_fail(err, SE_ERR_ARG, "%s: se_line_skin_loss needs a prepared line", se_line_src(line));
    for (i = 0; i < line->n_segments; i++) {
        kl += line->segments[i].skin_loss_s05_per_m * line->segments[i].length_m;
        l += line->segments[i].length_m;
    }
    /* K_mean = sum K_i l_i / sum l_i: the far end's loss is exact (losses add along the path) */
    *k_s05_per_m = l > 0.0 ? kl / l : 0.0;
    return SE_OK;
}

se_status se_line_skin_path(const se_line *line, double distance_m, double *a_sqrt_s, se_error *err)
{
    double a = 0.0, d = distance_m;
    size_t i;
    if (line == NULL || a_sqrt_s == NULL)
        return se_fail(err, SE_ERR_ARG, "line: NULL argument to se_line_skin_path");
    if (!line->prepared)
        return se_fail(err, SE_ERR_ARG, "%s: se_line_skin_path needs a prepared line", se_line_src(line));
    if (!(d >= 0.0) || !(d <= line->length_m * (1.0 + 1e-9)))
        return se_fail(err, SE_ERR_RANGE, "%s: distance %g m is outside the line (0 to %g m)", se_line_src(line),
                       distance_m, line->length_m);
    for (i = 0; i < line->n_segments && d > 0.0; i++) {
        const se_segment *seg = &line->segments[i];
        double part = d < seg->length_m ? d : seg->length_m;
        a += seg->skin_loss_s05_per_m * part;
        d -= part;
    }
    *a_sqrt_s = 2.0 * a; /* round trip */
    return SE_OK;
}
