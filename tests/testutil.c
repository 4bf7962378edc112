/* strandecho tests: tiny assertion helpers shared by the test programs. */
#include "testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>

int se_test_failures = 0;
static int se_test_checks = 0;

int se_check(int cond, const char *file, int line, const char *what)
{
    se_test_checks++;
    if (!cond) {
        se_test_failures++;
        fprintf(stderr, "FAIL %s:%d: %s\n", file, line, what);
    }
    return cond;
}

int se_check_close(double got, double want, double tol, const char *file, int line, const char *what)
{
    int ok = !isnan(got) && !isnan(want) && fabs(got - want) <= tol;
    se_test_checks++;
    if (!ok) {
        se_test_failures++;
        fprintf(stderr, "FAIL %s:%d: %s: got %.12g, want %.12g, tolerance %.3g\n", file, line, what,
                got, want, tol);
    }
    return ok;
}

static const char *se_test_env_path(char *buf, size_t size, const char *var, const char *rel)
{
    const char *base = getenv(var);
    snprintf(buf, size, "%s/%s", base ? base : ".", rel);
    return buf;
}

const char *se_test_source_path(char *buf, size_t size, const char *rel)
{
    return se_test_env_path(buf, size, "SE_SOURCE_DIR", rel);
}

const char *se_test_binary_path(char *buf, size_t size, const char *rel)
{
    return se_test_env_path(buf, size, "SE_BINARY_DIR", rel);
}

const char *se_test_cli(void)
{
    const char *cli = getenv("SE_CLI");
    return cli ? cli : "./strandecho";
}

int se_test_run(const char *cmd, char *out, size_t size)
{
    char full[8192];
    FILE *p;
    size_t used = 0;
    int status;
    snprintf(full, sizeof full, "%s 2>&1", cmd);
    p = popen(full, "r");
    if (p == NULL)
        return -1;
    if (out != NULL && size > 0) {
        size_t got;
        while (used + 1 < size && (got = fread(out + used, 1, size - 1 - used, p)) > 0)
            used += got;
        out[used] = '\0';
    }
    {
        char sink[4096];
        while (fread(sink, 1, sizeof sink, p) > 0) {
        }
    }
    status = pclose(p);
    if (status == -1)
        return -1;
    return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
}

int se_test_done(const char *name)
{
    if (se_test_failures > 0) {
        fprintf(stderr, "%s: %d of %d checks failed\n", name, se_test_failures, se_test_checks);
        return 1;
    }
    printf("%s: all %d checks passed\n", name, se_test_checks);
    return 0;
}
