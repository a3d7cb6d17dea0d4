/* io/run/rundata.c: a run's config and data (see rundata.h). */
#include "io/run/rundata.h"

#include "nn/pca.h"
#include "io/fs/atomic_file.h"
#include "io/run/provenance.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

static int gather(void *ctx, int split, const long *idx, int B, float *X, Status *st) {
    RunData *d = ctx;
    if (B > d->batch) return status_set(st, ST_RUNTIME, "gather: batch of %d exceeds %d", B, d->batch);
    long n = d->ds.n;
    if (d->td.sten) {
        dataset_gather_window(&d->ds, split ? SPLIT_VAL : SPLIT_TRAIN, idx, B, X);
        return 0;
    }
    dataset_gather(&d->ds, split ? SPLIT_VAL : SPLIT_TRAIN, idx, B, X, X + (long)B * n,
                   d->k == 3 ? X + 2L * B * n : NULL);
    return 0;
}

static int gather_shared(void *ctx, int split, const long *idx, int B, float *X, int *map, int *U, Status *st) {
    RunData *d = ctx;
    if (B > d->batch) return status_set(st, ST_RUNTIME, "gather: batch of %d exceeds %d", B, d->batch);
    long *work = malloc((size_t)2 * (2 * d->ds.sten.m + 1) * B * sizeof *work); /* the stencil's window */
    if (!work) return status_set(st, ST_RUNTIME, "gather: out of memory");
    *U = dataset_gather_window_shared(&d->ds, split ? SPLIT_VAL : SPLIT_TRAIN, idx, B, X, map, work);
    free(work);
    return 0;
}

void rundata_close(RunData *d) {
    if (d->have_ds) dataset_free(&d->ds);
    if (d->have_store) store_close(&d->store);
    if (d->have_scan) frames_scan_free(&d->scan);
    memset(d, 0, sizeof *d);
}

int frame_settings_from_config(const Config *c, FrameSettings *s, Status *st) {
    *s = frame_settings_default();
    s->fps = c->fps;
    s->gray = c->gray;
    s->crop_x = c->crop[0], s->crop_y = c->crop[1], s->crop_w = c->crop[2], s->crop_h = c->crop[3];
    s->width = c->size[0], s->height = c->size[1];
    s->scale = c->scale;
    s->stride = c->stride;
    s->bits = c->store_bits;
    /* auto: central differences until rundata_open has looked at the frames */
    s->stencil = c->derivative == DERIV_SAVGOL ? STENCIL_SAVGOL : STENCIL_CENTRAL;
    s->sg_window = c->sg_window, s->sg_degree = c->sg_degree;
    size_t k = 0;
    for (int i = 0; i < c->n_val_names && i < CFG_MAX_LIST; i++) {
        int n = snprintf(s->val_names + k, sizeof s->val_names - k, "%s%s", i ? "," : "", c->val_names[i]);
        if (n < 0 || (size_t)n >= sizeof s->val_names - k)
            return status_set(st, ST_INPUT, "data.validation.recordings: names too long");
        k += (size_t)n;
    }
    s->val_last = c->val_last;
    _Static_assert(sizeof s->store_path >= sizeof c->store, "data.store does not fit the frame settings");
    memcpy(s->store_path, c->store, sizeof c->store);
    return frame_settings_check(s, st);
}

/* data.derivative.method auto: the rms frequency of the training frames' three leading principal
 * component scores (stencil_rms_frequency) decides the Savitzky-Golay stencil (stencil_auto). The
 * scores are smooth functions of the motion even where single pixels are pulses, so their
 * frequency is close to the latent's; harmonics only raise it (a narrower, safer stencil). */
#define AUTO_STENCIL_TOL 0.02      /* responses within 2% of exact at that frequency */
#define AUTO_STENCIL_MAX 13        /* frames per window at most (latent mode encodes each one) */

/* The training frames' count (the samples of their analysis). */
static long train_frame_count(const Dataset *ds, const FrameStore *fs) {
    long N = 0;
    for (int r = 0; r < fs->n_rec; r++)
        if (ds->rec_split[r] == SPLIT_TRAIN) N += fs->rec[r].count;
    return N;
}

/* The principal directions of the training recordings' frames: q of them with their variances (vals)
 * and the total variance (pca_finish_total), by the covariance or (gram) the Gram path (nn/pca.h).
 * x: (ds->n) work. */
static int train_frames_pca(const Dataset *ds, const FrameStore *fs, int q, int gram, float *x, double *mean,
                            double *vecs, double *vals, double *total, Status *st) {
    Pca p;
    if (gram) pca_begin_gram(&p, (int)ds->n, train_frame_count(ds, fs));
    else pca_begin(&p, (int)ds->n);
    for (int r = 0; r < fs->n_rec; r++)
        if (ds->rec_split[r] == SPLIT_TRAIN)
            for (long f = 0; f < fs->rec[r].count; f++) {
                dataset_frame(ds, fs->rec[r].first + f, x);
                pca_add(&p, x, 1);
            }
    return pca_finish_total(&p, q, mean, vecs, vals, total, st);
}

/* The share of the total variance that the leading q directions carry (1 for still frames: any
 * plane holds them). */
static double leading_share(const double *vals, int q, double total) {
    double top = 0;
    for (int j = 0; j < q; j++) top += vals[j] > 0 ? vals[j] : 0;
    return total > 0 ? top / total : 1.0;
}

/* rundata_auto_stencil, and with share_q > 0 also rundata_plane_share's share of share_q directions
 * from the same pass over the frames (the stencil uses the leading three of them). */
static int auto_stencil_share(const Dataset *ds, const FrameStore *fs, int order, int gram, FrameSettings *s,
                              double *theta_out, int share_q, double *share, Status *st) {
    long n = ds->n, N = 0;
    int nr = 0;
    for (int r = 0; r < fs->n_rec; r++)
        if (ds->rec_split[r] == SPLIT_TRAIN) N += fs->rec[r].count, nr++;
    int q = n < 3 ? (int)n : 3, qp = share_q > q ? (share_q < n ? share_q : (int)n) : q;
    float *x = malloc((size_t)n * sizeof *x);
    double *mean = malloc((size_t)n * sizeof *mean), *vecs = malloc((size_t)qp * n * sizeof *vecs);
    double *vals = malloc((size_t)qp * sizeof *vals), total = 0;
    double *sc = malloc((size_t)N * q * sizeof *sc);
    long *rs = malloc((size_t)(nr + 1) * sizeof *rs);
    int rc = 0;
    if (!x || !mean || !vecs || !vals || !sc || !rs) {
        rc = status_set(st, ST_RUNTIME, "out of memory");
        goto done;
    }
    if ((rc = train_frames_pca(ds, fs, qp, gram, x, mean, vecs, vals, &total, st))) goto done;
    if (share_q > 0) *share = leading_share(vals, share_q < qp ? share_q : qp, total);
    long i = 0;
    int k = 0;
    for (int r = 0; r < fs->n_rec; r++) {
        if (ds->rec_split[r] != SPLIT_TRAIN) continue;
        rs[k++] = i;
        for (long f = 0; f < fs->rec[r].count; f++, i++) {
            dataset_frame(ds, fs->rec[r].first + f, x);
            for (int j = 0; j < q; j++) {
                double a = 0;
                for (long v = 0; v < n; v++) a += (x[v] - mean[v]) * vecs[(long)j * n + v];
                sc[i * q + j] = a;
            }
        }
    }
    rs[k] = i;
    double theta = stencil_rms_frequency(sc, N, q, rs, nr);
    if (!(theta > 0)) theta = 0.05; /* still frames: any stencil is exact; take a wide one */
    if (theta > 3.0) theta = 3.0;
    /* no wider than the shortest recording (a narrower stencil is less exact, but it runs) */
    long shortest = AUTO_STENCIL_MAX;
    for (int r = 0; r < fs->n_rec; r++)
        if (fs->rec[r].count < shortest) shortest = fs->rec[r].count;
    int max_w = shortest % 2 ? (int)shortest : (int)shortest - 1;
    if (max_w < 5) { /* Savitzky-Golay of degree 3 needs 5 frames: central differences need 3 */
        rc = status_set(st, ST_INPUT, "data.derivative auto: the shortest recording has %ld frames, too few for a "
                        "Savitzky-Golay stencil (5); record longer recordings or set data.derivative.method central",
                        shortest);
        goto done;
    }
    Stencil sten;
    if ((rc = stencil_auto(&sten, theta, order, AUTO_STENCIL_TOL, max_w, st))) goto done;
    s->stencil = STENCIL_SAVGOL;
    s->sg_window = 2 * sten.m + 1;
    s->sg_degree = sten.degree;
    *theta_out = theta;
done:
    free(x), free(mean), free(vecs), free(vals), free(sc), free(rs);
    return rc;
}

int rundata_auto_stencil(const Dataset *ds, const FrameStore *fs, int order, FrameSettings *s, double *theta_out,
                         Status *st) {
    /* no budget here (framelaw frames): the Gram path where it is the cheaper on large frames */
    return auto_stencil_share(ds, fs, order, pca_use_gram((int)ds->n, train_frame_count(ds, fs), HUGE_VAL), s,
                              theta_out, 0, NULL, st);
}

static void set_blocks(RunData *d, const Config *c);

int rundata_open(RunData *d, const Config *c, Status *st) {
    memset(d, 0, sizeof *d);
    d->plane_share = NAN;
    FrameSettings s;
    if (frame_settings_from_config(c, &s, st) || frame_settings_check(&s, st)) return st->code;
    if (frames_scan(c->frames, &d->scan, st)) return st->code;
    d->have_scan = 1;
    /* videos carry their rate: data.fps, when given, must agree with it (0.1%) */
    for (int r = 0; r < d->scan.n_rec; r++) {
        const ScanRecording *v = &d->scan.rec[r];
        if (v->video && fabs(v->vinfo.fps - c->fps) > 1e-3 * v->vinfo.fps)
            return status_set(st, ST_INPUT, "data.fps %g disagrees with %s (%g frames per second): correct it, or "
                              "leave it out and the video's rate is used", c->fps, v->files[0].path, v->vinfo.fps);
    }
    /* images carry no rate: a silent 30 would scale every coefficient by the camera's true rate / 30 */
    if (d->scan.kind == REC_IMAGES && !config_given(c, "data.fps"))
        return status_set(st, ST_INPUT, "data.fps: required for image frames (%s): give the camera's frame rate, "
                                        "e.g. \"data\": {\"fps\": 60}", c->frames);
    if (store_open_for(&d->scan, &s, 0, &d->store, &d->store_info, st)) return st->code;
    d->have_store = 1;
    if (dataset_init(&d->ds, &d->store, &s, st)) return st->code;
    d->have_ds = 1;
    int gram = 0;
    if ((c->derivative == DERIV_AUTO || c->map == MAP_AUTO) &&
        rundata_pca_fits(d->ds.n, train_frame_count(&d->ds, &d->store), c,
                         c->derivative == DERIV_AUTO ? "data.derivative.method auto" : "model.map auto", &gram, st))
        return st->code;
    if (c->derivative == DERIV_AUTO) { /* the stencil from the data, then the samples again */
        if (auto_stencil_share(&d->ds, &d->store, c->order, gram, &s, &d->auto_theta, c->map == MAP_AUTO ? c->latent : 0,
                               &d->plane_share, st))
            return st->code;
        dataset_free(&d->ds);
        d->have_ds = 0;
        if (dataset_init(&d->ds, &d->store, &s, st)) return st->code;
        d->have_ds = 1;
        d->auto_window = s.sg_window, d->auto_degree = s.sg_degree;
    }
    if (c->map == MAP_AUTO && c->derivative != DERIV_AUTO && rundata_plane_share(&d->ds, &d->store, c->latent, gram, &d->plane_share, st)) {
        char why[sizeof st->msg];
        snprintf(why, sizeof why, "%s", st->msg);
        return status_set(st, st->code, "model.map auto: the frames' principal directions: %s (set model.map linear "
                          "or curved)", why);
    }
    set_blocks(d, c);
    return 0;
}

/* The blocks a sample gathers and the TrainData over them, as model.derivatives wants them. */
static void set_blocks(RunData *d, const Config *c) {
    int latent = c->derivatives == DERIVS_LATENT;
    d->k = latent ? 2 * d->ds.sten.m + 1 : c->order + 1;
    d->batch = c->batch > 0 ? c->batch : 1;
    TrainData *td = &d->td;
    td->n_in = (int)d->ds.n;
    td->k = d->k;
    td->n_train = d->ds.count[SPLIT_TRAIN];
    td->n_val = d->ds.count[SPLIT_VAL];
    td->dt = d->ds.dt;
    td->sample_frame = d->ds.samples[SPLIT_TRAIN];
    td->sten = latent ? &d->ds.sten : NULL;
    td->gather = gather;
    td->gather_shared = gather_shared;
    td->frame_sten = latent ? NULL : &d->ds.sten;
    td->ctx = d;
}

int rundata_pca_fits(long n, long N, const Config *c, const char *why, int *gram, Status *st) {
    MemEstimate e;
    model_memory(c, n, 1, 1, &e);
    *gram = pca_use_gram((int)n, N, e.budget);
    double need = pca_bytes((int)n, N, *gram);
    if (need <= e.budget) return 0;
    if (*gram)
        return status_set(st, ST_INPUT, "frames of %ld values: %s analyses the %ld training frames in a %ld x %ld matrix "
                          "and their copy, about %.3g GB, above train.memory_budget (%.3g GB): shrink the frames with "
                          "data.size (e.g. [64, 64]) or data.crop, or raise the budget", n, why, N, N, N, need / 1e9,
                          e.budget / 1e9);
    return status_set(st, ST_INPUT, "frames of %ld values: %s analyses them in a %ld x %ld matrix of about %.3g GB, "
                      "above train.memory_budget (%.3g GB): shrink the frames with data.size (e.g. [64, 64]) or "
                      "data.crop, or raise the budget", n, why, n, n, need / 1e9, e.budget / 1e9);
}

int rundata_plane_share(const Dataset *ds, const FrameStore *fs, int q, int gram, double *share, Status *st) {
    long n = ds->n;
    if (q > n) q = (int)n;
    float *x = malloc((size_t)n * sizeof *x);
    double *mean = malloc((size_t)n * sizeof *mean), *vecs = malloc((size_t)q * n * sizeof *vecs);
    double *vals = malloc((size_t)q * sizeof *vals), total = 0;
    int rc = 0;
    if (!x || !mean || !vecs || !vals) {
        rc = status_set(st, ST_RUNTIME, "out of memory");
        goto done;
    }
    if ((rc = train_frames_pca(ds, fs, q, gram, x, mean, vecs, vals, &total, st))) goto done;
    *share = leading_share(vals, q, total);
done:
    free(x), free(mean), free(vecs), free(vals);
    return rc;
}

int rundata_apply_map(RunData *d, Config *c, Status *st) {
    config_apply_map(c, c->map != MAP_AUTO ? c->map : d->plane_share >= MAP_LINEAR_SHARE ? MAP_LINEAR : MAP_CURVED);
    set_blocks(d, c);
    return config_validate(c, st);
}

void rundata_memory(const RunData *d, const Config *c, MemEstimate *e) {
    long batch = c->batch < d->td.n_train ? c->batch : d->td.n_train;
    model_memory(c, d->td.n_in, d->k, batch, e);
}

int rundata_memory_check(const RunData *d, const Config *c, Status *st) {
    MemEstimate e;
    rundata_memory(d, c, &e);
    if (e.bytes <= e.budget) return 0;
    return status_set(st, ST_INPUT,
                      "the run would need about %.1f GB of memory (samples of %ld values, %.3g parameters, "
                      "checkpoints of %.1f GB each), above train.memory_budget (%.1f GB): shrink the frames with "
                      "data.size (e.g. [64, 64]) or data.crop, or the model (model.encoder), or raise the budget",
                      e.bytes / 1e9, e.n_in, e.params, e.checkpoint_bytes / 1e9, e.budget / 1e9);
}

int rundata_source_fps(Config *c, Status *st) {
    if (!c->frames[0]) return 0;
    FrameScan scan;
    if (frames_scan(c->frames, &scan, st)) return 0; /* the same error comes again at the start */
    double fps;
    char from[4096];
    int rc = frames_source_rate(&scan, &fps, from, sizeof from, st);
    frames_scan_free(&scan);
    if (rc || fps <= 0) return rc;
    if (config_given(c, "data.fps")) {
        if (fabs(fps - c->fps) > 1e-3 * fps)
            return status_set(st, ST_INPUT, "data.fps %g disagrees with %s (%g per second): correct it, or leave it "
                                            "out and the recordings' rate is used", c->fps, from, fps);
        return 0;
    }
    char set[64];
    snprintf(set, sizeof set, "data.fps=%.17g", fps);
    return config_set(c, set, st);
}

int run_config_load(const char *run_dir, Config *c, Status *st) {
    struct stat sb;
    if (stat(run_dir, &sb) != 0 || !S_ISDIR(sb.st_mode)) return status_set(st, ST_INPUT, "%s: no such run folder", run_dir);
    char path[CFG_PATH_MAX + 32];
    snprintf(path, sizeof path, "%s/config.json", run_dir);
    if (stat(path, &sb) != 0) return status_set(st, ST_INPUT, "%s: missing (not a run folder?)", path);
    return config_load_run(c, path, st);
}

/* The store content of the frames c names (opened as training would). */
static int frames_content(const Config *c, uint64_t *content, Status *st) {
    RunData d;
    int rc = rundata_open(&d, c, st);
    if (!rc) *content = store_content_digest(&d.store);
    rundata_close(&d);
    return rc;
}

int run_frames_reachable(const char *run_dir, const Config *c, const char *cmd, Status *st) {
    struct stat sb;
    if (!c->frames[0] || stat(c->frames, &sb) == 0) return 0;
    return status_set(st, ST_INPUT,
                      "%s: the run's frames are not at %s any more; if they moved, give their new place: framelaw "
                      "%s %s --set data.frames=NEW (their content is checked against the run's)",
                      run_dir, c->frames, cmd, run_dir);
}

int run_frames_move(const char *run_dir, Config *c, const char *old, int argc, char **argv, int quiet, Status *st) {
    char *abs = realpath(c->frames, NULL);
    if (!abs)
        return status_set(st, ST_INPUT, "data.frames %s: %s", c->frames, strerror(errno));
    int same = !strcmp(abs, old);
    snprintf(c->frames, sizeof c->frames, "%s", abs);
    free(abs);
    if (same) return 0;
    uint64_t now, then;
    char where[CFG_PATH_MAX];
    if (frames_content(c, &now, st)) return st->code;
    if (!provenance_frames_content(run_dir, &then, where, sizeof where)) {
        /* a run from before the content was recorded: the old place, when it is still there */
        struct stat sb;
        if (stat(old, &sb) != 0)
            return status_set(st, ST_INPUT,
                              "%s: the run records no digest of its frames' content (it was trained before framelaw "
                              "recorded one) and %s is gone, so %s cannot be checked; put the frames back at %s and "
                              "resume the run once (that records the digest), then move them",
                              run_dir, old, c->frames, old);
        Config *o = malloc(sizeof *o);
        if (!o) return status_set(st, ST_RUNTIME, "out of memory");
        *o = *c;
        snprintf(o->frames, sizeof o->frames, "%s", old);
        int rc = frames_content(o, &then, st);
        free(o);
        if (rc) return rc;
        snprintf(where, sizeof where, "%s", old);
    }
    if (now != then)
        return status_set(st, ST_INPUT,
                          "data.frames %s: not the frames this run was trained on (their content differs from the "
                          "frames read at %s); give the folder that holds those frames",
                          c->frames, where);
    if (!c->frames_origin[0]) snprintf(c->frames_origin, sizeof c->frames_origin, "%s", old);
    char path[CFG_PATH_MAX + 32];
    snprintf(path, sizeof path, "%s/config.json", run_dir);
    char *json = config_to_json(c);
    int rc = atomic_write_bytes(path, json, strlen(json), st);
    free(json);
    if (!rc) rc = provenance_append(run_dir, "move", argc, argv, 0, c->frames, now, st);
    if (!rc && !quiet)
        fprintf(stderr, "framelaw: %s: the frames moved from %s to %s (same content); config.json follows them\n",
                run_dir, old, c->frames);
    return rc;
}
