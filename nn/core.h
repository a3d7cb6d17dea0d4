/* nn/core.h: always-on checks and fatal errors shared by every module.
 *
 * NN_CHECK is for programming errors (shape mismatches between ops): it stays on under NDEBUG and
 * names the fault. Bytes from disk and user input are never checked with it: io/ validates those
 * and returns a status. nn_alloc / nn_calloc print a clear message and exit 1 when memory runs out
 * (the one exit in library code, by design: there is nothing a caller could do instead). */
#ifndef NN_CORE_H
#define NN_CORE_H

#include <stddef.h>

#define NN_CHECK(cond, ...) \
    do { if (!(cond)) nn_fail(__FILE__, __LINE__, __VA_ARGS__); } while (0)

_Noreturn void nn_fail(const char *file, int line, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

void *nn_alloc(size_t bytes);               /* 64-byte aligned, never NULL */
void *nn_calloc(size_t count, size_t size); /* zeroed, 64-byte aligned, never NULL */
void nn_free(void *p);

/* A status that library code returns instead of exiting: the code is the exit status the command
 * front end will use (0 ok, 1 runtime failure, 2 bad usage or bad input) and msg is the one-line
 * message that names the file, key, line or frame at fault. */
enum { ST_OK = 0, ST_RUNTIME = 1, ST_INPUT = 2 };

typedef struct {
    int code;
    char msg[1024];
} Status;

/* Set code and message (printf-style); returns code, so `return status_set(st, ST_INPUT, ...)`. The
 * message may be an argument: status_set(st, st->code, "while reading: %s", st->msg) prefixes it. */
int status_set(Status *st, int code, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static inline void status_ok(Status *st) { st->code = ST_OK; st->msg[0] = 0; }

#endif
