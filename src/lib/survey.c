/* strandecho: survey files (libyaml document API) and the survey runner (pthreads). */
#include "strandecho/survey.h"

#include <math.h>
#include <pthread.h>

#include <fftw3.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>
#include <yaml.h>

#include "internal.h"
#include "strandecho/digest.h"
#include "strandecho/pulse.h"
#include "strandecho/recording.h"
#include "strandecho/units.h"
#include "strandecho/wave.h"

typedef struct se_sp {
    yaml_document_t *doc;
    const char *name;
    const char *base;
    se_error *err;
} se_sp;

typedef struct se_runner {
    const se_survey *survey;
    const se_survey_run_config *cfg;
    se_survey_item *items;
    size_t n_items, next, done;
    pthread_mutex_t lock;   /* the queue, the progress count */
} se_runner;

static se_status se_sp_fail(const se_sp *p, const yaml_node_t *node, se_status code, const char *fmt, ...)
    SE_PRINTF(4, 5);
static se_status se_sp_keys(const se_sp *p, const yaml_node_t *map, const char *const *keys,
                            const char *where);
static yaml_node_t *se_sp_get(const se_sp *p, const yaml_node_t *map, const char *key);
static se_status se_sp_text(const se_sp *p, const yaml_node_t *node, const char *key, const char **out);
static se_status se_sp_path(const se_sp *p, const yaml_node_t *node, const char *key, char **out);
static se_status se_sp_line(const se_sp *p, const yaml_node_t *map, size_t index, se_survey_line *l);
static void se_survey_line_free(se_survey_line *l);
static void *se_survey_worker(void *arg);
static void se_survey_do(se_runner *r, se_survey_item *it);
static se_status se_survey_locate(se_runner *r, const se_survey_line *sl, const char *path,
                                  const se_line *line, const se_expected_event *exp, size_t nexp,
                                  se_locate_result *res, se_survey_item *it, se_error *err);

static se_status se_sp_fail(const se_sp *p, const yaml_node_t *node, se_status code, const char *fmt, ...)
{
    char msg[SE_ERROR_MESSAGE_SIZE];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    if (node == NULL)
        return se_fail(p->err, code, "%s: %s", p->name, msg);
    return se_fail(p->err, code, "%s:%lu:%lu: %s", p->name, (unsigned long)node->start_mark.line + 1,
                   (unsigned long)node->start_mark.column + 1, msg);
}

static se_status se_sp_keys(const se_sp *p, const yaml_node_t *map, const char *const *keys,
                            const char *where)
{
    const yaml_node_pair_t *pair, *other;
    if (map == NULL || map->type != YAML_MAPPING_NODE)
        return se_sp_fail(p, map, SE_ERR_FORMAT, "%s must be a mapping of key: value", where);
    for (pair = map->data.mapping.pairs.start; pair < map->data.mapping.pairs.top; pair++) {
        const yaml_node_t *k = yaml_document_get_node(p->doc, pair->key);
        const char *name;
        size_t i;
        if (k == NULL || k->type != YAML_SCALAR_NODE)
            return se_sp_fail(p, k, SE_ERR_FORMAT, "keys in %s must be plain words", where);
        name = (const char *)k->data.scalar.value;
        for (i = 0; keys[i] != NULL && strcmp(name, keys[i]) != 0; i++) {
        }
        if (keys[i] == NULL)
            return se_sp_fail(p, k, SE_ERR_FORMAT, "unknown key '%s' in %s (see docs/survey.md)", name,
                              where);
        for (other = map->data.mapping.pairs.start; other < pair; other++) {
            const yaml_node_t *ok = yaml_document_get_node(p->doc, other->key);
            if (ok != NULL && ok->type == YAML_SCALAR_NODE &&
                strcmp((const char *)ok->data.scalar.value, name) == 0)
                return se_sp_fail(p, k, SE_ERR_FORMAT, "duplicate key '%s' in %s", name, where);
        }
    }
    return SE_OK;
}

static yaml_node_t *se_sp_get(const se_sp *p, const yaml_node_t *map, const char *key)
{
    const yaml_node_pair_t *pair;
    for (pair = map->data.mapping.pairs.start; pair < map->data.mapping.pairs.top; pair++) {
        yaml_node_t *k = yaml_document_get_node(p->doc, pair->key);
        if (k != NULL && k->type == YAML_SCALAR_NODE &&
            strcmp((const char *)k->data.scalar.value, key) == 0)
            return yaml_document_get_node(p->doc, pair->value);
    }
    return NULL;
}

static se_status se_sp_text(const se_sp *p, const yaml_node_t *node, const char *key, const char **out)
{
    if (node == NULL || node->type != YAML_SCALAR_NODE)
        return se_sp_fail(p, node, SE_ERR_FORMAT, "'%s' must be a single value", key);
    if (node->data.scalar.length == 0)
        return se_sp_fail(p, node, SE_ERR_FORMAT, "'%s' has no value", key);
    *out = (const char *)node->data.scalar.value;
    return SE_OK;
}

/* A path relative to the survey file's folder (absolute paths kept). */
static se_status se_sp_path(const se_sp *p, const yaml_node_t *node, const char *key, char **out)
{
    const char *v;
    size_t n;
    se_status st = se_sp_text(p, node, key, &v);
    if (st != SE_OK)
        return st;
    if (v[0] == '/' || strcmp(p->base, ".") == 0) {
        *out = se_strdup(v, p->err);
        return *out != NULL ? SE_OK : SE_ERR_NOMEM;
    }
    n = strlen(p->base) + strlen(v) + 2;
    *out = malloc(n);
    if (*out == NULL)
        return se_fail(p->err, SE_ERR_NOMEM, "out of memory for a path");
    snprintf(*out, n, "%s/%s", p->base, v);
    return SE_OK;
}

static const char *const se_line_keys[] = {
    "name", "line", "recording", "recordings", "baseline", "baseline_date", "channel", "pulse_channel", "pulse",
    "quantity", "speed", "velocity_factor", "tension", "mass_per_length", "axial_stiffness",
    "speed_uncertainty", "source_end", "false_alarms", "confidence", "skin_loss", NULL};

static se_status se_sp_line(const se_sp *p, const yaml_node_t *map, size_t index, se_survey_line *l)
{
    char where[64];
    const char *v;
    yaml_node_t *n, *recs;
    se_status st;
    int ways;
    yaml_node_t *nsp, *nvf, *nt, *nmu, *nea;

    snprintf(where, sizeof where, "line %zu of the survey", index + 1);
    st = se_sp_keys(p, map, se_line_keys, where);
    if (st != SE_OK)
        return st;
    l->channel = 1;
    l->false_alarms = 0.01;
    l->confidence = 0.95;
    l->skin_k_s05_per_m = 0.0;
    l->quantity = SE_Q_VELOCITY;
    l->tension_n = l->mass_per_length_kg_m = l->axial_stiffness_n = l->velocity_factor = NAN;
    if ((n = se_sp_get(p, map, "name")) != NULL) {
        if ((st = se_sp_text(p, n, "name", &v)) != SE_OK)
            return st;
        l->name = se_strdup(v, p->err);
    } else {
        char buf[32];
        snprintf(buf, sizeof buf, "line %zu", index + 1);
        l->name = se_strdup(buf, p->err);
    }
    if (l->name == NULL)
        return SE_ERR_NOMEM;
    if ((n = se_sp_get(p, map, "line")) != NULL && (st = se_sp_path(p, n, "line", &l->line_file)) != SE_OK)
        return st;
    if ((n = se_sp_get(p, map, "baseline")) != NULL &&
        (st = se_sp_path(p, n, "baseline", &l->baseline)) != SE_OK)
        return st;
    if ((n = se_sp_get(p, map, "baseline_date")) != NULL) {
        if ((st = se_sp_text(p, n, "baseline_date", &v)) != SE_OK)
            return st;
        if (l->baseline == NULL)
            return se_sp_fail(p, n, SE_ERR_FORMAT, "%s '%s': baseline_date without a baseline recording",
                              where, l->name);
        if ((l->baseline_date = se_strdup(v, p->err)) == NULL)
            return SE_ERR_NOMEM;
    }
    recs = se_sp_get(p, map, "recordings");
    n = se_sp_get(p, map, "recording");
    if ((recs == NULL) == (n == NULL))
        return se_sp_fail(p, map, SE_ERR_FORMAT, "%s '%s': give its recordings once, as 'recording: "
                                                 "FILE' or 'recordings: [FILE, ...]'",
                          where, l->name);
    if (n != NULL) {
        l->recordings = calloc(1, sizeof *l->recordings);
        if (l->recordings == NULL)
            return se_fail(p->err, SE_ERR_NOMEM, "out of memory");
        l->n_recordings = 1;
        if ((st = se_sp_path(p, n, "recording", &l->recordings[0])) != SE_OK)
            return st;
    } else {
        yaml_node_item_t *item;
        size_t k = 0, cnt;
        if (recs->type != YAML_SEQUENCE_NODE)
            return se_sp_fail(p, recs, SE_ERR_FORMAT, "'recordings' must be a list of files");
        cnt = (size_t)(recs->data.sequence.items.top - recs->data.sequence.items.start);
        if (cnt == 0)
            return se_sp_fail(p, recs, SE_ERR_FORMAT, "'recordings' is empty");
        l->recordings = calloc(cnt, sizeof *l->recordings);
        if (l->recordings == NULL)
            return se_fail(p->err, SE_ERR_NOMEM, "out of memory");
        l->n_recordings = cnt;
        for (item = recs->data.sequence.items.start; item < recs->data.sequence.items.top; item++, k++)
            if ((st = se_sp_path(p, yaml_document_get_node(p->doc, *item), "recordings",
                                 &l->recordings[k])) != SE_OK)
                return st;
    }
    if ((n = se_sp_get(p, map, "channel")) != NULL || (n = se_sp_get(p, map, "pulse_channel")) != NULL) {
        const char *keys[2] = {"channel", "pulse_channel"};
        unsigned *dst[2] = {&l->channel, &l->pulse_channel};
        int k;
        for (k = 0; k < 2; k++) {
            char *end;
            unsigned long u;
            if ((n = se_sp_get(p, map, keys[k])) == NULL)
                continue;
            if ((st = se_sp_text(p, n, keys[k], &v)) != SE_OK)
                return st;
            u = strtoul(v, &end, 10);
            if (end == v || *end != '\0' || u < 1 || u > 65535)
                return se_sp_fail(p, n, SE_ERR_RANGE, "'%s: %s' is not a channel number 1..65535",
                                  keys[k], v);
            *dst[k] = (unsigned)u;
        }
        if (l->pulse_channel == l->channel)
            return se_sp_fail(p, map, SE_ERR_RANGE, "%s: pulse_channel is the response channel", where);
    }
    if ((n = se_sp_get(p, map, "pulse")) != NULL) {
        if (l->pulse_channel > 0)
            return se_sp_fail(p, n, SE_ERR_FORMAT, "give the reference once: pulse or pulse_channel");
        if ((st = se_sp_text(p, n, "pulse", &v)) != SE_OK)
            return st;
        if (se_pulse_is_spec(v)) {
            se_pulse_shape sh;
            if (se_pulse_parse(v, &sh, p->err) != SE_OK)
                return se_sp_fail(p, n, SE_ERR_ARG, "pulse: %s", p->err->message);
            l->pulse = se_strdup(v, p->err);
            if (l->pulse == NULL)
                return SE_ERR_NOMEM;
        } else if ((st = se_sp_path(p, n, "pulse", &l->pulse)) != SE_OK) {
            return st;
        }
    }
    nsp = se_sp_get(p, map, "speed");
    nvf = se_sp_get(p, map, "velocity_factor");
    nt = se_sp_get(p, map, "tension");
    nmu = se_sp_get(p, map, "mass_per_length");
    nea = se_sp_get(p, map, "axial_stiffness");
    ways = (nsp != NULL) + (nvf != NULL) + (nt != NULL) + (nea != NULL);
    if (l->line_file != NULL && (ways > 0 || nmu != NULL || se_sp_get(p, map, "speed_uncertainty")))
        return se_sp_fail(p, map, SE_ERR_FORMAT,
                          "%s '%s': the line file gives the speeds: drop the speed keys", where, l->name);
    if (l->line_file == NULL && ways != 1)
        return se_sp_fail(p, map, SE_ERR_FORMAT,
                          "%s '%s': give the wave speed %s: speed, velocity_factor, tension with "
                          "mass_per_length, or axial_stiffness with mass_per_length (or a line file)",
                          where, l->name, ways == 0 ? "" : "one way only");
    if ((n = se_sp_get(p, map, "quantity")) != NULL) {
        if ((st = se_sp_text(p, n, "quantity", &v)) != SE_OK)
            return st;
        if (se_quantity_parse(v, &l->quantity, p->err) != SE_OK)
            return se_sp_fail(p, n, SE_ERR_ARG, "quantity: %s", p->err->message);
        l->have_quantity = 1;
    }
    if (nsp != NULL) {
        if ((st = se_sp_text(p, nsp, "speed", &v)) != SE_OK)
            return st;
        if (se_unit_parse(v, SE_UNIT_SPEED, "m/s", &l->speed_m_s, p->err) != SE_OK)
            return se_sp_fail(p, nsp, p->err->code, "speed: %s", p->err->message);
        snprintf(l->speed_source, sizeof l->speed_source, "given (speed: %s)", v);
    } else if (nvf != NULL) {
        if ((st = se_sp_text(p, nvf, "velocity_factor", &v)) != SE_OK)
            return st;
        if (se_unit_parse(v, SE_UNIT_RATIO, NULL, &l->velocity_factor, p->err) != SE_OK)
            return se_sp_fail(p, nvf, p->err->code, "velocity_factor: %s", p->err->message);
        if (!(l->velocity_factor > 0.0 && l->velocity_factor <= 1.0))
            return se_sp_fail(p, nvf, SE_ERR_RANGE, "velocity_factor %g is not in (0, 1]",
                              l->velocity_factor);
        l->speed_m_s = se_speed_electrical(l->velocity_factor);
        if (!l->have_quantity)
            l->quantity = SE_Q_VOLTAGE;
        snprintf(l->speed_source, sizeof l->speed_source, "velocity factor %.6g x c (299792458 m/s)",
                 l->velocity_factor);
    } else if (nt != NULL || nea != NULL) {
        const yaml_node_t *nf = nt != NULL ? nt : nea;
        const char *fk = nt != NULL ? "tension" : "axial_stiffness";
        double f;
        if (nmu == NULL)
            return se_sp_fail(p, nf, SE_ERR_FORMAT, "%s needs mass_per_length", fk);
        if ((st = se_sp_text(p, nf, fk, &v)) != SE_OK)
            return st;
        if (se_unit_parse(v, nt != NULL ? SE_UNIT_FORCE : SE_UNIT_STIFFNESS, NULL, &f, p->err) != SE_OK)
            return se_sp_fail(p, nf, p->err->code, "%s: %s", fk, p->err->message);
        if ((st = se_sp_text(p, nmu, "mass_per_length", &v)) != SE_OK)
            return st;
        if (se_unit_parse(v, SE_UNIT_LINEAR_DENSITY, NULL, &l->mass_per_length_kg_m, p->err) != SE_OK)
            return se_sp_fail(p, nmu, p->err->code, "mass_per_length: %s", p->err->message);
        if (!(f > 0.0) || !(l->mass_per_length_kg_m > 0.0))
            return se_sp_fail(p, nf, SE_ERR_RANGE, "%s and mass_per_length must be positive", fk);
        if (nt != NULL) {
            l->tension_n = f;
            l->speed_m_s = se_speed_transverse(f, l->mass_per_length_kg_m);
            snprintf(l->speed_source, sizeof l->speed_source,
                     "transverse, sqrt(T/mu) with T = %.6g N, mu = %.6g kg/m", f, l->mass_per_length_kg_m);
        } else {
            l->axial_stiffness_n = f;
            l->speed_m_s = se_speed_longitudinal(f, l->mass_per_length_kg_m);
            snprintf(l->speed_source, sizeof l->speed_source,
                     "longitudinal, sqrt(EA/mu) with EA = %.6g N, mu = %.6g kg/m", f,
                     l->mass_per_length_kg_m);
        }
    } else if (nmu != NULL) {
        return se_sp_fail(p, nmu, SE_ERR_FORMAT, "mass_per_length needs tension or axial_stiffness");
    }
    if (l->line_file == NULL && se_check_speed(l->speed_m_s, p->err) != SE_OK)
        return se_sp_fail(p, map, SE_ERR_RANGE, "%s: %s", where, p->err->message);
    if (l->line_file != NULL)
        snprintf(l->speed_source, sizeof l->speed_source, "from the line file");
    if ((n = se_sp_get(p, map, "speed_uncertainty")) != NULL) {
        double u;
        if ((st = se_sp_text(p, n, "speed_uncertainty", &v)) != SE_OK)
            return st;
        if (se_unit_parse(v, SE_UNIT_RATIO, NULL, &u, p->err) != SE_OK)
            return se_sp_fail(p, n, p->err->code, "speed_uncertainty: %s", p->err->message);
        /* a bare number is a percentage, as for --speed-uncertainty */
        l->speed_uncertainty = strchr(v, '%') != NULL ? u : u / 100.0;
        if (!(l->speed_uncertainty >= 0.0 && l->speed_uncertainty < 0.5))
            return se_sp_fail(p, n, SE_ERR_RANGE, "speed_uncertainty %g %% is not in [0, 50) %%",
                              l->speed_uncertainty * 100.0);
    }
    if ((n = se_sp_get(p, map, "source_end")) != NULL) {
        if (l->line_file != NULL)
            return se_sp_fail(p, n, SE_ERR_FORMAT, "the line file gives the source end: drop source_end");
        if ((st = se_sp_text(p, n, "source_end", &v)) != SE_OK)
            return st;
        if (strcmp(v, "estimate") == 0)
            l->source_reflection = NAN;
        else if (se_termination_parse(v, l->quantity, &l->source_reflection, p->err) != SE_OK)
            return se_sp_fail(p, n, SE_ERR_ARG, "source_end: %s (or 'estimate')", p->err->message);
        l->have_source_end = 1;
    } else if (l->line_file == NULL) {
        l->source_reflection = NAN; /* estimated from the data, as locate does without --source-end */
    }
    if ((n = se_sp_get(p, map, "false_alarms")) != NULL) {
        char *end;
        if ((st = se_sp_text(p, n, "false_alarms", &v)) != SE_OK)
            return st;
        l->false_alarms = strtod(v, &end);
        if (end == v || *end != '\0' || !(l->false_alarms > 0.0 && l->false_alarms <= 1000.0))
            return se_sp_fail(p, n, SE_ERR_RANGE, "false_alarms '%s' is not a number in (0, 1000]", v);
    }
    if ((n = se_sp_get(p, map, "confidence")) != NULL) {
        char *end;
        if ((st = se_sp_text(p, n, "confidence", &v)) != SE_OK)
            return st;
        l->confidence = strtod(v, &end);
        if (end == v || *end != '\0' || !(l->confidence > 0.0 && l->confidence < 1.0))
            return se_sp_fail(p, n, SE_ERR_RANGE, "confidence '%s' is not a number in (0, 1)", v);
    }
    if ((n = se_sp_get(p, map, "skin_loss")) != NULL) {
        /* K in s^0.5/m, a datasheet attenuation, or "estimate" (as locate --skin-loss) */
        if ((st = se_sp_text(p, n, "skin_loss", &v)) != SE_OK)
            return st;
        if (strcmp(v, "estimate") == 0)
            l->skin_k_s05_per_m = NAN;
        else if (se_skin_loss_parse(v, &l->skin_k_s05_per_m, p->err) != SE_OK)
            return se_sp_fail(p, n, SE_ERR_FORMAT, "skin_loss: %s (or 'estimate')", p->err->message);
    }
    return SE_OK;
}

se_survey *se_survey_parse_string(const char *text, const char *base_dir, const char *name,
                                  se_error *err)
{
    static const char *const top_keys[] = {"site", "date", "prepared_by", "job", "lines", NULL};
    static const char *const text_keys[] = {"site", "date", "prepared_by", "job"};
    yaml_parser_t parser;
    yaml_document_t doc;
    yaml_node_t *root, *lines;
    se_survey *s = NULL;
    se_sp p;
    se_status st = SE_OK;
    size_t k;
    se_error local;

    if (err == NULL)
        err = &local;
    if (text == NULL)
        return se_fail(err, SE_ERR_ARG, "survey: no text"), NULL;
    p.doc = &doc;
    p.name = name != NULL ? name : "<string>";
    p.base = base_dir != NULL ? base_dir : ".";
    p.err = err;
    if (!yaml_parser_initialize(&parser)) {
        se_fail(err, SE_ERR_NOMEM, "%s: cannot start the YAML parser", p.name);
        return NULL;
    }
    yaml_parser_set_input_string(&parser, (const unsigned char *)text, strlen(text));
    if (!yaml_parser_load(&parser, &doc)) {
        se_fail(err, SE_ERR_FORMAT, "%s:%lu:%lu: YAML syntax: %s", p.name,
                (unsigned long)parser.problem_mark.line + 1, (unsigned long)parser.problem_mark.column + 1,
                parser.problem ? parser.problem : "error");
        yaml_parser_delete(&parser);
        return NULL;
    }
    {
        /* one file, one survey: a second document ("---") would otherwise be ignored */
        yaml_document_t next;
        int loaded = yaml_parser_load(&parser, &next);
        const yaml_node_t *r2 = loaded ? yaml_document_get_root_node(&next) : NULL;
        if (!loaded || r2 != NULL) {
            if (!loaded)
                se_fail(err, SE_ERR_FORMAT, "%s:%lu:%lu: YAML syntax: %s", p.name,
                        (unsigned long)parser.problem_mark.line + 1,
                        (unsigned long)parser.problem_mark.column + 1,
                        parser.problem ? parser.problem : "error");
            else
                se_fail(err, SE_ERR_FORMAT,
                        "%s:%lu:%lu: a second YAML document: a survey file holds one survey (put "
                        "every line under its 'lines')",
                        p.name, (unsigned long)r2->start_mark.line + 1,
                        (unsigned long)r2->start_mark.column + 1);
            if (loaded)
                yaml_document_delete(&next);
            yaml_document_delete(&doc);
            yaml_parser_delete(&parser);
            return NULL;
        }
        yaml_document_delete(&next);
    }
    yaml_parser_delete(&parser);
    root = yaml_document_get_root_node(&doc);
    if (root == NULL) {
        se_fail(err, SE_ERR_FORMAT, "%s: the survey file is empty", p.name);
        yaml_document_delete(&doc);
        return NULL;
    }
    s = calloc(1, sizeof *s);
    if (s == NULL) {
        se_fail(err, SE_ERR_NOMEM, "out of memory for the survey");
        yaml_document_delete(&doc);
        return NULL;
    }
    if ((st = se_sp_keys(&p, root, top_keys, "the survey file")) != SE_OK)
        goto fail;
    s->path = se_strdup(p.name, err);
    s->base_dir = se_strdup(p.base, err);
    if (s->path == NULL || s->base_dir == NULL) {
        st = SE_ERR_NOMEM;
        goto fail;
    }
    for (k = 0; k < 4; k++) {
        yaml_node_t *n = se_sp_get(&p, root, text_keys[k]);
        char **dst[4] = {&s->site, &s->date, &s->prepared_by, &s->job};
        const char *v;
        if (n == NULL)
            continue;
        if ((st = se_sp_text(&p, n, text_keys[k], &v)) != SE_OK)
            goto fail;
        if ((*dst[k] = se_strdup(v, err)) == NULL) {
            st = SE_ERR_NOMEM;
            goto fail;
        }
    }
    lines = se_sp_get(&p, root, "lines");
    if (lines == NULL || lines->type != YAML_SEQUENCE_NODE ||
        lines->data.sequence.items.top == lines->data.sequence.items.start) {
        st = se_sp_fail(&p, lines != NULL ? lines : root, SE_ERR_FORMAT,
                        "'lines' must be a non-empty list of lines");
        goto fail;
    }
    s->n_lines = (size_t)(lines->data.sequence.items.top - lines->data.sequence.items.start);
    s->lines = calloc(s->n_lines, sizeof *s->lines);
    if (s->lines == NULL) {
        s->n_lines = 0;
        st = se_fail(err, SE_ERR_NOMEM, "out of memory for the survey lines");
        goto fail;
    }
    for (k = 0; k < s->n_lines; k++) {
        yaml_node_t *ln = yaml_document_get_node(&doc, lines->data.sequence.items.start[k]);
        if ((st = se_sp_line(&p, ln, k, &s->lines[k])) != SE_OK)
            goto fail;
    }
    yaml_document_delete(&doc);
    return s;
fail:
    (void)st;
    yaml_document_delete(&doc);
    se_survey_free(s);
    return NULL;
}

se_survey *se_survey_read(const char *path, se_error *err)
{
    FILE *f;
    char *text = NULL, *dir, *slash;
    size_t cap = 0, len = 0, got;
    se_survey *s;
    if (path == NULL) {
        se_fail(err, SE_ERR_ARG, "survey: no path");
        return NULL;
    }
    f = fopen(path, "rb");
    if (f == NULL) {
        se_fail(err, SE_ERR_IO, "%s: cannot open the survey file", path);
        return NULL;
    }
    do {
        if (len + 4096 + 1 > cap) {
            char *t;
            cap = cap ? 2 * cap : 8192;
            if (cap > ((size_t)1 << 26)) {
                free(text);
                fclose(f);
                se_fail(err, SE_ERR_FORMAT, "%s: over 64 MiB: not a survey file", path);
                return NULL;
            }
            t = realloc(text, cap);
            if (t == NULL) {
                free(text);
                fclose(f);
                se_fail(err, SE_ERR_NOMEM, "%s: out of memory", path);
                return NULL;
            }
            text = t;
        }
        got = fread(text + len, 1, 4096, f);
        len += got;
    } while (got > 0);
    if (ferror(f)) {
        free(text);
        fclose(f);
        se_fail(err, SE_ERR_IO, "%s: read error", path);
        return NULL;
    }
    fclose(f);
    text[len] = '\0';
    if (strlen(text) != len) {
        free(text);
        se_fail(err, SE_ERR_FORMAT, "%s: a NUL byte: not a text file", path);
        return NULL;
    }
    dir = se_strdup(path, err);
    if (dir == NULL) {
        free(text);
        return NULL;
    }
    slash = strrchr(dir, '/');
    if (slash == NULL)
        strcpy(dir, ".");
    else if (slash == dir)
        dir[1] = '\0';
    else
        *slash = '\0';
    s = se_survey_parse_string(text, dir, path, err);
    free(dir);
    free(text);
    return s;
}

static void se_survey_line_free(se_survey_line *l)
{
    size_t i;
    free(l->name);
    free(l->line_file);
    for (i = 0; i < l->n_recordings; i++)
        free(l->recordings[i]);
    free(l->recordings);
    free(l->baseline);
    free(l->baseline_date);
    free(l->pulse);
}

void se_survey_free(se_survey *s)
{
    size_t i;
    if (s == NULL)
        return;
    for (i = 0; i < s->n_lines; i++)
        se_survey_line_free(&s->lines[i]);
    free(s->lines);
    free(s->path);
    free(s->base_dir);
    free(s->site);
    free(s->date);
    free(s->prepared_by);
    free(s->job);
    free(s);
}

const char *se_survey_path_as_given(const se_survey *survey, const char *path)
{
    size_t n;
    if (survey == NULL || path == NULL || survey->base_dir == NULL || strcmp(survey->base_dir, ".") == 0)
        return path;
    n = strlen(survey->base_dir);
    /* se_sp_path joins base and the given path with one '/' (a root base "/" ends in it already) */
    if (strncmp(path, survey->base_dir, n) != 0)
        return path;
    if (n > 0 && survey->base_dir[n - 1] == '/')
        return path[n] != '\0' ? path + n : path;
    return path[n] == '/' && path[n + 1] != '\0' ? path + n + 1 : path;
}

void se_survey_run_config_init(se_survey_run_config *cfg)
{
    memset(cfg, 0, sizeof *cfg);
    cfg->jobs = 1;
}

/* Reference and locate for one recording (FFTW's planner lock is on). it may be NULL (baseline). */
static se_status se_survey_locate(se_runner *r, const se_survey_line *sl, const char *path,
                                  const se_line *line, const se_expected_event *exp, size_t nexp,
                                  se_locate_result *res, se_survey_item *it, se_error *err)
{
    se_recording *rec, *pr = NULL;
    se_locate_config cfg;
    double *owned = NULL;
    se_status st;
    char desc[160] = "";

    (void)r;
    memset(res, 0, sizeof *res);
    rec = se_recording_read(path, NULL, err);
    if (rec == NULL)
        return err->code;
    se_locate_config_init(&cfg);
    cfg.keep_trace = 1;
    cfg.quantity = sl->quantity;
    cfg.speed_m_s = sl->speed_m_s;
    cfg.speed_uncertainty = sl->speed_uncertainty;
    cfg.false_alarms = sl->false_alarms;
    cfg.confidence = sl->confidence;
    cfg.source_reflection = sl->source_reflection;
    cfg.skin_k_s05_per_m = sl->skin_k_s05_per_m;
    if (line != NULL) {
        cfg.quantity = line->quantity;
        cfg.source_reflection = line->source_end_r;
        cfg.map = se_line_distmap(line);
        cfg.expected = exp;
        cfg.n_expected = nexp;
    }
    if (sl->channel > rec->channels) {
        st = se_fail(err, SE_ERR_ARG, "%s: channel %u: the recording has %u channel%s", path, sl->channel,
                     rec->channels, rec->channels == 1 ? "" : "s");
        goto done;
    }
    if (sl->pulse_channel > 0) {
        size_t b, e;
        const double *pc;
        if (sl->pulse_channel > rec->channels) {
            st = se_fail(err, SE_ERR_ARG, "%s: pulse_channel %u: the recording has %u channel%s", path,
                         sl->pulse_channel, rec->channels, rec->channels == 1 ? "" : "s");
            goto done;
        }
        pc = se_recording_channel(rec, sl->pulse_channel - 1);
        if ((st = se_pulse_support(pc, rec->frames, &b, &e, err)) != SE_OK)
            goto done;
        cfg.reference = pc + b;
        cfg.reference_length = e - b;
        cfg.reference_offset = b;
        cfg.pilot = se_recording_channel(rec, (unsigned)(sl->pulse_channel - 1)); /* repeated shots */
        cfg.reference_kind = SE_REF_CHANNEL;
        snprintf(desc, sizeof desc, "channel %u", sl->pulse_channel);
    } else if (sl->pulse != NULL && se_pulse_is_spec(sl->pulse)) {
        se_pulse_shape sh;
        size_t m;
        if ((st = se_pulse_parse(sl->pulse, &sh, err)) != SE_OK ||
            (st = se_pulse_render(&sh, rec->rate, &owned, &m, err)) != SE_OK)
            goto done;
        cfg.reference = owned;
        cfg.reference_length = m;
        cfg.reference_kind = SE_REF_SYNTHETIC;
        se_pulse_describe(&sh, desc, sizeof desc);
    } else if (sl->pulse != NULL) {
        size_t b, e;
        pr = se_recording_read(sl->pulse, NULL, err);
        if (pr == NULL) {
            st = err->code;
            goto done;
        }
        if (fabs(pr->rate - rec->rate) > 1e-9 * rec->rate) {
            st = se_fail(err, SE_ERR_DATA, "%s: sample rate %.10g Hz differs from %s's %.10g Hz",
                         sl->pulse, pr->rate, path, rec->rate);
            goto done;
        }
        if ((st = se_pulse_support(pr->data, pr->frames, &b, &e, err)) != SE_OK)
            goto done;
        cfg.reference = pr->data + b;
        cfg.reference_length = e - b;
        cfg.reference_kind = SE_REF_FILE;
        snprintf(desc, sizeof desc, "file %s", sl->pulse);
        if (it != NULL && (st = se_sha256_file(sl->pulse, it->reference_sha256, err)) != SE_OK)
            goto done;
    } else {
        snprintf(desc, sizeof desc, "self (direct arrival in the response)");
    }
    st = se_locate(se_recording_channel(rec, sl->channel - 1), rec->frames, rec->rate, &cfg, res, err);
    if (st != SE_OK) {
        char why[SE_ERROR_MESSAGE_SIZE];
        snprintf(why, sizeof why, "%s", err->message);
        se_fail(err, st, "%s: %s", path, why);
        goto done;
    }
    if (it != NULL) {
        snprintf(it->reference, sizeof it->reference, "%s", desc);
        snprintf(it->format, sizeof it->format, "%s", rec->format);
        it->info.input_frames = rec->frames;
        it->info.input_channels = rec->channels;
    }
done:
    free(owned);
    se_recording_free(pr);
    se_recording_free(rec);
    return st;
}

static void se_survey_do(se_runner *r, se_survey_item *it)
{
    const se_survey_line *sl = &r->survey->lines[it->line];
    const char *path = sl->recordings[it->recording];
    se_error *err = &it->err;
    se_status st;

    se_error_clear(err);
    se_run_info_init(&it->info);
    if (sl->line_file != NULL) {
        it->line_desc = se_line_read(sl->line_file, err);
        if (it->line_desc == NULL) {
            it->status = err->code;
            return;
        }
        if ((st = se_line_expected_events(it->line_desc, &it->expected, &it->n_expected, err)) != SE_OK) {
            it->status = st;
            return;
        }
    }
    if ((st = se_sha256_file(path, it->sha256, err)) != SE_OK) {
        it->status = st;
        return;
    }
    st = se_survey_locate(r, sl, path, it->line_desc, it->expected, it->n_expected, &it->result, it, err);
    if (st != SE_OK) {
        it->status = st;
        return;
    }
    it->info.input_file = path;
    it->info.input_sha256 = it->sha256;
    it->info.input_format = it->format;
    it->info.channel = sl->channel;
    it->info.reference = it->reference;
    it->info.reference_sha256 = it->reference_sha256[0] ? it->reference_sha256 : NULL;
    it->info.speed_source = sl->speed_source;
    it->info.tension_n = sl->tension_n;
    it->info.mass_per_length_kg_m = sl->mass_per_length_kg_m;
    it->info.axial_stiffness_n = sl->axial_stiffness_n;
    it->info.velocity_factor = sl->velocity_factor;
    it->info.speed_uncertainty = sl->speed_uncertainty;
    it->info.false_alarms = sl->false_alarms;
    it->info.confidence = sl->confidence;
    it->info.source_reflection = it->line_desc != NULL ? it->line_desc->source_end_r : sl->source_reflection;
    it->info.line_file = sl->line_file;
    it->info.line_name = it->line_desc != NULL ? it->line_desc->name : NULL;
    it->info.expected = it->expected;
    it->info.n_expected = it->n_expected;
    if (sl->baseline != NULL) {
        se_compare_config cc;
        if ((st = se_sha256_file(sl->baseline, it->baseline_sha256, err)) != SE_OK ||
            (st = se_survey_locate(r, sl, sl->baseline, it->line_desc, it->expected, it->n_expected,
                                   &it->baseline_result, NULL, err)) != SE_OK) {
            char why[SE_ERROR_MESSAGE_SIZE];
            snprintf(why, sizeof why, "%s", err->message);
            se_fail(err, st, "baseline: %s", why);
            it->status = st;
            return;
        }
        se_compare_config_init(&cc);
        cc.false_alarms = sl->false_alarms;
        cc.map = it->line_desc != NULL ? se_line_distmap(it->line_desc) : NULL;
        if ((st = se_compare(&it->baseline_result, &it->result, &cc, &it->compare, err)) != SE_OK) {
            it->status = st;
            return;
        }
        it->compared = 1;
    }
    it->json = se_survey_item_json(r->survey, it, err);
    if (it->json == NULL)
        it->status = err->code ? err->code : SE_ERR_NOMEM;
}

static void *se_survey_worker(void *arg)
{
    se_runner *r = arg;
    for (;;) {
        size_t k;
        pthread_mutex_lock(&r->lock);
        k = r->next < r->n_items ? r->next++ : SIZE_MAX;
        pthread_mutex_unlock(&r->lock);
        if (k == SIZE_MAX)
            break;
        se_survey_do(r, &r->items[k]);
        if (r->items[k].status != SE_OK && r->items[k].json == NULL)
            r->items[k].json = se_survey_item_json(r->survey, &r->items[k], NULL);
        pthread_mutex_lock(&r->lock);
        r->done++;
        if (r->cfg->progress != NULL)
            r->cfg->progress(r->cfg->user, r->done, r->n_items);
        pthread_mutex_unlock(&r->lock);
    }
    return NULL;
}

se_status se_survey_run(const se_survey *survey, const se_survey_run_config *cfg,
                        se_survey_item **items, size_t *n_items, se_error *err)
{
    se_survey_run_config def;
    se_runner r;
    pthread_t *th = NULL;
    size_t i, k, n = 0, jobs, started = 0;
    se_status st = SE_OK;

    if (items == NULL || n_items == NULL || survey == NULL)
        return se_fail(err, SE_ERR_ARG, "survey run: NULL argument");
    *items = NULL;
    *n_items = 0;
    if (cfg == NULL) {
        se_survey_run_config_init(&def);
        cfg = &def;
    }
    if (cfg->shard_n > 0 && (cfg->shard_k < 1 || cfg->shard_k > cfg->shard_n))
        return se_fail(err, SE_ERR_ARG, "shard %zu/%zu: K must be in 1..N", cfg->shard_k, cfg->shard_n);
    for (i = 0; i < survey->n_lines; i++)
        if (cfg->shard_n == 0 || i % cfg->shard_n == cfg->shard_k - 1)
            n += survey->lines[i].n_recordings;
    if (n == 0)
        return SE_OK;
    memset(&r, 0, sizeof r);
    r.survey = survey;
    r.cfg = cfg;
    r.items = se_calloc(n, sizeof *r.items, "survey items", err);
    if (r.items == NULL)
        return SE_ERR_NOMEM;
    for (i = 0, n = 0; i < survey->n_lines; i++) {
        if (!(cfg->shard_n == 0 || i % cfg->shard_n == cfg->shard_k - 1))
            continue;
        for (k = 0; k < survey->lines[i].n_recordings; k++, n++) {
            r.items[n].line = i;
            r.items[n].recording = k;
        }
    }
    r.n_items = n;
    jobs = cfg->jobs == 0 ? 1 : cfg->jobs;
    if (jobs > n)
        jobs = n;
    /* FFTW's planner is not thread-safe by itself: this switches on FFTW's own planner lock
     * (libfftw3_threads), so the workers can run se_locate, which plans, side by side. */
    fftw_make_planner_thread_safe();
    fftwf_make_planner_thread_safe();
    if (pthread_mutex_init(&r.lock, NULL) != 0) {
        free(r.items);
        return se_fail(err, SE_ERR_NOMEM, "survey run: cannot create a mutex");
    }
    if (jobs <= 1) {
        se_survey_worker(&r);
    } else {
        th = se_calloc(jobs, sizeof *th, "worker threads", err);
        if (th == NULL) {
            st = SE_ERR_NOMEM;
        } else {
            for (started = 0; started < jobs; started++)
                if (pthread_create(&th[started], NULL, se_survey_worker, &r) != 0)
                    break;
            if (started == 0)
                se_survey_worker(&r); /* no thread could start: do the work here */
            for (i = 0; i < started; i++)
                pthread_join(th[i], NULL);
            free(th);
        }
    }
    pthread_mutex_destroy(&r.lock);
    if (st != SE_OK) {
        se_survey_items_free(r.items, r.n_items);
        return st;
    }
    *items = r.items;
    *n_items = r.n_items;
    return SE_OK;
}

void se_survey_items_free(se_survey_item *items, size_t n_items)
{
    size_t i;
    if (items == NULL)
        return;
    for (i = 0; i < n_items; i++) {
        se_locate_result_free(&items[i].result);
        se_locate_result_free(&items[i].baseline_result);
        se_compare_result_free(&items[i].compare);
        free(items[i].expected);
        se_line_free(items[i].line_desc);
        free(items[i].json);
    }
    free(items);
}

/* A finite number or JSON null. */
static json_t *se_jnum(double v)
{
    return isfinite(v) ? json_real(v) : json_null();
}

char *se_survey_item_json(const se_survey *survey, const se_survey_item *it, se_error *err)
{
    json_t *root = NULL, *sv;
    char *text = NULL, *out;
    const se_survey_line *sl;

    if (survey == NULL || it == NULL || it->line >= survey->n_lines) {
        se_fail(err, SE_ERR_ARG, "survey item JSON: bad item");
        return NULL;
    }
    sl = &survey->lines[it->line];
    if (it->status == SE_OK) {
        json_error_t je;
        text = se_result_json(&it->result, &it->info, err);
        if (text == NULL)
            return NULL;
        root = json_loads(text, 0, &je);
        free(text);
        text = NULL;
    } else {
        root = json_object();
        if (root != NULL) {
            json_object_set_new(root, "status", json_string(se_strerror(it->status)));
            json_object_set_new(root, "error", json_string(it->err.message));
            json_object_set_new(root, "input_file", json_string(sl->recordings[it->recording]));
        }
    }
    if (root == NULL) {
        se_fail(err, SE_ERR_NOMEM, "survey item JSON: out of memory");
        return NULL;
    }
    sv = json_object();
    if (sv != NULL) {
        json_object_set_new(sv, "site", survey->site ? json_string(survey->site) : json_null());
        json_object_set_new(sv, "line", json_string(sl->name));
        json_object_set_new(sv, "line_index", json_integer((json_int_t)it->line + 1));
        json_object_set_new(sv, "recording_index", json_integer((json_int_t)it->recording + 1));
        json_object_set_new(root, "survey", sv);
    }
    if (it->status == SE_OK && it->compared) {
        const se_compare_result *c = &it->compare;
        json_t *co = json_object(), *arr = json_array();
        size_t i;
        if (co != NULL && arr != NULL) {
            json_object_set_new(co, "baseline_file", json_string(sl->baseline));
            json_object_set_new(co, "baseline_sha256", json_string(it->baseline_sha256));
            json_object_set_new(co, "stretch", se_jnum(c->stretch));
            json_object_set_new(co, "speed_change", se_jnum(c->speed_change));
            json_object_set_new(co, "gain", se_jnum(c->gain));
            json_object_set_new(co, "correlation", se_jnum(c->correlation));
            json_object_set_new(co, "residual_sigma", se_jnum(c->residual_sigma));
            json_object_set_new(co, "threshold", se_jnum(c->threshold));
            json_object_set_new(co, "n_faults", json_integer((json_int_t)c->n_faults));
            for (i = 0; i < c->n_changes; i++) {
                const se_change *ch = &c->changes[i];
                json_t *o = json_object();
                if (o == NULL)
                    break;
                json_object_set_new(o, "kind", json_string(se_change_kind_name(ch->kind)));
                json_object_set_new(o, "delay_s", se_jnum(ch->delay_s));
                json_object_set_new(o, "distance_m", se_jnum(ch->distance_m));
                json_object_set_new(o, "shift_m", se_jnum(ch->shift_m));
                json_object_set_new(o, "reflection", se_jnum(ch->reflection_now));
                json_object_set_new(o, "reflection_baseline", se_jnum(ch->reflection_baseline));
                json_object_set_new(o, "significance", se_jnum(ch->significance));
                json_object_set_new(o, "secondary", json_boolean(ch->secondary));
                json_array_append_new(arr, o);
            }
            json_object_set_new(co, "changes", arr);
            json_object_set_new(root, "compare", co);
        } else {
            json_decref(co);
            json_decref(arr);
        }
    }
    text = json_dumps(root, JSON_COMPACT | JSON_PRESERVE_ORDER | JSON_REAL_PRECISION(12));
    json_decref(root);
    if (text == NULL) {
        se_fail(err, SE_ERR_NOMEM, "survey item JSON: out of memory");
        return NULL;
    }
    /* jansson's buffer is malloc'd by default, but copy so callers free() with certainty */
    out = se_strdup(text, err);
    free(text);
    return out;
}
