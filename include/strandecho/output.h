/* strandecho: complete-or-nothing output files.
 *
 * An output opened on a regular file (or a path that does not exist yet) is written to a temporary
 * file in the same folder, named "<path>.XXXXXX.tmp" (six random characters, created exclusively,
 * mode 0666 minus the umask, or the mode of the file being replaced), and renamed over the path only
 * by se_output_commit. Readers of the path therefore see the old file or the complete new one, never
 * a partial one; two writers of the same path never interleave (each has its own temporary file and
 * the last rename wins whole). A symbolic link at the path is replaced by the new regular file.
 *
 * The path "-" means standard output. An existing path that is not a regular file (a pipe, a tty,
 * /dev/stdout, /dev/null, a character device) is opened and written directly: there is nothing to
 * rename over.
 *
 * Life: se_output_open -> write through se_output_stream (or by name through
 * se_output_write_path) -> exactly one of se_output_commit or se_output_abort, which free the handle.
 * A handle is used by one thread at a time. */
#ifndef SE_OUTPUT_H
#define SE_OUTPUT_H

#include <stdio.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct se_output se_output;

/* Open an output for path ("-" = standard output; path is copied).
 * Returns the handle, or NULL with err filled: SE_ERR_ARG (NULL or empty path), SE_ERR_IO (the
 * temporary file or the direct target cannot be created; the message names the path and the system
 * error), SE_ERR_NOMEM. */
se_output *se_output_open(const char *path, se_error *err);

/* The stream to write to (owned by the handle; do not fclose it). NULL if out is NULL. */
FILE *se_output_stream(se_output *out);

/* The name the data goes to: the temporary path, or the path itself when written directly; for
 * libraries that open files by name (libsndfile, cairo). They must write the whole file there before
 * se_output_commit. NULL when writing to standard output (or out is NULL). Owned by the handle. */
const char *se_output_write_path(const se_output *out);

/* Finish: flush, fsync and close the temporary file and rename it over the path (direct targets are
 * flushed and closed; standard output is flushed, not closed). Frees out in every case. On failure
 * the temporary file is removed, the old file at the path is left untouched, and err is filled
 * (SE_ERR_IO naming the path and the system error; SE_ERR_ARG for a NULL handle). */
se_status se_output_commit(se_output *out, se_error *err);

/* Give up: close, remove the temporary file (the old file at the path stays), free. NULL accepted. */
void se_output_abort(se_output *out);

/* 1 when a and b name the same existing file (same st_dev and st_ino after following links),
 * else 0 (also when either does not exist or is NULL). Callers use it to refuse writing an output
 * over one of their inputs. */
int se_path_same_file(const char *a, const char *b);

#ifdef __cplusplus
}
#endif

#endif /* SE_OUTPUT_H */
