/* io/sweep/inclusion.c: inclusion probabilities across a sweep's members, each member a sample: per
 * equation and term, the fraction of the members with equations.json whose library offered the
 * term that kept it (a nonzero active coefficient), and the mean of the members' own ensemble
 * inclusion probabilities (the "ensemble" object of equations.json, docs/ensembles.md) where they
 * have one. Members with other libraries or latent sizes count for the terms they have. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/fs/files.h"
#include "io/sweep/common.h"
#include "io/sweep/sweep.h"
#include "sparse/equation.h"

void sweep_inclusion_free(SweepInclusion *inc) {
    for (int i = 0; i < inc->n; i++) free(inc->t[i].lhs), free(inc->t[i].term);
    free(inc->t);
    memset(inc, 0, sizeof *inc);
}

static SweepTermStat *stat_of(SweepInclusion *inc, const char *lhs, const char *term) {
    for (int i = 0; i < inc->n; i++)
        if (!strcmp(inc->t[i].lhs, lhs) && !strcmp(inc->t[i].term, term)) return &inc->t[i];
    if (inc->n == inc->cap) {
        int cap = inc->cap ? 2 * inc->cap : 64;
        SweepTermStat *t = realloc(inc->t, (size_t)cap * sizeof *t);
        if (!t) return NULL;
        inc->t = t, inc->cap = cap;
    }
    SweepTermStat *s = &inc->t[inc->n];
    memset(s, 0, sizeof *s);
    s->lhs = sweep_strdup(lhs);
    s->term = sweep_strdup(term);
    if (!s->lhs || !s->term) {
        free(s->lhs), free(s->term);
        return NULL;
    }
    inc->n++;
    return s;
}

/* One member's equations.json into the counts. Returns 1 when it counted. */
static int add_member(SweepInclusion *inc, const char *dir) {
    char p[CFG_PATH_MAX + 32], why[256];
    snprintf(p, sizeof p, "%s/equations.json", dir);
    if (!fs_exists(p)) return 0;
    char *text = sweep_read_text(p, 64u << 20, why, sizeof why);
    if (!text) return 0;
    Library lib;
    Coef co;
    Status st;
    if (equation_from_json(text, &lib, &co, &st)) {
        free(text);
        return 0;
    }
    cJSON *root = cJSON_Parse(text);
    free(text);
    const cJSON *eqs = cJSON_GetObjectItemCaseSensitive(cJSON_GetObjectItemCaseSensitive(root, "ensemble"), "equations");
    int k = co.n_out, T = co.n_terms;
    for (int j = 0; j < k; j++) {
        char lhs[32];
        snprintf(lhs, sizeof lhs, lib.spec.order == 2 ? "d2z%d/dt2" : "dz%d/dt", j + 1);
        const cJSON *pr = cJSON_GetObjectItemCaseSensitive(cJSON_GetArrayItem(eqs, j), "inclusion");
        int have_p = cJSON_IsArray(pr) && cJSON_GetArraySize(pr) == T;
        for (int t = 0; t < T; t++) {
            SweepTermStat *s = stat_of(inc, lhs, lib.names[t]);
            if (!s) continue;
            s->offered++;
            s->kept += co.mask[(long)t * k + j] && co.xi[(long)t * k + j] != 0;
            const cJSON *v = have_p ? cJSON_GetArrayItem(pr, t) : NULL;
            if (cJSON_IsNumber(v)) s->ens_sum += v->valuedouble, s->ens_n++;
        }
    }
    cJSON_Delete(root);
    library_free(&lib);
    coef_free(&co);
    return 1;
}

static int stat_cmp(const void *pa, const void *pb) {
    const SweepTermStat *a = pa, *b = pb;
    int c = strcmp(a->lhs, b->lhs);
    if (c) return c;
    double fa = a->offered ? (double)a->kept / a->offered : 0, fb = b->offered ? (double)b->kept / b->offered : 0;
    if (fa != fb) return fa > fb ? -1 : 1;
    return strcmp(a->term, b->term);
}

void sweep_inclusion(const Sweep *sw, SweepInclusion *inc) {
    memset(inc, 0, sizeof *inc);
    for (int i = 0; i < sw->n_members; i++) inc->members += add_member(inc, sw->members[i].dir);
    if (inc->n) qsort(inc->t, (size_t)inc->n, sizeof *inc->t, stat_cmp);
}

char *sweep_inclusion_csv(const SweepInclusion *inc) {
    TextBuf b = {0};
    text_puts(&b, "equation,term,members,kept,inclusion,ensemble_inclusion\n");
    for (int i = 0; i < inc->n; i++) {
        const SweepTermStat *s = &inc->t[i];
        text_printf(&b, "%s,\"%s\",%d,%d,%.4g,", s->lhs, s->term, s->offered, s->kept,
                    s->offered ? (double)s->kept / s->offered : 0.0);
        if (s->ens_n) text_printf(&b, "%.4g", s->ens_sum / s->ens_n);
        text_puts(&b, "\n");
    }
    return text_take(&b);
}

void sweep_inclusion_html(TextBuf *b, const SweepInclusion *inc) {
    text_puts(b, "<h2>Inclusion of each term across members</h2>\n");
    int listed = 0;
    for (int i = 0; i < inc->n; i++) listed += inc->t[i].kept > 0 || inc->t[i].ens_sum > 0;
    if (!inc->members || !listed) {
        text_puts(b, "<p class=\"muted\">No member has kept a term yet.</p>\n");
        return;
    }
    text_printf(b, "<p>Each of the %d members with equations is one sample: <b>members</b> is the fraction of them "
                   "(among those whose library has the term) whose law keeps it, beside the structure groups above. "
                   "<b>ensemble</b> is the mean over those members of their own ensemble's inclusion probability "
                   "(resampled fits of one member's data, docs/ensembles.md). Terms that no member kept and no "
                   "ensemble ever kept are not listed.</p>\n<table>\n<tr><th>equation</th><th>term</th>"
                   "<th>members</th><th>kept by</th><th>ensemble</th></tr>\n",
                inc->members);
    for (int i = 0; i < inc->n; i++) {
        const SweepTermStat *s = &inc->t[i];
        if (!(s->kept > 0 || s->ens_sum > 0)) continue;
        double f = s->offered ? (double)s->kept / s->offered : 0;
        text_puts(b, "<tr><td>");
        text_puts(b, s->lhs);
        text_puts(b, "</td><td class=\"eq\">");
        for (const char *c = s->term; *c; c++) {
            if (*c == '<') text_puts(b, "&lt;");
            else if (*c == '>') text_puts(b, "&gt;");
            else if (*c == '&') text_puts(b, "&amp;");
            else text_add(b, c, 1);
        }
        text_printf(b, "</td><td><span class=\"bar\"><span style=\"width:%.1f%%\"></span></span> %.2f</td>"
                       "<td class=\"n\">%d of %d</td><td class=\"n\">",
                    100 * f, f, s->kept, s->offered);
        if (s->ens_n) text_printf(b, "%.2f", s->ens_sum / s->ens_n);
        text_puts(b, "</td></tr>\n");
    }
    text_puts(b, "</table>\n");
}
