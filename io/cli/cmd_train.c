/* io/cli/cmd_train.c: `framelaw train CONFIG` and `framelaw resume RUN_DIR`. */
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "io/fs/atomic_file.h"
#include "io/fs/files.h"
#include "io/cli/cli.h"
#include "io/run/config.h"
#include "io/run/provenance.h"
#include "io/run/results.h"
#include "io/run/runcanonical.h"
#include "io/run/runensemble.h"
#include "io/run/rundata.h"
#include "io/run/runlock.h"
#include "io/run/train.h"
#include "sparse/coef.h"
#include "sparse/equation.h"

volatile sig_atomic_t cli_stop_flag = 0, cli_stop_sig = SIGINT;
static struct sigaction stop_old_int, stop_old_term;
static void on_signal(int sig) {
    cli_stop_sig = sig;
    cli_stop_flag = 1;
}

void cli_stop_catch(void) {
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_signal;
    sigemptyset(&sa.sa_mask);
    sigaction(SIGINT, &sa, &stop_old_int);
    sigaction(SIGTERM, &sa, &stop_old_term);
}

void cli_stop_release(void) {
    sigaction(SIGINT, &stop_old_int, NULL);
    sigaction(SIGTERM, &stop_old_term, NULL);
}

/* ---- results at the end of training -------------------------------------------------------------- */

/* Export and forecast from the final checkpoint, then print the equations (cli.h). */
int cli_finish_run(const char *run_dir, int quiet, Status *st) {
    LoadedRun *r = malloc(sizeof *r);
    if (!r) return status_set(st, ST_RUNTIME, "out of memory");
    int rc = loaded_run_open(r, run_dir, st);
    if (!rc) rc = results_export(r, quiet, st);
    if (!rc) {
        long active = model_active(&r->m);
        printf("learned equations (%ld active terms):\n", active);
        equation_fprint(stdout, EQ_TEXT, &r->m.lib, r->coef.xi, r->coef.mask, EQ_DIGITS);
        if (!active) /* a law of nothing: the latent stood still, or every term fell below the threshold */
            fprintf(stderr, "framelaw: warning: no term is left, so this law says nothing moves: the latent may have "
                            "collapsed to a constant (see its plot in framelaw report); try more recordings or "
                            "epochs, a lower threshold.value, or model.init isomap\n");
        run_canonical_print(stdout, r);
        if (!quiet) run_ensemble_print(stdout, r);
        fflush(stdout);
        rc = results_forecast(r, quiet, st);
    }
    if (!rc && !quiet) fprintf(stderr, "framelaw: results in %s\n", run_dir);
    if (r->have_model || r->have_data) loaded_run_close(r);
    free(r);
    return rc;
}

/* ---- shared by train and resume ---------------------------------------------------------------- */

/* model.map of a run trained anew (or of one stopped before its start-up stored the choice): auto
 * becomes linear or curved by the frames, and the run's config.json gets the resolved keys, so that
 * resume, export and the report see the model that was trained. */
static int resolve_map(RunData *d, Config *c, const char *run_dir, int quiet, Status *st) {
    FramesMap asked = c->map;
    if (rundata_apply_map(d, c, st)) return st->code;
    if (!quiet && asked == MAP_AUTO)
        fprintf(stderr, "framelaw: model.map auto: %s (the leading %d principal direction%s of the training frames "
                        "carry %.1f%% of their variance; linear from %.0f%%)\n",
                c->map == MAP_LINEAR ? "linear" : "curved", c->latent, c->latent > 1 ? "s" : "",
                100 * d->plane_share, 100 * MAP_LINEAR_SHARE);
    char path[CFG_PATH_MAX + 32];
    snprintf(path, sizeof path, "%s/config.json", run_dir);
    char *json = config_to_json(c);
    if (!json) return status_set(st, ST_RUNTIME, "out of memory");
    int rc = atomic_write_bytes(path, json, strlen(json), st);
    free(json);
    return rc;
}

static int run_training(Config *c, const char *run_dir, int resume, int quiet, int argc, char **argv) {
    Status st;
    RunData data;
    int rc = rundata_open(&data, c, &st);
    if (data.have_scan) frames_warn_gaps(&data.scan, stderr); /* also when the pieces are too short */
    if (data.store_info.note[0] && !quiet) fprintf(stderr, "framelaw: note: %s\n", data.store_info.note);
    if (rc) {
        rundata_close(&data);
        return cli_error(rc, "%s", st.msg);
    }
    if ((!resume || c->map == MAP_AUTO) && (rc = resolve_map(&data, c, run_dir, quiet, &st))) {
        rundata_close(&data);
        return cli_error(rc, "%s", st.msg);
    }
    int gram; /* pca_init decides the same way */
    if ((rc = rundata_memory_check(&data, c, &st)) ||
        (!resume && c->init != INIT_GLOROT &&
         (rc = rundata_pca_fits(data.td.n_in, data.td.n_train, c, c->init == INIT_PCA ? "model.init pca" : "model.init isomap",
                                &gram, &st)))) {
        rundata_close(&data);
        return cli_error(rc, "%s", st.msg);
    }
    if (data.td.n_in > 16384 && !resume) {
        MemEstimate me;
        rundata_memory(&data, c, &me);
        fprintf(stderr, "framelaw: warning: samples of %d values: a model of %.3g parameters, about %.1f GB of memory "
                        "and slow epochs; most motions show at 64x64 or less (data.size)\n",
                data.td.n_in, me.params, me.bytes / 1e9);
    }
    int threads = c->threads > 0 ? c->threads : (int)sysconf(_SC_NPROCESSORS_ONLN);
    if ((rc = provenance_append(run_dir, resume ? "resume" : "train", argc, argv, threads, c->frames,
                                store_content_digest(&data.store), &st))) {
        rundata_close(&data);
        return cli_error(rc, "%s", st.msg);
    }
    TrainData td = data.td;
    if (!quiet) {
        fprintf(stderr, "framelaw: %s %s: %ld training and %ld validation samples of %d values, dt %.6g s\n",
                resume ? "resuming" : "training", run_dir, td.n_train, td.n_val, td.n_in, td.dt);
        if (data.auto_window)
            fprintf(stderr, "framelaw: derivatives: Savitzky-Golay window %d, degree %d (data.derivative.method auto: "
                    "the frames move at %.3g rad per frame, a period of %.1f frames)\n", data.auto_window,
                    data.auto_degree, data.auto_theta, 2 * M_PI / data.auto_theta);
        fprintf(stderr, "framelaw: model: latent %d, order %d, %s; batch %d, %ld epochs; log in %s/log.csv\n",
                c->latent, c->order, act_table[c->activation].name, c->batch, c->epochs, run_dir);
    }
    cli_stop_catch();
    TrainOpts o = {c, run_dir, resume, quiet, &cli_stop_flag, 0, NULL, NULL};
    Model m;
    ParamSet ps;
    TrainResult res;
    rc = train_run(&o, &td, &m, &ps, &res, &st);
    /* training is over: Ctrl-C now stops at once, removing the temporaries of the files being written
     * (the handler of atomic_cleanup_on_signals) */
    cli_stop_release();
    if (rc) {
        cli_error(rc, "%s", st.msg);
    } else if (res.interrupted) {
        fprintf(stderr, "framelaw: stopped after epoch %ld; checkpoint %s\nframelaw: continue with: framelaw resume %s\n",
                res.epochs_done, res.checkpoint, run_dir);
        rc = 128 + cli_stop_sig; /* 130 for Ctrl-C, 143 for SIGTERM, as shells expect of a stopped process */
    } else {
        if (!quiet && isfinite(res.best_val))
            fprintf(stderr, "framelaw: best validation loss %.4g\n", res.best_val);
    }
    model_free(&m);
    params_free(&ps);
    rundata_close(&data);
    if (!rc && !res.interrupted && cli_finish_run(run_dir, quiet, &st)) rc = cli_error(st.code, "%s", st.msg);
    return rc;
}

static int parse_sets(Config *c, int argc, char **argv, int *quiet, const char **pos, int resume) {
    Status st;
    *pos = NULL;
    int operands = 0; /* after "--": the operand even when it starts with '-' */
    for (int i = 1; i < argc; i++) {
        if (!operands && !strcmp(argv[i], "--")) {
            operands = 1;
        } else if (operands) {
            if (*pos) return cli_error(2, "%s: one %s only", argv[i], resume ? "run folder" : "config file");
            *pos = argv[i];
        } else if (!strcmp(argv[i], "--quiet")) {
            *quiet = 1;
        } else if (!strcmp(argv[i], "--set") || !strncmp(argv[i], "--set=", 6)) {
            const char *a = argv[i][5] == '=' ? argv[i] + 6 : (i + 1 < argc ? argv[++i] : NULL);
            if (!a) return cli_error(2, "--set needs KEY.PATH=VALUE");
            if (resume && !strncmp(a, "output=", 7))
                return cli_error(2, "--set %s: a resumed run stays in RUN_DIR; to move a run, move its folder and "
                                    "resume it there", a);
            if (resume) {
                int ok = !strncmp(a, "data.frames=", 12); /* the frames moved: checked by run_frames_move */
                for (int k = 0; config_resume_safe_keys[k]; k++) {
                    size_t n = strlen(config_resume_safe_keys[k]);
                    if (!strncmp(a, config_resume_safe_keys[k], n) && a[n] == '=') ok = 1;
                }
                if (!ok) {
                    char keys[512];
                    config_safe_keys_text(keys, sizeof keys);
                    return cli_error(2, "--set %s: only these keys may change on resume: %s (and data.frames, "
                                        "to follow frames that moved)", a, keys);
                }
            }
            if (c && config_set(c, a, &st)) return cli_error(st.code, "%s", st.msg);
        } else if (argv[i][0] == '-') {
            return cli_error(2, "%s: unknown option (framelaw %s --help)", argv[i], argv[0]);
        } else if (*pos) {
            return cli_error(2, "%s: one %s only", argv[i], resume ? "run folder" : "config file");
        } else {
            *pos = argv[i];
        }
    }
    return 0;
}

int cmd_train(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        printf("usage: framelaw train CONFIG [--set KEY.PATH=VALUE ...] [--quiet]\n\n"
               "Train the autoencoder and the sparse latent model described by CONFIG (JSON; every key is\n"
               "listed in docs/config.md). Writes the run folder given by `output` (default runs/<config name>):\n"
               "config.json, log.csv, checkpoints/, equations.txt / .tex / .json.\n\n"
               "options (default in brackets):\n"
               "  --set KEY.PATH=VALUE   override a config key (VALUE is JSON; repeatable)       [none]\n"
               "  --quiet                no progress output                                      [off]\n"
               "  --help                 this text\n\n"
               "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input, 130 stopped by Ctrl-C\n"
               "(143 by SIGTERM): the current step finishes, a checkpoint is written and the message says\n"
               "how to resume.\n");
        return 0;
    }
    int quiet = 0;
    const char *path;
    int rc = parse_sets(NULL, argc, argv, &quiet, &path, 0);
    if (rc) return rc;
    if (!path) return cli_error(2, "train: missing CONFIG (framelaw train --help)");
    Config *c = malloc(sizeof *c);
    if (!c) return cli_error(1, "out of memory");
    Status st;
    if (config_load(c, path, &st) || (rc = parse_sets(c, argc, argv, &quiet, &path, 0))) {
        free(c);
        return rc ? rc : cli_error(st.code, "%s", st.msg);
    }
    if (rundata_source_fps(c, &st)) {
        free(c);
        return cli_error(st.code, "%s", st.msg);
    }
    if (config_validate(c, &st)) { /* a check across keys: the file (with its --set overrides) is at fault */
        free(c);
        return cli_error(st.code, "%s: %s", path, st.msg);
    }
    cli_note_old_terms(c);
    char ck[CFG_PATH_MAX + 32];
    snprintf(ck, sizeof ck, "%s/checkpoints", c->output);
    /* the folder, then its lock (a train or resume running there is named), then whether it holds a run */
    RunLock lock = {-1};
    if (fs_make_dirs(c->output, &st)) { /* a file in the way is bad input: name it and the key */
        free(c);
        if (st.code == ST_INPUT) return cli_error(2, "output: %s; choose another run folder (--set output=...)", st.msg);
        return cli_error(st.code, "%s", st.msg);
    }
    if (run_lock(&lock, c->output, "train", &st)) {
        free(c);
        return cli_error(st.code, "%s", st.msg);
    }
    if (fs_exists(ck)) {
        rc = cli_error(2, "%s: already holds a run; continue it with `framelaw resume %s` or choose another "
                          "output (--set output=...)", c->output, c->output);
        run_unlock(&lock);
        free(c);
        return rc;
    }
    char cfg_path[CFG_PATH_MAX + 32];
    snprintf(cfg_path, sizeof cfg_path, "%s/config.json", c->output);
    char *json = config_to_json(c);
    if (atomic_write_bytes(cfg_path, json, strlen(json), &st)) {
        free(json);
        run_unlock(&lock);
        free(c);
        return cli_error(st.code, "%s", st.msg);
    }
    free(json);
    char run_dir[CFG_PATH_MAX];
    snprintf(run_dir, sizeof run_dir, "%s", c->output);
    rc = run_training(c, run_dir, 0, quiet, argc, argv);
    run_unlock(&lock);
    free(c);
    return rc;
}

int cmd_resume(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        printf("usage: framelaw resume RUN_DIR [--set KEY.PATH=VALUE ...] [--quiet]\n\n"
               "Continue a run from its newest valid checkpoint, exactly as if it had not stopped. A checkpoint\n"
               "that is truncated or damaged is skipped with a message and the one before it is used.\n"
               "Only these keys may change: train.epochs, train.threads, train.validate_every,\n"
               "checkpoint.every, checkpoint.keep, forecast.bound, forecast.method, forecast.tolerance,\n"
               "ensemble.*, canonical.* (they act after training), train.memory_budget, and data.frames\n"
               "when the frames moved: their content is checked against the run's (docs/results.md).\n"
               "The run stays in RUN_DIR: a moved run folder resumes where it is.\n\n"
               "options (default in brackets):\n"
               "  --set KEY.PATH=VALUE   change one of the keys above (VALUE is JSON; repeatable)  [none]\n"
               "  --quiet                no progress output                                        [off]\n"
               "  --help                 this text\n\n"
               "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input, 130 stopped by Ctrl-C\n"
               "(143 by SIGTERM) with a checkpoint written.\n");
        return 0;
    }
    int quiet = 0;
    const char *dir;
    int rc = parse_sets(NULL, argc, argv, &quiet, &dir, 1);
    if (rc) return rc;
    if (!dir) return cli_error(2, "resume: missing RUN_DIR (framelaw resume --help)");
    char cfg_path[CFG_PATH_MAX + 32];
    snprintf(cfg_path, sizeof cfg_path, "%s/config.json", dir);
    Config *c = malloc(sizeof *c);
    if (!c) return cli_error(1, "out of memory");
    Status st;
    char old_frames[CFG_PATH_MAX];
    if (run_config_load(dir, c, &st) || (snprintf(old_frames, sizeof old_frames, "%s", c->frames),
                                         (rc = parse_sets(c, argc, argv, &quiet, &dir, 1))) ||
        config_validate(c, &st)) {
        free(c);
        return rc ? rc : cli_error(st.code, "%s", st.msg);
    }
    RunLock lock = {-1};
    int moved = strcmp(c->frames, old_frames) != 0;
    if (run_lock(&lock, dir, "resume", &st) ||
        (moved ? run_frames_move(dir, c, old_frames, argc, argv, quiet, &st) : run_frames_reachable(dir, c, "resume", &st))) {
        run_unlock(&lock);
        free(c);
        return cli_error(st.code, "%s", st.msg);
    }
    int sets = 0;
    for (int i = 1; i < argc && strcmp(argv[i], "--"); i++) sets |= !strncmp(argv[i], "--set", 5);
    if (sets) { /* store the changed safe keys so a later resume sees them */
        char *json = config_to_json(c);
        if (atomic_write_bytes(cfg_path, json, strlen(json), &st)) {
            free(json);
            run_unlock(&lock);
            free(c);
            return cli_error(st.code, "%s", st.msg);
        }
        free(json);
    }
    rc = run_training(c, dir, 1, quiet, argc, argv);
    run_unlock(&lock);
    free(c);
    return rc;
}
