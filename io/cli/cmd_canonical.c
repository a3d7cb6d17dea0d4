/* io/cli/cmd_canonical.c: `framelaw canonical RUN_DIR`: the sparsest form of a finished run's law
 * under a change of latent coordinates, on demand (docs/canonical.md). Rewrites equations.txt / .tex
 * / .json (the canonical law opens the text files, its object is in the JSON); --set changes the
 * canonical.* keys and stores them in config.json. */
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/cli/cli.h"
#include "io/run/results.h"
#include "io/run/runcanonical.h"
#include "io/run/runrefine.h"


/* --refine EPOCHS (or --refine=EPOCHS) taken out of argv; 0 when absent, -1 after an error. */
static long take_refine(int *argc, char **argv) {
    long epochs = 0;
    int k = 1;
    for (int i = 1; i < *argc; i++) {
        if (!strcmp(argv[i], "--")) {
            while (i < *argc) argv[k++] = argv[i++];
            break;
        }
        if (!strcmp(argv[i], "--refine") || !strncmp(argv[i], "--refine=", 9)) {
            const char *v = argv[i][8] == '=' ? argv[i] + 9 : (i + 1 < *argc ? argv[++i] : NULL);
            char *end;
            epochs = v ? strtol(v, &end, 10) : 0;
            if (!v || !*v || *end || epochs < 1 || epochs > 1000000) {
                cli_error(2, "--refine needs a number of epochs (1 to 1000000), not '%s'", v ? v : "");
                return -1;
            }
            continue;
        }
        argv[k++] = argv[i];
    }
    *argc = k;
    return epochs;
}

int cmd_canonical(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        printf("usage: framelaw canonical RUN_DIR [--set canonical.KEY=VALUE ...] [--refine EPOCHS] [--quiet]\n\n"
               "Search the changes of latent coordinates u = A z + b (one latent variable: an offset, and a\n"
               "fitted frequency of the sin / cos terms) for the one under which the run's law, refitted on\n"
               "its encoded training set, has the fewest terms while its fit error stays within\n"
               "canonical.tolerance (default 0.05) of the learned law's, equation by equation; maps whose\n"
               "condition number exceeds canonical.cond_max (default 1000) are never reported. With\n"
               "canonical.choose=forecast (the default auto: with one latent variable), terms are then\n"
               "left out of that law (and its sine frequencies refitted) by the forecast score of the\n"
               "training's model selection, and with one latent variable the map may bend,\n"
               "u = A z + b + c3 z^3. Prints the canonical law and the map,\n"
               "and rewrites equations.txt / .tex / .json (the canonical law first, the learned law after\n"
               "it). `framelaw train` does the same at the end of a run.\n"
               "docs/canonical.md explains how to read it.\n\n"
               "options (default in brackets):\n"
               "  --set canonical.KEY=VALUE  change a setting (tolerance, cond_max, choose); stored in\n"
               "                             RUN_DIR/config.json (repeatable)                      [none]\n"
               "  --refine EPOCHS            train on in canonical form, EPOCHS epochs a candidate, leaving\n"
               "                             out terms while the law still fits; the best becomes\n"
               "                             RUN_DIR/refined (docs/canonical.md, Refinement)      [off]\n"
               "  --quiet                    no summary lines                                      [off]\n"
               "  --help                     this text\n\n"
               "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input, 130 (143) a refinement\n"
               "stopped by Ctrl-C (SIGTERM): its work is removed, an earlier RUN_DIR/refined stays\n");
        return 0;
    }
    long refine = take_refine(&argc, argv);
    if (refine < 0) return 2;
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
    static RefineResult res;
    if (!rc && refine) {
        cli_stop_catch();
        RefineOptions ro = {refine, quiet, &cli_stop_flag};
        rc = run_refine(&r, &ro, &res, &st);
        cli_stop_release();
    }
    if (rc) cli_error(rc, "%s", st.msg);
    if (rc && cli_stop_flag) rc = 128 + cli_stop_sig; /* as shells expect of a stopped process (docs/cli.md) */
    loaded_run_close(&r);
    if (!rc && refine) {
        const RefineCandidate *ch = &res.cand[res.chosen];
        printf("refinement: %d candidates of %ld epochs; the law kept has %ld terms (canonical: %ld, learned: %ld); "
               "validation %.4g refined, %.4g learned: the %s model is better\n", res.n, refine, ch->active,
               res.cand[0].active, res.active_before, ch->val, res.val_before, res.kept_refined ? "refined" : "learned");
        fflush(stdout);
        char dir[CFG_PATH_MAX + 16];
        snprintf(dir, sizeof dir, "%s/refined", a.dir);
        if (cli_finish_run(dir, quiet, &st)) rc = cli_error(st.code, "%s", st.msg);
    }
    run_unlock(&a.lock);
    return rc;
}
