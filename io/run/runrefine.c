/* io/run/runrefine.c: refinement in canonical form (see runrefine.h). */
#include "io/run/runrefine.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "io/fs/atomic_file.h"
#include "io/fs/clock.h"
#include "io/fs/files.h"
#include "io/run/runcanonical.h"
#include "io/run/train.h"
#include "io/run/trainset.h"
#include "sparse/canonfold.h"
#include "sparse/thresh_lsq.h"

/* Least squares of y (N, d) on the columns of theta (N, T) that mask (T, d) allows, equation by
 * equation: xi (T, d) out; returns |Y - Theta xi|_F / |Y|_F, or -1 with st set. */
static double masked_fit(const double *theta, const double *y, long N, int T, int d, const uint8_t *mask, double *xi,
                         Status *st) {
    uint8_t *got = nn_alloc((size_t)T * d);
    ThreshLsqOptions opt = thresh_lsq_defaults();
    opt.threshold = 0;
    double res = -1;
    if (!thresh_lsq_fit(xi, got, theta, y, N, T, d, mask, &opt, NULL, st)) {
        double num = 0, den = 0;
        for (long i = 0; i < N; i++)
            for (int j = 0; j < d; j++) {
                double p = 0;
                for (int t = 0; t < T; t++) p += theta[i * T + t] * xi[(long)t * d + j];
                double e = y[i * d + j] - p;
                num += e * e, den += y[i * d + j] * y[i * d + j];
            }
        res = den > 0 ? sqrt(num / den) : 0;
    }
    nn_free(got);
    return res;
}

typedef struct {
    LoadedRun *r;
    const RefineOptions *o;
    const Canonical *c;
    const double *theta_c, *y_c;    /* the learned model's encoded set in canonical coordinates */
    long N;
    float *keep_val, *keep_m, *keep_v;  /* the learned model, put back after each fold */
    uint8_t *keep_mask;
    int64_t keep_step;
    char root[CFG_PATH_MAX + 16];   /* RUN/refine */
} Ctx;

static void put_back(Ctx *x) {
    ParamSet *ps = &x->r->ps;
    memcpy(ps->val, x->keep_val, ps->n * sizeof *ps->val);
    memcpy(ps->m, x->keep_m, ps->n * sizeof *ps->m);
    memcpy(ps->v, x->keep_v, ps->n * sizeof *ps->v);
    ps->step = x->keep_step;
    long n = (long)x->r->m.lib.n_terms * x->r->m.n_latent;
    memcpy(x->r->m.mask, x->keep_mask, (size_t)n);
    for (long i = 0; i < n; i++) x->r->m.maskf[i] = x->r->m.mask[i] ? 1.0f : 0.0f;
}

/* Train candidate `idx` with mask (T, d) from the canonical start in RUN/refine/NN; fills residual
 * and validation loss. */
static int train_candidate(Ctx *x, int idx, const uint8_t *mask, RefineCandidate *cand, Status *st) {
    LoadedRun *r = x->r;
    int T = r->m.lib.n_terms, d = r->m.n_latent;
    double *xi = nn_alloc((size_t)T * d * sizeof *xi);
    Config *cfg = malloc(sizeof *cfg);
    int rc = 0;
    Model m2;
    ParamSet p2;
    int trained = 0;
    memset(&m2, 0, sizeof m2);
    if (!cfg) {
        nn_free(xi);
        return status_set(st, ST_RUNTIME, "out of memory");
    }
    if (masked_fit(x->theta_c, x->y_c, x->N, T, d, mask, xi, st) < 0) {
        rc = st->code;
        goto done;
    }
    Canonical cc = *x->c; /* the same map, the law refitted on this mask */
    cc.xi = xi;
    cc.mask = (uint8_t *)mask;
    if ((rc = canonical_fold(&cc, &r->m, &r->ps, mask, st))) goto done;
    *cfg = r->cfg;
    cfg->epochs = x->o->epochs;
    cfg->refine_epochs = 0;
    cfg->warmup_epochs = 0;
    cfg->w_l1 = 0;
    cfg->threshold_every = (int)(x->o->epochs + 1); /* never: the mask is fixed */
    cfg->threshold_select = SELECT_NONE;
    cfg->validate_every = x->o->epochs; /* once, at the end: the final model's loss */
    cfg->ckpt_every = x->o->epochs;
    cfg->ckpt_keep = 1;
    int w = snprintf(cfg->output, sizeof cfg->output, "%s/%02d", x->root, idx);
    if (w < 0 || (size_t)w >= sizeof cfg->output) {
        rc = status_set(st, ST_INPUT, "%s: path too long", x->root);
        goto done;
    }
    if ((rc = config_validate(cfg, st)) || (rc = fs_make_dirs(cfg->output, st))) goto done;
    {
        char path[CFG_PATH_MAX + 32];
        snprintf(path, sizeof path, "%s/config.json", cfg->output);
        char *json = config_to_json(cfg);
        rc = atomic_write_bytes(path, json, strlen(json), st);
        free(json);
        if (rc) goto done;
    }
    TrainOpts opts = {cfg, cfg->output, 0, 1, x->o->stop, 0, &r->ps, mask};
    TrainResult tr;
    rc = train_run(&opts, &r->data.td, &m2, &p2, &tr, st);
    trained = 1;
    put_back(x);
    if (!rc && tr.interrupted) rc = status_set(st, ST_RUNTIME, "refinement stopped by request; %s is as it was", r->dir);
    if (rc) goto done;
    cand->val = tr.best_val;
    {
        EncodedSet es;
        if ((rc = encoded_training_set(&es, &m2, &p2, &r->data, &r->tape, st))) goto done;
        double *theta = nn_alloc((size_t)es.N * T * sizeof *theta);
        library_eval(&m2.lib, theta, es.state, es.N);
        cand->residual = masked_fit(theta, es.target, es.N, T, d, mask, xi, st);
        nn_free(theta);
        encoded_set_free(&es);
        if (cand->residual < 0) rc = st->code;
    }
    cand->active = 0;
    for (long i = 0; i < (long)T * d; i++) cand->active += mask[i] != 0;
done:
    if (!trained) put_back(x);
    if (trained) {
        model_free(&m2);
        params_free(&p2);
    }
    free(cfg);
    nn_free(xi);
    return rc;
}

static int write_json(const LoadedRun *r, const RefineOptions *o, const RefineResult *res, Status *st) {
    cJSON *j = cJSON_CreateObject();
    cJSON_AddNumberToObject(j, "epochs", (double)o->epochs);
    cJSON_AddNumberToObject(j, "tolerance", r->cfg.canon_tolerance);
    cJSON_AddNumberToObject(j, "learned_active", (double)res->active_before);
    cJSON_AddNumberToObject(j, "learned_validation", res->val_before);
    cJSON *a = cJSON_AddArrayToObject(j, "candidates");
    for (int i = 0; i < res->n; i++) {
        const RefineCandidate *c = &res->cand[i];
        cJSON *e = cJSON_CreateObject();
        cJSON_AddNumberToObject(e, "active", (double)c->active);
        cJSON_AddStringToObject(e, "dropped", c->dropped);
        cJSON_AddNumberToObject(e, "residual", c->residual);
        cJSON_AddNumberToObject(e, "validation", c->val);
        cJSON_AddBoolToObject(e, "accepted", c->accepted);
        cJSON_AddItemToArray(a, e);
    }
    cJSON_AddNumberToObject(j, "chosen", res->chosen);
    cJSON_AddStringToObject(j, "kept", res->kept_refined ? "refined" : "learned");
    cJSON_AddStringToObject(j, "refined_run", "refined");
    cJSON_AddNumberToObject(j, "seconds", res->seconds);
    char *text = cJSON_Print(j);
    cJSON_Delete(j);
    char path[CFG_PATH_MAX + 32];
    snprintf(path, sizeof path, "%s/refine.json", r->dir);
    size_t n = strlen(text);
    char *buf = malloc(n + 1); /* the text and a newline */
    int rc = buf ? 0 : status_set(st, ST_RUNTIME, "out of memory");
    if (!rc) {
        memcpy(buf, text, n);
        buf[n] = '\n';
        rc = atomic_write_bytes(path, buf, n + 1, st);
    }
    free(buf);
    free(text);
    return rc;
}

int run_refine(LoadedRun *r, const RefineOptions *o, RefineResult *res, Status *st) {
    memset(res, 0, sizeof *res);
    double t0 = clock_seconds();
    if (o->epochs < 1) return status_set(st, ST_INPUT, "refinement needs at least 1 epoch per candidate");
    if (r->data.td.n_val < 1)
        return status_set(st, ST_INPUT, "%s: no validation recordings to compare the refined model on "
                          "(data.validation)", r->dir);
    int rc = run_canonical_get(r, o->quiet, st);
    if (rc) return rc;
    const Canonical *c = &r->canon->c;
    if (c->status != CANON_FOUND && c->status != CANON_UNCHANGED)
        return status_set(st, ST_INPUT, "%s: nothing to refine: canonical form %s (%s)", r->dir,
                          canon_status_name(c->status), c->note);
    if (c->k == 1 && c->c3[0] != 0)
        return status_set(st, ST_INPUT, "%s: the canonical map has a cubic warp, which the refinement cannot fold into "
                          "the network: refine with canonical.choose fit", r->dir);
    int T = r->m.lib.n_terms, d = r->m.n_latent, nv = r->m.lib.n_vars;
    long nm = (long)T * d;
    Ctx x = {.r = r, .o = o, .c = c};
    snprintf(x.root, sizeof x.root, "%s/refine", r->dir);
    EncodedSet es;
    if ((rc = encoded_training_set(&es, &r->m, &r->ps, &r->data, &r->tape, st))) return rc;
    x.N = es.N;
    double *sigma = nn_alloc((size_t)es.N * nv * sizeof *sigma), *yc = nn_alloc((size_t)es.N * d * sizeof *yc);
    double *theta = nn_alloc((size_t)es.N * T * sizeof *theta);
    canonical_map_state(c, sigma, es.state, es.N);
    canonical_map_target(c, yc, es.state, es.target, es.N); /* u' = A z' (u'' = A z''): no offset */
    canonical_eval(c, &r->m.lib, theta, sigma, es.N);
    encoded_set_free(&es);
    nn_free(sigma);
    x.theta_c = theta, x.y_c = yc;
    ParamSet *ps = &r->ps;
    x.keep_val = nn_alloc(3 * ps->n * sizeof *x.keep_val);
    x.keep_m = x.keep_val + ps->n, x.keep_v = x.keep_m + ps->n;
    memcpy(x.keep_val, ps->val, ps->n * sizeof *ps->val);
    memcpy(x.keep_m, ps->m, ps->n * sizeof *ps->m);
    memcpy(x.keep_v, ps->v, ps->n * sizeof *ps->v);
    x.keep_step = ps->step;
    x.keep_mask = nn_alloc((size_t)nm);
    memcpy(x.keep_mask, r->m.mask, (size_t)nm);
    uint8_t *cur = nn_alloc((size_t)nm), *trial = nn_alloc((size_t)nm), *best_mask = nn_alloc((size_t)nm);
    memcpy(cur, c->mask, (size_t)nm);
    res->active_before = 0;
    for (long i = 0; i < nm; i++) res->active_before += r->m.mask[i] != 0;
    if ((rc = fs_remove_tree(x.root, st)) || (rc = fs_make_dirs(x.root, st))) goto done;
    if ((rc = train_validation_loss(&r->cfg, &r->data.td, &r->m, &r->ps, &res->val_before, st))) goto done;

    /* 1. the reference: the canonical law's mask */
    if ((rc = train_candidate(&x, 0, cur, &res->cand[0], st))) goto done;
    res->cand[0].accepted = 1;
    res->n = 1;
    res->chosen = 0;
    double e_ref = res->cand[0].residual, limit = (1 + r->cfg.canon_tolerance) * e_ref + 1e-6;
    if (!o->quiet)
        fprintf(stderr, "framelaw: refine: canonical law, %ld terms: residual %.4g, validation %.4g (learned: %.4g)\n",
                res->cand[0].active, e_ref, res->cand[0].val, res->val_before);
    /* 2. backward elimination by training */
    while (res->cand[res->chosen].active > 1) {
        int best = -1;
        for (long i = 0; i < nm && res->n < REFINE_MAX_CANDIDATES; i++) {
            if (!cur[i]) continue;
            memcpy(trial, cur, (size_t)nm);
            trial[i] = 0;
            RefineCandidate *cd = &res->cand[res->n];
            if (d > 1) snprintf(cd->dropped, sizeof cd->dropped, "%s in equation %d", r->m.lib.names[i / d], (int)(i % d) + 1);
            else snprintf(cd->dropped, sizeof cd->dropped, "%s", r->m.lib.names[i / d]);
            if ((rc = train_candidate(&x, res->n, trial, cd, st))) goto done;
            if (!o->quiet)
                fprintf(stderr, "framelaw: refine: without %s: residual %.4g, validation %.4g\n", cd->dropped,
                        cd->residual, cd->val);
            if (best < 0 || cd->residual < res->cand[best].residual) {
                best = res->n;
                memcpy(best_mask, trial, (size_t)nm);
            }
            res->n++;
        }
        if (best < 0 || !(res->cand[best].residual <= limit)) break;
        res->cand[best].accepted = 1;
        res->chosen = best;
        memcpy(cur, best_mask, (size_t)nm);
    }
    /* 3. keep the better of the learned and the refined model; the chosen candidate becomes RUN/refined */
    res->kept_refined = res->cand[res->chosen].val < res->val_before;
    {
        char from[CFG_PATH_MAX + 32], to[CFG_PATH_MAX + 16];
        snprintf(from, sizeof from, "%s/%02d", x.root, res->chosen);
        snprintf(to, sizeof to, "%s/refined", r->dir);
        if ((rc = fs_remove_tree(to, st))) goto done;
        if (rename(from, to)) {
            rc = status_set(st, ST_RUNTIME, "%s: cannot rename to %s", from, to);
            goto done;
        }
        /* the folder's config names its own place */
        Config *cfg = malloc(sizeof *cfg);
        if (!cfg) {
            rc = status_set(st, ST_RUNTIME, "out of memory");
            goto done;
        }
        char path[CFG_PATH_MAX + 32];
        snprintf(path, sizeof path, "%s/config.json", to);
        if (strlen(to) >= sizeof cfg->output) rc = status_set(st, ST_INPUT, "%s: path too long", to);
        else if (!(rc = run_config_load(to, cfg, st))) {
            memcpy(cfg->output, to, strlen(to) + 1);
            char *json = config_to_json(cfg);
            rc = atomic_write_bytes(path, json, strlen(json), st);
            free(json);
        }
        free(cfg);
        if (rc) goto done;
    }
    res->seconds = clock_seconds() - t0;
    rc = write_json(r, o, res, st);
done:
    {
        Status s2;
        fs_remove_tree(x.root, &s2);
    }
    nn_free(theta), nn_free(yc), nn_free(x.keep_val), nn_free(x.keep_mask);
    nn_free(cur), nn_free(trial), nn_free(best_mask);
    return rc;
}
