/* strandecho benchmark: Monte Carlo RMS delay error and bias of the chosen estimator (integer
 * argmax of the matched filter over the prior window, then se_refine_peak) against the
 * Cramer-Rao bound and the Ziv-Zakai bound, energy SNR 0..40 dB, two pulse shapes.
 *
 *   CRB: var >= 1 / (eta beta^2)                         (S.M. Kay 1993, ch. 3)
 *   ZZB: var >= (1/T) int_0^T h (T - h) Pe(h) dh,  Pe(h) = Q(sqrt(eta (1 - rho(h)) / 2))
 *        for a delay uniform over T samples (J. Ziv & M. Zakai, IEEE Trans. IT-15(3), 1969, in the
 *        form of K.L. Bell et al., IEEE Trans. IT-43(2), 1997, without valley filling); rho is the
 *        pulse autocorrelation. At high SNR it tends to the CRB, at low SNR to T^2 / 12.
 * The echo amplitude is 1 (known sign: the estimator takes the argmax of r, not |r|).
 *
 * Usage: bench_accuracy [--trials N] [--svg FILE]  (defaults 2000, no plot)
 * Prints one table row per pulse and SNR and the command line that reproduces it. */
#include <cairo-svg.h>
#include <cairo.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/detect.h"
#include "strandecho/xcorr.h"

#define BA_PI 3.14159265358979323846
#define BA_N 512
#define BA_K0 200
#define BA_T 32 /* prior window, samples */
#define BA_NSNR 21

typedef double (*ba_shape)(double t);
typedef struct ba_pulse {
    const char *name;
    ba_shape f;
    size_t half;
} ba_pulse;

typedef struct ba_row {
    double snr_db, rms, bias, crb, zzb;
} ba_row;

static double ba_gauss(double t);
static double ba_ricker(double t);
static double ba_zzb(const se_acf *acf, double eta);
static void ba_run(const ba_pulse *p, size_t trials, gsl_rng *rng, ba_row *rows);
static void ba_plot(const char *path, const ba_pulse *pulses, ba_row rows[][BA_NSNR], size_t np);

static double ba_gauss(double t)
{
    return exp(-t * t / 8.0);
}

static double ba_ricker(double t)
{
    double a = BA_PI * 0.1 * t;
    a *= a;
    return (1.0 - 2.0 * a) * exp(-a);
}

/* Ziv-Zakai bound for a uniform prior over BA_T samples, trapezoid rule at 1/64 sample. */
static double ba_zzb(const se_acf *acf, double eta)
{
    double s = 0.0, dh = 1.0 / 64.0, h;
    for (h = dh; h < BA_T; h += dh) {
        double rho = se_acf_value(acf, h);
        double pe = gsl_cdf_ugaussian_Q(sqrt(fmax(eta * (1.0 - rho) / 2.0, 0.0)));
        s += h * ((double)BA_T - h) * pe * dh;
    }
    return sqrt(s / (double)BA_T);
}

static void ba_run(const ba_pulse *p, size_t trials, gsl_rng *rng, ba_row *rows)
{
    size_t m = 2 * p->half + 1, i, q, t;
    double s[64], x[BA_N], r[BA_N], es = 0.0, beta;
    se_error err;
    se_xcorr *xc;
    se_xcorr_work *xw;
    se_acf *acf;
    for (i = 0; i < m; i++) {
        s[i] = p->f((double)i - (double)p->half);
        es += s[i] * s[i];
    }
    xc = se_xcorr_create(s, m, 0, &err);
    xw = xc ? se_xcorr_work_create(xc, &err) : NULL;
    acf = se_acf_create(s, m, &err);
    if (xw == NULL || acf == NULL) {
        fprintf(stderr, "bench_accuracy: %s\n", err.message);
        exit(1);
    }
    beta = se_acf_rms_bandwidth(acf);
    for (q = 0; q < BA_NSNR; q++) {
        double snr_db = 2.0 * (double)q, eta = pow(10.0, snr_db / 10.0), sigma = sqrt(es / eta);
        double se2 = 0.0, sum = 0.0;
        for (t = 0; t < trials; t++) {
            double d = gsl_rng_uniform(rng) * (BA_T - 1), lag, amp, e;
            size_t k = BA_K0, j;
            for (i = 0; i < BA_N; i++)
                x[i] = p->f((double)i - BA_K0 - d - (double)p->half) + gsl_ran_gaussian(rng, sigma);
            se_xcorr_run(xc, xw, x, BA_N, r, &err);
            for (j = BA_K0; j < BA_K0 + BA_T; j++)
                if (r[j] > r[k])
                    k = j;
            if (se_refine_peak(r, BA_N, k, 0, &lag, &amp, &err) != SE_OK)
                lag = (double)k;
            /* keep the estimate inside the prior window */
            lag = fmin(fmax(lag, (double)BA_K0), (double)(BA_K0 + BA_T));
            e = lag - (BA_K0 + d);
            se2 += e * e;
            sum += e;
        }
        rows[q].snr_db = snr_db;
        rows[q].rms = sqrt(se2 / (double)trials);
        rows[q].bias = sum / (double)trials;
        rows[q].crb = 1.0 / sqrt(eta * beta * beta);
        rows[q].zzb = ba_zzb(acf, eta);
    }
    se_acf_destroy(acf);
    se_xcorr_work_destroy(xw);
    se_xcorr_destroy(xc);
}

/* Two panels: RMS error with both bounds (log scale), and bias (linear). */
static void ba_plot(const char *path, const ba_pulse *pulses, ba_row rows[][BA_NSNR], size_t np)
{
    const double W = 720, H = 560, L = 70, R = 20, T1 = 30, H1 = 300, T2 = 400, H2 = 120;
    const double colors[2][3] = {{0.10, 0.35, 0.75}, {0.80, 0.30, 0.10}};
    cairo_surface_t *sf = cairo_svg_surface_create(path, W, H);
    cairo_t *cr = cairo_create(sf);
    double lmin = -2.0, lmax = 1.5, bmax = 0.05;
    size_t k, q;
    char buf[64];
#define BA_X(s) (L + (s) / 40.0 * (W - L - R))
#define BA_Y(v) (T1 + H1 - (log10(v) - lmin) / (lmax - lmin) * H1)
#define BA_YB(v) (T2 + H2 / 2 - (v) / bmax * H2 / 2)
    cairo_set_source_rgb(cr, 1, 1, 1);
    cairo_paint(cr);
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_set_line_width(cr, 1.0);
    cairo_rectangle(cr, L, T1, W - L - R, H1);
    cairo_rectangle(cr, L, T2, W - L - R, H2);
    cairo_stroke(cr);
    cairo_select_font_face(cr, "sans-serif", CAIRO_FONT_SLANT_NORMAL, CAIRO_FONT_WEIGHT_NORMAL);
    cairo_set_font_size(cr, 11);
    for (q = 0; q <= 8; q++) {
        double s = 5.0 * (double)q;
        snprintf(buf, sizeof buf, "%.0f", s);
        cairo_move_to(cr, BA_X(s) - 6, T2 + H2 + 14);
        cairo_show_text(cr, buf);
        cairo_move_to(cr, BA_X(s), T2 + H2);
        cairo_line_to(cr, BA_X(s), T2 + H2 - 4);
    }
    for (q = 0; q <= 9; q++) {
        double e = lmin + 0.5 * (double)q;
        if (fabs(e - floor(e)) > 1e-9)
            continue;
        snprintf(buf, sizeof buf, "1e%+.0f", e);
        cairo_move_to(cr, 20, BA_Y(pow(10.0, e)) + 4);
        cairo_show_text(cr, buf);
        cairo_move_to(cr, L, BA_Y(pow(10.0, e)));
        cairo_line_to(cr, L + 4, BA_Y(pow(10.0, e)));
    }
    for (q = 0; q < 3; q++) {
        double v = -bmax + bmax * (double)q;
        snprintf(buf, sizeof buf, "%+.2f", v);
        cairo_move_to(cr, 22, BA_YB(v) + 4);
        cairo_show_text(cr, buf);
    }
    cairo_stroke(cr);
    cairo_move_to(cr, L, T1 - 10);
    cairo_show_text(cr, "RMS delay error (samples): markers measured, solid CRB, dashed Ziv-Zakai");
    cairo_move_to(cr, L, T2 - 8);
    cairo_show_text(cr, "bias (samples; values beyond +-0.05 drawn at the edge)");
    cairo_move_to(cr, W / 2 - 60, H - 8);
    cairo_show_text(cr, "energy SNR eta (dB)");
    for (k = 0; k < np; k++) {
        const double *c = colors[k];
        double dash[1] = {5.0};
        cairo_set_source_rgb(cr, c[0], c[1], c[2]);
        cairo_move_to(cr, W - R - 200, T1 + 16 + 16 * (double)k);
        cairo_show_text(cr, pulses[k].name);
        cairo_set_line_width(cr, 1.5);
        for (q = 0; q < BA_NSNR; q++) {
            double y = BA_Y(fmax(rows[k][q].crb, 1e-2));
            if (q == 0)
                cairo_move_to(cr, BA_X(rows[k][q].snr_db), y);
            else
                cairo_line_to(cr, BA_X(rows[k][q].snr_db), y);
        }
        cairo_stroke(cr);
        cairo_set_dash(cr, dash, 1, 0);
        for (q = 0; q < BA_NSNR; q++) {
            double y = BA_Y(fmax(rows[k][q].zzb, 1e-2));
            if (q == 0)
                cairo_move_to(cr, BA_X(rows[k][q].snr_db), y);
            else
                cairo_line_to(cr, BA_X(rows[k][q].snr_db), y);
        }
        cairo_stroke(cr);
        cairo_set_dash(cr, NULL, 0, 0);
        for (q = 0; q < BA_NSNR; q++) {
            double b = fmax(fmin(rows[k][q].bias, bmax), -bmax);
            cairo_arc(cr, BA_X(rows[k][q].snr_db), BA_Y(fmax(rows[k][q].rms, 1e-2)), 3.0, 0,
                      2 * BA_PI);
            cairo_fill(cr);
            cairo_rectangle(cr, BA_X(rows[k][q].snr_db) - 2.5 + 3.0 * (double)k, BA_YB(b) - 2.5, 5,
                            5);
            cairo_fill(cr);
        }
    }
    cairo_set_source_rgb(cr, 0.5, 0.5, 0.5);
    cairo_move_to(cr, L, BA_YB(0.0));
    cairo_line_to(cr, W - R, BA_YB(0.0));
    cairo_stroke(cr);
    cairo_destroy(cr);
    cairo_surface_finish(sf);
    cairo_surface_destroy(sf);
#undef BA_X
#undef BA_Y
#undef BA_YB
}

int main(int argc, char **argv)
{
    static const ba_pulse pulses[2] = {
        {"Gaussian w = 2 samples", ba_gauss, 12},
        {"Ricker f0 = 0.1 cycle/sample", ba_ricker, 15},
    };
    static ba_row rows[2][BA_NSNR];
    size_t trials = 2000, k, q;
    const char *svg = NULL;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    int i;
    for (i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--trials") == 0 && i + 1 < argc)
            trials = (size_t)strtoul(argv[++i], NULL, 10);
        else if (strcmp(argv[i], "--svg") == 0 && i + 1 < argc)
            svg = argv[++i];
        else {
            fprintf(stderr, "usage: bench_accuracy [--trials N] [--svg FILE]\n");
            return 2;
        }
    }
    if (rng == NULL || trials == 0)
        return 1;
    gsl_rng_set(rng, 20261202);
    printf("# command: bench_accuracy --trials %zu%s%s\n", trials, svg ? " --svg " : "",
           svg ? svg : "");
    printf("# delay uniform over %d samples, amplitude 1, seed 20261202\n", BA_T);
    printf("%-30s %6s %10s %10s %10s %10s %8s\n", "pulse", "SNR_dB", "RMS", "bias", "CRB", "ZZB",
           "RMS/CRB");
    for (k = 0; k < 2; k++) {
        ba_run(&pulses[k], trials, rng, rows[k]);
        for (q = 0; q < BA_NSNR; q++)
            printf("%-30s %6.0f %10.4g %+10.3g %10.4g %10.4g %8.3f\n", pulses[k].name,
                   rows[k][q].snr_db, rows[k][q].rms, rows[k][q].bias, rows[k][q].crb,
                   rows[k][q].zzb, rows[k][q].rms / rows[k][q].crb);
    }
    if (svg != NULL)
        ba_plot(svg, pulses, rows, 2);
    gsl_rng_free(rng);
    return 0;
}
