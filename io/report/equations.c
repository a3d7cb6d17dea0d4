/* io/report/equations.c: the report's laws. equations.json is read once (page_equations_read) for
 * the sections that show a law; each law is shown as MathML built from its terms and coefficients
 * (sparse/mathml.h), and its text and LaTeX sources go into copy boxes, the only place on the page
 * where LaTeX appears. docs/report.md says how to read the section. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/fs/files.h"
#include "io/report/page.h"
#include "sparse/equation.h"
#include "sparse/mathml.h"

int page_equations_read(Report *r, PageEquations *e) {
    memset(e, 0, sizeof *e);
    page_path(e->path, r, "equations.json");
    if (!fs_exists(e->path)) return -1;
    if (page_json_read(e->path, &e->root, r->st) ||
        page_check_version(e->root, e->path, EQ_JSON_FORMAT, EQ_JSON_VERSION, r->st)) {
        cJSON_Delete(e->root);
        e->root = NULL;
        return r->st->code;
    }
    char *txt = cJSON_PrintUnformatted(e->root);
    Status es;
    int bad = !txt || equation_from_json(txt, &e->lib, &e->co, &es);
    free(txt);
    if (bad) {
        cJSON_Delete(e->root);
        e->root = NULL;
        return status_set(r->st, txt ? ST_INPUT : ST_RUNTIME, "%s: %s", e->path, txt ? es.msg : "out of memory");
    }
    double d = page_json_num(e->root, "digits");
    e->digits = d >= 1 && d <= 17 ? (int)d : EQ_DIGITS;
    return 0;
}

void page_equations_free(PageEquations *e) {
    if (!e->root) return;
    library_free(&e->lib);
    coef_free(&e->co);
    cJSON_Delete(e->root);
    e->root = NULL;
}

void page_math_law(Report *r, const Library *lib, const double *xi, const uint8_t *mask, char var,
                   const double *w, int digits) {
    size_t need = mathml_law(NULL, 0, lib, xi, mask, var, w, digits) + 1;
    char *m = malloc(need);
    if (!m) {
        page_note(r, "Out of memory: the law is left out (its text is in the copy box).");
        return;
    }
    mathml_law(m, need, lib, xi, mask, var, w, digits);
    fprintf(r->f, "<div class=\"math\">%s</div>\n", m);
    free(m);
}

void page_copy_box(Report *r, const char *what, const char *text) {
    int lines = 1;
    for (const char *s = text; *s; s++) lines += *s == '\n' && s[1];
    fputs("<details class=\"copy\"><summary>", r->f);
    page_text(r, what);
    fprintf(r->f, "</summary><textarea readonly spellcheck=\"false\" rows=\"%d\">", lines < 24 ? lines : 24);
    page_text(r, text);
    fputs("</textarea></details>\n", r->f);
}

/* An array of n finite numbers into v (stride apart); 0 when it is not one. */
static int num_list(const cJSON *a, int n, double *v, long stride) {
    if (!cJSON_IsArray(a) || cJSON_GetArraySize(a) != n) return 0;
    int i = 0;
    const cJSON *it;
    cJSON_ArrayForEach(it, a) {
        if (!cJSON_IsNumber(it) || !isfinite(it->valuedouble)) return 0;
        v[(long)i++ * stride] = it->valuedouble;
    }
    return 1;
}

/* The same for member `key` of o. */
static int num_array(const cJSON *o, const char *key, int n, double *v, long stride) {
    return num_list(cJSON_GetObjectItemCaseSensitive(o, key), n, v, stride);
}

int page_law_read(const cJSON *eqs, int k, int nt, double *xi, uint8_t *mask) {
    if (!cJSON_IsArray(eqs) || cJSON_GetArraySize(eqs) != k) return 0;
    double *m = malloc(sizeof(double) * (size_t)nt);
    int ok = m != NULL, j = 0;
    const cJSON *q;
    cJSON_ArrayForEach(q, eqs) {
        ok = ok && num_array(q, "coefficients", nt, xi + j, k) && num_array(q, "mask", nt, m, 1);
        for (int t = 0; ok && t < nt; t++) mask[(long)t * k + j] = m[t] != 0;
        j++;
    }
    free(m);
    return ok;
}

/* The canonical law (docs/canonical.md) when one with fewer terms was found. */
static int section_canonical(Report *r, const PageEquations *e) {
    const cJSON *c = cJSON_GetObjectItemCaseSensitive(e->root, "canonical");
    if (!c) return 0;
    const char *status = page_json_str(c, "status"), *note = page_json_str(c, "note");
    if (!status || strcmp(status, "found")) {
        fputs("<p>Canonical form: ", r->f);
        page_text(r, status ? status : "?");
        if (note) fputs(": ", r->f), page_text(r, note);
        fputs(" (docs/canonical.md).</p>\n", r->f);
        return 0;
    }
    int k = e->lib.spec.n_latent, nt = e->lib.n_terms;
    double *xi = malloc(sizeof(double) * (size_t)nt * k), A[LIB_MAX_VARS * LIB_MAX_VARS], b[LIB_MAX_VARS],
           w[LIB_MAX_VARS];
    uint8_t *mask = malloc((size_t)nt * k);
    const cJSON *map = cJSON_GetObjectItemCaseSensitive(c, "map"), *rows = cJSON_GetObjectItemCaseSensitive(map, "A");
    int ok = xi && mask && page_law_read(cJSON_GetObjectItemCaseSensitive(c, "equations"), k, nt, xi, mask) &&
             cJSON_IsArray(rows) && cJSON_GetArraySize(rows) == k && num_array(map, "b", k, b, 1) &&
             num_array(map, "w", k, w, 1);
    for (int i = 0; ok && i < k; i++) ok = num_list(cJSON_GetArrayItem(rows, i), k, A + i * k, 1);
    if (ok) {
        const cJSON *fit = cJSON_GetObjectItemCaseSensitive(c, "fit");
        char a1[32], a2[32];
        fprintf(r->f,
                "<h3>The canonical law</h3>\n<p>The same dynamics in the coordinates u = A z + b where the law "
                "has the fewest terms (%s; the learned law below has %s; docs/canonical.md):</p>\n",
                page_num4(a1, sizeof a1, page_json_num(fit, "active")),
                page_num4(a2, sizeof a2, page_json_num(fit, "active_learned")));
        page_math_law(r, &e->lib, xi, mask, 'u', e->lib.spec.trig ? w : NULL, e->digits);
        fputs("<p>where</p>\n", r->f);
        size_t need = mathml_map(NULL, 0, k, A, b, e->lib.spec.trig ? w : NULL, e->digits) + 1;
        char *m = malloc(need);
        if (m) {
            mathml_map(m, need, k, A, b, e->lib.spec.trig ? w : NULL, e->digits);
            fprintf(r->f, "<div class=\"math\">%s</div>\n", m);
        }
        free(m);
        fputs("<h3>The learned law, in z</h3>\n", r->f);
    }
    free(xi);
    free(mask);
    if (!ok)
        return status_set(r->st, ST_INPUT,
                          "%s: \"canonical\" needs \"equations\" (%d, each with %d coefficients and mask values) "
                          "and \"map\" with A (%d x %d), b and w (%d numbers each)",
                          e->path, k, nt, k, k, k);
    return 0;
}

int report_section_equations(Report *r, const PageEquations *e) {
    fputs("<h2 id=\"equations\">Equations</h2>\n", r->f);
    if (!e) {
        page_note(r, "equations.json: not written yet, so no law to show.");
    } else {
        if (section_canonical(r, e)) return r->st->code;
        page_math_law(r, &e->lib, e->co.xi, e->co.mask, 'z', NULL, e->digits);
        int k = e->lib.spec.n_latent;
        if (k == 1) fputs("<p>The latent variable z1 is in the units the encoder chose", r->f);
        else fprintf(r->f, "<p>Latent variables z1..z%d are in the units the encoder chose", k);
        fputs("; time derivatives are per second.</p>\n", r->f);
    }
    static const char *const files[2] = {"equations.txt", "equations.tex"};
    static const char *const what[2] = {"Copy as text (equations.txt)", "Copy as LaTeX (equations.tex)"};
    for (int i = 0; i < 2; i++) {
        char path[PATH_LEN];
        page_path(path, r, files[i]);
        char *s;
        Status missing;
        if (fs_read_file(path, MAX_TEXT_BYTES, &s, NULL, &missing)) {
            page_note(r, "%s: not written yet (training writes it at the end).", files[i]);
            continue;
        }
        page_copy_box(r, what[i], s);
        free(s);
    }
    return 0;
}
