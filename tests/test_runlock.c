/* tests/test_runlock.c: one process per run folder. A second train, resume, export or forecast on a
 * folder in use exits 2 naming the holder's pid; the lock goes with the process, however it ends.
 * Common practice for exclusive access: flock(2) on a lock file (Linux man-pages, flock(2): a lock
 * belongs to an open file description and is released when the last descriptor to it is closed). */
#include <dirent.h>
#include <signal.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "io/run/runlock.h"
#include "nn/rng.h"
#include "tests/testutil.h"

/* In one process: a second lock on the same folder is refused (a new open file description) and
 * names this process; after unlocking it is granted; a folder that does not exist is ST_INPUT. */
static void test_lock_unit(void **state) {
    (void)state;
    char dir[256];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    RunLock a, b;
    Status st;
    assert_int_equal(run_lock(&a, dir, "train", &st), 0);
    assert_int_equal(run_lock(&b, dir, "export", &st), ST_INPUT);
    char pid[64];
    snprintf(pid, sizeof pid, "pid %ld on ", (long)getpid());
    assert_non_null(strstr(st.msg, dir));
    assert_non_null(strstr(st.msg, pid));
    assert_non_null(strstr(st.msg, "`framelaw train`"));
    assert_null(strchr(st.msg, '\n'));
    assert_int_equal(b.fd, -1);
    run_unlock(&a);
    assert_int_equal(run_lock(&b, dir, "export", &st), 0);
    run_unlock(&b);
    run_unlock(&b); /* twice is harmless */
    char missing[400];
    snprintf(missing, sizeof missing, "%s/no-such-run", dir);
    assert_int_equal(run_lock(&a, missing, "resume", &st), ST_INPUT);
    /* a killed holder leaves no lock behind */
    pid_t child = fork();
    assert_true(child >= 0);
    if (child == 0) {
        RunLock c;
        Status s2;
        if (run_lock(&c, dir, "train", &s2)) _exit(3);
        raise(SIGKILL);
    }
    int ws;
    assert_int_equal(waitpid(child, &ws, 0), child);
    assert_true(WIFSIGNALED(ws));
    assert_int_equal(run_lock(&a, dir, "resume", &st), 0);
    run_unlock(&a);
    test_rmtree(dir);
}

/* ---- through the program --------------------------------------------------------------------- */

enum { NCH = 8, NREC = 3, NT = 200 };

static void write_data(const char *data) {
    assert_int_equal(mkdir(data, 0777), 0);
    Rng r;
    rng_seed(&r, 3);
    double P[NCH][2];
    for (int c = 0; c < NCH; c++) P[c][0] = rng_normal(&r), P[c][1] = rng_normal(&r);
    for (int k = 0; k < NREC; k++) {
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

/* Whether the folder holds a finished checkpoint file (ckpt-*.ckpt). */
static int has_checkpoint(const char *ckdir) {
    DIR *d = opendir(ckdir);
    if (!d) return 0;
    int found = 0;
    struct dirent *e;
    while (!found && (e = readdir(d))) {
        size_t n = strlen(e->d_name);
        found = n > 10 && !strncmp(e->d_name, "ckpt-", 5) && !strcmp(e->d_name + n - 5, ".ckpt");
    }
    closedir(d);
    return found;
}

/* A first `framelaw train` that runs long; while it holds the folder, a second train of the same
 * config, a resume, an export and a forecast each exit 2 naming its pid, and change nothing: after
 * the first is stopped and resumed to the end, the log has each epoch once. */
static void test_second_command_refused(void **state) {
    (void)state;
    char dir[256], data[400], cfg[400], run[400], lockf[500], args[1400], out[8192];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(data, sizeof data, "%s/data", dir);
    snprintf(cfg, sizeof cfg, "%s/c.json", dir);
    snprintf(run, sizeof run, "%s/run", dir);
    snprintf(lockf, sizeof lockf, "%s/%s", run, RUNLOCK_NAME);
    write_data(data);
    FILE *f = fopen(cfg, "w");
    assert_non_null(f);
    fprintf(f,
            "{\"data\": {\"frames\": \"%s\", \"fps\": 30, \"derivative\": {\"method\": \"central\"}},\n"
            " \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [8], \"activation\": \"tanh\", \"init\": \"glorot\", "
            "\"derivatives\": \"frames\"},\n"
            " \"library\": {\"degree\": 1, \"trig\": false},\n"
            " \"train\": {\"batch\": 64, \"epochs\": 100000, \"threads\": 1, \"validate_every\": 5},\n"
            " \"threshold\": {\"select\": \"none\", \"every\": 5, \"refine_epochs\": 2},\n"
            " \"checkpoint\": {\"every\": 10, \"keep\": 2},\n"
            " \"output\": \"%s\"}\n",
            data, run);
    fclose(f);
    pid_t pid = test_spawn_quiet("train", cfg, "--quiet", (char *)NULL);
    /* wait until it holds the lock and has written a checkpoint (any: with keep 2 on a fast machine,
     * the one of epoch 10 can be gone before the first look) */
    char ckdir[600];
    snprintf(ckdir, sizeof ckdir, "%s/checkpoints", run);
    int seen = 0;
    for (int i = 0; i < 6000 && !(seen = has_checkpoint(ckdir)); i++) {
        struct timespec ts = {0, 10000000};
        nanosleep(&ts, NULL);
    }
    if (!seen) {
        kill(pid, SIGKILL);
        waitpid(pid, NULL, 0);
        fail_msg("no checkpoint in %s after 60 s of training", ckdir);
    }
    char holder[64];
    snprintf(holder, sizeof holder, "pid %ld on ", (long)pid);
    const char *cmds[] = {"train '%s' --quiet", "resume '%s' --quiet", "export '%s'", "forecast '%s'"};
    for (int k = 0; k < 4; k++) {
        char fmt_args[64];
        snprintf(fmt_args, sizeof fmt_args, "%s", cmds[k]);
        snprintf(args, sizeof args, fmt_args, k == 0 ? cfg : run);
        int rc = test_run_capture(args, out, sizeof out);
        if (rc != 2 || !strstr(out, holder) || !strstr(out, "in use by another framelaw process")) {
            kill(pid, SIGKILL);
            waitpid(pid, NULL, 0);
            fail_msg("`framelaw %s` while a train runs: exit %d, output:\n%s", args, rc, out);
        }
    }
    kill(pid, SIGINT); /* finishes the step, writes a checkpoint, exits 130 */
    int ws;
    assert_int_equal(waitpid(pid, &ws, 0), pid);
    assert_true(WIFEXITED(ws) && WEXITSTATUS(ws) == 128 + SIGINT);
    /* the folder is free again: a resume to a near end works, and every epoch is logged once */
    char logp[500];
    snprintf(logp, sizeof logp, "%s/log.csv", run);
    char *log = test_slurp(logp);
    assert_non_null(log);
    long last = 0;
    for (char *line = strchr(log, '\n'); line && line[1]; line = strchr(line + 1, '\n')) last = atol(line + 1);
    free(log);
    snprintf(args, sizeof args, "resume '%s' --set train.epochs=%ld --quiet", run, last + 3);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    log = test_slurp(logp);
    assert_non_null(log);
    long expect = 1;
    for (char *line = strchr(log, '\n'); line && line[1]; line = strchr(line + 1, '\n'))
        assert_int_equal(atol(line + 1), expect++);
    assert_int_equal(expect, last + 4);
    free(log);
    /* the finished run held by this process: the commands that rewrite its files are refused too */
    RunLock held;
    Status st;
    assert_int_equal(run_lock(&held, run, "test", &st), 0);
    snprintf(holder, sizeof holder, "pid %ld on ", (long)getpid());
    const char *later[] = {"ensemble", "canonical", "export", "forecast", "resume"};
    for (int k = 0; k < 5; k++) {
        snprintf(args, sizeof args, "%s '%s' --quiet", later[k], run);
        int rc = test_run_capture(args, out, sizeof out);
        if (rc != 2 || !strstr(out, holder) || !strstr(out, "`framelaw test`"))
            fail_msg("`framelaw %s` on a held run: exit %d, output:\n%s", args, rc, out);
    }
    run_unlock(&held);
    snprintf(args, sizeof args, "canonical '%s' --quiet", run);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    test_rmtree(dir);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_lock_unit),
        cmocka_unit_test(test_second_command_refused),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
