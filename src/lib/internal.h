/* strandecho: the one private header, shared private helpers of the library. */
#ifndef SE_INTERNAL_H
#define SE_INTERNAL_H

#include <stddef.h>
#include <stdint.h>

#include "strandecho/error.h"

#if defined(__GNUC__) || defined(__clang__)
#define SE_PRINTF(a, b) __attribute__((format(printf, a, b)))
#else
#define SE_PRINTF(a, b)
#endif

/* pi, since C11 does not define M_PI. */
#define SE_PI 3.14159265358979323846

/* Set code and a printf-style message in err (err may be NULL); returns code so
 * callers can write `return se_fail(err, SE_ERR_ARG, "...", ...);`. */
se_status se_fail(se_error *err, se_status code, const char *fmt, ...) SE_PRINTF(3, 4);

/* Allocation with overflow check of n * size; on failure fills err (SE_ERR_NOMEM,
 * naming `what`) and returns NULL. The memory is zeroed. Free with free(). */
void *se_calloc(size_t n, size_t size, const char *what, se_error *err);

/* n * size without overflow: returns 0 and sets *out on success, -1 on overflow. */
int se_mul_size(size_t n, size_t size, size_t *out);

/* strdup into malloc'd memory; NULL on failure (err filled). */
char *se_strdup(const char *s, se_error *err);

#endif /* SE_INTERNAL_H */
