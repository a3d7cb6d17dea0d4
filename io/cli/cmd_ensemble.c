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
               "Choose or fit the sparse law of a finished run again on ensemble.members (default 100)\n"
               "resamples of its encoded training set (ensembles by bagging) and report per term the\n"
               "inclusion probability, the median coefficient and a 90%% interval, and the law of the terms\n"
               "at or above ensemble.inclusion (default 0.5), refit. A law chosen in training by forecasts\n"
               "(threshold.select first or every, the default) is chosen again the same way by each member,\n"
               "on its forecast segments drawn with replacement, and the table says how many members chose\n"
               "the trained law; otherwise each member is fitted by thresholded least squares on blocks of\n"
               "consecutive samples (ensemble.method). Rewrites equations.txt / .tex / .json (the ensemble\n"
               "is in the JSON) and the forecasts of the held-out recordings with the members' bands\n"
               "(forecast.json, forecast/). `framelaw train` does the same at the end of a run.\n"
               "docs/ensembles.md explains how to read it.\n\n"
               "options (default in brackets):\n"
               "  --set ensemble.KEY=VALUE   change an ensemble setting (members, method, candidates, block,\n"
               "                             block_seconds, library_bagging, drop_fraction, inclusion,\n"
               "                             band_members); stored in RUN_DIR/config.json\n"
               "                             (repeatable)                                          [none]\n"
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
