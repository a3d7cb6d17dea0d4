/* io/cli/cmd_canonical.c: `framelaw canonical RUN_DIR`: the sparsest form of a finished run's law
 * under a change of latent coordinates, on demand (docs/canonical.md). Rewrites equations.txt / .tex
 * / .json (the canonical law opens the text files, its object is in the JSON); --set changes the
 * canonical.* keys and stores them in config.json. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/cli/cli.h"
#include "io/run/results.h"
#include "io/run/runcanonical.h"

int cmd_canonical(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        printf("usage: framelaw canonical RUN_DIR [--set canonical.KEY=VALUE ...] [--quiet]\n\n"
               "Search the changes of latent coordinates u = A z + b (one latent variable: an offset, and a\n"
               "fitted frequency of the sin / cos terms) for the one under which the run's law, refitted on\n"
               "its encoded training set, has the fewest terms while its fit error stays within\n"
               "canonical.tolerance (default 0.05) of the learned law's, equation by equation; maps whose\n"
               "condition number exceeds canonical.cond_max (default 1000) are never reported. Prints the\n"
               "canonical law and the map, and rewrites equations.txt / .tex / .json (the canonical law first,\n"
               "the learned law after it). `framelaw train` does the same at the end of a run.\n"
               "docs/canonical.md explains how to read it.\n\n"
               "options (default in brackets):\n"
               "  --set canonical.KEY=VALUE  change a setting (tolerance, cond_max); stored in\n"
               "                             RUN_DIR/config.json (repeatable)                      [none]\n"
               "  --quiet                    no summary lines                                      [off]\n"
               "  --help                     this text\n\n"
               "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input\n");
        return 0;
    }
    RunArgs a;
    int rc = cli_run_args(argc, argv, "canonical.", &a);
    if (rc) return rc;
    static LoadedRun r; /* large (the config holds paths): not on the stack */
    static Config c;
    if ((rc = cli_open_finished(&a, &c, &r))) return rc;
    Status st;
    int quiet = a.quiet;
    rc = run_canonical_get(&r, quiet, &st);
    if (!rc) {
        run_canonical_print(stdout, &r);
        fflush(stdout);
    }
    if (!rc) rc = cli_store_sets(&a, &c, &st); /* stored once they work, so export and the report see them */
    if (!rc) rc = results_write_equations(&r, quiet, &st);
    if (rc) cli_error(rc, "%s", st.msg);
    loaded_run_close(&r);
    run_unlock(&a.lock);
    return rc;
}
