/* strandecho: delay <-> distance map, piecewise (linear or Steffen) per segment. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_interp.h>
#include <gsl/gsl_roots.h>

#include "internal.h"
#include "strandecho/distmap.h"

typedef struct se_dm_piece {
    size_t n;
    double *s, *t;      /* local nodes, s[0] = t[0] = 0 */
    double e;           /* relative speed uncertainty */
    double s0, t0;      /* offsets of the piece start from the sensor */
    double len, dur;    /* length (m) and two-way duration (s) */
    gsl_interp *interp; /* Steffen t(s) when n >= 3, else NULL (linear) */
} se_dm_piece;

struct se_distmap {
    size_t np;
    se_dm_piece *p;
    double length, round_trip;
    int unbounded;   /* uniform map of infinite length */
    double speed;    /* speed of an unbounded map */
    double e;        /* its uncertainty */
};

typedef struct se_dm_root_ctx {
    const se_dm_piece *pc;
    double target;
} se_dm_root_ctx;

static double se_dm_piece_time(const se_dm_piece *pc, double sl);
static double se_dm_root_fn(double s, void *p);
static se_status se_dm_piece_distance(const se_dm_piece *pc, double tl, double *sl, se_error *err);
static size_t se_dm_piece_by_time(const se_distmap *m, double t);

static double se_dm_piece_time(const se_dm_piece *pc, double sl)
{
    if (pc->interp == NULL)
        return pc->dur * (sl / pc->len);
    if (sl <= 0.0)
        return 0.0;
    if (sl >= pc->len)
        return pc->dur;
    return gsl_interp_eval(pc->interp, pc->s, pc->t, sl, NULL);
}

static double se_dm_root_fn(double s, void *p)
{
    const se_dm_root_ctx *c = p;
    return se_dm_piece_time(c->pc, s) - c->target;
}

/* Invert the piece's t(s) at local time tl in [0, dur]: Brent on the node interval holding tl. */
static se_status se_dm_piece_distance(const se_dm_piece *pc, double tl, double *sl, se_error *err)
{
    size_t lo = 0, hi = pc->n - 1;
    se_dm_root_ctx ctx;
    gsl_function f;
    gsl_root_fsolver *solver;
    double a, b, root;
    int status = GSL_CONTINUE, iter;
    if (pc->interp == NULL) {
        *sl = pc->len * (tl / pc->dur);
        return SE_OK;
    }
    while (hi - lo > 1) {
        size_t mid = lo + (hi - lo) / 2;
        if (pc->t[mid] <= tl)
            lo = mid;
        else
            hi = mid;
    }
    if (tl <= pc->t[lo]) {
        *sl = pc->s[lo];
        return SE_OK;
    }
    if (tl >= pc->t[hi]) {
        *sl = pc->s[hi];
        return SE_OK;
    }
    ctx.pc = pc;
    ctx.target = tl;
    f.function = se_dm_root_fn;
    f.params = &ctx;
    a = pc->s[lo];
    b = pc->s[hi];
    root = 0.5 * (a + b);
    solver = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (solver == NULL)
        return se_fail(err, SE_ERR_NOMEM, "distance map: cannot allocate the root solver");
    if (gsl_root_fsolver_set(solver, &f, a, b) != GSL_SUCCESS) {
        gsl_root_fsolver_free(solver);
        return se_fail(err, SE_ERR_NUMERIC, "distance map: delay %g s not bracketed", tl);
    }
    for (iter = 0; iter < 200 && status == GSL_CONTINUE; iter++) {
        if (gsl_root_fsolver_iterate(solver) != GSL_SUCCESS)
            break;
        root = gsl_root_fsolver_root(solver);
        status = gsl_root_test_interval(gsl_root_fsolver_x_lower(solver), gsl_root_fsolver_x_upper(solver),
                                        1e-13 * pc->len, 1e-15);
    }
    gsl_root_fsolver_free(solver);
    if (status != GSL_SUCCESS)
        return se_fail(err, SE_ERR_NUMERIC, "distance map: inverse at delay %g s did not converge", tl);
    *sl = root;
    return SE_OK;
}

static size_t se_dm_piece_by_time(const se_distmap *m, double t)
{
    size_t i;
    for (i = 0; i + 1 < m->np; i++)
        if (t < m->p[i + 1].t0)
            return i;
    return m->np - 1;
}

size_t se_distmap_piece_at(const se_distmap *m, double d)
{
    size_t i;
    if (m == NULL || m->np == 0)
        return 0;
    for (i = 0; i + 1 < m->np; i++)
        if (d < m->p[i + 1].s0)
            return i;
    return m->np - 1;
}

size_t se_distmap_piece_count(const se_distmap *m)
{
    return m == NULL ? 0 : (m->unbounded ? 1 : m->np);
}

void se_distmap_destroy(se_distmap *m)
{
    size_t i;
    if (m == NULL)
        return;
    for (i = 0; i < m->np; i++) {
        free(m->p[i].s);
        free(m->p[i].t);
        if (m->p[i].interp != NULL)
            gsl_interp_free(m->p[i].interp);
    }
    free(m->p);
    free(m);
}

se_distmap *se_distmap_create(const se_distmap_piece *pieces, size_t n_pieces, se_error *err)
{
    se_distmap *m;
    size_t i, k;
    double s0 = 0.0, t0 = 0.0;
    if (pieces == NULL || n_pieces == 0) {
        se_fail(err, SE_ERR_ARG, "distance map: no pieces");
        return NULL;
    }
    for (i = 0; i < n_pieces; i++) {
        const se_distmap_piece *pc = &pieces[i];
        if (pc->n < 2 || pc->s == NULL || pc->t == NULL) {
            se_fail(err, SE_ERR_ARG, "distance map: piece %zu needs at least 2 nodes", i);
            return NULL;
        }
        if (pc->s[0] != 0.0 || pc->t[0] != 0.0) {
            se_fail(err, SE_ERR_ARG, "distance map: piece %zu must start at s = 0, t = 0", i);
            return NULL;
        }
        for (k = 1; k < pc->n; k++)
            if (!(pc->s[k] > pc->s[k - 1]) || !(pc->t[k] > pc->t[k - 1]) || !isfinite(pc->s[k]) ||
                !isfinite(pc->t[k])) {
                se_fail(err, SE_ERR_ARG, "distance map: piece %zu node %zu is not strictly increasing "
                                         "(s %g m, t %g s)", i, k, pc->s[k], pc->t[k]);
                return NULL;
            }
        if (!(pc->speed_uncertainty >= 0.0) || !isfinite(pc->speed_uncertainty)) {
            se_fail(err, SE_ERR_RANGE, "distance map: piece %zu speed uncertainty %g must be >= 0", i,
                    pc->speed_uncertainty);
            return NULL;
        }
    }
    m = se_calloc(1, sizeof *m, "distance map", err);
    if (m == NULL)
        return NULL;
    m->p = se_calloc(n_pieces, sizeof *m->p, "distance map pieces", err);
    if (m->p == NULL) {
        free(m);
        return NULL;
    }
    m->np = n_pieces;
    for (i = 0; i < n_pieces; i++) {
        const se_distmap_piece *src = &pieces[i];
        se_dm_piece *pc = &m->p[i];
        pc->n = src->n;
        pc->s = se_calloc(src->n, sizeof(double), "distance map nodes", err);
        pc->t = se_calloc(src->n, sizeof(double), "distance map nodes", err);
        if (pc->s == NULL || pc->t == NULL)
            goto fail;
        memcpy(pc->s, src->s, src->n * sizeof(double));
        memcpy(pc->t, src->t, src->n * sizeof(double));
        pc->e = src->speed_uncertainty;
        pc->s0 = s0;
        pc->t0 = t0;
        pc->len = src->s[src->n - 1];
        pc->dur = src->t[src->n - 1];
        if (src->n >= 3) {
            pc->interp = gsl_interp_alloc(gsl_interp_steffen, src->n);
            if (pc->interp == NULL) {
                se_fail(err, SE_ERR_NOMEM, "distance map: cannot allocate the interpolator");
                goto fail;
            }
            if (gsl_interp_init(pc->interp, pc->s, pc->t, src->n) != GSL_SUCCESS) {
                se_fail(err, SE_ERR_NUMERIC, "distance map: interpolator initialisation failed");
                goto fail;
            }
        }
        s0 += pc->len;
        t0 += pc->dur;
    }
    m->length = s0;
    m->round_trip = t0;
    return m;
fail:
    se_distmap_destroy(m);
    return NULL;
}

se_distmap *se_distmap_create_uniform(double speed, double e, double length, se_error *err)
{
    if (!(speed > 0.0) || !isfinite(speed)) {
        se_fail(err, SE_ERR_RANGE, "distance map: speed must be positive (got %g m/s)", speed);
        return NULL;
    }
    if (!(e >= 0.0) || !isfinite(e)) {
        se_fail(err, SE_ERR_RANGE, "distance map: speed uncertainty must be >= 0 (got %g)", e);
        return NULL;
    }
    if (!(length > 0.0)) {
        se_fail(err, SE_ERR_RANGE, "distance map: length must be positive (got %g m)", length);
        return NULL;
    }
    if (isinf(length)) {
        se_distmap *m = se_calloc(1, sizeof *m, "distance map", err);
        if (m == NULL)
            return NULL;
        m->unbounded = 1;
        m->speed = speed;
        m->e = e;
        m->length = INFINITY;
        m->round_trip = INFINITY;
        return m;
    } else {
        double s[2] = {0.0, length}, t[2] = {0.0, 2.0 * length / speed};
        se_distmap_piece pc;
        pc.n = 2;
        pc.s = s;
        pc.t = t;
        pc.speed_uncertainty = e;
        return se_distmap_create(&pc, 1, err);
    }
}

double se_distmap_length(const se_distmap *m)
{
    return m == NULL ? NAN : m->length;
}

double se_distmap_round_trip(const se_distmap *m)
{
    return m == NULL ? NAN : m->round_trip;
}

se_status se_distmap_distance(const se_distmap *m, double t, double *d, se_error *err)
{
    size_t i;
    const se_dm_piece *pc;
    double sl = 0.0;
    se_status st;
    if (m == NULL || d == NULL)
        return se_fail(err, SE_ERR_ARG, "distance map: NULL argument");
    if (!(t >= 0.0) || !isfinite(t))
        return se_fail(err, SE_ERR_RANGE, "distance map: delay %g s must be finite and >= 0", t);
    if (m->unbounded) {
        *d = m->speed * t / 2.0; /* d = v t / 2 */
        return SE_OK;
    }
    if (t >= m->round_trip) {
        pc = &m->p[m->np - 1];
        *d = m->length + (t - m->round_trip) * pc->len / pc->dur;
        return SE_OK;
    }
    i = se_dm_piece_by_time(m, t);
    pc = &m->p[i];
    st = se_dm_piece_distance(pc, t - pc->t0, &sl, err);
    if (st != SE_OK)
        return st;
    *d = pc->s0 + sl;
    return SE_OK;
}

se_status se_distmap_time(const se_distmap *m, double d, double *t, se_error *err)
{
    const se_dm_piece *pc;
    if (m == NULL || t == NULL)
        return se_fail(err, SE_ERR_ARG, "distance map: NULL argument");
    if (!(d >= 0.0) || !isfinite(d))
        return se_fail(err, SE_ERR_RANGE, "distance map: distance %g m must be finite and >= 0", d);
    if (m->unbounded) {
        *t = 2.0 * d / m->speed;
        return SE_OK;
    }
    if (d >= m->length) {
        pc = &m->p[m->np - 1];
        *t = m->round_trip + (d - m->length) * pc->dur / pc->len;
        return SE_OK;
    }
    pc = &m->p[se_distmap_piece_at(m, d)];
    *t = pc->t0 + se_dm_piece_time(pc, d - pc->s0);
    return SE_OK;
}

se_status se_distmap_distance_sigma(const se_distmap *m, double t, double *sigma, se_error *err)
{
    double d, var = 0.0;
    size_t i, k;
    se_status st;
    if (sigma == NULL)
        return se_fail(err, SE_ERR_ARG, "distance map: NULL argument");
    st = se_distmap_distance(m, t, &d, err);
    if (st != SE_OK)
        return st;
    if (m->unbounded) {
        *sigma = m->e * d;
        return SE_OK;
    }
    k = se_distmap_piece_at(m, d);
    /* fully correlated inside a piece, independent between pieces: sum of (e_j l_j)^2 */
    for (i = 0; i <= k; i++) {
        double l = i < k ? m->p[i].len : d - m->p[i].s0;
        var += (m->p[i].e * l) * (m->p[i].e * l);
    }
    *sigma = sqrt(var);
    return SE_OK;
}

se_status se_distmap_time_sigma(const se_distmap *m, double d, double *sigma, se_error *err)
{
    double t, var = 0.0;
    size_t i, k;
    se_status st;
    if (sigma == NULL)
        return se_fail(err, SE_ERR_ARG, "distance map: NULL argument");
    st = se_distmap_time(m, d, &t, err);
    if (st != SE_OK)
        return st;
    if (m->unbounded) {
        *sigma = m->e * t;
        return SE_OK;
    }
    k = se_distmap_piece_at(m, d);
    for (i = 0; i <= k; i++) {
        double tj = i < k ? m->p[i].dur : t - m->p[i].t0;
        var += (m->p[i].e * tj) * (m->p[i].e * tj);
    }
    *sigma = sqrt(var);
    return SE_OK;
}

se_status se_distmap_speed(const se_distmap *m, double d, double *v, se_error *err)
{
    const se_dm_piece *pc;
    double dtds;
    if (m == NULL || v == NULL)
        return se_fail(err, SE_ERR_ARG, "distance map: NULL argument");
    if (!(d >= 0.0) || !isfinite(d))
        return se_fail(err, SE_ERR_RANGE, "distance map: distance %g m must be finite and >= 0", d);
    if (m->unbounded) {
        *v = m->speed;
        return SE_OK;
    }
    pc = &m->p[se_distmap_piece_at(m, d)];
    if (pc->interp == NULL || d >= m->length) {
        *v = 2.0 * pc->len / pc->dur;
        return SE_OK;
    }
    dtds = gsl_interp_eval_deriv(pc->interp, pc->s, pc->t, fmin(fmax(d - pc->s0, 0.0), pc->len), NULL);
    if (!(dtds > 0.0))
        return se_fail(err, SE_ERR_NUMERIC, "distance map: no finite speed at %g m", d);
    *v = 2.0 / dtds;
    return SE_OK;
}
