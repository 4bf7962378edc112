/* strandecho: synthetic pulse shapes, their spec text, rendering and RMS bandwidth. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_fft_halfcomplex.h>
#include <gsl/gsl_fft_real.h>

#include "internal.h"
#include "strandecho/pulse.h"
#include "strandecho/units.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

/* Tukey taper of the chirp: total tapered fraction (half at each end). */
#define SE_CHIRP_TAPER 0.10
/* Highest frequency a spec may give: anything above is a typing error. */
#define SE_PULSE_MAX_FREQ_HZ 1e12
/* Above this many samples the RMS bandwidth uses an FFT autocorrelation. */
#define SE_RMS_DIRECT_MAX 1024

static const char *const se_pulse_names[SE_PULSE_KIND_COUNT] = {
    [SE_PULSE_HANN] = "hann",     [SE_PULSE_HALFSINE] = "halfsine", [SE_PULSE_GAUSS] = "gauss",
    [SE_PULSE_RICKER] = "ricker", [SE_PULSE_TRIANGLE] = "triangle", [SE_PULSE_BURST] = "burst",
    [SE_PULSE_CHIRP] = "chirp",
};
#define SE_PULSE_KNOWN "hann, halfsine, gauss, ricker, triangle, burst, chirp"

static int se_pulse_lookup(const char *name, size_t len, se_pulse_kind *kind);
static se_status se_spec_time(const char *spec, const char *text, double *t, se_error *err);
static se_status se_spec_freq(const char *spec, const char *text, const char *default_unit,
                              double *f, se_error *err);
static void se_trailing_unit(const char *text, char *unit, size_t size);
static void se_fmt_time(double t, char *buf, size_t size);
static void se_fmt_freq(double f, int space, char *buf, size_t size);
static void se_fmt_shortest(double v, double scale, se_unit_kind kind, const char *unit, char *buf,
                            size_t size);
static double se_tukey(double t, double d, double alpha);
static double se_rms_from_autocorr(const double *r, size_t n);

const char *se_pulse_kind_name(se_pulse_kind kind)
{
    if ((int)kind < 0 || (int)kind >= SE_PULSE_KIND_COUNT)
        return NULL;
    return se_pulse_names[kind];
}

static int se_pulse_lookup(const char *name, size_t len, se_pulse_kind *kind)
{
    int i;
    for (i = 0; i < SE_PULSE_KIND_COUNT; i++) {
        if (strlen(se_pulse_names[i]) == len && memcmp(se_pulse_names[i], name, len) == 0) {
            *kind = (se_pulse_kind)i;
            return 1;
        }
    }
    return 0;
}

int se_pulse_is_spec(const char *text)
{
    const char *colon;
    se_pulse_kind kind;
    if (text == NULL)
        return 0;
    colon = strchr(text, ':');
    return colon != NULL && se_pulse_lookup(text, (size_t)(colon - text), &kind);
}

static se_status se_spec_time(const char *spec, const char *text, double *t, se_error *err)
{
    se_error e;
    se_error_clear(&e);
    if (se_unit_parse(text, SE_UNIT_TIME, NULL, t, &e) != SE_OK)
        return se_fail(err, e.code, "pulse spec '%s': %s", spec, e.message);
    return SE_OK;
}

static se_status se_spec_freq(const char *spec, const char *text, const char *default_unit,
                              double *f, se_error *err)
{
    se_error e;
    se_error_clear(&e);
    if (se_unit_parse(text, SE_UNIT_FREQUENCY, default_unit, f, &e) != SE_OK)
        return se_fail(err, e.code, "pulse spec '%s': %s", spec, e.message);
    return SE_OK;
}

/* The unit at the end of "2 kHz" / "2e3Hz": the trailing run of non-digit, non-space
 * characters ("" when the text ends in a digit). */
static void se_trailing_unit(const char *text, char *unit, size_t size)
{
    size_t end = strlen(text), start;
    while (end > 0 && (text[end - 1] == ' ' || text[end - 1] == '\t'))
        end--;
    start = end;
    while (start > 0 && !(text[start - 1] >= '0' && text[start - 1] <= '9') &&
           text[start - 1] != ' ' && text[start - 1] != '.')
        start--;
    if (end - start + 1 > size)
        end = start + size - 1;
    memcpy(unit, text + start, end - start);
    unit[end - start] = '\0';
}

se_status se_pulse_check(const se_pulse_shape *p, se_error *err)
{
    const char *name;
    if (p == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL pulse shape");
    name = se_pulse_kind_name(p->kind);
    if (name == NULL)
        return se_fail(err, SE_ERR_ARG, "pulse kind %d out of range (known: " SE_PULSE_KNOWN ")",
                       (int)p->kind);
    if (!isfinite(p->duration_s) || p->duration_s <= 0.0)
        return se_fail(err, SE_ERR_RANGE, "%s pulse duration %g s must be positive and finite",
                       name, p->duration_s);
    if (p->duration_s > SE_PULSE_MAX_DURATION_S)
        return se_fail(err, SE_ERR_RANGE, "%s pulse duration %g s is over the %g s (1 hour) limit",
                       name, p->duration_s, SE_PULSE_MAX_DURATION_S);
    if (p->kind == SE_PULSE_RICKER || p->kind == SE_PULSE_BURST || p->kind == SE_PULSE_CHIRP) {
        if (!isfinite(p->freq_hz) || p->freq_hz <= 0.0)
            return se_fail(err, SE_ERR_RANGE, "%s pulse frequency %g Hz must be positive", name,
                           p->freq_hz);
        if (p->freq_hz > SE_PULSE_MAX_FREQ_HZ)
            return se_fail(err, SE_ERR_RANGE, "%s pulse frequency %g Hz is over 1 THz", name,
                           p->freq_hz);
    }
    if (p->kind == SE_PULSE_BURST && (!isfinite(p->cycles) || p->cycles <= 0.0))
        return se_fail(err, SE_ERR_RANGE, "burst cycles %g must be > 0", p->cycles);
    if (p->kind == SE_PULSE_CHIRP) {
        if (!isfinite(p->freq2_hz) || p->freq2_hz <= 0.0)
            return se_fail(err, SE_ERR_RANGE, "chirp end frequency %g Hz must be positive",
                           p->freq2_hz);
        if (p->freq2_hz > SE_PULSE_MAX_FREQ_HZ)
            return se_fail(err, SE_ERR_RANGE, "chirp end frequency %g Hz is over 1 THz",
                           p->freq2_hz);
        if (p->freq2_hz == p->freq_hz)
            return se_fail(err, SE_ERR_RANGE,
                           "chirp start and end frequency are both %g Hz (a chirp must "
                           "sweep; use burst:N@F for a constant frequency)",
                           p->freq_hz);
    }
    return SE_OK;
}

se_status se_pulse_parse(const char *spec, se_pulse_shape *out, se_error *err)
{
    se_pulse_shape p;
    const char *colon, *rest;
    char buf[256];
    se_status st;

    if (spec == NULL || out == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL argument to se_pulse_parse");
    colon = strchr(spec, ':');
    if (colon == NULL)
        return se_fail(
            err, SE_ERR_ARG,
            "pulse spec '%s' has no ':' (e.g. hann:4ms; known shapes: " SE_PULSE_KNOWN ")", spec);
    memset(&p, 0, sizeof p);
    if (!se_pulse_lookup(spec, (size_t)(colon - spec), &p.kind))
        return se_fail(err, SE_ERR_ARG,
                       "unknown pulse shape '%.*s' in '%s' (known: " SE_PULSE_KNOWN ")",
                       (int)(colon - spec), spec, spec);
    rest = colon + 1;
    if (strlen(rest) >= sizeof buf)
        return se_fail(err, SE_ERR_ARG, "pulse spec '%.40s...' is too long", spec);
    {
        const char *q = rest;
        while (*q == ' ' || *q == '\t')
            q++;
        if (*q == '\0')
            return se_fail(err, SE_ERR_ARG, "pulse spec '%s' has no %s (e.g. %s)", spec,
                           p.kind == SE_PULSE_RICKER  ? "frequency"
                           : p.kind == SE_PULSE_BURST ? "cycles and frequency"
                           : p.kind == SE_PULSE_CHIRP ? "frequencies and duration"
                                                      : "duration",
                           p.kind == SE_PULSE_RICKER  ? "ricker:200Hz"
                           : p.kind == SE_PULSE_BURST ? "burst:5@2kHz"
                           : p.kind == SE_PULSE_CHIRP ? "chirp:100Hz-2kHz:50ms"
                                                      : "hann:4ms");
    }

    switch (p.kind) {
    case SE_PULSE_HANN:
    case SE_PULSE_HALFSINE:
    case SE_PULSE_GAUSS:
    case SE_PULSE_TRIANGLE:
        st = se_spec_time(spec, rest, &p.duration_s, err);
        if (st != SE_OK)
            return st;
        break;
    case SE_PULSE_RICKER:
        st = se_spec_freq(spec, rest, NULL, &p.freq_hz, err);
        if (st != SE_OK)
            return st;
        if (p.freq_hz <= 0.0)
            return se_fail(err, SE_ERR_RANGE, "pulse spec '%s': frequency must be > 0", spec);
        p.duration_s = 3.0 / p.freq_hz;
        break;
    case SE_PULSE_BURST: {
        char *at, *end;
        strcpy(buf, rest);
        at = strchr(buf, '@');
        if (at == NULL)
            return se_fail(err, SE_ERR_ARG,
                           "pulse spec '%s': expected cycles@frequency (e.g. burst:5@2kHz)", spec);
        *at = '\0';
        p.cycles = strtod(buf, &end);
        while (*end == ' ' || *end == '\t')
            end++;
        if (end == buf || *end != '\0' || !isfinite(p.cycles))
            return se_fail(err, SE_ERR_ARG, "pulse spec '%s': cycles '%s' is not a number", spec,
                           buf);
        if (p.cycles <= 0.0)
            return se_fail(err, SE_ERR_RANGE, "pulse spec '%s': burst cycles must be > 0", spec);
        st = se_spec_freq(spec, at + 1, NULL, &p.freq_hz, err);
        if (st != SE_OK)
            return st;
        if (p.freq_hz <= 0.0)
            return se_fail(err, SE_ERR_RANGE, "pulse spec '%s': frequency must be > 0", spec);
        p.duration_s = p.cycles / p.freq_hz;
        break;
    }
    case SE_PULSE_CHIRP: {
        char *dcolon, *dash = NULL, *s;
        char unit2[32];
        strcpy(buf, rest);
        dcolon = strrchr(buf, ':');
        if (dcolon == NULL)
            return se_fail(err, SE_ERR_ARG,
                           "pulse spec '%s': expected f1-f2:duration (e.g. chirp:100Hz-2kHz:50ms)",
                           spec);
        *dcolon = '\0';
        /* The '-' between the frequencies: not a leading sign, not an exponent sign. */
        for (s = buf + 1; *s != '\0' && dash == NULL; s++) {
            int exponent = (s[-1] == 'e' || s[-1] == 'E') && s - 1 > buf &&
                           ((s[-2] >= '0' && s[-2] <= '9') || s[-2] == '.');
            if (*s == '-' && !exponent)
                dash = s;
        }
        if (dash == NULL)
            return se_fail(err, SE_ERR_ARG,
                           "pulse spec '%s': expected f1-f2:duration (e.g. chirp:100Hz-2kHz:50ms)",
                           spec);
        *dash = '\0';
        st = se_spec_freq(spec, dash + 1, NULL, &p.freq2_hz, err);
        if (st != SE_OK)
            return st;
        se_trailing_unit(dash + 1, unit2, sizeof unit2);
        st = se_spec_freq(spec, buf, unit2, &p.freq_hz, err);
        if (st != SE_OK)
            return st;
        st = se_spec_time(spec, dcolon + 1, &p.duration_s, err);
        if (st != SE_OK)
            return st;
        if (p.freq_hz <= 0.0 || p.freq2_hz <= 0.0)
            return se_fail(err, SE_ERR_RANGE, "pulse spec '%s': frequencies must be > 0", spec);
        break;
    }
    }
    {
        se_error e;
        se_error_clear(&e);
        if (se_pulse_check(&p, &e) != SE_OK)
            return se_fail(err, e.code, "pulse spec '%s': %s", spec, e.message);
    }
    *out = p;
    return SE_OK;
}

/* Tukey window over [0, d]: cosine ramps of alpha d / 2 at each end, 1 between. */
static double se_tukey(double t, double d, double alpha)
{
    double ramp = 0.5 * alpha * d;
    double u = t < d - t ? t : d - t;
    if (u >= ramp)
        return 1.0;
    return 0.5 * (1.0 - cos(M_PI * u / ramp));
}

double se_pulse_value(const se_pulse_shape *p, double t_s)
{
    double d, x;
    if (p == NULL || isnan(t_s))
        return NAN;
    d = p->duration_s;
    if (!(t_s >= 0.0 && t_s <= d))
        return 0.0;
    switch (p->kind) {
    case SE_PULSE_HANN:
        return 0.5 * (1.0 - cos(2.0 * M_PI * t_s / d));
    case SE_PULSE_HALFSINE:
        return sin(M_PI * t_s / d);
    case SE_PULSE_GAUSS:
        x = (t_s - 0.5 * d) / (d / 8.0);
        return exp(-0.5 * x * x);
    case SE_PULSE_RICKER:
        x = M_PI * p->freq_hz * (t_s - 0.5 * d);
        x *= x;
        return (1.0 - 2.0 * x) * exp(-x);
    case SE_PULSE_TRIANGLE:
        return 1.0 - fabs(2.0 * t_s / d - 1.0);
    case SE_PULSE_BURST:
        return 0.5 * (1.0 - cos(2.0 * M_PI * t_s / d)) *
               cos(2.0 * M_PI * p->freq_hz * (t_s - 0.5 * d));
    case SE_PULSE_CHIRP: {
        /* phi(t) = 2 pi (f1 t + k t^2 / 2), k = (f2 - f1) / d; referred to the centre c:
         * phi(t) - phi(c) = 2 pi (t - c) (f1 + k (t + c) / 2). */
        double c = 0.5 * d, k = (p->freq2_hz - p->freq_hz) / d;
        double dphi = 2.0 * M_PI * (t_s - c) * (p->freq_hz + 0.5 * k * (t_s + c));
        return se_tukey(t_s, d, SE_CHIRP_TAPER) * cos(dphi);
    }
    }
    return NAN;
}

se_status se_pulse_render(const se_pulse_shape *p, double rate_hz, double **samples, size_t *n,
                          se_error *err)
{
    char desc[128], rate[64];
    double x, whole, *s;
    size_t count, k;
    se_status st;

    if (samples == NULL || n == NULL)
        return se_fail(err, SE_ERR_ARG, "NULL argument to se_pulse_render");
    *samples = NULL;
    *n = 0;
    st = se_pulse_check(p, err);
    if (st != SE_OK)
        return st;
    if (!isfinite(rate_hz) || rate_hz <= 0.0)
        return se_fail(err, SE_ERR_ARG, "sample rate %g Hz must be positive and finite", rate_hz);
    se_pulse_describe(p, desc, sizeof desc);
    se_fmt_freq(rate_hz, 1, rate, sizeof rate);
    x = p->duration_s * rate_hz;
    whole = nearbyint(x);
    if (!(fabs(x - whole) <= 1e-9 * x))
        whole = floor(x);
    if (whole + 1.0 > (double)SE_PULSE_MAX_SAMPLES)
        return se_fail(err, SE_ERR_RANGE,
                       "pulse %s has %.0f samples at %s, over the limit of %zu (2^26)", desc,
                       whole + 1.0, rate, SE_PULSE_MAX_SAMPLES);
    count = (size_t)whole + 1;
    if (count < 3)
        return se_fail(err, SE_ERR_RANGE,
                       "pulse %s has only %zu sample%s at %s (need at least 3: raise the rate or "
                       "lengthen the pulse)",
                       desc, count, count == 1 ? "" : "s", rate);
    s = se_calloc(count, sizeof *s, "pulse samples", err);
    if (s == NULL)
        return SE_ERR_NOMEM;
    for (k = 0; k < count; k++)
        s[k] = se_pulse_value(p, (double)k / rate_hz);
    *samples = s;
    *n = count;
    return SE_OK;
}

/* Shortest "%g<unit>" text of v / scale that se_unit_parse() turns back into exactly v
 * (unit "" for a plain number, parsed as a ratio). */
static void se_fmt_shortest(double v, double scale, se_unit_kind kind, const char *unit, char *buf,
                            size_t size)
{
    int prec = 1;
    double a = fabs(v / scale);
    /* At least the integer digits, so 200 prints as "200", not "2e+02". */
    if (a >= 1.0 && a < 1e17)
        prec = (int)floor(log10(a)) + 1;
    for (; prec <= 17; prec++) {
        double back;
        snprintf(buf, size, "%.*g%s", prec, v / scale, unit);
        if (se_unit_parse(buf, kind, NULL, &back, NULL) == SE_OK && back == v)
            return;
    }
    /* No digits in the scaled unit give v back (2002 Hz: 2.002 kHz parses to 2001.9999999999998),
     * so write it in the SI unit, where the factor is 1 and 17 digits always round-trip. */
    if (scale != 1.0) {
        char si[16];
        snprintf(si, sizeof si, "%s%s", unit[0] == ' ' ? " " : "", se_unit_si_name(kind));
        se_fmt_shortest(v, 1.0, kind, si, buf, size);
        return;
    }
    snprintf(buf, size, "%.17g%s", v, unit);
}

static void se_fmt_time(double t, char *buf, size_t size)
{
    if (t >= 1.0)
        se_fmt_shortest(t, 1.0, SE_UNIT_TIME, "s", buf, size);
    else if (t >= 1e-3)
        se_fmt_shortest(t, 1e-3, SE_UNIT_TIME, "ms", buf, size);
    else if (t >= 1e-6)
        se_fmt_shortest(t, 1e-6, SE_UNIT_TIME, "us", buf, size);
    else
        se_fmt_shortest(t, 1e-9, SE_UNIT_TIME, "ns", buf, size);
}

/* space: "48 kHz" for messages, else "48kHz" for specs. */
static void se_fmt_freq(double f, int space, char *buf, size_t size)
{
    const char *unit = space ? " Hz" : "Hz";
    double scale = 1.0;
    if (f >= 1e9) {
        unit = space ? " GHz" : "GHz";
        scale = 1e9;
    } else if (f >= 1e6) {
        unit = space ? " MHz" : "MHz";
        scale = 1e6;
    } else if (f >= 1e3) {
        unit = space ? " kHz" : "kHz";
        scale = 1e3;
    }
    se_fmt_shortest(f, scale, SE_UNIT_FREQUENCY, unit, buf, size);
}

void se_pulse_describe(const se_pulse_shape *p, char *buf, size_t size)
{
    char a[48], b[48], c[48];
    const char *name;
    if (buf == NULL || size == 0)
        return;
    if (p == NULL || (name = se_pulse_kind_name(p->kind)) == NULL) {
        snprintf(buf, size, "invalid");
        return;
    }
    switch (p->kind) {
    case SE_PULSE_RICKER:
        se_fmt_freq(p->freq_hz, 0, a, sizeof a);
        snprintf(buf, size, "%s:%s", name, a);
        break;
    case SE_PULSE_BURST:
        se_fmt_shortest(p->cycles, 1.0, SE_UNIT_RATIO, "", a, sizeof a);
        se_fmt_freq(p->freq_hz, 0, b, sizeof b);
        snprintf(buf, size, "%s:%s@%s", name, a, b);
        break;
    case SE_PULSE_CHIRP:
        se_fmt_freq(p->freq_hz, 0, a, sizeof a);
        se_fmt_freq(p->freq2_hz, 0, b, sizeof b);
        se_fmt_time(p->duration_s, c, sizeof c);
        snprintf(buf, size, "%s:%s-%s:%s", name, a, b, c);
        break;
    default:
        se_fmt_time(p->duration_s, a, sizeof a);
        snprintf(buf, size, "%s:%s", name, a);
        break;
    }
}

/* beta^2 R[0] = (1/2pi) int w^2 |S|^2 dw = pi^2/3 R[0] + sum_{m>=1} 4 (-1)^m R[m] / m^2,
 * from the Fourier series w^2 = pi^2/3 + sum_{m != 0} 2 (-1)^m cos(m w) / m^2 on [-pi, pi]. */
static double se_rms_from_autocorr(const double *r, size_t n)
{
    double acc = 0.0, b2;
    size_t m;
    if (!(r[0] > 0.0) || !isfinite(r[0]))
        return NAN;
    /* Sum the small tail terms first. */
    for (m = n - 1; m >= 1; m--) {
        double md = (double)m;
        acc += ((m & 1) ? -4.0 : 4.0) * r[m] / (md * md);
    }
    b2 = (M_PI * M_PI / 3.0 * r[0] + acc) / r[0];
    return b2 > 0.0 ? sqrt(b2) : 0.0;
}

double se_pulse_rms_bandwidth_direct(const double *s, size_t n)
{
    double *r, beta;
    size_t m, k;
    if (s == NULL || n == 0)
        return NAN;
    for (k = 0; k < n; k++)
        if (!isfinite(s[k]))
            return NAN;
    r = malloc(n * sizeof *r);
    if (r == NULL)
        return NAN;
    for (m = 0; m < n; m++) {
        double acc = 0.0;
        for (k = 0; k + m < n; k++)
            acc += s[k] * s[k + m];
        r[m] = acc;
    }
    beta = se_rms_from_autocorr(r, n);
    free(r);
    return beta;
}

double se_pulse_rms_bandwidth(const double *s, size_t n)
{
    double *a, beta;
    size_t p = 1, k;
    if (s == NULL || n == 0)
        return NAN;
    if (n <= SE_RMS_DIRECT_MAX)
        return se_pulse_rms_bandwidth_direct(s, n);
    for (k = 0; k < n; k++)
        if (!isfinite(s[k]))
            return NAN;
    /* Linear autocorrelation by FFT: zero-pad to a power of two >= 2n. GSL's radix-2 real FFT
     * keeps no global state (FFTW planning is not thread-safe). */
    while (p < 2 * n) {
        if (p > SIZE_MAX / 4)
            return NAN;
        p *= 2;
    }
    a = se_calloc(p, sizeof *a, "rms bandwidth workspace", NULL);
    if (a == NULL)
        return NAN;
    memcpy(a, s, n * sizeof *a);
    if (gsl_fft_real_radix2_transform(a, 1, p) != GSL_SUCCESS) {
        free(a);
        return NAN;
    }
    /* Half-complex: a[0] = Re0, a[i] = Re_i, a[p-i] = Im_i (0 < i < p/2), a[p/2] = Re_{p/2}. */
    a[0] *= a[0];
    a[p / 2] *= a[p / 2];
    for (k = 1; k < p / 2; k++) {
        a[k] = a[k] * a[k] + a[p - k] * a[p - k];
        a[p - k] = 0.0;
    }
    if (gsl_fft_halfcomplex_radix2_inverse(a, 1, p) != GSL_SUCCESS) {
        free(a);
        return NAN;
    }
    beta = se_rms_from_autocorr(a, n);
    free(a);
    return beta;
}
