/* io/run/results.c: export and forecast (see results.h and docs/formats.md). */
#include "io/run/results.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "io/fs/atomic_file.h"
#include "io/fs/files.h"
#include "io/data/images.h"
#include "io/data/series.h"
#include "io/run/runcanonical.h"
#include "io/run/runensemble.h"
#include "nn/mat.h"
#include "sparse/equation.h"
#include "sparse/integrate.h"

enum { CHUNK = 256 }; /* frames encoded or decoded per batch */

/* ---- loading --------------------------------------------------------------------------------- */

void loaded_run_close(LoadedRun *r) {
    run_ensemble_free(r->ens);
    r->ens = NULL;
    run_canonical_free(r->canon);
    r->canon = NULL;
    if (r->have_tape) tape_free(&r->tape);
    if (r->have_model) {
        coef_free(&r->coef);
        model_free(&r->m);
        params_free(&r->ps);
    }
    if (r->have_data) rundata_close(&r->data);
    r->have_tape = r->have_model = r->have_data = 0;
}

int loaded_run_open(LoadedRun *r, const char *run_dir, Status *st) {
    memset(r, 0, sizeof *r);
    snprintf(r->dir, sizeof r->dir, "%s", run_dir);
    if (run_config_load(run_dir, &r->cfg, st) || run_frames_reachable(run_dir, &r->cfg, "export", st)) return st->code;
    /* the run's threads, as training set them (train.threads, 0: every core): the encoding, the
     * ensemble's members; the results do not depend on them */
    nn_set_threads(r->cfg.threads > 0 ? r->cfg.threads : (int)sysconf(_SC_NPROCESSORS_ONLN));
    if (rundata_open(&r->data, &r->cfg, st)) {
        rundata_close(&r->data);
        return st->code;
    }
    r->have_data = 1;
    int found;
    int rc = train_load_latest(run_dir, &r->cfg, r->data.td.n_in, r->data.td.n_train, &r->m, &r->ps, &found, st);
    r->have_model = 1;
    coef_init(&r->coef, r->m.lib.n_terms, r->m.n_latent);
    if (rc) {
        if (found == 0) status_set(st, ST_INPUT, "%s: no checkpoint (has the run been trained?)", run_dir);
        loaded_run_close(r);
        return st->code;
    }
    if (r->cfg.derivatives == DERIVS_LATENT) model_set_window(&r->m, &r->data.ds.sten, r->data.ds.dt);
    coef_from_float(&r->coef, params_val(&r->ps, r->m.xi).d, r->m.mask);
    tape_init(&r->tape, 256, (size_t)16 << 20);
    r->have_tape = 1;
    return 0;
}

/* ---- helpers --------------------------------------------------------------------------------- */

/* A recording name made safe as a file name. */
static void file_stem(const char *name, char *out, size_t n) {
    size_t k = 0;
    for (const char *p = name; *p && k + 1 < n; p++)
        out[k++] = (*p == '/' || *p == '\\' || (unsigned char)*p < 32) ? '_' : *p;
    out[k] = 0;
}

/* Blocks of frame-sized rows that encode_frames needs in X for k output blocks. */
static int x_blocks(const LoadedRun *r, int k) { return r->m.win && k > 1 ? r->m.win : k; }

/* Encode frames (B) with their derivatives: z (k B, d) for k blocks (1: z only). X holds
 * x_blocks(r, k) * B rows. */
static void encode_frames(LoadedRun *r, const long *frames, int B, int k, float *X, float *z) {
    long n = r->data.ds.n;
    if (k == 1) /* any frame, edges included: no stencil */
        for (int b = 0; b < B; b++) dataset_frame(&r->data.ds, frames[b], X + (long)b * n);
    else if (r->m.win) /* derivatives in latent space: the stencil's frames */
        for (int j = 0; j < r->m.win; j++)
            for (int b = 0; b < B; b++)
                dataset_frame(&r->data.ds, frames[b] - r->m.win / 2 + j, X + ((long)j * B + b) * n);
    else
        dataset_gather_frames(&r->data.ds, frames, B, X, X + (long)B * n, k >= 3 ? X + 2L * B * n : NULL);
    tape_reset(&r->tape);
    model_encode(&r->tape, &r->m, &r->ps, X, B, k, z);
}

/* Decode z (B, d) to x_hat (B, n). */
static void decode(LoadedRun *r, float *z, int B, float *xh) {
    tape_reset(&r->tape);
    Node *o = mlp_forward(&r->tape, &r->m.dec, &r->ps, nn_input(&r->tape, z, B, r->m.n_latent), 1);
    memcpy(xh, o->val.d, (size_t)B * r->data.ds.n * sizeof(float));
}

/* The model's z' (first order) or z'' (second order) at state s (n_vars): pred (d). */
static void model_rhs(LoadedRun *r, const double *s, double *theta, double *pred) {
    int d = r->m.n_latent, T = r->m.lib.n_terms;
    library_eval(&r->m.lib, theta, s, 1);
    for (int j = 0; j < d; j++) {
        double acc = 0;
        for (int t = 0; t < T; t++) acc += theta[t] * r->coef.xi[t * d + j];
        pred[j] = acc;
    }
}

/* ---- the training region --------------------------------------------------------------------- */

int results_region(LoadedRun *r, Region *reg, Status *st) {
    (void)st;
    int d = r->m.n_latent, order = r->m.order, k = order; /* z (and z') */
    reg->d = d;
    reg->order = order;
    for (int i = 0; i < order * d; i++) reg->zmin[i] = INFINITY, reg->zmax[i] = -INFINITY;
    const Dataset *ds = &r->data.ds;
    long n = ds->n;
    float *X = nn_alloc((size_t)x_blocks(r, k) * CHUNK * n * sizeof(float));
    float *z = nn_alloc((size_t)k * CHUNK * d * sizeof(float));
    long total = ds->count[SPLIT_TRAIN];
    for (long s = 0; s < total; s += CHUNK) {
        int B = (int)(total - s < CHUNK ? total - s : CHUNK);
        encode_frames(r, ds->samples[SPLIT_TRAIN] + s, B, k, X, z);
        for (int blk = 0; blk < k; blk++)
            for (int b = 0; b < B; b++)
                for (int j = 0; j < d; j++) {
                    double v = z[((long)blk * B + b) * d + j];
                    int i = blk * d + j;
                    if (v < reg->zmin[i]) reg->zmin[i] = v;
                    if (v > reg->zmax[i]) reg->zmax[i] = v;
                }
    }
    nn_free(X);
    nn_free(z);
    return 0;
}

static int region_write(const LoadedRun *r, const Region *reg, Status *st) {
    cJSON *o = cJSON_CreateObject();
    int d = reg->d;
    cJSON_AddItemToObject(o, "z_min", cJSON_CreateDoubleArray(reg->zmin, d));
    cJSON_AddItemToObject(o, "z_max", cJSON_CreateDoubleArray(reg->zmax, d));
    cJSON_AddItemToObject(o, "dz_min", cJSON_CreateDoubleArray(reg->zmin + d, reg->order == 2 ? d : 0));
    cJSON_AddItemToObject(o, "dz_max", cJSON_CreateDoubleArray(reg->zmax + d, reg->order == 2 ? d : 0));
    char *txt = cJSON_Print(o);
    cJSON_Delete(o);
    char path[CFG_PATH_MAX + 32];
    snprintf(path, sizeof path, "%s/region.json", r->dir);
    int rc = txt ? atomic_write_bytes(path, txt, strlen(txt), st) : status_set(st, ST_RUNTIME, "out of memory");
    free(txt);
    return rc;
}

static int outside(const Region *reg, const double *y) {
    for (int i = 0; i < reg->order * reg->d; i++)
        if (y[i] < reg->zmin[i] || y[i] > reg->zmax[i]) return 1;
    return 0;
}

/* ---- export ---------------------------------------------------------------------------------- */

int results_write_equations(LoadedRun *r, int quiet, Status *st) {
    if (run_ensemble_get(r, quiet, st) || run_canonical_get(r, quiet, st)) return st->code;
    const EqStyle styles[2] = {EQ_TEXT, EQ_LATEX};
    const char *names[2] = {"equations.txt", "equations.tex"};
    char path[CFG_PATH_MAX + 32];
    for (int i = 0; i < 2; i++) {
        size_t head = run_canonical_format(NULL, 0, styles[i], r, EQ_DIGITS);
        size_t need = head + equation_format(NULL, 0, styles[i], &r->m.lib, r->coef.xi, r->coef.mask, EQ_DIGITS) + 2;
        char *buf = malloc(need);
        if (!buf) return status_set(st, ST_RUNTIME, "out of memory");
        run_canonical_format(buf, need, styles[i], r, EQ_DIGITS);
        equation_format(buf + head, need - head, styles[i], &r->m.lib, r->coef.xi, r->coef.mask, EQ_DIGITS);
        size_t len = strlen(buf);
        if (len && buf[len - 1] != '\n') buf[len++] = '\n';
        snprintf(path, sizeof path, "%s/%s", r->dir, names[i]);
        int rc = atomic_write_bytes(path, buf, len, st);
        free(buf);
        if (rc) return rc;
    }
    /* the same digits as the text files, so the JSON's "digits" holds for every text in it */
    cJSON *tree = equation_json(&r->m.lib, r->coef.xi, r->coef.mask, EQ_DIGITS);
    if (tree) cJSON_AddItemToObject(tree, "ensemble", run_ensemble_json(r, EQ_DIGITS));
    cJSON *canon = tree ? run_canonical_json(r, EQ_DIGITS) : NULL;
    if (canon) cJSON_AddItemToObject(tree, "canonical", canon);
    char *json = tree ? cJSON_Print(tree) : NULL;
    cJSON_Delete(tree);
    if (!json) return status_set(st, ST_RUNTIME, "out of memory");
    snprintf(path, sizeof path, "%s/equations.json", r->dir);
    int rc = atomic_write_bytes(path, json, strlen(json), st);
    free(json);
    return rc;
}

/* The canonical law, when a sparser one was found (its coordinates become extra columns). */
static const Canonical *found_canonical(const LoadedRun *r) {
    return r->canon && r->canon->c.status == CANON_FOUND ? &r->canon->c : NULL;
}

/* Columns of a trajectory: t, z*, dz*, (d2z*), model_dz* or model_d2z*; then, with a canonical
 * law, the same blocks in its coordinates: u*, du*, (d2u*), model_du* or model_d2u*. */
static int trajectory_cols(const LoadedRun *r) {
    return 1 + (found_canonical(r) ? 2 : 1) * (r->m.order + 2) * r->m.n_latent;
}

/* The canonical blocks of a row that holds t, z, z' (, z''): u = A z + b, u' = A z', u'' = A z''
 * (with a cubic warp, its derivatives: canonical_map_state, canonical_map_target),
 * and the canonical law's prediction of u' (or u''). */
static void canonical_columns(const LoadedRun *r, const Canonical *c, double *row, double *theta) {
    int d = r->m.n_latent, order = r->m.order, k = order + 1;
    const double *z = row + 1;
    double *u = row + 1 + (k + 1) * d, sigma[LIB_MAX_VARS];
    canonical_map_state(c, sigma, z, 1); /* u (and u') from z (and z') */
    for (int j = 0; j < order * d; j++) u[j] = sigma[j];
    canonical_map_target(c, u + order * d, z, z + order * d, 1); /* the highest derivative */
    canonical_eval(c, &r->m.lib, theta, sigma, 1);
    for (int i = 0; i < d; i++) {
        double acc = 0;
        for (int t = 0; t < r->m.lib.n_terms; t++)
            if (c->mask[t * d + i]) acc += theta[t] * c->xi[t * d + i];
        u[k * d + i] = acc;
    }
}

static int write_trajectory(LoadedRun *r, int rec, Status *st) {
    const StoreRec *sr = &r->data.store.rec[rec];
    const Dataset *ds = &r->data.ds;
    int d = r->m.n_latent, order = r->m.order, k = order + 1, mh = ds->sten.m;
    long n_rows = sr->count - 2L * mh;
    if (n_rows <= 0) return 0;
    int cols = trajectory_cols(r);
    const Canonical *canon = found_canonical(r);
    double *out = nn_alloc((size_t)n_rows * cols * sizeof(double)); /* (n_rows, cols) */
    float *X = nn_alloc((size_t)x_blocks(r, k) * CHUNK * ds->n * sizeof(float));
    float *z = nn_alloc((size_t)k * CHUNK * d * sizeof(float));
    long frames[CHUNK];
    double s[LIB_MAX_VARS], pred[LIB_MAX_VARS], *theta = nn_alloc((size_t)r->m.lib.n_terms * sizeof(double));
    for (long i0 = 0; i0 < n_rows; i0 += CHUNK) {
        int B = (int)(n_rows - i0 < CHUNK ? n_rows - i0 : CHUNK);
        for (int b = 0; b < B; b++) frames[b] = sr->first + mh + i0 + b;
        encode_frames(r, frames, B, k, X, z);
        for (int b = 0; b < B; b++) {
            double *row = out + (i0 + b) * cols;
            row[0] = (double)(mh + i0 + b) * ds->dt;
            for (int blk = 0; blk < k; blk++)
                for (int j = 0; j < d; j++) row[1 + blk * d + j] = z[((long)blk * B + b) * d + j];
            for (int j = 0; j < order * d; j++) s[j] = row[1 + j];
            model_rhs(r, s, theta, pred);
            for (int j = 0; j < d; j++) row[1 + k * d + j] = pred[j];
            if (canon) canonical_columns(r, canon, row, theta);
        }
    }
    nn_free(theta);
    nn_free(X);
    nn_free(z);
    char stem[300], path[CFG_PATH_MAX + 400];
    file_stem(sr->name, stem, sizeof stem);
    snprintf(path, sizeof path, "%s/trajectories/%s.npy", r->dir, stem);
    int rc = npy_write_f64(path, out, n_rows, cols, st);
    if (!rc) {
        snprintf(path, sizeof path, "%s/trajectories/%s.csv", r->dir, stem);
        AtomicFile af;
        rc = atomic_open(&af, path, st);
        if (!rc) {
            fputs("t", af.f);
            const char *pre[3] = {"z", "dz", "d2z"};
            for (int blk = 0; blk < k; blk++)
                for (int j = 0; j < d; j++) fprintf(af.f, ",%s%d", pre[blk], j + 1);
            for (int j = 0; j < d; j++) fprintf(af.f, ",model_%s%d", order == 1 ? "dz" : "d2z", j + 1);
            if (canon) {
                const char *upre[3] = {"u", "du", "d2u"};
                for (int blk = 0; blk < k; blk++)
                    for (int j = 0; j < d; j++) fprintf(af.f, ",%s%d", upre[blk], j + 1);
                for (int j = 0; j < d; j++) fprintf(af.f, ",model_%s%d", order == 1 ? "du" : "d2u", j + 1);
            }
            fputc('\n', af.f);
            for (long i = 0; i < n_rows; i++) {
                for (int c = 0; c < cols; c++) fprintf(af.f, c ? ",%.12g" : "%.12g", out[i * cols + c]);
                fputc('\n', af.f);
            }
            rc = atomic_commit(&af, st);
        }
    }
    nn_free(out);
    return rc;
}

/* Scaled value back to display intensity in [0, 255]. */
static uint8_t to_u8(const LoadedRun *r, long p, float x) {
    const Dataset *ds = &r->data.ds;
    double q = (x - ds->offset[p]) / ds->gain[p];
    double full = r->data.store.elem == STORE_U16 ? 65535.0 : 255.0;
    double v = 255.0 * q / full;
    return (uint8_t)(v < 0 ? 0 : v > 255 ? 255 : lround(v));
}

static int write_reconstruction(LoadedRun *r, int rec, Status *st) {
    const StoreRec *sr = &r->data.store.rec[rec];
    int W = r->data.store.width, H = r->data.store.height;
    long n = r->data.ds.n;
    int nf = sr->count < 4 ? (int)sr->count : 4;
    if (nf < 1 || (long)W * H != n) return 0;
    uint8_t *img = nn_calloc((size_t)nf * H * 3 * W, 1); /* (nf H, 3 W) */
    float *x = nn_alloc((size_t)n * sizeof(float)), *xh = nn_alloc((size_t)n * sizeof(float)), z[LIB_MAX_VARS];
    for (int i = 0; i < nf; i++) {
        long f = sr->first + (nf > 1 ? (sr->count - 1) * i / (nf - 1) : 0);
        dataset_frame(&r->data.ds, f, x);
        tape_reset(&r->tape);
        model_encode(&r->tape, &r->m, &r->ps, x, 1, 1, z);
        decode(r, z, 1, xh);
        for (int y = 0; y < H; y++)
            for (int c = 0; c < W; c++) {
                long p = (long)y * W + c;
                uint8_t a = to_u8(r, p, x[p]), b = to_u8(r, p, xh[p]);
                int diff = 128 + (b - a) / 2;
                uint8_t *row = img + ((size_t)i * H + y) * 3 * W;
                row[c] = a;
                row[W + c] = b;
                row[2 * W + c] = (uint8_t)(diff < 0 ? 0 : diff > 255 ? 255 : diff);
            }
    }
    char stem[300], path[CFG_PATH_MAX + 400];
    file_stem(sr->name, stem, sizeof stem);
    snprintf(path, sizeof path, "%s/reconstructions/%s.png", r->dir, stem);
    int rc = image_write_png_gray(path, img, 3 * W, nf * H, st);
    nn_free(img);
    nn_free(x);
    nn_free(xh);
    return rc;
}

int results_export(LoadedRun *r, int quiet, Status *st) {
    char path[CFG_PATH_MAX + 32];
    if (results_write_equations(r, quiet, st)) return st->code;
    snprintf(path, sizeof path, "%s/trajectories", r->dir);
    if (fs_make_dirs(path, st)) return st->code;
    int images = r->data.store.elem != STORE_F32;
    if (images) {
        snprintf(path, sizeof path, "%s/reconstructions", r->dir);
        if (fs_make_dirs(path, st)) return st->code;
    }
    for (int i = 0; i < r->data.store.n_rec; i++) {
        if (write_trajectory(r, i, st)) return st->code;
        if (images && write_reconstruction(r, i, st)) return st->code;
    }
    Region reg;
    if (results_region(r, &reg, st) || region_write(r, &reg, st)) return st->code;
    if (!quiet) { /* a result, on stdout like forecast's (progress and notes go to stderr) */
        printf("exported %d recordings to %s (equations, trajectories%s, region.json)\n", r->data.store.n_rec, r->dir,
               images ? ", reconstructions" : "");
        fflush(stdout);
    }
    return 0;
}

/* ---- forecast -------------------------------------------------------------------------------- */

typedef struct {
    double mean_err, final_err, max_err, exceeds_at, latent_mean, latent_exceeds_at, extrap_from;
    double floor_err;                   /* mean relative error of the decoded encodings: the frames' floor */
    int start_frames;                   /* frames the start state was fitted to */
    double hold_mean;                   /* the latent error of holding the first state (persistence) */
    int beats_hold;                     /* the law's mean latent error is below it, over every frame */
    long frames;
    double duration;
    char stopped[512];
    int band_members, band_stopped;     /* the ensemble's band (io/run/runensemble.h) */
    double band_exceeds_at, band_final_width;
} FcResult;


/* Frames of the start window (at most a quarter of the recording): the forecast's start state is
 * fitted to the codes of this many frames. Measured on the lantern at 30 fps (6 seeds, 12 held-out
 * recordings of 6.6 s, docs/results.md): against the start from one frame's code, the time within
 * forecast.bound went from a median 0.75 s to 1.58 s with 16 frames and 2.87 s with 32 (every
 * recording longer), the mean latent error from 0.44 to 0.14 and 0.08. */
#define FC_START_FRAMES 32

/* Sum of squares of the latent residuals over the window: the law integrated from y0 against the
 * encoded z at t[0..W-1]; res (W d) gets them. INFINITY when the integration fails. */
static double start_residual(LearnedOde *lo, int nv, int d, const double *y0, const double *t, int W, const float *zw,
                             const OdeOptions *opt, double *res) {
    double y[FC_START_FRAMES * LIB_MAX_VARS], y_end[LIB_MAX_VARS];
    OdeReport rep;
    Status s2;
    if (ode_solve(learned_ode_rhs, lo, nv, t[0], y0, t, W, y, y_end, opt, &rep, &s2)) return INFINITY;
    double ss = 0;
    for (int i = 0; i < W; i++)
        for (int j = 0; j < d; j++) {
            double e = y[i * nv + j] - zw[i * d + j];
            res[i * d + j] = e;
            ss += e * e;
        }
    return ss;
}

/* Solve the (n, n) system A x = b in place (Gaussian elimination with partial pivoting); 0 if singular. */
static int small_solve(double *A, double *b, int n) {
    for (int c = 0; c < n; c++) {
        int p = c;
        for (int i = c + 1; i < n; i++)
            if (fabs(A[i * n + c]) > fabs(A[p * n + c])) p = i;
        if (!(fabs(A[p * n + c]) > 1e-300)) return 0;
        for (int j = 0; j < n; j++) {
            double tmp = A[c * n + j];
            A[c * n + j] = A[p * n + j], A[p * n + j] = tmp;
        }
        double tb = b[c];
        b[c] = b[p], b[p] = tb;
        for (int i = c + 1; i < n; i++) {
            double f = A[i * n + c] / A[c * n + c];
            for (int j = c; j < n; j++) A[i * n + j] -= f * A[c * n + j];
            b[i] -= f * b[c];
        }
    }
    for (int c = n - 1; c >= 0; c--) {
        for (int j = c + 1; j < n; j++) b[c] -= A[c * n + j] * b[j];
        b[c] /= A[c * n + c];
    }
    return 1;
}

/* The start state from a short window instead of one frame: y0 (z, and z' for a second-order law)
 * fitted so that the law's trajectory from it passes closest, in least squares, to the codes of
 * the window's W frames (Levenberg-Marquardt, forward-difference Jacobian, at most 10 steps). One
 * frame's code carries its encoding noise and, for z', the stencil's error into the whole forecast;
 * the fit averages them over the window. y0 is changed only when the fit lowers the residual. */
static void fit_start(LearnedOde *lo, int nv, int d, double *y0, const double *t, int W, const float *zw,
                      const OdeOptions *opt) {
    double res[FC_START_FRAMES * LIB_MAX_VARS], r2[FC_START_FRAMES * LIB_MAX_VARS];
    double J[FC_START_FRAMES * LIB_MAX_VARS * LIB_MAX_VARS], y1[LIB_MAX_VARS];
    double f = start_residual(lo, nv, d, y0, t, W, zw, opt, res), lambda = 1e-3;
    int m = W * d;
    for (int it = 0; it < 10 && isfinite(f); it++) {
        for (int k = 0; k < nv; k++) { /* column k of the Jacobian */
            double h = 1e-6 * (fabs(y0[k]) + 1e-3);
            memcpy(y1, y0, (size_t)nv * sizeof *y1);
            y1[k] += h;
            if (!isfinite(start_residual(lo, nv, d, y1, t, W, zw, opt, r2))) return;
            for (int i = 0; i < m; i++) J[i * nv + k] = (r2[i] - res[i]) / h;
        }
        double A[LIB_MAX_VARS * LIB_MAX_VARS], g[LIB_MAX_VARS];
        int improved = 0;
        for (int tries = 0; tries < 6 && !improved; tries++, lambda *= 10) {
            for (int a = 0; a < nv; a++) {
                g[a] = 0;
                for (int i = 0; i < m; i++) g[a] -= J[i * nv + a] * res[i];
                for (int b = 0; b < nv; b++) {
                    double acc = 0;
                    for (int i = 0; i < m; i++) acc += J[i * nv + a] * J[i * nv + b];
                    A[a * nv + b] = acc;
                }
                A[a * nv + a] *= 1 + lambda;
            }
            if (!small_solve(A, g, nv)) return;
            for (int k = 0; k < nv; k++) y1[k] = y0[k] + g[k];
            double f1 = start_residual(lo, nv, d, y1, t, W, zw, opt, r2);
            if (f1 < f) {
                double gain = f - f1;
                memcpy(y0, y1, (size_t)nv * sizeof *y0);
                memcpy(res, r2, (size_t)m * sizeof *res);
                f = f1, improved = 1, lambda = lambda > 1e-6 ? lambda / 100 : lambda;
                if (gain < 1e-12 * (f1 + 1e-300)) return;
            }
        }
        if (!improved) return;
    }
}

static int forecast_recording(LoadedRun *r, int rec, const Region *reg, FcResult *fr, Status *st) {
    const StoreRec *sr = &r->data.store.rec[rec];
    const Dataset *ds = &r->data.ds;
    int d = r->m.n_latent, order = r->m.order, nv = order * d, mh = ds->sten.m;
    long n = ds->n, f0 = sr->first + mh, n_out = sr->count - mh;
    double dt = ds->dt, bound = r->cfg.fc_bound;
    memset(fr, 0, sizeof *fr);
    fr->exceeds_at = fr->latent_exceeds_at = fr->extrap_from = fr->band_exceeds_at = fr->band_final_width = NAN;
    fr->floor_err = NAN;
    fr->frames = n_out;
    fr->duration = (double)(sr->count - 1) * dt;
    if (n_out < 2) return status_set(st, ST_INPUT, "recording %s: too short to forecast", sr->name);
    /* initial state: encode the first frame with a full stencil (and its derivative) */
    int k0 = order + 1;
    float *X = nn_alloc((size_t)x_blocks(r, k0) * CHUNK * n * sizeof(float));
    float *zb = nn_alloc((size_t)k0 * CHUNK * d * sizeof(float));
    encode_frames(r, &f0, 1, k0, X, zb);
    double y0[LIB_MAX_VARS];
    for (int i = 0; i < nv; i++) y0[i] = zb[i]; /* rows z, z' of the one sample */
    double *t_out = nn_alloc((size_t)n_out * sizeof(double)), *y = nn_alloc((size_t)n_out * nv * sizeof(double));
    for (long i = 0; i < n_out; i++) t_out[i] = (double)(mh + i) * dt;
    for (long i = 0; i < n_out * nv; i++) y[i] = NAN;
    LearnedOde lo;
    learned_ode_init(&lo, &r->m.lib, r->coef.xi, r->coef.mask);
    OdeOptions opt = ode_defaults();
    opt.method = r->cfg.fc_method;
    opt.h = opt.method == ODE_RK4 ? dt / 8 : 0;
    opt.rtol = r->cfg.fc_tol;
    opt.atol = 1e-3 * r->cfg.fc_tol;
    /* A learned model can blow up or turn stiff far outside the states it was trained on: stop at
     * ten times the largest |state| seen in training, or after 1000 steps per frame on average,
     * and report it (the remaining frames count as lost). */
    double extent = 0;
    for (int i = 0; i < nv; i++) {
        if (fabs(reg->zmin[i]) > extent) extent = fabs(reg->zmin[i]);
        if (fabs(reg->zmax[i]) > extent) extent = fabs(reg->zmax[i]);
    }
    opt.bound = 10 * (extent > 0 && isfinite(extent) ? extent : 1.0);
    opt.max_steps = 1000 * n_out;
    OdeReport rep;
    Status s2;
    double y_end[LIB_MAX_VARS];
    { /* the start state fitted to the first frames' codes (fit_start) */
        int W = n_out / 4 < FC_START_FRAMES ? (int)(n_out / 4) : FC_START_FRAMES; /* at most a quarter */
        long wf[FC_START_FRAMES];
        float zw[FC_START_FRAMES * LIB_MAX_VARS];
        for (int i = 0; i < W; i++) wf[i] = f0 + i;
        encode_frames(r, wf, W, 1, X, zw);
        OdeOptions wopt = opt;
        wopt.max_steps = 1000L * W;
        if (W >= 2) fit_start(&lo, nv, d, y0, t_out, W, zw, &wopt);
        fr->start_frames = W >= 2 ? W : 1;
    }
    int rc = ode_solve(learned_ode_rhs, &lo, nv, t_out[0], y0, t_out, (int)n_out, y, y_end, &opt, &rep, &s2);
    learned_ode_free(&lo);
    long good = rc ? rep.n_out : n_out;
    if (rc) snprintf(fr->stopped, sizeof fr->stopped, "%.500s", rep.msg[0] ? rep.msg : s2.msg);
    /* compare: decode the integrated z, encode the real frames */
    float *zf = nn_alloc((size_t)CHUNK * d * sizeof(float)), *xh = nn_alloc((size_t)CHUNK * n * sizeof(float));
    float *ze = nn_alloc((size_t)n_out * d * sizeof(float));
    double *err = nn_alloc((size_t)n_out * sizeof(double)), *lerr = nn_alloc((size_t)n_out * sizeof(double));
    long frames[CHUNK];
    double zsq = 0, floor_sum = 0;
    for (long i0 = 0; i0 < n_out; i0 += CHUNK) {
        int B = (int)(n_out - i0 < CHUNK ? n_out - i0 : CHUNK);
        for (int b = 0; b < B; b++) frames[b] = f0 + i0 + b;
        encode_frames(r, frames, B, 1, X, ze + i0 * d); /* k = 1: no derivatives needed */
        for (int b = 0; b < B; b++)
            for (int j = 0; j < d; j++) {
                double v = ze[(i0 + b) * d + j];
                zsq += v * v;
                zf[b * d + j] = (float)(i0 + b < good ? y[(i0 + b) * nv + j] : 0.0);
            }
        /* the floor: the encoded frames decoded again (no forecast), against the real ones */
        for (int b = 0; b < B; b++)
            for (int j = 0; j < d; j++) zf[b * d + j] = ze[(i0 + b) * d + j];
        decode(r, zf, B, xh);
        for (int b = 0; b < B; b++) {
            double num = 0, den = 0;
            for (long p = 0; p < n; p++) {
                double a = X[(long)b * n + p], e = xh[(long)b * n + p] - a;
                num += e * e;
                den += a * a;
            }
            floor_sum += sqrt(num / (den > 0 ? den : 1));
        }
        for (int b = 0; b < B; b++)
            for (int j = 0; j < d; j++) zf[b * d + j] = (float)(i0 + b < good ? y[(i0 + b) * nv + j] : 0.0);
        decode(r, zf, B, xh);
        /* X now holds the real frames of this chunk (gathered by encode_frames) */
        for (int b = 0; b < B; b++) {
            double num = 0, den = 0;
            for (long p = 0; p < n; p++) {
                double a = X[(long)b * n + p], e = xh[(long)b * n + p] - a;
                num += e * e;
                den += a * a;
            }
            err[i0 + b] = i0 + b < good ? sqrt(num / (den > 0 ? den : 1)) : NAN;
        }
    }
    double zrms = sqrt(zsq / (double)n_out);
    fr->floor_err = floor_sum / (double)n_out;
    /* the ensemble's band: every member's law from the same start (at most 100 steps per frame) */
    EnsembleBands eb;
    OdeOptions bopt = opt;
    bopt.max_steps = 100 * n_out;
    int band_rc = run_ensemble_bands(r, y0, t_out, (int)n_out, zrms, &bopt, &eb, st);
    if (band_rc) {
        nn_free(X), nn_free(zb), nn_free(t_out), nn_free(y), nn_free(zf), nn_free(xh), nn_free(ze), nn_free(err),
            nn_free(lerr);
        return band_rc;
    }
    fr->band_members = eb.members;
    fr->band_stopped = eb.stopped;
    fr->band_exceeds_at = eb.exceeds_at;
    fr->band_final_width = eb.width[n_out - 1];
    double sum = 0, lsum = 0;
    long cnt = 0;
    for (long i = 0; i < n_out; i++) {
        if (i >= good) {
            lerr[i] = NAN;
            continue;
        }
        double num = 0;
        for (int j = 0; j < d; j++) {
            double e = y[i * nv + j] - ze[i * d + j];
            num += e * e;
        }
        lerr[i] = sqrt(num) / (zrms > 0 ? zrms : 1);
        sum += err[i];
        lsum += lerr[i];
        cnt++;
        if (err[i] > fr->max_err) fr->max_err = err[i];
        if (isnan(fr->exceeds_at) && err[i] > bound) fr->exceeds_at = t_out[i];
        if (isnan(fr->latent_exceeds_at) && lerr[i] > bound) fr->latent_exceeds_at = t_out[i];
        if (isnan(fr->extrap_from) && outside(reg, y + i * nv)) fr->extrap_from = t_out[i];
    }
    if (good < n_out) {
        double tb = good < n_out ? t_out[good] : rep.t_bad;
        if (isnan(fr->exceeds_at)) fr->exceeds_at = tb;
        if (isnan(fr->latent_exceeds_at)) fr->latent_exceeds_at = tb;
    }
    fr->mean_err = cnt ? sum / cnt : NAN;
    fr->latent_mean = cnt ? lsum / cnt : NAN;
    /* the trivial law z' = 0: the first encoded state held (the persistence forecast) */
    double hsum = 0;
    for (long i = 0; i < n_out; i++) {
        double num = 0;
        for (int j = 0; j < d; j++) {
            double e = (double)ze[i * d + j] - ze[j];
            num += e * e;
        }
        hsum += sqrt(num) / (zrms > 0 ? zrms : 1);
    }
    fr->hold_mean = hsum / (double)n_out;
    fr->beats_hold = good == n_out && fr->latent_mean < fr->hold_mean;
    fr->final_err = good == n_out ? err[n_out - 1] : NAN;
    /* forecast/<rec>.csv */
    char stem[300], path[CFG_PATH_MAX + 400];
    file_stem(sr->name, stem, sizeof stem);
    snprintf(path, sizeof path, "%s/forecast/%s.csv", r->dir, stem);
    AtomicFile af;
    rc = atomic_open(&af, path, st);
    if (!rc) {
        fputs("t,error,latent_error", af.f);
        for (int j = 0; j < d; j++) fprintf(af.f, ",z%d", j + 1);
        for (int j = 0; j < d; j++) fprintf(af.f, ",zhat%d", j + 1);
        fputs(",outside", af.f);
        for (int j = 0; j < d; j++) fprintf(af.f, ",band_median%d,band_low%d,band_high%d", j + 1, j + 1, j + 1);
        fputs(",band_width\n", af.f);
        for (long i = 0; i < n_out; i++) {
            fprintf(af.f, "%.12g,%.9g,%.9g", t_out[i], err[i], lerr[i]);
            for (int j = 0; j < d; j++) fprintf(af.f, ",%.9g", (double)ze[i * d + j]);
            for (int j = 0; j < d; j++) fprintf(af.f, ",%.9g", y[i * nv + j]);
            fprintf(af.f, ",%d", i < good ? outside(reg, y + i * nv) : 1);
            for (int j = 0; j < d; j++) {
                long q = i * nv + j;
                fprintf(af.f, ",%.9g,%.9g,%.9g", eb.median[q], eb.q05[q], eb.q95[q]);
            }
            fprintf(af.f, ",%.9g\n", eb.width[i]);
        }
        rc = atomic_commit(&af, st);
    }
    nn_free(X);
    nn_free(zb);
    nn_free(t_out);
    nn_free(y);
    nn_free(zf);
    nn_free(xh);
    nn_free(ze);
    nn_free(err);
    nn_free(lerr);
    ensemble_bands_free(&eb);
    return rc;
}

static cJSON *num_or_null(double v) { return isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull(); }

int results_forecast(LoadedRun *r, int quiet, Status *st) {
    if (run_ensemble_get(r, quiet, st)) return st->code;
    Region reg;
    if (results_region(r, &reg, st)) return st->code;
    char path[CFG_PATH_MAX + 32];
    snprintf(path, sizeof path, "%s/forecast", r->dir);
    if (fs_make_dirs(path, st)) return st->code;
    cJSON *root = cJSON_CreateObject(), *list = cJSON_CreateArray();
    cJSON_AddStringToObject(root, "format", "framelaw-forecast");
    cJSON_AddNumberToObject(root, "version", 1);
    cJSON_AddNumberToObject(root, "bound", r->cfg.fc_bound);
    cJSON_AddItemToObject(root, "recordings", list);
    int n_val = 0, rc = 0;
    for (int i = 0; i < r->data.store.n_rec && !rc; i++) {
        if (r->data.ds.rec_split[i] != SPLIT_VAL) continue;
        n_val++;
        FcResult fr;
        if ((rc = forecast_recording(r, i, &reg, &fr, st))) break;
        const char *name = r->data.store.rec[i].name;
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "name", name);
        cJSON_AddNumberToObject(o, "frames", (double)fr.frames);
        cJSON_AddNumberToObject(o, "duration", fr.duration);
        cJSON_AddStringToObject(o, "method", ode_method_names[r->cfg.fc_method]);
        cJSON_AddNumberToObject(o, "start_frames", fr.start_frames);
        cJSON_AddItemToObject(o, "mean_error", num_or_null(fr.mean_err));
        cJSON_AddItemToObject(o, "final_error", num_or_null(fr.final_err));
        cJSON_AddItemToObject(o, "max_error", num_or_null(fr.max_err));
        cJSON_AddItemToObject(o, "exceeds_bound_at", num_or_null(fr.exceeds_at));
        cJSON_AddItemToObject(o, "reconstruction_floor", num_or_null(fr.floor_err));
        cJSON_AddItemToObject(o, "latent_mean_error", num_or_null(fr.latent_mean));
        cJSON_AddItemToObject(o, "latent_exceeds_bound_at", num_or_null(fr.latent_exceeds_at));
        cJSON_AddItemToObject(o, "persistence_latent_mean_error", num_or_null(fr.hold_mean));
        cJSON_AddBoolToObject(o, "beats_persistence", fr.beats_hold);
        cJSON_AddItemToObject(o, "extrapolating_from", num_or_null(fr.extrap_from));
        cJSON_AddItemToObject(o, "stopped", fr.stopped[0] ? cJSON_CreateString(fr.stopped) : cJSON_CreateNull());
        cJSON *band = cJSON_AddObjectToObject(o, "band");
        cJSON_AddNumberToObject(band, "members", fr.band_members);
        cJSON_AddNumberToObject(band, "stopped", fr.band_stopped);
        cJSON_AddItemToObject(band, "width_exceeds_bound_at", num_or_null(fr.band_exceeds_at));
        cJSON_AddItemToObject(band, "final_width", num_or_null(fr.band_final_width));
        cJSON_AddItemToArray(list, o);
        if (!quiet) {
            /* the latent error is the headline: the frames' error starts at the floor of reconstruction */
            printf("forecast %s: latent error ", name);
            if (isfinite(fr.latent_exceeds_at))
                printf("within %.0f%% for %.3f s of %.2f s", 100 * r->cfg.fc_bound, fr.latent_exceeds_at, fr.duration);
            else printf("within %.0f%% throughout %.2f s", 100 * r->cfg.fc_bound, fr.duration);
            printf(" (mean %.1f%%)\n", 100 * fr.latent_mean);
            if (fr.beats_hold)
                printf("  holding the first state instead: mean %.1f%%\n", 100 * fr.hold_mean);
            else
                printf("  warning: the law forecasts no better than holding the first state (mean %.1f%%): it does "
                       "not explain the motion; try a lower threshold.value, more epochs before the first threshold "
                       "pass, or model.init isomap\n", 100 * fr.hold_mean);
            printf("  frames: mean error %.1f%%, where decoding the encoded frames alone gives %.1f%%\n",
                   100 * fr.mean_err, 100 * fr.floor_err);
            if (isfinite(fr.extrap_from))
                printf("  extrapolating beyond the training data from t = %.3f s\n", fr.extrap_from);
            if (fr.stopped[0]) printf("  the model blew up: %s\n", fr.stopped);
            printf("  band of %d ensemble members: ", fr.band_members);
            if (isfinite(fr.band_exceeds_at)) printf("wider than %.0f%% from t = %.3f s", 100 * r->cfg.fc_bound, fr.band_exceeds_at);
            else printf("within %.0f%% throughout", 100 * r->cfg.fc_bound);
            if (fr.band_stopped) printf(" (%d members blew up)", fr.band_stopped);
            printf("\n");
        }
    }
    if (!rc) {
        char *txt = cJSON_Print(root);
        snprintf(path, sizeof path, "%s/forecast.json", r->dir);
        rc = txt ? atomic_write_bytes(path, txt, strlen(txt), st) : status_set(st, ST_RUNTIME, "out of memory");
        free(txt);
        if (!rc && !n_val && !quiet)
            printf("forecast: no held-out recording (data.validation): nothing to forecast\n");
    }
    fflush(stdout);
    cJSON_Delete(root);
    return rc;
}
