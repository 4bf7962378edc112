/* strandecho: line description file reader (YAML via libyaml's document API). Every error names
 * FILE:LINE:COLUMN (1-based, from libyaml's marks) and what is wrong. */
#include <errno.h>
#include <stdarg.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <yaml.h>

#include "internal.h"
#include "strandecho/line.h"
#include "strandecho/units.h"

typedef struct se_lp {
    const char *src;       /* file name for messages */
    yaml_document_t *doc;
    se_error *err;
} se_lp;

static const char *const se_lp_top_keys[] = {"line", "wave", "quantity", "source_end", "end", "segments",
                                             "water_density", "speed_uncertainty", "notes", NULL};
static const char *const se_lp_segment_keys[] = {
    "name", "length", "mass_per_length", "tension", "axial_stiffness", "speed", "velocity_factor",
    "impedance", "speed_uncertainty", "speed_scale", "diameter", "water_density", "added_mass_coefficient",
    "skin_loss", "hanging", "features", "notes", NULL};
static const char *const se_lp_hanging_keys[] = {"weight_in_water", "top_tension", "horizontal_tension",
                                                 "lower_vertical_force", "on_seabed", "depth", "seabed_friction",
                                                 "axial_stiffness", "lower_end", NULL};
static const char *const se_lp_feature_keys[] = {"at", "kind", "name", "reflection", "notes", NULL};

static se_status se_lp_fail(const se_lp *p, const yaml_node_t *node, se_status code, const char *fmt, ...)
    SE_PRINTF(4, 5);
static size_t se_lp_edit_distance(const char *a, const char *b);
static se_status se_lp_check_keys(const se_lp *p, const yaml_node_t *map, const char *const *keys,
                                  const char *where);
static yaml_node_t *se_lp_get(const se_lp *p, const yaml_node_t *map, const char *key);
static se_status se_lp_scalar(const se_lp *p, const yaml_node_t *node, const char *key, const char **out);
static se_status se_lp_quantity(const se_lp *p, const yaml_node_t *map, const char *key, se_unit_kind kind,
                                int positive, double *out);
static se_status se_lp_percent(const se_lp *p, const yaml_node_t *map, const char *key, double *out);
static se_status se_lp_number(const se_lp *p, const yaml_node_t *map, const char *key, double *out);
static se_status se_lp_segment(const se_lp *p, se_line *line, const yaml_node_t *map, size_t index,
                               double default_rho, double default_unc);
static se_status se_lp_skin_loss(const se_lp *p, const se_line *line, const yaml_node_t *map, double *out);
static se_status se_lp_hanging(const se_lp *p, const yaml_node_t *map, se_segment *seg);
static se_status se_lp_feature(const se_lp *p, const yaml_node_t *map, se_feature *f);
static se_line *se_lp_document(const se_lp *p);

static se_status se_lp_fail(const se_lp *p, const yaml_node_t *node, se_status code, const char *fmt, ...)
{
    char msg[SE_ERROR_MESSAGE_SIZE];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    if (node == NULL)
        return se_fail(p->err, code, "%s: %s", p->src, msg);
    return se_fail(p->err, code, "%s:%lu:%lu: %s", p->src, (unsigned long)node->start_mark.line + 1,
                   (unsigned long)node->start_mark.column + 1, msg);
}

/* Levenshtein distance, for "did you mean" on unknown keys (keys are short). */
static size_t se_lp_edit_distance(const char *a, const char *b)
{
    size_t la = strlen(a), lb = strlen(b), i, j, row[64];
    if (lb >= 63 || la >= 63)
        return (size_t)-1;
    for (j = 0; j <= lb; j++)
        row[j] = j;
    for (i = 1; i <= la; i++) {
        size_t prev = row[0];
        row[0] = i;
        for (j = 1; j <= lb; j++) {
            size_t cur = row[j], best = prev + (a[i - 1] != b[j - 1]);
            if (row[j] + 1 < best)
                best = row[j] + 1;
            if (row[j - 1] + 1 < best)
                best = row[j - 1] + 1;
            row[j] = best;
            prev = cur;
        }
    }
    return row[lb];
}

static se_status se_lp_check_keys(const se_lp *p, const yaml_node_t *map, const char *const *keys,
                                  const char *where)
{
    const yaml_node_pair_t *pair, *other;
    if (map->type != YAML_MAPPING_NODE)
        return se_lp_fail(p, map, SE_ERR_FORMAT, "%s must be a mapping of key: value", where);
    for (pair = map->data.mapping.pairs.start; pair < map->data.mapping.pairs.top; pair++) {
        const yaml_node_t *k = yaml_document_get_node(p->doc, pair->key);
        const char *name;
        size_t i, best = (size_t)-1, bi = 0;
        int known = 0;
        if (k == NULL || k->type != YAML_SCALAR_NODE)
            return se_lp_fail(p, k, SE_ERR_FORMAT, "keys in %s must be plain words", where);
        name = (const char *)k->data.scalar.value;
        for (i = 0; keys[i] != NULL; i++) {
            size_t dist;
            if (strcmp(name, keys[i]) == 0) {
                known = 1;
                break;
            }
            dist = se_lp_edit_distance(name, keys[i]);
            if (dist < best) {
                best = dist;
                bi = i;
            }
        }
        if (!known) {
            size_t len = strlen(name);
            if (best <= 3 && best <= (len + 1) / 2)
                return se_lp_fail(p, k, SE_ERR_FORMAT, "unknown key '%s' in %s (did you mean '%s'?)", name, where,
                                  keys[bi]);
            return se_lp_fail(p, k, SE_ERR_FORMAT, "unknown key '%s' in %s", name, where);
        }
        for (other = map->data.mapping.pairs.start; other < pair; other++) {
            const yaml_node_t *ok = yaml_document_get_node(p->doc, other->key);
            if (ok != NULL && ok->type == YAML_SCALAR_NODE && strcmp((const char *)ok->data.scalar.value, name) == 0)
                return se_lp_fail(p, k, SE_ERR_FORMAT, "duplicate key '%s' in %s", name, where);
        }
    }
    return SE_OK;
}

static yaml_node_t *se_lp_get(const se_lp *p, const yaml_node_t *map, const char *key)
{
    const yaml_node_pair_t *pair;
    for (pair = map->data.mapping.pairs.start; pair < map->data.mapping.pairs.top; pair++) {
        yaml_node_t *k = yaml_document_get_node(p->doc, pair->key);
        if (k != NULL && k->type == YAML_SCALAR_NODE && strcmp((const char *)k->data.scalar.value, key) == 0)
            return yaml_document_get_node(p->doc, pair->value);
    }
    return NULL;
}

/* A non-empty scalar; an empty value (`key:` or `~`) is a missing value. */
static se_status se_lp_scalar(const se_lp *p, const yaml_node_t *node, const char *key, const char **out)
{
    const char *v;
    if (node->type != YAML_SCALAR_NODE)
        return se_lp_fail(p, node, SE_ERR_FORMAT, "%s: expected a single value, not a list or mapping", key);
    v = (const char *)node->data.scalar.value;
    if (node->data.scalar.length == 0 ||
        (node->data.scalar.style == YAML_PLAIN_SCALAR_STYLE && (strcmp(v, "~") == 0 || strcmp(v, "null") == 0)))
        return se_lp_fail(p, node, SE_ERR_FORMAT, "%s: missing value", key);
    *out = v;
    return SE_OK;
}

/* An optional value with a unit (required); untouched if absent. positive: must be > 0, else >= 0. */
static se_status se_lp_quantity(const se_lp *p, const yaml_node_t *map, const char *key, se_unit_kind kind,
                                int positive, double *out)
{
    const yaml_node_t *node = se_lp_get(p, map, key);
    const char *text;
    se_error uerr;
    double v;
    se_status st;
    if (node == NULL)
        return SE_OK;
    st = se_lp_scalar(p, node, key, &text);
    if (st != SE_OK)
        return st;
    se_error_clear(&uerr);
    st = se_unit_parse(text, kind, NULL, &v, &uerr);
    if (st != SE_OK)
        return se_lp_fail(p, node, st, "%s: %s", key, uerr.message);
    if (positive && !(v > 0.0))
        return se_lp_fail(p, node, SE_ERR_RANGE, "%s must be positive (got '%s')", key, text);
    if (!positive && !(v >= 0.0))
        return se_lp_fail(p, node, SE_ERR_RANGE, "%s must not be negative (got '%s')", key, text);
    *out = v;
    return SE_OK;
}

/* A percentage "2 %" as a fraction 0.02; the % sign is required so 2 and 0.02 cannot be confused. */
static se_status se_lp_percent(const se_lp *p, const yaml_node_t *map, const char *key, double *out)
{
    const yaml_node_t *node = se_lp_get(p, map, key);
    const char *text;
    se_error uerr;
    double v;
    se_status st;
    if (node == NULL)
        return SE_OK;
    st = se_lp_scalar(p, node, key, &text);
    if (st != SE_OK)
        return st;
    if (strchr(text, '%') == NULL)
        return se_lp_fail(p, node, SE_ERR_UNIT, "%s: give it in percent, e.g. '2 %%' (got '%s')", key, text);
    se_error_clear(&uerr);
    st = se_unit_parse(text, SE_UNIT_RATIO, NULL, &v, &uerr);
    if (st != SE_OK)
        return se_lp_fail(p, node, st, "%s: %s", key, uerr.message);
    if (!(v >= 0.0) || !(v < 1.0))
        return se_lp_fail(p, node, SE_ERR_RANGE, "%s must be in [0, 100) %% (got '%s')", key, text);
    *out = v;
    return SE_OK;
}

/* A plain number (a coefficient), optional. */
static se_status se_lp_number(const se_lp *p, const yaml_node_t *map, const char *key, double *out)
{
    const yaml_node_t *node = se_lp_get(p, map, key);
    const char *text;
    char *end;
    double v;
    se_status st;
    if (node == NULL)
        return SE_OK;
    st = se_lp_scalar(p, node, key, &text);
    if (st != SE_OK)
        return st;
    errno = 0;
    v = strtod(text, &end);
    while (*end == ' ' || *end == '\t')
        end++;
    if (end == text || *end != '\0' || errno != 0 || !isfinite(v))
        return se_lp_fail(p, node, SE_ERR_FORMAT, "%s: '%s' is not a number", key, text);
    *out = v;
    return SE_OK;
}

/* Optional skin_loss of a segment (K in s^0.5/m or a datasheet attenuation, se_skin_loss_parse);
 * only an electrical line has one. Untouched if absent. */
static se_status se_lp_skin_loss(const se_lp *p, const se_line *line, const yaml_node_t *map, double *out)
{
    const yaml_node_t *node = se_lp_get(p, map, "skin_loss");
    const char *text;
    se_error uerr;
    double k;
    se_status st;
    if (node == NULL)
        return SE_OK;
    if (line->wave != SE_WAVE_ELECTRICAL)
        return se_lp_fail(p, node, SE_ERR_ARG,
                          "skin_loss applies to electrical segments (a cable), not to a %s line",
                          se_wave_kind_name(line->wave));
    st = se_lp_scalar(p, node, "skin_loss", &text);
    if (st != SE_OK)
        return st;
    se_error_clear(&uerr);
    st = se_skin_loss_parse(text, &k, &uerr);
    if (st != SE_OK)
        return se_lp_fail(p, node, st, "skin_loss: %s", uerr.message);
    *out = k;
    return SE_OK;
}

static se_status se_lp_feature(const se_lp *p, const yaml_node_t *map, se_feature *f)
{
    const yaml_node_t *at, *node;
    const char *text;
    double r = NAN;
    se_status st = se_lp_check_keys(p, map, se_lp_feature_keys, "a feature");
    if (st != SE_OK)
        return st;
    at = se_lp_get(p, map, "at");
    if (at == NULL)
        return se_lp_fail(p, map, SE_ERR_FORMAT, "feature: missing required key 'at' (position from the start "
                                                 "of its segment, e.g. 'at: 60 m')");
    f->at_m = NAN;
    st = se_lp_quantity(p, map, "at", SE_UNIT_LENGTH, 0, &f->at_m);
    if (st != SE_OK)
        return st;
    f->src_line = (unsigned)at->start_mark.line + 1;
    f->src_column = (unsigned)at->start_mark.column + 1;
    node = se_lp_get(p, map, "kind");
    if (node != NULL) {
        if ((st = se_lp_scalar(p, node, "kind", &text)) != SE_OK)
            return st;
        f->kind = (char *)text;
    }
    node = se_lp_get(p, map, "name");
    if (node != NULL) {
        if ((st = se_lp_scalar(p, node, "name", &text)) != SE_OK)
            return st;
        f->name = (char *)text;
    }
    if ((st = se_lp_number(p, map, "reflection", &r)) != SE_OK)
        return st;
    if (!isnan(r)) {
        if (!(fabs(r) <= 1.0))
            return se_lp_fail(p, se_lp_get(p, map, "reflection"), SE_ERR_RANGE,
                              "reflection %g is impossible: a coefficient lies in [-1, 1]", r);
        f->has_reflection = 1;
        f->reflection = r;
    }
    return SE_OK;
}

static se_status se_lp_hanging(const se_lp *p, const yaml_node_t *map, se_segment *seg)
{
    se_hanging *h = &seg->hanging;
    const yaml_node_t *node;
    const char *text;
    se_status st = se_lp_check_keys(p, map, se_lp_hanging_keys, "hanging");
    if (st != SE_OK)
        return st;
    h->enabled = 1;
    if (se_lp_get(p, map, "weight_in_water") == NULL)
        return se_lp_fail(p, map, SE_ERR_FORMAT, "hanging: missing required key 'weight_in_water' (submerged "
                                                 "weight per length, e.g. '1.2 kN/m')");
    if ((st = se_lp_quantity(p, map, "weight_in_water", SE_UNIT_WEIGHT_PER_LENGTH, 1, &h->weight_in_water_n_m)) ||
        (st = se_lp_quantity(p, map, "top_tension", SE_UNIT_FORCE, 1, &h->top_tension_n)) ||
        (st = se_lp_quantity(p, map, "horizontal_tension", SE_UNIT_FORCE, 0, &h->horizontal_tension_n)) ||
        (st = se_lp_quantity(p, map, "lower_vertical_force", SE_UNIT_FORCE, 0, &h->lower_vertical_n)) ||
        (st = se_lp_quantity(p, map, "on_seabed", SE_UNIT_LENGTH, 0, &h->on_seabed_m)) ||
        (st = se_lp_quantity(p, map, "depth", SE_UNIT_LENGTH, 1, &h->depth_m)) ||
        (st = se_lp_quantity(p, map, "axial_stiffness", SE_UNIT_STIFFNESS, 1, &h->axial_stiffness_n)) ||
        (st = se_lp_number(p, map, "seabed_friction", &h->seabed_friction)))
        return st;
    if (!(h->seabed_friction >= 0.0))
        return se_lp_fail(p, se_lp_get(p, map, "seabed_friction"), SE_ERR_RANGE,
                          "seabed_friction must not be negative (got %g)", h->seabed_friction);
    if (isnan(h->top_tension_n) && isnan(h->horizontal_tension_n))
        return se_lp_fail(p, map, SE_ERR_FORMAT, "hanging: give top_tension or horizontal_tension");
    node = se_lp_get(p, map, "lower_end");
    if (node != NULL) {
        if ((st = se_lp_scalar(p, node, "lower_end", &text)) != SE_OK)
            return st;
        if (strcmp(text, "far") == 0)
            h->lower_end_near = 0;
        else if (strcmp(text, "near") == 0)
            h->lower_end_near = 1;
        else
            return se_lp_fail(p, node, SE_ERR_FORMAT, "lower_end must be 'far' or 'near' (got '%s')", text);
    }
    return SE_OK;
}

static se_status se_lp_segment(const se_lp *p, se_line *line, const yaml_node_t *map, size_t index,
                               double default_rho, double default_unc)
{
    se_segment seg;
    const yaml_node_t *node;
    const char *text;
    char gen[64];
    se_feature *features = NULL;
    size_t nf = 0, k;
    se_status st = se_lp_check_keys(p, map, se_lp_segment_keys, "a segment");
    if (st != SE_OK)
        return st;
    se_segment_init(&seg);
    seg.water_density_kg_m3 = default_rho;
    seg.speed_uncertainty = default_unc;
    seg.src_line = (unsigned)map->start_mark.line + 1;
    seg.src_column = (unsigned)map->start_mark.column + 1;
    snprintf(gen, sizeof gen, "segment %zu", index + 1);
    seg.name = gen;
    node = se_lp_get(p, map, "name");
    if (node != NULL) {
        if ((st = se_lp_scalar(p, node, "name", &text)) != SE_OK)
            return st;
        seg.name = (char *)text;
    }
    if (se_lp_get(p, map, "length") == NULL)
        return se_lp_fail(p, map, SE_ERR_FORMAT, "segment '%s': missing required key 'length'", seg.name);
    if ((st = se_lp_quantity(p, map, "length", SE_UNIT_LENGTH, 1, &seg.length_m)) ||
        (st = se_lp_quantity(p, map, "mass_per_length", SE_UNIT_LINEAR_DENSITY, 1, &seg.mass_per_length_kg_m)) ||
        (st = se_lp_quantity(p, map, "tension", SE_UNIT_FORCE, 1, &seg.tension_n)) ||
        (st = se_lp_quantity(p, map, "axial_stiffness", SE_UNIT_STIFFNESS, 1, &seg.axial_stiffness_n)) ||
        (st = se_lp_quantity(p, map, "speed", SE_UNIT_SPEED, 1, &seg.speed_given_m_s)) ||
        (st = se_lp_quantity(p, map, "impedance", SE_UNIT_IMPEDANCE, 1, &seg.impedance_given)) ||
        (st = se_lp_quantity(p, map, "diameter", SE_UNIT_LENGTH, 1, &seg.diameter_m)) ||
        (st = se_lp_quantity(p, map, "water_density", SE_UNIT_DENSITY, 1, &seg.water_density_kg_m3)) ||
        (st = se_lp_percent(p, map, "speed_uncertainty", &seg.speed_uncertainty)) ||
        (st = se_lp_number(p, map, "velocity_factor", &seg.velocity_factor)) ||
        (st = se_lp_number(p, map, "speed_scale", &seg.speed_scale)) ||
        (st = se_lp_number(p, map, "added_mass_coefficient", &seg.added_mass_coefficient)) ||
        (st = se_lp_skin_loss(p, line, map, &seg.skin_loss_s05_per_m)))
        return st;
    if (!isnan(seg.speed_given_m_s) && seg.speed_given_m_s > SE_SPEED_OF_LIGHT)
        return se_lp_fail(p, se_lp_get(p, map, "speed"), SE_ERR_RANGE,
                          "speed %g m/s is beyond the speed of light (%.0f m/s)", seg.speed_given_m_s,
                          SE_SPEED_OF_LIGHT);
    if (!isnan(seg.velocity_factor) && !(seg.velocity_factor > 0.0 && seg.velocity_factor <= 1.0))
        return se_lp_fail(p, se_lp_get(p, map, "velocity_factor"), SE_ERR_RANGE,
                          "velocity_factor %g must be in (0, 1]", seg.velocity_factor);
    if (!(seg.speed_scale > 0.0))
        return se_lp_fail(p, se_lp_get(p, map, "speed_scale"), SE_ERR_RANGE, "speed_scale must be positive");
    if (!(seg.added_mass_coefficient >= 0.0))
        return se_lp_fail(p, se_lp_get(p, map, "added_mass_coefficient"), SE_ERR_RANGE,
                          "added_mass_coefficient must not be negative");
    {
        /* speed definitions are checked here too, so the message points at the second one */
        static const char *const defs[] = {"tension", "speed", "velocity_factor", "hanging", "axial_stiffness"};
        const yaml_node_t *first = NULL;
        const char *first_key = NULL;
        size_t d, nd = line->wave == SE_WAVE_LONGITUDINAL ? 5 : 4;
        for (d = 0; d < nd; d++) {
            const yaml_node_t *n = se_lp_get(p, map, defs[d]);
            if (line->wave == SE_WAVE_LONGITUDINAL && d == 3)
                continue; /* a hanging longitudinal segment still needs axial_stiffness or speed */
            if (n == NULL)
                continue;
            if (first != NULL)
                return se_lp_fail(p, n, SE_ERR_ARG, "segment '%s': conflicting speed definitions '%s' (line %lu) "
                                                    "and '%s': give only one",
                                  seg.name, first_key, (unsigned long)first->start_mark.line + 1, defs[d]);
            first = n;
            first_key = defs[d];
        }
    }
    node = se_lp_get(p, map, "hanging");
    if (node != NULL && (st = se_lp_hanging(p, node, &seg)) != SE_OK)
        return st;
    node = se_lp_get(p, map, "features");
    if (node != NULL) {
        const yaml_node_item_t *it;
        if (node->type != YAML_SEQUENCE_NODE)
            return se_lp_fail(p, node, SE_ERR_FORMAT, "features must be a list ('- at: ...')");
        nf = (size_t)(node->data.sequence.items.top - node->data.sequence.items.start);
        if (nf > 0) {
            features = se_calloc(nf, sizeof *features, "features", p->err);
            if (features == NULL)
                return SE_ERR_NOMEM;
        }
        for (it = node->data.sequence.items.start, k = 0; it < node->data.sequence.items.top; it++, k++) {
            const yaml_node_t *fm = yaml_document_get_node(p->doc, *it);
            st = se_lp_feature(p, fm, &features[k]);
            if (st != SE_OK) {
                free(features);
                return st;
            }
        }
    }
    seg.features = features;
    seg.n_features = nf;
    st = se_line_add_segment(line, &seg, p->err); /* deep copy: names borrowed from the document */
    free(features);
    return st;
}

static se_line *se_lp_document(const se_lp *p)
{
    yaml_node_t *root = yaml_document_get_root_node(p->doc), *node, *qnode, *wnode, *segs;
    const char *text;
    se_wave_kind wave;
    se_quantity q;
    se_error sub;
    se_line *line = NULL;
    double rho = SE_SEAWATER_DENSITY, unc = 0.0;
    const yaml_node_item_t *it;
    size_t k;
    se_status st;

    if (root == NULL) {
        se_lp_fail(p, NULL, SE_ERR_FORMAT, "empty line file");
        return NULL;
    }
    if (se_lp_check_keys(p, root, se_lp_top_keys, "the line file") != SE_OK)
        return NULL;
    wnode = se_lp_get(p, root, "wave");
    qnode = se_lp_get(p, root, "quantity");
    segs = se_lp_get(p, root, "segments");
    if (wnode == NULL || qnode == NULL || segs == NULL || se_lp_get(p, root, "end") == NULL) {
        se_lp_fail(p, root, SE_ERR_FORMAT, "missing required key '%s'",
                   wnode == NULL ? "wave" : qnode == NULL ? "quantity" : segs == NULL ? "segments" : "end");
        return NULL;
    }
    if (se_lp_scalar(p, wnode, "wave", &text) != SE_OK)
        return NULL;
    se_error_clear(&sub);
    if (se_wave_kind_parse(text, &wave, &sub) != SE_OK) {
        se_lp_fail(p, wnode, SE_ERR_FORMAT, "%s", sub.message);
        return NULL;
    }
    if (se_lp_scalar(p, qnode, "quantity", &text) != SE_OK)
        return NULL;
    if (se_quantity_parse(text, &q, &sub) != SE_OK) {
        se_lp_fail(p, qnode, SE_ERR_FORMAT, "%s", sub.message);
        return NULL;
    }
    if (!se_wave_quantity_compatible(wave, q)) {
        se_lp_fail(p, qnode, SE_ERR_ARG, "quantity '%s' cannot be measured on %s %s line (%s)", text,
                   wave == SE_WAVE_ELECTRICAL ? "an" : "a", se_wave_kind_name(wave),
                   wave == SE_WAVE_ELECTRICAL ? "use voltage or current"
                                              : "voltage and current belong to electrical lines");
        return NULL;
    }
    if (se_lp_quantity(p, root, "water_density", SE_UNIT_DENSITY, 1, &rho) != SE_OK ||
        se_lp_percent(p, root, "speed_uncertainty", &unc) != SE_OK)
        return NULL;
    node = se_lp_get(p, root, "line");
    text = "";
    if (node != NULL && se_lp_scalar(p, node, "line", &text) != SE_OK)
        return NULL;
    line = se_line_create(text, wave, q, p->err);
    if (line == NULL)
        return NULL;
    free(line->source_name);
    line->source_name = se_strdup(p->src, p->err);
    if (line->source_name == NULL)
        goto fail;
    node = se_lp_get(p, root, "source_end");
    if (node != NULL) {
        if (se_lp_scalar(p, node, "source_end", &text) != SE_OK)
            goto fail;
        if ((st = se_line_set_source_end(line, text, &sub)) != SE_OK) {
            se_lp_fail(p, node, st, "source_end: %s", sub.message);
            goto fail;
        }
    }
    node = se_lp_get(p, root, "end");
    if (se_lp_scalar(p, node, "end", &text) != SE_OK)
        goto fail;
    if ((st = se_line_set_end(line, text, &sub)) != SE_OK) {
        se_lp_fail(p, node, st, "end: %s", sub.message);
        goto fail;
    }
    if (segs->type != YAML_SEQUENCE_NODE || segs->data.sequence.items.top == segs->data.sequence.items.start) {
        se_lp_fail(p, segs, SE_ERR_FORMAT, "segments must be a non-empty list ('- name: ...')");
        goto fail;
    }
    for (it = segs->data.sequence.items.start, k = 0; it < segs->data.sequence.items.top; it++, k++)
        if (se_lp_segment(p, line, yaml_document_get_node(p->doc, *it), k, rho, unc) != SE_OK)
            goto fail;
    if (se_line_prepare(line, p->err) != SE_OK)
        goto fail;
    return line;
fail:
    se_line_free(line);
    return NULL;
}

se_line *se_line_parse_string(const char *text, const char *name_for_messages, se_error *err)
{
    yaml_parser_t parser;
    yaml_document_t doc;
    se_lp p;
    se_line *line;
    if (text == NULL) {
        se_fail(err, SE_ERR_ARG, "line: NULL text");
        return NULL;
    }
    p.src = name_for_messages != NULL ? name_for_messages : "<string>";
    p.doc = &doc;
    p.err = err;
    if (!yaml_parser_initialize(&parser)) {
        se_fail(err, SE_ERR_NOMEM, "%s: cannot initialise the YAML parser", p.src);
        return NULL;
    }
    yaml_parser_set_input_string(&parser, (const unsigned char *)text, strlen(text));
    if (!yaml_parser_load(&parser, &doc)) {
        const yaml_mark_t *m = parser.problem != NULL ? &parser.problem_mark : &parser.mark;
        se_fail(err, SE_ERR_FORMAT, "%s:%lu:%lu: YAML syntax: %s%s%s", p.src, (unsigned long)m->line + 1,
                (unsigned long)m->column + 1, parser.problem != NULL ? parser.problem : "malformed document",
                parser.context != NULL ? " " : "", parser.context != NULL ? parser.context : "");
        yaml_parser_delete(&parser);
        return NULL;
    }
    line = se_lp_document(&p);
    yaml_document_delete(&doc);
    /* one file, one line: a second document ("---") would otherwise be ignored without a word */
    if (line != NULL) {
        if (!yaml_parser_load(&parser, &doc)) {
            const yaml_mark_t *m = parser.problem != NULL ? &parser.problem_mark : &parser.mark;
            se_fail(err, SE_ERR_FORMAT, "%s:%lu:%lu: YAML syntax: %s%s%s", p.src,
                    (unsigned long)m->line + 1, (unsigned long)m->column + 1,
                    parser.problem != NULL ? parser.problem : "malformed document",
                    parser.context != NULL ? " " : "", parser.context != NULL ? parser.context : "");
            se_line_free(line);
            line = NULL;
        } else {
            const yaml_node_t *root = yaml_document_get_root_node(&doc);
            if (root != NULL) {
                se_fail(err, SE_ERR_FORMAT,
                        "%s:%lu:%lu: a second YAML document: a line file describes one line (put "
                        "each line in its own file)",
                        p.src, (unsigned long)root->start_mark.line + 1,
                        (unsigned long)root->start_mark.column + 1);
                se_line_free(line);
                line = NULL;
            }
            yaml_document_delete(&doc);
        }
    }
    yaml_parser_delete(&parser);
    return line;
}

se_line *se_line_read(const char *path, se_error *err)
{
    FILE *f;
    char *buf;
    long size;
    size_t got;
    se_line *line;
    if (path == NULL) {
        se_fail(err, SE_ERR_ARG, "line: NULL path");
        return NULL;
    }
    f = fopen(path, "rb");
    if (f == NULL) {
        se_fail(err, SE_ERR_IO, "%s: cannot open: %s", path, strerror(errno));
        return NULL;
    }
    if (fseek(f, 0, SEEK_END) != 0 || (size = ftell(f)) < 0 || fseek(f, 0, SEEK_SET) != 0) {
        fclose(f);
        se_fail(err, SE_ERR_IO, "%s: cannot determine its size", path);
        return NULL;
    }
    if (size > 16L * 1024 * 1024) {
        fclose(f);
        se_fail(err, SE_ERR_FORMAT, "%s: %ld bytes is too large for a line file", path, size);
        return NULL;
    }
    buf = se_calloc((size_t)size + 1, 1, "line file", err);
    if (buf == NULL) {
        fclose(f);
        return NULL;
    }
    got = fread(buf, 1, (size_t)size, f);
    fclose(f);
    if (got != (size_t)size) {
        free(buf);
        se_fail(err, SE_ERR_IO, "%s: read %zu of %ld bytes", path, got, size);
        return NULL;
    }
    if (memchr(buf, '\0', got) != NULL) {
        free(buf);
        se_fail(err, SE_ERR_FORMAT, "%s: contains a NUL byte: not a text file", path);
        return NULL;
    }
    line = se_line_parse_string(buf, path, err);
    free(buf);
    return line;
}
