/* strandecho: change since a baseline (compare.h): align, stretch, gain, subtract, detect. */
#include "strandecho/compare.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "strandecho/detect.h"

/* Golden-section iterations of the stretch search (interval shrinks by 0.618^n). */
#define SE_CMP_GOLDEN_STEPS 48
/* At most this many stretch values on the coarse grid. */
#define SE_CMP_MAX_GRID 4001
/* Noise floor of the residual relative to the direct arrival (as the locator's 80 dB). */
#define SE_CMP_NOISE_FLOOR 1e-4

typedef struct se_cmp {
    const se_locate_result *b, *n;
    double rate, w_s;     /* sample rate; half support of an echo in the trace (s) */
    double stretch;
    const size_t *idx;    /* samples used by the stretch search */
    size_t n_idx;
} se_cmp;

static double se_cubic_at(const double *x, size_t n, double pos);
static double se_base_value(const se_cmp *c, double tau_now, size_t *hint);
static double se_search_score(se_cmp *c, double stretch);
static double se_distance(const se_cmp *c, const se_compare_config *cfg, double delay_s);
static int se_change_cmp(const void *a, const void *b);
static double *se_transmission(const se_locate_result *res, se_error *err);
static int se_dbl_cmp(const void *a, const void *b);
static void se_cnum(char *out, size_t size, const char *fmt, double v);

void se_compare_config_init(se_compare_config *cfg)
{
    memset(cfg, 0, sizeof *cfg);
    cfg->false_alarms = 0.01;
    cfg->max_stretch = 0.05;
}

const char *se_change_kind_name(se_change_kind kind)
{
    switch (kind) {
    case SE_CHANGE_NEW: return "new";
    case SE_CHANGE_GONE: return "gone";
    case SE_CHANGE_MOVED: return "moved";
    case SE_CHANGE_STRENGTH: return "changed";
    }
    return NULL;
}

/* snprintf of one number with a point as the decimal separator (the C locale's), whatever the
 * process locale wrote. */
static void se_cnum(char *out, size_t size, const char *fmt, double v)
{
    char *p;
    if (!isfinite(v)) {
        snprintf(out, size, "n/a");
        return;
    }
    snprintf(out, size, fmt, v);
    for (p = out; *p; p++)
        if (!((*p >= '0' && *p <= '9') || *p == '-' || *p == '+' || *p == 'e' || *p == 'E'))
            *p = '.';
}

se_status se_compare_sentence(const se_compare_result *res, const char *since, double per_metre,
                              const char *unit, char *buf, size_t size, se_error *err)
{
    char speed[32], d[32], x[32], y[32], z[32], part[192];
    size_t i, len, listed = 0;
    const char *u = unit != NULL ? unit : "m";
    if (res == NULL || buf == NULL || size < 96 || !(per_metre > 0.0) || !isfinite(per_metre))
        return se_fail(err, SE_ERR_ARG, "compare sentence: %s",
                       res == NULL || buf == NULL ? "NULL argument"
                       : size < 96               ? "buffer under 96 bytes"
                                                 : "per_metre not a positive number");
    if (since == NULL)
        since = "the baseline";
    se_cnum(speed, sizeof speed, "%+.2f", res->speed_change * 100.0);
    if (res->n_faults == 0) {
        size_t secondary = res->n_changes;
        snprintf(buf, size, "no change that may be a fault since %s (speed %s %%)", since, speed);
        len = strlen(buf);
        if (secondary > 0)
            snprintf(buf + len, size - len, ", %zu secondary", secondary);
        return SE_OK;
    }
    snprintf(buf, size, "since %s (speed %s %%):", since, speed);
    for (i = 0; i < res->n_changes; i++) {
        const se_change *ch = &res->changes[i];
        size_t more = 0, k;
        if (ch->secondary)
            continue;
        se_cnum(d, sizeof d, "%.1f", ch->distance_m * per_metre);
        se_cnum(z, sizeof z, "%.0f", ch->significance);
        switch (ch->kind) {
        case SE_CHANGE_NEW:
            snprintf(part, sizeof part, "new reflection at %s %s, %s sigma", d, u, z);
            break;
        case SE_CHANGE_GONE:
            snprintf(part, sizeof part, "reflection at %s %s gone, %s sigma", d, u, z);
            break;
        case SE_CHANGE_MOVED:
            se_cnum(x, sizeof x, "%+.2f", ch->shift_m * per_metre);
            snprintf(part, sizeof part, "reflection moved by %s %s to %s %s, %s sigma", x, u, d, u, z);
            break;
        default:
            se_cnum(x, sizeof x, "%+.3f", ch->reflection_baseline);
            se_cnum(y, sizeof y, "%+.3f", ch->reflection_now);
            snprintf(part, sizeof part, "reflection at %s %s changed from %s to %s, %s sigma", d, u, x, y, z);
            break;
        }
        for (k = i; k < res->n_changes; k++)
            more += !res->changes[k].secondary;
        len = strlen(buf);
        /* room for this part and, after it, "; and N more" */
        if (len + 2 + strlen(part) + (more > 1 ? 24 : 0) >= size) {
            if (listed == 0)
                snprintf(buf + len, size - len, " %zu change%s that may be a fault", more, more == 1 ? "" : "s");
            else
                snprintf(buf + len, size - len, "; and %zu more", more);
            return SE_OK;
        }
        snprintf(buf + len, size - len, "%s%s", listed > 0 ? "; " : " ", part);
        listed++;
    }
    return SE_OK;
}

void se_compare_result_free(se_compare_result *res)
{
    if (res == NULL)
        return;
    free(res->changes);
    free(res->aligned_baseline);
    free(res->residual);
    res->changes = NULL;
    res->aligned_baseline = res->residual = NULL;
    res->n_changes = res->n_faults = res->n = 0;
}

/* Catmull-Rom cubic through x[k-1..k+2] at fractional index pos; 0 outside [1, n - 2]. */
static double se_cubic_at(const double *x, size_t n, double pos)
{
    double f, p0, p1, p2, p3;
    size_t k;
    if (!(pos >= 1.0) || !(pos <= (double)n - 3.0))
        return 0.0;
    k = (size_t)pos;
    f = pos - (double)k;
    p0 = x[k - 1];
    p1 = x[k];
    p2 = x[k + 1];
    p3 = x[k + 2];
    return p1 + 0.5 * f * (p2 - p0 + f * (2.0 * p0 - 5.0 * p1 + 4.0 * p2 - p3 +
                                            f * (3.0 * (p1 - p2) + p3 - p0)));
}

/* Baseline trace at now delay tau_now under the current stretch: the baseline delay is
 * tau_now / stretch, except within w_s of a baseline echo's predicted delay, where the echo's own
 * shift is held so the pulse is moved, not widened. *hint walks the sorted events. */
static double se_base_value(const se_cmp *c, double tau_now, size_t *hint)
{
    const se_locate_result *b = c->b;
    double tb = tau_now / c->stretch;
    size_t k = *hint;
    while (k + 1 < b->n_events &&
           fabs(c->stretch * b->events[k + 1].delay_s - tau_now) <
               fabs(c->stretch * b->events[k].delay_s - tau_now))
        k++;
    *hint = k;
    if (b->n_events > 0) {
        double centre = c->stretch * b->events[k].delay_s;
        if (fabs(tau_now - centre) < c->w_s)
            tb = tau_now - (centre - b->events[k].delay_s);
    }
    return se_cubic_at(b->trace, b->trace_length, (tb + b->t0_s) * c->rate);
}

/* Normalised correlation of now and the stretched baseline over the search samples. */
static double se_search_score(se_cmp *c, double stretch)
{
    double sab = 0.0, sbb = 0.0;
    size_t j, hint = 0;
    c->stretch = stretch;
    for (j = 0; j < c->n_idx; j++) {
        double tau = (double)c->idx[j] / c->rate - c->n->t0_s;
        double v = se_base_value(c, tau, &hint);
        sab += c->n->trace[c->idx[j]] * v;
        sbb += v * v;
    }
    return sbb > 0.0 ? sab / sqrt(sbb) : 0.0;
}

static double se_distance(const se_cmp *c, const se_compare_config *cfg, double delay_s)
{
    double d;
    if (cfg->map != NULL && se_distmap_distance(cfg->map, delay_s, &d, NULL) == SE_OK)
        return d;
    return 0.5 * c->n->speed_m_s * delay_s;
}

static int se_change_cmp(const void *a, const void *b)
{
    const se_change *x = a, *y = b;
    return (x->delay_s > y->delay_s) - (x->delay_s < y->delay_s);
}

static int se_dbl_cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Two-way transmission in front of each event [size: n_events] (malloc'd): the product of
 * 1 - r^2 over the primaries before it, each r first divided by the transmission in front of it
 * (the coefficient as it is, not as it is seen through the others). */
static double *se_transmission(const se_locate_result *res, se_error *err)
{
    double *t = se_calloc(res->n_events ? res->n_events : 1, sizeof *t, "transmission", err);
    size_t i, j;
    if (t == NULL)
        return NULL;
    for (i = 0; i < res->n_events; i++) {
        t[i] = 1.0;
        for (j = 0; j < i; j++) {
            double rt;
            if (res->events[j].multiple ||
                res->events[j].delay_s > res->events[i].delay_s - res->resolution_s)
                continue;
            rt = fmin(fabs(res->events[j].reflection / t[j]), 0.999);
            t[i] *= 1.0 - rt * rt;
        }
    }
    return t;
}

se_status se_compare(const se_locate_result *baseline, const se_locate_result *now,
                     const se_compare_config *cfg, se_compare_result *out, se_error *err)
{
    se_compare_config def;
    se_cmp c;
    se_status st = SE_OK;
    size_t *idx = NULL, *peaks = NULL, n, i, i0, i1, np = 0, nidx = 0, hint, j, npair = 0;
    int *pair_n = NULL, *pair_b = NULL;
    double *tn = NULL, *tb = NULL;
    double from, to, lo, hi, step, best, bestv, noise_n, sab = 0.0, sbb = 0.0, saa = 0.0;
    double sigma, kthr, thr, tol;
    se_noise nz;

    if (out == NULL)
        return se_fail(err, SE_ERR_ARG, "compare: no result record");
    memset(out, 0, sizeof *out);
    if (cfg == NULL) {
        se_compare_config_init(&def);
        cfg = &def;
    }
    if (baseline == NULL || now == NULL)
        return se_fail(err, SE_ERR_ARG, "compare: no baseline or no current result");
    if (baseline->trace == NULL || now->trace == NULL || baseline->trace_length < 16 ||
        now->trace_length < 16)
        return se_fail(err, SE_ERR_ARG, "compare: both results need their traces (keep_trace)");
    if (!(now->rate_hz > 0.0) || fabs(baseline->rate_hz - now->rate_hz) > 1e-9 * now->rate_hz)
        return se_fail(err, SE_ERR_ARG,
                       "compare: sample rates differ (baseline %.10g Hz, now %.10g Hz): resample one",
                       baseline->rate_hz, now->rate_hz);
    if (!(cfg->false_alarms > 0.0 && cfg->false_alarms <= 1000.0) ||
        !(cfg->max_stretch > 0.0 && cfg->max_stretch < 0.5))
        return se_fail(err, SE_ERR_ARG,
                       "compare: false alarms %g (need (0, 1000]) or stretch range %g (need (0, 0.5))",
                       cfg->false_alarms, cfg->max_stretch);

    memset(&c, 0, sizeof c);
    c.b = baseline;
    c.n = now;
    c.rate = now->rate_hz;
    c.w_s = (double)(now->reference_length > baseline->reference_length ? now->reference_length
                                                                        : baseline->reference_length) /
            c.rate;
    n = now->trace_length;

    /* Delays both records cover, whatever the stretch. */
    from = fmax(now->dead_zone_s, (1.0 + cfg->max_stretch) * baseline->dead_zone_s);
    to = fmin(now->record_range_s, (1.0 - cfg->max_stretch) * baseline->record_range_s);
    i0 = (size_t)ceil((from + now->t0_s) * c.rate);
    i1 = (size_t)fmin(floor((to + now->t0_s) * c.rate), (double)n - 1.0);
    if (!(to > from) || i1 <= i0 + 16)
        return se_fail(err, SE_ERR_DATA,
                       "compare: the records share no delays beyond their dead zones (%.6g s to "
                       "%.6g s)",
                       from, to);
    out->search_from_s = from;
    out->search_to_s = to;

    /* Stretch search on the samples where the now trace stands out of its noise. */
    idx = se_calloc(i1 - i0 + 1, sizeof *idx, "compare samples", err);
    if (idx == NULL)
        return SE_ERR_NOMEM;
    noise_n = now->noise_level > 0.0 ? now->noise_level : SE_CMP_NOISE_FLOOR;
    for (i = i0; i <= i1; i++)
        if (fabs(now->trace[i]) > 4.0 * noise_n)
            idx[nidx++] = i;
    if (nidx < 8)
        for (nidx = 0, i = i0; i <= i1; i++)
            idx[nidx++] = i;
    c.idx = idx;
    c.n_idx = nidx;
    pair_n = se_calloc(baseline->n_events + 1, sizeof *pair_n, "echo pairs", err);
    pair_b = se_calloc(baseline->n_events + 1, sizeof *pair_b, "echo pairs", err);
    tn = se_transmission(now, err);
    tb = se_transmission(baseline, err);
    if (pair_n == NULL || pair_b == NULL || tn == NULL || tb == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    step = 0.25 * fmax(now->resolution_s, 1.0 / c.rate) / to;
    if (2.0 * cfg->max_stretch / step > SE_CMP_MAX_GRID - 1)
        step = 2.0 * cfg->max_stretch / (SE_CMP_MAX_GRID - 1);
    best = 1.0;
    bestv = -INFINITY;
    for (i = 0;; i++) {
        double s = 1.0 - cfg->max_stretch + (double)i * step, v;
        if (s > 1.0 + cfg->max_stretch + 0.5 * step)
            break;
        v = se_search_score(&c, s);
        if (v > bestv) {
            bestv = v;
            best = s;
        }
    }
    lo = best - step;
    hi = best + step;
    {
        const double g = 0.5 * (sqrt(5.0) - 1.0);
        double a = hi - g * (hi - lo), b = lo + g * (hi - lo);
        double fa = se_search_score(&c, a), fb = se_search_score(&c, b);
        for (i = 0; i < SE_CMP_GOLDEN_STEPS; i++) {
            if (fa > fb) {
                hi = b;
                b = a;
                fb = fa;
                a = hi - g * (hi - lo);
                fa = se_search_score(&c, a);
            } else {
                lo = a;
                a = b;
                fa = fb;
                b = lo + g * (hi - lo);
                fb = se_search_score(&c, b);
            }
        }
        c.stretch = 0.5 * (lo + hi);
    }

    /* Refine from the strongest common primary echoes: pair them under the searched stretch, take
     * the median ratio of now delay to baseline delay, then weighted least squares through the
     * origin over the pairs that agree with it (within 3 sigma and a quarter sample), so that a
     * reflector that moved does not pull the fit. */
    {
        double *q = se_calloc(baseline->n_events + 1, sizeof *q, "stretch ratios", err);
        double med, swnb = 0.0, swbb = 0.0;
        size_t kept = 0;
        if (q == NULL) {
            st = SE_ERR_NOMEM;
            goto done;
        }
        npair = 0;
        for (i = 0; i < baseline->n_events; i++) {
            const se_event *eb = &baseline->events[i];
            double pred = c.stretch * eb->delay_s, bestd = INFINITY;
            int jn = -1;
            if (eb->multiple || eb->delay_s < from || pred > to || !(eb->delay_s > 0.0))
                continue;
            for (j = 0; j < now->n_events; j++) {
                const se_event *e = &now->events[j];
                if (e->multiple || e->polarity != eb->polarity)
                    continue;
                if (fabs(e->delay_s - pred) < bestd) {
                    bestd = fabs(e->delay_s - pred);
                    jn = (int)j;
                }
            }
            if (jn < 0 || bestd > fmax(now->resolution_s, baseline->resolution_s))
                continue;
            pair_n[npair] = jn;
            pair_b[npair] = (int)i;
            q[npair] = now->events[jn].delay_s / eb->delay_s;
            npair++;
        }
        if (npair > 0) {
            double *qs = se_calloc(npair, sizeof *qs, "stretch ratios", err);
            if (qs == NULL) {
                free(q);
                st = SE_ERR_NOMEM;
                goto done;
            }
            memcpy(qs, q, npair * sizeof *qs);
            qsort(qs, npair, sizeof *qs, se_dbl_cmp);
            med = npair % 2 ? qs[npair / 2] : 0.5 * (qs[npair / 2 - 1] + qs[npair / 2]);
            free(qs);
            for (j = 0; j < npair; j++) {
                const se_event *en = &now->events[pair_n[j]], *eb = &baseline->events[pair_b[j]];
                double var = en->delay_uncertainty_s * en->delay_uncertainty_s +
                             med * med * eb->delay_uncertainty_s * eb->delay_uncertainty_s;
                double w;
                if (!(var > 0.0))
                    var = 1.0 / (c.rate * c.rate);
                if (fabs(en->delay_s - med * eb->delay_s) > 3.0 * sqrt(var) + 0.25 / c.rate)
                    continue;
                w = 1.0 / var;
                swnb += w * en->delay_s * eb->delay_s;
                swbb += w * eb->delay_s * eb->delay_s;
                pair_n[kept] = pair_n[j];
                pair_b[kept] = pair_b[j];
                kept++;
            }
        }
        free(q);
        npair = kept;
        out->n_common = kept;
        if (kept > 0 && swbb > 0.0 && fabs(swnb / swbb - 1.0) <= cfg->max_stretch) {
            c.stretch = swnb / swbb;
            out->stretch_from_echoes = 1;
        }
    }
    out->stretch = c.stretch;
    out->speed_change = 1.0 / c.stretch - 1.0;

    /* Aligned baseline, gain, residual. */
    out->aligned_baseline = se_calloc(n, sizeof *out->aligned_baseline, "aligned baseline", err);
    out->residual = se_calloc(n, sizeof *out->residual, "residual", err);
    if (out->aligned_baseline == NULL || out->residual == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    out->n = n;
    out->rate_hz = c.rate;
    out->t0_s = now->t0_s;
    for (i = 0, hint = 0; i < n; i++)
        out->aligned_baseline[i] = se_base_value(&c, (double)i / c.rate - now->t0_s, &hint);
    for (i = i0; i <= i1; i++) {
        sab += now->trace[i] * out->aligned_baseline[i];
        sbb += out->aligned_baseline[i] * out->aligned_baseline[i];
        saa += now->trace[i] * now->trace[i];
    }
    out->gain = sbb > 0.0 ? sab / sbb : 1.0;
    if (npair > 0) {
        /* from the common echoes: median ratio (transmission-corrected; the outgoing pulse counts
         * with ratio 1), then least squares over the echoes that agree with it */
        double *q = se_calloc(npair + 1, sizeof *q, "gain ratios", err), med, snb = 0.0, sbb2 = 0.0;
        size_t nq = npair + 1;
        if (q == NULL) {
            st = SE_ERR_NOMEM;
            goto done;
        }
        for (j = 0; j < npair; j++) {
            const se_event *a = &now->events[pair_n[j]], *b = &baseline->events[pair_b[j]];
            q[j] = a->reflection / (b->reflection * tn[pair_n[j]] / tb[pair_b[j]]);
        }
        /* the direct arrival is a common echo too, of ratio 1 by the normalisation */
        q[npair] = 1.0;
        qsort(q, nq, sizeof *q, se_dbl_cmp);
        med = nq % 2 ? q[nq / 2] : 0.5 * (q[nq / 2 - 1] + q[nq / 2]);
        free(q);
        for (j = 0; j < npair; j++) {
            const se_event *a = &now->events[pair_n[j]], *b = &baseline->events[pair_b[j]];
            double bf = b->reflection * tn[pair_n[j]] / tb[pair_b[j]];
            double sd = sqrt(a->reflection_uncertainty * a->reflection_uncertainty +
                             med * med * b->reflection_uncertainty * b->reflection_uncertainty);
            if (fabs(a->reflection - med * bf) <= 4.0 * sd + 1e-3 * fabs(a->reflection)) {
                snb += a->reflection * bf;
                sbb2 += bf * bf;
            }
        }
        out->gain = sbb2 > 0.0 ? snb / sbb2 : med;
    }
    out->correlation = sbb > 0.0 && saa > 0.0 ? sab / sqrt(sbb * saa) : 0.0;
    for (i = 0; i < n; i++) {
        out->aligned_baseline[i] *= out->gain;
        out->residual[i] = now->trace[i] - out->aligned_baseline[i];
    }
    st = se_noise_mad(out->residual, i0, i1 + 1, (size_t)1 << 20, &nz, err);
    if (st != SE_OK)
        goto done;
    sigma = fmax(nz.sigma, SE_CMP_NOISE_FLOOR);
    kthr = se_rice_k((double)(i1 + 1 - i0), nz.beta > 0.0 ? nz.beta : 0.5, cfg->false_alarms);
    if (!isfinite(kthr))
        kthr = 6.0;
    thr = kthr * sigma;
    out->residual_sigma = sigma;
    out->threshold = thr;
    out->threshold_sigma = kthr;

    /* Residual peaks above the threshold, strongest first, one per echo width. */
    peaks = se_calloc(i1 - i0 + 1, sizeof *peaks, "residual peaks", err);
    if (peaks == NULL) {
        st = SE_ERR_NOMEM;
        goto done;
    }
    for (i = i0 + 1; i < i1; i++) {
        double a = fabs(out->residual[i]);
        if (a > thr && a >= fabs(out->residual[i - 1]) && a > fabs(out->residual[i + 1]))
            peaks[np++] = i;
    }
    /* selection sort by size with suppression (few peaks in practice) */
    {
        size_t kept = 0, sep = (size_t)ceil(c.w_s * c.rate);
        for (i = 0; i < np; i++) {
            size_t bi = i, t;
            int suppressed = 0;
            for (j = i + 1; j < np; j++)
                if (fabs(out->residual[peaks[j]]) > fabs(out->residual[peaks[bi]]))
                    bi = j;
            t = peaks[i];
            peaks[i] = peaks[bi];
            peaks[bi] = t;
            for (j = 0; j < kept; j++)
                if ((peaks[i] > peaks[j] ? peaks[i] - peaks[j] : peaks[j] - peaks[i]) < sep)
                    suppressed = 1;
            if (!suppressed)
                peaks[kept++] = peaks[i];
        }
        np = kept;
    }
    if (np > 0) {
        out->changes = se_calloc(np, sizeof *out->changes, "changes", err);
        if (out->changes == NULL) {
            st = SE_ERR_NOMEM;
            goto done;
        }
    }
    tol = 1.5 * fmax(fmax(now->resolution_s, baseline->resolution_s), 1.0 / c.rate);
    for (i = 0; i < np; i++) {
        size_t p = peaks[i], k;
        double tau = (double)p / c.rate - now->t0_s, dn = INFINITY, db = INFINITY;
        double sig = fabs(out->residual[p]) / sigma;
        int en = -1, eb = -1, dup = 0;
        se_change ch;
        for (k = 0; k < now->n_events; k++)
            if (fabs(now->events[k].delay_s - tau) < fmin(dn, tol)) {
                dn = fabs(now->events[k].delay_s - tau);
                en = (int)k;
            }
        for (k = 0; k < baseline->n_events; k++)
            if (fabs(c.stretch * baseline->events[k].delay_s - tau) < fmin(db, tol)) {
                db = fabs(c.stretch * baseline->events[k].delay_s - tau);
                eb = (int)k;
            }
        memset(&ch, 0, sizeof ch);
        ch.event_now = en;
        ch.event_baseline = eb;
        ch.significance = sig;
        ch.baseline_delay_s = NAN;
        ch.reflection_now = NAN;
        ch.reflection_baseline = NAN;
        if (en >= 0 && eb >= 0) {
            const se_event *a = &now->events[en], *b = &baseline->events[eb];
            double pred = c.stretch * b->delay_s, shift = a->delay_s - pred;
            double sd = sqrt(a->delay_uncertainty_s * a->delay_uncertainty_s +
                             c.stretch * c.stretch * b->delay_uncertainty_s * b->delay_uncertainty_s);
            double z = sd > 0.0 ? fabs(shift) / sd : 0.0;
            ch.delay_s = a->delay_s;
            ch.baseline_delay_s = b->delay_s;
            ch.reflection_now = a->reflection;
            ch.reflection_baseline = out->gain * b->reflection;
            ch.secondary = a->multiple && b->multiple;
            if (z > kthr) {
                ch.kind = SE_CHANGE_MOVED;
                ch.significance = z;
                ch.shift_m = se_distance(&c, cfg, a->delay_s) - se_distance(&c, cfg, pred);
            } else {
                /* a shadow: the transmission through what changed in front explains it */
                double pred_r = out->gain * b->reflection * tn[en] / tb[eb];
                double sr = sqrt(a->reflection_uncertainty * a->reflection_uncertainty +
                                 out->gain * out->gain * b->reflection_uncertainty *
                                     b->reflection_uncertainty);
                ch.kind = SE_CHANGE_STRENGTH;
                if (fabs(a->reflection - pred_r) <= kthr * sr)
                    ch.secondary = 1;
            }
        } else if (en >= 0) {
            ch.kind = SE_CHANGE_NEW;
            ch.delay_s = now->events[en].delay_s;
            ch.reflection_now = now->events[en].reflection;
            ch.secondary = now->events[en].multiple;
        } else if (eb >= 0) {
            ch.kind = SE_CHANGE_GONE;
            ch.delay_s = c.stretch * baseline->events[eb].delay_s;
            ch.baseline_delay_s = baseline->events[eb].delay_s;
            ch.reflection_baseline = out->gain * baseline->events[eb].reflection;
            ch.reflection_now = now->trace[p];
            ch.secondary = baseline->events[eb].multiple;
        } else {
            /* below the locator's threshold in both, but the difference stands out */
            ch.delay_s = tau;
            ch.reflection_now = now->trace[p];
            ch.reflection_baseline = out->aligned_baseline[p];
            ch.kind = fabs(now->trace[p]) >= fabs(out->aligned_baseline[p]) ? SE_CHANGE_NEW
                                                                            : SE_CHANGE_GONE;
        }
        ch.distance_m = se_distance(&c, cfg, ch.delay_s);
        /* one finding per pair of events (a moved echo leaves two residual lobes) */
        for (k = 0; k < out->n_changes && (en >= 0 || eb >= 0); k++) {
            se_change *o = &out->changes[k];
            if (o->event_now == en && o->event_baseline == eb) {
                if (ch.kind == SE_CHANGE_MOVED || ch.significance > o->significance)
                    *o = ch;
                dup = 1;
                break;
            }
        }
        if (!dup)
            out->changes[out->n_changes++] = ch;
    }
    if (out->n_changes > 1)
        qsort(out->changes, out->n_changes, sizeof *out->changes, se_change_cmp);
    for (i = 0; i < out->n_changes; i++)
        out->n_faults += !out->changes[i].secondary;

done:
    free(idx);
    free(pair_n);
    free(pair_b);
    free(tn);
    free(tb);
    free(peaks);
    if (st != SE_OK)
        se_compare_result_free(out);
    return st;
}
