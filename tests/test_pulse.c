/* strandecho tests: pulse.h, pulse shapes, specs, rendering and RMS bandwidth.
 *
 * Oracles: the analytic definitions of the shapes (peak 1, support, symmetry) [calc]; the spec
 * text round trip; the RMS bandwidth of a Gaussian of sigma w samples, beta_d = 1/(w sqrt 2)
 * rad/sample, which is the Gaussian delay bound std(tau) >= sqrt(2) w / sqrt(eta) of S.M. Kay,
 * Fundamentals of Statistical Signal Processing Vol. I, 1993, ch. 3 (REFERENCE.md section 2)
 * written as 1/(sqrt(eta) beta_d); and the direct O(n^2) autocorrelation beside the FFT path. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/pulse.h"
#include "testutil.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

static const char *const canonical_specs[] = {
    "hann:4ms",
    "halfsine:2ms",
    "gauss:3ms",
    "ricker:200Hz",
    "triangle:2ms",
    "burst:5@2kHz",
    "chirp:100Hz-2kHz:50ms",
    "hann:1.5us",
    "gauss:7.3ms",
    "burst:2.5@1MHz",
    "chirp:2kHz-100Hz:20ms",
    "triangle:1.25s",
    "hann:3ms",
    "ricker:33.3kHz",
    "halfsine:40ns",
};

static int shape_equal(const se_pulse_shape *a, const se_pulse_shape *b)
{
    return a->kind == b->kind && a->duration_s == b->duration_s && a->freq_hz == b->freq_hz &&
           a->freq2_hz == b->freq2_hz && a->cycles == b->cycles;
}

static void check_parse_fail(const char *spec, se_status code, const char *part)
{
    se_error err;
    se_pulse_shape p;
    se_status st;
    char what[1100];
    memset(&p, 0x5a, sizeof p);
    se_error_clear(&err);
    st = se_pulse_parse(spec, &p, &err);
    snprintf(what, sizeof what, "'%s' fails with %s (got %s: %s)", spec ? spec : "(null)",
             se_strerror(code), se_strerror(st), err.message);
    se_check(st == code && err.code == code, __FILE__, __LINE__, what);
    snprintf(what, sizeof what, "'%s': message '%s' contains '%s'", spec ? spec : "(null)",
             err.message, part);
    se_check(strstr(err.message, part) != NULL, __FILE__, __LINE__, what);
}

static double *gaussian(double w, size_t *n)
{
    size_t half = (size_t)ceil(10.0 * w), k;
    double *s;
    *n = 2 * half + 1;
    s = malloc(*n * sizeof *s);
    if (s == NULL)
        return NULL;
    for (k = 0; k < *n; k++) {
        double x = ((double)k - (double)half) / w;
        s[k] = exp(-0.5 * x * x);
    }
    return s;
}

int main(void)
{
    size_t i, k;
    se_error err;
    se_pulse_shape p, q;
    char buf[128];
    double *s = NULL;
    size_t n = 0;

    /* Spec round trip: parse, describe gives the same text, parsing that gives the same bits. */
    for (i = 0; i < sizeof canonical_specs / sizeof canonical_specs[0]; i++) {
        const char *spec = canonical_specs[i];
        se_error_clear(&err);
        if (!CHECK(se_pulse_parse(spec, &p, &err) == SE_OK)) {
            fprintf(stderr, "  %s: %s\n", spec, err.message);
            continue;
        }
        se_pulse_describe(&p, buf, sizeof buf);
        if (!CHECK(strcmp(buf, spec) == 0))
            fprintf(stderr, "  describe gave '%s' for '%s'\n", buf, spec);
        CHECK(se_pulse_parse(buf, &q, NULL) == SE_OK && shape_equal(&p, &q));
        CHECK(se_pulse_is_spec(spec) == 1);
        CHECK(se_pulse_check(&p, NULL) == SE_OK);
    }
    /* Non-canonical spellings describe canonically. */
    {
        static const char *const alt[][2] = {
            {"hann:0.004s", "hann:4ms"},
            {"hann:4000us", "hann:4ms"},
            {"chirp:100-2000Hz:50ms", "chirp:100Hz-2kHz:50ms"},
            {"chirp:0.1kHz - 2kHz : 0.05 s", "chirp:100Hz-2kHz:50ms"},
            {"burst:5 @ 2000 Hz", "burst:5@2kHz"},
            {"ricker:0.2kHz", "ricker:200Hz"},
            {"gauss:3 \xc2\xb5s", "gauss:3us"},
        };
        for (i = 0; i < sizeof alt / sizeof alt[0]; i++) {
            se_error_clear(&err);
            CHECK(se_pulse_parse(alt[i][0], &p, &err) == SE_OK);
            se_pulse_describe(&p, buf, sizeof buf);
            if (!CHECK(strcmp(buf, alt[i][1]) == 0))
                fprintf(stderr, "  '%s' described as '%s' (%s)\n", alt[i][0], buf, err.message);
        }
    }

    /* Parsed fields. */
    CHECK(se_pulse_parse("hann:4ms", &p, NULL) == SE_OK && p.kind == SE_PULSE_HANN);
    CHECK_CLOSE(p.duration_s, 4e-3, 1e-18, "hann:4ms duration");
    CHECK(se_pulse_parse("ricker:200Hz", &p, NULL) == SE_OK && p.kind == SE_PULSE_RICKER);
    CHECK_CLOSE(p.duration_s, 3.0 / 200.0, 1e-18, "ricker support 3/f");
    CHECK_CLOSE(p.freq_hz, 200.0, 0.0, "ricker peak frequency");
    CHECK(se_pulse_parse("burst:5@2kHz", &p, NULL) == SE_OK && p.kind == SE_PULSE_BURST);
    CHECK_CLOSE(p.cycles, 5.0, 0.0, "burst cycles");
    CHECK_CLOSE(p.freq_hz, 2000.0, 0.0, "burst carrier");
    CHECK_CLOSE(p.duration_s, 2.5e-3, 1e-18, "burst duration = cycles / f");
    CHECK(se_pulse_parse("chirp:100Hz-2kHz:50ms", &p, NULL) == SE_OK && p.kind == SE_PULSE_CHIRP);
    CHECK_CLOSE(p.freq_hz, 100.0, 0.0, "chirp f1");
    CHECK_CLOSE(p.freq2_hz, 2000.0, 0.0, "chirp f2");
    CHECK_CLOSE(p.duration_s, 0.05, 1e-18, "chirp duration");

    /* Peak 1, support, symmetry, for every shape [calc from the definitions]. */
    for (i = 0; i < 7; i++) {
        const char *spec = canonical_specs[i];
        double d, peak = -1.0, peak_at = -1.0, rate;
        CHECK(se_pulse_parse(spec, &p, NULL) == SE_OK);
        d = p.duration_s;
        CHECK_CLOSE(se_pulse_value(&p, 0.5 * d), 1.0, 1e-12, spec);
        CHECK(se_pulse_value(&p, -1e-12 * d) == 0.0);
        CHECK(se_pulse_value(&p, d * (1.0 + 1e-12)) == 0.0);
        CHECK(se_pulse_value(&p, -1.0) == 0.0 && se_pulse_value(&p, 2.0 * d + 1.0) == 0.0);
        CHECK(isnan(se_pulse_value(&p, NAN)) && isnan(se_pulse_value(NULL, 0.0)));
        /* Ends: 0 except the truncated Gaussian (exp(-8) at +-4 sigma) and the Ricker
         * ((1 - 2a) exp(-a), a = (1.5 pi)^2: |.| < 1e-8). */
        if (p.kind == SE_PULSE_GAUSS) {
            CHECK_CLOSE(se_pulse_value(&p, 0.0), exp(-8.0), 1e-15, "gauss edge exp(-8)");
        } else if (p.kind == SE_PULSE_RICKER) {
            CHECK(fabs(se_pulse_value(&p, 0.0)) < 1e-8 && fabs(se_pulse_value(&p, d)) < 1e-8);
        } else {
            CHECK(fabs(se_pulse_value(&p, 0.0)) < 1e-15 && fabs(se_pulse_value(&p, d)) < 1e-12);
        }
        /* Dense render: the maximum is 1, at the centre. 2001 samples over the support. */
        rate = 2000.0 / d;
        se_error_clear(&err);
        if (!CHECK(se_pulse_render(&p, rate, &s, &n, &err) == SE_OK)) {
            fprintf(stderr, "  %s\n", err.message);
            continue;
        }
        CHECK(n == 2001);
        for (k = 0; k < n; k++) {
            if (s[k] > peak) {
                peak = s[k];
                peak_at = (double)k;
            }
            if (s[k] != se_pulse_value(&p, (double)k / rate)) {
                CHECK(!"render sample k equals se_pulse_value(p, k / rate)");
                break;
            }
        }
        CHECK_CLOSE(peak, 1.0, 1e-12, spec);
        CHECK(peak <= 1.0 + 1e-15);
        if (p.kind != SE_PULSE_CHIRP) {
            CHECK_CLOSE(peak_at, 1000.0, 0.0, spec);
            /* Symmetric about the centre (the chirp is not). */
            for (k = 0; k < 50; k++) {
                double t = d * (double)k / 97.0;
                CHECK_CLOSE(se_pulse_value(&p, t), se_pulse_value(&p, d - t), 1e-12, spec);
            }
        }
        free(s);
        s = NULL;
    }
    /* Shapes at known points [calc]. */
    CHECK(se_pulse_parse("hann:4ms", &p, NULL) == SE_OK);
    CHECK_CLOSE(se_pulse_value(&p, 1e-3), 0.5, 1e-15, "hann at a quarter");
    CHECK(se_pulse_parse("halfsine:2ms", &p, NULL) == SE_OK);
    CHECK_CLOSE(se_pulse_value(&p, 0.5e-3), sqrt(0.5), 1e-15, "halfsine at a quarter");
    CHECK(se_pulse_parse("triangle:2ms", &p, NULL) == SE_OK);
    CHECK_CLOSE(se_pulse_value(&p, 0.5e-3), 0.5, 1e-12, "triangle at a quarter");
    CHECK(se_pulse_parse("gauss:8ms", &p, NULL) == SE_OK);
    CHECK_CLOSE(se_pulse_value(&p, 3e-3), exp(-0.5), 1e-12, "gauss one sigma (1 ms) off centre");
    CHECK(se_pulse_parse("ricker:100Hz", &p, NULL) == SE_OK);
    /* Ricker zero crossings at t - D/2 = +-1/(pi f sqrt 2). */
    CHECK_CLOSE(se_pulse_value(&p, 0.015 + 1.0 / (M_PI * 100.0 * sqrt(2.0))), 0.0, 1e-12,
                "ricker zero crossing");
    CHECK(se_pulse_parse("burst:4@1kHz", &p, NULL) == SE_OK);
    /* A quarter carrier period off centre the carrier is zero. */
    CHECK_CLOSE(se_pulse_value(&p, 2e-3 + 0.25e-3), 0.0, 1e-12, "burst carrier zero");
    CHECK(se_pulse_parse("chirp:100Hz-2kHz:50ms", &p, NULL) == SE_OK);
    /* Flat part of the Tukey taper: |value| reaches 1 at phase multiples of pi; the taper
     * halves it at 2.5 % of the length (half of the 5 % ramp). */
    {
        double tq = 0.025 * 0.05, c = 0.025, kk = (2000.0 - 100.0) / 0.05;
        double phase = 2.0 * M_PI * (tq - c) * (100.0 + 0.5 * kk * (tq + c));
        CHECK_CLOSE(se_pulse_value(&p, tq), 0.5 * cos(phase), 1e-12, "chirp Tukey half point");
    }

    /* Sample counts: n = floor(duration * rate) + 1. */
    CHECK(se_pulse_parse("hann:4ms", &p, NULL) == SE_OK);
    CHECK(se_pulse_render(&p, 48000.0, &s, &n, NULL) == SE_OK && n == 193);
    free(s);
    CHECK(se_pulse_render(&p, 44100.0, &s, &n, NULL) == SE_OK && n == 177); /* 176.4 */
    free(s);
    CHECK(se_pulse_parse("hann:3ms", &p, NULL) == SE_OK);
    CHECK(se_pulse_render(&p, 1e6, &s, &n, NULL) == SE_OK && n == 3001);
    CHECK(s != NULL && s[n - 1] == se_pulse_value(&p, 3000.0 / 1e6));
    free(s);
    CHECK(se_pulse_parse("hann:1us", &p, NULL) == SE_OK);
    CHECK(se_pulse_render(&p, 2e6, &s, &n, NULL) == SE_OK && n == 3);
    free(s);
    s = NULL;

    /* Render errors. */
    se_error_clear(&err);
    CHECK(se_pulse_render(&p, 48000.0, &s, &n, &err) == SE_ERR_RANGE && s == NULL && n == 0);
    if (!CHECK(strstr(err.message, "pulse hann:1us has only 1 sample at 48 kHz") != NULL))
        fprintf(stderr, "  got '%s'\n", err.message);
    se_error_clear(&err);
    CHECK(se_pulse_render(&p, 1.5e6, &s, &n, &err) == SE_ERR_RANGE);
    CHECK(strstr(err.message, "has only 2 samples at 1.5 MHz") != NULL);
    CHECK(se_pulse_parse("hann:1h", &p, NULL) == SE_OK);
    se_error_clear(&err);
    CHECK(se_pulse_render(&p, 1e6, &s, &n, &err) == SE_ERR_RANGE && s == NULL);
    CHECK(strstr(err.message, "over the limit of 67108864") != NULL);
    CHECK(se_pulse_parse("hann:1s", &p, NULL) == SE_OK);
    /* One past the limit (2^26 + 1 samples) is refused before allocating; the limit itself
     * (512 MB of doubles) is not rendered here to keep the test light. */
    CHECK(se_pulse_render(&p, 67108864.0, &s, &n, NULL) == SE_ERR_RANGE && s == NULL);
    CHECK(se_pulse_render(&p, 1048576.0, &s, &n, NULL) == SE_OK && n == 1048577);
    free(s);
    s = NULL;
    se_error_clear(&err);
    CHECK(se_pulse_render(&p, 0.0, &s, &n, &err) == SE_ERR_ARG);
    CHECK(strstr(err.message, "sample rate") != NULL);
    CHECK(se_pulse_render(&p, -48000.0, &s, &n, NULL) == SE_ERR_ARG);
    CHECK(se_pulse_render(&p, NAN, &s, &n, NULL) == SE_ERR_ARG);
    CHECK(se_pulse_render(&p, INFINITY, &s, &n, NULL) == SE_ERR_ARG);
    CHECK(se_pulse_render(NULL, 48000.0, &s, &n, NULL) == SE_ERR_ARG);
    CHECK(se_pulse_render(&p, 48000.0, NULL, &n, NULL) == SE_ERR_ARG);
    q = p;
    q.duration_s = -1.0;
    CHECK(se_pulse_render(&q, 48000.0, &s, &n, NULL) == SE_ERR_RANGE);
    q = p;
    q.kind = (se_pulse_kind)42;
    CHECK(se_pulse_render(&q, 48000.0, &s, &n, NULL) == SE_ERR_ARG);

    /* Parse errors, every case with its message. */
    check_parse_fail("foo:3ms", SE_ERR_ARG,
                     "unknown pulse shape 'foo' in 'foo:3ms' (known: hann, halfsine, gauss, "
                     "ricker, triangle, burst, chirp)");
    check_parse_fail("Hann:3ms", SE_ERR_ARG, "unknown pulse shape 'Hann'");
    check_parse_fail("hann", SE_ERR_ARG, "has no ':'");
    check_parse_fail("hann:", SE_ERR_ARG, "'hann:' has no duration (e.g. hann:4ms)");
    check_parse_fail("ricker: ", SE_ERR_ARG, "has no frequency");
    check_parse_fail("hann:4", SE_ERR_UNIT, "missing unit for a time");
    check_parse_fail("hann:4kg", SE_ERR_UNIT, "unknown unit 'kg' for a time");
    check_parse_fail("hann:four ms", SE_ERR_ARG, "not a number");
    check_parse_fail("hann:nan ms", SE_ERR_ARG, "not a finite number");
    check_parse_fail("hann:-4ms", SE_ERR_RANGE, "must be positive");
    check_parse_fail("hann:0ms", SE_ERR_RANGE, "must be positive");
    check_parse_fail("gauss:2h", SE_ERR_RANGE, "1 hour");
    check_parse_fail("triangle:61min", SE_ERR_RANGE, "1 hour");
    check_parse_fail("ricker:0Hz", SE_ERR_RANGE, "frequency must be > 0");
    check_parse_fail("ricker:-5Hz", SE_ERR_RANGE, "frequency must be > 0");
    check_parse_fail("ricker:200ms", SE_ERR_UNIT, "unknown unit 'ms' for a frequency");
    check_parse_fail("ricker:200", SE_ERR_UNIT, "missing unit for a frequency");
    check_parse_fail("ricker:0.0001Hz", SE_ERR_RANGE, "1 hour");
    check_parse_fail("ricker:2000GHz", SE_ERR_RANGE, "over 1 THz");
    check_parse_fail("burst:0@2kHz", SE_ERR_RANGE, "burst cycles must be > 0");
    check_parse_fail("burst:-1@2kHz", SE_ERR_RANGE, "burst cycles must be > 0");
    check_parse_fail("burst:x@2kHz", SE_ERR_ARG, "cycles 'x' is not a number");
    check_parse_fail("burst:5", SE_ERR_ARG, "expected cycles@frequency");
    check_parse_fail("burst:5@0Hz", SE_ERR_RANGE, "frequency must be > 0");
    check_parse_fail("burst:5@2", SE_ERR_UNIT, "missing unit");
    check_parse_fail("burst:1e9@1Hz", SE_ERR_RANGE, "1 hour");
    check_parse_fail("chirp:1kHz-1kHz:10ms", SE_ERR_RANGE, "start and end frequency are both");
    check_parse_fail("chirp:1000Hz-1kHz:10ms", SE_ERR_RANGE, "start and end frequency are both");
    check_parse_fail("chirp:100Hz:50ms", SE_ERR_ARG, "expected f1-f2:duration");
    check_parse_fail("chirp:100Hz-2kHz", SE_ERR_ARG, "expected f1-f2:duration");
    check_parse_fail("chirp:100Hz-2kHz:50", SE_ERR_UNIT, "missing unit for a time");
    check_parse_fail("chirp:0Hz-2kHz:50ms", SE_ERR_RANGE, "frequencies must be > 0");
    check_parse_fail("chirp:100Hz-2kHz:0ms", SE_ERR_RANGE, "must be positive");
    check_parse_fail("chirp:100Hz-2kHz:2h", SE_ERR_RANGE, "1 hour");
    CHECK(se_pulse_parse(NULL, &p, NULL) == SE_ERR_ARG);
    CHECK(se_pulse_parse("hann:4ms", NULL, NULL) == SE_ERR_ARG);
    q.kind = SE_PULSE_BURST;
    q.duration_s = 1e-3;
    q.freq_hz = 1e3;
    q.cycles = 0.0;
    CHECK(se_pulse_check(&q, NULL) == SE_ERR_RANGE);

    /* Spec or file name. */
    CHECK(se_pulse_is_spec("hann:4ms") == 1);
    CHECK(se_pulse_is_spec("chirp:") == 1);
    CHECK(se_pulse_is_spec("pulse.wav") == 0);
    CHECK(se_pulse_is_spec("C:\\data\\pulse.wav") == 0);
    CHECK(se_pulse_is_spec("hann") == 0);
    CHECK(se_pulse_is_spec("hanning:4ms") == 0);
    CHECK(se_pulse_is_spec(":4ms") == 0);
    CHECK(se_pulse_is_spec(NULL) == 0);
    CHECK(strcmp(se_pulse_kind_name(SE_PULSE_CHIRP), "chirp") == 0);
    CHECK(se_pulse_kind_name((se_pulse_kind)7) == NULL);

    /* RMS bandwidth of a sampled Gaussian of sigma w samples: 1/(w sqrt 2) rad/sample, within
     * 1e-3 relative (the Gaussian delay bound of Kay, Vol. I, ch. 3, REFERENCE.md section 2). */
    {
        static const double widths[] = {1.0, 1.5, 2.0, 3.0, 5.0, 10.0, 40.0, 120.0};
        for (i = 0; i < sizeof widths / sizeof widths[0]; i++) {
            double w = widths[i], beta, want = 1.0 / (w * sqrt(2.0));
            char what[96];
            s = gaussian(w, &n);
            if (!CHECK(s != NULL))
                break;
            beta = se_pulse_rms_bandwidth(s, n);
            snprintf(what, sizeof what, "beta_d of a Gaussian, w = %g samples (n = %zu)", w, n);
            CHECK_CLOSE(beta, want, 1e-3 * want, what);
            /* From w = 2 on, aliasing of the sampled Gaussian (spectrum exp(-w^2 W^2 / 2) at
             * W = pi) is below 1e-9, so the sinc-interpolant derivative is that exact [calc];
             * a central difference would be 6 % low at w = 2. */
            if (w >= 2.0)
                CHECK_CLOSE(beta, want, 1e-9 * want, what);
            /* Delay bound std(tau) = 1/(sqrt(eta) beta_d) = sqrt(2) w / sqrt(eta) at eta = 100. */
            CHECK_CLOSE(1.0 / (sqrt(100.0) * beta), sqrt(2.0) * w / sqrt(100.0),
                        1e-3 * sqrt(2.0) * w / 10.0, "Gaussian delay bound (Kay ch. 3)");
            /* FFT path (n > 1024) against the direct autocorrelation. */
            if (n > 1024)
                CHECK_CLOSE(beta, se_pulse_rms_bandwidth_direct(s, n), 1e-9 * want,
                            "FFT path equals direct path");
            free(s);
            s = NULL;
        }
    }
    /* The rendered gauss shape: sigma = D/8, so gauss:3ms at 8 kHz has w = 3 samples. */
    CHECK(se_pulse_parse("gauss:3ms", &p, NULL) == SE_OK);
    CHECK(se_pulse_render(&p, 8000.0, &s, &n, NULL) == SE_OK && n == 25);
    CHECK_CLOSE(se_pulse_rms_bandwidth(s, n), 1.0 / (3.0 * sqrt(2.0)), 1e-3 / (3.0 * sqrt(2.0)),
                "beta_d of rendered gauss:3ms at 8 kHz (w = 3)");
    free(s);
    s = NULL;
    /* Known spectra [calc]: an impulse has a flat spectrum, beta^2 = (1/2pi) int w^2 = pi^2/3;
     * [1, -1] has |S|^2 = 2 - 2 cos w, beta^2 = pi^2/3 + 2. */
    {
        double one = 1.0, pair[2] = {1.0, -1.0}, zeros[4] = {0.0, 0.0, 0.0, 0.0};
        double bad[3] = {0.0, NAN, 1.0};
        CHECK_CLOSE(se_pulse_rms_bandwidth(&one, 1), M_PI / sqrt(3.0), 1e-14, "impulse");
        CHECK_CLOSE(se_pulse_rms_bandwidth(pair, 2), sqrt(M_PI * M_PI / 3.0 + 2.0), 1e-14,
                    "[1, -1]");
        CHECK(isnan(se_pulse_rms_bandwidth(zeros, 4)));
        CHECK(isnan(se_pulse_rms_bandwidth(bad, 3)));
        CHECK(isnan(se_pulse_rms_bandwidth(NULL, 3)));
        CHECK(isnan(se_pulse_rms_bandwidth(&one, 0)));
    }
    /* Properties: doubling the rate halves beta_d (per sample) for a smooth pulse; scaling the
     * amplitude leaves it unchanged; a long chirp takes the FFT path and agrees with direct. */
    {
        double *s2 = NULL, b1, b2;
        size_t n2 = 0;
        CHECK(se_pulse_parse("hann:4ms", &p, NULL) == SE_OK);
        CHECK(se_pulse_render(&p, 48000.0, &s, &n, NULL) == SE_OK);
        CHECK(se_pulse_render(&p, 96000.0, &s2, &n2, NULL) == SE_OK);
        b1 = se_pulse_rms_bandwidth(s, n);
        b2 = se_pulse_rms_bandwidth(s2, n2);
        CHECK_CLOSE(b2, 0.5 * b1, 1e-6 * b1, "hann: beta halves at twice the rate");
        /* Hann of n samples period P = D rate: beta^2 = (2 pi / P)^2 / 3 (continuous
         * (1/2pi) int w^2 |S|^2 over int s^2 = 3/8 P) [calc]. */
        CHECK_CLOSE(b1, 2.0 * M_PI / 192.0 / sqrt(3.0), 1e-4 * b1, "hann beta, continuous");
        for (k = 0; k < n; k++)
            s[k] *= -7.5;
        /* 1e-9: the sum cancels pi^2/3 R[0] down to beta^2 R[0], losing about
         * log10(pi^2 / (3 beta^2)) ~ 4 digits for this smooth pulse. */
        CHECK_CLOSE(se_pulse_rms_bandwidth(s, n), b1, 1e-9 * b1, "amplitude invariance");
        free(s);
        free(s2);
        s = NULL;
        CHECK(se_pulse_parse("chirp:100Hz-2kHz:50ms", &p, NULL) == SE_OK);
        CHECK(se_pulse_render(&p, 20000.0, &s, &n, NULL) == SE_OK && n == 1001);
        free(s);
        CHECK(se_pulse_render(&p, 100000.0, &s, &n, NULL) == SE_OK && n == 5001);
        b1 = se_pulse_rms_bandwidth(s, n);
        CHECK_CLOSE(b1, se_pulse_rms_bandwidth_direct(s, n), 1e-9 * b1, "chirp FFT vs direct");
        /* A 100 Hz - 2 kHz sweep has its RMS frequency inside the band:
         * 2 pi 100 / 1e5 < beta < 2 pi 2000 / 1e5 [calc]. */
        CHECK(b1 > 2.0 * M_PI * 100.0 / 1e5 && b1 < 2.0 * M_PI * 2000.0 / 1e5);
        free(s);
        s = NULL;
    }

    return se_test_done("test_pulse");
}
