/* strandecho tests and benchmarks: the plain (lossless) matched filter near one lag, shared by
 * test_skin.c and bench/skin.c. Header-only: each includer gets its own static copy. */
#ifndef SE_PLAIN_LAG_H
#define SE_PLAIN_LAG_H

#include <math.h>
#include <stdlib.h>

#include "strandecho/detect.h"

/* r[j] = sum_i x[j + i] s[i] / E_s on [k - half, k + half] (x [size: n], s [size: m]), its
 * largest |r| refined band-limited (se_refine_peak); returns the lag (NaN when the refinement
 * fails), *amp the refined amplitude. k - half must be >= 0. */
static double se_plain_lag(const double *x, size_t n, const double *s, size_t m, double k,
                           size_t half, double *amp)
{
    const size_t len = 2 * half + 1;
    double *r = calloc(len, sizeof *r), es = 0.0, lag = NAN, best = 0.0;
    size_t i, j, ib = 0, k0 = (size_t)floor(k) - half;
    se_error err;
    for (i = 0; i < m; i++)
        es += s[i] * s[i];
    for (j = 0; r != NULL && j < len; j++) {
        double acc = 0.0;
        for (i = 0; i < m && k0 + j + i < n; i++)
            acc += x[k0 + j + i] * s[i];
        r[j] = acc / es;
        if (fabs(r[j]) > best) {
            best = fabs(r[j]);
            ib = j;
        }
    }
    if (r != NULL && se_refine_peak(r, len, ib, 0, &lag, amp, &err) == SE_OK)
        lag += (double)k0;
    free(r);
    return lag;
}

#endif /* SE_PLAIN_LAG_H */
