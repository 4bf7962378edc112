/* strandecho: status codes and the error record every fallible call fills. */
#ifndef SE_ERROR_H
#define SE_ERROR_H

#ifdef __cplusplus
extern "C" {
#endif

/* Status codes. SE_OK is zero; every other code has a message in se_strerror(). */
typedef enum se_status {
    SE_OK = 0,        /* success */
    SE_ERR_ARG,       /* invalid argument, option or option value */
    SE_ERR_NOMEM,     /* allocation failed or a size limit would be exceeded */
    SE_ERR_IO,        /* a file could not be opened, read, written or renamed */
    SE_ERR_FORMAT,    /* an input file is malformed (header, syntax, columns) */
    SE_ERR_DATA,      /* data unusable: NaN/Inf, constant, too short, irregular */
    SE_ERR_UNIT,      /* a value has a wrong, unknown or missing unit */
    SE_ERR_RANGE,     /* a value is outside its physical or allowed range */
    SE_ERR_NOTFOUND,  /* something required was not found (e.g. the pulse) */
    SE_ERR_NUMERIC,   /* a numerical method failed to converge */
    SE_ERR_COUNT      /* sentinel: number of codes, not a code */
} se_status;

/* Size of the detail message buffer, including the terminating NUL. */
#define SE_ERROR_MESSAGE_SIZE 512

/* Filled by a failing call: the code and a one-line message naming the file, line,
 * column or sample and what is wrong. Owned by the caller; no allocation inside. */
typedef struct se_error {
    se_status code;
    char message[SE_ERROR_MESSAGE_SIZE];
} se_error;

/* Static English text for a code (never NULL; "unknown status" outside the range). */
const char *se_strerror(se_status code);

/* Reset an error record to SE_OK with an empty message. NULL is accepted. */
void se_error_clear(se_error *err);

/* Library version string, e.g. "0.1.0". */
const char *se_version(void);

#ifdef __cplusplus
}
#endif

#endif /* SE_ERROR_H */
