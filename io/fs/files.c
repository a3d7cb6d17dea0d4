/* io/fs/files.c: see files.h. */
#define _XOPEN_SOURCE 700 /* nftw */
#include "io/fs/files.h"

#include <errno.h>
#include <ftw.h>
#include <stdint.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

/* mkdir that accepts an existing folder (and only a folder). A file in the way is the input's fault
 * (a path named a file where a folder must be): ST_INPUT. */
static int make_one(const char *dir, Status *st) {
    if (mkdir(dir, 0777) == 0) return 0;
    int e = errno;
    if (e == EEXIST) {
        if (fs_is_dir(dir)) return 0;
        return status_set(st, ST_INPUT, "%s: cannot create folder: a file of that name is in the way", dir);
    }
    return status_set(st, ST_RUNTIME, "%s: cannot create folder: %s", dir, strerror(e));
}

int fs_make_dirs(const char *path, Status *st) {
    char buf[4096];
    if (snprintf(buf, sizeof buf, "%s", path) >= (int)sizeof buf)
        return status_set(st, ST_INPUT, "%.200s...: path too long", path);
    if (!buf[0]) return status_set(st, ST_INPUT, "cannot create a folder with an empty name");
    if (fs_is_dir(buf)) return 0;   /* the common case: one stat */
    for (char *p = buf + 1; *p; p++) {
        if (*p != '/' || p[-1] == '/') continue;
        *p = 0;
        int rc = make_one(buf, st);
        *p = '/';
        if (rc) return rc;
    }
    return make_one(buf, st);
}

int fs_read_file_as(const char *path, const char *name, size_t max, char **out, size_t *len, Status *st) {
    const char *pre = name ? name : "", *sep = name ? ": " : ""; /* what messages start with */
    *out = NULL;
    if (len) *len = 0;
    if (max > SIZE_MAX / 2) max = SIZE_MAX / 2;   /* so that max + 1 and the doubling cannot wrap */
    /* O_NONBLOCK: opening a pipe with no writer must not wait; it is refused below as not regular */
    int fd = open(path, O_RDONLY | O_NONBLOCK | O_CLOEXEC);
    if (fd < 0) return status_set(st, ST_INPUT, "%s%scannot open: %s", pre, sep, strerror(errno));
    struct stat sb;
    if (fstat(fd, &sb) != 0) {
        int e = errno;
        close(fd);
        return status_set(st, ST_INPUT, "%s%scannot read: %s", pre, sep, strerror(e));
    }
    if (!S_ISREG(sb.st_mode)) {
        close(fd);
        return status_set(st, ST_INPUT, "%s%snot a regular file (%s)", pre, sep,
                          S_ISDIR(sb.st_mode) ? "a folder" : "a device, pipe or socket");
    }
    if ((unsigned long long)sb.st_size > (unsigned long long)max) {
        close(fd);
        return status_set(st, ST_INPUT, "%s%s%lld bytes, more than the %zu this file may have", pre, sep,
                          (long long)sb.st_size, max);
    }
    /* The size from fstat is a hint (the file may grow while it is read): read until end of file,
     * growing the buffer, and still refuse more than max bytes. */
    size_t cap = (size_t)sb.st_size + 1, n = 0;
    if (cap < 4096) cap = 4096;
    if (cap > max + 1) cap = max + 1;
    char *b = malloc(cap + 1);
    if (!b) {
        close(fd);
        return status_set(st, ST_RUNTIME, "%s%sout of memory (%zu bytes)", pre, sep, cap + 1);
    }
    for (;;) {
        if (n == cap) {
            if (cap > max) {
                free(b);
                close(fd);
                return status_set(st, ST_INPUT, "%s%smore than the %zu bytes this file may have", pre, sep, max);
            }
            size_t nc = cap * 2 > max + 1 ? max + 1 : cap * 2;
            char *nb = realloc(b, nc + 1);
            if (!nb) {
                free(b);
                close(fd);
                return status_set(st, ST_RUNTIME, "%s%sout of memory (%zu bytes)", pre, sep, nc + 1);
            }
            b = nb, cap = nc;
        }
        ssize_t got = read(fd, b + n, cap - n);
        if (got < 0 && errno == EINTR) continue;
        if (got < 0) {
            int e = errno;
            free(b);
            close(fd);
            return status_set(st, ST_INPUT, "%s%sread error: %s", pre, sep, strerror(e));
        }
        if (got == 0) break;
        n += (size_t)got;
    }
    close(fd);
    if (n > max) {
        free(b);
        return status_set(st, ST_INPUT, "%s%smore than the %zu bytes this file may have", pre, sep, max);
    }
    b[n] = 0;
    *out = b;
    if (len) *len = n;
    return 0;
}

int fs_read_file(const char *path, size_t max, char **out, size_t *len, Status *st) {
    return fs_read_file_as(path, path, max, out, len, st);
}

int fs_exists(const char *path) {
    struct stat sb;
    return stat(path, &sb) == 0;
}

int fs_is_dir(const char *path) {
    struct stat sb;
    return stat(path, &sb) == 0 && S_ISDIR(sb.st_mode);
}

static int remove_entry(const char *path, const struct stat *sb, int flag, struct FTW *ftw) {
    (void)sb, (void)flag, (void)ftw;
    return remove(path) ? -1 : 0;
}

int fs_remove_tree(const char *path, Status *st) {
    struct stat sb;
    if (lstat(path, &sb) != 0) return errno == ENOENT ? 0 : status_set(st, ST_RUNTIME, "%s: %s", path, strerror(errno));
    if (nftw(path, remove_entry, 16, FTW_DEPTH | FTW_PHYS) != 0)
        return status_set(st, ST_RUNTIME, "%s: cannot remove: %s", path, strerror(errno));
    return 0;
}
