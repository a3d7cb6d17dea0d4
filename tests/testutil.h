/* tests/testutil.h: what every cmocka suite includes. */
#ifndef TESTUTIL_H
#define TESTUTIL_H

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

/* Fail with both values and the tolerance when |a - b| > atol + rtol |b|. */
#define assert_close(a, b, atol, rtol)                                                          \
    do {                                                                                        \
        double a_ = (a), b_ = (b);                                                              \
        if (!(fabs(a_ - b_) <= (atol) + (rtol) * fabs(b_))) {                                   \
            fail_msg("%s = %.9g, expected %s = %.9g (atol %g, rtol %g)", #a, a_, #b, b_,        \
                     (double)(atol), (double)(rtol));                                           \
        }                                                                                       \
    } while (0)

/* Path of a fresh temporary directory for a test (mkdtemp under TMPDIR or /tmp). */
static inline char *test_tmpdir(char *buf, size_t n) {
    const char *base = getenv("TMPDIR");
    snprintf(buf, n, "%s/framelaw-test-XXXXXX", base && *base ? base : "/tmp");
    return mkdtemp(buf);
}

/* A whole file as a NUL-terminated string (malloc'ed; NULL when it cannot be opened). */
static inline char *test_slurp(const char *path) {
    FILE *f = fopen(path, "rb");
    if (!f) return NULL;
    fseek(f, 0, SEEK_END);
    long n = ftell(f);
    fseek(f, 0, SEEK_SET);
    char *b = malloc((size_t)(n > 0 ? n : 0) + 1);
    size_t got = b && n > 0 ? fread(b, 1, (size_t)n, f) : 0;
    if (b) b[got] = 0;
    fclose(f);
    return b;
}

/* Write text to a file (created or replaced); fails the test when it cannot. */
static inline void test_write_file(const char *path, const char *text) {
    FILE *f = fopen(path, "w");
    if (!f) fail_msg("cannot write %s", path);
    fputs(text, f);
    fclose(f);
}

/* Remove a test's temporary directory and everything in it. */
static inline void test_rmtree(const char *dir) {
    char cmd[4200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    if (system(cmd) != 0) fprintf(stderr, "could not remove %s\n", dir);
}

/* The framelaw binary under test (set by `make test`). */
static inline const char *test_framelaw(void) {
    const char *p = getenv("FRAMELAW");
    return p && *p ? p : "./framelaw";
}

/* Run `framelaw ARGS` (the binary under test) with stdout and stderr captured together into out (n);
 * returns the exit status, or -1 when it did not exit normally. */
static inline int test_run_capture(const char *args, char *out, size_t n) {
    char cmd[8192];
    snprintf(cmd, sizeof cmd, "'%s' %s 2>&1", test_framelaw(), args);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    size_t len = fread(out, 1, n - 1, p);
    out[len] = 0;
    int status = pclose(p);
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

/* Start framelaw with the arguments given (NULL-terminated, at most 15), its stdout and stderr
 * sent to /dev/null; returns its pid without waiting. */
static inline pid_t test_spawn_quiet(const char *arg, ...) {
    char *argv[17] = {(char *)test_framelaw()};
    int n = 1;
    va_list ap;
    va_start(ap, arg);
    for (const char *a = arg; a && n < 16; a = va_arg(ap, const char *)) argv[n++] = (char *)a;
    va_end(ap);
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        FILE *f = freopen("/dev/null", "w", stderr);
        f = freopen("/dev/null", "w", stdout);
        (void)f;
        execv(argv[0], argv);
        _exit(127);
    }
    return pid;
}

#endif
