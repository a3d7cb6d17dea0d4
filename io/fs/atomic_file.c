/* io/fs/atomic_file.c: see atomic_file.h. */
#include "io/fs/atomic_file.h"

#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <stdatomic.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

/* ---- the table of open temporaries (for a signal handler) ----------------------------------------
 * Process-wide by necessity (DEVELOPERS.md, Conventions). A slot goes 0 (free) -> 1 (being filled)
 * -> 2 (a name the handler may unlink) -> 0; the name is dropped after the rename, so a signal in
 * between unlinks a name that no longer exists, which is harmless. */
enum { TMP_SLOTS = 64 };
static char tmp_names[TMP_SLOTS][4200];
static atomic_int tmp_state[TMP_SLOTS];

static int tmp_register(const char *name) {
    for (int i = 0; i < TMP_SLOTS; i++) {
        int free_ = 0;
        if (atomic_compare_exchange_strong(&tmp_state[i], &free_, 1)) {
            snprintf(tmp_names[i], sizeof tmp_names[i], "%s", name);
            atomic_store(&tmp_state[i], 2);
            return i;
        }
    }
    return -1; /* full: no clean-up on a signal, atomic_remove_stale still finds it later */
}

static void tmp_unregister(int slot) {
    if (slot >= 0) atomic_store(&tmp_state[slot], 0);
}

void atomic_remove_open_temporaries(void) {
    for (int i = 0; i < TMP_SLOTS; i++)
        if (atomic_load(&tmp_state[i]) == 2) unlink(tmp_names[i]);
}

static void on_signal(int sig) {
    int e = errno;
    atomic_remove_open_temporaries();
    errno = e;
    raise(sig); /* SA_RESETHAND: the default action now, so the process ends as it would have */
}

void atomic_cleanup_on_signals(void) {
    static const int sigs[] = {SIGINT, SIGTERM, SIGHUP, SIGQUIT};
    for (size_t i = 0; i < sizeof sigs / sizeof sigs[0]; i++) {
        struct sigaction old;
        if (sigaction(sigs[i], NULL, &old) == 0 && old.sa_handler == SIG_IGN) continue; /* nohup: keep ignoring */
        struct sigaction sa;
        memset(&sa, 0, sizeof sa);
        sa.sa_handler = on_signal;
        sa.sa_flags = SA_RESETHAND | SA_NODEFER;
        sigemptyset(&sa.sa_mask);
        sigaction(sigs[i], &sa, NULL);
    }
}

/* This host's name as it goes into a temporary's name: [A-Za-z0-9._] kept, others '_', at most 64. */
static void host_tag(char *out, size_t n) {
    char h[256];
    if (gethostname(h, sizeof h) != 0) snprintf(h, sizeof h, "host");
    h[sizeof h - 1] = 0;
    size_t k = 0;
    for (const char *p = h; *p && k + 1 < n && k < 64; p++) {
        char c = *p;
        int ok = (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '.' || c == '_';
        out[k++] = ok ? c : '_';
    }
    if (!k && n > 1) out[k++] = '_';
    out[k] = 0;
}

int atomic_remove_stale(const char *dir, const char *base) {
    DIR *d = opendir(dir);
    if (!d) return 0;
    char host[80];
    host_tag(host, sizeof host);
    size_t hl = strlen(host), bl = base ? strlen(base) : 0;
    int removed = 0;
    struct dirent *e;
    while ((e = readdir(d))) {
        const char *name = e->d_name, *t = strstr(name, ".tmp-");
        if (!t || (base && (t - name != (ptrdiff_t)bl || strncmp(name, base, bl)))) continue;
        while (strstr(t + 1, ".tmp-")) t = strstr(t + 1, ".tmp-"); /* the last: a target may contain ".tmp-" */
        /* ".tmp-" host "-" pid "-" 6 characters */
        const char *h = t + 5;
        if (strncmp(h, host, hl) || h[hl] != '-') continue;
        const char *p = h + hl + 1;
        char *end;
        errno = 0;
        long pid = strtol(p, &end, 10);
        if (errno || end == p || *p < '0' || *p > '9' || *end != '-' || strlen(end + 1) != 6 || pid <= 0) continue;
        if (pid == (long)getpid() || kill((pid_t)pid, 0) == 0 || errno != ESRCH) continue; /* its writer may live */
        char path[4400];
        if (snprintf(path, sizeof path, "%s/%s", dir, name) >= (int)sizeof path) continue;
        struct stat sb;
        if (lstat(path, &sb) != 0 || !S_ISREG(sb.st_mode)) continue;
        if (unlink(path) == 0) removed++;
    }
    closedir(d);
    return removed;
}

/* Forget the temporary (unlinking it first when `remove`). */
static void drop_tmp(AtomicFile *af, int remove) {
    if (remove && af->tmp[0]) unlink(af->tmp);
    tmp_unregister(af->slot);
    af->slot = -1;
    af->tmp[0] = 0;
}

int atomic_open(AtomicFile *af, const char *path, Status *st) {
    af->f = NULL;
    af->tmp[0] = 0;
    af->slot = -1;
    if (strlen(path) >= sizeof af->path)
        return status_set(st, ST_RUNTIME, "%.200s...: path too long", path);
    snprintf(af->path, sizeof af->path, "%s", path);
    char host[80];
    host_tag(host, sizeof host);
    /* Our own six random characters and O_EXCL (as mkstemp does), so that the name is listed for the
     * signal handler before the file exists: no signal can fall between its creation and its listing. */
    static atomic_ulong counter;
    static const char alnum[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789";
    int fd = -1, e = EEXIST;
    for (int attempt = 0; attempt < 100 && fd < 0 && e == EEXIST; attempt++) {
        struct timespec ts;
        clock_gettime(CLOCK_REALTIME, &ts);
        uint64_t x = (uint64_t)ts.tv_nsec * 0x9E3779B97F4A7C15ull ^ (uint64_t)ts.tv_sec ^
                     (uint64_t)atomic_fetch_add(&counter, 1) * 0xBF58476D1CE4E5B9ull ^ (uint64_t)getpid() << 32;
        char suffix[7];
        for (int i = 0; i < 6; i++, x /= 62) suffix[i] = alnum[x % 62];
        suffix[6] = 0;
        if (snprintf(af->tmp, sizeof af->tmp, "%s.tmp-%s-%ld-%s", path, host, (long)getpid(), suffix) >=
            (int)sizeof af->tmp) {
            af->tmp[0] = 0;
            return status_set(st, ST_RUNTIME, "%.200s...: path too long", path);
        }
        af->slot = tmp_register(af->tmp);
        fd = open(af->tmp, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
        e = errno;
        if (fd < 0) drop_tmp(af, 0);
    }
    if (fd < 0)
        return status_set(st, ST_RUNTIME, "%s: cannot create a temporary file beside it: %s", path, strerror(e));
    af->f = fdopen(fd, "wb");
    if (!af->f) {
        e = errno;
        close(fd);
        drop_tmp(af, 1);
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
    /* flush first: it retries the pending bytes, so errno tells why an earlier write failed too
     * (ENOSPC on a full disk, EFBIG past a file size limit) */
    int fl = fflush(af->f);
    int e = errno;
    int bad = fl != 0 || ferror(af->f);
    if (!bad && fsync(fileno(af->f)) != 0) bad = 1, e = errno;
    if (fclose(af->f) != 0 && !bad) bad = 1, e = errno;
    af->f = NULL;
    if (bad) {
        drop_tmp(af, 1);
        return status_set(st, ST_RUNTIME, "%s: write failed: %s", af->path, strerror(e));
    }
    if (rename(af->tmp, af->path) != 0) {
        e = errno;
        drop_tmp(af, 1);
        return status_set(st, ST_RUNTIME, "%s: rename from temporary failed: %s", af->path, strerror(e));
    }
    drop_tmp(af, 0);
    return fsync_parent_dir(af->path, st);
}

void atomic_abort(AtomicFile *af) {
    if (af->f) fclose(af->f);
    af->f = NULL;
    drop_tmp(af, 1);
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
