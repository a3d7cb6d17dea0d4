/* io/report/ensemble.c: the report's section on the ensemble by bagging (the "ensemble" object of
 * equations.json, docs/formats.md): per equation, every term any member kept, with its inclusion
 * probability as a bar (CSS, no script), the median coefficient, the 90% interval and whether the
 * ensemble law keeps it; then the ensemble law. docs/report.md says how to read it. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/fs/files.h"
#include "io/report/page.h"
#include "sparse/equation.h"

static double item_num(const cJSON *arr, int i) {
    const cJSON *v = cJSON_GetArrayItem(arr, i);
    return cJSON_IsNumber(v) ? v->valuedouble : NAN;
}

/* The arrays of one equation, each as long as the term list. */
static int arrays_ok(const cJSON *q, int T) {
    static const char *const names[] = {"inclusion", "median", "low", "high", "mask"};
    for (int i = 0; i < 5; i++) {
        const cJSON *a = cJSON_GetObjectItemCaseSensitive(q, names[i]);
        if (!cJSON_IsArray(a) || cJSON_GetArraySize(a) != T) return 0;
    }
    return 1;
}

/* The ensemble law as MathML from its coefficients, and its text and LaTeX in copy boxes. */
static void ensemble_law(Report *r, const PageEquations *pe, const cJSON *eqs) {
    int k = pe->lib.spec.n_latent, nt = pe->lib.n_terms;
    double *xi = malloc(sizeof(double) * (size_t)nt * k);
    uint8_t *mask = malloc((size_t)nt * k);
    if (xi && mask && page_law_read(eqs, k, nt, xi, mask))
        page_math_law(r, &pe->lib, xi, mask, 'z', NULL, pe->digits);
    else
        page_note(r, "The ensemble law has no coefficients in equations.json (an older file): its text is in the "
                     "copy box.");
    free(xi);
    free(mask);
    for (int latex = 0; latex < 2; latex++) {   /* the lines of "text", then of "latex" */
        char *s = NULL;
        size_t len = 0;
        FILE *m = open_memstream(&s, &len);
        const cJSON *q;
        if (m) {
            cJSON_ArrayForEach(q, eqs) {
                const char *t = page_json_str(q, latex ? "latex" : "text");
                if (t) fprintf(m, "%s\n", t);
            }
            fclose(m);
        }
        if (s && *s) page_copy_box(r, latex ? "Copy the ensemble law as LaTeX" : "Copy the ensemble law as text", s);
        free(s);
    }
}

int report_section_ensemble(Report *r, const PageEquations *pe) {
    fputs("<h2 id=\"ensemble\">How sure is each term: the ensemble</h2>\n", r->f);
    if (!pe) {
        page_note(r, "equations.json: not written yet, so no ensemble.");
        return 0;
    }
    const cJSON *root = pe->root;
    const char *path = pe->path;
    const cJSON *e = cJSON_GetObjectItemCaseSensitive(root, "ensemble");
    const cJSON *terms = cJSON_GetObjectItemCaseSensitive(root, "terms");
    if (!e) {
        page_note(r, "equations.json has no ensemble (written before ensembles existed): run framelaw ensemble on "
                     "the run folder.");
        return 0;
    }
    const cJSON *eqs = cJSON_GetObjectItemCaseSensitive(e, "equations");
    int T = cJSON_GetArraySize(terms);
    if (!cJSON_IsArray(terms) || !cJSON_IsArray(eqs))
        return status_set(r->st, ST_INPUT, "%s: \"ensemble\" needs \"equations\" (and the file \"terms\")", path);
    const cJSON *q;
    cJSON_ArrayForEach(q, eqs) if (!arrays_ok(q, T))
        return status_set(r->st, ST_INPUT, "%s: an ensemble equation whose arrays do not match the %d terms", path, T);
    double thr = page_json_num(e, "inclusion_threshold"), block_s = page_json_num(e, "block_seconds");
    char a[32], b[32], c[32], d[32], g[32];
    const char *fit = page_json_str(e, "fit");
    if (fit && !strcmp(fit, "selection")) {
        char h[32], k[32];
        fprintf(r->f,
                "<p>The law was chosen again, by the same forecast-scored selection that chose it in training, on %s "
                "resamples of its forecast segments (segments of %s samples, %s s, drawn with replacement): each "
                "resample refits the %s best laws of the selection on all the training data (and the trained law) "
                "on the drawn segments and keeps the one that forecasts them best for its number of terms. %s of "
                "%s resamples chose the trained law. ",
                page_num4(b, sizeof b, page_json_num(e, "members")), page_num4(c, sizeof c, page_json_num(e, "block")),
                page_num4(d, sizeof d, block_s), page_num4(h, sizeof h, page_json_num(e, "candidates")),
                page_num4(k, sizeof k, page_json_num(e, "chose_trained_law")),
                page_num4(a, sizeof a, page_json_num(e, "members")));
    } else {
        fprintf(r->f,
                "<p>The law was fitted again (thresholded least squares at threshold %s) on %s resamples of the "
                "encoded training set, each made of blocks of %s consecutive samples (%s s) drawn with replacement%s. ",
                page_num4(a, sizeof a, page_json_num(e, "threshold")), page_num4(b, sizeof b, page_json_num(e, "members")),
                page_num4(c, sizeof c, page_json_num(e, "block")), page_num4(d, sizeof d, block_s),
                cJSON_IsTrue(cJSON_GetObjectItemCaseSensitive(e, "library_bagging")) ? ", each also dropping a fraction "
                                                                                        "of the library's terms"
                                                                                      : "");
    }
    fprintf(r->f,
            "<b>Inclusion</b> is the fraction of fits that kept a term: near 1 the data ask for it, near 0 they "
            "do not, in between they cannot decide. The <b>interval</b> holds the middle 90%% of the fitted "
            "coefficients (a fit that left the term out counts as 0). The <b>ensemble law</b> keeps the terms "
            "with inclusion at or above %s, refit on all samples. Terms that no fit kept are not listed.</p>\n",
            page_num4(g, sizeof g, thr));
    cJSON_ArrayForEach(q, eqs) {
        const char *lhs = page_json_str(q, "lhs");
        fputs("<h3>", r->f);
        page_text(r, lhs ? lhs : "?");
        fputs("</h3>\n<table class=\"ens\"><tr><th>term</th><th>inclusion</th><th>median</th><th>90% interval</th>"
              "<th>in the ensemble law</th></tr>\n", r->f);
        const cJSON *p = cJSON_GetObjectItemCaseSensitive(q, "inclusion"), *m = cJSON_GetObjectItemCaseSensitive(q, "median"),
                    *lo = cJSON_GetObjectItemCaseSensitive(q, "low"), *hi = cJSON_GetObjectItemCaseSensitive(q, "high"),
                    *mk = cJSON_GetObjectItemCaseSensitive(q, "mask");
        int listed = 0;
        for (int t = 0; t < T; t++) {
            double pv = item_num(p, t);
            if (!(pv > 0)) continue;
            listed++;
            const cJSON *name = cJSON_GetArrayItem(terms, t);
            int kept = item_num(mk, t) == 1;
            char today[LIB_NAME_MAX * 2];   /* a version-1 file's "z1 z2" shown as "z1*z2" */
            library_name_old_form(cJSON_IsString(name) ? name->valuestring : "?", today, sizeof today);
            fputs("<tr><td>", r->f);
            page_text(r, today);
            fprintf(r->f,
                    "</td><td><span class=\"bar\"><span style=\"width:%.1f%%\"></span></span> %.2f</td>"
                    "<td class=\"n\">%s</td><td class=\"n\">[%s, %s]</td><td>%s</td></tr>\n",
                    100 * pv, pv, page_num4(a, sizeof a, item_num(m, t)), page_num4(b, sizeof b, item_num(lo, t)),
                    page_num4(c, sizeof c, item_num(hi, t)), kept ? "yes" : "<span class=\"off\">no</span>");
        }
        if (!listed) fputs("<tr><td colspan=\"5\" class=\"note\">no fit kept any term</td></tr>\n", r->f);
        fputs("</table>\n", r->f);
    }
    fputs("<h3>The ensemble law</h3>\n", r->f);
    ensemble_law(r, pe, eqs);
    return 0;
}
