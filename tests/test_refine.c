/* strandecho tests: noise-free bias of the band-limited sub-sample peak refinement over fractional
 * delays 0..1 (step 0.05) for the pulses of REFERENCE.md's sub-sample table, a long Hann pulse, a
 * tone burst (lobe ambiguity), signs and argument checks. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/detect.h"
#include "strandecho/xcorr.h"
#include "testutil.h"

#define PI 3.14159265358979323846

typedef double (*shape_fn)(double t);

static double gauss_w2(double t) /* Gaussian, width w = 2 samples: exp(-t^2 / (2 w^2)) */
{
    return exp(-t * t / 8.0);
}

static double ricker_01(double t) /* Ricker, f0 = 0.1 cycle/sample */
{
    double a = PI * 0.1 * t;
    a *= a;
    return (1.0 - 2.0 * a) * exp(-a);
}

static double hann_961(double t) /* hann:20ms at 48 kHz: 961 samples, centred */
{
    return fabs(t) >= 480.0 ? 0.0 : 0.5 * (1.0 + cos(PI * t / 480.0));
}

static double burst(double t) /* Hann-windowed tone, 0.15 cycle/sample, 201 samples */
{
    return fabs(t) >= 100.0 ? 0.0 : 0.5 * (1.0 + cos(PI * t / 100.0)) * sin(2.0 * PI * 0.15 * t + 0.3);
}

/* Echo amp * f(t - k0 - d) (the pulse centred at half its length), correlated with the sampled pulse:
 * the band-limited peak of r is at k0 + d with value amp. Returns the max |bias| over d. */
static double bias_table(const char *name, shape_fn f, size_t half, double amp, size_t window, int print,
                         double *max_amp_err)
{
    size_t m = 2 * half + 1, n = 4 * m + 1024, k0 = 2 * m, i, q;
    double *s = malloc(m * sizeof *s), *x = malloc(n * sizeof *x), *r = malloc(n * sizeof *r);
    double worst = 0.0, worst_amp = 0.0;
    se_error err;
    se_xcorr *p;
    se_xcorr_work *w;
    for (i = 0; i < m; i++)
        s[i] = f((double)i - (double)half);
    p = se_xcorr_create(s, m, 0, &err);
    w = p ? se_xcorr_work_create(p, &err) : NULL;
    if (!CHECK(w != NULL)) {
        worst = HUGE_VAL;
        goto done;
    }
    if (print)
        printf("%s (window %zu):\n   delay      bias (samples)   amplitude error\n", name, window);
    for (q = 0; q <= 20; q++) {
        double d = 0.05 * (double)q, lag = NAN, a = NAN, b;
        size_t k = 0;
        for (i = 0; i < n; i++)
            x[i] = amp * f((double)i - (double)k0 - (double)half - d);
        CHECK(se_xcorr_run(p, w, x, n, r, &err) == SE_OK);
        for (i = 0; i < n; i++)
            if (fabs(r[i]) > fabs(r[k]))
                k = i;
        if (!CHECK(se_refine_peak(r, n, k, window, &lag, &a, &err) == SE_OK))
            fprintf(stderr, "  %s d = %.2f: %s\n", name, d, err.message);
        b = lag - ((double)k0 + d);
        if (!(fabs(b) <= worst))
            worst = isnan(b) ? HUGE_VAL : fabs(b);
        if (!(fabs(a - amp) <= worst_amp))
            worst_amp = isnan(a) ? HUGE_VAL : fabs(a - amp);
        if (print)
            printf("   %.2f   %+.3e        %+.3e\n", d, b, a - amp);
    }
done:
    se_xcorr_work_destroy(w);
    se_xcorr_destroy(p);
    free(s);
    free(x);
    free(r);
    *max_amp_err = worst_amp;
    return worst;
}

static void test_bias(void)
{
    double b, ae;
    /* REFERENCE.md, sub-sample table (bias, max over fractional delay, noise-free): band-limited
     * refinement ("16x band-limited upsampling + parabola") reaches 1.5e-6 (Gaussian w = 2) and
     * 2.7e-6 (Ricker f0 = 0.1); a bare parabola 6e-3 and 1.1e-2. Brief: below 1e-4 sample. We require
     * the band-limited column's figures. Pulses truncated at +-8 w (Gaussian) and +-60 samples (Ricker,
     * envelope below 1e-12 there) so truncation adds nothing measurable. */
    b = bias_table("Gaussian w = 2", gauss_w2, 16, 1.0, 0, 1, &ae);
    printf("Gaussian w = 2: max bias %.3e samples, max amplitude error %.3e\n", b, ae);
    CHECK(b < 1e-4);
    CHECK(b <= 1.5e-6);
    CHECK(ae < 1e-6);
    b = bias_table("Ricker f0 = 0.1", ricker_01, 60, 1.0, 0, 1, &ae);
    printf("Ricker f0 = 0.1: max bias %.3e samples, max amplitude error %.3e\n", b, ae);
    CHECK(b < 1e-4);
    CHECK(b <= 2.7e-6);
    CHECK(ae < 1e-6);
    /* a negative echo: sign kept, same bias */
    b = bias_table("Ricker f0 = 0.1, amplitude -0.4", ricker_01, 60, -0.4, 0, 0, &ae);
    printf("Ricker, amplitude -0.4: max bias %.3e, max amplitude error %.3e\n", b, ae);
    CHECK(b <= 2.7e-6);
    CHECK(ae < 1e-6);
    /* explicit window of 16 on the short pulses still meets the brief's 1e-4 */
    b = bias_table("Gaussian w = 2", gauss_w2, 16, 1.0, 16, 0, &ae);
    printf("Gaussian w = 2, window 16: max bias %.3e\n", b);
    CHECK(b < 1e-4);
    b = bias_table("Ricker f0 = 0.1", ricker_01, 60, 1.0, 16, 0, &ae);
    printf("Ricker f0 = 0.1, window 16: max bias %.3e\n", b);
    CHECK(b < 1e-4);
    /* a long pulse (main lobe ~ 960 samples wide): the auto window scales with it (common practice
     * target, no source: 1e-4 sample) */
    b = bias_table("hann 961", hann_961, 480, 1.0, 0, 0, &ae);
    printf("Hann 961 samples: max bias %.3e, max amplitude error %.3e\n", b, ae);
    CHECK(b < 1e-4);
    CHECK(ae < 1e-6);
    /* tone burst: neighbouring lobes of |r| within 0.2 % of the top; the integer argmax often sits
     * on the wrong one, and the refinement must move to the highest band-limited lobe */
    b = bias_table("burst", burst, 100, 1.0, 0, 0, &ae);
    printf("tone burst 0.15 cycle/sample: max bias %.3e, max amplitude error %.3e\n", b, ae);
    CHECK(b < 1e-4);
    CHECK(ae < 1e-6);
}

static void test_errors(void)
{
    double r[40], lag, amp;
    size_t i;
    se_error err;
    for (i = 0; i < 40; i++)
        r[i] = gauss_w2((double)i - 20.3);
    CHECK(se_refine_peak(NULL, 40, 20, 0, &lag, &amp, &err) == SE_ERR_ARG);
    CHECK(se_refine_peak(r, 40, 40, 0, &lag, &amp, &err) == SE_ERR_ARG);
    CHECK(se_refine_peak(r, 40, 20, 0, NULL, &amp, &err) == SE_ERR_ARG);
    /* started off the top, it climbs to it */
    CHECK(se_refine_peak(r, 40, 17, 8, &lag, &amp, &err) == SE_OK);
    CHECK(fabs(lag - 20.3) < 1e-3);
    r[25] = NAN;
    CHECK(se_refine_peak(r, 40, 20, 8, &lag, &amp, &err) == SE_ERR_DATA && strstr(err.message, "25") != NULL);
    memset(r, 0, sizeof r);
    CHECK(se_refine_peak(r, 40, 20, 8, &lag, &amp, &err) == SE_ERR_DATA);
    /* peak at the first sample: no bracket, the integer peak is returned */
    for (i = 0; i < 40; i++)
        r[i] = gauss_w2((double)i);
    CHECK(se_refine_peak(r, 40, 0, 0, &lag, &amp, &err) == SE_OK && lag == 0.0 && amp == 1.0);
}

int main(void)
{
    test_bias();
    test_errors();
    return se_test_done("test_refine");
}
