/* strandecho: band-limited sub-sample refinement of a matched-filter peak. */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_min.h>
#include <math.h>
#include <stdlib.h>

#include "internal.h"
#include "strandecho/detect.h"

#define SE_PI 3.14159265358979323846
#define SE_REFINE_MIN_HALF 16                 /* smallest auto window half length */
#define SE_REFINE_MAX_HALF ((size_t)1 << 16)  /* largest auto window half length */
#define SE_REFINE_EDGE_LEVEL 1e-7             /* auto window: edges below this fraction of the peak */
#define SE_REFINE_XTOL 2e-8                   /* Brent interval, samples */
#define SE_REFINE_MAX_ITER 100

/* The window y [size: len] and the position c (in y) of the integer peak. */
typedef struct se_trig_window {
    const double *y;
    size_t len;
    size_t c;
    double sign;  /* sign of y[c]: the minimiser works on -sign * p */
} se_trig_window;

static size_t se_refine_auto_half(const double *r, size_t n, size_t k);
static double se_trig_eval(const se_trig_window *tw, double tau);
static double se_trig_neg(double tau, void *params);
static double se_lobe_vertex(const double *y, size_t len, size_t i);
static double se_lobe_top(const se_trig_window *tw, size_t i);
static size_t se_next_lobe(const double *y, size_t from, size_t first, size_t last, int dir);

/* Envelope of |r| on rings (h/2, h] around k, doubled from 16 while it still falls and is above
 * SE_REFINE_EDGE_LEVEL of the peak: the window then covers the main lobe and the tail of a long
 * (oscillating) pulse, and stops at the noise floor or the next echo. */
static size_t se_refine_auto_half(const double *r, size_t n, size_t k)
{
    double peak = fabs(r[k]), prev = HUGE_VAL;
    size_t h = SE_REFINE_MIN_HALF;
    for (;;) {
        double ring = 0.0;
        size_t j;
        for (j = h / 2 + 1; j <= h; j++) {
            if (j <= k && fabs(r[k - j]) > ring)
                ring = fabs(r[k - j]);
            if (k + j < n && fabs(r[k + j]) > ring)
                ring = fabs(r[k + j]);
        }
        if (ring <= SE_REFINE_EDGE_LEVEL * peak || ring >= prev)
            break;
        if (h >= SE_REFINE_MAX_HALF || (h >= k && k + h >= n - 1))
            break;
        prev = ring;
        h *= 2;
    }
    return h;
}

/* Trigonometric interpolant of the len samples, periodic with period len, at position c + tau:
 *   p(t) = sum_j y_j D(t - j),  D(u) = sin(pi u) / (len sin(pi u / len))   (len odd)
 *                                     sin(pi u) / (len tan(pi u / len))   (len even, Nyquist split)
 * which is what zero-padded FFT upsampling of the window gives at that point. With
 * sin(pi (c + tau - j)) = (-1)^(c-j) sin(pi tau), one sine per call plus a rotation recurrence
 * (re-seeded every 32 terms) for the denominators. */
static double se_trig_eval(const se_trig_window *tw, double tau)
{
    double st = sin(SE_PI * tau), d = SE_PI / (double)tw->len, acc = 0.0;
    double cd = cos(d), sd = sin(d), sa = 0.0, ca = 1.0;
    int even = (tw->len % 2) == 0;
    size_t j;
    if (st == 0.0) {
        long t = lround(tau);
        long idx = (long)tw->c + t;
        return (idx >= 0 && (size_t)idx < tw->len) ? tw->y[idx] : 0.0;
    }
    for (j = 0; j < tw->len; j++) {
        double den, term;
        if (j % 32 == 0 || j == tw->c) { /* exact where the denominator is small */
            double off = j <= tw->c ? (double)(tw->c - j) : -(double)(j - tw->c);
            double ang = (off + tau) * d; /* integer part first: tau keeps its precision */
            sa = sin(ang);
            ca = cos(ang);
        }
        den = even ? sa / ca : sa;
        term = tw->y[j] / den;
        acc += ((tw->c + j) % 2 == 0) ? term : -term;
        {   /* angle decreases by d per sample */
            double s2 = sa * cd - ca * sd, c2 = ca * cd + sa * sd;
            sa = s2;
            ca = c2;
        }
    }
    return st * acc / (double)tw->len;
}

static double se_trig_neg(double tau, void *params)
{
    const se_trig_window *tw = params;
    return -tw->sign * se_trig_eval(tw, tau);
}

/* Vertex of the parabola through |y| at i-1, i, i+1, in (-1, 1); 0 when not a strict top. */
static double se_lobe_vertex(const double *y, size_t len, size_t i)
{
    double ym, y0, yp, den, v;
    if (i == 0 || i + 1 >= len)
        return 0.0;
    ym = fabs(y[i - 1]);
    y0 = fabs(y[i]);
    yp = fabs(y[i + 1]);
    den = ym - 2.0 * y0 + yp;
    if (!(den < 0.0))
        return 0.0;
    v = 0.5 * (ym - yp) / den;
    return (v > -1.0 && v < 1.0) ? v : 0.0;
}

/* Interpolated height of the lobe of |y| whose integer top is i (one evaluation at the vertex). */
static double se_lobe_top(const se_trig_window *tw, size_t i)
{
    se_trig_window at = *tw;
    double v = se_lobe_vertex(tw->y, tw->len, i), p;
    at.c = i;
    p = v != 0.0 ? fabs(se_trig_eval(&at, v)) : 0.0;
    return p > fabs(tw->y[i]) ? p : fabs(tw->y[i]);
}

/* Next local maximum of |y| from `from` in direction dir (+1/-1), within [first, last]
 * (1 <= first, last <= len - 2); returns (size_t)-1 when there is none. */
static size_t se_next_lobe(const double *y, size_t from, size_t first, size_t last, int dir)
{
    size_t i = from;
    for (;;) {
        if (dir < 0 ? i <= first : i >= last)
            return (size_t)-1;
        i = dir < 0 ? i - 1 : i + 1;
        if (fabs(y[i]) >= fabs(y[i - 1]) && fabs(y[i]) >= fabs(y[i + 1]))
            return i;
    }
}

se_status se_refine_peak(const double *r, size_t n, size_t k, size_t window_half, double *lag,
                         double *amp, se_error *err)
{
    size_t kp = 0;
    double tau = 0.0;
    se_status st;
    if (r != NULL && lag == NULL)
        return se_fail(err, SE_ERR_ARG, "refine: NULL lag");
    st = se_refine_peak_at(r, n, k, window_half, &kp, &tau, amp, err);
    if (st == SE_OK)
        *lag = (double)kp + tau;
    return st;
}

se_status se_refine_peak_at(const double *r, size_t n, size_t k, size_t window_half, size_t *kpeak,
                            double *tau_out, double *amp, se_error *err)
{
    size_t h, lo, hi, len, c, j, steps;
    double *y;
    se_trig_window tw;
    double lower, upper, guess, fl, fu, fg;
    gsl_min_fminimizer *mz;
    gsl_function fn;
    se_status st = SE_OK;
    int it, status;

    if (r == NULL || kpeak == NULL || tau_out == NULL || amp == NULL)
        return se_fail(err, SE_ERR_ARG, "refine: NULL %s",
                       r == NULL ? "data" : amp == NULL ? "amplitude" : "lag");
    if (n < 3 || k >= n)
        return se_fail(err, SE_ERR_ARG, "refine: index %zu outside %zu samples (need >= 3)", k, n);
    /* uphill to the local maximum of |r| */
    for (steps = 0; steps < n; steps++) {
        if (!isfinite(r[k]))
            return se_fail(err, SE_ERR_DATA, "refine: sample %zu is not finite", k);
        if (k > 0 && fabs(r[k - 1]) > fabs(r[k]))
            k--;
        else if (k + 1 < n && fabs(r[k + 1]) > fabs(r[k]))
            k++;
        else
            break;
    }
    if (r[k] == 0.0)
        return se_fail(err, SE_ERR_DATA, "refine: no peak near sample %zu (|r| is zero there)", k);
    h = window_half != 0 ? window_half : se_refine_auto_half(r, n, k);
    lo = k > h ? k - h : 0;
    hi = (n - 1 - k) > h ? k + h : n - 1;
    len = hi - lo + 1;
    c = k - lo;
    y = calloc(len, sizeof *y); /* zeroed: gcc cannot see the loop below fill it */
    if (y == NULL)
        return se_fail(err, SE_ERR_NOMEM, "refine: cannot allocate a window of %zu samples", len);
    /* cosine taper over the outer half of each side, flat (exactly r) near the peak */
    for (j = 0; j < len; j++) {
        size_t dist = j < c ? c - j : j - c;
        size_t side = j < c ? c : len - 1 - c;
        size_t flat = (side + 1) / 2;
        double wgt = 1.0;
        if (!isfinite(r[lo + j])) {
            free(y);
            return se_fail(err, SE_ERR_DATA, "refine: sample %zu is not finite", lo + j);
        }
        if (dist > flat)
            wgt = 0.5 * (1.0 + cos(SE_PI * (double)(dist - flat) / (double)(side - flat + 1)));
        y[j] = wgt * r[lo + j];
    }
    tw.y = y;
    tw.len = len;
    tw.c = c;
    if (c > 0 && c + 1 < len) {
        /* An oscillating pulse (tone burst) has lobes of nearly equal height, and the integer
         * argmax may sit on a neighbour of the lobe with the highest band-limited top. Walk over
         * the successive local maxima of |y| holding at least half the peak, inside the untapered
         * part of the window, compare their interpolated tops and keep the highest. In noise the
         * walk stops at once (neighbouring maxima are far below half a threshold peak). */
        size_t first = c - c / 2, last = c + (len - 1 - c) / 2, best = c, i;
        double top = se_lobe_top(&tw, c), half = 0.5 * fabs(y[c]);
        int dir;
        if (first < 1)
            first = 1;
        if (last > len - 2)
            last = len - 2;
        for (dir = -1; dir <= 1; dir += 2) {
            i = c;
            while ((i = se_next_lobe(y, i, first, last, dir)) != (size_t)-1 && fabs(y[i]) >= half) {
                double t = se_lobe_top(&tw, i);
                if (t > top) {
                    top = t;
                    best = i;
                }
            }
        }
        c = best;
        k = lo + c;
        tw.c = c;
    }
    tw.sign = r[lo + c] > 0.0 ? 1.0 : -1.0; /* y[c] == r[lo + c]: untapered */

    lower = c > 0 ? -1.0 : 0.0;
    upper = c + 1 < len ? 1.0 : 0.0;
    fl = -tw.sign * (c > 0 ? y[c - 1] : y[c]);
    fu = -tw.sign * (c + 1 < len ? y[c + 1] : y[c]);
    fg = -fabs(y[c]);
    guess = se_lobe_vertex(y, len, c); /* parabola vertex as the first interior point */
    if (guess != 0.0) {
        double f = se_trig_neg(guess, &tw);
        if (f < fg)
            fg = f;
        else
            guess = 0.0;
    }
    if (!(fg < fl && fg < fu)) { /* a tie with a neighbour: try the half-sample points */
        static const double tries[4] = {0.5, -0.5, 0.25, -0.25};
        size_t t;
        for (t = 0; t < 4; t++) {
            double f;
            if (!(lower < tries[t] && tries[t] < upper))
                continue;
            f = se_trig_neg(tries[t], &tw);
            if (f < fl && f < fu && f <= fg) {
                guess = tries[t];
                fg = f;
                break;
            }
        }
    }
    if (c == 0 || c + 1 == len || !(lower < guess && guess < upper && fg < fl && fg < fu)) {
        /* at an end of the data, or a flat top: no bracket, keep the integer peak */
        *kpeak = k;
        *tau_out = 0.0;
        *amp = r[k];
        free(y);
        return SE_OK;
    }
    mz = gsl_min_fminimizer_alloc(gsl_min_fminimizer_brent);
    if (mz == NULL) {
        free(y);
        return se_fail(err, SE_ERR_NOMEM, "refine: cannot allocate the Brent minimiser");
    }
    fn.function = se_trig_neg;
    fn.params = &tw;
    /* the bracket condition f(guess) < f(lower), f(upper) was checked above: no GSL error */
    status = gsl_min_fminimizer_set_with_values(mz, &fn, guess, fg, lower, fl, upper, fu);
    for (it = 0; status == GSL_SUCCESS && it < SE_REFINE_MAX_ITER; it++) {
        status = gsl_min_fminimizer_iterate(mz);
        if (status != GSL_SUCCESS)
            break;
        status = gsl_min_test_interval(gsl_min_fminimizer_x_lower(mz), gsl_min_fminimizer_x_upper(mz),
                                       SE_REFINE_XTOL, 0.0);
        if (status == GSL_SUCCESS)
            break;
        status = GSL_SUCCESS;
    }
    if (status != GSL_SUCCESS || it >= SE_REFINE_MAX_ITER) {
        st = se_fail(err, SE_ERR_NUMERIC, "refine: Brent did not converge near sample %zu (%s)", k,
                     status != GSL_SUCCESS ? gsl_strerror(status) : "iteration limit");
    } else {
        double tau = gsl_min_fminimizer_x_minimum(mz);
        *kpeak = k;
        *tau_out = tau;
        *amp = se_trig_eval(&tw, tau);
    }
    gsl_min_fminimizer_free(mz);
    free(y);
    return st;
}
