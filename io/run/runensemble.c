/* io/run/runensemble.c: the ensemble of a trained run (see runensemble.h). */
#include "io/run/runensemble.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/fs/clock.h"
#include "io/run/trainset.h"
#include "sparse/equation.h"

int run_ensemble_options(const Config *c, double dt, int m, EnsembleOptions *o, int *from_seconds, Status *st) {
    *o = ensemble_defaults();
    o->members = c->ens_members;
    o->library_bagging = c->ens_bagging;
    o->drop_fraction = c->ens_drop;
    o->inclusion = c->ens_inclusion;
    o->lsq.threshold = c->threshold;
    *from_seconds = 0;
    if (c->ens_block_seconds > 0) {
        if (!(dt > 0)) return status_set(st, ST_INPUT, "ensemble.block_seconds: the data have no time step");
        double b = floor(c->ens_block_seconds / dt + 0.5);
        o->block = b < 1 ? 1 : b > 1e15 ? (long)1e15 : (long)b;
        *from_seconds = 1;
    } else if (c->ens_block > 0) {
        o->block = c->ens_block;
    } else {
        long w = 2L * (2 * m + 1);
        o->block = w > 10 ? w : 10;
    }
    if (ensemble_check_options(o, st)) {
        char msg[sizeof st->msg];
        snprintf(msg, sizeof msg, "%s", st->msg);
        return status_set(st, ST_INPUT, "ensemble.*: %s", msg);
    }
    return 0;
}

int run_ensemble_by_selection(const Config *c) {
    if (c->ens_method == ENSFIT_AUTO) return c->threshold_select != SELECT_NONE && !c->ens_bagging;
    return c->ens_method == ENSFIT_SELECTION;
}

void run_ensemble_free(RunEnsemble *re) {
    if (!re) return;
    ensemble_free(&re->e);
    free(re);
}

int run_ensemble_get(LoadedRun *r, int quiet, Status *st) {
    if (r->ens) return 0;
    double t0 = clock_seconds();
    RunEnsemble *re = calloc(1, sizeof *re);
    if (!re) return status_set(st, ST_RUNTIME, "out of memory");
    const Dataset *ds = &r->data.ds;
    if (run_ensemble_options(&r->cfg, ds->dt, ds->sten.m, &re->opt, &re->block_from_seconds, st)) {
        free(re);
        return st->code;
    }
    re->seed = r->cfg.seed;
    EncodedSet es;
    if (encoded_training_set(&es, &r->m, &r->ps, &r->data, &r->tape, st)) {
        free(re);
        return st->code;
    }
    Rng rng;
    rng_seed(&rng, re->seed ^ ENSEMBLE_SEED_MIX);
    int rc;
    re->by_selection = run_ensemble_by_selection(&r->cfg);
    if (re->by_selection) {
        /* the selection's data: the samples in training order, a new recording at every gap */
        int nr;
        long *rs = encoded_set_runs(&es, &nr);
        SelectData D = {es.N, es.n_vars, es.d, es.state, es.target, nr, rs, ds->dt};
        SelectOptions so = select_defaults();
        rc = ensemble_fit_select(&re->e, &r->m.lib, &D, &so, r->m.mask, r->cfg.ens_candidates, &re->opt, &rng, st);
        nn_free(rs);
        if (rc == ST_INPUT) {
            char msg[sizeof st->msg];
            snprintf(msg, sizeof msg, "%s", st->msg);
            status_set(st, ST_INPUT, "%s: %s", r->cfg.ens_bagging ? "ensemble.library_bagging" : "ensemble.method", msg);
        }
    } else {
        rc = ensemble_fit(&re->e, &r->m.lib, es.state, es.target, es.rec, es.step, es.N, &re->opt, &rng, st);
    }
    encoded_set_free(&es);
    if (rc) {
        if (re->e.block_too_long) { /* name the key the block came from */
            char why[200];
            ensemble_block_too_long_text(why, sizeof why, re->opt.block, re->e.longest);
            status_set(st, ST_INPUT, "%s: %s", re->block_from_seconds ? "ensemble.block_seconds" : "ensemble.block", why);
        }
        free(re);
        return rc;
    }
    re->fit_seconds = clock_seconds() - t0;
    r->ens = re;
    if (!quiet && re->by_selection) {
        const SelectBagReport *b = &re->e.bag;
        fprintf(stderr,
                "framelaw: ensemble: %d members, each the selection among %d laws, scored on the %d forecast segments "
                "(%d samples each) drawn with replacement, %.2f s; %d chose the trained law\n",
                re->e.members, b->candidates, b->segments, b->horizon, re->fit_seconds, b->agree_extra);
        if (re->e.unreachable)
            fprintf(stderr, "framelaw: ensemble: %ld samples lie in no forecast segment and are never drawn\n",
                    re->e.unreachable);
    } else if (!quiet) {
        fprintf(stderr, "framelaw: ensemble: %d members on %ld training samples (blocks of %ld%s), %.2f s\n",
                re->e.members, re->e.n_samples, re->opt.block, re->opt.library_bagging ? ", library bagging" : "",
                re->fit_seconds);
        if (re->e.unreachable)
            fprintf(stderr, "framelaw: ensemble: %ld samples lie in runs shorter than the block and are never drawn\n",
                    re->e.unreachable);
    }
    return 0;
}

static cJSON *num_or_null(double v) { return isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull(); }

static cJSON *column(const double *a, int T, int d, int j) {
    cJSON *arr = cJSON_CreateArray();
    for (int t = 0; t < T; t++) cJSON_AddItemToArray(arr, num_or_null(a[(long)t * d + j]));
    return arr;
}

cJSON *run_ensemble_json(const LoadedRun *r, int digits) {
    const RunEnsemble *re = r->ens;
    if (!re) return NULL;
    const Ensemble *e = &re->e;
    int T = e->n_terms, d = e->n_out;
    cJSON *o = cJSON_CreateObject();
    long block = re->by_selection ? e->bag.horizon : re->opt.block;
    cJSON_AddStringToObject(o, "method", "bagging");
    cJSON_AddStringToObject(o, "fit", re->by_selection ? "selection" : "thresholding");
    cJSON_AddNumberToObject(o, "members", e->members);
    cJSON_AddNumberToObject(o, "samples", (double)e->n_samples);
    cJSON_AddNumberToObject(o, "block", (double)block);
    cJSON_AddNumberToObject(o, "block_seconds", (double)block * r->data.ds.dt);
    if (re->by_selection) {
        cJSON_AddNumberToObject(o, "segments", e->bag.segments);
        cJSON_AddNumberToObject(o, "candidates", e->bag.candidates);
        cJSON_AddNumberToObject(o, "chose_trained_law", e->bag.agree_extra);
        cJSON_AddNumberToObject(o, "chose_selected_law", e->bag.agree_selected);
    }
    cJSON_AddNumberToObject(o, "unreachable_samples", (double)e->unreachable);
    cJSON_AddBoolToObject(o, "library_bagging", re->opt.library_bagging);
    cJSON_AddNumberToObject(o, "drop_fraction", re->opt.library_bagging ? re->opt.drop_fraction : 0);
    cJSON_AddNumberToObject(o, "inclusion_threshold", re->opt.inclusion);
    if (!re->by_selection) cJSON_AddNumberToObject(o, "threshold", re->opt.lsq.threshold);
    cJSON_AddNumberToObject(o, "seed", (double)re->seed);
    cJSON_AddNumberToObject(o, "interval", 0.9);
    cJSON *law = equation_json(&r->m.lib, e->xi, e->mask, digits);
    const cJSON *law_eqs = law ? cJSON_GetObjectItemCaseSensitive(law, "equations") : NULL;
    cJSON *eqs = cJSON_AddArrayToObject(o, "equations");
    for (int j = 0; j < d; j++) {
        cJSON *q = cJSON_CreateObject();
        const cJSON *le = cJSON_GetArrayItem(law_eqs, j);
        const cJSON *lhs = cJSON_GetObjectItemCaseSensitive(le, "lhs");
        cJSON_AddStringToObject(q, "lhs", cJSON_IsString(lhs) ? lhs->valuestring : "");
        cJSON_AddItemToObject(q, "inclusion", column(e->prob, T, d, j));
        cJSON_AddItemToObject(q, "median", column(e->median, T, d, j));
        cJSON_AddItemToObject(q, "low", column(e->q05, T, d, j));
        cJSON_AddItemToObject(q, "high", column(e->q95, T, d, j));
        static const char *const keep[] = {"coefficients", "mask", "active", "text", "latex"};
        for (int k = 0; k < 5; k++) {
            const cJSON *it = cJSON_GetObjectItemCaseSensitive(le, keep[k]);
            if (it) cJSON_AddItemToObject(q, keep[k], cJSON_Duplicate(it, 1));
        }
        cJSON_AddItemToArray(eqs, q);
    }
    cJSON_Delete(law);
    return o;
}

void run_ensemble_print_header(FILE *f, const RunEnsemble *re) {
    const Ensemble *e = &re->e;
    if (re->by_selection) {
        fprintf(f,
                "ensemble: %d members, each the law selected on forecast segments of %d samples drawn with "
                "replacement (%d of %d chose the trained law); per term: inclusion probability, median [5%%, 95%%]\n",
                e->members, e->bag.horizon, e->bag.agree_extra, e->members);
        if (2 * e->bag.agree_extra < e->members)
            fprintf(f,
                    "  fewer than half of the members chose the trained law: the data, in the final latent "
                    "coordinates, do not settle its terms; doubt the terms of inclusion well below 1\n");
    } else
        fprintf(f, "ensemble: %d members, blocks of %ld samples; per term: inclusion probability, median [5%%, 95%%]\n",
                e->members, re->opt.block);
}

void run_ensemble_print(FILE *f, const LoadedRun *r) {
    const RunEnsemble *re = r->ens;
    if (!re) return;
    const Ensemble *e = &re->e;
    const Library *lib = &r->m.lib;
    int T = e->n_terms, d = e->n_out;
    run_ensemble_print_header(f, re);
    for (int j = 0; j < d; j++) {
        fprintf(f, "  %s%d:\n", lib->spec.order == 2 ? "d2z" : "dz", j + 1);
        for (int t = 0; t < T; t++) {
            long q = (long)t * d + j;
            if (e->prob[q] == 0) continue;
            fprintf(f, "    %-16s %4.2f  %.4g [%.4g, %.4g]\n", lib->names[t], e->prob[q], e->median[q], e->q05[q],
                    e->q95[q]);
        }
    }
    fprintf(f, "  (terms never kept are not listed)\nensemble law (terms with inclusion >= %g, refit):\n",
            re->opt.inclusion);
    equation_fprint(f, EQ_TEXT, lib, e->xi, e->mask, EQ_DIGITS);
}

int run_ensemble_bands(LoadedRun *r, const double *y0, const double *t_out, int n_out, double scale,
                       const OdeOptions *opt, EnsembleBands *b, Status *st) {
    if (run_ensemble_get(r, 1, st)) return st->code;
    double t0 = clock_seconds();
    int rc = ensemble_bands(b, &r->ens->e, &r->m.lib, y0, t_out[0], t_out, n_out, r->cfg.ens_band_members, opt,
                            r->m.n_latent, scale > 0 && isfinite(scale) ? scale : 1.0, r->cfg.fc_bound, st);
    r->ens->band_seconds += clock_seconds() - t0;
    return rc;
}
