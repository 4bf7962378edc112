/* strandecho: SHA-256 of files and buffers through nettle. */
#include "strandecho/digest.h"

#include <errno.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <nettle/sha2.h>

#include "internal.h"

/* Bytes read from a file per sha256_update. */
#define SE_DIGEST_BLOCK ((size_t)1 << 16)

static void se_digest_hex(struct sha256_ctx *ctx, char hex[65]);

static void se_digest_hex(struct sha256_ctx *ctx, char hex[65])
{
    static const char digits[] = "0123456789abcdef";
    uint8_t d[SHA256_DIGEST_SIZE];
    size_t i;
    sha256_digest(ctx, SHA256_DIGEST_SIZE, d);
    for (i = 0; i < SHA256_DIGEST_SIZE; i++) {
        hex[2 * i] = digits[d[i] >> 4];
        hex[2 * i + 1] = digits[d[i] & 0x0f];
    }
    hex[2 * SHA256_DIGEST_SIZE] = '\0';
}

se_status se_sha256_buffer(const void *data, size_t n, char hex[65])
{
    struct sha256_ctx ctx;
    if (hex == NULL || (data == NULL && n > 0))
        return SE_ERR_ARG;
    sha256_init(&ctx);
    if (n > 0)
        sha256_update(&ctx, n, (const uint8_t *)data);
    se_digest_hex(&ctx, hex);
    return SE_OK;
}

se_status se_sha256_file(const char *path, char hex[65], se_error *err)
{
    struct sha256_ctx ctx;
    unsigned char *buf;
    FILE *fp;
    size_t got;
    if (hex == NULL)
        return se_fail(err, SE_ERR_ARG, "sha256: NULL digest buffer");
    hex[0] = '\0';
    if (path == NULL)
        return se_fail(err, SE_ERR_ARG, "sha256: NULL path");
    fp = fopen(path, "rb");
    if (fp == NULL)
        return se_fail(err, SE_ERR_IO, "%s: cannot open for hashing: %s", path, strerror(errno));
    buf = malloc(SE_DIGEST_BLOCK);
    if (buf == NULL) {
        fclose(fp);
        return se_fail(err, SE_ERR_NOMEM, "%s: cannot allocate %zu bytes to hash the file", path,
                       (size_t)SE_DIGEST_BLOCK);
    }
    sha256_init(&ctx);
    while ((got = fread(buf, 1, SE_DIGEST_BLOCK, fp)) > 0)
        sha256_update(&ctx, got, buf);
    if (ferror(fp)) {
        int e = errno;
        free(buf);
        fclose(fp);
        return se_fail(err, SE_ERR_IO, "%s: read error while hashing: %s", path, strerror(e));
    }
    free(buf);
    fclose(fp);
    se_digest_hex(&ctx, hex);
    return SE_OK;
}
