/* strandecho: SHA-256 digests of files and buffers (for provenance records in reports).
 *
 * The digest is computed with nettle's sha256 and returned as 64 lower-case hex digits plus a
 * terminating NUL. No state is kept between calls; the functions are thread-safe. */
#ifndef SE_DIGEST_H
#define SE_DIGEST_H

#include <stddef.h>

#include "strandecho/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Size of a hex SHA-256 digest buffer: 64 hex digits + NUL. */
#define SE_SHA256_HEX_SIZE 65

/* SHA-256 of the bytes of the file at path (read in binary, any size, streamed in blocks).
 *  path : file to hash (borrowed)
 *  hex  : output [size: 65], lower-case hex digits and a NUL; set to "" on failure
 *  err  : filled on failure (may be NULL)
 * Returns SE_OK, SE_ERR_ARG (NULL path/hex), SE_ERR_IO (cannot open or read, message names the
 * file and the system error) or SE_ERR_NOMEM. */
se_status se_sha256_file(const char *path, char hex[65], se_error *err);

/* SHA-256 of n bytes at data (data may be NULL only when n == 0).
 *  hex : output [size: 65], as above
 * Returns SE_OK or SE_ERR_ARG (NULL hex, or NULL data with n > 0). */
se_status se_sha256_buffer(const void *data, size_t n, char hex[65]);

#ifdef __cplusplus
}
#endif

#endif /* SE_DIGEST_H */
