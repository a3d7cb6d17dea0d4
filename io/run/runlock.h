/* io/run/runlock.h: one process per run folder.
 *
 * train, resume, export and forecast take an exclusive lock (flock(2)) on RUN_DIR/.framelaw-lock
 * before they write anything into the folder, and hold it until they end (the kernel releases it
 * when the process ends, however it ends: a kill -9 leaves no stale lock). A second command on the
 * same folder gets ST_INPUT naming the holder's pid, host and command, which the holder writes
 * into the lock file. The lock file stays in the folder (removing it would race with a process
 * about to lock it). Once the lock is held, the temporaries of interrupted writers in the folder
 * and its sub-folders are removed (atomic_remove_stale), since no one else writes there now. */
#ifndef IO_RUNLOCK_H
#define IO_RUNLOCK_H

#include "nn/core.h"

#define RUNLOCK_NAME ".framelaw-lock"

typedef struct {
    int fd; /* -1 when not held */
} RunLock;

/* Lock run_dir (which must exist) for `command` ("train", "resume", ...). ST_INPUT when another
 * process holds it; ST_RUNTIME when the lock file cannot be opened. */
int run_lock(RunLock *l, const char *run_dir, const char *command, Status *st);
void run_unlock(RunLock *l);

#endif
