/* io/cli/cmd_canonical.c: `framelaw canonical RUN_DIR`: the sparsest form of a finished run's law
 * under a change of latent coordinates, on demand (docs/canonical.md). Rewrites equations.txt / .tex
 * / .json (the canonical law opens the text files, its object is in the JSON); --set changes the
 * canonical.* keys and stores them in config.json. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/cli/cli.h"
#include "io/fs/atomic_file.h"
#include "io/run/runlock.h"
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
               "  --set canonical.KEY=VALUE  change a setting (tolerance, cond_max); stored in\n"
               "                             RUN_DIR/config.json (repeatable)\n"
               "  --quiet                    no summary lines\n");
        return 0;
    }
    const char *dir = NULL;
    int quiet = 0, n_sets = 0;
    const char *sets[64];
    for (int i = 1; i < argc; i++) {
        if (!strcmp(argv[i], "--quiet")) quiet = 1;
        else if (!strcmp(argv[i], "--set") || !strncmp(argv[i], "--set=", 6)) {
            const char *a = argv[i][5] == '=' ? argv[i] + 6 : (i + 1 < argc ? argv[++i] : NULL);
            if (!a) return cli_error(2, "--set needs canonical.KEY=VALUE");
            if (strncmp(a, "canonical.", 10))
                return cli_error(2, "--set %s: only canonical.* keys may change here (the model is trained)", a);
            if (n_sets == 64) return cli_error(2, "--set: at most 64");
            sets[n_sets++] = a;
        } else if (argv[i][0] == '-') return cli_error(2, "%s: unknown option (framelaw canonical --help)", argv[i]);
        else if (dir) return cli_error(2, "%s: one run folder only", argv[i]);
        else dir = argv[i];
    }
    if (!dir) return cli_error(2, "canonical: missing RUN_DIR (framelaw canonical --help)");
    static LoadedRun r; /* large (the config holds paths): not on the stack */
    static Config c;
    Status st;
    if (run_config_load(dir, &c, &st)) return cli_error(st.code, "%s", st.msg);
    for (int i = 0; i < n_sets; i++)
        if (config_set(&c, sets[i], &st)) return cli_error(st.code, "%s", st.msg);
    if (config_validate(&c, &st) || cli_run_finished(dir, &c, &st)) return cli_error(st.code, "%s", st.msg);
    RunLock lock = {-1}; /* it rewrites config.json and the equations: one command at a time */
    if (run_lock(&lock, dir, "canonical", &st)) return cli_error(st.code, "%s", st.msg);
    if (loaded_run_open(&r, dir, &st)) {
        run_unlock(&lock);
        return cli_error(st.code, "%s", st.msg);
    }
    r.cfg = c; /* the folder's config with the --set canonical keys */
    int rc = run_canonical_get(&r, quiet, &st);
    if (!rc) {
        run_canonical_print(stdout, &r);
        fflush(stdout);
    }
    if (!rc && n_sets) { /* stored once they work, so that export and the report see them */
        char path[CFG_PATH_MAX + 32];
        snprintf(path, sizeof path, "%s/config.json", dir);
        char *json = config_to_json(&c);
        rc = atomic_write_bytes(path, json, strlen(json), &st);
        free(json);
    }
    if (!rc) rc = results_write_equations(&r, quiet, &st);
    if (rc) cli_error(rc, "%s", st.msg);
    loaded_run_close(&r);
    run_unlock(&lock);
    return rc;
}
