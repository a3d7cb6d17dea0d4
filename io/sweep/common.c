/* io/sweep/common.c: see common.h. */
#include "io/sweep/common.h"

#include <errno.h>
#include <fcntl.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "io/fs/files.h"

char *sweep_strdup(const char *s) {
    size_t n = strlen(s) + 1;
    char *d = malloc(n);
    if (d) memcpy(d, s, n);
    return d;
}

void text_add(TextBuf *b, const char *s, size_t len) {
    if (b->failed) return;
    if (b->n + len + 1 > b->cap) {
        size_t cap = b->cap ? b->cap : 4096;
        while (cap < b->n + len + 1) cap *= 2;
        char *nb = realloc(b->b, cap);
        if (!nb) { b->failed = 1; return; }
        b->b = nb;
        b->cap = cap;
    }
    memcpy(b->b + b->n, s, len);
    b->n += len;
    b->b[b->n] = 0;
}

void text_puts(TextBuf *b, const char *s) { text_add(b, s, strlen(s)); }

void text_printf(TextBuf *b, const char *fmt, ...) {
    char tmp[2048];
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(tmp, sizeof tmp, fmt, ap);
    va_end(ap);
    if (n < 0) return;
    if ((size_t)n < sizeof tmp) { text_add(b, tmp, (size_t)n); return; }
    char *big = malloc((size_t)n + 1);
    if (!big) { b->failed = 1; return; }
    va_start(ap, fmt);
    vsnprintf(big, (size_t)n + 1, fmt, ap);
    va_end(ap);
    text_add(b, big, (size_t)n);
    free(big);
}

char *text_take(TextBuf *b) {
    if (b->failed) { free(b->b); return NULL; }
    if (!b->b) return sweep_strdup("");
    return b->b;
}

char *sweep_read_text(const char *path, size_t max, char *why, size_t n_why) {
    char *text;
    Status st;
    if (fs_read_file(path, max, &text, NULL, &st)) {
        snprintf(why, n_why, "%s", st.msg);
        return NULL;
    }
    return text;
}

int sweep_lock(const char *dir, const char *name, int *fd_out, Status *st) {
    char p[CFG_PATH_MAX + 64];
    snprintf(p, sizeof p, "%s/%s", dir, name);
    int fd = open(p, O_RDWR | O_CREAT, 0666);
    if (fd < 0) return status_set(st, ST_RUNTIME, "%s: cannot open the lock file: %s", p, strerror(errno));
    struct flock fl;
    memset(&fl, 0, sizeof fl);
    fl.l_type = F_WRLCK;
    fl.l_whence = SEEK_SET;
    while (fcntl(fd, F_SETLKW, &fl) != 0) {
        if (errno == EINTR) continue;
        int e = errno;
        close(fd);
        return status_set(st, ST_RUNTIME, "%s: cannot lock: %s", p, strerror(e));
    }
    *fd_out = fd;
    return 0;
}

void sweep_unlock(int fd) {
    if (fd >= 0) close(fd);   /* closing drops the lock */
}

int sweep_in_list(const char *s, const char *const *list) {
    for (int i = 0; list[i]; i++)
        if (!strcmp(s, list[i])) return 1;
    return 0;
}

void sweep_free_strings(char **v, int n) {
    if (!v) return;
    for (int i = 0; i < n; i++) free(v[i]);
    free(v);
}

const char *sweep_duplicate_name(const cJSON *obj) {
    for (const cJSON *a = obj->child; a; a = a->next)
        for (const cJSON *b = a->next; b; b = b->next)
            if (a->string && b->string && !strcmp(a->string, b->string)) return a->string;
    return NULL;
}
