/* io/cli/cmd_sweep.c: `framelaw sweep FILE`: run the members of a sweep as child processes of this
 * program (/proc/self/exe train|resume), locally N at a time or one per Slurm array task; write the
 * Slurm batch script; write the summary. docs/sweeps.md describes it all. */
#define _GNU_SOURCE   /* sched_getaffinity, CPU_COUNT */
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <sched.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "io/cli/cli.h"
#include "io/fs/clock.h"
#include "io/sweep/sweep.h"

static const char *const STATE_NAMES[] = {"train", "resume", "finished"};

static int count_cores(void) {
    cpu_set_t set;
    CPU_ZERO(&set);
    if (sched_getaffinity(0, sizeof set, &set) == 0 && CPU_COUNT(&set) > 0) return CPU_COUNT(&set);
    long n = sysconf(_SC_NPROCESSORS_ONLN);
    return n > 0 ? (int)n : 1;
}

static void on_signal(int sig) { (void)sig; }

/* A member being run. */
typedef struct {
    int member;
    pid_t pid;
    double t0;
    MemberState how;
} Slot;

typedef struct {
    const Sweep *sw;
    int threads;
    int inherit_output;          /* --member: the child writes to our stdout / stderr */
    sigset_t orig_mask;
    int done, failed, stopped;   /* counts */
    int n_left;
} Runner;

/* The child's arguments: train <dir>/config.json | resume <dir>, with the sweep's thread count and,
 * on resume, every other resume-safe key of the member config (so a changed train.epochs continues
 * the run to the new length). */
enum { ARGS_MAX = 64 };
typedef struct {
    char *argv[ARGS_MAX];
    char text[ARGS_MAX][CFG_PATH_MAX / 4];
} Args;

static int build_args(const Sweep *sw, int i, MemberState how, int threads, Args *g, Status *st) {
    Config *c = malloc(sizeof *c);
    if (!c) return status_set(st, ST_RUNTIME, "out of memory");
    int rc = sweep_member_config(sw, i, c, st);
    if (rc) { free(c); return rc; }
    int k = 0, t = 0;
    g->argv[k++] = "framelaw";
    g->argv[k++] = how == MEMBER_NEW ? "train" : "resume";
    snprintf(g->text[t], sizeof g->text[t], "%s%s", sw->members[i].dir, how == MEMBER_NEW ? "/config.json" : "");
    g->argv[k++] = g->text[t++];
    snprintf(g->text[t], sizeof g->text[t], "train.threads=%d", threads);
    g->argv[k++] = "--set", g->argv[k++] = g->text[t++];
    if (how == MEMBER_RESUME) {
        char *json = config_to_json(c);
        cJSON *root = json ? cJSON_Parse(json) : NULL;
        free(json);
        if (!root) rc = status_set(st, ST_RUNTIME, "out of memory");
        for (int q = 0; !rc && config_resume_safe_keys[q]; q++) {
            const char *key = config_resume_safe_keys[q];
            if (!strcmp(key, "output") || !strcmp(key, "train.threads")) continue;
            char path[SWEEP_KEY_MAX];
            snprintf(path, sizeof path, "%s", key);
            const cJSON *v = root;
            for (char *part = path, *dot; v && part; part = dot ? dot + 1 : NULL) {
                dot = strchr(part, '.');
                if (dot) *dot = 0;
                v = cJSON_GetObjectItemCaseSensitive(v, part);
            }
            char *val = v ? cJSON_PrintUnformatted(v) : NULL;
            if (val && k + 2 < ARGS_MAX && t < ARGS_MAX &&
                snprintf(g->text[t], sizeof g->text[t], "%s=%s", key, val) < (int)sizeof g->text[t])
                g->argv[k++] = "--set", g->argv[k++] = g->text[t++];
            free(val);
        }
        cJSON_Delete(root);
    }
    g->argv[k] = NULL;
    free(c);
    return rc;
}

/* Start member i: its folder, its store, then fork + exec of this program. */
static int start_member(Runner *r, int i, MemberState how, Slot *slot, Status *st) {
    const Sweep *sw = r->sw;
    Args g;
    if (sweep_prepare_store(sw, i, st) || sweep_member_prepare(sw, i, how, r->threads, st) ||
        build_args(sw, i, how, r->threads, &g, st))
        return st->code;
    int out = -1, in = open("/dev/null", O_RDONLY | O_CLOEXEC);
    if (!r->inherit_output) {
        char p[CFG_PATH_MAX + 32];
        snprintf(p, sizeof p, "%s/console.log", sw->members[i].dir);
        out = open(p, O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC, 0644);
        if (out < 0) {
            int e = errno;
            if (in >= 0) close(in);
            return status_set(st, ST_RUNTIME, "%s: cannot open: %s", p, strerror(e));
        }
    }
    /* the command, first in the member's output */
    char cmd[2048];
    size_t len = 0;
    for (int k = 0; g.argv[k] && len < sizeof cmd; k++)
        len += (size_t)snprintf(cmd + len, sizeof cmd - len, "%s%s", k ? " " : "framelaw: sweep: running: ", g.argv[k]);
    if (len >= sizeof cmd) len = sizeof cmd - 1;
    FILE *log = out >= 0 ? fdopen(dup(out), "a") : NULL;
    fprintf(log ? log : stderr, "%.*s\n", (int)len, cmd);
    if (log) fclose(log);
    fflush(stdout);
    fflush(stderr);
    pid_t pid = fork();
    if (pid == 0) {   /* the child: only async-signal-safe calls until exec */
        sigprocmask(SIG_SETMASK, &r->orig_mask, NULL);
        if (in >= 0) dup2(in, 0);
        if (out >= 0) dup2(out, 1), dup2(out, 2);
        execv("/proc/self/exe", g.argv);
        static const char msg[] = "framelaw sweep: cannot run /proc/self/exe\n";
        ssize_t w = write(2, msg, sizeof msg - 1);
        (void)w;
        _exit(127);
    }
    int e = errno;
    if (in >= 0) close(in);
    if (out >= 0) close(out);
    if (pid < 0) return status_set(st, ST_RUNTIME, "fork: %s", strerror(e));
    slot->member = i;
    slot->pid = pid;
    slot->t0 = clock_seconds();
    slot->how = how;
    return 0;
}

/* Last non-empty line of a member's console.log, for a failure message. */
static void last_line(const char *dir, char *buf, size_t n) {
    char p[CFG_PATH_MAX + 32];
    snprintf(p, sizeof p, "%s/console.log", dir);
    buf[0] = 0;
    FILE *f = fopen(p, "r");
    if (!f) return;
    char line[1024];
    while (fgets(line, sizeof line, f)) {
        line[strcspn(line, "\r\n")] = 0;
        char *s = line;
        char *cr = strrchr(s, '\r');   /* progress lines on a terminal */
        if (cr) s = cr + 1;
        if (*s) snprintf(buf, n, "%.500s", s);
    }
    fclose(f);
}

static void print_counts(const Runner *r, int running) {
    if (r->failed) fprintf(stderr, "[%d done, %d running, %d left, %d failed]\n", r->done, running, r->n_left, r->failed);
    else fprintf(stderr, "[%d done, %d running, %d left]\n", r->done, running, r->n_left);
}

/* Runs the queue, at most `jobs` members at once. Returns 0 when every member finished, 1 when one
 * failed or a signal stopped the sweep (the messages are printed). */
static int run_queue(Runner *r, const int *queue, const MemberState *how, int n_queue, int jobs, const char *again) {
    const Sweep *sw = r->sw;
    Slot *slots = calloc((size_t)jobs, sizeof *slots);
    int *failed_list = calloc((size_t)(n_queue ? n_queue : 1), sizeof *failed_list);
    if (!slots || !failed_list) {
        free(slots);
        free(failed_list);
        return cli_error(1, "out of memory");
    }
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_signal;   /* handled (not ignored), so that a blocked signal stays pending */
    sigemptyset(&sa.sa_mask);
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
    sigaction(SIGCHLD, &sa, NULL);
    sigset_t set;
    sigemptyset(&set);
    sigaddset(&set, SIGINT);
    sigaddset(&set, SIGTERM);
    sigaddset(&set, SIGCHLD);
    sigprocmask(SIG_BLOCK, &set, &r->orig_mask);

    int next = 0, running = 0, stopping = 0, n_failed = 0, stop_sig = SIGINT;
    r->n_left = n_queue;
    double t_report = clock_seconds();
    for (;;) {
        while (!stopping && running < jobs && next < n_queue) {
            int i = queue[next], s = 0;
            MemberState h = how[next++];
            r->n_left--;
            while (slots[s].pid) s++;
            Status st;
            if (start_member(r, i, h, &slots[s], &st)) {
                fprintf(stderr, "framelaw: sweep: %s could not start: %s ", sw->members[i].id, st.msg);
                r->failed++;
                failed_list[n_failed++] = i;
                print_counts(r, running);
                continue;
            }
            running++;
            char label[400];
            sweep_member_label(sw, i, label, sizeof label);
            fprintf(stderr, "framelaw: sweep: %s %s (%s, %d thread%s) ", sw->members[i].id,
                    h == MEMBER_NEW ? "started" : "resumed", label, r->threads, r->threads == 1 ? "" : "s");
            print_counts(r, running);
        }
        if (running == 0 && (stopping || next >= n_queue)) break;
        struct timespec to = {1, 0};
        int sig = sigtimedwait(&set, NULL, &to);
        if (sig == SIGINT || sig == SIGTERM) {
            if (!stopping)
                fprintf(stderr, "\nframelaw: sweep: stopping: %d member%s writing %s checkpoint%s (no new ones start)\n",
                        running, running == 1 ? " is" : "s are", running == 1 ? "its" : "their", running == 1 ? "" : "s");
            stopping = 1;
            stop_sig = sig;
            for (int s = 0; s < jobs; s++)
                if (slots[s].pid) kill(slots[s].pid, SIGINT);
        }
        pid_t pid;
        int ws;
        while ((pid = waitpid(-1, &ws, WNOHANG)) > 0) {
            int s = 0;
            while (s < jobs && slots[s].pid != pid) s++;
            if (s == jobs) continue;
            int i = slots[s].member;
            slots[s].pid = 0;
            running--;
            int code = WIFEXITED(ws) ? WEXITSTATUS(ws) : 128 + WTERMSIG(ws);
            const char *dir = sw->members[i].dir;
            double secs = clock_seconds() - slots[s].t0;
            if (code == 0) {
                r->done++;
                SweepLog log;
                sweep_read_log(dir, &log);
                fprintf(stderr, "framelaw: sweep: %s finished in %.1f s: validation %.4g, %ld active terms ",
                        sw->members[i].id, secs, log.validation, log.active);
            } else if (stopping && (code == 1 || code == 128 + SIGINT || code == 128 + SIGTERM)) {
                r->stopped++;
                SweepLog log;
                sweep_read_log(dir, &log);
                fprintf(stderr, "framelaw: sweep: %s stopped after epoch %ld ", sw->members[i].id, log.epoch);
            } else {
                char why[600];
                if (r->inherit_output) snprintf(why, sizeof why, "see its output above");
                else last_line(dir, why, sizeof why);
                r->failed++;
                failed_list[n_failed++] = i;
                fprintf(stderr, "framelaw: sweep: %s failed (exit status %d): %s ", sw->members[i].id, code,
                        why[0] ? why : "(no output)");
            }
            print_counts(r, running);
        }
        if (running && clock_seconds() - t_report >= 60) {
            t_report = clock_seconds();
            fprintf(stderr, "framelaw: sweep: %d done, %d running, %d left:", r->done, running, r->n_left);
            for (int s = 0; s < jobs; s++) {
                if (!slots[s].pid) continue;
                SweepLog log;
                sweep_read_log(sw->members[slots[s].member].dir, &log);
                fprintf(stderr, " %s epoch %ld;", sw->members[slots[s].member].id, log.epoch);
            }
            fputc('\n', stderr);
        }
    }
    sigprocmask(SIG_SETMASK, &r->orig_mask, NULL);
    int rc = 0;
    if (stopping) {
        fprintf(stderr, "framelaw: sweep stopped: %d finished, %d stopped with their checkpoints, %d not started\n"
                        "framelaw: continue with: %s\n", r->done, r->stopped, r->n_left, again);
        rc = 128 + stop_sig; /* as shells expect of a process stopped by a signal */
    }
    if (n_failed) {
        fprintf(stderr, "framelaw: sweep: %d member%s failed:", n_failed, n_failed == 1 ? "" : "s");
        for (int k = 0; k < n_failed; k++)
            fprintf(stderr, " %s%s", sw->members[failed_list[k]].id, k + 1 < n_failed ? "," : "");
        fprintf(stderr, "%s\n", r->inherit_output ? "" : " (each folder's console.log says why)");
        rc = 1;
    }
    free(slots);
    free(failed_list);
    return rc;
}

static void print_summary(const Sweep *sw, const SweepSummary *sum, int max_rows) {
    printf("%-4s %-16s %-11s %-12s %5s %5s %5s  %s\n", "rank", "member", "status", "error", "terms", "front", "struct",
           "values");
    for (int k = 0; k < sum->n_rows && k < max_rows; k++) {
        const SweepRow *r = &sum->rows[k];
        char label[400], err[40] = "", terms[24] = "", strct[24] = "";
        sweep_member_label(sw, r->member, label, sizeof label);
        if (r->error_from != ERR_NONE)
            snprintf(err, sizeof err, "%.4g%s", r->error, r->error_from == ERR_VALIDATION ? " (v)" : "");
        if (r->active >= 0) snprintf(terms, sizeof terms, "%ld", r->active);
        if (r->structure >= 0) snprintf(strct, sizeof strct, "S%d", r->structure + 1);
        printf("%-4d %-16s %-11s %-12s %5s %5s %5s  %s\n", k + 1, sw->members[r->member].id, r->status, err, terms,
               r->pareto ? "*" : "", strct, label);
    }
    if (sum->n_rows > max_rows) printf("... %d more in summary.csv\n", sum->n_rows - max_rows);
    for (int g = 0; g < sum->n_groups && g < 5; g++)
        printf("S%d: %d member%s: %s\n", g + 1, sum->groups[g].count, sum->groups[g].count == 1 ? "" : "s",
               sum->groups[g].key);
    int by_val = 0;
    for (int k = 0; k < sum->n_rows; k++) by_val += sum->rows[k].error_from == ERR_VALIDATION;
    printf("%s*: Pareto front of error against active terms\nsummary: %s/summary.csv, %s/summary.html\n",
           by_val ? "(v): ranked by the last validation loss (no forecast.json); " : "", sw->output, sw->output);
}

static int write_and_print_summary(const Sweep *sw, int max_rows) {
    SweepSummary sum;
    Status st;
    if (sweep_write_summary(sw, &sum, &st)) return cli_error(st.code, "%s", st.msg);
    print_summary(sw, &sum, max_rows);
    sweep_summary_free(&sum);
    fflush(stdout);
    return 0;
}

/* Check every member's folder before anything starts; fill the states. */
static int member_states(const Sweep *sw, MemberState *states) {
    Status st;
    for (int i = 0; i < sw->n_members; i++)
        if (sweep_member_state(sw, i, &states[i], &st)) return cli_error(st.code, "%s: %s", sw->path, st.msg);
    return 0;
}

static int parse_index(const char *s, long *out) {
    if (!s || !*s) return -1;
    char *end;
    errno = 0;
    long v = strtol(s, &end, 10);
    if (errno || *end || v < 0) return -1;
    *out = v;
    return 0;
}

static void usage(void) {
    printf("usage: framelaw sweep SWEEP_FILE [--jobs N] [--threads T]\n"
           "       framelaw sweep SWEEP_FILE --member [I] [--threads T]\n"
           "       framelaw sweep SWEEP_FILE --slurm\n"
           "       framelaw sweep SWEEP_FILE --summary | --list\n\n"
           "Train every member of a sweep (a base config, the keys to vary with their values, random restarts;\n"
           "docs/sweeps.md). Each member runs in <output>/<member id>; a finished member is skipped, an\n"
           "interrupted one resumes from its checkpoint. At the end: summary.csv and summary.html.\n\n"
           "options (default in brackets):\n"
           "  --jobs N        members run at once on this machine                       [1]\n"
           "  --threads T     threads per member                     [max(1, cores / jobs)]\n"
           "  --member [I]    run member I only (grid order, from 0); without I, the index is\n"
           "                  $SLURM_ARRAY_TASK_ID; threads default to $SLURM_CPUS_PER_TASK  [off]\n"
           "  --slurm         write <output>/sweep.sbatch (one Slurm job array, one member per task)\n"
           "                  and print the sbatch command that submits it              [off]\n"
           "  --summary       write and print the summary of the results so far         [off]\n"
           "  --list          list the members: index, id, state, varied values         [off]\n"
           "  --help          this text\n\n"
           "exit status: 0 every member finished, 1 a member failed, 2 bad usage or a bad sweep file\n"
           "(nothing is started then), 130 stopped by Ctrl-C (143 by SIGTERM): every member writes its\n"
           "checkpoint; run the same command again to continue.\n");
}

int cmd_sweep(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        usage();
        return 0;
    }
    const char *file = NULL, *member_arg = NULL;
    int jobs = 1, threads = 0, mode = 0; /* 0 run, 1 member, 2 slurm, 3 summary, 4 list */
    int have_jobs = 0, operands = 0; /* after "--": SWEEP_FILE even when it starts with '-' */
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        long v;
        if (!operands && !strcmp(a, "--")) {
            operands = 1;
        } else if (operands) {
            if (file) return cli_error(2, "%s: one sweep file only", a);
            file = a;
        } else if (!strcmp(a, "--jobs") || !strcmp(a, "--threads")) {
            if (i + 1 >= argc || parse_index(argv[i + 1], &v) || v < 1 || v > 4096)
                return cli_error(2, "%s: needs a number from 1 to 4096", a);
            if (a[2] == 'j') jobs = (int)v, have_jobs = 1;
            else threads = (int)v;
            i++;
        } else if (!strcmp(a, "--member") || !strncmp(a, "--member=", 9)) {
            if (mode) return cli_error(2, "%s: give one of --member, --slurm, --summary, --list", a);
            mode = 1;
            if (a[8] == '=') member_arg = a + 9;
            else if (i + 1 < argc && parse_index(argv[i + 1], &v) == 0) member_arg = argv[++i];
        } else if (!strcmp(a, "--slurm") || !strcmp(a, "--summary") || !strcmp(a, "--list")) {
            if (mode) return cli_error(2, "%s: give one of --member, --slurm, --summary, --list", a);
            mode = a[3] == 'l' ? 2 : a[3] == 'u' ? 3 : 4;
        } else if (a[0] == '-') {
            return cli_error(2, "%s: unknown option (framelaw sweep --help)", a);
        } else if (file) {
            return cli_error(2, "%s: one sweep file only", a);
        } else {
            file = a;
        }
    }
    if (!file) return cli_error(2, "sweep: missing SWEEP_FILE (framelaw sweep --help)");
    if (have_jobs && mode) return cli_error(2, "--jobs: only for running the sweep on this machine");

    Sweep sw;
    Status st;
    if (sweep_load(&sw, file, &st)) return cli_error(st.code, "%s", st.msg);
    cli_note_old_terms(sw.base);
    int rc = 0;
    MemberState *states = calloc((size_t)sw.n_members, sizeof *states);
    int *queue = calloc((size_t)sw.n_members, sizeof *queue);
    MemberState *qhow = calloc((size_t)sw.n_members, sizeof *qhow);
    if (!states || !queue || !qhow) {
        rc = cli_error(1, "out of memory");
        goto out;
    }
    if (mode == 3) {
        rc = write_and_print_summary(&sw, 1 << 30);
        goto out;
    }
    if (mode != 1 && (rc = member_states(&sw, states))) goto out;

    if (mode == 4) {
        for (int i = 0; i < sw.n_members; i++) {
            char label[600];
            sweep_member_label(&sw, i, label, sizeof label);
            printf("%d %s %s %s\n", i, sw.members[i].id, STATE_NAMES[states[i]], label);
        }
        goto out;
    }
    if (mode == 2) {
        char exe[CFG_PATH_MAX], cwd[CFG_PATH_MAX], script[CFG_PATH_MAX + 32];
        ssize_t n = readlink("/proc/self/exe", exe, sizeof exe - 1);
        if (n <= 0 || !getcwd(cwd, sizeof cwd)) {
            rc = cli_error(1, "cannot find this program's path or the current folder: %s", strerror(errno));
            goto out;
        }
        exe[n] = 0;
        if (sweep_write_slurm(&sw, exe, cwd, script, sizeof script, &st)) {
            rc = cli_error(st.code, "%s", st.msg);
            goto out;
        }
        int fin = 0;
        for (int i = 0; i < sw.n_members; i++) fin += states[i] == MEMBER_DONE;
        printf("wrote %s: a job array of %d tasks (%d member%s finished already; their tasks end at once)\n"
               "submit with:\n  sbatch %s\n",
               script, sw.n_members, fin, fin == 1 ? "" : "s", script);
        goto out;
    }

    Runner r;
    memset(&r, 0, sizeof r);
    r.sw = &sw;
    char again[CFG_PATH_MAX + 128];
    if (mode == 1) {
        long idx;
        const char *src = member_arg ? member_arg : getenv("SLURM_ARRAY_TASK_ID");
        if (!src) {
            rc = cli_error(2, "--member: no index given and SLURM_ARRAY_TASK_ID is not set");
            goto out;
        }
        if (parse_index(src, &idx) || idx >= sw.n_members) {
            rc = cli_error(2, "--member %s%s: not a member index (the sweep has %d members: 0 to %d)", src,
                           member_arg ? "" : " (from SLURM_ARRAY_TASK_ID)", sw.n_members, sw.n_members - 1);
            goto out;
        }
        const char *slurm_cpus = getenv("SLURM_CPUS_PER_TASK");
        long sc;
        r.threads = threads ? threads : slurm_cpus && !parse_index(slurm_cpus, &sc) && sc > 0 ? (int)sc : count_cores();
        r.inherit_output = 1;
        int i = (int)idx;
        if (sweep_member_state(&sw, i, &states[i], &st)) {
            rc = cli_error(st.code, "%s: %s", sw.path, st.msg);
            goto out;
        }
        char label[600];
        sweep_member_label(&sw, i, label, sizeof label);
        if (states[i] == MEMBER_DONE) {
            fprintf(stderr, "framelaw: sweep: member %d (%s, %s) finished already\n", i, sw.members[i].id, label);
        } else {
            fprintf(stderr, "framelaw: sweep: member %d of %d: %s (%s): %s with %d thread%s in %s\n", i, sw.n_members,
                    sw.members[i].id, label, STATE_NAMES[states[i]], r.threads, r.threads == 1 ? "" : "s",
                    sw.members[i].dir);
            snprintf(again, sizeof again, "framelaw sweep %s --member %d (or submit the batch script again)", file, i);
            queue[0] = i;
            qhow[0] = states[i];
            rc = run_queue(&r, queue, qhow, 1, 1, again);
        }
        Status ss;
        if (sweep_write_summary(&sw, NULL, &ss)) fprintf(stderr, "framelaw: summary: %s\n", ss.msg);
        goto out;
    }

    /* a local run: members grouped by frame-store settings (a store is rebuilt once per group when
     * the groups share a source), in grid order inside a group */
    int n_queue = 0, n_done = 0, n_resume = 0;
    {
        char (*keys)[CFG_PATH_MAX + 128] = malloc((size_t)sw.n_members * sizeof *keys);
        Config *c = malloc(sizeof *c);
        int *group = calloc((size_t)sw.n_members, sizeof *group), n_groups = 0;
        if (!keys || !c || !group) {
            free(keys), free(c), free(group);
            rc = cli_error(1, "out of memory");
            goto out;
        }
        for (int i = 0; i < sw.n_members; i++) {
            sweep_member_config(&sw, i, c, &st);
            sweep_store_key(c, keys[i], sizeof keys[i]);
            int g = 0;
            while (g < i && strcmp(keys[g], keys[i])) g++;
            group[i] = g < i ? group[g] : n_groups++;
        }
        for (int g = 0; g < n_groups; g++)
            for (int i = 0; i < sw.n_members; i++) {
                if (group[i] != g) continue;
                if (states[i] == MEMBER_DONE) { n_done++; continue; }
                n_resume += states[i] == MEMBER_RESUME;
                qhow[n_queue] = states[i];
                queue[n_queue++] = i;
            }
        free(keys), free(c), free(group);
    }
    r.done = n_done;
    if (n_queue == 0) {
        fprintf(stderr, "framelaw: sweep: all %d members finished already\n", sw.n_members);
        rc = write_and_print_summary(&sw, 20);
        goto out;
    }
    if (jobs > n_queue) jobs = n_queue;
    int cores = count_cores();
    r.threads = threads ? threads : (cores / jobs > 1 ? cores / jobs : 1);
    fprintf(stderr, "framelaw: sweep %s: %d members (%d finished, %d to resume, %d to train); %d at a time, "
                    "%d thread%s each; folder %s\n", file, sw.n_members, n_done, n_resume, n_queue - n_resume, jobs,
            r.threads, r.threads == 1 ? "" : "s", sw.output);
    if (!threads && jobs * r.threads > cores)
        fprintf(stderr, "framelaw: sweep: note: %d jobs on %d cores\n", jobs, cores);
    snprintf(again, sizeof again, "framelaw sweep %s --jobs %d", file, jobs);
    rc = run_queue(&r, queue, qhow, n_queue, jobs, again);
    int rs = write_and_print_summary(&sw, 20);
    if (!rc) rc = rs;

out:
    free(states);
    free(queue);
    free(qhow);
    sweep_free(&sw);
    return rc;
}
