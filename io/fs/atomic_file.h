/* io/fs/atomic_file.h: files written atomically.
 *
 * The data goes to a temporary file beside the target (same directory, name
 * "<path>.tmp-<host>-<pid>-XXXXXX": the writer's host name and process id), which is flushed,
 * fsync'ed, closed and renamed over the target; then the directory is fsync'ed. A reader therefore
 * sees either the old file or the complete new one, never a partial file, and two processes writing
 * the same target at once each write their own temporary (the last rename wins).
 *
 * Leftovers. A temporary whose writer was interrupted is removed: on SIGINT, SIGTERM, SIGHUP or
 * SIGQUIT by atomic_cleanup_on_signals' handler (every temporary this process has open is listed in
 * the one process-wide table of io/, since a signal handler has no other way to find them); after a
 * kill -9 by the next atomic_remove_stale over its folder, which removes the temporaries written on
 * this host by a process that no longer exists (a live or foreign writer's are left alone).
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
    char tmp[4200];     /* the temporary beside it */
    int slot;           /* its entry in the table of open temporaries (-1: none) */
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

/* Remove the temporaries in dir (of the target named `base` only, or of any target when base is
 * NULL) written on this host by a process that is gone. Returns how many were removed. */
int atomic_remove_stale(const char *dir, const char *base);
/* Remove every temporary this process has open (async-signal-safe). */
void atomic_remove_open_temporaries(void);
/* Handle SIGINT, SIGTERM, SIGHUP and SIGQUIT: remove this process's open temporaries, then die of
 * the signal as before. The command front end calls it once at start. */
void atomic_cleanup_on_signals(void);

#endif
