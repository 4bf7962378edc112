/* strandecho tests: tiny assertion helpers shared by the test programs. */
#ifndef SE_TESTUTIL_H
#define SE_TESTUTIL_H

#include <stddef.h>

/* Number of failed checks so far in this program. */
extern int se_test_failures;

/* Record a check; prints "FAIL file:line: what" on failure. Returns cond. */
int se_check(int cond, const char *file, int line, const char *what);
/* |got - want| <= tol (NaN fails); prints both values on failure. */
int se_check_close(double got, double want, double tol, const char *file, int line, const char *what);

#define CHECK(c) se_check((c) != 0, __FILE__, __LINE__, #c)
#define CHECK_CLOSE(got, want, tol, what) se_check_close((got), (want), (tol), __FILE__, __LINE__, (what))

/* Path under the source tree (env SE_SOURCE_DIR) or the build tree (SE_BINARY_DIR);
 * written into buf, returns buf. */
const char *se_test_source_path(char *buf, size_t size, const char *rel);
const char *se_test_binary_path(char *buf, size_t size, const char *rel);
/* Path to the built CLI (env SE_CLI). */
const char *se_test_cli(void);
/* Run a shell command, capturing stdout+stderr into out (NUL-terminated, truncated to size);
 * returns the exit status (or -1 if it could not be run). */
int se_test_run(const char *cmd, char *out, size_t size);

/* Print a summary and return the exit code for main(). */
int se_test_done(const char *name);

#endif
