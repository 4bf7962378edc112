/* strandecho tests: complete-or-nothing outputs (se_output), se_path_same_file, SHA-256 digests. */
#include <dirent.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "strandecho/digest.h"
#include "strandecho/output.h"
#include "testutil.h"

static void write_text(const char *path, const char *text);
static int file_is(const char *path, const char *text);
static size_t count_temps(const char *prefix);
static void test_commit_replaces(void);
static void test_abort_keeps_old(void);
static void test_new_file_and_mode(void);
static void test_two_writers(void);
static void test_write_path_by_name(void);
static void test_stdout(void);
static void test_dev_null(void);
static void test_failures(void);
static void test_same_file(void);
static void test_sha256(void);

static void write_text(const char *path, const char *text)
{
    FILE *fp = fopen(path, "wb");
    if (!CHECK(fp != NULL))
        return;
    fputs(text, fp);
    fclose(fp);
}

/* 1 when the file holds exactly text. */
static int file_is(const char *path, const char *text)
{
    char buf[4096];
    size_t n;
    FILE *fp = fopen(path, "rb");
    if (fp == NULL)
        return 0;
    n = fread(buf, 1, sizeof buf - 1, fp);
    fclose(fp);
    buf[n] = '\0';
    return n == strlen(text) && memcmp(buf, text, n) == 0;
}

/* Files in the working folder named "<prefix>.XXXXXX.tmp" (temporary files left behind). */
static size_t count_temps(const char *prefix)
{
    size_t n = 0, lp = strlen(prefix);
    struct dirent *e;
    DIR *d = opendir(".");
    if (d == NULL)
        return (size_t)-1;
    while ((e = readdir(d)) != NULL) {
        size_t len = strlen(e->d_name);
        if (len == lp + 11 && strncmp(e->d_name, prefix, lp) == 0 && e->d_name[lp] == '.' &&
            strcmp(e->d_name + len - 4, ".tmp") == 0)
            n++;
    }
    closedir(d);
    return n;
}

static void test_commit_replaces(void)
{
    const char *path = "out_commit.txt";
    se_error err;
    se_output *out;
    const char *wp;
    write_text(path, "old content\n");
    out = se_output_open(path, &err);
    if (!CHECK(out != NULL))
        return;
    wp = se_output_write_path(out);
    CHECK(wp != NULL && strcmp(wp, path) != 0);
    CHECK(wp != NULL && strncmp(wp, "out_commit.txt.", 15) == 0 && strlen(wp) == strlen(path) + 11 &&
          strcmp(wp + strlen(wp) - 4, ".tmp") == 0);
    CHECK(count_temps(path) == 1);
    fputs("new content, ", se_output_stream(out));
    fflush(se_output_stream(out));
    /* before the commit readers still see the old file whole */
    CHECK(file_is(path, "old content\n"));
    fputs("complete\n", se_output_stream(out));
    CHECK(se_output_commit(out, &err) == SE_OK);
    CHECK(file_is(path, "new content, complete\n"));
    CHECK(count_temps(path) == 0);
    remove(path);
}

static void test_abort_keeps_old(void)
{
    const char *path = "out_abort.txt";
    se_error err;
    se_output *out;
    write_text(path, "keep me\n");
    out = se_output_open(path, &err);
    if (!CHECK(out != NULL))
        return;
    fputs("half-written", se_output_stream(out));
    se_output_abort(out);
    CHECK(file_is(path, "keep me\n"));
    CHECK(count_temps(path) == 0);
    se_output_abort(NULL);
    remove(path);
}

static void test_new_file_and_mode(void)
{
    const char *path = "out_mode.txt";
    se_error err;
    se_output *out;
    struct stat st;
    remove(path);
    out = se_output_open(path, &err);
    if (!CHECK(out != NULL))
        return;
    /* nothing appears at the path before the commit */
    CHECK(access(path, F_OK) != 0);
    fputs("fresh\n", se_output_stream(out));
    CHECK(se_output_commit(out, &err) == SE_OK);
    CHECK(file_is(path, "fresh\n"));
    /* replacing a file keeps its permission bits */
    CHECK(chmod(path, 0640) == 0);
    out = se_output_open(path, &err);
    if (!CHECK(out != NULL))
        return;
    fputs("second\n", se_output_stream(out));
    CHECK(se_output_commit(out, &err) == SE_OK);
    CHECK(stat(path, &st) == 0 && (st.st_mode & 0777) == 0640);
    CHECK(file_is(path, "second\n"));
    remove(path);
}

static void test_two_writers(void)
{
    const char *path = "out_two.txt";
    se_error err;
    se_output *a, *b;
    size_t i;
    remove(path);
    a = se_output_open(path, &err);
    b = se_output_open(path, &err);
    if (!CHECK(a != NULL && b != NULL)) {
        se_output_abort(a);
        se_output_abort(b);
        return;
    }
    CHECK(strcmp(se_output_write_path(a), se_output_write_path(b)) != 0);
    CHECK(count_temps(path) == 2);
    /* interleaved writes to the two streams, each flushed as it goes */
    for (i = 0; i < 100; i++) {
        fputs("AAAAAAAAAA", se_output_stream(a));
        fflush(se_output_stream(a));
        fputs("BBBBBBBBBB", se_output_stream(b));
        fflush(se_output_stream(b));
    }
    CHECK(se_output_commit(a, &err) == SE_OK);
    {
        char want[1001];
        memset(want, 'A', 1000);
        want[1000] = '\0';
        CHECK(file_is(path, want));
        CHECK(se_output_commit(b, &err) == SE_OK);
        memset(want, 'B', 1000);
        CHECK(file_is(path, want)); /* the last rename wins, whole */
    }
    CHECK(count_temps(path) == 0);
    remove(path);
}

/* A library that opens by name (as libsndfile does) writes the temporary path. */
static void test_write_path_by_name(void)
{
    const char *path = "out_byname.txt";
    se_error err;
    se_output *out = se_output_open(path, &err);
    FILE *fp;
    if (!CHECK(out != NULL))
        return;
    fp = fopen(se_output_write_path(out), "wb");
    if (CHECK(fp != NULL)) {
        fputs("by name\n", fp);
        fclose(fp);
    }
    CHECK(se_output_commit(out, &err) == SE_OK);
    CHECK(file_is(path, "by name\n"));
    CHECK(count_temps(path) == 0);
    remove(path);
}

/* "-" writes to standard output: fd 1 is pointed at a file for the duration. */
static void test_stdout(void)
{
    const char *cap = "out_stdout_capture.txt";
    se_error err;
    se_output *out;
    int saved, fd;
    fflush(stdout);
    saved = dup(1);
    fd = open(cap, O_WRONLY | O_CREAT | O_TRUNC, 0644);
    if (!CHECK(saved >= 0 && fd >= 0))
        return;
    dup2(fd, 1);
    close(fd);
    out = se_output_open("-", &err);
    if (out != NULL) {
        CHECK(se_output_stream(out) == stdout);
        CHECK(se_output_write_path(out) == NULL);
        fputs("to stdout\n", se_output_stream(out));
        CHECK(se_output_commit(out, &err) == SE_OK);
    }
    fflush(stdout);
    dup2(saved, 1);
    close(saved);
    CHECK(out != NULL);
    CHECK(file_is(cap, "to stdout\n"));
    CHECK(count_temps("-") == 0);
    remove(cap);
}

static void test_dev_null(void)
{
    se_error err;
    se_output *out = se_output_open("/dev/null", &err);
    struct stat st;
    if (!CHECK(out != NULL))
        return;
    /* written directly: no temporary file, nothing renamed over the device */
    CHECK(strcmp(se_output_write_path(out), "/dev/null") == 0);
    fputs("discarded\n", se_output_stream(out));
    CHECK(se_output_commit(out, &err) == SE_OK);
    CHECK(stat("/dev/null", &st) == 0 && S_ISCHR(st.st_mode));
}

static void test_failures(void)
{
    se_error err;
    se_output *out;
    se_error_clear(&err);
    CHECK(se_output_open(NULL, &err) == NULL && err.code == SE_ERR_ARG);
    CHECK(se_output_open("", &err) == NULL && err.code == SE_ERR_ARG);
    CHECK(se_output_commit(NULL, &err) == SE_ERR_ARG);
    /* a folder that does not exist: no temporary file can be made */
    CHECK(se_output_open("no_such_folder_rec/x.txt", &err) == NULL && err.code == SE_ERR_IO &&
          strstr(err.message, "no_such_folder_rec/x.txt") != NULL);
    /* a directory as the output (leftovers of an interrupted run removed first) */
    rmdir("out_dir_target");
    remove("out_late_dir/inside");
    rmdir("out_late_dir");
    CHECK(mkdir("out_dir_target", 0755) == 0);
    CHECK(se_output_open("out_dir_target", &err) == NULL && err.code == SE_ERR_IO);
    /* the rename fails when a non-empty directory took the path meanwhile: the temporary file is
     * removed and the error names the path */
    out = se_output_open("out_late_dir", &err);
    if (CHECK(out != NULL)) {
        fputs("x", se_output_stream(out));
        CHECK(mkdir("out_late_dir", 0755) == 0);
        write_text("out_late_dir/inside", "y");
        CHECK(se_output_commit(out, &err) == SE_ERR_IO && strstr(err.message, "out_late_dir") != NULL);
        CHECK(count_temps("out_late_dir") == 0);
        remove("out_late_dir/inside");
        rmdir("out_late_dir");
    }
    rmdir("out_dir_target");
}

static void test_same_file(void)
{
    write_text("same_a.txt", "a");
    write_text("same_b.txt", "a");
    remove("same_link.txt");
    CHECK(link("same_a.txt", "same_link.txt") == 0);
    CHECK(se_path_same_file("same_a.txt", "same_a.txt") == 1);
    CHECK(se_path_same_file("same_a.txt", "./same_a.txt") == 1);
    CHECK(se_path_same_file("same_a.txt", "same_link.txt") == 1);
    CHECK(se_path_same_file("same_a.txt", "same_b.txt") == 0);
    CHECK(se_path_same_file("same_a.txt", "same_missing.txt") == 0);
    CHECK(se_path_same_file("same_missing.txt", "same_missing.txt") == 0);
    CHECK(se_path_same_file(NULL, "same_a.txt") == 0);
    remove("same_a.txt");
    remove("same_b.txt");
    remove("same_link.txt");
}

static void test_sha256(void)
{
    char hex[65], hex2[65];
    se_error err;
    unsigned char *big;
    size_t i, n = 200000;
    FILE *fp;
    /* NIST FIPS 180-2, appendix B.1 (one-block message "abc") */
    CHECK(se_sha256_buffer("abc", 3, hex) == SE_OK);
    CHECK(strcmp(hex, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad") == 0);
    /* NIST FIPS 180-2, appendix B.2 (448-bit two-block message) */
    {
        const char *m = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
        CHECK(strlen(m) == 56);
        CHECK(se_sha256_buffer(m, strlen(m), hex) == SE_OK);
        CHECK(strcmp(hex, "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1") == 0);
    }
    /* NIST FIPS 180-2, appendix B.3 (one million 'a'), through a file: several read blocks */
    big = malloc(1000000);
    if (CHECK(big != NULL)) {
        memset(big, 'a', 1000000);
        fp = fopen("sha_million.bin", "wb");
        if (CHECK(fp != NULL)) {
            CHECK(fwrite(big, 1, 1000000, fp) == 1000000);
            fclose(fp);
        }
        CHECK(se_sha256_file("sha_million.bin", hex, &err) == SE_OK);
        CHECK(strcmp(hex, "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0") == 0);
        remove("sha_million.bin");
        free(big);
    }
    /* file digest equals buffer digest for arbitrary bytes (not a multiple of the block) */
    big = malloc(n);
    if (CHECK(big != NULL)) {
        unsigned x = 12345u;
        for (i = 0; i < n; i++) {
            x = x * 1103515245u + 12345u;
            big[i] = (unsigned char)(x >> 16);
        }
        fp = fopen("sha_bytes.bin", "wb");
        if (CHECK(fp != NULL)) {
            CHECK(fwrite(big, 1, n, fp) == n);
            fclose(fp);
        }
        CHECK(se_sha256_file("sha_bytes.bin", hex, &err) == SE_OK);
        CHECK(se_sha256_buffer(big, n, hex2) == SE_OK);
        CHECK(strlen(hex) == 64 && strcmp(hex, hex2) == 0);
        /* one byte changed changes the digest */
        big[n / 2] ^= 1;
        CHECK(se_sha256_buffer(big, n, hex2) == SE_OK && strcmp(hex, hex2) != 0);
        remove("sha_bytes.bin");
        free(big);
    }
    /* empty input is hashed, not refused; bad arguments are */
    CHECK(se_sha256_buffer(NULL, 0, hex) == SE_OK && strlen(hex) == 64);
    CHECK(se_sha256_buffer(NULL, 1, hex) == SE_ERR_ARG);
    CHECK(se_sha256_buffer("abc", 3, NULL) == SE_ERR_ARG);
    CHECK(se_sha256_file("sha_missing.bin", hex, &err) == SE_ERR_IO &&
          strstr(err.message, "sha_missing.bin") != NULL && hex[0] == '\0');
}

int main(void)
{
    test_commit_replaces();
    test_abort_keeps_old();
    test_new_file_and_mode();
    test_two_writers();
    test_write_path_by_name();
    test_stdout();
    test_dev_null();
    test_failures();
    test_same_file();
    test_sha256();
    return se_test_done("test_output");
}
