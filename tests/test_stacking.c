/* strandecho tests: repeated shots (stack.h).
 *
 * - Eight noisy shots at fractional onsets, triggered on their direct arrivals: all eight found,
 *   onsets within 0.25 sample of the truth (5 times the Cramer-Rao bound 1/sqrt(eta beta^2) =
 *   0.048 sample at eta = 34.8 dB, beta = 0.38 rad/sample for this pulse [calc, Kay 1993 ch. 3]), and the stack within 1 dB of the expected gain
 *   10 log10 8 = 9.03 dB (REFERENCE.md 2, "Stacking repeated shots"; C.D. Woody, Med. Biol. Eng. 5,
 *   1967), both as reported (gain_db) and as measured against the noise-free record.
 * - Outliers: a clipped shot, a weak (mis-triggered) shot, a shot with an impulsive burst and a shot cut by
 *   the end of the record are all found and rejected for their reason; the eight good shots are
 *   stacked.
 * - The pulse channel as trigger gives the same onsets.
 * - se_locate stacks by itself: the eight shots as one recording (synthetic and self references)
 *   give shots_used 8, a gain within 1 dB of 9.03 dB and the two echoes at d = v t / 2
 *   (REFERENCE.md 1), nothing at the later shots.
 * - The pieces of stack.h (trigger search, layout, screening, alignment, misfit, stack and gain),
 *   fed part by part as the streaming locate feeds them (and the mean shot by shot), give
 *   se_stack_shots' result bit for bit.
 * Tolerances: 1 dB from issue #4; the 5-sigma onset tolerance is common practice, no source. */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/locate.h"
#include "strandecho/stack.h"
#include "strandecho/detect.h"
#include "strandecho/xcorr.h"
#include "testutil.h"

#define SK_PI 3.14159265358979323846
#define SK_F0 0.05
#define SK_HALF 40
#define SK_M (2 * SK_HALF + 1)
#define SK_INTERVAL 2000.0
#define SK_SIGMA 0.05

static double sk_ricker(double t);
static void sk_shot(double *x, size_t n, double onset, double gain);
static void test_eight_shots(void);
static void test_outliers(void);
static void test_locate_stacks(void);
static void sk_pieces(const double *x, size_t n, const se_stack_config *cfg,
                      const se_stack_result *whole);

static double sk_ricker(double t)
{
    double u = SK_PI * SK_F0 * t;
    return (1.0 - 2.0 * u * u) * exp(-u * u);
}

/* One shot: the direct arrival starting at onset (reference window start), echoes 0.3 at +500
 * and -0.2 at +900, all times gain. */
static void sk_shot(double *x, size_t n, double onset, double gain)
{
    static const double dl[3] = {0.0, 500.0, 900.0}, am[3] = {1.0, 0.3, -0.2};
    size_t i, q;
    for (q = 0; q < 3; q++) {
        double c = onset + dl[q] + SK_HALF;
        size_t lo = c > 60.0 ? (size_t)(c - 60.0) : 0;
        for (i = lo; i < n && (double)i < c + 60.0; i++)
            x[i] += gain * am[q] * sk_ricker((double)i - c);
    }
}

static void test_eight_shots(void)
{
    size_t n = 8 * 2000 + 600, i, j;
    double *x = calloc(n, sizeof *x), *clean = calloc(n, sizeof *clean), pulse[SK_M];
    double onsets[8], worst = 0.0, e2 = 0.0, truth_gain;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    se_stack_config cfg;
    se_stack_result res;
    se_error err;

    if (!CHECK(x != NULL && clean != NULL && rng != NULL))
        goto out;
    gsl_rng_set(rng, 808);
    for (j = 0; j < SK_M; j++)
        pulse[j] = sk_ricker((double)j - SK_HALF);
    for (i = 0; i < 8; i++) {
        onsets[i] = 200.0 + SK_INTERVAL * (double)i + gsl_rng_uniform(rng) * 7.0;
        sk_shot(clean, n, onsets[i], 1.0);
    }
    for (i = 0; i < n; i++)
        x[i] = clean[i] + gsl_ran_gaussian(rng, SK_SIGMA);
    se_stack_config_init(&cfg);
    cfg.pulse = pulse;
    cfg.pulse_length = SK_M;
    if (!CHECK(se_stack_shots(x, n, &cfg, &res, &err) == SE_OK)) {
        fprintf(stderr, "  %s\n", err.message);
        goto out;
    }
    CHECK(res.n_found == 8);
    CHECK(res.n_used == 8);
    for (i = 0; i < res.n_found && i < 8; i++)
        worst = fmax(worst, fabs(res.onsets[i] - onsets[i]));
    CHECK_CLOSE(worst, 0.0, 0.25, "worst onset error, samples");
    CHECK_CLOSE(res.expected_gain_db, 10.0 * log10(8.0), 1e-12, "expected gain 10 log10 8");
    CHECK_CLOSE(res.gain_db, 10.0 * log10(8.0), 1.0, "reported stacking gain, dB");
    /* against the truth: the stack minus the first shot's noise-free segment */
    if (CHECK(res.stacked != NULL && res.first_used == 0)) {
        double b = floor(onsets[0]) - (double)res.pre, frac = onsets[0] - floor(onsets[0]);
        for (j = 0; j < res.length; j++) {
            /* the noise-free shot sampled on the stack's grid (onset moved to an integer) */
            double t = b + (double)j + frac, c = 0.0;
            static const double dl[3] = {0.0, 500.0, 900.0}, am[3] = {1.0, 0.3, -0.2};
            size_t q;
            for (q = 0; q < 3; q++)
                c += am[q] * sk_ricker(t - onsets[0] - dl[q] - SK_HALF);
            e2 += (res.stacked[j] - c) * (res.stacked[j] - c);
        }
        truth_gain = 20.0 * log10(SK_SIGMA / sqrt(e2 / (double)res.length));
        printf("8 shots: reported gain %.2f dB, against the truth %.2f dB (expected %.2f dB)\n",
               res.gain_db, truth_gain, res.expected_gain_db);
        CHECK_CLOSE(truth_gain, 10.0 * log10(8.0), 1.0, "stacking gain against the noise-free shot");
        CHECK_CLOSE(res.noise_single, SK_SIGMA, 0.1 * SK_SIGMA, "single-shot noise, x units");
    }
    se_stack_result_free(&res);

    /* the pulse channel as the trigger: same onsets */
    {
        double *pilot = calloc(n, sizeof *pilot);
        if (CHECK(pilot != NULL)) {
            for (i = 0; i < 8; i++) {
                size_t lo = (size_t)onsets[i] - 10;
                for (j = lo; j < lo + SK_M + 20 && j < n; j++)
                    pilot[j] = sk_ricker((double)j - onsets[i] - SK_HALF);
            }
            cfg.pilot = pilot;
            if (CHECK(se_stack_shots(x, n, &cfg, &res, &err) == SE_OK) && CHECK(res.n_found == 8)) {
                worst = 0.0;
                for (i = 0; i < 8; i++)
                    worst = fmax(worst, fabs(res.onsets[i] - onsets[i]));
                CHECK_CLOSE(worst, 0.0, 1e-3, "pilot onsets, samples");
                CHECK(res.n_used == 8);
            }
            se_stack_result_free(&res);
            free(pilot);
        }
    }
out:
    gsl_rng_free(rng);
    free(x);
    free(clean);
}

/* The pieces of stack.h fed part by part (what the streaming locate does) give se_stack_shots'
 * result bit for bit: the trigger search fed r in pieces of 1, 2, 37, 1000 and 4093 lags, the
 * misfit over two parts of the interval, the stack over three. */
static void sk_pieces(const double *x, size_t n, const se_stack_config *cfg,
                      const se_stack_result *whole)
{
    static const size_t sizes[5] = {1, 2, 37, 1000, 4093};
    double *r = calloc(n, sizeof *r), *onsets = NULL, *amps = NULL, *seg = NULL, *misfit = NULL;
    double *rows = NULL, vmax = x[0], vmin = x[0];
    size_t *idx = NULL, k = 0, i, j, at, q, pre = 0, len = 0, cuts[4];
    unsigned char *clip = NULL;
    se_shot_status *status = NULL;
    se_xcorr *xc = se_xcorr_create(cfg->pulse, cfg->pulse_length, 0, NULL);
    se_xcorr_work *xw = xc ? se_xcorr_work_create(xc, NULL) : NULL;
    se_shot_finder *fd = se_shot_finder_create(n, cfg->pulse_length, cfg, NULL);
    se_stack_acc acc;
    se_stack_result got;

    memset(&acc, 0, sizeof acc);
    memset(&got, 0, sizeof got);
    if (!CHECK(r != NULL && xw != NULL && fd != NULL) ||
        !CHECK(se_xcorr_run(xc, xw, x, n, r, NULL) == SE_OK))
        goto out;
    for (at = 0, q = 0; at < n; q++) {
        size_t take = sizes[q % 5] < n - at ? sizes[q % 5] : n - at;
        if (!CHECK(se_shot_finder_push(fd, r + at, take, NULL) == SE_OK))
            goto out;
        at += take;
    }
    if (!CHECK(se_shot_finder_finish(fd, &idx, &k, NULL) == SE_OK) || !CHECK(k == whole->n_found))
        goto out;
    onsets = calloc(k, sizeof *onsets);
    amps = calloc(k, sizeof *amps);
    clip = calloc(k, sizeof *clip);
    status = calloc(k, sizeof *status);
    misfit = calloc(k, sizeof *misfit);
    if (!CHECK(onsets != NULL && amps != NULL && clip != NULL && status != NULL && misfit != NULL))
        goto out;
    for (i = 0; i < k; i++) {
        CHECK(se_refine_peak(r, n, idx[i], 0, &onsets[i], &amps[i], NULL) == SE_OK);
        CHECK(onsets[i] == whole->onsets[i] && amps[i] == whole->amplitudes[i]);
    }
    if (!CHECK(se_stack_layout(onsets, k, n, cfg->pre, cfg->pulse_length, &pre, &len, NULL) ==
               SE_OK) ||
        !CHECK(pre == whole->pre && len == whole->length))
        goto out;
    for (i = 1; i < n; i++) {
        vmax = fmax(vmax, x[i]);
        vmin = fmin(vmin, x[i]);
    }
    /* the clipping test of stack.h: a run of 5 or more equal samples at an extreme touching the
     * segment */
    for (i = 0; i < k; i++) {
        size_t b = (size_t)floor(onsets[i]) - pre, e = b + len + 1, run = 1;
        for (j = b; j < e && j < n; j++) {
            size_t s0 = j, s1 = j;
            if (x[j] != vmax && x[j] != vmin)
                continue;
            while (s0 > 0 && x[s0 - 1] == x[j])
                s0--;
            while (s1 + 1 < n && x[s1 + 1] == x[j])
                s1++;
            run = s1 - s0 + 1 > run ? s1 - s0 + 1 : run;
        }
        clip[i] = run >= 5;
    }
    if (!CHECK(se_stack_screen(onsets, amps, clip, k, n, pre, len, status, NULL) == SE_OK))
        goto out;
    seg = calloc(len, sizeof *seg);
    rows = calloc(k * len, sizeof *rows);
    if (!CHECK(seg != NULL && rows != NULL))
        goto out;
    cuts[0] = 0;
    cuts[1] = len / 3;
    cuts[2] = len / 2;
    cuts[3] = len;
    /* misfit over [0, len/3) and [len/3, len) */
    for (q = 0; q < 2; q++) {
        size_t j0 = q ? cuts[1] : 0, w = q ? len - cuts[1] : cuts[1];
        for (i = 0; i < k; i++)
            if (status[i] == SE_SHOT_USED) {
                size_t b, e;
                se_stack_align_span(onsets[i], pre, len, n, &b, &e);
                CHECK(se_stack_align(x + b, b, e - b, n, onsets[i], pre, len, seg, NULL) == SE_OK);
                memcpy(rows + i * w, seg + j0, w * sizeof *seg);
            }
        CHECK(se_stack_misfit_part(rows, k, w, status, misfit, NULL) == SE_OK);
    }
    CHECK(se_stack_misfit_screen(misfit, k, status, NULL) == SE_OK);
    for (i = 0; i < k; i++)
        CHECK(status[i] == whole->status[i]);
    if (whole->stacked == NULL || !CHECK(se_stack_acc_init(&acc, status, k, len, cfg->mode, NULL) ==
                                         SE_OK))
        goto out;
    for (q = 0; q < 3; q++) {
        size_t j0 = cuts[q], w = cuts[q + 1] - cuts[q];
        for (i = 0; i < k; i++)
            if (status[i] == SE_SHOT_USED) {
                size_t b, e;
                se_stack_align_span(onsets[i], pre, len, n, &b, &e);
                CHECK(se_stack_align(x + b, b, e - b, n, onsets[i], pre, len, seg, NULL) == SE_OK);
                memcpy(rows + i * w, seg + j0, w * sizeof *seg);
            }
        CHECK(se_stack_acc_part(&acc, rows, j0, w, NULL) == SE_OK);
    }
    if (CHECK(se_stack_acc_gain(&acc, &got, NULL) == SE_OK)) {
        CHECK(memcmp(acc.stacked, whole->stacked, len * sizeof *acc.stacked) == 0);
        CHECK(got.gain_db == whole->gain_db && got.noise_single == whole->noise_single &&
              got.noise_stacked == whole->noise_stacked);
    }
    /* the mean shot by shot (se_stack_acc_shot): the same stack and gain */
    se_stack_acc_free(&acc);
    if (cfg->mode == SE_STACK_MEAN &&
        CHECK(se_stack_acc_init(&acc, status, k, len, cfg->mode, NULL) == SE_OK)) {
        for (i = 0, q = 0; i < k; i++)
            if (status[i] == SE_SHOT_USED) {
                size_t b, e;
                se_stack_align_span(onsets[i], pre, len, n, &b, &e);
                CHECK(se_stack_align(x + b, b, e - b, n, onsets[i], pre, len, rows + q * len, NULL) ==
                      SE_OK);
                CHECK(se_stack_acc_shot(&acc, q, rows + q * len, q ? rows + (q - 1) * len : NULL,
                                        NULL) == SE_OK);
                q++;
            }
        se_stack_acc_shot_end(&acc);
        memset(&got, 0, sizeof got);
        if (CHECK(se_stack_acc_gain(&acc, &got, NULL) == SE_OK)) {
            CHECK(memcmp(acc.stacked, whole->stacked, len * sizeof *acc.stacked) == 0);
            CHECK(got.gain_db == whole->gain_db && got.noise_stacked == whole->noise_stacked);
        }
        CHECK(se_stack_acc_shot(&acc, 0, rows, NULL, NULL) == SE_ERR_ARG); /* out of order */
    }
out:
    se_stack_acc_free(&acc);
    se_shot_finder_destroy(fd);
    se_xcorr_work_destroy(xw);
    se_xcorr_destroy(xc);
    free(r);
    free(idx);
    free(onsets);
    free(amps);
    free(clip);
    free(status);
    free(misfit);
    free(seg);
    free(rows);
}

static void test_outliers(void)
{
    /* 12 shots: 8 good, #2 hot and clipped, #5 weak, #7 with an impulsive burst, #11 cut by the end */
    size_t n = 11 * 2000 + 200 + 500, i, j;
    double *x = calloc(n, sizeof *x), pulse[SK_M], fs = 1.2;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    se_stack_config cfg;
    se_stack_result res;
    se_error err;

    if (!CHECK(x != NULL && rng != NULL))
        goto out;
    gsl_rng_set(rng, 909);
    for (j = 0; j < SK_M; j++)
        pulse[j] = sk_ricker((double)j - SK_HALF);
    for (i = 0; i < 12; i++) {
        double g = i == 2 ? 2.0 : i == 5 ? 0.5 : 1.0;
        sk_shot(x, n, 200.0 + SK_INTERVAL * (double)i + gsl_rng_uniform(rng) * 7.0, g);
    }
    for (j = 0; j < 16; j++) /* an impulsive burst inside shot 7 */
        x[200 + 7 * 2000 + 700 + j] += j % 2 ? -1.0 : 1.0;
    for (i = 0; i < n; i++) {
        x[i] += gsl_ran_gaussian(rng, SK_SIGMA);
        if (x[i] > fs) /* converter full scale */
            x[i] = fs;
        if (x[i] < -fs)
            x[i] = -fs;
    }
    se_stack_config_init(&cfg);
    cfg.pulse = pulse;
    cfg.pulse_length = SK_M;
    cfg.trigger_fraction = 0.25;
    if (!CHECK(se_stack_shots(x, n, &cfg, &res, &err) == SE_OK)) {
        fprintf(stderr, "  %s\n", err.message);
        goto out;
    }
    CHECK(res.n_found == 12);
    for (i = 0; i < res.n_found; i++)
        printf("shot %zu: onset %.2f amplitude %.3f %s\n", i, res.onsets[i], res.amplitudes[i],
               se_shot_status_name(res.status[i]));
    if (res.n_found == 12) {
        CHECK(res.status[2] == SE_SHOT_CLIPPED);
        CHECK(res.status[5] == SE_SHOT_AMPLITUDE);
        CHECK(res.status[7] == SE_SHOT_MISFIT);
        CHECK(res.status[11] == SE_SHOT_LATE);
    }
    CHECK(res.n_used == 8);
    CHECK_CLOSE(res.gain_db, 10.0 * log10(8.0), 1.0, "gain with the outliers left out, dB");
    sk_pieces(x, n, &cfg, &res);
    se_stack_result_free(&res);

    /* the trimmed mean: the same screening, a stack made */
    cfg.mode = SE_STACK_TRIMMED;
    if (CHECK(se_stack_shots(x, n, &cfg, &res, &err) == SE_OK)) {
        CHECK(res.n_used == 8 && res.stacked != NULL);
        sk_pieces(x, n, &cfg, &res);
    }
    se_stack_result_free(&res);

    CHECK(se_stack_shots(NULL, n, &cfg, &res, &err) == SE_ERR_ARG);
    cfg.pulse_length = 2;
    CHECK(se_stack_shots(x, n, &cfg, &res, &err) == SE_ERR_ARG);
    se_stack_result_free(&res);
out:
    gsl_rng_free(rng);
    free(x);
}

static void test_locate_stacks(void)
{
    size_t n = 8 * 2000 + 1500, i, j, pass;
    double *x = calloc(n, sizeof *x), pulse[SK_M];
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    se_locate_config cfg;
    se_locate_result res;
    se_error err;
    if (!CHECK(x != NULL && rng != NULL))
        goto out;
    gsl_rng_set(rng, 1234);
    for (j = 0; j < SK_M; j++)
        pulse[j] = sk_ricker((double)j - SK_HALF);
    for (i = 0; i < 8; i++)
        sk_shot(x, n, 200.0 + SK_INTERVAL * (double)i + gsl_rng_uniform(rng) * 7.0, 1.0);
    for (i = 0; i < n; i++)
        x[i] += gsl_ran_gaussian(rng, SK_SIGMA);
    for (pass = 0; pass < 2; pass++) {
        se_locate_config_init(&cfg);
        cfg.speed_m_s = 100.0; /* at 1 kHz: 500 samples = 25 m, 900 samples = 45 m */
        if (pass == 0) {
            cfg.reference = pulse;
            cfg.reference_length = SK_M;
            cfg.reference_kind = SE_REF_SYNTHETIC;
        }
        if (!CHECK(se_locate(x, n, 1000.0, &cfg, &res, &err) == SE_OK)) {
            fprintf(stderr, "  %s\n", err.message);
            continue;
        }
        printf("locate (%s reference): shots %zu found, %zu used, gain %.2f dB (expected %.2f), "
               "%zu events\n",
               pass == 0 ? "synthetic" : "self", res.shots_found, res.shots_used, res.stack_gain_db,
               res.stack_expected_gain_db, res.n_events);
        CHECK(res.shots_found == 8 && res.shots_used == 8);
        CHECK_CLOSE(res.stack_gain_db, 10.0 * log10(8.0), 1.0, "locate: stacking gain, dB");
        if (CHECK(res.n_events == 2)) {
            CHECK_CLOSE(res.events[0].distance_m, 25.0, 0.05, "locate: first echo, m");
            CHECK_CLOSE(res.events[1].distance_m, 45.0, 0.05, "locate: second echo, m");
            CHECK(res.events[0].polarity == 1 && res.events[1].polarity == -1);
        }
        se_locate_result_free(&res);
    }
    /* stacking off: the later shots are what the locator sees */
    cfg.stacking = SE_STACKING_OFF;
    if (CHECK(se_locate(x, n, 1000.0, &cfg, &res, &err) == SE_OK))
        CHECK(res.shots_used == 1 && res.n_events > 2);
    se_locate_result_free(&res);
out:
    gsl_rng_free(rng);
    free(x);
}

int main(void)
{
    test_eight_shots();
    test_outliers();
    test_locate_stacks();
    return se_test_done("test_stacking");
}
