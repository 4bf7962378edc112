/* strandecho tests: FFTW wisdom in se_xcorr_create_with. A first engine with measure = 1 measures
 * and writes the wisdom file; after FFTW's in-memory wisdom is forgotten (fftw_forget_wisdom, FFTW's
 * own state), a second engine on the same size reads the file and rebuilds its plans from it
 * (SE_XCORR_PLAN_WISDOM) without measuring; with no file and measure = 0 the plans are estimated.
 * Every engine must give the same correlation as the direct O(n m) sum (xcorr_direct.c) within
 * 1e-12 of the peak (FFTW's own bench uses 1e-10 relative in double; common practice, no source).
 * Also the default path rule (XDG Base Directory: $XDG_CACHE_HOME, else $HOME/.cache). */
#include <fftw3.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/xcorr.h"
#include "testutil.h"

static double tw_check(const se_xcorr *p, const double *x, size_t n, const double *ref);

/* max |r - r_direct| */
static double tw_check(const se_xcorr *p, const double *x, size_t n, const double *ref)
{
    se_error err;
    se_xcorr_work *w = se_xcorr_work_create(p, &err);
    double *r = malloc(n * sizeof *r), worst = INFINITY;
    size_t i;
    if (w != NULL && r != NULL && se_xcorr_run(p, w, x, n, r, &err) == SE_OK) {
        worst = 0.0;
        for (i = 0; i < n; i++)
            if (fabs(r[i] - ref[i]) > worst)
                worst = fabs(r[i] - ref[i]);
    }
    free(r);
    se_xcorr_work_destroy(w);
    return worst;
}

int main(void)
{
    char path[4096], dflt[4096];
    const size_t n = 5000, m = 100;
    double *x = malloc(n * sizeof *x), *s = malloc(m * sizeof *s), *ref = malloc(n * sizeof *ref);
    se_xcorr_config cfg;
    se_xcorr *p;
    se_error err;
    size_t i;
    FILE *f;
    char *old_xdg;

    if (x == NULL || s == NULL || ref == NULL)
        return 1;
    for (i = 0; i < m; i++)
        s[i] = sin(0.3 * (double)i) * exp(-0.03 * (double)i);
    for (i = 0; i < n; i++)
        x[i] = cos(0.017 * (double)i * (double)(i % 7)) + (i == 1234 ? 5.0 : 0.0);
    se_xcorr_direct(x, n, s, m, ref);

    se_test_binary_path(path, sizeof path, "test_wisdom.fftw");
    remove(path);
    fftw_forget_wisdom();
    memset(&cfg, 0, sizeof cfg);
    cfg.block = 1024;

    /* no wisdom, no measuring: estimated, and no file written */
    cfg.wisdom_path = path;
    cfg.measure = 0;
    se_error_clear(&err);
    p = se_xcorr_create_with(s, m, &cfg, &err);
    if (CHECK(p != NULL)) {
        CHECK(se_xcorr_plan_source(p) == SE_XCORR_PLAN_ESTIMATE);
        CHECK(tw_check(p, x, n, ref) < 1e-12 * 5.0);
    }
    se_xcorr_destroy(p);
    CHECK((f = fopen(path, "r")) == NULL);
    if (f != NULL)
        fclose(f);

    /* measure: the file is written */
    cfg.measure = 1;
    p = se_xcorr_create_with(s, m, &cfg, &err);
    if (CHECK(p != NULL)) {
        CHECK(se_xcorr_plan_source(p) == SE_XCORR_PLAN_MEASURED);
        CHECK(tw_check(p, x, n, ref) < 1e-12 * 5.0);
    }
    se_xcorr_destroy(p);
    f = fopen(path, "r");
    if (CHECK(f != NULL)) {
        char head[64] = {0};
        CHECK(fgets(head, sizeof head, f) != NULL && strstr(head, "fftw") != NULL);
        fclose(f);
    }

    /* forget FFTW's memory: the file alone brings the plans back, measure = 0 */
    fftw_forget_wisdom();
    cfg.measure = 0;
    p = se_xcorr_create_with(s, m, &cfg, &err);
    if (CHECK(p != NULL)) {
        CHECK(se_xcorr_plan_source(p) == SE_XCORR_PLAN_WISDOM);
        CHECK(tw_check(p, x, n, ref) < 1e-12 * 5.0);
    }
    se_xcorr_destroy(p);

    /* another size is not in the file: estimated */
    fftw_forget_wisdom();
    cfg.block = 2048;
    p = se_xcorr_create_with(s, m, &cfg, &err);
    if (CHECK(p != NULL))
        CHECK(se_xcorr_plan_source(p) == SE_XCORR_PLAN_ESTIMATE);
    se_xcorr_destroy(p);

    /* disabled (no path): estimated even with the wisdom file present */
    fftw_forget_wisdom();
    cfg.block = 1024;
    cfg.wisdom_path = NULL;
    p = se_xcorr_create_with(s, m, &cfg, &err);
    if (CHECK(p != NULL))
        CHECK(se_xcorr_plan_source(p) == SE_XCORR_PLAN_ESTIMATE);
    se_xcorr_destroy(p);
    remove(path);

    /* default path: $XDG_CACHE_HOME/strandecho/fftw-wisdom when absolute */
    old_xdg = getenv("XDG_CACHE_HOME") ? strdup(getenv("XDG_CACHE_HOME")) : NULL;
    se_test_binary_path(dflt, sizeof dflt, "xdg-cache");
    if (setenv("XDG_CACHE_HOME", dflt, 1) == 0) {
        char want[4200], got[4200];
        snprintf(want, sizeof want, "%s/strandecho/fftw-wisdom", dflt);
        CHECK(se_xcorr_wisdom_default_path(got, sizeof got, 1, &err) == SE_OK);
        CHECK(strcmp(got, want) == 0);
        CHECK(se_xcorr_wisdom_default_path(got, 10, 0, &err) == SE_ERR_ARG);
        setenv("XDG_CACHE_HOME", "relative/ignored", 1);
        if (getenv("HOME") != NULL) {
            snprintf(want, sizeof want, "%s/.cache/strandecho/fftw-wisdom", getenv("HOME"));
            CHECK(se_xcorr_wisdom_default_path(got, sizeof got, 0, &err) == SE_OK);
            CHECK(strcmp(got, want) == 0);
        }
    }
    if (old_xdg != NULL)
        setenv("XDG_CACHE_HOME", old_xdg, 1);
    else
        unsetenv("XDG_CACHE_HOME");
    free(old_xdg);
    free(x);
    free(s);
    free(ref);
    return se_test_done("test_wisdom");
}
