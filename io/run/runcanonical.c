/* io/run/runcanonical.c: the canonical form of a trained run's law (see runcanonical.h). */
#include "io/run/runcanonical.h"

#include <stdlib.h>
#include <string.h>

#include "io/fs/clock.h"
#include "io/run/trainset.h"

CanonOptions run_canonical_options(const Config *c) {
    CanonOptions o = canon_defaults();
    o.tolerance = c->canon_tolerance;
    o.cond_max = c->canon_cond_max;
    o.seed = c->seed;
    return o;
}

void run_canonical_free(RunCanonical *rc) {
    if (!rc) return;
    canonical_free(&rc->c);
    free(rc);
}

int run_canonical_get(LoadedRun *r, int quiet, Status *st) {
    if (r->canon) return 0;
    double t0 = clock_seconds();
    RunCanonical *rc = calloc(1, sizeof *rc);
    if (!rc) return status_set(st, ST_RUNTIME, "out of memory");
    CanonOptions o = run_canonical_options(&r->cfg);
    EncodedSet es;
    if (encoded_training_set(&es, &r->m, &r->ps, &r->data, &r->tape, st)) {
        free(rc);
        return st->code;
    }
    int code = canonical_find(&rc->c, &r->m.lib, r->coef.xi, r->coef.mask, es.state, es.target, es.N, &o, st);
    /* auto: the forecast choice with one latent variable; with several it cost the convection cell
     * its chaos on one seed of five (docs/canonical.md, "The forecast choice") */
    int by_forecast = r->cfg.canon_choose == CANON_CHOOSE_FORECAST || (r->cfg.canon_choose == CANON_CHOOSE_AUTO && es.d == 1);
    if (!code && by_forecast) {
        /* the selection's data: the samples in training order, a new recording at every gap */
        int nr;
        long *rs = encoded_set_runs(&es, &nr);
        SelectData D = {es.N, es.n_vars, es.d, es.state, es.target, nr, rs, r->data.ds.dt};
        SelectOptions so = select_defaults();
        code = canonical_select(&rc->c, &r->m.lib, &D, &so, &rc->sel, st);
        nn_free(rs);
        if (code == ST_INPUT) { /* no forecast fits (one-sample recordings, a constant latent): the fit choice stands */
            if (!quiet) fprintf(stderr, "framelaw: canonical form: canonical.choose forecast skipped: %s\n", st->msg);
            code = 0;
            status_ok(st);
        } else {
            rc->by_forecast = 1;
        }
    }
    encoded_set_free(&es);
    if (code) {
        if (code == ST_INPUT) {
            char msg[sizeof st->msg];
            snprintf(msg, sizeof msg, "%s", st->msg);
            status_set(st, ST_INPUT, "canonical form: %s", msg);
        }
        run_canonical_free(rc);
        return code;
    }
    rc->seconds = clock_seconds() - t0;
    r->canon = rc;
    if (!quiet)
        fprintf(stderr, "framelaw: canonical form: %s (%ld terms learned, %ld canonical), %.2f s\n",
                canon_status_name(rc->c.status), rc->c.active_raw, rc->c.active, rc->seconds);
    return 0;
}

cJSON *run_canonical_json(const LoadedRun *r, int digits) {
    if (!r->canon) return NULL;
    cJSON *j = canonical_json(&r->canon->c, &r->m.lib, digits);
    if (j && r->canon->by_forecast) {
        const CanonSelectReport *s = &r->canon->sel;
        cJSON *f = cJSON_AddObjectToObject(j, "forecast_choice");
        cJSON_AddBoolToObject(f, "changed", s->changed);
        cJSON_AddNumberToObject(f, "terms_before", (double)s->active_start);
        cJSON_AddNumberToObject(f, "score_before", s->score_start);
        cJSON_AddNumberToObject(f, "score", s->score);
        cJSON_AddNumberToObject(f, "forecast_error", s->forecast);
        cJSON_AddNumberToObject(f, "warp", s->warp);
        cJSON_AddNumberToObject(f, "laws_scored", s->steps);
    }
    return j;
}

/* Text with every line prefixed (the map inside a LaTeX file is a comment). */
static size_t prefixed(char *buf, size_t n, size_t len, const char *pre, const char *text) {
    for (const char *p = text; *p;) {
        const char *e = strchr(p, '\n');
        int w = e ? (int)(e - p) : (int)strlen(p);
        int k = snprintf(len < n ? buf + len : NULL, len < n ? n - len : 0, "%s%.*s\n", pre, w, p);
        len += k > 0 ? (size_t)k : 0;
        p += w + (e ? 1 : 0);
    }
    return len;
}

size_t run_canonical_format(char *buf, size_t n, EqStyle style, const LoadedRun *r, int digits) {
    if (n) buf[0] = 0;
    if (!r->canon || r->canon->c.status != CANON_FOUND) return 0;
    const Canonical *c = &r->canon->c;
    const char *com = style == EQ_LATEX ? "% " : "# ";
    size_t len = 0;
    int k = snprintf(buf, n, "%scanonical law (%ld terms; the learned law below has %ld), in u = A z + b%s:\n", com,
                     c->active, c->active_raw, c->k == 1 && c->c3[0] != 0 ? " + c3 z^3" : "");
    len += k > 0 ? (size_t)k : 0;
    size_t need = canonical_format(NULL, 0, style, c, &r->m.lib, digits) + 1;
    size_t mneed = canonical_format_map(NULL, 0, c, digits) + 1;
    char *law = malloc(need), *map = malloc(mneed);
    if (law && map) {
        canonical_format(law, need, style, c, &r->m.lib, digits);
        canonical_format_map(map, mneed, c, digits);
        len = prefixed(buf, n, len, "", law);
        len = prefixed(buf, n, len, com, map);
    }
    free(law), free(map);
    k = snprintf(len < n ? buf + len : NULL, len < n ? n - len : 0, "%slearned law, in z:\n", com);
    len += k > 0 ? (size_t)k : 0;
    return len;
}

void run_canonical_print(FILE *f, const LoadedRun *r) {
    if (!r->canon) return;
    const Canonical *c = &r->canon->c;
    if (c->status != CANON_FOUND) {
        fprintf(f, "canonical form: %s: %s\n", canon_status_name(c->status), c->note);
        return;
    }
    size_t need = canonical_format(NULL, 0, EQ_TEXT, c, &r->m.lib, EQ_DIGITS) + 1;
    size_t mneed = canonical_format_map(NULL, 0, c, EQ_DIGITS) + 1;
    char *law = malloc(need), *map = malloc(mneed);
    if (law && map) {
        canonical_format(law, need, EQ_TEXT, c, &r->m.lib, EQ_DIGITS);
        canonical_format_map(map, mneed, c, EQ_DIGITS);
        fprintf(f, "canonical law (%ld active terms), in u = A z + b%s:\n%s", c->active,
                c->k == 1 && c->c3[0] != 0 ? " + c3 z^3" : "", law);
        fprintf(f, "where\n%s", map);
    }
    free(law), free(map);
}
