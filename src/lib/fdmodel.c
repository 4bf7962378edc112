/* strandecho: explicit finite-difference (leapfrog) forward model, see fdmodel.h and
 * docs/fd-model.md.
 *
 * Lumped-mass leapfrog for mu y_tt + 2 a mu y_t + a^2 mu y = (T y_x)_x: node j has mass M_j (half
 * of each adjacent cell's mu h plus point masses), cells are springs k = T / h, and each node may
 * carry a dashpot c_j and a spring to ground s_j. One step (n -> n+1) is
 *   M (y+ - 2y + y-)/dt^2 + c (y+ - y-)/(2 dt) + s (y+ + 2y + y-)/4
 *       = kl (y[j-1] - y[j]) + kr (y[j+1] - y[j]) + P^n   (P only at node 0)
 * i.e. the dashpot is centred and the ground spring averaged (so it cannot break the explicit
 * stability limit); both are diagonal, so the step stays explicit. Interior nodes of a segment all
 * share one set of coefficients, so only "special" nodes (segment ends, points, sensor, grid ends)
 * are stored one by one. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/fdmodel.h"

/* Coefficients of one node, or of every interior node of a segment. */
typedef struct fd_coef {
    double a;      /* 1 / (M/dt^2 + c/(2dt) + s/4); 0 for a fixed node */
    double b1;     /* coefficient of y^n: 2M/dt^2 - s/2 */
    double b0;     /* coefficient of y^(n-1): -M/dt^2 + c/(2dt) - s/4 */
    double kl, kr; /* stiffness of the cells to the left and right, N/m */
    double mass, damp, spring;
} fd_coef;

typedef struct fd_special {
    size_t j;        /* node index */
    size_t seg;      /* segment of the cell to the right (valid when j is not the last node) */
    fd_coef c;
} fd_special;

typedef struct fd_grid {
    double dt, dtc, courant, rate_fd;
    size_t k_over;   /* FD steps per output sample */
    size_t frames, steps;
    size_t cells, n_nodes, n_sim;
    size_t probe;
    double dx_min;
    size_t *node_end; /* [n_segments]: node index of each segment's far end */
    fd_coef *segc;    /* [n_segments]: interior coefficients */
    fd_special *sp;   /* [n_sp], sorted by node */
    size_t n_sp;
    double zt0, m0, c0, k0; /* termination and point elements at node 0 */
    double probe_tension;
} fd_grid;

static se_status fd_check(const se_fd_config *cfg, se_error *err);
static double fd_width(const se_pulse_shape *p);
static se_status fd_build(const se_fd_config *cfg, double sensor_x, int full, fd_grid *g,
                          se_error *err);
static void fd_free(fd_grid *g);
static size_t fd_node_of(const se_fd_config *cfg, const fd_grid *g, double x);
static size_t fd_seg_of_cell(const se_fd_config *cfg, const fd_grid *g, size_t cell);
static void fd_finish_coef(fd_coef *c, double dt, int fixed);
static double fd_source(const se_fd_config *cfg, const fd_grid *g, int order, size_t n);
static double fd_force_integral(const se_fd_config *cfg, double t1, double t2);
static double fd_energy(const fd_grid *g, const double *yn, const double *y);
static se_status fd_run(const se_fd_config *cfg, const fd_grid *g, int order, double *probe_y,
                        double *probe_force, double *energy, double *drift, se_error *err);

static int fd_finite_pos(double v) { return isfinite(v) && v > 0.0; }
static int fd_finite_nonneg(double v) { return isfinite(v) && v >= 0.0; }

size_t se_fd_frames(const se_fd_config *cfg)
{
    double p, r;
    if (cfg == NULL || !fd_finite_pos(cfg->rate_hz) || !fd_finite_nonneg(cfg->duration_s))
        return 0;
    p = cfg->duration_s * cfg->rate_hz;
    if (!isfinite(p) || p > 1e15)
        return 0;
    r = nearbyint(p);
    if (fabs(p - r) <= 1e-9 * (r > 1.0 ? r : 1.0))
        p = r;
    return (size_t)floor(p) + 1;
}

static double fd_total_length(const se_fd_config *cfg)
{
    double L = 0.0;
    for (size_t i = 0; i < cfg->n_segments; i++)
        L += cfg->segments[i].length_m;
    return L;
}

static se_status fd_check(const se_fd_config *cfg, se_error *err)
{
    double L;
    se_status st;
    if (cfg == NULL)
        return se_fail(err, SE_ERR_ARG, "fd model: NULL configuration");
    if (cfg->segments == NULL || cfg->n_segments == 0)
        return se_fail(err, SE_ERR_ARG, "fd model: no segments given");
    if (cfg->n_points > 0 && cfg->points == NULL)
        return se_fail(err, SE_ERR_ARG, "fd model: %zu points announced but the array is NULL",
                       cfg->n_points);
    for (size_t i = 0; i < cfg->n_segments; i++) {
        const se_fd_segment *s = &cfg->segments[i];
        if (!fd_finite_pos(s->length_m))
            return se_fail(err, SE_ERR_RANGE, "fd model: segment %zu: length %g m must be positive",
                           i, s->length_m);
        if (!fd_finite_pos(s->tension_n))
            return se_fail(err, SE_ERR_RANGE,
                           "fd model: segment %zu: tension %g N must be positive", i, s->tension_n);
        if (!fd_finite_pos(s->mu_kg_m))
            return se_fail(err, SE_ERR_RANGE,
                           "fd model: segment %zu: mass per length %g kg/m must be positive", i,
                           s->mu_kg_m);
    }
    L = fd_total_length(cfg);
    for (size_t i = 0; i < cfg->n_points; i++) {
        const se_fd_point *p = &cfg->points[i];
        if (!isfinite(p->x_m) || p->x_m < 0.0 || p->x_m > L * (1.0 + 1e-12))
            return se_fail(err, SE_ERR_RANGE, "fd model: point %zu at x = %g m is off the line "
                           "(0 .. %g m)", i, p->x_m, L);
        if (!fd_finite_nonneg(p->mass_kg) || !fd_finite_nonneg(p->spring_n_m) ||
            !fd_finite_nonneg(p->damping_n_s_m))
            return se_fail(err, SE_ERR_RANGE, "fd model: point %zu: mass %g kg, spring %g N/m, "
                           "damping %g N s/m must be >= 0 and finite", i, p->mass_kg,
                           p->spring_n_m, p->damping_n_s_m);
    }
    if (cfg->source != SE_FD_SOURCE_FREE && cfg->source != SE_FD_SOURCE_MATCHED)
        return se_fail(err, SE_ERR_ARG, "fd model: unknown source kind %d", (int)cfg->source);
    if (cfg->far_end != SE_FD_END_FIXED && cfg->far_end != SE_FD_END_FREE &&
        cfg->far_end != SE_FD_END_ABSORBING)
        return se_fail(err, SE_ERR_ARG, "fd model: unknown far-end kind %d", (int)cfg->far_end);
    if ((int)cfg->output < 0 || cfg->output >= SE_Q_COUNT)
        return se_fail(err, SE_ERR_ARG, "fd model: unknown output quantity %d", (int)cfg->output);
    st = se_pulse_check(&cfg->pulse, err);
    if (st != SE_OK)
        return st;
    if (!isfinite(cfg->pulse_amplitude_n))
        return se_fail(err, SE_ERR_RANGE, "fd model: pulse amplitude %g N is not finite",
                       cfg->pulse_amplitude_n);
    if (!fd_finite_nonneg(cfg->pulse_start_s))
        return se_fail(err, SE_ERR_RANGE, "fd model: pulse start %g s must be >= 0 and finite",
                       cfg->pulse_start_s);
    if (!fd_finite_pos(cfg->rate_hz))
        return se_fail(err, SE_ERR_RANGE, "fd model: rate %g Hz must be positive", cfg->rate_hz);
    if (!fd_finite_nonneg(cfg->duration_s))
        return se_fail(err, SE_ERR_RANGE, "fd model: duration %g s must be >= 0 and finite",
                       cfg->duration_s);
    if (se_fd_frames(cfg) == 0)
        return se_fail(err, SE_ERR_RANGE, "fd model: duration %g s at %g Hz gives too many frames",
                       cfg->duration_s, cfg->rate_hz);
    if (!isfinite(cfg->courant) || cfg->courant < 0.0 || cfg->courant > 1.0)
        return se_fail(err, SE_ERR_RANGE, "fd model: Courant number %g outside (0, 1] (0 = 1)",
                       cfg->courant);
    if (!fd_finite_nonneg(cfg->loss_np_per_s))
        return se_fail(err, SE_ERR_RANGE, "fd model: loss %g Np/s must be >= 0 and finite",
                       cfg->loss_np_per_s);
    return SE_OK;
}

/* Pulse width that the grid must resolve: the support, or one period of the highest frequency
 * parameter when that is shorter (bursts, chirps, Ricker wavelets). */
static double fd_width(const se_pulse_shape *p)
{
    double w = p->duration_s;
    if (p->freq_hz > 0.0 && 1.0 / p->freq_hz < w)
        w = 1.0 / p->freq_hz;
    if (p->freq2_hz > 0.0 && 1.0 / p->freq2_hz < w)
        w = 1.0 / p->freq2_hz;
    return w;
}

static void fd_free(fd_grid *g)
{
    free(g->node_end);
    free(g->segc);
    free(g->sp);
    memset(g, 0, sizeof *g);
}

/* Node nearest to x by one-way travel time from x = 0. */
static size_t fd_node_of(const se_fd_config *cfg, const fd_grid *g, double x)
{
    double x0 = 0.0, tau = 0.0;
    size_t i;
    for (i = 0; i < cfg->n_segments; i++) {
        const se_fd_segment *s = &cfg->segments[i];
        double c = sqrt(s->tension_n / s->mu_kg_m);
        if (x <= x0 + s->length_m || i + 1 == cfg->n_segments) {
            double d = x - x0;
            if (d > s->length_m)
                d = s->length_m;
            if (d < 0.0)
                d = 0.0;
            tau += d / c;
            break;
        }
        x0 += s->length_m;
        tau += s->length_m / c;
    }
    {
        double r = nearbyint(tau / g->dtc);
        size_t j = r <= 0.0 ? 0 : (size_t)r;
        return j > g->cells ? g->cells : j;
    }
}

/* Segment holding cell `cell` (between nodes cell and cell + 1). */
static size_t fd_seg_of_cell(const se_fd_config *cfg, const fd_grid *g, size_t cell)
{
    size_t lo = 0, hi = cfg->n_segments - 1;
    while (lo < hi) { /* first segment whose end node is > cell */
        size_t mid = lo + (hi - lo) / 2;
        if (g->node_end[mid] > cell)
            hi = mid;
        else
            lo = mid + 1;
    }
    return lo;
}

static void fd_finish_coef(fd_coef *c, double dt, int fixed)
{
    double m = c->mass / (dt * dt), d = c->damp / (2.0 * dt), s = c->spring / 4.0;
    if (fixed) {
        c->a = c->b1 = c->b0 = 0.0;
        return;
    }
    c->a = 1.0 / (m + d + s);
    c->b1 = 2.0 * m - 2.0 * s;
    c->b0 = -m + d - s;
}

static int fd_cmp_size(const void *a, const void *b)
{
    size_t x = *(const size_t *)a, y = *(const size_t *)b;
    return x < y ? -1 : x > y;
}

static se_status fd_build(const se_fd_config *cfg, double sensor_x, int full, fd_grid *g,
                          se_error *err)
{
    double C = cfg->courant > 0.0 ? cfg->courant : 1.0;
    size_t min_cells = cfg->min_cells_per_pulse ? cfg->min_cells_per_pulse
                                                : (size_t)SE_FD_DEFAULT_MIN_CELLS;
    size_t max_cells = cfg->max_cells ? cfg->max_cells : SE_FD_DEFAULT_MAX_CELLS;
    double tau_total = 0.0, tau_min = INFINITY, kreal, width = fd_width(&cfg->pulse);
    double alpha = cfg->loss_np_per_s, cum, ncells;
    size_t *list = NULL, n_list = 0;

    memset(g, 0, sizeof *g);
    for (size_t i = 0; i < cfg->n_segments; i++) {
        const se_fd_segment *s = &cfg->segments[i];
        double tau = s->length_m / sqrt(s->tension_n / s->mu_kg_m);
        tau_total += tau;
        if (tau < tau_min)
            tau_min = tau;
    }
    /* dt = 1/(K rate) <= C width / min_cells (cells per pulse) and dt / C <= tau_min (>= 1 cell
     * per segment). */
    kreal = (double)min_cells / (cfg->rate_hz * C * width);
    if (1.0 / (cfg->rate_hz * C * tau_min) > kreal)
        kreal = 1.0 / (cfg->rate_hz * C * tau_min);
    if (kreal < 1.0)
        kreal = 1.0;
    kreal = ceil(kreal * (1.0 - 1e-12));
    ncells = tau_total * kreal * cfg->rate_hz * C;
    if (!isfinite(kreal) || kreal > 1e12 || !(ncells <= (double)max_cells + 0.5))
        return se_fail(err, SE_ERR_NOMEM, "fd model: grid of about %.3g cells exceeds the limit of "
                       "%zu (dt = %.3g s for %zu cells per pulse and one cell per segment)",
                       ncells, max_cells, 1.0 / (kreal * cfg->rate_hz), min_cells);
    g->k_over = (size_t)kreal;
    g->courant = C;
    g->rate_fd = kreal * cfg->rate_hz;
    g->dt = 1.0 / g->rate_fd;
    g->dtc = g->dt / C;
    g->frames = se_fd_frames(cfg);
    if (g->frames - 1 > SIZE_MAX / g->k_over)
        return se_fail(err, SE_ERR_NOMEM, "fd model: %zu frames x %zu steps overflow", g->frames,
                       g->k_over);
    g->steps = (g->frames - 1) * g->k_over;

    g->node_end = se_calloc(cfg->n_segments, sizeof *g->node_end, "fd segment ends", err);
    g->segc = se_calloc(cfg->n_segments, sizeof *g->segc, "fd segment coefficients", err);
    if (g->node_end == NULL || g->segc == NULL) {
        fd_free(g);
        return SE_ERR_NOMEM;
    }
    cum = 0.0;
    g->dx_min = INFINITY;
    for (size_t i = 0; i < cfg->n_segments; i++) {
        const se_fd_segment *s = &cfg->segments[i];
        double c = sqrt(s->tension_n / s->mu_kg_m), h = c * g->dtc;
        fd_coef *sc = &g->segc[i];
        cum += s->length_m / c;
        g->node_end[i] = (size_t)nearbyint(cum / g->dtc);
        if (h < g->dx_min)
            g->dx_min = h;
        sc->kl = sc->kr = s->tension_n / h;
        sc->mass = s->mu_kg_m * h;
        sc->damp = 2.0 * alpha * sc->mass;
        sc->spring = alpha * alpha * sc->mass;
        fd_finish_coef(sc, g->dt, 0);
    }
    g->cells = g->node_end[cfg->n_segments - 1];
    if (g->cells > max_cells) {
        fd_free(g);
        return se_fail(err, SE_ERR_NOMEM, "fd model: grid of %zu cells exceeds the limit of %zu",
                       g->cells, max_cells);
    }
    g->n_nodes = g->cells + 1;
    g->probe = fd_node_of(cfg, g, sensor_x);
    g->n_sim = g->n_nodes;
    if (!full) {
        /* A node J can change the sensor's record only after 2J - probe steps. */
        size_t need = g->steps / 2 + g->probe / 2 + 3;
        if (need < g->probe + 2)
            need = g->probe + 2;
        if (need < g->n_sim)
            g->n_sim = need;
    }

    /* Special nodes: both grid ends, segment ends, points, the sensor. */
    list = se_calloc(cfg->n_segments + cfg->n_points + 3, sizeof *list, "fd node list", err);
    if (list == NULL) {
        fd_free(g);
        return SE_ERR_NOMEM;
    }
    list[n_list++] = 0;
    list[n_list++] = g->n_sim - 1;
    list[n_list++] = g->probe;
    for (size_t i = 0; i < cfg->n_segments; i++)
        list[n_list++] = g->node_end[i];
    for (size_t i = 0; i < cfg->n_points; i++)
        list[n_list++] = fd_node_of(cfg, g, cfg->points[i].x_m);
    qsort(list, n_list, sizeof *list, fd_cmp_size);
    g->sp = se_calloc(n_list, sizeof *g->sp, "fd special nodes", err);
    if (g->sp == NULL) {
        free(list);
        fd_free(g);
        return SE_ERR_NOMEM;
    }
    for (size_t i = 0; i < n_list; i++) {
        size_t j = list[i];
        fd_special *sp;
        if (j >= g->n_sim || (g->n_sp > 0 && g->sp[g->n_sp - 1].j == j))
            continue;
        sp = &g->sp[g->n_sp++];
        sp->j = j;
        if (j > 0) {
            const fd_coef *l = &g->segc[fd_seg_of_cell(cfg, g, j - 1)];
            sp->c.kl = l->kl;
            sp->c.mass += 0.5 * l->mass;
        }
        if (j < g->cells) {
            sp->seg = fd_seg_of_cell(cfg, g, j);
            sp->c.kr = g->segc[sp->seg].kr;
            sp->c.mass += 0.5 * g->segc[sp->seg].mass;
        } else {
            sp->seg = cfg->n_segments - 1;
        }
        sp->c.damp = 2.0 * alpha * sp->c.mass;
        sp->c.spring = alpha * alpha * sp->c.mass;
    }
    free(list);
    {
        const se_fd_segment *s0 = &cfg->segments[0];
        const se_fd_segment *sn = &cfg->segments[cfg->n_segments - 1];
        fd_special *last = &g->sp[g->n_sp - 1];
        if (cfg->source == SE_FD_SOURCE_MATCHED) {
            g->zt0 = sqrt(s0->tension_n * s0->mu_kg_m);
            g->sp[0].c.damp += g->zt0;
        }
        if (cfg->far_end == SE_FD_END_ABSORBING && last->j == g->cells)
            last->c.damp += sqrt(sn->tension_n * sn->mu_kg_m);
    }
    for (size_t i = 0; i < cfg->n_points; i++) {
        const se_fd_point *p = &cfg->points[i];
        size_t j = fd_node_of(cfg, g, p->x_m), lo = 0, hi = g->n_sp;
        if (j >= g->n_sim)
            continue;
        while (lo + 1 < hi) { /* sp sorted by j */
            size_t mid = lo + (hi - lo) / 2;
            if (g->sp[mid].j <= j)
                lo = mid;
            else
                hi = mid;
        }
        g->sp[lo].c.mass += p->mass_kg;
        g->sp[lo].c.spring += p->spring_n_m;
        g->sp[lo].c.damp += p->damping_n_s_m;
        if (j == 0) {
            g->m0 += p->mass_kg;
            g->k0 += p->spring_n_m;
            g->c0 += p->damping_n_s_m;
        }
    }
    for (size_t i = 0; i < g->n_sp; i++) {
        fd_special *sp = &g->sp[i];
        int fixed = sp->j == g->n_sim - 1 &&
                    (g->n_sim < g->n_nodes || cfg->far_end == SE_FD_END_FIXED);
        fd_finish_coef(&sp->c, g->dt, fixed);
        if (sp->j == g->probe) {
            size_t seg = sp->j < g->cells ? sp->seg : cfg->n_segments - 1;
            g->probe_tension = cfg->segments[seg].tension_n;
        }
    }
    return SE_OK;
}

/* Integral of A p(t - t0) over [t1, t2], 5-point Gauss-Legendre on each piece between the
 * pulse's start, centre and end (where the shapes may have kinks). */
static double fd_force_integral(const se_fd_config *cfg, double t1, double t2)
{
    static const double gx[5] = {-0.9061798459386640, -0.5384693101056831, 0.0,
                                 0.5384693101056831, 0.9061798459386640};
    static const double gw[5] = {0.2369268850561891, 0.4786286704993665, 0.5688888888888889,
                                 0.4786286704993665, 0.2369268850561891};
    double t0 = cfg->pulse_start_s, D = cfg->pulse.duration_s;
    double br[5];
    size_t nb = 0;
    double sum = 0.0;
    if (t1 < t0)
        t1 = t0;
    if (t2 > t0 + D)
        t2 = t0 + D;
    if (!(t2 > t1))
        return 0.0;
    br[nb++] = t1;
    if (t0 + 0.5 * D > t1 && t0 + 0.5 * D < t2)
        br[nb++] = t0 + 0.5 * D;
    br[nb++] = t2;
    for (size_t k = 0; k + 1 < nb; k++) {
        double m = 0.5 * (br[k] + br[k + 1]), h = 0.5 * (br[k + 1] - br[k]);
        for (size_t q = 0; q < 5; q++)
            sum += gw[q] * h * se_pulse_value(&cfg->pulse, m + h * gx[q] - t0);
    }
    return cfg->pulse_amplitude_n * sum;
}

/* Force applied at step n: the mean over [t(n-1), t(n+1)] of the order-th time derivative of
 * F(t) = A p(t - t0); exact injection at Courant 1 (docs/fd-model.md). Order 1 and 2 drive the
 * fields y_t and y_tt directly (the model is linear and time-invariant). */
static double fd_source(const se_fd_config *cfg, const fd_grid *g, int order, size_t n)
{
    double tm = ((double)n - 1.0) / g->rate_fd, tn = (double)n / g->rate_fd;
    double tp = ((double)n + 1.0) / g->rate_fd, t0 = cfg->pulse_start_s;
    double D = cfg->pulse.duration_s, pad = g->dt;
    const se_pulse_shape *p = &cfg->pulse;
    if (tp < t0 - pad || tm > t0 + D + pad)
        return 0.0;
    if (order == 0)
        return (fd_force_integral(cfg, tm, tn) + fd_force_integral(cfg, tn, tp)) / (2.0 * g->dt);
    if (order == 1)
        return cfg->pulse_amplitude_n * (se_pulse_value(p, tp - t0) - se_pulse_value(p, tm - t0)) /
               (2.0 * g->dt);
    {
        double d = 1e-3 * g->dt;
        double fp = (se_pulse_value(p, tp + d - t0) - se_pulse_value(p, tp - d - t0)) / (2.0 * d);
        double fm = (se_pulse_value(p, tm + d - t0) - se_pulse_value(p, tm - d - t0)) / (2.0 * d);
        return cfg->pulse_amplitude_n * (fp - fm) / (2.0 * g->dt);
    }
}

/* Discrete energy between steps n and n+1 (yn = y^(n+1), y = y^n): kinetic from the half-step
 * velocity, strain from the product of the strains, ground springs from the mean displacement. */
static double fd_energy(const fd_grid *g, const double *yn, const double *y)
{
    double e = 0.0, idt = 1.0 / g->dt;
    for (size_t s = 0; s < g->n_sp; s++) {
        const fd_special *sp = &g->sp[s];
        size_t j = sp->j, end = s + 1 < g->n_sp ? g->sp[s + 1].j : j + 1;
        double v = (yn[j] - y[j]) * idt, m = 0.5 * (yn[j] + y[j]);
        e += 0.5 * sp->c.mass * v * v + 0.5 * sp->c.spring * m * m;
        if (j + 1 < g->n_sim)
            e += 0.5 * sp->c.kr * (yn[j + 1] - yn[j]) * (y[j + 1] - y[j]);
        if (s + 1 < g->n_sp) {
            const fd_coef *c = &g->segc[sp->seg];
            double ek = 0.0, es = 0.0, ep = 0.0;
            for (size_t i = j + 1; i < end; i++) {
                double vi = yn[i] - y[i], mi = yn[i] + y[i];
                ek += vi * vi;
                es += mi * mi;
                ep += (yn[i + 1] - yn[i]) * (y[i + 1] - y[i]);
            }
            e += 0.5 * c->mass * ek * idt * idt + 0.125 * c->spring * es + 0.5 * c->kr * ep;
        }
    }
    return e;
}

static se_status fd_run(const se_fd_config *cfg, const fd_grid *g, int order, double *probe_y,
                        double *probe_force, double *energy, double *drift, se_error *err)
{
    size_t n_sim = g->n_sim, esub;
    double *yp = se_calloc(n_sim, sizeof *yp, "fd state", err);
    double *y = se_calloc(n_sim, sizeof *y, "fd state", err);
    double *yn = se_calloc(n_sim, sizeof *yn, "fd state", err);
    double work = 0.0, diss = 0.0, scale = 0.0, worst = 0.0, i4dt = 1.0 / (4.0 * g->dt);
    const fd_special *psp = NULL;
    if (yp == NULL || y == NULL || yn == NULL) {
        free(yp);
        free(y);
        free(yn);
        return SE_ERR_NOMEM;
    }
    for (size_t s = 0; s < g->n_sp; s++)
        if (g->sp[s].j == g->probe)
            psp = &g->sp[s];
    /* Without an energy record, check the balance on about 64 frames. */
    esub = energy != NULL ? 1 : (g->frames / 64 + 1);
    probe_y[0] = 0.0;
    if (probe_force != NULL)
        probe_force[0] = 0.0;
    if (energy != NULL)
        energy[0] = 0.0;
    for (size_t n = 0; n < g->steps; n++) {
        double P = fd_source(cfg, g, order, n);
        for (size_t s = 0; s < g->n_sp; s++) {
            const fd_special *sp = &g->sp[s];
            const fd_coef *c = &sp->c;
            size_t j = sp->j;
            double yj = y[j], left = j > 0 ? y[j - 1] : 0.0, right = j + 1 < n_sim ? y[j + 1] : 0.0;
            yn[j] = c->a * (c->b1 * yj + c->b0 * yp[j] + c->kl * (left - yj) +
                            c->kr * (right - yj) + (j == 0 ? P : 0.0));
            if (c->damp != 0.0 && c->a != 0.0)
                diss += c->damp * (yn[j] - yp[j]) * (yn[j] - yp[j]) * i4dt;
            if (s + 1 < g->n_sp) {
                const fd_coef *ic = &g->segc[sp->seg];
                size_t end = g->sp[s + 1].j;
                double a = ic->a, b1 = ic->b1, b0 = ic->b0, k = ic->kr;
                for (size_t i = j + 1; i < end; i++)
                    yn[i] = a * (b1 * y[i] + b0 * yp[i] + k * (y[i + 1] + y[i - 1] - 2.0 * y[i]));
                if (ic->damp != 0.0) {
                    double d = 0.0;
                    for (size_t i = j + 1; i < end; i++)
                        d += (yn[i] - yp[i]) * (yn[i] - yp[i]);
                    diss += ic->damp * d * i4dt;
                }
            }
        }
        work += 0.5 * P * (yn[0] - yp[0]);
        if ((n + 1) % g->k_over == 0) {
            size_t i = (n + 1) / g->k_over, j = g->probe;
            probe_y[i] = yn[j];
            if (probe_force != NULL && psp != NULL) {
                double fl = j > 0 ? psp->c.kl * (yn[j - 1] - yn[j]) : 0.0;
                double fr = j + 1 < n_sim && j < g->cells ? psp->c.kr * (yn[j] - yn[j + 1]) : 0.0;
                int two = j > 0 && j < g->cells;
                probe_force[i] = two ? 0.5 * (fl + fr) : fl + fr;
            }
            if (energy != NULL || i % esub == 0 || i + 1 == g->frames) {
                double e = fd_energy(g, yn, y), bal;
                if (energy != NULL)
                    energy[i] = e;
                if (fabs(e) > scale)
                    scale = fabs(e);
                if (fabs(work) > scale)
                    scale = fabs(work);
                bal = scale > 0.0 ? fabs(e + diss - work) / scale : 0.0;
                if (bal > worst)
                    worst = bal;
            }
        }
        {
            double *t = yp;
            yp = y;
            y = yn;
            yn = t;
        }
    }
    *drift = worst;
    free(yp);
    free(y);
    free(yn);
    return SE_OK;
}

se_status se_fd_plan(const se_fd_config *cfg, se_fd_stats *stats, se_error *err)
{
    fd_grid g;
    se_status st = fd_check(cfg, err);
    if (st != SE_OK)
        return st;
    st = fd_build(cfg, 0.0, 0, &g, err);
    if (st != SE_OK)
        return st;
    if (stats != NULL) {
        stats->cells = g.cells;
        stats->dx_min_m = g.dx_min;
        stats->dt_s = g.dt;
        stats->courant_max = g.courant;
        stats->energy_drift = 0.0;
    }
    fd_free(&g);
    return SE_OK;
}

se_status se_fd_grid_delay(const se_fd_config *cfg, double x_m, double *tau_s, se_error *err)
{
    fd_grid g;
    double L;
    se_status st = fd_check(cfg, err);
    if (st != SE_OK)
        return st;
    if (tau_s == NULL)
        return se_fail(err, SE_ERR_ARG, "fd model: NULL delay output");
    L = fd_total_length(cfg);
    if (!isfinite(x_m) || x_m < 0.0 || x_m > L * (1.0 + 1e-12))
        return se_fail(err, SE_ERR_RANGE, "fd model: position x = %g m is off the line (0 .. %g m)",
                       x_m, L);
    st = fd_build(cfg, x_m, 0, &g, err);
    if (st != SE_OK)
        return st;
    *tau_s = (double)g.probe * g.dtc;
    fd_free(&g);
    return SE_OK;
}

se_status se_fd_simulate(const se_fd_config *cfg, double *response, double *force, size_t frames,
                         se_fd_stats *stats, se_error *err)
{
    return se_fd_simulate_at(cfg, 0.0, response, force, NULL, frames, stats, err);
}

se_status se_fd_simulate_at(const se_fd_config *cfg, double sensor_x_m, double *response,
                            double *force, double *energy, size_t frames, se_fd_stats *stats,
                            se_error *err)
{
    fd_grid g;
    se_status st;
    int need[3] = {0, 0, 0}, cellforce = 0, is_force;
    double *run[3] = {NULL, NULL, NULL}, *fcell = NULL, drift = 0.0, L;
    se_quantity q;

    st = fd_check(cfg, err);
    if (st != SE_OK)
        return st;
    if (response == NULL)
        return se_fail(err, SE_ERR_ARG, "fd model: NULL response buffer");
    if (frames != se_fd_frames(cfg))
        return se_fail(err, SE_ERR_ARG, "fd model: buffer of %zu frames, the recording has %zu",
                       frames, se_fd_frames(cfg));
    L = fd_total_length(cfg);
    if (!isfinite(sensor_x_m) || sensor_x_m < 0.0 || sensor_x_m > L * (1.0 + 1e-12))
        return se_fail(err, SE_ERR_RANGE, "fd model: sensor at x = %g m is off the line (0 .. %g m)",
                       sensor_x_m, L);
    st = fd_build(cfg, sensor_x_m, energy != NULL, &g, err);
    if (st != SE_OK)
        return st;

    q = cfg->output;
    if (q == SE_Q_VOLTAGE)
        q = SE_Q_FORCE;
    if (q == SE_Q_CURRENT)
        q = SE_Q_VELOCITY;
    is_force = q == SE_Q_FORCE || q == SE_Q_STRAIN;
    if (q == SE_Q_DISPLACEMENT || energy != NULL)
        need[0] = 1;
    if (q == SE_Q_VELOCITY)
        need[1] = 1;
    if (q == SE_Q_ACCELERATION)
        need[2] = 1;
    if (is_force && g.probe == 0) {
        /* line force at 0+: F - (termination + dashpot) v - m a - k y */
        if (g.zt0 + g.c0 != 0.0)
            need[1] = 1;
        if (g.m0 != 0.0)
            need[2] = 1;
        if (g.k0 != 0.0)
            need[0] = 1;
    } else if (is_force) {
        need[0] = 1;
        cellforce = 1;
    }
    if (!need[0] && !need[1] && !need[2])
        need[0] = 1; /* one run anyway, for the energy balance in stats */

    for (int o = 0; o < 3 && st == SE_OK; o++) {
        double d = 0.0;
        if (!need[o])
            continue;
        run[o] = se_calloc(frames, sizeof(double), "fd sensor record", err);
        if (run[o] == NULL) {
            st = SE_ERR_NOMEM;
            break;
        }
        if (o == 0 && cellforce) {
            fcell = se_calloc(frames, sizeof(double), "fd sensor force", err);
            if (fcell == NULL) {
                st = SE_ERR_NOMEM;
                break;
            }
        }
        st = fd_run(cfg, &g, o, run[o], o == 0 ? fcell : NULL, o == 0 ? energy : NULL, &d, err);
        if (d > drift)
            drift = d;
    }
    if (st == SE_OK) {
        for (size_t i = 0; i < frames; i++) {
            double t = (double)i / cfg->rate_hz;
            double F = cfg->pulse_amplitude_n * se_pulse_value(&cfg->pulse, t - cfg->pulse_start_s);
            double v;
            if (force != NULL)
                force[i] = F;
            if (q == SE_Q_DISPLACEMENT)
                v = run[0][i];
            else if (q == SE_Q_VELOCITY)
                v = run[1][i];
            else if (q == SE_Q_ACCELERATION)
                v = run[2][i];
            else if (cellforce)
                v = fcell[i];
            else
                v = F - (need[1] && g.zt0 + g.c0 != 0.0 ? (g.zt0 + g.c0) * run[1][i] : 0.0) -
                    (g.m0 != 0.0 ? g.m0 * run[2][i] : 0.0) - (g.k0 != 0.0 ? g.k0 * run[0][i] : 0.0);
            if (q == SE_Q_STRAIN)
                v = -v / g.probe_tension;
            response[i] = v;
        }
        if (stats != NULL) {
            stats->cells = g.cells;
            stats->dx_min_m = g.dx_min;
            stats->dt_s = g.dt;
            stats->courant_max = g.courant;
            stats->energy_drift = drift;
        }
    }
    for (int o = 0; o < 3; o++)
        free(run[o]);
    free(fcell);
    fd_free(&g);
    return st;
}
