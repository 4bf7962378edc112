/* strandecho: finite-difference line models from uniform lines, described lines and terminations. */
#include "strandecho/fdline.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "internal.h"
#include "strandecho/line.h"
#include "strandecho/pulse.h"

static se_fd_line *se_fdl_new(se_quantity q, se_error *err);
static se_status se_fdl_push(se_fd_line *m, double length_m, double speed, double z, se_error *err);
static se_status se_fdl_split(se_fd_line *m, double d, size_t *idx, se_error *err);
static void se_fdl_scale_from(se_fd_line *m, size_t idx, double ratio);
static se_status se_fdl_set_end(se_fd_line *m, double r_observed, se_error *err);
static se_status se_fdl_set_source(se_fd_line *m, double r_observed, se_error *err);
static double se_fdl_z(const se_fd_segment *s);
static double se_fdl_c(const se_fd_segment *s);

/* Relative tolerance for "on a segment boundary" and for the named coefficients -1, 0, +1. */
#define SE_FDL_EPS 1e-12

static double se_fdl_z(const se_fd_segment *s)
{
    return sqrt(s->tension_n * s->mu_kg_m);
}

static double se_fdl_c(const se_fd_segment *s)
{
    return sqrt(s->tension_n / s->mu_kg_m);
}

static se_fd_line *se_fdl_new(se_quantity q, se_error *err)
{
    se_fd_line *m;
    if (se_quantity_sign(q) == 0) {
        se_fail(err, SE_ERR_ARG, "fd line: quantity %d out of range", (int)q);
        return NULL;
    }
    m = se_calloc(1, sizeof *m, "fd line model", err);
    if (m == NULL)
        return NULL;
    m->quantity = q;
    m->source = SE_FD_SOURCE_MATCHED;
    m->far_end = SE_FD_END_ABSORBING;
    return m;
}

/* Append a segment of speed c and impedance z: T = z c, mu = z / c. */
static se_status se_fdl_push(se_fd_line *m, double length_m, double speed, double z, se_error *err)
{
    if (!(length_m > 0.0 && isfinite(length_m)) || !(speed > 0.0 && isfinite(speed)) ||
        !(z > 0.0 && isfinite(z)))
        return se_fail(err, SE_ERR_RANGE,
                       "fd line: segment %zu has length %g m, speed %g m/s, impedance %g: each must "
                       "be positive and finite",
                       m->n_segments + 1, length_m, speed, z);
    if (m->n_segments == m->cap_segments) {
        size_t cap = m->cap_segments ? 2 * m->cap_segments : 8, bytes;
        se_fd_segment *s;
        if (se_mul_size(cap, sizeof *s, &bytes) != 0)
            return se_fail(err, SE_ERR_NOMEM, "fd line: too many segments (%zu)", cap);
        s = realloc(m->segments, bytes);
        if (s == NULL)
            return se_fail(err, SE_ERR_NOMEM, "fd line: out of memory for %zu segments", cap);
        m->segments = s;
        m->cap_segments = cap;
    }
    m->segments[m->n_segments].length_m = length_m;
    m->segments[m->n_segments].tension_n = z * speed;
    m->segments[m->n_segments].mu_kg_m = z / speed;
    m->n_segments++;
    return SE_OK;
}

/* Make d (0 < d < end) a segment boundary; *idx is the index of the segment that starts at d. */
static se_status se_fdl_split(se_fd_line *m, double d, size_t *idx, se_error *err)
{
    double start = 0.0;
    size_t i;
    for (i = 0; i < m->n_segments; i++) {
        double len = m->segments[i].length_m, tol = SE_FDL_EPS * fmax(1.0, m->end_m);
        if (fabs(d - start) <= tol) {
            *idx = i;
            return SE_OK;
        }
        if (d < start + len - tol) {
            se_status st;
            se_fd_segment tail = m->segments[i];
            tail.length_m = start + len - d;
            /* push a copy at the end, then rotate it into place after segment i */
            st = se_fdl_push(m, tail.length_m, se_fdl_c(&tail), se_fdl_z(&tail), err);
            if (st != SE_OK)
                return st;
            memmove(&m->segments[i + 2], &m->segments[i + 1],
                    (m->n_segments - 2 - i) * sizeof m->segments[0]);
            m->segments[i + 1] = tail;
            m->segments[i].length_m = d - start;
            *idx = i + 1;
            return SE_OK;
        }
        start += len;
    }
    return se_fail(err, SE_ERR_RANGE, "fd line: %g m is beyond the line (%g m)", d, m->end_m);
}

/* Impedance of segments idx.. times ratio, speeds kept. */
static void se_fdl_scale_from(se_fd_line *m, size_t idx, double ratio)
{
    size_t j;
    for (j = idx; j < m->n_segments; j++) {
        m->segments[j].tension_n *= ratio;
        m->segments[j].mu_kg_m *= ratio;
    }
}

static se_status se_fdl_set_end(se_fd_line *m, double r_observed, se_error *err)
{
    double r = se_quantity_sign(m->quantity) * r_observed, ratio;
    const se_fd_segment *last;
    if (!(r >= -1.0 && r <= 1.0))
        return se_fail(err, SE_ERR_RANGE, "fd line: far-end coefficient %g is outside [-1, 1]",
                       r_observed);
    if (fabs(r + 1.0) <= SE_FDL_EPS) {
        m->far_end = SE_FD_END_FIXED;
        return SE_OK;
    }
    if (fabs(r - 1.0) <= SE_FDL_EPS) {
        m->far_end = SE_FD_END_FREE;
        return SE_OK;
    }
    m->far_end = SE_FD_END_ABSORBING;
    if (fabs(r) <= SE_FDL_EPS)
        return SE_OK;
    /* a partial end: a step into a matched tail (the tail's absorbing end is exact at Courant 1) */
    last = &m->segments[m->n_segments - 1];
    ratio = (1.0 - r) / (1.0 + r);
    m->has_tail = 1;
    return se_fdl_push(m, 0.01 * m->end_m, se_fdl_c(last), se_fdl_z(last) * ratio, err);
}

static se_status se_fdl_set_source(se_fd_line *m, double r_observed, se_error *err)
{
    double r = se_quantity_sign(m->quantity) * r_observed;
    if (fabs(r) <= SE_FDL_EPS) {
        m->source = SE_FD_SOURCE_MATCHED;
        return SE_OK;
    }
    if (fabs(r - 1.0) <= SE_FDL_EPS) {
        m->source = SE_FD_SOURCE_FREE;
        return SE_OK;
    }
    return se_fail(err, SE_ERR_RANGE,
                   "fd line: source-end coefficient %g (%+g in displacement) cannot be modelled: the "
                   "fd source is a force on a free end (+1 in displacement) or on a matched one (0)",
                   r_observed, r);
}

se_fd_line *se_fd_line_uniform(double speed_m_s, double impedance, double length_m, se_quantity q,
                               double source_r, double end_r, se_error *err)
{
    se_fd_line *m = se_fdl_new(q, err);
    if (m == NULL)
        return NULL;
    m->end_m = length_m;
    if (se_fdl_push(m, length_m, speed_m_s, impedance, err) != SE_OK ||
        se_fdl_set_source(m, source_r, err) != SE_OK || se_fdl_set_end(m, end_r, err) != SE_OK) {
        se_fd_line_free(m);
        return NULL;
    }
    return m;
}

se_fd_line *se_fd_line_from_line(const se_line *line, double step_s, se_error *err)
{
    se_line_interface *li = NULL;
    size_t n = 0, i;
    se_fd_line *m;
    double prev_d = 0.0, prev_t = 0.0, z;
    int sign;

    if (line == NULL)
        return se_fail(err, SE_ERR_ARG, "fd line: NULL line"), NULL;
    if (!line->prepared)
        return se_fail(err, SE_ERR_ARG, "fd line: the line is not prepared"), NULL;
    if (se_line_interfaces(line, step_s, &li, &n, err) != SE_OK)
        return NULL;
    m = se_fdl_new(line->quantity, err);
    if (m == NULL) {
        free(li);
        return NULL;
    }
    sign = se_quantity_sign(line->quantity);
    z = line->segments[0].impedance_near;
    if (!(z > 0.0 && isfinite(z)))
        z = 1.0; /* the line gives no impedance: only ratios matter */
    m->end_m = line->length_m;
    for (i = 0; i < n; i++) {
        double d = li[i].distance_m, t = li[i].one_way_s;
        if (d > prev_d + SE_FDL_EPS * fmax(1.0, line->length_m)) {
            if (!(t > prev_t)) {
                se_fail(err, SE_ERR_RANGE, "fd line: %s: interface at %g m has no travel time from "
                                           "the previous one",
                        line->source_name, d);
                goto fail;
            }
            if (se_fdl_push(m, d - prev_d, (d - prev_d) / (t - prev_t), z, err) != SE_OK)
                goto fail;
            prev_d = d;
            prev_t = t;
        }
        if (i + 1 < n) {
            double r = sign * li[i].reflection;
            if (!(fabs(r) < 1.0)) {
                se_fail(err, SE_ERR_RANGE,
                        "fd line: %s: interface at %g m reflects %g: a total reflector inside the "
                        "line cannot be a step (cut the line there instead)",
                        line->source_name, d, li[i].reflection);
                goto fail;
            }
            z *= (1.0 - r) / (1.0 + r);
        }
    }
    free(li);
    li = NULL;
    if (m->n_segments == 0) {
        se_fail(err, SE_ERR_RANGE, "fd line: %s has no length", line->source_name);
        goto fail;
    }
    m->end_m = prev_d;
    if (se_fdl_set_source(m, line->source_end_r, err) != SE_OK ||
        se_fdl_set_end(m, line->end_r, err) != SE_OK)
        goto fail;
    return m;
fail:
    free(li);
    se_fd_line_free(m);
    return NULL;
}

se_status se_fd_line_add_step(se_fd_line *m, double distance_m, double ratio, se_error *err)
{
    size_t idx;
    se_status st;
    if (m == NULL)
        return se_fail(err, SE_ERR_ARG, "fd line: NULL model");
    if (!(distance_m > 0.0 && distance_m < m->end_m))
        return se_fail(err, SE_ERR_RANGE, "fd line: step at %g m is not inside the line (0, %g m)",
                       distance_m, m->end_m);
    if (!(ratio > 0.0 && isfinite(ratio)))
        return se_fail(err, SE_ERR_RANGE,
                       "fd line: step at %g m has impedance ratio %g: it must be positive and finite",
                       distance_m, ratio);
    st = se_fdl_split(m, distance_m, &idx, err);
    if (st != SE_OK)
        return st;
    se_fdl_scale_from(m, idx, ratio);
    return SE_OK;
}

se_status se_fd_line_add_reflector(se_fd_line *m, double distance_m, double r_observed,
                                   se_error *err)
{
    double r;
    if (m == NULL)
        return se_fail(err, SE_ERR_ARG, "fd line: NULL model");
    r = se_quantity_sign(m->quantity) * r_observed;
    if (!(fabs(r) < 1.0))
        return se_fail(err, SE_ERR_RANGE,
                       "fd line: reflector at %g m with coefficient %g: a step needs |r| < 1 (a "
                       "total reflector is an end: cut the line there)",
                       distance_m, r_observed);
    return se_fd_line_add_step(m, distance_m, (1.0 - r) / (1.0 + r), err);
}

se_status se_fd_line_add_point(se_fd_line *m, const se_fd_point *point, se_error *err)
{
    if (m == NULL || point == NULL)
        return se_fail(err, SE_ERR_ARG, "fd line: NULL argument to se_fd_line_add_point");
    if (!(point->x_m >= 0.0 && point->x_m <= m->end_m))
        return se_fail(err, SE_ERR_RANGE, "fd line: point at %g m is not on the line [0, %g m]",
                       point->x_m, m->end_m);
    if (!(point->mass_kg >= 0.0 && isfinite(point->mass_kg)) ||
        !(point->spring_n_m >= 0.0 && isfinite(point->spring_n_m)) ||
        !(point->damping_n_s_m >= 0.0 && isfinite(point->damping_n_s_m)))
        return se_fail(err, SE_ERR_RANGE,
                       "fd line: point at %g m: mass %g kg, spring %g N/m, dashpot %g N s/m must "
                       "each be >= 0 and finite",
                       point->x_m, point->mass_kg, point->spring_n_m, point->damping_n_s_m);
    if (m->n_points == m->cap_points) {
        size_t cap = m->cap_points ? 2 * m->cap_points : 4, bytes;
        se_fd_point *p;
        if (se_mul_size(cap, sizeof *p, &bytes) != 0)
            return se_fail(err, SE_ERR_NOMEM, "fd line: too many points (%zu)", cap);
        p = realloc(m->points, bytes);
        if (p == NULL)
            return se_fail(err, SE_ERR_NOMEM, "fd line: out of memory for %zu points", cap);
        m->points = p;
        m->cap_points = cap;
    }
    m->points[m->n_points++] = *point;
    return SE_OK;
}

se_status se_fd_line_cut(se_fd_line *m, double distance_m, se_error *err)
{
    size_t idx, i;
    se_status st;
    if (m == NULL)
        return se_fail(err, SE_ERR_ARG, "fd line: NULL model");
    if (!(distance_m > 0.0 && distance_m < m->end_m))
        return se_fail(err, SE_ERR_RANGE, "fd line: cut at %g m is not inside the line (0, %g m)",
                       distance_m, m->end_m);
    for (i = 0; i < m->n_points; i++)
        if (m->points[i].x_m > distance_m)
            return se_fail(err, SE_ERR_RANGE, "fd line: point %zu at %g m is beyond the cut at %g m",
                           i + 1, m->points[i].x_m, distance_m);
    if (m->has_tail) {
        m->n_segments--;
        m->has_tail = 0;
    }
    st = se_fdl_split(m, distance_m, &idx, err);
    if (st != SE_OK)
        return st;
    m->n_segments = idx;
    m->end_m = distance_m;
    m->far_end = SE_FD_END_FREE;
    return SE_OK;
}

se_status se_fd_line_at(const se_fd_line *m, double distance_m, double *impedance,
                        double *speed_m_s, se_error *err)
{
    double start = 0.0;
    size_t i;
    if (m == NULL || impedance == NULL || speed_m_s == NULL)
        return se_fail(err, SE_ERR_ARG, "fd line: NULL argument to se_fd_line_at");
    if (!(distance_m >= 0.0 && distance_m < m->end_m))
        return se_fail(err, SE_ERR_RANGE, "fd line: %g m is not on the line [0, %g m)", distance_m,
                       m->end_m);
    for (i = 0; i < m->n_segments; i++) {
        start += m->segments[i].length_m;
        if (distance_m < start - SE_FDL_EPS * fmax(1.0, m->end_m) || i + 1 == m->n_segments)
            break;
    }
    *impedance = se_fdl_z(&m->segments[i]);
    *speed_m_s = se_fdl_c(&m->segments[i]);
    return SE_OK;
}

void se_fd_line_config(const se_fd_line *m, se_fd_config *cfg)
{
    if (m == NULL || cfg == NULL)
        return;
    cfg->segments = m->segments;
    cfg->n_segments = m->n_segments;
    cfg->points = m->points;
    cfg->n_points = m->n_points;
    cfg->source = m->source;
    cfg->far_end = m->far_end;
    cfg->output = m->quantity;
}

void se_fd_line_free(se_fd_line *m)
{
    if (m == NULL)
        return;
    free(m->segments);
    free(m->points);
    free(m);
}

se_status se_fd_direct_peak(const se_fd_config *cfg, double *peak, se_error *err)
{
    se_status st;
    double z1, t1, k, dur, h, integral = 0.0, prev = 0.0, best = 0.0;
    size_t n, i;
    se_quantity q;
    if (peak == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL peak in se_fd_direct_peak");
    st = se_fd_plan(cfg, NULL, err);
    if (st != SE_OK)
        return st;
    z1 = sqrt(cfg->segments[0].tension_n * cfg->segments[0].mu_kg_m);
    t1 = cfg->segments[0].tension_n;
    k = cfg->source == SE_FD_SOURCE_MATCHED ? 2.0 : 1.0;
    dur = cfg->pulse.duration_s;
    /* 64 points per output sample, at most 2^22 points over the pulse */
    n = (size_t)fmin(ceil(dur * cfg->rate_hz * 64.0), (double)((size_t)1 << 22)) + 1;
    h = dur / (double)(n - 1);
    q = cfg->output;
    for (i = 0; i < n; i++) {
        double t = (double)i * h, f = se_pulse_value(&cfg->pulse, t), v;
        integral += i > 0 ? 0.5 * h * (prev + f) : 0.0; /* trapezoid: int_0^t p */
        prev = f;
        switch (q) {
        case SE_Q_DISPLACEMENT:
            v = integral / (k * z1);
            break;
        case SE_Q_ACCELERATION: {
            double e = 1e-3 * h;
            /* one-sided at the ends of the support, where the shape may have a kink */
            double a = se_pulse_value(&cfg->pulse, fmax(t - e, 0.0));
            double b = se_pulse_value(&cfg->pulse, fmin(t + e, dur));
            v = (b - a) / (fmin(t + e, dur) - fmax(t - e, 0.0)) / (k * z1);
            break;
        }
        case SE_Q_FORCE:
        case SE_Q_VOLTAGE:
            v = f / k;
            break;
        case SE_Q_STRAIN:
            v = f / (k * t1);
            break;
        default: /* velocity, current */
            v = f / (k * z1);
            break;
        }
        if (fabs(v) > best)
            best = fabs(v);
    }
    *peak = best * fabs(cfg->pulse_amplitude_n);
    if (!(*peak > 0.0 && isfinite(*peak)))
        return se_fail(err, SE_ERR_RANGE, "fd direct wave: peak %g of the %s is not positive",
                       *peak, se_quantity_name(q));
    return SE_OK;
}

se_status se_fd_add_noise(double *x, size_t n, double noise_rms, unsigned long seed, se_error *err)
{
    gsl_rng *rng;
    size_t i;
    if (x == NULL && n > 0)
        return se_fail(err, SE_ERR_ARG, "NULL samples in se_fd_add_noise");
    if (!(noise_rms >= 0.0 && isfinite(noise_rms)))
        return se_fail(err, SE_ERR_RANGE, "noise rms %g must be >= 0 and finite", noise_rms);
    if (noise_rms == 0.0 || n == 0)
        return SE_OK;
    rng = gsl_rng_alloc(gsl_rng_mt19937);
    if (rng == NULL)
        return se_fail(err, SE_ERR_NOMEM, "out of memory for the noise generator");
    gsl_rng_set(rng, seed);
    for (i = 0; i < n; i++)
        x[i] += gsl_ran_gaussian_ziggurat(rng, noise_rms);
    gsl_rng_free(rng);
    return SE_OK;
}
