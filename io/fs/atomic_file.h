/* io/fs/atomic_file.h: files written atomically.
 *
 * The data goes to a temporary file beside the target (same directory, name "<path>.tmp-XXXXXX"),
 * which is flushed, fsync'ed, closed and renamed over the target; then the directory is fsync'ed. A
 * reader therefore sees either the old file or the complete new one, never a partial file, and two
 * processes writing the same target at once each write their own temporary (the last rename wins).
 *
 *     AtomicFile af;
 *     if (atomic_open(&af, path, st)) return st->code;
 *     ... fwrite(..., af.f) ...
 *     return atomic_commit(&af, st);     // or atomic_abort(&af) on an error of your own
 */
#ifndef IO_ATOMIC_FILE_H
#define IO_ATOMIC_FILE_H

#include <stddef.h>
#include <stdio.h>

#include "nn/core.h"

typedef struct {
    FILE *f;            /* write here */
    char path[4096];    /* the target */
    char tmp[4120];     /* the temporary beside it */
} AtomicFile;

/* Create the temporary. Returns 0 or ST_RUNTIME (message names the path and the system error). */
int atomic_open(AtomicFile *af, const char *path, Status *st);
/* Flush, fsync, close, rename over the target, fsync the directory. On any failure the temporary
 * is removed and ST_RUNTIME returned. */
int atomic_commit(AtomicFile *af, Status *st);
/* Close and remove the temporary (safe to call twice, or after a failed commit). */
void atomic_abort(AtomicFile *af);
/* Whole file from one buffer. */
int atomic_write_bytes(const char *path, const void *data, size_t n, Status *st);
/* fsync the directory that holds path (after a rename). Returns 0 or ST_RUNTIME. */
int fsync_parent_dir(const char *path, Status *st);

#endif
