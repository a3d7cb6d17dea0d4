/* io/cli/runargs.c: what the commands on a finished run share (framelaw ensemble, framelaw
 * canonical): their arguments, loading the run with the --set keys of their section, storing those. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/cli/cli.h"
#include "io/fs/atomic_file.h"
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

int cli_run_args(int argc, char **argv, const char *prefix, RunArgs *a) {
    memset(a, 0, sizeof *a);
    a->lock.fd = -1;
    const char *cmd = a->cmd = argv[0];
    size_t pl = strlen(prefix);
    int operands = 0; /* after "--": RUN_DIR even when it starts with '-' */
    for (int i = 1; i < argc; i++) {
        if (operands) {
            if (a->dir) return cli_error(2, "%s: one run folder only", argv[i]);
            a->dir = argv[i];
        } else if (!strcmp(argv[i], "--")) operands = 1;
        else if (!strcmp(argv[i], "--quiet")) a->quiet = 1;
        else if (!strcmp(argv[i], "--set") || !strncmp(argv[i], "--set=", 6)) {
            const char *s = argv[i][5] == '=' ? argv[i] + 6 : (i + 1 < argc ? argv[++i] : NULL);
            if (!s) return cli_error(2, "--set needs %sKEY=VALUE", prefix);
            if (strncmp(s, prefix, pl))
                return cli_error(2, "--set %s: only %s* keys may change here (the model is trained)", s, prefix);
            if (a->n_sets == CLI_MAX_SETS) return cli_error(2, "--set: at most %d", CLI_MAX_SETS);
            a->sets[a->n_sets++] = s;
        } else if (argv[i][0] == '-') return cli_error(2, "%s: unknown option (framelaw %s --help)", argv[i], cmd);
        else if (a->dir) return cli_error(2, "%s: one run folder only", argv[i]);
        else a->dir = argv[i];
    }
    if (!a->dir) return cli_error(2, "%s: missing RUN_DIR (framelaw %s --help)", cmd, cmd);
    return 0;
}

int cli_open_finished(RunArgs *a, Config *c, LoadedRun *r) {
    Status st;
    if (run_config_load(a->dir, c, &st)) return cli_error(st.code, "%s", st.msg);
    for (int i = 0; i < a->n_sets; i++)
        if (config_set(c, a->sets[i], &st)) return cli_error(st.code, "%s", st.msg);
    if (config_validate(c, &st) || cli_run_finished(a->dir, c, &st)) return cli_error(st.code, "%s", st.msg);
    RunLock *lock = &a->lock;
    if (run_lock(lock, a->dir, a->cmd, &st)) return cli_error(st.code, "%s", st.msg);
    if (loaded_run_open(r, a->dir, &st)) {
        run_unlock(lock);
        return cli_error(st.code, "%s", st.msg);
    }
    r->cfg = *c; /* the folder's config with the --set keys */
    return 0;
}

int cli_store_sets(const RunArgs *a, const Config *c, Status *st) {
    if (!a->n_sets) return 0;
    char path[CFG_PATH_MAX + 32];
    snprintf(path, sizeof path, "%s/config.json", a->dir);
    char *json = config_to_json(c);
    int rc = atomic_write_bytes(path, json, strlen(json), st);
    free(json);
    return rc;
}
