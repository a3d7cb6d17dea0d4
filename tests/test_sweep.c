/* tests/test_sweep.c: parameter sweeps (io/sweep/sweep.h, `framelaw sweep`): grid order and member ids,
 * bad sweep files, the skip / resume decision on hand-made member folders, the summary's ranking,
 * Pareto marking and structure grouping on hand-made results, the Slurm batch script, and end to end
 * on tiny numeric recordings: members run two at a time, members (and plain runs) that start together
 * with no frame store yet, Ctrl-C and continuing. The Pareto front follows its common definition
 * (no other point is at least as good in both measures and better in one); the rest is our format. */
#include <dirent.h>
#include <fcntl.h>
#include <signal.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "io/run/config.h"
#include "io/data/store.h"
#include "io/sweep/sweep.h"
#include "nn/rng.h"
#include "tests/testutil.h"

enum { NCH = 16, NREC = 4, NT = 120 };

/* ---- files ----------------------------------------------------------------------------------- */

static void write_text(const char *path, const char *text) {
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs(text, f);
    fclose(f);
}

static int file_exists(const char *path) { return access(path, F_OK) == 0; }

static int count_of(const char *hay, const char *needle) {
    int n = 0;
    for (const char *p = strstr(hay, needle); p; p = strstr(p + 1, needle)) n++;
    return n;
}

static int count_lines(const char *text) {
    int n = 0;
    for (const char *p = text; *p; p++) n += *p == '\n';
    return n;
}

/* Recordings of a linear oscillator seen through 16 fixed channels, as CSV (as test_cmd_train). */
static void write_recordings(const char *dir) {
    assert_int_equal(mkdir(dir, 0777), 0);
    Rng r;
    rng_seed(&r, 5);
    double P[NCH][2];
    for (int c = 0; c < NCH; c++) P[c][0] = rng_normal(&r), P[c][1] = rng_normal(&r);
    for (int k = 0; k < NREC; k++) {
        char path[700];
        snprintf(path, sizeof path, "%s/rec%d.csv", dir, k);
        FILE *f = fopen(path, "w");
        assert_non_null(f);
        for (int i = 0; i < NT; i++) {
            double t = i / 30.0, a = 0.5 + 0.1 * k;
            double z0 = a * sin(2 * t + k), z1 = a * cos(2 * t + k);
            for (int c = 0; c < NCH; c++) fprintf(f, "%s%.9g", c ? "," : "", P[c][0] * z0 + P[c][1] * z1);
            fputc('\n', f);
        }
        fclose(f);
    }
}

/* A tiny run config over `data` (relative to the config's folder). */
static void write_base(const char *path, const char *data, long epochs) {
    char text[1200];
    snprintf(text, sizeof text,
             "{\"data\": {\"frames\": \"%s\", \"fps\": 30},\n"
             " \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [8], \"activation\": \"tanh\"},\n"
             " \"library\": {\"degree\": 1},\n"
             " \"train\": {\"batch\": 64, \"epochs\": %ld, \"validate_every\": 5},\n"
             " \"threshold\": {\"value\": 0.05, \"every\": 10, \"refine_epochs\": 10},\n"
             " \"checkpoint\": {\"every\": 10, \"keep\": 2}}\n",
             data, epochs);
    write_text(path, text);
}

typedef struct {
    char dir[256];
} Fixture;

static int setup(void **state) {
    Fixture *fx = calloc(1, sizeof *fx);
    assert_non_null(test_tmpdir(fx->dir, sizeof fx->dir));
    *state = fx;
    return 0;
}

static char start_dir[4096];   /* tests that chdir into their folder come back here */

static int teardown(void **state) {
    Fixture *fx = *state;
    if (chdir(start_dir) != 0) fprintf(stderr, "cannot go back to %s\n", start_dir);
    test_rmtree(fx->dir);
    free(fx);
    return 0;
}

/* A sweep file in the fixture folder; returns its path in buf. */
static const char *sweep_file(const Fixture *fx, const char *name, const char *text, char *buf, size_t n) {
    snprintf(buf, n, "%s/%s", fx->dir, name);
    write_text(buf, text);
    return buf;
}

/* ---- running the program --------------------------------------------------------------------- */

/* Start framelaw with args (NULL-terminated, without the program) in folder cwd, stdout and stderr
 * to files; env_name=env_value set when env_name is not NULL. */
static pid_t spawn_in(const char *cwd, const char *out_path, const char *env_name, const char *env_value,
                      const char *const *args) {
    char *argv[16];
    int k = 0;
    argv[k++] = (char *)test_framelaw();
    for (int i = 0; args[i] && k < 15; i++) argv[k++] = (char *)args[i];
    argv[k] = NULL;
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        if (cwd && chdir(cwd) != 0) _exit(126);
        if (env_name) setenv(env_name, env_value, 1);
        else unsetenv("SLURM_ARRAY_TASK_ID");
        FILE *o = freopen(out_path ? out_path : "/dev/null", "w", stdout);
        (void)o;
        if (dup2(fileno(stdout), 2) < 0) _exit(126);
        execv(argv[0], argv);
        _exit(127);
    }
    return pid;
}

static int wait_status(pid_t pid) {
    int ws;
    assert_int_equal(waitpid(pid, &ws, 0), pid);
    return WIFEXITED(ws) ? WEXITSTATUS(ws) : 128 + WTERMSIG(ws);
}

static int run_in(const char *cwd, const char *out_path, const char *const *args) {
    return wait_status(spawn_in(cwd, out_path, NULL, NULL, args));
}

/* The framelaw binary as an absolute path (children change folder). */
static void absolute_framelaw(void) {
    static char abs[4096];
    if (test_framelaw()[0] == '/') return;
    assert_non_null(realpath(test_framelaw(), abs));
    setenv("FRAMELAW", abs, 1);
}

/* Files in dir whose names contain part. */
static int count_names(const char *dir, const char *part) {
    DIR *d = opendir(dir);
    assert_non_null(d);
    int n = 0;
    for (struct dirent *e; (e = readdir(d));) n += strstr(e->d_name, part) != NULL;
    closedir(d);
    return n;
}

/* ---- grid and ids ---------------------------------------------------------------------------- */

/* The grid: keys in file order, the last key fastest, restarts innermost; seeds = base seed + r. */
static void test_grid_order_and_ids(void **state) {
    Fixture *fx = *state;
    char base[400], f[400];
    snprintf(base, sizeof base, "%s/base.json", fx->dir);
    write_base(base, "data", 40);
    sweep_file(fx, "grid.json",
               "{\"base\": \"base.json\", \"vary\": {\"loss.dx\": [0.1, 0.01], \"model.encoder\": [[8], [4, 4], [2]]},\n"
               " \"restarts\": 2, \"output\": \"out/grid\"}",
               f, sizeof f);
    Sweep sw;
    Status st;
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    assert_int_equal(sw.n_members, 12);
    assert_int_equal(sw.n_axes, 2);
    assert_string_equal(sw.axes[0].key, "loss.dx");
    static const char *const want[12] = {
        "loss.dx=0.1, model.encoder=[8], train.seed=1",     "loss.dx=0.1, model.encoder=[8], train.seed=2",
        "loss.dx=0.1, model.encoder=[4,4], train.seed=1",   "loss.dx=0.1, model.encoder=[4,4], train.seed=2",
        "loss.dx=0.1, model.encoder=[2], train.seed=1",     "loss.dx=0.1, model.encoder=[2], train.seed=2",
        "loss.dx=0.01, model.encoder=[8], train.seed=1",    "loss.dx=0.01, model.encoder=[8], train.seed=2",
        "loss.dx=0.01, model.encoder=[4,4], train.seed=1",  "loss.dx=0.01, model.encoder=[4,4], train.seed=2",
        "loss.dx=0.01, model.encoder=[2], train.seed=1",    "loss.dx=0.01, model.encoder=[2], train.seed=2"};
    Config *c = malloc(sizeof *c);
    for (int i = 0; i < 12; i++) {
        char label[300], prefix[16], dir[300];
        sweep_member_label(&sw, i, label, sizeof label);
        assert_string_equal(label, want[i]);
        snprintf(prefix, sizeof prefix, "m%04d-", i);
        assert_memory_equal(sw.members[i].id, prefix, 6);
        assert_int_equal(strlen(sw.members[i].id), 14);
        for (int j = 0; j < i; j++) assert_string_not_equal(sw.members[i].id + 6, sw.members[j].id + 6);
        snprintf(dir, sizeof dir, "out/grid/%s", sw.members[i].id);
        assert_string_equal(sw.members[i].dir, dir);
        /* the resolved config carries the values */
        assert_int_equal(sweep_member_config(&sw, i, c, &st), 0);
        assert_close(c->w_dx, i < 6 ? 0.1 : 0.01, 0, 1e-15);
        assert_int_equal((int)c->seed, 1 + i % 2);
        assert_int_equal(c->n_encoder, (i / 2) % 3 == 1 ? 2 : 1);
        assert_string_equal(c->output, dir);
        assert_int_equal(c->epochs, 40);
        assert_int_equal(c->frames[0], '/');   /* resolved against the base config's folder */
    }
    free(c);

    /* reading the same file again gives the same ids */
    Sweep again;
    assert_int_equal(sweep_load(&again, f, &st), 0);
    for (int i = 0; i < 12; i++) assert_string_equal(again.members[i].id, sw.members[i].id);
    sweep_free(&again);

    /* a longer list moves indices but not the hash of an unchanged member; a value written
     * differently but equal as JSON (1e-2 = 0.01) hashes the same */
    sweep_file(fx, "grid2.json",
               "{\"base\": \"base.json\", \"vary\": {\"loss.dx\": [0.5, 0.1, 1e-2], \"model.encoder\": [[8], [4, 4], [2]]},\n"
               " \"restarts\": 2, \"output\": \"out/grid\"}",
               f, sizeof f);
    assert_int_equal(sweep_load(&again, f, &st), 0);
    assert_int_equal(again.n_members, 18);
    for (int i = 0; i < 12; i++) assert_string_equal(again.members[i + 6].id + 6, sw.members[i].id + 6);
    assert_memory_equal(again.members[6].id, "m0006-", 6);
    sweep_free(&again);
    sweep_free(&sw);
}

/* Listed seeds, an inline base whose relative data.frames is relative to the sweep file, the default
 * output, and a varied data.frames resolved the same way. */
static void test_seeds_inline_base_and_paths(void **state) {
    Fixture *fx = *state;
    char f[400];
    sweep_file(fx, "inline.json",
               "{\"base\": {\"data\": {\"frames\": \"recs\"}, \"train\": {\"epochs\": 30, \"seed\": 4},\n"
               "          \"threshold\": {\"refine_epochs\": 5}},\n"
               " \"vary\": {\"data.frames\": [\"recs\", \"/abs/recs\"]}, \"seeds\": [7, 3]}",
               f, sizeof f);
    Sweep sw;
    Status st;
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    assert_int_equal(sw.n_members, 4);
    assert_string_equal(sw.output, "sweeps/inline");
    Config *c = malloc(sizeof *c);
    char want[4200];
    snprintf(want, sizeof want, "%s/recs", sw.dir);
    for (int i = 0; i < 4; i++) {
        assert_int_equal(sweep_member_config(&sw, i, c, &st), 0);
        assert_int_equal((int)c->seed, i % 2 ? 3 : 7);
        assert_string_equal(c->frames, i < 2 ? want : "/abs/recs");
        assert_int_equal(c->epochs, 30);
    }
    char label[200];
    sweep_member_label(&sw, 3, label, sizeof label);
    assert_string_equal(label, "data.frames=/abs/recs, train.seed=3");
    free(c);
    sweep_free(&sw);
    /* no vary and no restarts: one member, the base config itself, seed from the base */
    sweep_file(fx, "single.json", "{\"base\": {\"data\": {\"frames\": \"recs\"}, \"train\": {\"seed\": 9}}}", f, sizeof f);
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    assert_int_equal(sw.n_members, 1);
    sweep_member_label(&sw, 0, label, sizeof label);
    assert_string_equal(label, "the base config");
    assert_int_equal((int)sw.members[0].seed, 9);
    sweep_free(&sw);
}

/* The example in configs/ (and docs/sweeps.md) loads: 2 x 2 values, 3 restarts. */
static void test_example_sweep_loads(void **state) {
    (void)state;
    char p[4200];
    snprintf(p, sizeof p, "%s/configs/sweep-example.json", start_dir);
    Sweep sw;
    Status st;
    if (sweep_load(&sw, p, &st)) fail_msg("%s", st.msg);
    assert_int_equal(sw.n_members, 12);
    assert_string_equal(sw.slurm.partition, "debug");
    assert_int_equal(sw.slurm.cpus_per_task, 2);
    sweep_free(&sw);
}

/* ---- bad sweep files ------------------------------------------------------------------------- */

static void test_bad_sweep_files(void **state) {
    Fixture *fx = *state;
    char base[400];
    snprintf(base, sizeof base, "%s/base.json", fx->dir);
    write_base(base, "data", 40);
    static const struct {
        const char *text;
        const char *want[3];
    } cases[] = {
        {"{\"base\": \"base.json\", \"vary\": {\"modle.latent\": [1, 2]}}",
         {"member m0000-", "modle.latent: unknown key", "did you mean model.latent"}},
        {"{\"base\": \"base.json\", \"vary\": {\"loss.dx\": []}}", {"vary.loss.dx: empty list"}},
        {"{\"base\": \"base.json\", \"vary\": {\"threshold.refine_epochs\": [5, 50]}}",
         {"member m0001-", "threshold.refine_epochs=50", "must be less than train.epochs"}},
        {"{\"base\": \"base.json\", \"vary\": {\"loss.dx\": [0.1, -1]}}",
         {"member m0001-", "(loss.dx=-1)", "loss.dx: must be a number >= 0"}},
        {"{\"base\": \"base.json\", \"vary\": {\"model.activation\": [\"tanh\", \"relu\"]}}",
         {"member m0001-", "model.activation", "must be one of"}},
        {"{\"base\": \"base.json\", \"vary\": {\"loss.dx\": 0.1}}", {"vary.loss.dx: must be a list"}},
        {"{\"base\": \"base.json\", \"vary\": {\"loss.dx\": [0.1, 0.1]}}", {"vary.loss.dx", "listed twice"}},
        {"{\"base\": \"base.json\", \"vary\": [\"loss.dx\"]}", {"vary: must be an object"}},
        {"{\"base\": \"base.json\", \"restarts\": 0}", {"restarts: must be an integer"}},
        {"{\"base\": \"base.json\", \"restarts\": 2, \"seeds\": [1]}", {"restarts and seeds"}},
        {"{\"base\": \"base.json\", \"seeds\": [3, 3]}", {"seeds[1]", "listed twice"}},
        {"{\"base\": \"base.json\", \"restarts\": 2, \"vary\": {\"train.seed\": [1, 2]}}", {"vary.train.seed"}},
        {"{\"base\": \"base.json\", \"vary\": {\"output\": [\"a\"]}}", {"vary.output: set by the sweep"}},
        {"{\"base\": \"base.json\", \"vary\": {\"train.threads\": [1]}}", {"vary.train.threads: set by the sweep"}},
        {"{\"vary\": {\"loss.dx\": [1]}}", {"base: missing"}},
        {"{\"base\": \"nope.json\"}", {"base:", "nope.json"}},
        {"{\"base\": 3}", {"base: must be a path"}},
        {"{\"base\": {\"data\": {\"frames\": \"d\"}, \"loss\": {\"dx\": \"big\"}}}", {"base", "loss.dx"}},
        {"{\"base\": {\"train\": {\"epochs\": 5, \"refine_epochs\": 1}}}", {"base", "train.refine_epochs"}},
        {"{\"base\": {\"train\": {\"epochs\": 5}, \"threshold\": {\"refine_epochs\": 1}}}",
         {"member m0000-", "data.frames: required"}},
        {"{\"base\": \"base.json\", \"colour\": 1}", {"colour: unknown key"}},
        {"{\"base\": \"base.json\", \"base\": \"base.json\"}", {"base: given twice"}},
        {"{\"base\": \"base.json\",\n \"vary\": {\"loss.dx\": [1,]}}", {"line 2", "malformed JSON"}},
        {"[1, 2]", {"top level must be a JSON object"}},
        {"{\"base\": \"base.json\", \"restarts\": 02}", {"line 1, column 36", "leading zero"}},
        {"{\"base\": \"base.json\", \"output\": \"\"}", {"output: must be a non-empty path"}},
        {"{\"base\": \"base.json\", \"slurm\": {\"cpus\": 2}}", {"slurm.cpus: unknown key"}},
        {"{\"base\": \"base.json\", \"slurm\": {\"cpus_per_task\": 0}}", {"slurm.cpus_per_task"}},
        {"{\"base\": \"base.json\", \"slurm\": {\"time\": \"1:00\\n#SBATCH --x\"}}", {"slurm.time"}},
        {"{\"base\": \"base.json\", \"slurm\": {\"sbatch\": [\"--a\\nb\"]}}", {"slurm.sbatch[0]"}},
    };
    char f[400];
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        sweep_file(fx, "bad.json", cases[k].text, f, sizeof f);
        Sweep sw;
        Status st;
        int rc = sweep_load(&sw, f, &st);
        if (rc != ST_INPUT) fail_msg("case %zu (%s): status %d, expected 2", k, cases[k].text, rc);
        if (!strstr(st.msg, "bad.json")) fail_msg("case %zu: message does not name the file: %s", k, st.msg);
        for (int j = 0; j < 3 && cases[k].want[j]; j++)
            if (!strstr(st.msg, cases[k].want[j]))
                fail_msg("case %zu (%s): message lacks \"%s\": %s", k, cases[k].text, cases[k].want[j], st.msg);
        assert_int_equal(sw.n_members, 0);
        sweep_free(&sw);
    }
}

/* The command: a bad sweep exits 2 with the message and creates nothing. */
static void test_bad_sweep_command_starts_nothing(void **state) {
    Fixture *fx = *state;
    absolute_framelaw();
    char base[400], f[400], out[400];
    snprintf(base, sizeof base, "%s/base.json", fx->dir);
    write_base(base, "data", 40);
    sweep_file(fx, "bad.json", "{\"base\": \"base.json\", \"vary\": {\"loss.dx\": [0.1, -1]}, \"output\": \"o\"}", f, sizeof f);
    snprintf(out, sizeof out, "%s/stderr.txt", fx->dir);
    const char *const a1[] = {"sweep", "bad.json", "--jobs", "2", NULL};
    assert_int_equal(run_in(fx->dir, out, a1), 2);
    char *msg = test_slurp(out);
    assert_non_null(strstr(msg, "member m0001-"));
    assert_non_null(strstr(msg, "loss.dx"));
    free(msg);
    char o[420];
    snprintf(o, sizeof o, "%s/o", fx->dir);
    assert_false(file_exists(o));
    const char *const a2[] = {"sweep", "bad.json", "--slurm", NULL};
    assert_int_equal(run_in(fx->dir, NULL, a2), 2);
    assert_false(file_exists(o));
    const char *const a3[] = {"sweep", "--jobs", "0", "bad.json", NULL};
    assert_int_equal(run_in(fx->dir, NULL, a3), 2);
    const char *const a4[] = {"sweep", NULL};
    assert_int_equal(run_in(fx->dir, NULL, a4), 2);
}

/* ---- member folders: skip, resume, start --------------------------------------------------- */

static void write_log(const char *dir, long last_epoch, double validation) {
    char p[600];
    snprintf(p, sizeof p, "%s/log.csv", dir);
    FILE *f = fopen(p, "w");
    assert_non_null(f);
    fprintf(f, "epoch,phase,lr,loss,reconstruction,dx,dz,l1,active,validation,seconds,epoch_seconds\n");
    for (long e = 1; e <= last_epoch; e++) {
        fprintf(f, "%ld,train,0.001,%.6g,%.6g,0.5,0.25,0.1,4,", e, 1.0 / e, 0.5 / e);
        if (e % 5 == 0 || e == last_epoch) fprintf(f, "%.6g", validation + 1.0 / e);
        fprintf(f, ",%.3f,0.001\n", e * 0.001);
    }
    fclose(f);
}

static void make_dir(const char *parent, const char *name) {
    char p[600];
    snprintf(p, sizeof p, "%s/%s", parent, name);
    assert_int_equal(mkdir(p, 0777), 0);
}

/* equations.json of a first-order model with 2 latent variables, library degree 1 (terms 1, z1,
 * z2); xi (3, 2) row-major (term, equation), zero = inactive. */
static void write_equations(const char *dir, const double xi[6]) {
    char p[600], text[2000];
    int act[2] = {0, 0};
    for (int t = 0; t < 3; t++)
        for (int j = 0; j < 2; j++) act[j] += xi[t * 2 + j] != 0;
    snprintf(text, sizeof text,
             "{\"format\": \"framelaw-equations\", \"version\": 2, \"order\": 1, \"n_latent\": 2, \"digits\": 4,\n"
             " \"library\": {\"constant\": true, \"degree\": 1, \"trig\": false, \"trig_velocity\": true,\n"
             "             \"multipliers\": [1], \"include\": [], \"exclude\": []},\n"
             " \"variables\": [\"z1\", \"z2\"], \"terms\": [\"1\", \"z1\", \"z2\"],\n"
             " \"equations\": [\n"
             "  {\"lhs\": \"dz1/dt\", \"coefficients\": [%g, %g, %g], \"mask\": [%d, %d, %d], \"active\": %d, \"text\": \"\", \"latex\": \"\"},\n"
             "  {\"lhs\": \"dz2/dt\", \"coefficients\": [%g, %g, %g], \"mask\": [%d, %d, %d], \"active\": %d, \"text\": \"\", \"latex\": \"\"}]}\n",
             xi[0], xi[2], xi[4], xi[0] != 0, xi[2] != 0, xi[4] != 0, act[0], xi[1], xi[3], xi[5], xi[1] != 0,
             xi[3] != 0, xi[5] != 0, act[1]);
    snprintf(p, sizeof p, "%s/equations.json", dir);
    write_text(p, text);
    snprintf(p, sizeof p, "%s/equations.txt", dir);
    write_text(p, "dz1/dt = 2*z2\ndz2/dt = -2*z1\n");
}

/* equations.json of a first-order model with 2 latent variables and a degree-2 library (terms 1, z1,
 * z2, z1^2, z1*z2, z2^2) in format version 1 (before '*': "frequencies", "z1 z2") or 2; xi (6, 2)
 * row-major (term, equation), zero = inactive. */
static void write_equations_quadratic(const char *dir, int version, const double xi[12]) {
    char p[600], text[3000], co[2][200], ma[2][100];
    int act[2] = {0, 0};
    for (int j = 0; j < 2; j++) {
        int c = 0, m = 0;
        for (int t = 0; t < 6; t++) {
            c += snprintf(co[j] + c, sizeof co[j] - (size_t)c, "%s%g", t ? ", " : "", xi[t * 2 + j]);
            m += snprintf(ma[j] + m, sizeof ma[j] - (size_t)m, "%s%d", t ? ", " : "", xi[t * 2 + j] != 0);
            act[j] += xi[t * 2 + j] != 0;
        }
    }
    snprintf(text, sizeof text,
             "{\"format\": \"framelaw-equations\", \"version\": %d, \"order\": 1, \"n_latent\": 2, \"digits\": 4,\n"
             " \"library\": {\"constant\": true, \"degree\": 2, \"trig\": false, \"trig_velocity\": true,\n"
             "             \"%s\": [1], \"include\": [], \"exclude\": []},\n"
             " \"variables\": [\"z1\", \"z2\"], \"terms\": [\"1\", \"z1\", \"z2\", \"z1^2\", \"%s\", \"z2^2\"],\n"
             " \"equations\": [\n"
             "  {\"lhs\": \"dz1/dt\", \"coefficients\": [%s], \"mask\": [%s], \"active\": %d, \"text\": \"\", \"latex\": \"\"},\n"
             "  {\"lhs\": \"dz2/dt\", \"coefficients\": [%s], \"mask\": [%s], \"active\": %d, \"text\": \"\", \"latex\": \"\"}]}\n",
             version, version == 1 ? "frequencies" : "multipliers", version == 1 ? "z1 z2" : "z1*z2", co[0], ma[0],
             act[0], co[1], ma[1], act[1]);
    snprintf(p, sizeof p, "%s/equations.json", dir);
    write_text(p, text);
}

static void write_forecast(const char *dir, const double *mean_error, int n) {
    char p[600], text[2000];
    int k = snprintf(text, sizeof text, "{\"format\": \"framelaw-forecast\", \"version\": 1, \"bound\": 0.1, \"recordings\": [");
    for (int i = 0; i < n; i++)
        k += snprintf(text + k, sizeof text - (size_t)k, "%s{\"name\": \"rec%d\", \"frames\": 100, \"mean_error\": %g}",
                      i ? ", " : "", i, mean_error[i]);
    snprintf(text + k, sizeof text - (size_t)k, "]}\n");
    snprintf(p, sizeof p, "%s/forecast.json", dir);
    write_text(p, text);
}

static void test_member_states(void **state) {
    Fixture *fx = *state;
    char base[400], f[400];
    snprintf(base, sizeof base, "%s/base.json", fx->dir);
    write_base(base, "data", 40);
    sweep_file(fx, "states.json", "{\"base\": \"base.json\", \"restarts\": 5, \"output\": \"sw\"}", f, sizeof f);
    assert_int_equal(chdir(fx->dir), 0);   /* output is relative to the current folder */
    Sweep sw;
    Status st;
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    MemberState s;
    for (int i = 0; i < 5; i++) {
        assert_int_equal(sweep_member_state(&sw, i, &s, &st), 0);
        assert_int_equal(s, MEMBER_NEW);
    }
    const double xi[6] = {0, 0, 0, -2, 2, 0};
    /* m0: finished (equations.json, log up to train.epochs) -> skipped */
    assert_int_equal(sweep_member_prepare(&sw, 0, MEMBER_NEW, 3, &st), 0);
    write_log(sw.members[0].dir, 40, 0.1);
    write_equations(sw.members[0].dir, xi);
    make_dir(sw.members[0].dir, "checkpoints");
    /* m1: interrupted (checkpoints/, log at epoch 20) -> resume */
    assert_int_equal(sweep_member_prepare(&sw, 1, MEMBER_NEW, 1, &st), 0);
    write_log(sw.members[1].dir, 20, 0.1);
    make_dir(sw.members[1].dir, "checkpoints");
    /* m2: folder and config, killed before its first checkpoint -> train again */
    assert_int_equal(sweep_member_prepare(&sw, 2, MEMBER_NEW, 1, &st), 0);
    write_log(sw.members[2].dir, 3, 0.1);
    /* m3: equations of an earlier, shorter run (log at 30 < 40) and checkpoints -> resume */
    assert_int_equal(sweep_member_prepare(&sw, 3, MEMBER_NEW, 1, &st), 0);
    write_log(sw.members[3].dir, 30, 0.1);
    write_equations(sw.members[3].dir, xi);
    make_dir(sw.members[3].dir, "checkpoints");
    static const MemberState want[5] = {MEMBER_DONE, MEMBER_RESUME, MEMBER_NEW, MEMBER_RESUME, MEMBER_NEW};
    for (int i = 0; i < 5; i++) {
        assert_int_equal(sweep_member_state(&sw, i, &s, &st), 0);
        if (s != want[i]) fail_msg("member %d: state %d, expected %d", i, s, want[i]);
    }
    /* the written config is the member's, with the sweep's thread count */
    char p[600];
    snprintf(p, sizeof p, "%s/config.json", sw.members[0].dir);
    Config *c = malloc(sizeof *c);
    assert_int_equal(config_load(c, p, &st), 0);
    assert_int_equal(c->threads, 3);
    assert_int_equal((int)c->seed, 1);
    assert_string_equal(c->output, sw.members[0].dir);
    /* a folder that holds a run of another config: an error naming the member, before anything */
    c->lr = 0.5;
    char *json = config_to_json(c);
    snprintf(p, sizeof p, "%s/config.json", sw.members[4].dir);
    assert_int_equal(mkdir(sw.members[4].dir, 0777), 0);
    write_text(p, json);
    free(json);
    free(c);
    assert_int_equal(sweep_member_state(&sw, 4, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, sw.members[4].id));
    assert_non_null(strstr(st.msg, "another config"));
    sweep_free(&sw);
    /* train.epochs raised in the sweep: the finished member is resumed to the new length */
    write_base(base, "data", 60);
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    assert_int_equal(sweep_member_state(&sw, 0, &s, &st), 0);
    assert_int_equal(s, MEMBER_RESUME);
    sweep_free(&sw);
}

/* ---- the summary ----------------------------------------------------------------------------- */

static void test_summary_ranking_pareto_groups(void **state) {
    Fixture *fx = *state;
    char base[400], f[400];
    snprintf(base, sizeof base, "%s/base.json", fx->dir);
    write_base(base, "data", 40);
    sweep_file(fx, "sum.json", "{\"base\": \"base.json\", \"vary\": {\"loss.dz\": [1, 0.5, 0.25]}, \"restarts\": 2, \"output\": \"sum\"}",
               f, sizeof f);
    assert_int_equal(chdir(fx->dir), 0);
    Sweep sw;
    Status st;
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    assert_int_equal(sw.n_members, 6);
    /* structures, xi (term, equation): A = dz1: z2 | dz2: z1; B = all of z1, z2 in both;
     * C = dz1: z2 | dz2: 0; D = dz1: z2 | dz2: 1, z1 */
    const double A[6] = {0, 0, 0, -2, 2, 0}, A2[6] = {0, 0, 0, -1.9, 2.1, 0}, B[6] = {0, 0, 0.1, -2, 2, 0.1};
    const double C[6] = {0, 0, 0, 0, 2, 0}, D[6] = {0, 0.3, 0, -2, 2, 0};
    const double e0[2] = {0.10, 0.20}, e1[1] = {0.05}, e2[1] = {0.30}, e3[2] = {0.14, 0.16};
    for (int i = 0; i < 5; i++) {
        assert_int_equal(sweep_member_prepare(&sw, i, MEMBER_NEW, 1, &st), 0);
        write_log(sw.members[i].dir, 40, 0.01 * (i + 1));
    }
    write_equations(sw.members[0].dir, A), write_forecast(sw.members[0].dir, e0, 2);   /* 0.15, 2 terms */
    write_equations(sw.members[1].dir, B), write_forecast(sw.members[1].dir, e1, 1);   /* 0.05, 4 terms */
    write_equations(sw.members[2].dir, A2), write_forecast(sw.members[2].dir, e2, 1);  /* 0.30, 2 terms */
    write_equations(sw.members[3].dir, D), write_forecast(sw.members[3].dir, e3, 2);   /* 0.15, 3 terms */
    write_equations(sw.members[4].dir, C);      /* no forecast: ranked by validation (0.05 + 1/40) */
    /* member 5: not started */

    SweepSummary sum;
    assert_int_equal(sweep_write_summary(&sw, &sum, &st), 0);
    assert_int_equal(sum.n_rows, 6);
    static const int rank[6] = {1, 0, 3, 2, 4, 5};
    static const int front[6] = {1, 1, 0, 0, 0, 0};
    for (int k = 0; k < 6; k++) {
        if (sum.rows[k].member != rank[k]) fail_msg("rank %d: member %d, expected %d", k + 1, sum.rows[k].member, rank[k]);
        if (sum.rows[k].pareto != front[k]) fail_msg("rank %d: Pareto %d, expected %d", k + 1, sum.rows[k].pareto, front[k]);
    }
    assert_int_equal(sum.rows[0].error_from, ERR_FORECAST);
    assert_close(sum.rows[1].error, 0.15, 1e-12, 0);
    assert_int_equal(sum.rows[4].error_from, ERR_VALIDATION);
    assert_close(sum.rows[4].error, 0.05 + 1.0 / 40, 1e-9, 0);
    assert_int_equal(sum.rows[5].error_from, ERR_NONE);
    assert_string_equal(sum.rows[5].status, "not started");
    assert_string_equal(sum.rows[0].status, "finished");
    static const long active[6] = {4, 2, 3, 2, 1, -1};
    for (int k = 0; k < 6; k++) assert_int_equal(sum.rows[k].active, active[k]);
    /* groups: A (members 0 and 2) first, then by best rank: B, D, C */
    assert_int_equal(sum.pareto_from, ERR_FORECAST);
    assert_int_equal(sum.n_groups, 4);
    assert_int_equal(sum.groups[0].count, 2);
    assert_string_equal(sum.groups[0].key, "dz1/dt: z2 | dz2/dt: z1");
    assert_string_equal(sum.groups[1].key, "dz1/dt: z1, z2 | dz2/dt: z1, z2");
    assert_string_equal(sum.groups[2].key, "dz1/dt: z2 | dz2/dt: 1, z1");
    assert_string_equal(sum.groups[3].key, "dz1/dt: z2 | dz2/dt: 0");
    static const int group[6] = {1, 0, 2, 0, 3, -1};
    for (int k = 0; k < 6; k++) assert_int_equal(sum.rows[k].structure, group[k]);
    /* each term across the 5 members with equations (each member a sample): dz1/dt keeps z2 in all
     * of A, A2, B, C, D and z1 only in B; dz2/dt keeps z1 in A, A2, B, D (not C), 1 in D, z2 in B */
    assert_int_equal(sum.inclusion.members, 5);
    static const struct { const char *lhs, *term; int kept; } incl[] = {
        {"dz1/dt", "z2", 5}, {"dz1/dt", "z1", 1}, {"dz1/dt", "1", 0},
        {"dz2/dt", "z1", 4}, {"dz2/dt", "1", 1}, {"dz2/dt", "z2", 1},
    };
    assert_int_equal(sum.inclusion.n, 6);
    for (int i = 0; i < 6; i++) {
        int found = 0;
        for (int q = 0; q < sum.inclusion.n; q++) {
            const SweepTermStat *t = &sum.inclusion.t[q];
            if (strcmp(t->lhs, incl[i].lhs) || strcmp(t->term, incl[i].term)) continue;
            found = 1;
            assert_int_equal(t->offered, 5);
            if (t->kept != incl[i].kept) fail_msg("%s %s kept by %d, expected %d", t->lhs, t->term, t->kept, incl[i].kept);
            assert_int_equal(t->ens_n, 0); /* hand-made equations.json without an ensemble */
        }
        if (!found) fail_msg("%s %s missing", incl[i].lhs, incl[i].term);
    }
    /* sorted by equation, then by the fraction kept */
    assert_string_equal(sum.inclusion.t[0].term, "z2");
    assert_string_equal(sum.inclusion.t[3].term, "z1");
    sweep_summary_free(&sum);

    /* the files: CSV with a header and one row per member in rank order; HTML without scripts */
    char p[4200];
    snprintf(p, sizeof p, "%s/summary.csv", sw.output);
    char *csv = test_slurp(p);
    assert_non_null(csv);
    assert_int_equal(count_lines(csv), 7);
    assert_memory_equal(csv, "rank,id,status,loss.dz,train.seed,epochs,", 40);
    char row[200];
    snprintf(row, sizeof row, "\n1,%s,finished,1,2,40,", sw.members[1].id);
    assert_non_null(strstr(csv, row));
    assert_non_null(strstr(csv, ",0.05,forecast,4,yes,S2,1,dz1/dt = 2*z2; dz2/dt = -2*z1,"));
    snprintf(row, sizeof row, "\n5,%s,finished,0.25,1,40,", sw.members[4].id);
    assert_non_null(strstr(csv, row));
    assert_non_null(strstr(csv, ",,validation,1,,S4,1,"));
    snprintf(row, sizeof row, "\n6,%s,not started,", sw.members[5].id);
    assert_non_null(strstr(csv, row));
    free(csv);
    snprintf(p, sizeof p, "%s/summary.html", sw.output);
    char *html = test_slurp(p);
    assert_non_null(html);
    assert_null(strstr(html, "<script"));
    assert_non_null(strstr(html, "<tr class=\"front\">"));
    assert_non_null(strstr(html, sw.members[5].id));
    assert_non_null(strstr(html, "Inclusion of each term across members"));
    assert_non_null(strstr(html, "<span style=\"width:80.0%\"></span></span> 0.80"));
    /* each finished member's report was written and is linked relative to the page (its folder is
     * <output>/<id>); the member not started has none yet */
    struct stat rs0, rs1;
    for (int i = 0; i < 6; i++) {
        char link[200];
        snprintf(link, sizeof link, "<a href=\"%s/report.html\">report</a>", sw.members[i].id);
        snprintf(p, sizeof p, "%s/%s/report.html", sw.output, sw.members[i].id);
        if (i < 5) {
            if (!strstr(html, link)) fail_msg("summary.html lacks %s", link);
            assert_int_equal(access(p, R_OK), 0);
        } else {
            assert_null(strstr(html, link));
            assert_int_not_equal(access(p, F_OK), 0);
        }
    }
    assert_int_equal(count_of(html, "not made yet"), 1);
    free(html);
    /* a report newer than the member's results is kept as it is; one older is written again */
    snprintf(p, sizeof p, "%s/report.html", sw.members[1].dir);
    assert_int_equal(stat(p, &rs0), 0);
    assert_int_equal(sweep_write_summary(&sw, NULL, &st), 0);
    assert_int_equal(stat(p, &rs1), 0);
    assert_true(rs0.st_mtim.tv_sec == rs1.st_mtim.tv_sec && rs0.st_mtim.tv_nsec == rs1.st_mtim.tv_nsec);
    struct timespec old[2] = {{1000000, 0}, {1000000, 0}};   /* 1970: older than any result file */
    assert_int_equal(utimensat(AT_FDCWD, p, old, 0), 0);
    assert_int_equal(sweep_write_summary(&sw, NULL, &st), 0);
    assert_int_equal(stat(p, &rs1), 0);
    assert_true(rs1.st_mtim.tv_sec > 1000000);
    snprintf(p, sizeof p, "%s/inclusion.csv", sw.output);
    char *inc = test_slurp(p);
    assert_non_null(inc);
    assert_int_equal(count_lines(inc), 7);
    assert_non_null(strstr(inc, "equation,term,members,kept,inclusion,ensemble_inclusion\ndz1/dt,\"z2\",5,5,1,\n"));
    assert_non_null(strstr(inc, "\ndz2/dt,\"z1\",5,4,0.8,\n"));
    free(inc);

    /* only validation losses: they rank and make the front */
    for (int i = 0; i < 4; i++) {
        snprintf(p, sizeof p, "%s/forecast.json", sw.members[i].dir);
        assert_int_equal(unlink(p), 0);
    }
    assert_int_equal(sweep_summary(&sw, &sum, &st), 0);
    assert_int_equal(sum.pareto_from, ERR_VALIDATION);
    for (int k = 0; k < 5; k++) {
        assert_int_equal(sum.rows[k].member, k);   /* validation 0.01 (i + 1) + 1/40 */
        assert_int_equal(sum.rows[k].pareto, k == 0 || k == 4);   /* (0.035, 2) and (0.075, 1) */
    }
    sweep_summary_free(&sum);
    sweep_free(&sw);
}

/* Members written before the equations JSON version 2 (a space for a product, "frequencies") and
 * after it are compared by their terms: the same law is one structure and one row of inclusion. */
static void test_summary_reads_both_versions(void **state) {
    Fixture *fx = *state;
    char base[400], f[400];
    snprintf(base, sizeof base, "%s/base.json", fx->dir);
    write_base(base, "data", 40);
    sweep_file(fx, "versions.json", "{\"base\": \"base.json\", \"restarts\": 2, \"output\": \"versions\"}", f, sizeof f);
    assert_int_equal(chdir(fx->dir), 0);
    Sweep sw;
    Status st;
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    /* dz1/dt = -z2 + 0.5 z1*z2, dz2/dt = z1 (the same structure, slightly different numbers) */
    const double a[12] = {0, 0, 0, 1, -1, 0, 0, 0, 0.5, 0, 0, 0}, b[12] = {0, 0, 0, 1.1, -0.9, 0, 0, 0, 0.4, 0, 0, 0};
    for (int i = 0; i < 2; i++) {
        assert_int_equal(sweep_member_prepare(&sw, i, MEMBER_NEW, 1, &st), 0);
        write_log(sw.members[i].dir, 40, 0.01 * (i + 1));
    }
    write_equations_quadratic(sw.members[0].dir, 1, a);
    write_equations_quadratic(sw.members[1].dir, 2, b);
    SweepSummary sum;
    assert_int_equal(sweep_summary(&sw, &sum, &st), 0);
    assert_int_equal(sum.n_rows, 2);
    for (int k = 0; k < 2; k++) {
        if (sum.rows[k].structure != 0)
            fail_msg("member %d: structure %d (%s)", sum.rows[k].member, sum.rows[k].structure,
                     sum.rows[k].problem ? sum.rows[k].problem : "");
        assert_int_equal(sum.rows[k].active, 3);
    }
    assert_int_equal(sum.n_groups, 1);
    assert_int_equal(sum.groups[0].count, 2);
    assert_string_equal(sum.groups[0].key, "dz1/dt: z2, z1*z2 | dz2/dt: z1");
    int found = 0;
    for (int q = 0; q < sum.inclusion.n; q++) {
        const SweepTermStat *t = &sum.inclusion.t[q];
        assert_null(strstr(t->term, " "));   /* one spelling for every member */
        if (strcmp(t->lhs, "dz1/dt") || strcmp(t->term, "z1*z2")) continue;
        found = 1;
        assert_int_equal(t->offered, 2);
        assert_int_equal(t->kept, 2);
    }
    assert_true(found);
    sweep_summary_free(&sum);
    sweep_free(&sw);
}

/* ---- Slurm script ---------------------------------------------------------------------------- */

/* A member whose law lost every term is ranked last, off the Pareto front, with the reason, however
 * small its forecast error. */
static void test_summary_empty_law_last(void **state) {
    Fixture *fx = *state;
    char base[400], f[400];
    snprintf(base, sizeof base, "%s/base.json", fx->dir);
    write_base(base, "data", 40);
    sweep_file(fx, "empty.json", "{\"base\": \"base.json\", \"vary\": {\"loss.dz\": [1, 0.5, 0.25]}, \"output\": \"empty\"}",
               f, sizeof f);
    assert_int_equal(chdir(fx->dir), 0);
    Sweep sw;
    Status st;
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    const double A[6] = {0, 0, 0, -2, 2, 0}, Z[6] = {0};
    const double e0[1] = {0.20}, e1[1] = {0.01}, e2[1] = {0.30};
    for (int i = 0; i < 3; i++) {
        assert_int_equal(sweep_member_prepare(&sw, i, MEMBER_NEW, 1, &st), 0);
        write_log(sw.members[i].dir, 40, 0.01);
    }
    write_equations(sw.members[0].dir, A), write_forecast(sw.members[0].dir, e0, 1);
    write_equations(sw.members[1].dir, Z), write_forecast(sw.members[1].dir, e1, 1);   /* the best error, no term */
    write_equations(sw.members[2].dir, A), write_forecast(sw.members[2].dir, e2, 1);
    SweepSummary sum;
    assert_int_equal(sweep_summary(&sw, &sum, &st), 0);
    static const int rank[3] = {0, 2, 1};
    for (int k = 0; k < 3; k++)
        if (sum.rows[k].member != rank[k]) fail_msg("rank %d: member %d, expected %d", k + 1, sum.rows[k].member, rank[k]);
    assert_int_equal(sum.rows[2].active, 0);
    assert_int_equal(sum.rows[2].pareto, 0);
    assert_int_equal(sum.rows[0].pareto, 1);
    assert_non_null(sum.rows[2].problem);
    assert_non_null(strstr(sum.rows[2].problem, "the law has no term"));
    sweep_summary_free(&sum);
    /* a law with terms whose latent forecast is no better than holding the first state (persistence)
     * goes last too, with its reason */
    char p[600];
    snprintf(p, sizeof p, "%s/forecast.json", sw.members[0].dir);
    write_text(p, "{\"format\": \"framelaw-forecast\", \"version\": 1, \"bound\": 0.1, \"recordings\": [{\"name\": "
                  "\"rec0\", \"frames\": 100, \"mean_error\": 0.2, \"latent_mean_error\": 0.5, "
                  "\"persistence_latent_mean_error\": 0.4, \"beats_persistence\": false, \"stopped\": null}]}\n");
    assert_int_equal(sweep_summary(&sw, &sum, &st), 0);
    static const int rank2[3] = {2, 0, 1};
    for (int k = 0; k < 3; k++)
        if (sum.rows[k].member != rank2[k]) fail_msg("rank %d: member %d, expected %d", k + 1, sum.rows[k].member, rank2[k]);
    assert_int_equal(sum.rows[0].pareto, 1);
    assert_int_equal(sum.rows[1].pareto, 0);
    assert_non_null(sum.rows[1].problem);
    assert_non_null(strstr(sum.rows[1].problem, "no better than holding the first state"));
    sweep_summary_free(&sum);
    sweep_free(&sw);
}

static void test_slurm_script(void **state) {
    Fixture *fx = *state;
    char base[400], f[400];
    snprintf(base, sizeof base, "%s/base.json", fx->dir);
    write_base(base, "data", 40);
    sweep_file(fx, "sl.json",
               "{\"base\": \"base.json\", \"restarts\": 4, \"output\": \"slout\",\n"
               " \"slurm\": {\"partition\": \"debug\", \"time\": \"00:10:00\", \"cpus_per_task\": 2, \"memory\": 500,\n"
               "           \"max_running\": 2, \"sbatch\": [\"--account=abc\"], \"setup\": [\"module load x\"]}}",
               f, sizeof f);
    Sweep sw;
    Status st;
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    char *s = sweep_slurm_script(&sw, "/opt/bin/framelaw", "/home/u/proj", &st);
    assert_non_null(s);
    static const char *const want[] = {
        "#!/bin/bash\n", "\n#SBATCH --array=0-3%2\n", "\n#SBATCH --partition=debug\n", "\n#SBATCH --time=00:10:00\n",
        "\n#SBATCH --cpus-per-task=2\n", "\n#SBATCH --mem=500\n", "\n#SBATCH --output=/home/u/proj/slout/slurm/%A_%a.out\n",
        "\n#SBATCH --chdir=/home/u/proj\n", "\n#SBATCH --account=abc\n", "\nmodule load x\n",
        "\nexec '/opt/bin/framelaw' sweep '", "' --member \"$SLURM_ARRAY_TASK_ID\"\n"};
    for (size_t k = 0; k < sizeof want / sizeof want[0]; k++)
        if (!strstr(s, want[k])) fail_msg("script lacks \"%s\":\n%s", want[k], s);
    assert_non_null(strstr(s, sw.abs_path));
    /* every #SBATCH line comes before the first command */
    assert_true(strstr(s, "#SBATCH --account=abc") < strstr(s, "module load x"));
    free(s);
    /* a folder with a space cannot go into #SBATCH --output */
    assert_null(sweep_slurm_script(&sw, "/opt/bin/framelaw", "/home/u/my proj", &st));
    assert_int_equal(st.code, ST_INPUT);
    sweep_free(&sw);
}

/* ---- end to end ------------------------------------------------------------------------------ */

/* Two members run at once with no frame store yet: both finish, one store remains and no temporary;
 * a second call skips both and changes nothing. */
static void test_local_sweep_two_at_once(void **state) {
    Fixture *fx = *state;
    absolute_framelaw();
    char data[400], base[400], f[400], out[400];
    snprintf(data, sizeof data, "%s/data", fx->dir);
    write_recordings(data);
    snprintf(base, sizeof base, "%s/base.json", fx->dir);
    write_base(base, "data", 30);
    sweep_file(fx, "local.json", "{\"base\": \"base.json\", \"restarts\": 2, \"output\": \"runs\"}", f, sizeof f);
    snprintf(out, sizeof out, "%s/sweep.txt", fx->dir);
    const char *const args[] = {"sweep", "local.json", "--jobs", "2", NULL};
    int rc = run_in(fx->dir, out, args);
    char *text = test_slurp(out);
    if (rc != 0) fail_msg("sweep exited %d:\n%s", rc, text);
    assert_non_null(strstr(text, "2 at a time, 1 thread each"));
    assert_non_null(strstr(text, "[2 done, 0 running, 0 left]"));
    free(text);
    assert_int_equal(chdir(fx->dir), 0);
    Sweep sw;
    Status st;
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    long size[2];
    for (int i = 0; i < 2; i++) {
        MemberState s;
        assert_int_equal(sweep_member_state(&sw, i, &s, &st), 0);
        assert_int_equal(s, MEMBER_DONE);
        char p[600];
        snprintf(p, sizeof p, "%s/console.log", sw.members[i].dir);
        struct stat sb;
        assert_int_equal(stat(p, &sb), 0);
        size[i] = (long)sb.st_size;
    }
    char store[600];
    snprintf(store, sizeof store, "%s/.framelaw-store", data);
    FrameStore fs;
    assert_int_equal(store_load(store, &fs, &st), 0);
    assert_int_equal(fs.n_rec, NREC);
    store_close(&fs);
    assert_int_equal(count_names(data, ".tmp-"), 0);
    char p[600];
    snprintf(p, sizeof p, "%s/runs/summary.csv", fx->dir);
    char *csv = test_slurp(p);
    assert_non_null(csv);
    assert_int_equal(count_lines(csv), 3);
    free(csv);
    /* trained members carry their ensembles: the inclusion table has the mean of theirs */
    snprintf(p, sizeof p, "%s/runs/inclusion.csv", fx->dir);
    char *inc = test_slurp(p);
    assert_non_null(inc);
    char *row = strchr(inc, '\n');
    assert_non_null(row);
    int ncomma = 0;
    for (char *c = row + 1; *c && *c != '\n'; c++) ncomma += *c == ',';
    assert_int_equal(ncomma, 5);
    assert_true(row[strcspn(row + 1, "\n")] != ','); /* the ensemble column is filled */
    free(inc);

    rc = run_in(fx->dir, out, args);
    text = test_slurp(out);
    if (rc != 0) fail_msg("second sweep exited %d:\n%s", rc, text);
    assert_non_null(strstr(text, "all 2 members finished already"));
    free(text);
    for (int i = 0; i < 2; i++) {
        snprintf(p, sizeof p, "%s/console.log", sw.members[i].dir);
        struct stat sb;
        assert_int_equal(stat(p, &sb), 0);
        assert_int_equal((long)sb.st_size, size[i]);
    }
    sweep_free(&sw);
}

/* Starting together with no store: two plain `train` runs (each builds the store, temporary file +
 * rename, the last rename wins), and two array tasks of one sweep (`--member`, one from
 * SLURM_ARRAY_TASK_ID); everything finishes and the store is whole. Then bad member indices. */
static void test_members_start_together_without_store(void **state) {
    Fixture *fx = *state;
    absolute_framelaw();
    char data[400], base[400], f[400], o1[400], o2[400];
    snprintf(data, sizeof data, "%s/data", fx->dir);
    write_recordings(data);
    char store[600];
    snprintf(store, sizeof store, "%s/.framelaw-store", data);
    for (int round = 0; round < 2; round++) {
        if (round == 1) assert_int_equal(unlink(store), 0);
        assert_false(file_exists(store));
        snprintf(o1, sizeof o1, "%s/o1.txt", fx->dir);
        snprintf(o2, sizeof o2, "%s/o2.txt", fx->dir);
        pid_t a, b;
        if (round == 0) {
            char ca[400], cb[400];
            snprintf(ca, sizeof ca, "%s/a.json", fx->dir);
            snprintf(cb, sizeof cb, "%s/b.json", fx->dir);
            write_base(ca, "data", 30);
            write_base(cb, "data", 30);
            const char *const aa[] = {"train", "a.json", "--quiet", NULL};
            const char *const ab[] = {"train", "b.json", "--quiet", NULL};
            a = spawn_in(fx->dir, o1, NULL, NULL, aa);
            b = spawn_in(fx->dir, o2, NULL, NULL, ab);
        } else {
            snprintf(base, sizeof base, "%s/base.json", fx->dir);
            write_base(base, "data", 30);
            sweep_file(fx, "arr.json", "{\"base\": \"base.json\", \"restarts\": 2, \"output\": \"arr\"}", f, sizeof f);
            const char *const aa[] = {"sweep", "arr.json", "--member", "0", NULL};
            const char *const ab[] = {"sweep", "arr.json", "--member", NULL};
            a = spawn_in(fx->dir, o1, NULL, NULL, aa);
            b = spawn_in(fx->dir, o2, "SLURM_ARRAY_TASK_ID", "1", ab);
        }
        int ra = wait_status(a), rb = wait_status(b);
        if (ra || rb) {
            char *t1 = test_slurp(o1), *t2 = test_slurp(o2);
            fail_msg("round %d: exit %d and %d:\n%s\n%s", round, ra, rb, t1, t2);
        }
        FrameStore fs;
        Status st;
        assert_int_equal(store_load(store, &fs, &st), 0);
        store_close(&fs);
        assert_int_equal(count_names(data, ".tmp-"), 0);
    }
    assert_int_equal(chdir(fx->dir), 0);
    for (int i = 0; i < 2; i++) {
        char p[600];
        snprintf(p, sizeof p, "runs/%s/equations.json", i ? "b" : "a");
        assert_true(file_exists(p));
    }
    Sweep sw;
    Status st;
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    for (int i = 0; i < 2; i++) {
        MemberState s;
        assert_int_equal(sweep_member_state(&sw, i, &s, &st), 0);
        assert_int_equal(s, MEMBER_DONE);
    }
    sweep_free(&sw);
    char p[600];
    snprintf(p, sizeof p, "%s/arr/summary.csv", fx->dir);
    char *csv = test_slurp(p);
    assert_non_null(csv);
    assert_int_equal(count_lines(csv), 3);
    free(csv);
    /* a finished member: exit 0 at once; bad or missing indices: exit 2 */
    const char *const ok[] = {"sweep", "arr.json", "--member", "1", NULL};
    assert_int_equal(run_in(fx->dir, NULL, ok), 0);
    const char *const bad[] = {"sweep", "arr.json", "--member", "2", NULL};
    assert_int_equal(run_in(fx->dir, o1, bad), 2);
    char *t = test_slurp(o1);
    assert_non_null(strstr(t, "not a member index (the sweep has 2 members: 0 to 1)"));
    free(t);
    const char *const none[] = {"sweep", "arr.json", "--member", NULL};
    assert_int_equal(run_in(fx->dir, o1, none), 2);
    t = test_slurp(o1);
    assert_non_null(strstr(t, "SLURM_ARRAY_TASK_ID is not set"));
    free(t);
    assert_int_equal(wait_status(spawn_in(fx->dir, NULL, "SLURM_ARRAY_TASK_ID", "x1", none)), 2);
}

/* Log rows of a run folder (0 when there is no log). */
static long log_epoch(const char *dir) {
    SweepLog log;
    sweep_read_log(dir, &log);
    return log.epoch;
}

/* Ctrl-C stops both running members with their checkpoints and exits 1 saying how to continue; the
 * same command (with a shorter train.epochs, a key that may change on resume) resumes both. */
static void test_ctrl_c_then_continue(void **state) {
    Fixture *fx = *state;
    absolute_framelaw();
    char data[400], base[400], f[400], out[400];
    snprintf(data, sizeof data, "%s/data", fx->dir);
    write_recordings(data);
    snprintf(base, sizeof base, "%s/base.json", fx->dir);
    write_base(base, "data", 1000000);
    sweep_file(fx, "long.json", "{\"base\": \"base.json\", \"restarts\": 3, \"output\": \"long\"}", f, sizeof f);
    assert_int_equal(chdir(fx->dir), 0);
    Sweep sw;
    Status st;
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    snprintf(out, sizeof out, "%s/sweep.txt", fx->dir);
    const char *const args[] = {"sweep", "long.json", "--jobs", "2", NULL};
    pid_t pid = spawn_in(fx->dir, out, NULL, NULL, args);
    /* wait until both members have logged a few epochs (bounded) */
    for (int k = 0; k < 1200 && (log_epoch(sw.members[0].dir) < 12 || log_epoch(sw.members[1].dir) < 12); k++)
        usleep(50000);
    assert_true(log_epoch(sw.members[0].dir) >= 12 && log_epoch(sw.members[1].dir) >= 12);
    assert_int_equal(kill(pid, SIGINT), 0);
    int rc = wait_status(pid);
    char *text = test_slurp(out);
    if (rc != 128 + SIGINT) fail_msg("stopped sweep exited %d:\n%s", rc, text);
    assert_non_null(strstr(text, "continue with: framelaw sweep long.json --jobs 2"));
    assert_non_null(strstr(text, "2 stopped with their checkpoints, 1 not started"));
    free(text);
    long stop_at = 0;
    for (int i = 0; i < 2; i++) {
        char p[600];
        snprintf(p, sizeof p, "%s/checkpoints", sw.members[i].dir);
        assert_true(count_names(p, "ckpt-") > 0);
        snprintf(p, sizeof p, "%s/equations.json", sw.members[i].dir);
        assert_false(file_exists(p));
        MemberState s;
        assert_int_equal(sweep_member_state(&sw, i, &s, &st), 0);
        assert_int_equal(s, MEMBER_RESUME);
        if (log_epoch(sw.members[i].dir) > stop_at) stop_at = log_epoch(sw.members[i].dir);
    }
    assert_false(file_exists(sw.members[2].dir));
    sweep_free(&sw);

    write_base(base, "data", stop_at + 15);
    rc = run_in(fx->dir, out, args);
    text = test_slurp(out);
    if (rc != 0) fail_msg("continued sweep exited %d:\n%s", rc, text);
    assert_non_null(strstr(text, "3 members (0 finished, 2 to resume, 1 to train)"));
    free(text);
    assert_int_equal(sweep_load(&sw, f, &st), 0);
    for (int i = 0; i < 3; i++) {
        MemberState s;
        assert_int_equal(sweep_member_state(&sw, i, &s, &st), 0);
        assert_int_equal(s, MEMBER_DONE);
        assert_int_equal(log_epoch(sw.members[i].dir), stop_at + 15);
        if (i < 2) {
            char p[600];
            snprintf(p, sizeof p, "%s/console.log", sw.members[i].dir);
            char *c = test_slurp(p);
            assert_non_null(strstr(c, "resuming from"));
            free(c);
        }
    }
    sweep_free(&sw);
}

int main(void) {
    if (!getcwd(start_dir, sizeof start_dir)) return 1;
    absolute_framelaw();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_grid_order_and_ids, setup, teardown),
        cmocka_unit_test_setup_teardown(test_seeds_inline_base_and_paths, setup, teardown),
        cmocka_unit_test_setup_teardown(test_example_sweep_loads, setup, teardown),
        cmocka_unit_test_setup_teardown(test_bad_sweep_files, setup, teardown),
        cmocka_unit_test_setup_teardown(test_bad_sweep_command_starts_nothing, setup, teardown),
        cmocka_unit_test_setup_teardown(test_member_states, setup, teardown),
        cmocka_unit_test_setup_teardown(test_summary_ranking_pareto_groups, setup, teardown),
        cmocka_unit_test_setup_teardown(test_summary_empty_law_last, setup, teardown),
        cmocka_unit_test_setup_teardown(test_summary_reads_both_versions, setup, teardown),
        cmocka_unit_test_setup_teardown(test_slurm_script, setup, teardown),
        cmocka_unit_test_setup_teardown(test_local_sweep_two_at_once, setup, teardown),
        cmocka_unit_test_setup_teardown(test_members_start_together_without_store, setup, teardown),
        cmocka_unit_test_setup_teardown(test_ctrl_c_then_continue, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
