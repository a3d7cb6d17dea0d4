/* nn/core.c: fatal errors, checked allocation, status messages. */
#include "nn/core.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

_Noreturn void nn_fail(const char *file, int line, const char *fmt, ...) {
    va_list ap;
    va_start(ap, fmt);
    fprintf(stderr, "framelaw: internal error at %s:%d: ", file, line);
    vfprintf(stderr, fmt, ap);
    fputc('\n', stderr);
    va_end(ap);
    abort();
}

static _Noreturn void out_of_memory(size_t bytes) {
    fprintf(stderr, "framelaw: out of memory (could not allocate %zu bytes); "
                    "reduce the batch size, the frame size or the number of jobs\n", bytes);
    exit(1);
}

void *nn_alloc(size_t bytes) {
    void *p = NULL;
    size_t rounded = (bytes + 63) & ~(size_t)63;
    if (rounded == 0) rounded = 64;
    if (posix_memalign(&p, 64, rounded) != 0 || !p) out_of_memory(bytes);
    return p;
}

void *nn_calloc(size_t count, size_t size) {
    if (size && count > (size_t)-1 / size) out_of_memory((size_t)-1);
    void *p = nn_alloc(count * size);
    memset(p, 0, count * size);
    return p;
}

void nn_free(void *p) { free(p); }

int status_set(Status *st, int code, const char *fmt, ...) {
    if (!st) return code;
    /* Formatted into a copy first: the message may be one of the arguments ("%s: ...", st->msg), which
     * vsnprintf into st->msg itself would garble (C11 7.21.6.12: copying between overlapping objects is
     * undefined). */
    char buf[sizeof st->msg];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    memcpy(st->msg, buf, sizeof buf);
    st->code = code;
    return code;
}
