/* strandecho: the locate result as JSON through jansson. */
#include "strandecho/jsonout.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>

#include "internal.h"
#include "strandecho/caution.h"
#include "strandecho/line.h"

static int se_jset(json_t *obj, const char *key, json_t *val);
static json_t *se_jnum(double v);
static json_t *se_jstr(const char *s);

void se_run_info_init(se_run_info *info)
{
    memset(info, 0, sizeof *info);
    info->tension_n = NAN;
    info->mass_per_length_kg_m = NAN;
    info->axial_stiffness_n = NAN;
    info->velocity_factor = NAN;
    info->confidence = 0.95;
}

/* json_object_set_new that reports failure (val NULL counts as failure). */
static int se_jset(json_t *obj, const char *key, json_t *val)
{
    if (val == NULL)
        return -1;
    return json_object_set_new(obj, key, val);
}

/* Finite numbers as reals, NaN/Inf as null (JSON has no NaN). */
static json_t *se_jnum(double v)
{
    return isfinite(v) ? json_real(v) : json_null();
}

static json_t *se_jstr(const char *s)
{
    return s != NULL ? json_string(s) : json_null();
}

char *se_result_json(const se_locate_result *res, const se_run_info *info, se_error *err)
{
    json_t *root = NULL, *events = NULL;
    char *out = NULL, *copy = NULL;
    size_t i, len;
    int bad = 0;

    if (res == NULL || info == NULL) {
        se_fail(err, SE_ERR_ARG, "json: no result or no run information");
        return NULL;
    }
    root = json_object();
    events = json_array();
    if (root == NULL || events == NULL)
        goto nomem;
    bad |= se_jset(root, "tool", json_string("strandecho"));
    bad |= se_jset(root, "tool_version", json_string(se_version()));
    bad |= se_jset(root, "input_file", se_jstr(info->input_file));
    bad |= se_jset(root, "input_sha256", se_jstr(info->input_sha256));
    bad |= se_jset(root, "input_format", se_jstr(info->input_format));
    bad |= se_jset(root, "input_frames", json_integer((json_int_t)info->input_frames));
    bad |= se_jset(root, "input_channels", json_integer((json_int_t)info->input_channels));
    bad |= se_jset(root, "rate_hz", se_jnum(res->rate_hz));
    bad |= se_jset(root, "channel", json_integer((json_int_t)info->channel));
    bad |= se_jset(root, "reference", se_jstr(info->reference));
    if (info->reference_sha256 != NULL)
        bad |= se_jset(root, "reference_sha256", json_string(info->reference_sha256));
    bad |= se_jset(root, "reference_samples", json_integer((json_int_t)res->reference_length));
    bad |= se_jset(root, "line_file", se_jstr(info->line_file));
    bad |= se_jset(root, "line_name", se_jstr(info->line_name));
    bad |= se_jset(root, "quantity", json_string(se_quantity_name(res->quantity)));
    bad |= se_jset(root, "line_kind", json_string(res->electrical ? "electrical" : "mechanical"));
    bad |= se_jset(root, "speed_m_s", se_jnum(res->speed_m_s));
    bad |= se_jset(root, "speed_source", se_jstr(info->speed_source));
    bad |= se_jset(root, "speed_uncertainty_pct", se_jnum(info->speed_uncertainty * 100.0));
    bad |= se_jset(root, "tension_n", se_jnum(info->tension_n));
    bad |= se_jset(root, "mass_per_length_kg_m", se_jnum(info->mass_per_length_kg_m));
    bad |= se_jset(root, "axial_stiffness_n", se_jnum(info->axial_stiffness_n));
    bad |= se_jset(root, "velocity_factor", se_jnum(info->velocity_factor));
    bad |= se_jset(root, "source_reflection", se_jnum(info->source_reflection));
    bad |= se_jset(root, "time_origin_s", se_jnum(res->t0_s));
    bad |= se_jset(root, "dead_zone_m", se_jnum(res->dead_zone_m));
    bad |= se_jset(root, "dead_zone_s", se_jnum(res->dead_zone_s));
    bad |= se_jset(root, "resolution_m", se_jnum(res->resolution_m));
    bad |= se_jset(root, "record_range_m", se_jnum(res->record_range_m));
    bad |= se_jset(root, "rms_bandwidth_hz", se_jnum(res->rms_bandwidth_hz));
    bad |= se_jset(root, "noise_level", se_jnum(res->noise_level));
    bad |= se_jset(root, "threshold", se_jnum(res->threshold));
    bad |= se_jset(root, "threshold_sigma", se_jnum(res->threshold_sigma));
    bad |= se_jset(root, "false_alarms_per_record", se_jnum(info->false_alarms));
    bad |= se_jset(root, "confidence", se_jnum(info->confidence));
    bad |= se_jset(root, "noise_floored", json_boolean(res->noise_floored));
    bad |= se_jset(root, "noise_varies", json_boolean(res->noise_varies));
    bad |= se_jset(root, "noise_level_min", se_jnum(res->noise_varies ? res->noise_level_min : NAN));
    bad |= se_jset(root, "noise_level_max", se_jnum(res->noise_varies ? res->noise_level_max : NAN));
    bad |= se_jset(root, "clipped_samples", json_integer((json_int_t)res->clipped_samples));
    bad |= se_jset(root, "direct_clipped", json_boolean(res->direct_clipped));
    bad |= se_jset(root, "shots_found", json_integer((json_int_t)res->shots_found));
    bad |= se_jset(root, "shots_used", json_integer((json_int_t)res->shots_used));
    bad |= se_jset(root, "stack_gain_db", se_jnum(res->stack_gain_db));
    bad |= se_jset(root, "stack_expected_gain_db", se_jnum(res->stack_expected_gain_db));
    bad |= se_jset(root, "source_reflection_used", se_jnum(res->source_reflection));
    bad |= se_jset(root, "source_reflection_estimated", json_boolean(res->source_reflection_estimated));
    bad |= se_jset(root, "attenuation_db_per_m", se_jnum(res->attenuation_db_per_m));
    bad |= se_jset(root, "attenuation_estimated", json_boolean(res->attenuation_estimated));
    {
        static const char *const how[] = {NULL, "given", "known reflector", "end multiples"};
        int mth = res->attenuation_method;
        bad |= se_jset(root, "attenuation_method",
                       mth > 0 && mth <= SE_ATTEN_END_MULTIPLES ? json_string(how[mth])
                                                                : json_null());
    }
    bad |= se_jset(root, "attenuation_uncertainty_db_per_m",
                   se_jnum(res->attenuation_uncertainty_db_per_m));
    bad |= se_jset(root, "attenuation_repeats", json_integer((json_int_t)res->attenuation_repeats));
    bad |= se_jset(root, "skin_loss_s05_per_m",
                   se_jnum(res->skin_k_s05_per_m != 0.0 || res->skin_k_estimated
                               ? res->skin_k_s05_per_m
                               : NAN));
    bad |= se_jset(root, "skin_loss_uncertainty", se_jnum(res->skin_k_uncertainty));
    bad |= se_jset(root, "skin_loss_estimated", json_boolean(res->skin_k_estimated));
    bad |= se_jset(root, "skin_fit_echoes", json_integer((json_int_t)res->skin_fit_echoes));
    bad |= se_jset(root, "skin_explained", json_integer((json_int_t)res->skin_explained));
    bad |= se_jset(root, "ring_down_s", se_jnum(res->ring_down_s));
    bad |= se_jset(root, "shot_interval_s", se_jnum(res->shot_interval_s));
    bad |= se_jset(root, "shots_overlap", json_boolean(res->shots_overlap));
    {
        char wbuf[512];
        json_t *warn = json_array();
        if (warn == NULL)
            goto nomem;
        if (se_locate_overlap_warning(res, wbuf, sizeof wbuf))
            bad |= json_array_append_new(warn, json_string(wbuf));
        bad |= se_jset(root, "warnings", warn);
    }
    {
        json_t *dz = json_array();
        if (dz == NULL)
            goto nomem;
        for (i = 0; i < res->n_dead_zone_events; i++) {
            const se_event *ev = &res->dead_zone_events[i];
            json_t *e = json_object();
            if (e == NULL || json_array_append_new(dz, e) != 0) {
                json_decref(dz);
                goto nomem;
            }
            bad |= se_jset(e, "delay_s", se_jnum(ev->delay_s));
            bad |= se_jset(e, "distance_m", se_jnum(ev->distance_m));
            bad |= se_jset(e, "reflection", se_jnum(ev->reflection));
            bad |= se_jset(e, "snr_db", se_jnum(ev->snr_db));
        }
        bad |= se_jset(root, "dead_zone_events", dz);
    }
    for (i = 0; i < res->n_events; i++) {
        const se_event *ev = &res->events[i];
        json_t *e = json_object(), *mo;
        if (e == NULL || json_array_append_new(events, e) != 0)
            goto nomem;
        bad |= se_jset(e, "index", json_integer((json_int_t)(i + 1)));
        bad |= se_jset(e, "delay_s", se_jnum(ev->delay_s));
        bad |= se_jset(e, "delay_uncertainty_s", se_jnum(ev->delay_uncertainty_s));
        bad |= se_jset(e, "distance_m", se_jnum(ev->distance_m));
        bad |= se_jset(e, "distance_uncertainty_m", se_jnum(ev->distance_uncertainty_m));
        bad |= se_jset(e, "polarity", json_string(se_event_polarity(ev)));
        bad |= se_jset(e, "impedance", json_string(se_event_impedance(ev)));
        bad |= se_jset(e, "class", json_string(se_event_class(res, ev)));
        bad |= se_jset(e, "reflection", se_jnum(ev->reflection));
        bad |= se_jset(e, "reflection_uncertainty", se_jnum(ev->reflection_uncertainty));
        bad |= se_jset(e, "reflection_at_discontinuity", se_jnum(ev->reflection_at_discontinuity));
        bad |= se_jset(e, "fitted", json_boolean(ev->fitted));
        bad |= se_jset(e, "skin_corrected", json_boolean(ev->skin_corrected));
        bad |= se_jset(e, "skin_shift_s", se_jnum(ev->skin_corrected ? ev->skin_shift_s : NAN));
        bad |= se_jset(e, "snr_db", se_jnum(ev->snr_db));
        bad |= se_jset(e, "low_confidence", json_boolean(ev->low_confidence));
        bad |= se_jset(e, "clipped", json_boolean(ev->clipped || res->direct_clipped));
        bad |= se_jset(e, "multiple", json_boolean(ev->multiple));
        bad |= se_jset(e, "predicted_multiple", se_jnum(ev->predicted));
        bad |= se_jset(e, "previous_shot",
                       ev->multiple && ev->previous_shot > 0 ? json_integer(ev->previous_shot)
                                                             : json_null());
        bad |= se_jset(e, "expected",
                       ev->expected >= 0 && (size_t)ev->expected < info->n_expected
                           ? json_string(info->expected[ev->expected].name)
                           : json_null());
        if (ev->multiple) {
            mo = json_array();
            if (mo == NULL)
                goto nomem;
            if (ev->multiple_of[0] >= 0)
                bad |= json_array_append_new(mo, json_integer(ev->multiple_of[0] + 1));
            if (ev->multiple_of[1] >= 0)
                bad |= json_array_append_new(mo, json_integer(ev->multiple_of[1] + 1));
            bad |= se_jset(e, "multiple_of", mo);
        } else {
            bad |= se_jset(e, "multiple_of", json_null());
        }
    }
    bad |= json_object_set_new(root, "events", events);
    events = NULL;
    {
        json_t *missing = json_array();
        if (missing == NULL)
            goto nomem;
        for (i = 0; i < res->n_expected && i < info->n_expected; i++) {
            const se_expected_event *x = &info->expected[i];
            json_t *m;
            if (res->expected_found[i] >= 0)
                continue;
            m = json_object();
            if (m == NULL || json_array_append_new(missing, m) != 0) {
                json_decref(missing);
                goto nomem;
            }
            bad |= se_jset(m, "name", json_string(x->name));
            bad |= se_jset(m, "kind", se_jstr(x->kind));
            bad |= se_jset(m, "distance_m", se_jnum(x->distance_m));
            bad |= se_jset(m, "delay_s", se_jnum(x->round_trip_s));
            bad |= se_jset(m, "expected_reflection",
                           x->has_reflection ? se_jnum(x->amplitude) : json_null());
            bad |= se_jset(m, "within_record", json_boolean(x->round_trip_s <= res->record_range_s));
        }
        bad |= json_object_set_new(root, "missing", missing);
        bad |= se_jset(root, "end_missing", json_boolean(res->end_missing));
        bad |= se_jset(root, "break_event",
                       res->break_event >= 0 ? json_integer(res->break_event + 1) : json_null());
    }
    bad |= se_jset(root, "caution", json_string(se_caution_line(res->electrical)));
    if (bad)
        goto nomem;
    out = json_dumps(root, JSON_INDENT(2) | JSON_PRESERVE_ORDER | JSON_REAL_PRECISION(12));
    if (out == NULL)
        goto nomem;
    len = strlen(out);
    copy = malloc(len + 2);
    if (copy == NULL) {
        free(out);
        goto nomem;
    }
    memcpy(copy, out, len);
    copy[len] = '\n';
    copy[len + 1] = '\0';
    free(out);
    json_decref(root);
    return copy;
nomem:
    json_decref(events);
    json_decref(root);
    se_fail(err, SE_ERR_NOMEM, "json: cannot build the document");
    return NULL;
}
