/* io/run/train.c: the epoch loop (see train.h).
 *
 * Longer than 800 lines, on purpose for now: besides the loop it holds the passes over a whole split
 * that the loop calls at its fixed points (the data's scale, the start-ups from principal
 * directions and Isomap, the warm-up's least-squares fit, the thresholding and selection passes)
 * and the checkpoints of the run folder. They all read and write the one run state, `Run`, and its
 * checkpoint metadata, whose order of updates is what makes a resumed run bit-identical to an
 * uninterrupted one; the mathematics of each pass is already below io/ (nn/pca, nn/isomap,
 * sparse/thresh_lsq, sparse/select), so what remains here is their order against that state. The
 * seam for a split is the passes (from "passes over a split" to "model.init = isomap", about 360
 * lines) behind a small internal header exposing `Run`. */
#include "io/run/train.h"

#include <dirent.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "io/fs/clock.h"
#include "io/fs/files.h"
#include "io/fs/term.h"
#include "io/run/checkpoint.h"
#include "io/run/runlog.h"
#include "nn/adam.h"
#include "nn/mat.h"
#include "nn/isomap.h"
#include "nn/pca.h"
#include "sparse/select.h"
#include "sparse/thresh_lsq.h"

void model_memory(const Config *c, long n_in, int blocks, long batch, MemEstimate *e) {
    memset(e, 0, sizeof *e);
    e->n_in = n_in;
    /* encoder n -> h1 -> ... -> latent, decoder the reverse (or its own widths) */
    double p = 0, widths = 0, prev = (double)n_in;
    for (int i = 0; i < c->n_encoder && i < CFG_MAX_LIST; i++)
        p += prev * c->encoder[i] + c->encoder[i], prev = c->encoder[i], widths += c->encoder[i];
    p += prev * c->latent + c->latent;
    prev = c->latent;
    int nd = c->n_decoder < 0 ? c->n_encoder : c->n_decoder;
    for (int i = 0; i < nd && i < CFG_MAX_LIST; i++) {
        int w = c->n_decoder < 0 ? c->encoder[c->n_encoder - 1 - i] : c->decoder[i];
        p += prev * w + w, prev = w, widths += w;
    }
    p += prev * (double)n_in + (double)n_in;
    p += 64.0 * c->latent; /* the law: a few dozen coefficients per equation */
    e->params = p;
    if (batch < 1) batch = 1;
    e->bytes = 4.0 * 6 * p + 4.0 * (double)batch * ((double)n_in * (2.0 * blocks + 4) + 3.0 * blocks * widths);
    e->checkpoint_bytes = 4.0 * 3 * p;
    long pages = sysconf(_SC_PHYS_PAGES), page = sysconf(_SC_PAGESIZE);
    e->physical = pages > 0 && page > 0 ? (double)pages * (double)page : INFINITY;
    e->budget = c->mem_budget > 0 ? c->mem_budget * 1073741824.0 : 0.5 * e->physical;
}

int model_memory_check(const Config *c, int n_in, Status *st) {
    MemEstimate e;
    model_memory(c, n_in, c->order + 1, c->batch, &e);
    if (e.bytes <= e.physical) return 0;
    char list[256];
    size_t k = 0;
    for (int i = 0; i < c->n_encoder && i < CFG_MAX_LIST && k < sizeof list - 16; i++)
        k += (size_t)snprintf(list + k, sizeof list - k, "%s%d", i ? ", " : "", c->encoder[i]);
    list[k] = 0;
    return status_set(st, ST_INPUT,
                      "model.encoder [%s]: a model of %.3g parameters on %d values per frame needs about %.3g GB, "
                      "more than this machine's %.3g GB of memory (narrower layers, or a smaller data.size or "
                      "train.batch)", list, e.params, n_in, e.bytes / 1e9, e.physical / 1e9);
}

int model_spec_from_config(const Config *c, int n_in, ModelSpec *sp, Status *st) {
    memset(sp, 0, sizeof *sp);
    sp->n_in = n_in;
    sp->n_latent = c->latent;
    sp->order = c->order;
    sp->n_enc = c->n_encoder;
    for (int i = 0; i < c->n_encoder; i++) sp->enc_widths[i] = c->encoder[i];
    sp->dec_mirror = c->n_decoder < 0;
    sp->n_dec = c->n_decoder < 0 ? 0 : c->n_decoder;
    for (int i = 0; i < sp->n_dec; i++) sp->dec_widths[i] = c->decoder[i];
    sp->act = c->activation;
    if (sp->act == ACT_COUNT || sp->act == ACT_NONE)
        return status_set(st, ST_INPUT, "model.activation: not an activation of hidden layers (%d)", (int)c->activation);
    if (sp->n_enc + 1 > MLP_MAX_LAYERS || sp->n_dec + 1 > MLP_MAX_LAYERS)
        return status_set(st, ST_INPUT, "model.encoder: at most %d hidden layers", MLP_MAX_LAYERS - 1);
    if (model_memory_check(c, n_in, st)) return st->code;
    LibrarySpec *l = &sp->lib;
    *l = library_spec_default(c->latent, c->order);
    l->constant = c->lib_constant;
    l->degree = c->lib_degree;
    l->trig = c->lib_trig;
    l->trig_velocity = c->lib_trig_velocity;
    l->n_freq = c->n_lib_freq;
    for (int i = 0; i < c->n_lib_freq && i < LIB_MAX_FREQ; i++) l->freq[i] = c->lib_freq[i];
    l->n_include = c->n_lib_include;
    l->n_exclude = c->n_lib_exclude;
    for (int i = 0; i < c->n_lib_include && i < LIB_MAX_EDITS; i++)
        snprintf(l->include[i], LIB_NAME_MAX, "%s", c->lib_include[i]);
    for (int i = 0; i < c->n_lib_exclude && i < LIB_MAX_EDITS; i++)
        snprintf(l->exclude[i], LIB_NAME_MAX, "%s", c->lib_exclude[i]);
    return 0;
}

static double lr_at(const Config *c, long epoch) {
    if (c->schedule == SCHED_STEP && c->sched_every > 0)
        return c->lr * pow(c->sched_factor, (double)(epoch / c->sched_every));
    if (c->schedule == SCHED_COSINE && c->epochs > 0)
        return c->lr_min + 0.5 * (c->lr - c->lr_min) * (1 + cos(M_PI * (double)epoch / (double)c->epochs));
    return c->lr;
}

/* ---- checkpoints in the run directory -------------------------------------------------------- */

static int cmp_desc(const void *a, const void *b) { return strcmp(*(char *const *)b, *(char *const *)a); }

/* Names of the periodic / stop checkpoints, newest first (zero-padded names sort by time). */
static int list_checkpoints(const char *dir, char ***names_out) {
    DIR *d = opendir(dir);
    *names_out = NULL;
    if (!d) return 0;
    int n = 0, cap = 0;
    char **names = NULL;
    struct dirent *e;
    while ((e = readdir(d))) {
        size_t len = strlen(e->d_name);
        if (strncmp(e->d_name, "ckpt-", 5) || len < 10 || strcmp(e->d_name + len - 5, ".ckpt")) continue;
        if (n == cap) {
            cap = cap ? 2 * cap : 16;
            char **nn = realloc(names, (size_t)cap * sizeof *nn);
            if (!nn) break;
            names = nn;
        }
        names[n++] = strdup(e->d_name);
    }
    closedir(d);
    if (n) qsort(names, (size_t)n, sizeof *names, cmp_desc);
    *names_out = names;
    return n;
}

static void free_names(char **names, int n) {
    for (int i = 0; i < n; i++) free(names[i]);
    free(names);
}

/* Keep the newest `keep` checkpoints. */
static void prune_checkpoints(const char *dir, int keep) {
    char **names;
    int n = list_checkpoints(dir, &names);
    for (int i = keep; i < n; i++) {
        char path[4200];
        snprintf(path, sizeof path, "%s/%s", dir, names[i]);
        unlink(path);
    }
    free_names(names, n);
}

/* ---- the state of a run ---------------------------------------------------------------------- */

typedef struct {
    const Config *cfg;
    const TrainData *ds;
    Model *m;
    ParamSet *ps;
    CkptMeta meta;
    long *order;        /* (n_train) */
    double rec_norm, dx_norm;   /* loss.normalize: 1 / var(x), 1 / mean(x'^2 or x''^2); else 1 */
    char ckpt_dir[4150];
} Run;

static int save(Run *r, const char *name, char *written, Status *st) {
    char path[4200];
    snprintf(path, sizeof path, "%s/%s", r->ckpt_dir, name);
    long n_mask = (long)r->m->lib.n_terms * r->m->n_latent;
    int rc = ckpt_write(path, &r->meta, r->ps, r->m->mask, n_mask, r->order, r->ds->n_train, st);
    if (!rc && written) snprintf(written, 4200, "%s", path);
    return rc;
}

static int save_periodic(Run *r, char *written, Status *st) {
    char name[64];
    snprintf(name, sizeof name, "ckpt-%08lld-%06lld.ckpt", (long long)r->meta.epoch, (long long)r->meta.batch);
    int rc = save(r, name, written, st);
    if (!rc) prune_checkpoints(r->ckpt_dir, r->cfg->ckpt_keep > 0 ? r->cfg->ckpt_keep : 1);
    return rc;
}

/* Newest checkpoint that reads back whole and matches the config; corrupt ones are reported. *found
 * (when not NULL) receives the number of checkpoint files there were, readable or not. */
static int load_latest(Run *r, int quiet, int allow_fresh, int *found, Status *st) {
    char **names;
    int n = list_checkpoints(r->ckpt_dir, &names);
    if (found) *found = n;
    long n_mask = (long)r->m->lib.n_terms * r->m->n_latent;
    long batch = r->cfg->batch < r->ds->n_train ? r->cfg->batch : r->ds->n_train; /* as train_run's B */
    if (batch < 1) batch = 1;
    if (n == 0 && allow_fresh) { /* stopped before the first checkpoint: the run starts over, same seed */
        if (!quiet) fprintf(stderr, "framelaw: no checkpoint yet in %s; starting the run from the beginning\n", r->ckpt_dir);
        free_names(names, n);
        status_ok(st);
        return 0;
    }
    int rc = status_set(st, ST_INPUT, "%s: no checkpoint to resume from", r->ckpt_dir);
    for (int i = 0; i < n; i++) {
        char path[4200];
        snprintf(path, sizeof path, "%s/%s", r->ckpt_dir, names[i]);
        CkptMeta meta;
        Status s2;
        long long name_epoch, name_batch;
        int named = sscanf(names[i], "ckpt-%lld-%lld.ckpt", &name_epoch, &name_batch) == 2;
        if (ckpt_read(path, &meta, r->ps, r->m->mask, n_mask, r->order, r->ds->n_train, batch, &s2) ||
            (named && (name_epoch != meta.epoch || name_batch != meta.batch) &&
             status_set(&s2, ST_INPUT, "%s: checkpoint section META: epoch %lld batch %lld, but its name says epoch "
                        "%lld batch %lld", path, (long long)meta.epoch, (long long)meta.batch, name_epoch,
                        name_batch))) {
            if (!quiet) fprintf(stderr, "framelaw: skipping %s\n", s2.msg);
            rc = status_set(st, ST_INPUT, "%s", s2.msg);
            continue;
        }
        if (meta.config_digest != config_digest(r->cfg)) {
            char keys[512];
            config_safe_keys_text(keys, sizeof keys);
            rc = status_set(st, ST_INPUT,
                            "%s: the config changed since this checkpoint; only these keys may change on resume: %s",
                            path, keys);
            break;
        }
        r->meta = meta;
        for (long j = 0; j < n_mask; j++) r->m->maskf[j] = r->m->mask[j] ? 1.0f : 0.0f;
        rc = 0;
        status_ok(st);
        if (!quiet) fprintf(stderr, "framelaw: resuming from %s (epoch %lld)\n", path, (long long)meta.epoch);
        break;
    }
    free_names(names, n);
    return rc;
}

/* ---- progress -------------------------------------------------------------------------------- */

static void fmt_duration(double s, char *buf, size_t n) {
    if (s < 0 || !isfinite(s)) snprintf(buf, n, "?");
    else if (s < 60) snprintf(buf, n, "%.0fs", s);
    else if (s < 3600) snprintf(buf, n, "%dm%02ds", (int)(s / 60), (int)fmod(s, 60));
    else snprintf(buf, n, "%dh%02dm", (int)(s / 3600), (int)fmod(s / 60, 60));
}

/* ---- validation ------------------------------------------------------------------------------ */

/* ---- passes over a split --------------------------------------------------------------------- */

void batches_begin(TrainBatches *it, const TrainData *ds, int split, long N, long span, int Bmax) {
    memset(it, 0, sizeof *it);
    it->ds = ds, it->split = split, it->N = N, it->span = span < N ? N : span, it->Bmax = Bmax;
    it->idx = nn_alloc((size_t)(Bmax > 0 ? Bmax : 1) * sizeof *it->idx);
}

int batches_next(TrainBatches *it, float *X, Status *st) {
    if (it->next >= it->N) return 0;
    if (it->ds->stop && *it->ds->stop)
        return -status_set(st, TRAIN_STOPPED, "stopped by request in a pass over the %s set",
                           it->split ? "validation" : "training");
    it->s0 = it->next;
    it->B = (int)(it->N - it->s0 < it->Bmax ? it->N - it->s0 : it->Bmax);
    for (int i = 0; i < it->B; i++) it->idx[i] = (it->s0 + i) * it->span / it->N;
    it->next += it->B;
    int rc = it->ds->gather(it->ds->ctx, it->split, it->idx, it->B, X, st);
    return rc ? -rc : 1;
}

void batches_end(TrainBatches *it) {
    nn_free(it->idx);
    it->idx = NULL;
}

int train_encode_set(const TrainData *ds, const Model *m, ParamSet *ps, Tape *t, float *X, int Bmax, double *state,
                     double *target, Status *st) {
    int d = m->n_latent, k = m->order + 1, nv = m->lib.n_vars;
    float *z = nn_alloc((size_t)k * Bmax * d * sizeof *z); /* (k B, d) */
    TrainBatches it;
    int rc;
    batches_begin(&it, ds, 0, ds->n_train, ds->n_train, Bmax);
    while ((rc = batches_next(&it, X, st)) > 0) {
        tape_reset(t);
        model_encode(t, m, ps, X, it.B, k, z);
        for (int b = 0; b < it.B; b++) {
            long s = it.s0 + b;
            for (int j = 0; j < nv; j++) state[s * nv + j] = z[((long)(j / d) * it.B + b) * d + j % d];
            for (int j = 0; j < d; j++) target[s * d + j] = z[((long)(k - 1) * it.B + b) * d + j];
        }
    }
    batches_end(&it);
    nn_free(z);
    return rc < 0 ? -rc : 0;
}

static int validate(Run *r, Tape *t, float *X, int Bmax, double *out, Status *st) {
    const TrainData *ds = r->ds;
    r->m->dz_relative = r->cfg->loss_normalize;
    LossWeights w = {(float)(r->cfg->w_rec * r->rec_norm), (float)(r->cfg->w_dx * r->dx_norm), (float)r->cfg->w_dz,
                     0.0f};
    double sum = 0;
    TrainBatches it;
    int rc;
    batches_begin(&it, ds, 1, ds->n_val, ds->n_val, Bmax);
    while ((rc = batches_next(&it, X, st)) > 0) {
        tape_reset(t);
        LossParts p;
        model_loss(t, r->m, r->ps, X, it.B, &w, &p);
        sum += p.total * it.B;
    }
    batches_end(&it);
    *out = ds->n_val ? sum / (double)ds->n_val : NAN;
    return rc < 0 ? -rc : 0;
}

/* ---- the data's scale, for loss.normalize ----------------------------------------------------- */

/* One pass over the training set in order: var(x) (per value over the samples, averaged over the
 * values) and the mean square of the highest derivative block (x' or x''). Deterministic, so a
 * resumed run gets the same figures. */
static int data_scales(Run *r, const TrainData *ds, int Bmax, float *X, Status *st) {
    r->rec_norm = r->dx_norm = 1.0;
    if (!r->cfg->loss_normalize) return 0;
    long n = ds->n_in, total = ds->n_train;
    int k = ds->k;
    double *sum = nn_calloc((size_t)n, sizeof *sum), *sq = nn_calloc((size_t)n, sizeof *sq), dms = 0;
    TrainBatches it;
    int rc;
    batches_begin(&it, ds, 0, total, total, Bmax);
    while ((rc = batches_next(&it, X, st)) > 0) {
        int B = it.B;
        for (int b = 0; b < B; b++) {
            const float *x = X + (long)b * n, *dd = X + ((long)(k - 1) * B + b) * n;
            for (long p = 0; p < n; p++) {
                sum[p] += x[p];
                sq[p] += (double)x[p] * x[p];
                dms += (double)dd[p] * dd[p];
            }
        }
    }
    batches_end(&it);
    rc = rc < 0 ? -rc : 0;
    if (!rc) {
        double var = 0;
        for (long p = 0; p < n; p++) {
            double m = sum[p] / (double)total;
            var += sq[p] / (double)total - m * m;
        }
        var /= (double)n;
        dms /= (double)total * (double)n;
        r->rec_norm = var > 1e-20 ? 1.0 / var : 1.0;
        /* with derivatives in latent space the blocks are frames and loss.dx is not used */
        r->dx_norm = ds->sten || !(dms > 1e-20) ? 1.0 : 1.0 / dms;
    }
    nn_free(sum), nn_free(sq);
    return rc;
}

int train_validation_loss(const Config *c, const TrainData *ds, Model *m, ParamSet *ps, double *out, Status *st) {
    Run r;
    memset(&r, 0, sizeof r);
    r.cfg = c, r.ds = ds, r.m = m, r.ps = ps;
    int B = c->batch < ds->n_train ? c->batch : (int)(ds->n_train > 0 ? ds->n_train : 1);
    float *X = nn_alloc((size_t)ds->k * B * ds->n_in * sizeof(float)); /* (k B, n_in) */
    Tape t;
    tape_init(&t, 256, (size_t)64 << 20);
    int rc = data_scales(&r, ds, B, X, st);
    if (!rc) rc = validate(&r, &t, X, B, out, st);
    tape_free(&t);
    nn_free(X);
    return rc;
}

/* ---- threshold.measure contribution: the terms' scales over the training set -------------------- */

static int threshold_contribution(Run *r, const TrainData *ds, Tape *t, float *X, int Bmax, Status *st) {
    Model *m = r->m;
    int T = m->lib.n_terms, d = m->n_latent;
    double *theta2 = nn_calloc((size_t)T + d, sizeof *theta2), *scale = nn_alloc((size_t)T * d * sizeof *scale);
    TrainBatches it;
    int rc;
    batches_begin(&it, ds, 0, ds->n_train, ds->n_train, Bmax);
    while ((rc = batches_next(&it, X, st)) > 0) model_accumulate_scales(t, m, r->ps, X, it.B, theta2, theta2 + T);
    batches_end(&it);
    if (!rc) {
        model_term_scales(m, theta2, theta2 + T, scale);
        model_threshold_scaled(m, r->ps, scale, r->cfg->threshold);
    }
    nn_free(theta2), nn_free(scale);
    return rc < 0 ? -rc : 0;
}

/* ---- threshold.select: the first pass selects the law by forecasts ------------------------------ */

static int select_pass(Run *r, const TrainData *ds, Tape *t, float *X, int Bmax, int quiet, Status *st) {
    Model *m = r->m;
    int d = m->n_latent, nv = m->lib.n_vars, T = m->lib.n_terms;
    long N = ds->n_train;
    if (!ds->sample_frame) return status_set(st, ST_RUNTIME, "threshold.select: the data gives no sample times");
    double *state = nn_alloc((size_t)N * nv * sizeof *state), *target = nn_alloc((size_t)N * d * sizeof *target);
    long *rs = nn_alloc((size_t)(N + 1) * sizeof *rs);
    double *xi = nn_alloc((size_t)T * d * sizeof *xi);
    uint8_t *mask = nn_alloc((size_t)T * d);
    int rc = 0, nr = 0;
    if ((rc = train_encode_set(ds, m, r->ps, t, X, Bmax, state, target, st))) goto done;
    for (long i = 0; i < N; i++)
        if (i == 0 || ds->sample_frame[i] != ds->sample_frame[i - 1] + 1) rs[nr++] = i;
    rs[nr] = N;
    SelectData D = {N, nv, d, state, target, nr, rs, ds->dt};
    SelectOptions so = select_defaults();
    SelectPath path;
    if ((rc = select_law(&m->lib, &D, NULL, &so, xi, mask, &path, st))) goto done;
    float *w = params_val(r->ps, m->xi).d;
    for (long i = 0; i < (long)T * d; i++) {
        m->mask[i] = mask[i];
        m->maskf[i] = mask[i] ? 1.0f : 0.0f;
        w[i] = mask[i] ? (float)xi[i] : 0.0f;
    }
    model_apply_mask(m, r->ps);
    if (!quiet) {
        fprintf(stderr, "\nframelaw: selection over %d candidate laws (%d segments of %d samples):\n", path.n, path.segments,
                path.horizon);
        for (int c = 0; c < path.n; c++)
            fprintf(stderr, "  %s %2d terms  fit %.3f  forecast %.3f  score %.3f  (level %d, threshold %.3g, step %d)\n",
                    path.e[c].chosen ? "*" : " ", path.e[c].active, path.e[c].fit, path.e[c].forecast, path.e[c].score,
                    path.e[c].level, path.e[c].threshold, path.e[c].step);
    }
    select_path_free(&path);
done:
    nn_free(state), nn_free(target), nn_free(rs), nn_free(xi), nn_free(mask);
    return rc;
}

/* ---- the end of the warm-up: Xi from thresholded least squares ------------------------------- */

/* Encode every training sample, then fit z' (first order) or z'' (second order) on the library of
 * z (or of z, z') by sequentially thresholded least squares. Xi takes the fit; the mask stays as it
 * is (the thresholding passes prune). A failed fit (e.g. a rank-deficient library on collapsed
 * latents) leaves Xi as it was and says so. */
static int warmup_fit(Run *r, const TrainData *ds, Tape *t, float *X, int Bmax, int quiet, Status *st) {
    Model *m = r->m;
    int d = m->n_latent, nv = m->lib.n_vars, T = m->lib.n_terms;
    long N = ds->n_train;
    double *theta = nn_alloc((size_t)N * T * sizeof *theta), *target = nn_alloc((size_t)N * d * sizeof *target);
    double *state = nn_alloc((size_t)N * nv * sizeof *state);
    double *xi = nn_alloc((size_t)T * d * sizeof *xi);
    uint8_t *mask = nn_alloc((size_t)T * d);
    int rc = train_encode_set(ds, m, r->ps, t, X, Bmax, state, target, st);
    if (rc) goto done;
    library_eval(&m->lib, theta, state, N);
    ThreshLsqOptions opt = thresh_lsq_defaults();
    opt.threshold = r->cfg->threshold;
    Status s2;
    if (thresh_lsq_fit(xi, mask, theta, target, N, T, d, NULL, &opt, NULL, &s2)) {
        if (!quiet) fprintf(stderr, "\nframelaw: the warm-up fit failed (%s); Xi starts at 0\n", s2.msg);
        goto done;
    }
    float *w = params_val(r->ps, m->xi).d;
    for (long i = 0; i < (long)T * d; i++) w[i] = m->mask[i] ? (float)xi[i] : 0.0f;
done:
    nn_free(theta), nn_free(target), nn_free(state), nn_free(xi), nn_free(mask);
    return rc;
}

/* ---- model.init = pca -------------------------------------------------------------------------- */

/* The encoder's first layer (n_in, h) projects on the h leading principal directions of the
 * training frames, whitened: W[:, j] = v_j / sqrt(lambda_j), b_j = -mean . W[:, j], so its
 * pre-activations start centred with unit variance. The decoder's output bias is set so that it
 * starts at the mean frame: b = mean - s(0) * (column sums of its last W). Deterministic. */
static int pca_init(Run *r, const TrainData *ds, float *X, int Bmax, Status *st) {
    Model *m = r->m;
    int n = ds->n_in, h = m->enc.widths[1];
    if (h > n) h = n;
    MemEstimate e; /* the path rundata_pca_fits checked against the budget */
    model_memory(r->cfg, n, 1, 1, &e);
    Pca p;
    if (pca_use_gram(n, ds->n_train, e.budget)) {
        pca_begin_gram(&p, n, ds->n_train);
        if (h > ds->n_train - 1) h = (int)ds->n_train - 1; /* N samples span N - 1 directions; Glorot's for the rest */
    } else {
        pca_begin(&p, n);
    }
    TrainBatches it;
    int got;
    batches_begin(&it, ds, 0, ds->n_train, ds->n_train, Bmax);
    while ((got = batches_next(&it, X, st)) > 0) pca_add(&p, X, it.B); /* the primal rows only */
    batches_end(&it);
    if (got < 0) {
        pca_free(&p);
        return -got;
    }
    double *mean = malloc((size_t)n * sizeof *mean), *vecs = malloc((size_t)h * n * sizeof *vecs);
    double *vals = malloc((size_t)h * sizeof *vals);
    int rc = !mean || !vecs || !vals ? status_set(st, ST_RUNTIME, "out of memory") : pca_finish(&p, h, mean, vecs, vals, st);
    if (!rc) {
        Mat W = params_val(r->ps, m->enc.W[0]), b = params_val(r->ps, m->enc.b[0]); /* (n, h1), (1, h1) */
        for (int j = 0; j < W.cols; j++) {
            double bj = 0;
            for (int i = 0; i < n; i++) {
                double w = j < h ? vecs[(long)j * n + i] / sqrt(vals[j] > 1e-12 ? vals[j] : 1e-12) : W.d[(long)i * W.cols + j];
                W.d[(long)i * W.cols + j] = (float)w;
                bj -= mean[i] * w;
            }
            b.d[j] = (float)bj;
        }
        int L = m->dec.n_layers - 1;
        Mat Wd = params_val(r->ps, m->dec.W[L]), bd = params_val(r->ps, m->dec.b[L]); /* (h_last, n), (1, n) */
        float s0[4];
        act_table[L > 0 ? m->dec.act : ACT_NONE].fn(0.0f, s0);
        for (int j = 0; j < n; j++) {
            double cs = 0;
            for (int i = 0; i < Wd.rows; i++) cs += Wd.d[(long)i * n + j];
            bd.d[j] = (float)(mean[j] - (L > 0 ? s0[0] : 0.0f) * cs);
        }
    }
    free(mean), free(vecs), free(vals);
    return rc;
}

/* ---- model.init = isomap ----------------------------------------------------------------------- */

/* After the PCA start: embed up to model.init_frames training frames (evenly spaced) by Isomap in
 * as many dimensions as the latent has, then fit the encoder to that embedding (x -> y) and the
 * decoder to its inverse (y -> x) by Adam for model.init_epochs epochs over those frames. The
 * embedding follows the manifold the frames lie on, so the latent starts as a coordinate along it
 * instead of a fold of it. Adam's moments and step count are reset afterwards: training proper
 * starts fresh from these weights. Deterministic. */
static int isomap_init(Run *r, const TrainData *ds, float *X, int Bmax, const TrainOpts *o, AdamCfg ad, Status *st) {
    int quiet = o->quiet, tty = !quiet && isatty(fileno(stderr));
    Model *m = r->m;
    ParamSet *ps = r->ps;
    long n = ds->n_in, N = ds->n_train < r->cfg->init_frames ? ds->n_train : r->cfg->init_frames;
    int d = m->n_latent;
    float *F = malloc((size_t)N * n * sizeof *F), *Yf = malloc((size_t)N * d * sizeof *Yf);
    double *Y = malloc((size_t)N * d * sizeof *Y);
    int rc = 0, k_used = 0, bridges = 0;
    double t0 = clock_seconds();
    if (!F || !Yf || !Y) {
        rc = status_set(st, ST_RUNTIME, "out of memory");
        goto done;
    }
    TrainBatches it;
    batches_begin(&it, ds, 0, N, ds->n_train, Bmax); /* N frames spread evenly over the training set */
    /* the first block: the samples' frames, or with derivatives in latent space the first frame of each
     * sample's window (a training frame all the same) */
    while ((rc = batches_next(&it, X, st)) > 0) memcpy(F + it.s0 * n, X, (size_t)it.B * n * sizeof *F);
    batches_end(&it);
    if (rc < 0) {
        rc = -rc;
        goto done;
    }
    rc = 0;
    if (!quiet) fprintf(stderr, "framelaw: isomap of %ld frames in %d dimension%s...", N, d, d > 1 ? "s" : "");
    if ((rc = isomap_embed(F, N, n, d, 0, Y, &k_used, &bridges, st))) {
        if (!quiet) fprintf(stderr, "\n");
        char why[sizeof st->msg]; /* never format a status message into itself */
        snprintf(why, sizeof why, "%s", st->msg);
        status_set(st, st->code, "model.init isomap: %s (model.init pca avoids it)", why);
        goto done;
    }
    if (bridges && !quiet)
        fprintf(stderr, " the frames form %d separate groups (recordings that never pass through the same states), "
                "joined at their closest frames;", bridges + 1);
    for (long i = 0; i < N * d; i++) Yf[i] = (float)Y[i];
    double var = 0; /* per-value variance of the embedded frames: the decoder term's scale */
    for (long j = 0; j < n; j++) {
        double s = 0, q = 0;
        for (long i = 0; i < N; i++) s += F[i * n + j], q += (double)F[i * n + j] * F[i * n + j];
        var += q / N - (s / N) * (s / N);
    }
    var /= (double)n;
    float wdec = (float)(var > 1e-20 ? 1.0 / var : 1.0);
    /* on a terminal the progress line below gets a row of its own */
    if (!quiet) fprintf(stderr, " %d neighbours, %.1f s; fitting the autoencoder to it...%s", k_used, clock_seconds() - t0,
                        tty ? "\n" : "");
    Tape t;
    tape_init(&t, 64, (size_t)16 << 20);
    long nb = (N + Bmax - 1) / Bmax;
    double last = 0, t_fit = clock_seconds();
    for (long e = 0; e < r->cfg->init_epochs; e++) {
        if (o->stop && *o->stop) { /* train_run says what a resume does */
            rc = status_set(st, TRAIN_STOPPED, "stopped by request while fitting the autoencoder to the embedding");
            break;
        }
        if (tty && e > 0) {
            double per = (clock_seconds() - t_fit) / (double)e;
            char line[160];
            snprintf(line, sizeof line, "framelaw: fitting the autoencoder to the embedding: epoch %ld/%ld  ETA %.0f s  loss %.3g",
                     e, r->cfg->init_epochs, per * (double)(r->cfg->init_epochs - e), last);
            term_progress(stderr, 1, line);
        }
        double acc = 0;
        for (long b = 0; b < nb; b++) {
            long s0 = b * Bmax;
            int B = (int)(N - s0 < Bmax ? N - s0 : Bmax);
            tape_reset(&t);
            params_zero_grad(ps);
            Node *x = nn_input(&t, F + s0 * n, B, (int)n), *y = nn_input(&t, Yf + s0 * d, B, d);
            Node *le = nn_mean_sq(&t, nn_sub(&t, mlp_forward(&t, &m->enc, ps, x, 1), y));
            Node *ld = nn_mean_sq(&t, nn_sub(&t, mlp_forward(&t, &m->dec, ps, y, 1), x));
            Node *loss = nn_add(&t, le, nn_scale(&t, ld, wdec));
            tape_backward(&t, loss);
            adam_step(ps, &ad);
            acc += loss->val.d[0] * B;
        }
        last = acc / (double)N;
    }
    tape_free(&t);
    if (rc) goto done;
    if (tty) fprintf(stderr, "\r\033[Kframelaw: fitted the autoencoder to the embedding:");
    memset(ps->m, 0, (size_t)ps->n * sizeof *ps->m);
    memset(ps->v, 0, (size_t)ps->n * sizeof *ps->v);
    ps->step = 0;
    if (!quiet) fprintf(stderr, " loss %.3g, %.1f s\n", last, clock_seconds() - t0);
done:
    free(F), free(Yf), free(Y);
    return rc;
}

/* ---- set-up ---------------------------------------------------------------------------------- */

static int setup(Run *r, const Config *cfg, const TrainData *ds, const char *run_dir, Model *m, ParamSet *ps,
                 Status *st) {
    memset(r, 0, sizeof *r);
    memset(m, 0, sizeof *m); /* so that model_free is safe whatever fails below */
    r->cfg = cfg;
    r->ds = ds;
    r->m = m;
    r->ps = ps;
    ModelSpec sp;
    params_init(ps);
    if (model_spec_from_config(cfg, ds->n_in, &sp, st)) return st->code;
    if (model_init(m, ps, &sp, st)) return st->code;
    params_alloc(ps);
    if (m->lib.n_terms > ds->n_train && ds->n_train > 0) {
        /* more unknowns per equation than samples: the model is not determined by the data */
        return status_set(st, ST_INPUT,
                          "library has %d terms but the training set only %ld samples: record more or longer "
                          "recordings, or shrink the library (library.degree, library.trig)",
                          m->lib.n_terms, ds->n_train);
    }
    if (ds->sten) model_set_window(m, ds->sten, ds->dt);
    else if (ds->frame_sten) model_set_frame_stencil(m, ds->frame_sten, ds->dt);
    rng_seed(&r->meta.rng, cfg->seed);
    model_init_params(m, ps, &r->meta.rng);
    r->order = nn_alloc((size_t)(ds->n_train > 0 ? ds->n_train : 1) * sizeof *r->order);
    for (long i = 0; i < ds->n_train; i++) r->order[i] = i;
    r->meta.config_digest = config_digest(cfg);
    r->meta.best_val = INFINITY;
    r->meta.best_epoch = -1;
    snprintf(r->ckpt_dir, sizeof r->ckpt_dir, "%s/checkpoints", run_dir);
    return 0;
}

int train_load_latest(const char *run_dir, const Config *cfg, int n_in, long n_train, Model *m, ParamSet *ps,
                      int *found, Status *st) {
    if (found) *found = -1;
    TrainData ds = {0};
    ds.n_in = n_in;
    ds.n_train = n_train;
    Run r;
    int rc = setup(&r, cfg, &ds, run_dir, m, ps, st);
    if (!rc) rc = load_latest(&r, 1, 0, found, st);
    nn_free(r.order);
    return rc;
}

/* ---- the law between steps ------------------------------------------------------------------- */

/* A copy of what the end-of-epoch work may change (Xi with its Adam moments, the mask), so that a
 * stop request in the middle of that work can put the law back as the last step left it. */
typedef struct {
    long n;
    float *val, *m, *v;     /* (n) each */
    uint8_t *mask;          /* (n) */
} LawCopy;

static void law_alloc(LawCopy *c, const Model *m, const ParamSet *ps) {
    const ParamView *v = &ps->views[m->xi];
    c->n = (long)v->rows * v->cols;
    c->val = nn_alloc((size_t)3 * c->n * sizeof *c->val);
    c->m = c->val + c->n, c->v = c->m + c->n;
    c->mask = nn_alloc((size_t)c->n);
}

static void law_keep(LawCopy *c, const Model *m, const ParamSet *ps) {
    long off = ps->views[m->xi].off;
    memcpy(c->val, ps->val + off, (size_t)c->n * sizeof *c->val);
    memcpy(c->m, ps->m + off, (size_t)c->n * sizeof *c->m);
    memcpy(c->v, ps->v + off, (size_t)c->n * sizeof *c->v);
    memcpy(c->mask, m->mask, (size_t)c->n);
}

static void law_restore(const LawCopy *c, Model *m, ParamSet *ps) {
    long off = ps->views[m->xi].off;
    memcpy(ps->val + off, c->val, (size_t)c->n * sizeof *c->val);
    memcpy(ps->m + off, c->m, (size_t)c->n * sizeof *c->m);
    memcpy(ps->v + off, c->v, (size_t)c->n * sizeof *c->v);
    memcpy(m->mask, c->mask, (size_t)c->n);
    for (long i = 0; i < c->n; i++) m->maskf[i] = m->mask[i] ? 1.0f : 0.0f;
}

static void law_free(LawCopy *c) {
    nn_free(c->val), nn_free(c->mask);
    c->val = NULL, c->mask = NULL;
}

/* ---- the loop -------------------------------------------------------------------------------- */

/* The next epoch's order in runs of R consecutive samples (train.run_length): the runs [k R, (k + 1)
 * R) (the last one shorter) in the order they hold in `order`, which holds whole runs (the first
 * epoch's identity or the last epoch's runs, also after a resume), shuffled and laid out again.
 * blk: ceil(n / R) longs of scratch. */
static void shuffle_runs(Rng *rng, long *order, long n, long R, long *blk) {
    long nb = 0;
    for (long i = 0; i < n; i++)
        if (order[i] % R == 0) blk[nb++] = order[i] / R;
    NN_CHECK(nb == (n + R - 1) / R, "shuffle_runs: %ld run starts among %ld samples in runs of %ld", nb, n, R);
    rng_shuffle(rng, blk, nb);
    long pos = 0;
    for (long k = 0; k < nb; k++)
        for (long s = blk[k] * R; s < n && s < (blk[k] + 1) * R; s++) order[pos++] = s;
}

int train_run(const TrainOpts *o, const TrainData *ds, Model *m, ParamSet *ps, TrainResult *res, Status *st) {
    const Config *c = o->cfg;
    memset(res, 0, sizeof *res);
    res->best_val = NAN;
    TrainData dsv = *ds; /* the passes over a split see the stop request */
    dsv.stop = o->stop;
    ds = &dsv;
    Run r;
    int rc = setup(&r, c, ds, o->run_dir, m, ps, st);
    if (rc) { nn_free(r.order); return rc; }
    if (ds->n_train < 1) { nn_free(r.order); return status_set(st, ST_INPUT, "the training set is empty"); }
    if (ds->k != (m->win ? m->win : m->order + 1)) {
        nn_free(r.order);
        return status_set(st, ST_INPUT, "dataset gives %d blocks, model needs %d", ds->k, m->win ? m->win : m->order + 1);
    }
    RunLogWriter log;
    if (fs_make_dirs(r.ckpt_dir, st) || (o->resume && load_latest(&r, o->quiet, 1, NULL, st)) ||
        runlog_open(&log, o->run_dir, o->resume, (long)r.meta.epoch, st)) {
        nn_free(r.order);
        return st->code;
    }

    nn_set_threads(c->threads > 0 ? c->threads : (int)sysconf(_SC_NPROCESSORS_ONLN));
    LawCopy law;
    law_alloc(&law, m, ps);
    int tty = isatty(fileno(stderr));
    int B = c->batch < ds->n_train ? c->batch : (int)ds->n_train;
    long n_batches = (ds->n_train + B - 1) / B;
    float *X = nn_alloc((size_t)ds->k * B * ds->n_in * sizeof(float)); /* (k B, n_in) */
    /* train.run_length > 1: batches of runs. Each distinct frame of a batch once: always in latent
     * mode (the stencil windows overlap within a batch of shuffled samples too: on the benchmark's L,
     * 1,536 samples of 8 recordings in batches of 256 with 9-frame windows, about 1,255 distinct frames
     * of 2,304 a batch on average), in frames mode with runs (shuffled samples rarely share a frame of
     * a 3-frame window) */
    long R = c->run_length > 1 ? c->run_length : 1;
    long *blk = R > 1 ? nn_alloc((size_t)((ds->n_train + R - 1) / R) * sizeof *blk) : NULL;
    int shared = ds->gather_shared && (m->win || (m->fwin && R > 1)), fshared = shared && !m->win;
    int *map = shared ? nn_alloc((size_t)(m->win ? m->win : m->fwin) * B * sizeof *map) : NULL; /* (win B) */
    /* frames mode: the distinct frames apart from X, which holds the targets x, x' (, x'') */
    float *F = fshared ? nn_alloc((size_t)m->fwin * B * ds->n_in * sizeof *F) : NULL;
    int fresh = ps->step == 0, use_pca = c->init == INIT_PCA || c->init == INIT_ISOMAP;
    if (fresh && o->start) { /* a given start (refinement): its values and mask instead of model.init */
        NN_CHECK(o->start->n == ps->n, "train_run: a start of %zu parameters for a model of %zu", o->start->n, ps->n);
        memcpy(ps->val, o->start->val, ps->n * sizeof *ps->val);
        long n_mask = (long)m->lib.n_terms * m->n_latent;
        for (long i = 0; i < n_mask; i++) {
            m->mask[i] = o->start_mask[i] ? 1 : 0;
            m->maskf[i] = m->mask[i] ? 1.0f : 0.0f;
        }
        model_apply_mask(m, ps);
        fresh = 0, use_pca = 0; /* nothing of the start-ups */
    }
    Tape t;
    tape_init(&t, 256, (size_t)64 << 20);
    if ((fresh && ((use_pca && (rc = pca_init(&r, ds, X, B, st))) ||
                   (c->init == INIT_ISOMAP &&
                    (rc = isomap_init(&r, ds, X, B, o, (AdamCfg){(float)c->lr, (float)c->beta1, (float)c->beta2,
                                                                         (float)c->eps}, st))))) || /* a fresh model */
        (rc = data_scales(&r, ds, B, X, st)) ||
        /* threshold.select: the law is first chosen on the latent of the start-up, before joint
         * training can bend the latent towards the dense law of the whole library */
        (fresh && c->threshold_select != SELECT_NONE && (rc = select_pass(&r, ds, &t, X, B, o->quiet, st)))) {
        if (rc == TRAIN_STOPPED) {
            if (fresh) { /* nothing saved yet: a resume starts the run over, with the same result */
                if (!o->quiet) fputc('\n', stderr);
                char what[64] = "the start-up";
                if (use_pca) snprintf(what, sizeof what, "the %s start (model.init)", model_init_names[c->init]);
                rc = status_set(st, ST_RUNTIME, "stopped during %s, before the first checkpoint: `framelaw resume %s` "
                                "starts the run over", what, o->run_dir);
            } else { /* resumed: the checkpoint it started from is where it still stands */
                rc = save_periodic(&r, res->checkpoint, st);
                res->interrupted = !rc;
            }
        }
        goto out;
    }
    AdamCfg ad = {(float)c->lr, (float)c->beta1, (float)c->beta2, (float)c->eps};
    /* Runs of R consecutive samples hold about R times fewer independent stretches of the motion
     * than shuffled samples: the step's learning rate is the schedule's over sqrt(R), as the
     * square-root scaling rule for Adam would have it for a batch R times smaller (S. Malladi, K.
     * Lyu, A. Panigrahi, S. Arora, "On the SDEs and Scaling Rules for Adaptive Gradient Algorithms",
     * NeurIPS 2022; from memory). Measured on the battery's pulse: runs of 8 at the unscaled 0.001
     * fail 5 of 5 seeds, at 0.00035 pass 4 of 5, runs of 16 at 0.00025 pass 5 of 5; at 0.00025 the
     * puck's fast mode needs 3000 epochs, with runs or without, which is why the default runs of 16
     * come with 3000 epochs (docs/battery.md). */
    double lr_scale = 1.0 / sqrt((double)R);
    long refine_from = c->epochs - c->refine_epochs; /* first epoch of the refinement phase */
    double t_start = clock_seconds(), seconds0 = r.meta.seconds;
    long epoch0 = (long)r.meta.epoch, steps = 0;
    double t_shown = 0;
    rc = 0;

    while (r.meta.epoch < c->epochs) {
        long epoch = (long)r.meta.epoch;
        int refine = epoch >= refine_from, warm = epoch < c->warmup_epochs;
        m->warmup = warm;
        m->dz_relative = c->loss_normalize;
        m->l1_contribution = c->threshold_measure == MEASURE_CONTRIBUTION;
        LossWeights w = {(float)(c->w_rec * r.rec_norm), (float)(c->w_dx * r.dx_norm), warm ? 0.0f : (float)c->w_dz,
                         refine || warm ? 0.0f : (float)c->w_l1};
        ad.lr = (float)(lr_at(c, epoch) * lr_scale);
        double t_epoch = clock_seconds();
        if (r.meta.batch == 0) {
            if (R > 1) shuffle_runs(&r.meta.rng, r.order, ds->n_train, R, blk);
            else rng_shuffle(&r.meta.rng, r.order, ds->n_train);
            memset(r.meta.acc, 0, sizeof r.meta.acc);
            r.meta.acc_n = 0;
        }
        for (long b = r.meta.batch; b < n_batches; b++) {
            long s0 = b * B;
            int nb = (int)(ds->n_train - s0 < B ? ds->n_train - s0 : B);
            int U = 0;
            if ((fshared && ds->gather_shared(ds->ctx, 0, r.order + s0, nb, F, map, &U, st)) ||
                (shared && !fshared ? ds->gather_shared(ds->ctx, 0, r.order + s0, nb, X, map, &U, st)
                                    : ds->gather(ds->ctx, 0, r.order + s0, nb, X, st))) {
                rc = st->code;
                goto out;
            }
            tape_reset(&t);
            params_zero_grad(ps);
            LossParts p;
            Node *loss = fshared  ? model_loss_frames_shared(&t, m, ps, X, F, U, map, nb, &w, &p)
                         : shared ? model_loss_shared(&t, m, ps, X, U, map, nb, &w, &p)
                                  : model_loss(&t, m, ps, X, nb, &w, &p);
            if (!isfinite(p.total)) {
                rc = status_set(st, ST_RUNTIME,
                                "training diverged at epoch %ld (the loss is not finite); a lower optimizer.lr, "
                                "smaller loss.dx / loss.dz, or a larger train.batch usually help; resume from the "
                                "last good checkpoint in %s after changing them in a new run",
                                epoch + 1, r.ckpt_dir);
                goto out;
            }
            tape_backward(&t, loss);
            adam_step(ps, &ad);
            model_apply_mask(m, ps);
            double parts[5] = {p.total, p.rec, p.dx, p.dz, p.l1};
            for (int i = 0; i < 5; i++) r.meta.acc[i] += parts[i] * nb;
            r.meta.acc_n += nb;
            r.meta.batch = b + 1;
            steps++;
            if ((o->stop && *o->stop) || (o->stop_after_steps && steps >= o->stop_after_steps)) {
                if (r.meta.batch == n_batches) { /* the epoch is complete: finish its bookkeeping below */
                    break;
                }
                r.meta.seconds = seconds0 + clock_seconds() - t_start;
                if ((rc = save_periodic(&r, res->checkpoint, st))) goto out;
                res->interrupted = 1;
                goto out;
            }
        }
        /* end of an epoch: its steps are done (batch == n_batches); the passes over the whole set
         * (warm-up fit, thresholding, validation) follow. A stop request ends them at their next batch:
         * the law goes back to what the last step left and the checkpoint keeps batch == n_batches,
         * so that a resume does the end-of-epoch work again from the same state, bit for bit. */
        double mean[5];
        for (int i = 0; i < 5; i++) mean[i] = r.meta.acc[i] / (double)(r.meta.acc_n ? r.meta.acc_n : 1);
        long done = epoch + 1;
        int64_t thresholds_kept = r.meta.n_thresholds;
        law_keep(&law, m, ps);
        if (warm && done == c->warmup_epochs) {
            m->warmup = 0;
            if (c->warmup_fit) rc = warmup_fit(&r, ds, &t, X, B, o->quiet, st);
        }
        if (!rc && !refine && !warm && c->threshold_every > 0 && done % c->threshold_every == 0 && done <= refine_from) {
            if (c->threshold_select == SELECT_EVERY) rc = select_pass(&r, ds, &t, X, B, o->quiet, st);
            else if (c->threshold_measure == MEASURE_CONTRIBUTION) rc = threshold_contribution(&r, ds, &t, X, B, st);
            else model_threshold(m, ps, (float)c->threshold);
            r.meta.n_thresholds++;
        }
        double val = NAN;
        int validated = ds->n_val > 0 && (done % c->validate_every == 0 || done == c->epochs);
        if (!rc && validated) rc = validate(&r, &t, X, B, &val, st);
        if (rc == TRAIN_STOPPED) {
            law_restore(&law, m, ps);
            r.meta.n_thresholds = thresholds_kept;
            r.meta.seconds = seconds0 + clock_seconds() - t_start;
            if (!(rc = save_periodic(&r, res->checkpoint, st))) res->interrupted = 1;
            goto out;
        }
        if (rc) goto out;
        r.meta.epoch = done;
        r.meta.batch = 0;
        r.meta.seconds = seconds0 + clock_seconds() - t_start;
        double ep_s = clock_seconds() - t_epoch;
        long active = model_active(m);
        RunLogRow row = {done, refine ? RUNLOG_REFINE : warm ? RUNLOG_WARMUP : RUNLOG_TRAIN, ad.lr, mean[0], mean[1],
                         mean[2], mean[3], mean[4], active, validated, val, r.meta.seconds, ep_s};
        if ((rc = runlog_append(&log, &row, st))) goto out;
        if (validated && val < r.meta.best_val) {
            r.meta.best_val = val;
            r.meta.best_epoch = done;
            if ((rc = save(&r, "best.ckpt", NULL, st))) goto out;
        }
        res->last_loss = mean[0];
        int stopping = (o->stop && *o->stop) || (o->stop_after_steps && steps >= o->stop_after_steps);
        if (done == c->epochs || stopping || (c->ckpt_every > 0 && done % c->ckpt_every == 0)) {
            if ((rc = save_periodic(&r, res->checkpoint, st))) goto out;
        }
        /* on a terminal one updating line every epoch; otherwise a plain line at most every 10 s, at
         * validations and at the end, so that a log file stays readable */
        double t_now = clock_seconds();
        int show = tty || validated || done == c->epochs || stopping || t_now - t_shown >= 10.0;
        if (!o->quiet && show) {
            t_shown = t_now;
            double el = t_now - t_start, rate = (double)(done - epoch0) / (el > 0 ? el : 1e-9);
            char eta[32];
            fmt_duration((double)(c->epochs - done) / rate, eta, sizeof eta);
            char vbuf[32] = "", line[256];
            if (validated) snprintf(vbuf, sizeof vbuf, "  val %.3e", val);
            /* the fields most wanted first: a terminal narrower than the line cuts it from the end */
            snprintf(line, sizeof line, "epoch %ld/%ld %s  ETA %s  loss %.3e%s  active %ld  %.2f ep/s  rec %.3e  dx %.3e"
                     "  dz %.3e  l1 %.3g", done, c->epochs, refine ? "refine" : warm ? "warmup" : "train", eta, mean[0],
                     vbuf, active, rate, mean[1], mean[2], mean[3], mean[4]);
            term_progress(stderr, tty, line);
        }
        if (stopping) { res->interrupted = 1; break; }
    }
out:
    if (!o->quiet && tty) fputc('\n', stderr);
    law_free(&law);
    runlog_close(&log);
    res->epochs_done = (long)r.meta.epoch;
    res->best_val = r.meta.best_val;
    res->active = model_active(m);
    tape_free(&t);
    nn_free(X);
    nn_free(map);
    nn_free(F);
    nn_free(blk);
    nn_free(r.order);
    return rc;
}
