/* io/sweep/members.c: the state of a member's run folder (new, to resume, done), preparing it, and
 * the frame store that members share (io/sweep/sweep.h). */
#include "io/sweep/sweep.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/data/frames.h"
#include "io/data/store.h"
#include "io/fs/atomic_file.h"
#include "io/fs/files.h"
#include "io/run/rundata.h"
#include "io/run/runlog.h"
#include "io/sweep/common.h"

/* The last row of the member's log (io/run/runlog.h) and its last validation loss. */
int sweep_log_read(const char *run_dir, SweepLog *log, Status *st) {
    log->epoch = 0;
    log->loss = log->reconstruction = log->dx = log->dz = log->validation = NAN;
    log->active = -1;
    char p[CFG_PATH_MAX + 32];
    snprintf(p, sizeof p, "%s/" RUNLOG_FILE, run_dir);
    if (!fs_exists(p)) return 0;
    RunLog rl;
    if (runlog_read(run_dir, &rl, st)) return st->code;
    if (rl.n) {
        const RunLogRow *last = &rl.rows[rl.n - 1];
        log->epoch = last->epoch;
        log->loss = last->loss;
        log->reconstruction = last->reconstruction;
        log->dx = last->dx;
        log->dz = last->dz;
        log->active = last->active;
    }
    for (long i = 0; i < rl.n; i++)
        if (rl.rows[i].validated) log->validation = rl.rows[i].validation;
    runlog_free(&rl);
    return 0;
}

void sweep_read_log(const char *run_dir, SweepLog *log) {
    Status st;
    sweep_log_read(run_dir, log, &st);
}

/* The member's config as training resolved it: model.map auto becomes the run's choice (the run's
 * config.json holds the resolved keys, io/run/rundata.h); an explicit map is applied as training
 * applies it. Changes and returns c. */
static Config *resolved_as(Config *c, FramesMap run_map) {
    config_apply_map(c, c->map == MAP_AUTO ? run_map : c->map);
    return c;
}

int sweep_member_state(const Sweep *sw, int i, MemberState *state, Status *st) {
    const char *dir = sw->members[i].dir;
    char p[CFG_PATH_MAX + 64];
    Config *mine = malloc(sizeof *mine), *theirs = malloc(sizeof *theirs);
    if (!mine || !theirs) { free(mine); free(theirs); return status_set(st, ST_RUNTIME, "out of memory"); }
    int rc = sweep_member_config(sw, i, mine, st);
    snprintf(p, sizeof p, "%s/config.json", dir);
    if (!rc && fs_exists(p)) {
        Status ls;
        if (config_load_run(theirs, p, &ls))
            rc = status_set(st, ST_INPUT, "member %s: %s (move the folder away to start this member over)", sw->members[i].id, ls.msg);
        else if (config_digest(theirs) != config_digest(resolved_as(mine, theirs->map)))
            rc = status_set(st, ST_INPUT, "member %s: %s holds a run of another config (the sweep file or its base config "
                                          "changed since it started); move the folder away or give the sweep another output",
                            sw->members[i].id, dir);
    }
    if (!rc) {
        SweepLog log;
        sweep_read_log(dir, &log);
        snprintf(p, sizeof p, "%s/equations.json", dir);
        int eq = fs_exists(p);
        snprintf(p, sizeof p, "%s/checkpoints", dir);
        if (eq && log.epoch >= mine->epochs) *state = MEMBER_DONE;
        else if (fs_is_dir(p)) *state = MEMBER_RESUME;
        else *state = MEMBER_NEW;
    }
    free(mine);
    free(theirs);
    return rc;
}

int sweep_member_prepare(const Sweep *sw, int i, MemberState state, int threads, Status *st) {
    const char *dir = sw->members[i].dir;
    if (fs_make_dirs(dir, st)) return st->code;
    if (state != MEMBER_NEW) return 0;
    Config *c = malloc(sizeof *c);
    if (!c) return status_set(st, ST_RUNTIME, "out of memory");
    int rc = sweep_member_config(sw, i, c, st);
    if (!rc) {
        c->threads = threads;
        char p[CFG_PATH_MAX + 32];
        snprintf(p, sizeof p, "%s/config.json", dir);
        char *json = config_to_json(c);
        rc = json ? atomic_write_bytes(p, json, strlen(json), st) : status_set(st, ST_RUNTIME, "out of memory");
        free(json);
    }
    free(c);
    return rc;
}

void sweep_store_key(const Config *c, char *buf, size_t n) {
    snprintf(buf, n, "%s|%s|%d,%d,%d,%d|%d,%d|%d|%d", c->frames, gray_std_names[c->gray], c->crop[0], c->crop[1], c->crop[2],
             c->crop[3], c->size[0], c->size[1], c->stride, c->store_bits);
}

int sweep_prepare_store(const Sweep *sw, int i, Status *st) {
    Config *c = malloc(sizeof *c);
    if (!c) return status_set(st, ST_RUNTIME, "out of memory");
    int rc = sweep_member_config(sw, i, c, st), fd = -1;
    FrameSettings s;
    if (!rc) rc = frame_settings_from_config(c, &s, st);
    if (!rc) rc = fs_make_dirs(sw->output, st);
    if (!rc) rc = sweep_lock(sw->output, ".store.lock", &fd, st);
    if (!rc) {
        FrameScan scan;
        if (!(rc = frames_scan(c->frames, &scan, st))) {
            FrameStore fs;
            StoreOpenInfo info;
            if (!(rc = store_open_for(&scan, &s, 0, &fs, &info, st))) store_close(&fs);
            frames_scan_free(&scan);
        }
    }
    sweep_unlock(fd);
    free(c);
    return rc;
}
