/* tests/test_leftovers.c: interrupted writes leave no temporary file. A handled signal (SIGINT,
 * SIGTERM) removes the temporaries being written at once; after a kill -9 the next command removes
 * those whose writer is gone (named with the writer's host and pid, io/fs/atomic_file.h), and never
 * one whose writer lives. Common practice for crash-safety tests: kill the process at arbitrary
 * points (here also at the points that matter: while the frame store is being written) and check
 * the state that the next run leaves. */
#include <dirent.h>
#include <signal.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "io/fs/atomic_file.h"
#include "nn/rng.h"
#include "tests/testutil.h"

/* Files in dir (and, when deep, its sub-folders) whose name contains ".tmp-"; the first in first. */
static int count_tmp(const char *dir, int deep, char *first, size_t n) {
    DIR *d = opendir(dir);
    if (!d) return 0;
    int count = 0;
    struct dirent *e;
    while ((e = readdir(d))) {
        if (!strcmp(e->d_name, ".") || !strcmp(e->d_name, "..")) continue;
        char p[1024];
        snprintf(p, sizeof p, "%s/%s", dir, e->d_name);
        struct stat sb;
        if (lstat(p, &sb) != 0) continue;
        if (S_ISDIR(sb.st_mode)) {
            if (deep) count += count_tmp(p, 1, count ? NULL : first, n);
        } else if (strstr(e->d_name, ".tmp-")) {
            if (!count && first) snprintf(first, n, "%.500s", p);
            count++;
        }
    }
    closedir(d);
    return count;
}

/* A child that opens an atomic file for path, writes a byte and ends without committing: the
 * temporary of a writer that is gone (as after a kill -9). */
static void leave_temporary(const char *path) {
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        AtomicFile af;
        Status st;
        if (atomic_open(&af, path, &st)) _exit(3);
        fputc('x', af.f);
        fflush(af.f);
        _exit(0);
    }
    int ws;
    assert_int_equal(waitpid(pid, &ws, 0), pid);
    assert_true(WIFEXITED(ws) && WEXITSTATUS(ws) == 0);
}

/* Stale temporaries go, the live ones (this process's, a running child's), another host's and
 * names that are not ours stay. */
static void test_remove_stale(void **state) {
    (void)state;
    char dir[256], path[400], p2[400];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/data.bin", dir);
    snprintf(p2, sizeof p2, "%s/other.bin", dir);
    leave_temporary(path);
    leave_temporary(p2);
    assert_int_equal(count_tmp(dir, 0, NULL, 0), 2);
    /* this process's open temporary */
    AtomicFile mine;
    Status st;
    assert_int_equal(atomic_open(&mine, path, &st), 0);
    /* a live child's: it opens one, says so through the pipe, and waits to be killed */
    int fds[2];
    assert_int_equal(pipe(fds), 0);
    pid_t child = fork();
    assert_true(child >= 0);
    if (child == 0) {
        AtomicFile af;
        Status s2;
        char c = atomic_open(&af, path, &s2) ? 'n' : 'y';
        if (write(fds[1], &c, 1) != 1) _exit(3);
        pause();
        _exit(0);
    }
    char c = 0;
    assert_int_equal(read(fds[0], &c, 1), 1);
    assert_int_equal(c, 'y');
    /* names of another host, of the old form without a pid, and not temporaries at all */
    char other[600];
    snprintf(other, sizeof other, "%s/data.bin.tmp-another.host-1-abcdef", dir);
    test_write_file(other, "x");
    snprintf(other, sizeof other, "%s/data.bin.tmp-abcdef", dir);
    test_write_file(other, "x");
    snprintf(other, sizeof other, "%s/data.bin", dir);
    test_write_file(other, "x");
    assert_int_equal(count_tmp(dir, 0, NULL, 0), 6);
    /* only data.bin's: the stale one */
    assert_int_equal(atomic_remove_stale(dir, "data.bin"), 1);
    assert_int_equal(count_tmp(dir, 0, NULL, 0), 5);
    /* any target: other.bin's stale one */
    assert_int_equal(atomic_remove_stale(dir, NULL), 1);
    assert_int_equal(count_tmp(dir, 0, NULL, 0), 4);
    /* the child killed: now its temporary is stale too */
    kill(child, SIGKILL);
    int ws;
    assert_int_equal(waitpid(child, &ws, 0), child);
    assert_int_equal(atomic_remove_stale(dir, NULL), 1);
    assert_int_equal(count_tmp(dir, 0, NULL, 0), 3);
    /* this process's own is still there and commits */
    fputs("done", mine.f);
    assert_int_equal(atomic_commit(&mine, &st), 0);
    assert_int_equal(count_tmp(dir, 0, NULL, 0), 2); /* another host's and the old form stay */
    char *text = test_slurp(path);
    assert_string_equal(text, "done");
    free(text);
    close(fds[0]);
    close(fds[1]);
    test_rmtree(dir);
}

/* A handled signal removes the temporaries this process has open, then the process dies of the
 * signal as it would have (the exit status a shell or a scheduler sees is unchanged). */
static void test_signal_removes_open_temporaries(void **state) {
    (void)state;
    char dir[256];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    int sigs[] = {SIGINT, SIGTERM, SIGHUP};
    for (int k = 0; k < 3; k++) {
        pid_t pid = fork();
        assert_true(pid >= 0);
        if (pid == 0) {
            /* a shell without job control starts background commands with SIGINT ignored, and an
             * ignored signal stays ignored (as under nohup): start from the default here */
            signal(sigs[k], SIG_DFL);
            atomic_cleanup_on_signals();
            AtomicFile a, b;
            Status st;
            char p[400];
            snprintf(p, sizeof p, "%s/a.bin", dir);
            if (atomic_open(&a, p, &st)) _exit(3);
            snprintf(p, sizeof p, "%s/b.bin", dir);
            if (atomic_open(&b, p, &st)) _exit(3);
            fputs("partial", a.f);
            fflush(a.f);
            raise(sigs[k]);
            _exit(4); /* not reached */
        }
        int ws;
        assert_int_equal(waitpid(pid, &ws, 0), pid);
        if (!WIFSIGNALED(ws) || WTERMSIG(ws) != sigs[k])
            fail_msg("signal %d: the process %s %d", sigs[k], WIFSIGNALED(ws) ? "died of signal" : "exited with",
                     WIFSIGNALED(ws) ? WTERMSIG(ws) : WEXITSTATUS(ws));
        char first[600] = "";
        if (count_tmp(dir, 0, first, sizeof first)) fail_msg("left %s after signal %d", first, sigs[k]);
    }
    /* an ignored signal stays ignored: the process goes on (and commits) */
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        signal(SIGHUP, SIG_IGN);
        atomic_cleanup_on_signals();
        AtomicFile a;
        Status st;
        char p[400];
        snprintf(p, sizeof p, "%s/c.bin", dir);
        if (atomic_open(&a, p, &st)) _exit(3);
        raise(SIGHUP);
        fputs("whole", a.f);
        _exit(atomic_commit(&a, &st) ? 5 : 0);
    }
    int ws;
    assert_int_equal(waitpid(pid, &ws, 0), pid);
    assert_true(WIFEXITED(ws) && WEXITSTATUS(ws) == 0);
    assert_int_equal(count_tmp(dir, 0, NULL, 0), 0);
    test_rmtree(dir);
}

/* ---- through the program --------------------------------------------------------------------- */

enum { NCH = 64, NREC = 4, NT = 3000 }; /* about a second of CSV parsing for the frame store */

static void write_data(const char *data) {
    assert_int_equal(mkdir(data, 0777), 0);
    Rng r;
    rng_seed(&r, 11);
    double P[NCH][2];
    for (int c = 0; c < NCH; c++) P[c][0] = rng_normal(&r), P[c][1] = rng_normal(&r);
    for (int k = 0; k < NREC; k++) { /* a linear oscillator seen through NCH channels */
        char path[512];
        snprintf(path, sizeof path, "%s/rec%d.csv", data, k);
        FILE *f = fopen(path, "w");
        assert_non_null(f);
        for (int i = 0; i < NT; i++) {
            double t = i / 30.0, z0 = sin(2 * t + k), z1 = cos(2 * t + k);
            for (int c = 0; c < NCH; c++) fprintf(f, "%s%.9g", c ? "," : "", P[c][0] * z0 + P[c][1] * z1);
            fputc('\n', f);
        }
        fclose(f);
    }
}

static void write_config(const char *path, const char *data, const char *out, int epochs) {
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fprintf(f,
            "{\"data\": {\"frames\": \"%s\", \"fps\": 30, \"derivative\": {\"method\": \"central\"}},\n"
            " \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [8], \"activation\": \"tanh\", \"init\": \"glorot\", "
            "\"derivatives\": \"frames\"},\n"
            " \"library\": {\"degree\": 1, \"trig\": false},\n"
            " \"train\": {\"batch\": 256, \"epochs\": %d, \"threads\": 1, \"validate_every\": 5},\n"
            " \"threshold\": {\"select\": \"none\", \"every\": 5, \"refine_epochs\": 2},\n"
            " \"checkpoint\": {\"every\": 1, \"keep\": 2},\n"
            " \"output\": \"%s\"}\n",
            data, epochs, out);
    fclose(f);
}

static pid_t spawn(const char *a1, const char *a2) {
    return test_spawn_quiet(a1, a2, "--quiet", (char *)NULL);
}

static int wait_status(pid_t pid) {
    int ws;
    assert_int_equal(waitpid(pid, &ws, 0), pid);
    return WIFEXITED(ws) ? WEXITSTATUS(ws) : 128 + WTERMSIG(ws);
}

/* Wait (at most 60 s) until dir holds a temporary; 1 when it did while pid ran. */
static int wait_for_tmp(const char *dir, pid_t pid) {
    for (int i = 0; i < 600000; i++) {
        if (count_tmp(dir, 0, NULL, 0)) return 1;
        if (waitpid(pid, NULL, WNOHANG) == pid) return -1; /* ended (and reaped) first */
        struct timespec ts = {0, 100000};
        nanosleep(&ts, NULL);
    }
    return 0;
}

/* Interrupted while the frame store is written: SIGTERM (handled: nothing left at once), then
 * kill -9 (the temporary stays until the next command); kill -9 at random moments of training and
 * export; a temporary left by a killed export. After the next successful command there is no
 * temporary anywhere in the frames folder or the run folder. */
static void test_kill_loop_leaves_nothing(void **state) {
    (void)state;
    char dir[256], data[400], cfg[400], run[400], first[600];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(data, sizeof data, "%s/data", dir);
    snprintf(cfg, sizeof cfg, "%s/c.json", dir);
    snprintf(run, sizeof run, "%s/run", dir);
    write_data(data);
    write_config(cfg, data, run, 40);
    /* SIGTERM while the store is being written: the handler removes the temporary */
    pid_t pid = spawn("train", cfg);
    assert_int_equal(wait_for_tmp(data, pid), 1);
    kill(pid, SIGTERM);
    assert_int_equal(wait_status(pid), 128 + SIGTERM);
    if (count_tmp(data, 0, first, sizeof first)) fail_msg("SIGTERM during the store build left %s", first);
    /* kill -9 while the store is being written: the temporary stays... */
    pid = spawn("train", cfg);
    assert_int_equal(wait_for_tmp(data, pid), 1);
    kill(pid, SIGKILL);
    assert_int_equal(wait_status(pid), 128 + SIGKILL);
    assert_int_equal(count_tmp(data, 0, NULL, 0), 1);
    /* ...until the next command that opens the store (here: killed at random moments later on) */
    Rng r;
    rng_seed(&r, (uint64_t)time(NULL));
    struct stat sb;
    char ck[500];
    snprintf(ck, sizeof ck, "%s/checkpoints", run);
    int rc = -1;
    for (int i = 0; i < 6 && rc != 0; i++) {
        pid = stat(ck, &sb) == 0 ? spawn("resume", run) : spawn("train", cfg);
        struct timespec ts = {0, (long)(50e6 + 400e6 * rng_uniform(&r))};
        nanosleep(&ts, NULL);
        kill(pid, SIGKILL);
        rc = wait_status(pid);
        assert_true(rc == 0 || rc == 128 + SIGKILL);
    }
    /* a killed export's temporary (a writer that is gone, on this host) */
    char traj[500];
    snprintf(traj, sizeof traj, "%s/trajectories", run);
    mkdir(traj, 0777);
    snprintf(traj, sizeof traj, "%s/trajectories/rec0.csv", run);
    leave_temporary(traj);
    /* the next successful command */
    pid = stat(ck, &sb) == 0 ? spawn("resume", run) : spawn("train", cfg);
    assert_int_equal(wait_status(pid), 0);
    if (count_tmp(data, 1, first, sizeof first)) fail_msg("left in the frames folder: %s", first);
    if (count_tmp(run, 1, first, sizeof first)) fail_msg("left in the run folder: %s", first);
    /* export alone, too, clears a dead writer's temporary */
    leave_temporary(traj);
    assert_int_equal(count_tmp(run, 1, NULL, 0), 1);
    assert_int_equal(wait_status(spawn("export", run)), 0);
    if (count_tmp(run, 1, first, sizeof first)) fail_msg("export left %s", first);
    test_rmtree(dir);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_remove_stale),
        cmocka_unit_test(test_signal_removes_open_temporaries),
        cmocka_unit_test(test_kill_loop_leaves_nothing),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
