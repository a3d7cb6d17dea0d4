/* tests/test_cmd_train.c: `framelaw train` and `framelaw resume` end to end on numeric recordings:
 * the run folder, Ctrl-C, a loop of kill -9 at random moments followed by resume (the result must be
 * identical to an uninterrupted run), and bad command lines. Common practice for crash-safety tests:
 * kill the process at arbitrary points and check that recovery reaches the same state. */
#include <signal.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "nn/rng.h"
#include "tests/testutil.h"

enum { NCH = 16, NREC = 4, NT = 120 };
/* long enough (about a second at ~1000 epochs/s) that the kills land inside the run */
enum { EPOCHS = 1200 };

/* Recordings of a linear oscillator (w = 2 rad/s) seen through 16 fixed channels, as CSV. */
static void write_recordings(const char *dir) {
    Rng r;
    rng_seed(&r, 5);
    double P[NCH][2];
    for (int c = 0; c < NCH; c++) P[c][0] = rng_normal(&r), P[c][1] = rng_normal(&r);
    for (int k = 0; k < NREC; k++) {
        char path[512];
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

static void write_config(const char *path, const char *data, const char *out, int epochs) {
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fprintf(f,
            "{\"data\": {\"frames\": \"%s\", \"fps\": 30, \"derivative\": {\"method\": \"central\"}},\n"
            " \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [16], \"activation\": \"tanh\", \"init\": \"glorot\", "
            "\"derivatives\": \"frames\"},\n"
            " \"library\": {\"degree\": 2, \"trig\": false},\n"
            " \"loss\": {\"dx\": 0.1, \"dz\": 1, \"l1\": 1e-3, \"normalize\": false},\n"
            " \"train\": {\"batch\": 32, \"epochs\": %d, \"threads\": 1, \"validate_every\": 5},\n"
            " \"threshold\": {\"value\": 0.05, \"measure\": \"coefficient\", \"select\": \"none\", \"every\": 10, "
            "\"refine_epochs\": 10},\n"
            " \"checkpoint\": {\"every\": 25, \"keep\": 2},\n"
            " \"output\": \"%s\"}\n",
            data, epochs, out);
    fclose(f);
}

/* Run framelaw with arguments; returns the exit status (or 128 + signal). */
static pid_t spawn(char *const args[], int quiet) {
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        if (quiet) {
            FILE *n = freopen("/dev/null", "w", stderr);
            (void)n;
            n = freopen("/dev/null", "w", stdout);
            (void)n;
        }
        execv(args[0], args);
        _exit(127);
    }
    return pid;
}

static int wait_status(pid_t pid) {
    int ws;
    assert_int_equal(waitpid(pid, &ws, 0), pid);
    return WIFEXITED(ws) ? WEXITSTATUS(ws) : 128 + WTERMSIG(ws);
}

static int run_cmd(const char *a1, const char *a2, const char *a3, const char *a4) {
    char *args[] = {(char *)test_framelaw(), (char *)a1, (char *)a2, (char *)a3, (char *)a4, NULL};
    return wait_status(spawn(args, 1));
}

typedef struct {
    char dir[256], data[512];
} Fixture;

static int setup(void **state) {
    Fixture *fx = calloc(1, sizeof *fx);
    assert_non_null(test_tmpdir(fx->dir, sizeof fx->dir));
    snprintf(fx->data, sizeof fx->data, "%s/data", fx->dir);
    assert_int_equal(mkdir(fx->data, 0777), 0);
    write_recordings(fx->data);
    *state = fx;
    return 0;
}

static int teardown(void **state) {
    Fixture *fx = *state;
    char cmd[600];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", fx->dir);
    if (system(cmd) != 0) fprintf(stderr, "could not remove %s\n", fx->dir);
    free(fx);
    return 0;
}

/* kill -9 at random moments, resume each time, and finally finish: the equations and the last
 * checkpoint's parameters equal those of a run that was never interrupted. */
static void test_kill_loop_then_resume_matches_straight_run(void **state) {
    Fixture *fx = *state;
    char cfg[600], run_a[600], run_b[600];
    snprintf(run_a, sizeof run_a, "%s/straight", fx->dir);
    snprintf(run_b, sizeof run_b, "%s/killed", fx->dir);
    snprintf(cfg, sizeof cfg, "%s/a.json", fx->dir);
    write_config(cfg, fx->data, run_a, EPOCHS);
    assert_int_equal(run_cmd("train", cfg, "--quiet", NULL), 0);
    snprintf(cfg, sizeof cfg, "%s/b.json", fx->dir);
    write_config(cfg, fx->data, run_b, EPOCHS);
    Rng r;
    rng_seed(&r, (uint64_t)time(NULL));
    int started = 0, kills = 0, kills_landed = 0;
    for (int i = 0; i < 8; i++) {
        char ck[700];
        snprintf(ck, sizeof ck, "%s/checkpoints", run_b);
        struct stat sb;
        int have = stat(ck, &sb) == 0;
        char *args_t[] = {(char *)test_framelaw(), "train", cfg, "--quiet", NULL};
        char *args_r[] = {(char *)test_framelaw(), "resume", run_b, "--quiet", NULL};
        pid_t pid = spawn(have ? args_r : args_t, 1);
        started++;
        struct timespec ts = {0, (long)(20e6 + 250e6 * rng_uniform(&r))}; /* 20 to 270 ms */
        nanosleep(&ts, NULL);
        if (kill(pid, SIGKILL) == 0) kills++;
        int rc = wait_status(pid);
        /* killed (137) or finished (0) */
        assert_true(rc == 128 + SIGKILL || rc == 0);
        if (rc == 0) break;
        if (rc == 128 + SIGKILL) kills_landed++;
    }
    assert_true(started >= 1 && kills >= 1);
    assert_true(kills_landed >= 2); /* at least two kills hit a running training */
    char ck[700];
    snprintf(ck, sizeof ck, "%s/checkpoints", run_b);
    struct stat sb;
    int rc = stat(ck, &sb) == 0 ? run_cmd("resume", run_b, "--quiet", NULL) : run_cmd("train", cfg, "--quiet", NULL);
    assert_int_equal(rc, 0);
    char pa[700], pb[700];
    snprintf(pa, sizeof pa, "%s/equations.json", run_a);
    snprintf(pb, sizeof pb, "%s/equations.json", run_b);
    char *ea = test_slurp(pa), *eb = test_slurp(pb);
    assert_non_null(ea);
    assert_non_null(eb);
    assert_string_equal(ea, eb);
    free(ea);
    free(eb);
    /* the log has each epoch once, 1..EPOCHS, whatever was replayed */
    snprintf(pb, sizeof pb, "%s/log.csv", run_b);
    char *log = test_slurp(pb);
    assert_non_null(log);
    int expect = 1;
    for (char *line = strchr(log, '\n'); line && line[1]; line = strchr(line + 1, '\n'))
        assert_int_equal(atoi(line + 1), expect++);
    assert_int_equal(expect, EPOCHS + 1);
    free(log);
}

/* SIGINT finishes the step, writes a checkpoint and says how to resume. */
static void test_interrupt_writes_checkpoint(void **state) {
    Fixture *fx = *state;
    char cfg[600], run[600];
    snprintf(run, sizeof run, "%s/interrupted", fx->dir);
    snprintf(cfg, sizeof cfg, "%s/c.json", fx->dir);
    write_config(cfg, fx->data, run, 100000);
    char *args[] = {(char *)test_framelaw(), "train", cfg, "--quiet", NULL};
    pid_t pid = spawn(args, 1);
    struct timespec ts = {0, 400000000};
    nanosleep(&ts, NULL);
    kill(pid, SIGINT);
    assert_int_equal(wait_status(pid), 128 + SIGINT); /* 130, as shells expect */
    char ck[700];
    snprintf(ck, sizeof ck, "%s/checkpoints", run);
    char cmd[800];
    snprintf(cmd, sizeof cmd, "ls '%s' | grep -q '^ckpt-'", ck);
    assert_int_equal(system(cmd), 0);
}

/* Bad command lines and run folders: a one-line message, exit 2. */
static void test_bad_usage(void **state) {
    Fixture *fx = *state;
    char cfg[600], run[600];
    assert_int_equal(run_cmd("train", NULL, NULL, NULL), 2);
    assert_int_equal(run_cmd("train", "/nonexistent/config.json", NULL, NULL), 2);
    assert_int_equal(run_cmd("resume", "/nonexistent/run", NULL, NULL), 2);
    snprintf(run, sizeof run, "%s/twice", fx->dir);
    snprintf(cfg, sizeof cfg, "%s/d.json", fx->dir);
    write_config(cfg, fx->data, run, 12);
    assert_int_equal(run_cmd("train", cfg, "--quiet", NULL), 0);
    assert_int_equal(run_cmd("train", cfg, "--quiet", NULL), 2); /* the run folder already holds a run */
    assert_int_equal(run_cmd("resume", run, "--set", "optimizer.lr=0.5"), 2); /* not a resume-safe key */
    assert_int_equal(run_cmd("resume", run, "--set", "output=elsewhere"), 2); /* a resumed run stays where it is */
    assert_int_equal(run_cmd("train", cfg, "--set", "model.order=7"), 2);
    /* a model wider than the machine's memory is bad input (exit 2) before anything is allocated, not
     * an out-of-memory exit 1 later; the message names the key */
    snprintf(run, sizeof run, "%s/wide", fx->dir);
    snprintf(cfg, sizeof cfg, "%s/wide.json", fx->dir);
    write_config(cfg, fx->data, run, 12);
    char args[1400], out[8192];
    snprintf(args, sizeof args, "train '%s' --quiet --set 'model.encoder=[2147483647]'", cfg);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    if (!strstr(out, "the run would need about") || !strstr(out, "or the model (model.encoder)"))
        fail_msg("output: %s", out);
    assert_int_equal(run_cmd("train", "--help", NULL, NULL), 0);
    assert_int_equal(run_cmd("resume", "--help", NULL, NULL), 0);
}

/* provenance.json: one entry per session, with the threads actually used; the report shows them. */
static void test_provenance(void **state) {
    Fixture *fx = *state;
    char cfg[600], run[600], args[1400], out[8192], path[700];
    snprintf(run, sizeof run, "%s/prov", fx->dir);
    snprintf(cfg, sizeof cfg, "%s/prov.json", fx->dir);
    write_config(cfg, fx->data, run, 12);
    snprintf(args, sizeof args, "train '%s' --quiet", cfg);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    snprintf(args, sizeof args, "resume '%s' --quiet --set train.epochs=14", run);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    snprintf(path, sizeof path, "%s/provenance.json", run);
    char *text = test_slurp(path);
    assert_non_null(text);
    cJSON *root = cJSON_Parse(text);
    assert_non_null(root);
    assert_string_equal(cJSON_GetObjectItem(root, "format")->valuestring, "framelaw-provenance");
    cJSON *s = cJSON_GetObjectItem(root, "sessions");
    assert_int_equal(cJSON_GetArraySize(s), 2);
    static const char *const cmd[2] = {"train", "resume"};
    for (int i = 0; i < 2; i++) {
        cJSON *e = cJSON_GetArrayItem(s, i);
        assert_string_equal(cJSON_GetObjectItem(e, "command")->valuestring, cmd[i]);
        assert_int_equal(cJSON_GetObjectItem(e, "threads")->valueint, 1);
        assert_string_equal(cJSON_GetArrayItem(cJSON_GetObjectItem(e, "argv"), 0)->valuestring, cmd[i]);
        const char *d = cJSON_GetObjectItem(e, "started")->valuestring;
        assert_int_equal(strlen(d), 20);
        assert_true(d[4] == '-' && d[10] == 'T' && d[19] == 'Z');
        assert_true(strlen(cJSON_GetObjectItem(e, "blas_config")->valuestring) > 0);
    }
    cJSON_Delete(root);
    free(text);
    snprintf(args, sizeof args, "report '%s'", run);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    snprintf(path, sizeof path, "%s/report.html", run);
    char *html = test_slurp(path);
    assert_non_null(html);
    const char *sec = strstr(html, "<h2 id=\"provenance\">");
    assert_non_null(sec);
    assert_non_null(strstr(sec, "<td>resume</td>"));
    free(html);
}

/* model.map: the recordings are 16 channels that are a fixed linear image of a two-variable state, so
 * two principal directions carry all their variance (rank 2; principal component analysis, common
 * practice) and auto resolves to linear for a latent of 2. The run's config.json keeps the resolved
 * keys: linear's defaults where the config gave none (no hidden layer, the pca start, derivatives
 * through the encoder) where the keys hold their defaults (the default init given explicitly too),
 * the config's other values as given; curved keeps today's defaults. */
static void test_map_resolved(void **state) {
    Fixture *fx = *state;
    static const struct {
        const char *model;              /* the config's model object, after latent and order */
        const char *map, *init, *derivs;
        int n_enc, enc0;
    } cases[] = {
        {"", "linear", "pca", "frames", 0, 0},
        {", \"encoder\": [16], \"init\": \"glorot\"", "linear", "glorot", "frames", 1, 16},
        {", \"init\": \"isomap\", \"derivatives\": \"latent\", \"encoder\": [32]", "linear", "pca", "frames", 1, 32},
        {", \"map\": \"curved\", \"init\": \"glorot\"", "curved", "glorot", "latent", 2, 64},
    };
    char cfg[600], run[600], args[1400], out[8192], path[700];
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        snprintf(cfg, sizeof cfg, "%s/map%zu.json", fx->dir, i);
        snprintf(run, sizeof run, "%s/map%zu-run", fx->dir, i);
        FILE *f = fopen(cfg, "w");
        assert_non_null(f);
        fprintf(f, "{\"data\": {\"frames\": \"%s\", \"fps\": 30}, \"model\": {\"latent\": 2, \"order\": 1%s},\n"
                   " \"train\": {\"epochs\": 4, \"threads\": 1}, \"threshold\": {\"select\": \"none\"},\n"
                   " \"output\": \"%s\"}\n", fx->data, cases[i].model, run);
        fclose(f);
        snprintf(args, sizeof args, "train '%s'", cfg);
        if (test_run_capture(args, out, sizeof out) != 0) fail_msg("case %zu: %s", i, out);
        if (i == 0 && !strstr(out, "framelaw: model.map auto: linear (the leading 2 principal directions of the "
                                   "training frames carry 100.0% of their variance; linear from 90%)"))
            fail_msg("case 0: no line on the choice in '%s'", out);
        snprintf(path, sizeof path, "%s/config.json", run);
        char *text = test_slurp(path);
        assert_non_null(text);
        cJSON *root = cJSON_Parse(text), *m = cJSON_GetObjectItem(root, "model");
        assert_non_null(m);
        assert_string_equal(cJSON_GetObjectItem(m, "map")->valuestring, cases[i].map);
        assert_string_equal(cJSON_GetObjectItem(m, "init")->valuestring, cases[i].init);
        assert_string_equal(cJSON_GetObjectItem(m, "derivatives")->valuestring, cases[i].derivs);
        cJSON *enc = cJSON_GetObjectItem(m, "encoder");
        assert_int_equal(cJSON_GetArraySize(enc), cases[i].n_enc);
        if (cases[i].n_enc) assert_int_equal(cJSON_GetArrayItem(enc, 0)->valueint, cases[i].enc0);
        cJSON_Delete(root);
        free(text);
    }
}

/* Recordings too short for what the defaults need: exit 2 and a line that says what to change. */
static void test_short_recordings(void **state) {
    Fixture *fx = *state;
    char args[1200], out[4096], cfg[600];
    static const struct {
        int frames;
        const char *msg;
    } cases[] = {
        {4, "the shortest recording has 4 frames, too few for a Savitzky-Golay stencil (5); record longer "
            "recordings or set data.derivative.method central"},
        {10, "library has 14 terms but the training set only 8 samples: record more or longer recordings"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        snprintf(args, sizeof args, "demo spring '%s/short%zu' --recordings 3 --frames %d", fx->dir, i, cases[i].frames);
        assert_int_equal(test_run_capture(args, out, sizeof out), 0);
        snprintf(cfg, sizeof cfg, "%s/short%zu.json", fx->dir, i);
        FILE *f = fopen(cfg, "w");
        assert_non_null(f);
        fprintf(f, "{\"data\": {\"frames\": \"short%zu\", \"fps\": 25}, \"model\": {\"latent\": 1, \"order\": 2},\n"
                   " \"output\": \"%s/short%zu-run\"}\n", i, fx->dir, i);
        fclose(f);
        snprintf(args, sizeof args, "train '%s' --quiet", cfg);
        assert_int_equal(test_run_capture(args, out, sizeof out), 2);
        if (!strstr(out, cases[i].msg)) fail_msg("%d frames: got '%s'", cases[i].frames, out);
    }
    /* the frames' principal component analysis under a small train.memory_budget (0.005 GiB, 5.37 MB;
     * batch 8 keeps the training's own estimate under it). 1024 values, 20 training frames: the
     * n x n covariance (8.39 MB) does not fit, the 20 x 20 Gram matrix and the frames' copy (85 KB)
     * do (nn/pca.h), so the run gets past the analysis to the next check (too few samples for the
     * library); below 85 KB it is refused naming the Gram path's figures; frames of 16 values
     * (data.size [4, 4]) have more frames than values, so only the covariance (2 KB) is tried */
    static const struct {
        const char *sets, *msg;
    } big[] = {
        {"--set train.memory_budget=0.005", "library has 14 terms but the training set only 8 samples"},
        {"--set train.memory_budget=0.005 --set data.derivative.method=savgol --set model.map=curved --set model.init=pca",
         "library has 14 terms but the training set only 8 samples"},
        {"--set train.memory_budget=0.00005",
         "frames of 1024 values: data.derivative.method auto analyses the 20 training frames in a 20 x 20 matrix and "
         "their copy, about 8.51e-05 GB, above train.memory_budget (5.37e-05 GB)"},
        {"--set train.memory_budget=0.000001 --set data.size=[4,4]",
         "frames of 16 values: data.derivative.method auto analyses them in a 16 x 16 matrix of about 2.05e-06 GB, above "
         "train.memory_budget (1.07e-06 GB)"},
    };
    for (size_t i = 0; i < sizeof big / sizeof big[0]; i++) {
        snprintf(args, sizeof args, "train '%s/short1.json' --quiet --set train.batch=8 %s", fx->dir, big[i].sets);
        assert_int_equal(test_run_capture(args, out, sizeof out), 2);
        if (!strstr(out, big[i].msg)) fail_msg("case %zu: got '%s'", i, out);
    }
    /* and a run long enough to train: 3 recordings of 40 frames (80 training frames against 1024
     * values) through the Gram path of the start (model.init pca) and of the stencil's analysis */
    snprintf(args, sizeof args, "demo spring '%s/gram' --recordings 3 --frames 40", fx->dir);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    for (int init_pca = 0; init_pca < 2; init_pca++) {
        snprintf(args, sizeof args, "train '%s/short1.json' --quiet --set data.frames='%s/gram' --set train.batch=8 "
                 "--set train.memory_budget=0.005 --set train.epochs=6 --set train.threads=1 --set output='%s/gram-run%d'%s",
                 fx->dir, fx->dir, fx->dir, init_pca, init_pca ? " --set model.init=pca" : "");
        if (test_run_capture(args, out, sizeof out) != 0) fail_msg("gram run %d: '%s'", init_pca, out);
        assert_non_null(strstr(out, "learned equations"));
    }
    /* a term name with a space for a product (the form before '*'): read, with a one-line note */
    snprintf(args, sizeof args, "train '%s/short1.json' --quiet --set 'library.exclude=[\"z1 dz1/dt\"]'", fx->dir);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "framelaw: note: library.exclude \"z1 dz1/dt\": a space for a product is deprecated "
                                "(read until the next release); write \"z1*dz1/dt\"\n"));
    assert_non_null(strstr(out, "library has 13 terms")); /* the term is gone: it was read */
    /* a run larger than train.memory_budget is refused before training, with the figures and the fix */
    snprintf(args, sizeof args, "train '%s/short1.json' --quiet --set train.memory_budget=0.0001 "
             "--set data.derivative.method=savgol --set model.map=curved", fx->dir); /* no analysis before it */
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "the run would need about"));
    assert_non_null(strstr(out, "above train.memory_budget (0.0 GB): shrink the frames with data.size"));
    /* image frames carry no rate: data.fps must be given */
    snprintf(cfg, sizeof cfg, "%s/nofps.json", fx->dir);
    FILE *nf = fopen(cfg, "w");
    assert_non_null(nf);
    fprintf(nf, "{\"data\": {\"frames\": \"short1\"}, \"model\": {\"latent\": 1, \"order\": 2}, "
                "\"output\": \"%s/nofps-run\"}\n", fx->dir);
    fclose(nf);
    snprintf(args, sizeof args, "train '%s' --quiet", cfg);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "data.fps: required for image frames"));
    /* a run whose law loses every term ends normally, with a warning that says what to try */
    char run[600];
    snprintf(run, sizeof run, "%s/empty", fx->dir);
    snprintf(cfg, sizeof cfg, "%s/empty.json", fx->dir);
    write_config(cfg, fx->data, run, 30);
    snprintf(args, sizeof args, "train '%s' --quiet --set threshold.value=1e9", cfg);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "learned equations (0 active terms)"));
    assert_non_null(strstr(out, "warning: no term is left"));
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_kill_loop_then_resume_matches_straight_run, setup, teardown),
        cmocka_unit_test_setup_teardown(test_interrupt_writes_checkpoint, setup, teardown),
        cmocka_unit_test_setup_teardown(test_bad_usage, setup, teardown),
        cmocka_unit_test_setup_teardown(test_short_recordings, setup, teardown),
        cmocka_unit_test_setup_teardown(test_provenance, setup, teardown),
        cmocka_unit_test_setup_teardown(test_map_resolved, setup, teardown),
    };
    return cmocka_run_group_tests_name("train and resume commands", tests, NULL, NULL);
}
