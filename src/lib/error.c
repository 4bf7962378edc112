/* strandecho: status messages and the private error/allocation helpers. */
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

#ifndef SE_VERSION_STRING
#define SE_VERSION_STRING "0.0.0"
#endif

static const char *const se_messages[SE_ERR_COUNT] = {
    [SE_OK] = "success",
    [SE_ERR_ARG] = "invalid argument",
    [SE_ERR_NOMEM] = "out of memory or size limit exceeded",
    [SE_ERR_IO] = "input/output error",
    [SE_ERR_FORMAT] = "malformed input file",
    [SE_ERR_DATA] = "unusable data",
    [SE_ERR_UNIT] = "bad or missing unit",
    [SE_ERR_RANGE] = "value out of range",
    [SE_ERR_NOTFOUND] = "not found",
    [SE_ERR_NUMERIC] = "numerical failure",
};

const char *se_strerror(se_status code)
{
    if ((int)code < 0 || code >= SE_ERR_COUNT || se_messages[code] == NULL)
        return "unknown status";
    return se_messages[code];
}

void se_error_clear(se_error *err)
{
    if (err == NULL)
        return;
    err->code = SE_OK;
    err->message[0] = '\0';
}

const char *se_version(void)
{
    return SE_VERSION_STRING;
}

se_status se_fail(se_error *err, se_status code, const char *fmt, ...)
{
    if (err != NULL) {
        va_list ap;
        err->code = code;
        va_start(ap, fmt);
        vsnprintf(err->message, sizeof err->message, fmt, ap);
        va_end(ap);
    }
    return code;
}

int se_mul_size(size_t n, size_t size, size_t *out)
{
    if (size != 0 && n > SIZE_MAX / size)
        return -1;
    *out = n * size;
    return 0;
}

void *se_calloc(size_t n, size_t size, const char *what, se_error *err)
{
    size_t bytes;
    void *p;
    if (se_mul_size(n, size, &bytes) != 0) {
        se_fail(err, SE_ERR_NOMEM, "%s: size %zu x %zu overflows", what, n, size);
        return NULL;
    }
    p = calloc(n == 0 ? 1 : n, size == 0 ? 1 : size);
    if (p == NULL)
        se_fail(err, SE_ERR_NOMEM, "%s: cannot allocate %zu bytes", what, bytes);
    return p;
}

char *se_strdup(const char *s, se_error *err)
{
    size_t n = strlen(s) + 1;
    char *p = malloc(n);
    if (p == NULL) {
        se_fail(err, SE_ERR_NOMEM, "cannot allocate %zu bytes for a string", n);
        return NULL;
    }
    memcpy(p, s, n);
    return p;
}
