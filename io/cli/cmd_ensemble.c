/* io/cli/cmd_ensemble.c: `framelaw ensemble RUN_DIR`: the ensemble by bagging of a finished run, on
 * demand (docs/ensembles.md). Rewrites equations.txt / .tex / .json (with the ensemble) and the
 * forecasts (with bands); --set changes the ensemble.* keys and stores them in config.json. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/cli/cli.h"
#include "io/fs/atomic_file.h"
#include "io/fs/clock.h"
#include "io/run/runlock.h"
#include "io/run/results.h"
#include "io/run/runensemble.h"
#include "io/run/runlog.h"

int cli_run_finished(const char *dir, const Config *c, Status *st) {
    RunLog log;
    Status ls;
    if (runlog_read(dir, &log, &ls))
        return status_set(st, ST_INPUT, "%s: no training log (%s); train the run first: framelaw train CONFIG", dir,
                          ls.msg);
    long last = log.n ? log.rows[log.n - 1].epoch : 0;
    runlog_free(&log);
    if (last < c->epochs)
        return status_set(st, ST_INPUT,
                          "%s: training stopped at epoch %ld of %ld, so there is no finished model yet; finish it "
                          "with: framelaw resume %s",
                          dir, last, c->epochs, dir);
    return 0;
}

int cmd_ensemble(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        printf("usage: framelaw ensemble RUN_DIR [--set ensemble.KEY=VALUE ...] [--quiet]\n\n"
               "Fit the sparse law of a finished run again on ensemble.members (default 100) resamples of its\n"
               "encoded training set (ensembles by bagging: blocks of consecutive samples, optionally library\n"
               "bagging) and report per term the inclusion probability, the median coefficient and a 90%%\n"
               "interval, and the law of the terms at or above ensemble.inclusion (default 0.5), refit.\n"
               "Rewrites equations.txt / .tex / .json (the ensemble is in the JSON) and the forecasts of the\n"
               "held-out recordings with the members' bands (forecast.json, forecast/). `framelaw train` does\n"
               "the same at the end of a run. docs/ensembles.md explains how to read it.\n\n"
               "  --set ensemble.KEY=VALUE   change an ensemble setting (members, block, block_seconds,\n"
               "                             library_bagging, drop_fraction, inclusion, band_members); stored\n"
               "                             in RUN_DIR/config.json (repeatable)\n"
               "  --quiet                    no table, no summary lines\n");
        return 0;
    }
    const char *dir = NULL;
    int quiet = 0, n_sets = 0;
    const char *sets[64];
    for (int i = 1; i < argc; i++) {
        if (!strcmp(argv[i], "--quiet")) quiet = 1;
        else if (!strcmp(argv[i], "--set") || !strncmp(argv[i], "--set=", 6)) {
            const char *a = argv[i][5] == '=' ? argv[i] + 6 : (i + 1 < argc ? argv[++i] : NULL);
            if (!a) return cli_error(2, "--set needs ensemble.KEY=VALUE");
            if (strncmp(a, "ensemble.", 9))
                return cli_error(2, "--set %s: only ensemble.* keys may change here (the model is trained)", a);
            if (n_sets == 64) return cli_error(2, "--set: at most 64");
            sets[n_sets++] = a;
        } else if (argv[i][0] == '-') return cli_error(2, "%s: unknown option (framelaw ensemble --help)", argv[i]);
        else if (dir) return cli_error(2, "%s: one run folder only", argv[i]);
        else dir = argv[i];
    }
    if (!dir) return cli_error(2, "ensemble: missing RUN_DIR (framelaw ensemble --help)");
    static LoadedRun r; /* large (the config holds paths): not on the stack */
    static Config c;
    Status st;
    if (run_config_load(dir, &c, &st)) return cli_error(st.code, "%s", st.msg);
    for (int i = 0; i < n_sets; i++)
        if (config_set(&c, sets[i], &st)) return cli_error(st.code, "%s", st.msg);
    if (config_validate(&c, &st) || cli_run_finished(dir, &c, &st)) return cli_error(st.code, "%s", st.msg);
    RunLock lock = {-1}; /* it rewrites config.json and the equations: one command at a time */
    if (run_lock(&lock, dir, "ensemble", &st)) return cli_error(st.code, "%s", st.msg);
    if (loaded_run_open(&r, dir, &st)) {
        run_unlock(&lock);
        return cli_error(st.code, "%s", st.msg);
    }
    r.cfg = c; /* the folder's config with the --set ensemble keys */
    int rc = run_ensemble_get(&r, quiet, &st);
    if (!rc && !quiet) {
        run_ensemble_print(stdout, &r);
        fflush(stdout);
    }
    if (!rc && n_sets) { /* stored once they work, so that export, forecast and the report see them */
        char path[CFG_PATH_MAX + 32];
        snprintf(path, sizeof path, "%s/config.json", dir);
        char *json = config_to_json(&c);
        rc = atomic_write_bytes(path, json, strlen(json), &st);
        free(json);
    }
    if (!rc) rc = results_write_equations(&r, quiet, &st);
    if (!rc) rc = results_forecast(&r, quiet, &st);
    if (!rc && !quiet)
        fprintf(stderr, "framelaw: ensemble: fit %.3f s, bands %.3f s; equations.json and forecast.json in %s\n",
                r.ens->fit_seconds, r.ens->band_seconds, dir);
    if (rc) cli_error(rc, "%s", st.msg);
    loaded_run_close(&r);
    run_unlock(&lock);
    return rc;
}
