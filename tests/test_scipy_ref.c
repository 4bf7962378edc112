/* strandecho tests: the matched filter and the detector against committed SciPy vectors
 * (fixtures/ref/scipy_*.txt, written by tests/ref/make_scipy_ref.py with Debian's python3-scipy:
 * scipy.signal.correlate(mode="full", method="fft") and scipy.signal.find_peaks). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/detect.h"
#include "strandecho/xcorr.h"
#include "testutil.h"

/* Read the numbers of a fixture (lines starting with '#' skipped; a leading word such as "height"
 * is skipped too, its value kept in *label_value). Returns a malloc'd array, NULL on failure. */
static double *read_values(const char *rel, size_t *count, double *label_value)
{
    char path[4096], line[256];
    FILE *f;
    double *v = NULL;
    size_t n = 0, cap = 0;
    se_test_source_path(path, sizeof path, rel);
    f = fopen(path, "r");
    if (f == NULL) {
        fprintf(stderr, "cannot open %s\n", path);
        return NULL;
    }
    while (fgets(line, sizeof line, f) != NULL) {
        char *end;
        double d;
        if (line[0] == '#' || line[0] == '\n')
            continue;
        if (strncmp(line, "height ", 7) == 0) {
            if (label_value != NULL)
                *label_value = strtod(line + 7, NULL);
            continue;
        }
        d = strtod(line, &end);
        if (end == line) {
            fprintf(stderr, "%s: not a number: %s", path, line);
            free(v);
            fclose(f);
            return NULL;
        }
        if (n == cap) {
            double *nv;
            cap = cap ? 2 * cap : 1024;
            nv = realloc(v, cap * sizeof *v);
            if (nv == NULL) {
                free(v);
                fclose(f);
                return NULL;
            }
            v = nv;
        }
        v[n++] = d;
    }
    fclose(f);
    *count = n;
    return v;
}

int main(void)
{
    size_t m = 0, n = 0, nr = 0, np = 0, i, npk = 0, where = 0;
    double height = NAN, scale = 0.0, worst = 0.0;
    double *s = read_values("fixtures/ref/scipy_xcorr_pulse.txt", &m, NULL);
    double *x = read_values("fixtures/ref/scipy_xcorr_input.txt", &n, NULL);
    double *rref = read_values("fixtures/ref/scipy_xcorr_r.txt", &nr, NULL);
    double *pidx = read_values("fixtures/ref/scipy_peaks.txt", &np, &height);
    double *r = NULL;
    se_error err;
    se_xcorr *p = NULL;
    se_xcorr_work *w = NULL;
    se_acf *a = NULL;
    se_peak *pk = NULL;
    se_detect_config cfg;

    if (!CHECK(s != NULL && x != NULL && rref != NULL && pidx != NULL))
        goto done;
    CHECK(m == 33 && n == 2000 && nr == n && np == 4 && height > 0.0);
    r = malloc(n * sizeof *r);
    p = se_xcorr_create(s, m, 0, &err);
    w = p ? se_xcorr_work_create(p, &err) : NULL;
    a = se_acf_create(s, m, &err);
    if (!CHECK(r != NULL && w != NULL && a != NULL))
        goto done;
    CHECK(se_xcorr_run(p, w, x, n, r, &err) == SE_OK);
    for (i = 0; i < n; i++)
        if (fabs(rref[i]) > scale)
            scale = fabs(rref[i]);
    for (i = 0; i < n; i++)
        if (!(fabs(r[i] - rref[i]) <= worst)) {
            worst = isnan(r[i]) ? HUGE_VAL : fabs(r[i] - rref[i]);
            where = i;
        }
    printf("se_xcorr_run vs scipy.signal.correlate: max |diff| / max|r| = %.2e (at lag %zu)\n", worst / scale, where);
    /* SciPy 1.10 via python3-scipy (fixtures/ref/scipy_xcorr_r.txt): 1e-9 relative to max|r| */
    CHECK(worst <= 1e-9 * scale);

    /* the same peaks as scipy.signal.find_peaks(|r|, height) for these isolated echoes */
    memset(&cfg, 0, sizeof cfg);
    cfg.start = 0;
    cfg.end = n;
    cfg.threshold = height;
    cfg.acf = a;
    CHECK(se_detect(r, n, &cfg, &pk, &npk, &err) == SE_OK);
    if (CHECK(npk == np)) {
        for (i = 0; i < np; i++) {
            printf("peak %zu: scipy index %.0f, se_detect index %zu (lag %.3f, amplitude %+.4f)\n", i, pidx[i],
                   pk[i].index, pk[i].lag, pk[i].amplitude);
            CHECK((double)pk[i].index == pidx[i]);
        }
    } else {
        fprintf(stderr, "  se_detect found %zu peaks, scipy %zu\n", npk, np);
    }
done:
    free(pk);
    se_acf_destroy(a);
    se_xcorr_work_destroy(w);
    se_xcorr_destroy(p);
    free(s);
    free(x);
    free(rref);
    free(pidx);
    free(r);
    return se_test_done("test_scipy_ref");
}
