/* strandecho: direct O(n m) correlation, the in-tree reference for the FFT engine (GSL keeps
 * fft/dft.c beside its FFT for the same reason). */
#include <stddef.h>

#include "strandecho/xcorr.h"

/* r[k] = (1/E_s) sum_{j < m, k + j < n} x[k+j] s[j] */
void se_xcorr_direct(const double *x, size_t n, const double *s, size_t m, double *r)
{
    size_t k, j;
    double e = 0.0;
    if (x == NULL || s == NULL || r == NULL || n == 0 || m == 0)
        return;
    for (j = 0; j < m; j++)
        e += s[j] * s[j];
    for (k = 0; k < n; k++) {
        double acc = 0.0;
        size_t jmax = n - k < m ? n - k : m;
        for (j = 0; j < jmax; j++)
            acc += x[k + j] * s[j];
        r[k] = e > 0.0 ? acc / e : 0.0;
    }
}
