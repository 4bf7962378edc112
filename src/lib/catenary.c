/* strandecho: elastic catenary (Irvine 1981) with a seabed part (Jonkman 2007). */
#include <math.h>
#include <stdlib.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>
#include <gsl/gsl_roots.h>

#include "internal.h"
#include "strandecho/catenary.h"

struct se_catenary {
    double L, Ls, Lb, w, inv_ea, H, Va, cb;
};

typedef struct se_cat_depth_ctx {
    double w, inv_ea, h_given, t_top, depth;
    int use_top;
} se_cat_depth_ctx;

typedef struct se_cat_time_ctx {
    const se_catenary *c;
    double mu, a;
} se_cat_time_ctx;

static double se_cat_suspended_tension(const se_catenary *c, double sp);
static double se_cat_depth_residual(double ls, void *p);
static double se_cat_time_integrand(double u, void *p);
static se_status se_cat_solve_depth(const se_catenary_config *cfg, se_catenary *c, se_error *err);

void se_catenary_config_init(se_catenary_config *cfg)
{
    if (cfg == NULL)
        return;
    cfg->length_m = NAN;
    cfg->weight_n_m = NAN;
    cfg->ea_n = INFINITY;
    cfg->horizontal_tension_n = NAN;
    cfg->top_tension_n = NAN;
    cfg->lower_vertical_n = NAN;
    cfg->seabed_length_m = NAN;
    cfg->depth_m = NAN;
    cfg->seabed_friction = 0.0;
}

static double se_cat_suspended_tension(const se_catenary *c, double sp)
{
    double v = c->Va + c->w * sp;
    return sqrt(c->H * c->H + v * v);
}

/* Rise of a suspended length ls touching down with V_A = 0:
 * z = (T_top - H)/w + w ls^2 / (2 EA), T_top^2 = H^2 + (w ls)^2. */
static double se_cat_depth_residual(double ls, void *p)
{
    const se_cat_depth_ctx *d = p;
    double wl = d->w * ls, h, tt;
    if (d->use_top) {
        tt = d->t_top;
        h = sqrt(fmax(tt * tt - wl * wl, 0.0));
    } else {
        h = d->h_given;
        tt = sqrt(h * h + wl * wl);
    }
    return (tt - h) / d->w + d->w * ls * ls * 0.5 * d->inv_ea - d->depth;
}

static se_status se_cat_solve_depth(const se_catenary_config *cfg, se_catenary *c, se_error *err)
{
    se_cat_depth_ctx ctx;
    gsl_function f;
    gsl_root_fsolver *s;
    double lo = 0.0, hi = c->L, root = NAN;
    int status = GSL_CONTINUE, iter;

    ctx.w = c->w;
    ctx.inv_ea = c->inv_ea;
    ctx.depth = cfg->depth_m;
    ctx.use_top = !isnan(cfg->top_tension_n);
    ctx.t_top = cfg->top_tension_n;
    ctx.h_given = cfg->horizontal_tension_n;
    if (ctx.use_top && cfg->top_tension_n / c->w < hi)
        hi = cfg->top_tension_n / c->w; /* beyond this the top tension cannot carry the weight */
    f.function = se_cat_depth_residual;
    f.params = &ctx;
    if (se_cat_depth_residual(hi, &ctx) < 0.0)
        return se_fail(err, SE_ERR_RANGE,
                       "the line cannot reach depth %g m with V_A = 0 at touchdown (at most %g m "
                       "suspended rises %g m): give lower_vertical or both tensions",
                       cfg->depth_m, hi, se_cat_depth_residual(hi, &ctx) + cfg->depth_m);
    s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (s == NULL)
        return se_fail(err, SE_ERR_NOMEM, "catenary: cannot allocate the root solver");
    if (gsl_root_fsolver_set(s, &f, lo, hi) != GSL_SUCCESS) {
        gsl_root_fsolver_free(s);
        return se_fail(err, SE_ERR_NUMERIC, "catenary: cannot bracket the suspended length for depth %g m",
                       cfg->depth_m);
    }
    for (iter = 0; iter < 200 && status == GSL_CONTINUE; iter++) {
        if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS)
            break;
        root = gsl_root_fsolver_root(s);
        lo = gsl_root_fsolver_x_lower(s);
        hi = gsl_root_fsolver_x_upper(s);
        status = gsl_root_test_interval(lo, hi, 0.0, 1e-14);
    }
    gsl_root_fsolver_free(s);
    if (status != GSL_SUCCESS)
        return se_fail(err, SE_ERR_NUMERIC, "catenary: suspended length for depth %g m did not converge",
                       cfg->depth_m);
    c->Ls = root;
    c->Lb = c->L - root;
    c->Va = 0.0;
    if (ctx.use_top) {
        double wl = c->w * root;
        c->H = sqrt(fmax(cfg->top_tension_n * cfg->top_tension_n - wl * wl, 0.0));
    } else {
        c->H = cfg->horizontal_tension_n;
    }
    return SE_OK;
}

se_catenary *se_catenary_create(const se_catenary_config *cfg, se_error *err)
{
    se_catenary *c;
    int has_h, has_t, has_v;
    if (cfg == NULL) {
        se_fail(err, SE_ERR_ARG, "catenary: no configuration");
        return NULL;
    }
    has_h = !isnan(cfg->horizontal_tension_n);
    has_t = !isnan(cfg->top_tension_n);
    has_v = !isnan(cfg->lower_vertical_n);
    if (!(cfg->length_m > 0.0) || !isfinite(cfg->length_m)) {
        se_fail(err, SE_ERR_RANGE, "catenary: length must be positive (got %g m)", cfg->length_m);
        return NULL;
    }
    if (!(cfg->weight_n_m > 0.0) || !isfinite(cfg->weight_n_m)) {
        se_fail(err, SE_ERR_RANGE, "catenary: weight in water must be positive (got %g N/m)", cfg->weight_n_m);
        return NULL;
    }
    if (!isnan(cfg->ea_n) && !(cfg->ea_n > 0.0)) {
        se_fail(err, SE_ERR_RANGE, "catenary: axial stiffness must be positive (got %g N)", cfg->ea_n);
        return NULL;
    }
    if (!has_h && !has_t) {
        se_fail(err, SE_ERR_ARG, "catenary: give top_tension or horizontal_tension");
        return NULL;
    }
    if ((has_h && !(cfg->horizontal_tension_n >= 0.0)) || (has_t && !(cfg->top_tension_n > 0.0)) ||
        (has_v && !(cfg->lower_vertical_n >= 0.0))) {
        se_fail(err, SE_ERR_RANGE, "catenary: tensions must be positive (H >= 0, top > 0, V_A >= 0)");
        return NULL;
    }
    if (!(cfg->seabed_friction >= 0.0)) {
        se_fail(err, SE_ERR_RANGE, "catenary: seabed friction must be >= 0 (got %g)", cfg->seabed_friction);
        return NULL;
    }
    c = se_calloc(1, sizeof *c, "catenary", err);
    if (c == NULL)
        return NULL;
    c->L = cfg->length_m;
    c->w = cfg->weight_n_m;
    c->inv_ea = (isnan(cfg->ea_n) || isinf(cfg->ea_n)) ? 0.0 : 1.0 / cfg->ea_n;
    c->cb = cfg->seabed_friction;

    if (!isnan(cfg->depth_m)) {
        if (!(cfg->depth_m > 0.0) || (has_h && has_t) || has_v || !isnan(cfg->seabed_length_m)) {
            se_fail(err, SE_ERR_ARG, "catenary: depth needs exactly one of top_tension or horizontal_tension "
                                     "and no lower_vertical or on_seabed");
            free(c);
            return NULL;
        }
        if (se_cat_solve_depth(cfg, c, err) != SE_OK) {
            free(c);
            return NULL;
        }
        return c;
    }

    c->Lb = isnan(cfg->seabed_length_m) ? 0.0 : cfg->seabed_length_m;
    if (!(c->Lb >= 0.0) || !(c->Lb < c->L)) {
        se_fail(err, SE_ERR_RANGE, "catenary: on_seabed %g m must be >= 0 and shorter than the length %g m",
                c->Lb, c->L);
        free(c);
        return NULL;
    }
    c->Ls = c->L - c->Lb;
    if (has_h && has_t) {
        double vtop2 = cfg->top_tension_n * cfg->top_tension_n - cfg->horizontal_tension_n *
                       cfg->horizontal_tension_n;
        if (has_v || c->Lb > 0.0) {
            se_fail(err, SE_ERR_ARG, "catenary: with both tensions give neither lower_vertical nor on_seabed");
            free(c);
            return NULL;
        }
        if (vtop2 < 0.0) {
            se_fail(err, SE_ERR_RANGE, "catenary: top tension %g N is below the horizontal tension %g N",
                    cfg->top_tension_n, cfg->horizontal_tension_n);
            free(c);
            return NULL;
        }
        c->H = cfg->horizontal_tension_n;
        c->Va = sqrt(vtop2) - c->w * c->Ls;
        if (c->Va < 0.0 && c->H == 0.0) {
            se_fail(err, SE_ERR_RANGE, "catenary: a vertical line's top tension %g N is below its weight %g N",
                    cfg->top_tension_n, c->w * c->Ls);
            free(c);
            return NULL;
        }
    } else {
        c->Va = has_v ? cfg->lower_vertical_n : 0.0;
        if (c->Lb > 0.0 && c->Va != 0.0) {
            se_fail(err, SE_ERR_ARG, "catenary: the line touches down tangentially: lower_vertical must be 0 "
                                     "with on_seabed");
            free(c);
            return NULL;
        }
        if (has_h) {
            c->H = cfg->horizontal_tension_n;
        } else {
            double vt = c->Va + c->w * c->Ls;
            double h2 = cfg->top_tension_n * cfg->top_tension_n - vt * vt;
            if (h2 < -1e-12 * cfg->top_tension_n * cfg->top_tension_n) {
                se_fail(err, SE_ERR_RANGE, "catenary: top tension %g N is below the vertical load %g N "
                                           "(suspended weight plus V_A)", cfg->top_tension_n, vt);
                free(c);
                return NULL;
            }
            c->H = sqrt(fmax(h2, 0.0));
        }
    }
    if (c->Lb > 0.0 && !(c->H > 0.0)) {
        se_fail(err, SE_ERR_RANGE, "catenary: a length on the seabed needs a horizontal tension above 0");
        free(c);
        return NULL;
    }
    return c;
}

void se_catenary_destroy(se_catenary *c)
{
    free(c);
}

double se_catenary_tension(const se_catenary *c, double s)
{
    if (s < 0.0)
        s = 0.0;
    if (s > c->L)
        s = c->L;
    if (s < c->Lb)
        return fmax(c->H - c->cb * c->w * (c->Lb - s), 0.0);
    return se_cat_suspended_tension(c, s - c->Lb);
}

void se_catenary_position(const se_catenary *c, double s, double *x, double *z)
{
    double xs, zs, sp, ta;
    if (s < 0.0)
        s = 0.0;
    if (s > c->L)
        s = c->L;
    if (s <= c->Lb) {
        if (x != NULL)
            *x = s + c->H * s * c->inv_ea;
        if (z != NULL)
            *z = 0.0;
        return;
    }
    sp = s - c->Lb;
    ta = sqrt(c->H * c->H + c->Va * c->Va);
    /* x(s') = (H/w)[asinh((V_A + w s')/H) - asinh(V_A/H)] + H s'/EA */
    xs = c->H > 0.0 ? (c->H / c->w) * (asinh((c->Va + c->w * sp) / c->H) - asinh(c->Va / c->H)) : 0.0;
    xs += c->H * sp * c->inv_ea;
    /* z(s') = (T(s') - T_A)/w + (V_A s' + w s'^2/2)/EA, Irvine's z in a form valid at H = 0 */
    zs = (se_cat_suspended_tension(c, sp) - ta) / c->w + (c->Va * sp + 0.5 * c->w * sp * sp) * c->inv_ea;
    if (x != NULL)
        *x = c->Lb * (1.0 + c->H * c->inv_ea) + xs;
    if (z != NULL)
        *z = zs;
}

void se_catenary_get_info(const se_catenary *c, se_catenary_info *info)
{
    double x, z;
    se_catenary_position(c, c->L, &x, &z);
    info->length_m = c->L;
    info->suspended_length_m = c->Ls;
    info->seabed_length_m = c->Lb;
    info->weight_n_m = c->w;
    info->horizontal_tension_n = c->H;
    info->lower_vertical_n = c->Va;
    info->top_tension_n = se_catenary_tension(c, c->L);
    info->anchor_tension_n = se_catenary_tension(c, 0.0);
    info->span_m = x;
    info->depth_m = z;
}

/* With s' = a + u^2: dt = sqrt(mu / T) ds' = 2 u sqrt(mu / T(a + u^2)) du, finite at a free end. */
static double se_cat_time_integrand(double u, void *p)
{
    const se_cat_time_ctx *q = p;
    double t = se_cat_suspended_tension(q->c, q->a + u * u);
    if (t <= 0.0) /* only at u = 0 of a free vertical end, where T ~ w u^2 */
        return 2.0 * sqrt(q->mu / q->c->w);
    return 2.0 * u * sqrt(q->mu / t);
}

se_status se_catenary_transverse_time(const se_catenary *c, double mu_eff_kg_m, double s0, double s1,
                                      double *time_s, se_error *err)
{
    double total = 0.0;
    if (c == NULL || time_s == NULL)
        return se_fail(err, SE_ERR_ARG, "catenary time: NULL argument");
    if (!(mu_eff_kg_m > 0.0))
        return se_fail(err, SE_ERR_RANGE, "catenary time: mass per length must be positive (got %g kg/m)",
                       mu_eff_kg_m);
    if (!(s0 >= 0.0) || !(s1 <= c->L * (1.0 + 1e-12)) || !(s0 <= s1))
        return se_fail(err, SE_ERR_RANGE, "catenary time: interval [%g, %g] m outside [0, %g] m", s0, s1, c->L);
    if (s1 > c->L)
        s1 = c->L;
    /* seabed: T = a0 + b s with a0 = H - C_B w L_B, b = C_B w; closed form */
    if (s0 < c->Lb) {
        double e = fmin(s1, c->Lb), a0 = c->H - c->cb * c->w * c->Lb, b = c->cb * c->w;
        if (b == 0.0) {
            total += (e - s0) * sqrt(mu_eff_kg_m / c->H);
        } else {
            double zero = -a0 / b; /* arc length where friction has used up the tension */
            if (zero > s0 && e > s0)
                return se_fail(err, SE_ERR_RANGE,
                               "catenary: seabed friction leaves the first %g m slack: transverse waves "
                               "cannot cross it", zero);
            total += 2.0 * sqrt(mu_eff_kg_m) / b * (sqrt(a0 + b * e) - sqrt(a0 + b * s0));
        }
    }
    if (s1 > c->Lb) {
        double a = fmax(s0, c->Lb) - c->Lb, bsp = s1 - c->Lb, result = 0.0, abserr = 0.0;
        se_cat_time_ctx ctx;
        gsl_function f;
        gsl_integration_workspace *ws;
        int rc;
        if (bsp > a) {
            ctx.c = c;
            ctx.mu = mu_eff_kg_m;
            ctx.a = a;
            f.function = se_cat_time_integrand;
            f.params = &ctx;
            ws = gsl_integration_workspace_alloc(200);
            if (ws == NULL)
                return se_fail(err, SE_ERR_NOMEM, "catenary: cannot allocate the integration workspace");
            rc = gsl_integration_qags(&f, 0.0, sqrt(bsp - a), 0.0, 1e-12, 200, ws, &result, &abserr);
            gsl_integration_workspace_free(ws);
            if (rc != GSL_SUCCESS && !(rc == GSL_EROUND && abserr <= 1e-9 * fabs(result)))
                return se_fail(err, SE_ERR_NUMERIC, "catenary: travel-time integral failed (%s)",
                               gsl_strerror(rc));
            total += result;
        }
    }
    *time_s = total;
    return SE_OK;
}
