/* strandecho: complete-or-nothing output files (temporary file + rename). */
#include "strandecho/output.h"

#include <errno.h>
#include <fcntl.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "internal.h"

/* Attempts at an unused temporary name before giving up. */
#define SE_OUTPUT_TRIES 100

enum se_output_kind { SE_OUT_STDOUT, SE_OUT_DIRECT, SE_OUT_TEMP };

struct se_output {
    enum se_output_kind kind;
    FILE *fp;
    char *path; /* final path (copied) */
    char *tmp;  /* temporary path (SE_OUT_TEMP only) */
};

static uint64_t se_output_mix(uint64_t x);
static int se_output_create_temp(const char *path, char *tmp, mode_t mode);
static void se_output_sync_folder(const char *path);
static void se_output_free(se_output *out);

/* splitmix64 finaliser: spreads the seed bits over the whole word. */
static uint64_t se_output_mix(uint64_t x)
{
    x += 0x9e3779b97f4a7c15u;
    x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9u;
    x = (x ^ (x >> 27)) * 0x94d049bb133111ebu;
    return x ^ (x >> 31);
}

/* Create "<path>.XXXXXX.tmp" exclusively (O_EXCL, like mkstemp) with the given mode (the umask
 * applies, unlike mkstemp's fixed 0600). tmp has room for strlen(path) + 12. Returns the fd or -1
 * (errno set). The random characters come from time, pid, a stack address and the attempt: no
 * global generator state. */
static int se_output_create_temp(const char *path, char *tmp, mode_t mode)
{
    static const char alphabet[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789";
    size_t len = strlen(path);
    int attempt;
    for (attempt = 0; attempt < SE_OUTPUT_TRIES; attempt++) {
        struct timespec ts;
        uint64_t r;
        int fd, k;
        if (clock_gettime(CLOCK_REALTIME, &ts) != 0)
            ts.tv_sec = ts.tv_nsec = 0;
        r = se_output_mix((uint64_t)ts.tv_nsec ^ ((uint64_t)ts.tv_sec << 30) ^
                          ((uint64_t)getpid() << 20) ^ (uint64_t)(uintptr_t)&ts ^
                          ((uint64_t)attempt << 48));
        memcpy(tmp, path, len);
        tmp[len] = '.';
        for (k = 0; k < 6; k++) {
            tmp[len + 1 + (size_t)k] = alphabet[r % (sizeof alphabet - 1)];
            r /= sizeof alphabet - 1;
        }
        memcpy(tmp + len + 7, ".tmp", 5);
        fd = open(tmp, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, mode);
        if (fd >= 0 || errno != EEXIST)
            return fd;
    }
    errno = EEXIST;
    return -1;
}

/* Make the rename durable: fsync the folder holding path. Best effort (some file systems refuse
 * fsync on folders; the data itself was already synced). */
static void se_output_sync_folder(const char *path)
{
    const char *slash = strrchr(path, '/');
    char *dir;
    int fd;
    if (slash == NULL) {
        dir = se_strdup(".", NULL);
    } else {
        size_t n = (size_t)(slash - path);
        dir = malloc(n + 2);
        if (dir != NULL) {
            if (n == 0)
                n = 1; /* "/file": the root */
            memcpy(dir, path, n);
            dir[n] = '\0';
        }
    }
    if (dir == NULL)
        return;
    fd = open(dir, O_RDONLY | O_CLOEXEC);
    if (fd >= 0) {
        (void)fsync(fd);
        close(fd);
    }
    free(dir);
}

static void se_output_free(se_output *out)
{
    free(out->path);
    free(out->tmp);
    free(out);
}

se_output *se_output_open(const char *path, se_error *err)
{
    se_output *out;
    struct stat st;
    if (path == NULL || path[0] == '\0') {
        se_fail(err, SE_ERR_ARG, "output: %s path", path == NULL ? "NULL" : "empty");
        return NULL;
    }
    out = se_calloc(1, sizeof *out, "output handle", err);
    if (out == NULL)
        return NULL;
    out->path = se_strdup(path, err);
    if (out->path == NULL) {
        free(out);
        return NULL;
    }
    if (strcmp(path, "-") == 0) {
        out->kind = SE_OUT_STDOUT;
        out->fp = stdout;
        return out;
    }
    if (stat(path, &st) == 0 && !S_ISREG(st.st_mode)) {
        if (S_ISDIR(st.st_mode)) {
            se_fail(err, SE_ERR_IO, "%s: cannot write output: is a directory", path);
            se_output_free(out);
            return NULL;
        }
        out->kind = SE_OUT_DIRECT;
        out->fp = fopen(path, "wb");
        if (out->fp == NULL) {
            se_fail(err, SE_ERR_IO, "%s: cannot open for writing: %s", path, strerror(errno));
            se_output_free(out);
            return NULL;
        }
        return out;
    }
    {
        /* a regular file (its mode is kept) or a new one (0666 minus the umask) */
        int exists = stat(path, &st) == 0;
        mode_t mode = exists ? (st.st_mode & 0777) : 0666;
        size_t len = strlen(path);
        int fd;
        out->kind = SE_OUT_TEMP;
        out->tmp = malloc(len + 12);
        if (out->tmp == NULL) {
            se_fail(err, SE_ERR_NOMEM, "%s: cannot allocate the temporary name", path);
            se_output_free(out);
            return NULL;
        }
        fd = se_output_create_temp(path, out->tmp, mode);
        if (fd < 0) {
            se_fail(err, SE_ERR_IO, "%s: cannot create a temporary file beside it: %s", path,
                    strerror(errno));
            se_output_free(out);
            return NULL;
        }
        /* the umask may have removed bits the replaced file had */
        if (exists)
            (void)fchmod(fd, mode);
        out->fp = fdopen(fd, "wb");
        if (out->fp == NULL) {
            se_fail(err, SE_ERR_IO, "%s: cannot open a stream on %s: %s", path, out->tmp,
                    strerror(errno));
            close(fd);
            unlink(out->tmp);
            se_output_free(out);
            return NULL;
        }
    }
    return out;
}

FILE *se_output_stream(se_output *out)
{
    return out == NULL ? NULL : out->fp;
}

const char *se_output_write_path(const se_output *out)
{
    if (out == NULL || out->kind == SE_OUT_STDOUT)
        return NULL;
    return out->kind == SE_OUT_TEMP ? out->tmp : out->path;
}

se_status se_output_commit(se_output *out, se_error *err)
{
    se_status st = SE_OK;
    if (out == NULL)
        return se_fail(err, SE_ERR_ARG, "output: commit of a NULL handle");
    switch (out->kind) {
    case SE_OUT_STDOUT:
        if (fflush(stdout) != 0 || ferror(stdout))
            st = se_fail(err, SE_ERR_IO, "standard output: write error: %s", strerror(errno));
        break;
    case SE_OUT_DIRECT:
        if (fflush(out->fp) != 0 || ferror(out->fp)) {
            st = se_fail(err, SE_ERR_IO, "%s: write error: %s", out->path, strerror(errno));
            fclose(out->fp);
        } else if (fclose(out->fp) != 0) {
            st = se_fail(err, SE_ERR_IO, "%s: close failed: %s", out->path, strerror(errno));
        }
        break;
    case SE_OUT_TEMP:
        if (fflush(out->fp) != 0 || ferror(out->fp)) {
            st = se_fail(err, SE_ERR_IO, "%s: write error on %s: %s", out->path, out->tmp,
                         strerror(errno));
            fclose(out->fp);
        } else if (fsync(fileno(out->fp)) != 0) {
            st = se_fail(err, SE_ERR_IO, "%s: fsync of %s failed: %s", out->path, out->tmp,
                         strerror(errno));
            fclose(out->fp);
        } else if (fclose(out->fp) != 0) {
            st = se_fail(err, SE_ERR_IO, "%s: close of %s failed: %s", out->path, out->tmp,
                         strerror(errno));
        } else if (rename(out->tmp, out->path) != 0) {
            st = se_fail(err, SE_ERR_IO, "%s: cannot rename %s over it: %s", out->path, out->tmp,
                         strerror(errno));
        }
        if (st != SE_OK)
            unlink(out->tmp);
        else
            se_output_sync_folder(out->path);
        break;
    }
    se_output_free(out);
    return st;
}

void se_output_abort(se_output *out)
{
    if (out == NULL)
        return;
    if (out->kind == SE_OUT_STDOUT) {
        fflush(stdout);
    } else {
        fclose(out->fp);
        if (out->kind == SE_OUT_TEMP)
            unlink(out->tmp);
    }
    se_output_free(out);
}

int se_path_same_file(const char *a, const char *b)
{
    struct stat sa, sb;
    if (a == NULL || b == NULL || stat(a, &sa) != 0 || stat(b, &sb) != 0)
        return 0;
    return sa.st_dev == sb.st_dev && sa.st_ino == sb.st_ino;
}
