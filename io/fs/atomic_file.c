/* io/fs/atomic_file.c: see atomic_file.h. */
#include "io/fs/atomic_file.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

int atomic_open(AtomicFile *af, const char *path, Status *st) {
    af->f = NULL;
    af->tmp[0] = 0;
    if (strlen(path) >= sizeof af->path)
        return status_set(st, ST_RUNTIME, "%.200s...: path too long", path);
    snprintf(af->path, sizeof af->path, "%s", path);
    snprintf(af->tmp, sizeof af->tmp, "%s.tmp-XXXXXX", path);
    int fd = mkstemp(af->tmp);
    if (fd < 0) {
        int e = errno;
        af->tmp[0] = 0;
        return status_set(st, ST_RUNTIME, "%s: cannot create a temporary file beside it: %s", path,
                          strerror(e));
    }
    (void)fchmod(fd, 0644);   /* mkstemp gives 0600; the result is an ordinary data file */
    af->f = fdopen(fd, "wb");
    if (!af->f) {
        int e = errno;
        close(fd);
        unlink(af->tmp);
        af->tmp[0] = 0;
        return status_set(st, ST_RUNTIME, "%s: fdopen: %s", path, strerror(e));
    }
    return 0;
}

int fsync_parent_dir(const char *path, Status *st) {
    char dir[4096];
    snprintf(dir, sizeof dir, "%s", path);
    char *slash = strrchr(dir, '/');
    if (!slash) snprintf(dir, sizeof dir, ".");
    else if (slash == dir) dir[1] = 0;
    else *slash = 0;
    int fd = open(dir, O_RDONLY | O_DIRECTORY);
    if (fd < 0) return status_set(st, ST_RUNTIME, "%s: cannot open directory: %s", dir, strerror(errno));
    int r = fsync(fd);
    int e = errno;
    close(fd);
    /* Some file systems refuse fsync on a directory (EINVAL); the rename is still done. */
    if (r && e != EINVAL && e != EROFS)
        return status_set(st, ST_RUNTIME, "%s: fsync of directory: %s", dir, strerror(e));
    return 0;
}

int atomic_commit(AtomicFile *af, Status *st) {
    if (!af->f) return status_set(st, ST_RUNTIME, "%s: not open for writing", af->path);
    int bad = ferror(af->f) || fflush(af->f) != 0;
    int e = errno;
    if (!bad && fsync(fileno(af->f)) != 0) bad = 1, e = errno;
    if (fclose(af->f) != 0 && !bad) bad = 1, e = errno;
    af->f = NULL;
    if (bad) {
        unlink(af->tmp);
        af->tmp[0] = 0;
        return status_set(st, ST_RUNTIME, "%s: write failed: %s", af->path, strerror(e));
    }
    if (rename(af->tmp, af->path) != 0) {
        e = errno;
        unlink(af->tmp);
        af->tmp[0] = 0;
        return status_set(st, ST_RUNTIME, "%s: rename from temporary failed: %s", af->path, strerror(e));
    }
    af->tmp[0] = 0;
    return fsync_parent_dir(af->path, st);
}

void atomic_abort(AtomicFile *af) {
    if (af->f) fclose(af->f);
    af->f = NULL;
    if (af->tmp[0]) unlink(af->tmp);
    af->tmp[0] = 0;
}

int atomic_write_bytes(const char *path, const void *data, size_t n, Status *st) {
    AtomicFile af;
    if (atomic_open(&af, path, st)) return st->code;
    if (n && fwrite(data, 1, n, af.f) != n) {
        int e = errno;
        atomic_abort(&af);
        return status_set(st, ST_RUNTIME, "%s: write failed: %s", path, strerror(e));
    }
    return atomic_commit(&af, st);
}
