/* io/cli/cmd_results.c: `framelaw export RUN_DIR` and `framelaw forecast RUN_DIR`. */
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "io/cli/cli.h"
#include "io/run/results.h"
#include "io/run/runlock.h"

static int run_dir_arg(int argc, char **argv, const char **dir, int *quiet, const char **frames) {
    *dir = NULL;
    int operands = 0; /* after "--": RUN_DIR even when it starts with '-' */
    for (int i = 1; i < argc; i++) {
        if (!operands && !strcmp(argv[i], "--")) operands = 1;
        else if (!operands && !strcmp(argv[i], "--quiet")) *quiet = 1;
        else if (!operands && (!strcmp(argv[i], "--set") || !strncmp(argv[i], "--set=", 6))) {
            const char *a = argv[i][5] == '=' ? argv[i] + 6 : (i + 1 < argc ? argv[++i] : NULL);
            if (!a || strncmp(a, "data.frames=", 12) || !a[12])
                return cli_error(2, "--set %s: only data.frames=NEW may be given here, to follow frames that moved "
                                    "(the model is trained)", a ? a : "");
            *frames = a;
        } else if (!operands && argv[i][0] == '-') return cli_error(2, "%s: unknown option (framelaw %s --help)", argv[i], argv[0]);
        else if (*dir) return cli_error(2, "%s: one run folder only", argv[i]);
        else *dir = argv[i];
    }
    if (!*dir) return cli_error(2, "%s: missing RUN_DIR (framelaw %s --help)", argv[0], argv[0]);
    return 0;
}

static int with_run(int argc, char **argv, int (*fn)(LoadedRun *, int, Status *)) {
    const char *dir, *frames = NULL;
    int quiet = 0, rc = run_dir_arg(argc, argv, &dir, &quiet, &frames);
    if (rc) return rc;
    static LoadedRun r; /* large (the config holds paths): not on the stack */
    static Config c;
    Status st;
    struct stat sb;
    RunLock lock = {-1};
    /* a missing folder is left to loaded_run_open, which says "not a run folder" */
    if (stat(dir, &sb) == 0 && S_ISDIR(sb.st_mode)) {
        if (run_lock(&lock, dir, argv[0], &st)) return cli_error(st.code, "%s", st.msg);
        if (!run_config_load(dir, &c, &st)) { /* frames that moved: followed, or named with the fix */
            char old[CFG_PATH_MAX];
            snprintf(old, sizeof old, "%s", c.frames);
            if (frames ? config_set(&c, frames, &st) || run_frames_move(dir, &c, old, argc, argv, quiet, &st)
                       : run_frames_reachable(dir, &c, argv[0], &st)) {
                run_unlock(&lock);
                return cli_error(st.code, "%s", st.msg);
            }
        }
    }
    if (loaded_run_open(&r, dir, &st)) {
        run_unlock(&lock);
        return cli_error(st.code, "%s", st.msg);
    }
    rc = fn(&r, quiet, &st);
    if (rc) cli_error(rc, "%s", st.msg);
    loaded_run_close(&r);
    run_unlock(&lock);
    return rc;
}

int cmd_export(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        printf("usage: framelaw export RUN_DIR [--set data.frames=NEW] [--quiet]\n\n"
               "Write what a trained run learned, from its newest checkpoint, into RUN_DIR (docs/formats.md):\n"
               "equations.txt / .tex / .json, trajectories/<recording>.csv and .npy (t, z, z', the model's\n"
               "z' or z''; then u, u', the canonical law's u' or u'' when a sparser one was found),\n"
               "reconstructions/<recording>.png (original | decoded | difference) for image data,\n"
               "and region.json (the range of latent states seen in training). `framelaw train` runs it at\n"
               "the end of a run.\n\n"
               "options (default in brackets):\n"
               "  --set data.frames=NEW   the run's frames moved to NEW: checked to be the same frames (their\n"
               "                          content digest), then config.json follows them            [none]\n"
               "  --quiet                 no summary line                                           [off]\n"
               "  --help                  this text\n\n"
               "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input\n");
        return 0;
    }
    return with_run(argc, argv, results_export);
}

int cmd_forecast(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        printf("usage: framelaw forecast RUN_DIR [--set data.frames=NEW] [--quiet]\n\n"
               "For each held-out recording: start from the state fitted to the codes of its first frames\n"
               "(32, at most a quarter; z' too for a second-order model), integrate the learned model over the\n"
               "recording (forecast.method,\n"
               "forecast.tolerance), decode every step and compare with the real frames. Prints the mean\n"
               "relative error and the time it first exceeds forecast.bound (default 10%%), flags forecasts\n"
               "that leave the training region, and writes forecast.json and forecast/<recording>.csv.\n"
               "`framelaw train` runs it at the end of a run.\n\n"
               "options (default in brackets):\n"
               "  --set data.frames=NEW   the run's frames moved to NEW (as for framelaw export)        [none]\n"
               "  --quiet                 no summary lines                                          [off]\n"
               "  --help                  this text\n\n"
               "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input\n");
        return 0;
    }
    return with_run(argc, argv, results_forecast);
}
