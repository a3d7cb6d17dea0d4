/* io/run/runlock.c: one process per run folder (see runlock.h). */
#include "io/run/runlock.h"

#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include "io/fs/atomic_file.h"

/* The holder's line, "pid PID host HOST command COMMAND", as a readable phrase. */
static void holder_text(int fd, char *out, size_t n) {
    char buf[512];
    ssize_t got = pread(fd, buf, sizeof buf - 1, 0);
    long pid = 0;
    char host[256] = "", cmd[64] = "";
    if (got > 0) {
        buf[got] = 0;
        if (sscanf(buf, "pid %ld host %255s command %63s", &pid, host, cmd) == 3 && pid > 0) {
            snprintf(out, n, "pid %ld on %s, `framelaw %s`", pid, host, cmd);
            return;
        }
    }
    snprintf(out, n, "a process that has not written its pid yet");
}

int run_lock(RunLock *l, const char *run_dir, const char *command, Status *st) {
    l->fd = -1;
    char path[4200];
    if (snprintf(path, sizeof path, "%s/%s", run_dir, RUNLOCK_NAME) >= (int)sizeof path)
        return status_set(st, ST_INPUT, "%.200s...: path too long", run_dir);
    int fd = open(path, O_RDWR | O_CREAT | O_CLOEXEC | O_NOFOLLOW, 0644);
    if (fd < 0)
        return status_set(st, errno == ENOENT || errno == ENOTDIR || errno == ELOOP ? ST_INPUT : ST_RUNTIME,
                          "%s: cannot open the run folder's lock file: %s", path, strerror(errno));
    if (flock(fd, LOCK_EX | LOCK_NB) != 0) {
        int e = errno;
        if (e == EWOULDBLOCK) {
            char who[400];
            holder_text(fd, who, sizeof who);
            close(fd);
            return status_set(st, ST_INPUT,
                              "%s: in use by another framelaw process (%s); one command at a time per run folder: "
                              "wait for it to end or stop it", run_dir, who);
        }
        close(fd);
        return status_set(st, ST_RUNTIME, "%s: cannot lock: %s", path, strerror(e));
    }
    char host[256];
    if (gethostname(host, sizeof host) != 0) snprintf(host, sizeof host, "unknown");
    host[sizeof host - 1] = 0;
    for (char *p = host; *p; p++)
        if (*p == ' ' || *p == '\n') *p = '_';
    char line[400];
    int len = snprintf(line, sizeof line, "pid %ld host %s command %s\n", (long)getpid(), host, command);
    if (len > 0 && (size_t)len < sizeof line && (ftruncate(fd, 0) != 0 || pwrite(fd, line, (size_t)len, 0) != len)) {
        int e = errno;
        close(fd);
        return status_set(st, ST_RUNTIME, "%s: cannot write: %s", path, strerror(e));
    }
    l->fd = fd;
    /* no one else writes here now: the temporaries of interrupted writers can go */
    atomic_remove_stale(run_dir, NULL);
    DIR *d = opendir(run_dir);
    if (d) {
        struct dirent *e;
        while ((e = readdir(d))) {
            if (e->d_name[0] == '.' && (!e->d_name[1] || (e->d_name[1] == '.' && !e->d_name[2]))) continue;
            char sub[4400];
            struct stat sb;
            if (snprintf(sub, sizeof sub, "%s/%s", run_dir, e->d_name) < (int)sizeof sub && lstat(sub, &sb) == 0 &&
                S_ISDIR(sb.st_mode))
                atomic_remove_stale(sub, NULL);
        }
        closedir(d);
    }
    return 0;
}

void run_unlock(RunLock *l) {
    if (l->fd >= 0) close(l->fd); /* closing releases the lock */
    l->fd = -1;
}
