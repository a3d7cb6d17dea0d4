/* io/cli/cmd_ensemble.c: `framelaw ensemble RUN_DIR`: the ensemble by bagging of a finished run, on
 * demand (docs/ensembles.md). Rewrites equations.txt / .tex / .json (with the ensemble) and the
 * forecasts (with bands); --set changes the ensemble.* keys and stores them in config.json. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/cli/cli.h"
#include "io/fs/clock.h"
#include "io/run/results.h"
#include "io/run/runensemble.h"

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
               "options (default in brackets):\n"
               "  --set ensemble.KEY=VALUE   change an ensemble setting (members, block, block_seconds,\n"
               "                             library_bagging, drop_fraction, inclusion, band_members); stored\n"
               "                             in RUN_DIR/config.json (repeatable)                   [none]\n"
               "  --quiet                    no table, no summary lines                            [off]\n"
               "  --help                     this text\n\n"
               "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input\n");
        return 0;
    }
    RunArgs a;
    int rc = cli_run_args(argc, argv, "ensemble.", &a);
    if (rc) return rc;
    static LoadedRun r; /* large (the config holds paths): not on the stack */
    static Config c;
    if ((rc = cli_open_finished(&a, &c, &r))) return rc;
    Status st;
    const char *dir = a.dir;
    int quiet = a.quiet;
    rc = run_ensemble_get(&r, quiet, &st);
    if (!rc && !quiet) {
        run_ensemble_print(stdout, &r);
        fflush(stdout);
    }
    if (!rc) rc = cli_store_sets(&a, &c, &st); /* stored once they work, so export, forecast, report see them */
    if (!rc) rc = results_write_equations(&r, quiet, &st);
    if (!rc) rc = results_forecast(&r, quiet, &st);
    if (!rc && !quiet)
        fprintf(stderr, "framelaw: ensemble: fit %.3f s, bands %.3f s; equations.json and forecast.json in %s\n",
                r.ens->fit_seconds, r.ens->band_seconds, dir);
    if (rc) cli_error(rc, "%s", st.msg);
    loaded_run_close(&r);
    run_unlock(&a.lock);
    return rc;
}
