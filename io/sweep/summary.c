/* io/sweep/summary.c: the sweep's summary: every member's results read back (log, equations,
 * forecast), ranked, grouped by model structure, with the Pareto front of error against active
 * terms; written as summary.csv and summary.html, which links each member's report (written here
 * for a finished member when missing or stale; io/sweep/sweep.h, docs/sweeps.md). */
#include "io/sweep/sweep.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "io/fs/atomic_file.h"
#include "io/fs/files.h"
#include "io/report/report.h"
#include "io/sweep/common.h"
#include "sparse/equation.h"

/* Model structure of an equations.json: per equation, the terms with a nonzero active
 * coefficient. *active gets their number. malloc'ed key, or NULL with a message in why. */
static char *structure_of(const char *path, long *active, char *why, size_t n_why) {
    char *text = sweep_read_text(path, 64u << 20, why, n_why);
    if (!text) return NULL;
    Library lib;
    Coef coef;
    Status st;
    if (equation_from_json(text, &lib, &coef, &st)) {
        free(text);
        snprintf(why, n_why, "equations.json: %s", st.msg);
        return NULL;
    }
    free(text);
    TextBuf b = {0};
    int k = lib.spec.n_latent;
    *active = 0;
    for (int j = 0; j < k; j++) {
        if (lib.spec.order == 2) text_printf(&b, "%sd2z%d/dt2:", j ? " | " : "", j + 1);
        else text_printf(&b, "%sdz%d/dt:", j ? " | " : "", j + 1);
        int any = 0;
        for (int t = 0; t < lib.n_terms; t++) {
            long q = (long)t * k + j;
            if (!coef.mask[q] || coef.xi[q] == 0) continue;
            text_printf(&b, "%s %s", any ? "," : "", lib.names[t]);
            any = 1;
            (*active)++;
        }
        if (!any) text_puts(&b, " 0");
    }
    library_free(&lib);
    coef_free(&coef);
    char *key = text_take(&b);
    if (!key) snprintf(why, n_why, "out of memory");
    return key;
}

/* Mean over recordings of mean_error in forecast.json; NAN when absent or unreadable. *no_better: the
 * mean latent error is not below the persistence forecast's (results.md: the trivial law z' = 0). */
static double forecast_error(const char *dir, char *why, size_t n_why, int *no_better) {
    *no_better = 0;
    char p[CFG_PATH_MAX + 32];
    snprintf(p, sizeof p, "%s/forecast.json", dir);
    if (!fs_exists(p)) return NAN;
    char *text = sweep_read_text(p, 64u << 20, why, n_why);
    if (!text) return NAN;
    cJSON *root = text ? cJSON_Parse(text) : NULL;
    free(text);
    const cJSON *recs = root ? cJSON_GetObjectItemCaseSensitive(root, "recordings") : NULL;
    double sum = 0, lat = 0, hold = 0;
    int n = 0, nl = 0, stopped = 0;
    for (const cJSON *r = cJSON_IsArray(recs) ? recs->child : NULL; r; r = r->next) {
        const cJSON *e = cJSON_GetObjectItemCaseSensitive(r, "mean_error");
        if (cJSON_IsNumber(e) && isfinite(e->valuedouble)) sum += e->valuedouble, n++;
        const cJSON *l = cJSON_GetObjectItemCaseSensitive(r, "latent_mean_error"),
                    *h = cJSON_GetObjectItemCaseSensitive(r, "persistence_latent_mean_error");
        if (cJSON_IsNumber(l) && cJSON_IsNumber(h)) lat += l->valuedouble, hold += h->valuedouble, nl++;
        stopped |= cJSON_IsString(cJSON_GetObjectItemCaseSensitive(r, "stopped"));
    }
    *no_better = nl > 0 && (stopped || !(lat < hold));
    if (!root || !cJSON_IsArray(recs)) snprintf(why, n_why, "forecast.json: unreadable or without \"recordings\"");
    else if (!n) snprintf(why, n_why, "forecast.json: no recording with a mean_error");
    cJSON_Delete(root);
    return n ? sum / n : NAN;
}

static char *equations_line(const char *dir) {
    char p[CFG_PATH_MAX + 32];
    snprintf(p, sizeof p, "%s/equations.txt", dir);
    char *t;
    Status missing;   /* no equations.txt yet: no equations to show */
    if (fs_read_file(p, 1u << 20, &t, NULL, &missing)) return NULL;
    TextBuf b = {0};
    int first = 1;
    for (char *line = strtok(t, "\r\n"); line; line = strtok(NULL, "\r\n")) {
        if (!*line) continue;
        if (!first) text_puts(&b, "; ");
        text_puts(&b, line);
        first = 0;
    }
    free(t);
    return text_take(&b);
}

/* why += "; " msg */
static void add_problem(char *why, size_t n, const char *msg) {
    size_t l = strlen(why);
    snprintf(why + l, n - l, "%s%s", l ? "; " : "", msg);
}

/* A finished member whose law has no term says nothing moves, and one whose forecasts are no better
 * than holding the first state explains nothing of the motion: however small their errors, they
 * are no laws. */
static int no_law(const SweepRow *r) { return (r->active == 0 || r->no_better) && !strcmp(r->status, "finished"); }

static int row_cmp(const void *pa, const void *pb) {
    const SweepRow *a = pa, *b = pb;
    int ra = no_law(a) ? 3 : a->error_from == ERR_FORECAST ? 0 : a->error_from == ERR_VALIDATION ? 1 : 2;
    int rb = no_law(b) ? 3 : b->error_from == ERR_FORECAST ? 0 : b->error_from == ERR_VALIDATION ? 1 : 2;
    if (ra != rb) return ra - rb;
    if (ra < 2 && a->error != b->error) return a->error < b->error ? -1 : 1;
    return a->member - b->member;
}

void sweep_summary_free(SweepSummary *sum) {
    for (int r = 0; r < sum->n_rows; r++) {
        free(sum->rows[r].equations);
        free(sum->rows[r].problem);
    }
    for (int g = 0; g < sum->n_groups; g++) free(sum->groups[g].key);
    free(sum->rows);
    free(sum->groups);
    sweep_inclusion_free(&sum->inclusion);
    memset(sum, 0, sizeof *sum);
}

int sweep_summary(const Sweep *sw, SweepSummary *sum, Status *st) {
    memset(sum, 0, sizeof *sum);
    int n = sw->n_members;
    sum->rows = calloc((size_t)(n ? n : 1), sizeof *sum->rows);
    char **keys = calloc((size_t)(n ? n : 1), sizeof *keys);
    Config *c = malloc(sizeof *c);
    if (!sum->rows || !keys || !c) {
        free(keys);
        free(c);
        free(sum->rows);
        sum->rows = NULL;
        return status_set(st, ST_RUNTIME, "out of memory");
    }
    sum->n_rows = n;
    int have_forecast = 0;
    for (int i = 0; i < n; i++) {
        SweepRow *r = &sum->rows[i];
        const char *dir = sw->members[i].dir;
        char why[3200] = "", one[1100] = "", p[CFG_PATH_MAX + 32];
        r->member = i;
        r->structure = -1;
        Status ls;
        if (sweep_log_read(dir, &r->log, &ls)) add_problem(why, sizeof why, ls.msg);
        r->active = r->log.active;
        int have_cfg = !sweep_member_config(sw, i, c, st);
        long epochs = have_cfg ? c->epochs : 0;
        /* with derivatives in latent space the dx term is not used (the log holds 0): left empty */
        if (have_cfg && c->derivatives == DERIVS_LATENT) r->log.dx = NAN;
        snprintf(p, sizeof p, "%s/equations.json", dir);
        int eq = fs_exists(p);
        if (eq) {
            long act = 0;
            keys[i] = structure_of(p, &act, one, sizeof one);
            if (keys[i]) r->active = act;
            else add_problem(why, sizeof why, one);
        }
        r->status = eq && r->log.epoch >= epochs ? "finished" : fs_exists(dir) ? "incomplete" : "not started";
        r->equations = equations_line(dir);
        snprintf(p, sizeof p, "%s/report.html", dir);
        r->report = fs_exists(p);
        one[0] = 0;
        r->error = forecast_error(dir, one, sizeof one, &r->no_better);
        if (one[0]) add_problem(why, sizeof why, one);
        if (isfinite(r->error)) {
            r->error_from = ERR_FORECAST;
            have_forecast = 1;
        } else if (isfinite(r->log.validation)) {
            r->error = r->log.validation;
            r->error_from = ERR_VALIDATION;
        } else {
            r->error = NAN;
            r->error_from = ERR_NONE;
        }
        if (no_law(r) && r->active == 0)
            add_problem(why, sizeof why, "the law has no term (it says nothing moves), ranked last: lower "
                                         "threshold.value, or train longer before the first threshold pass");
        else if (no_law(r))
            add_problem(why, sizeof why, "the law forecasts the held-out recordings no better than holding the "
                                         "first state (forecast.json), ranked last: lower threshold.value, or "
                                         "train longer before the first threshold pass");
        if (why[0]) r->problem = sweep_strdup(why);
    }
    free(c);
    /* rank: forecast errors first, then validation losses, then members without either */
    qsort(sum->rows, (size_t)n, sizeof *sum->rows, row_cmp);
    /* Pareto front of (error, active terms) among the finished members ranked by the best source */
    sum->pareto_from = have_forecast ? ERR_FORECAST : ERR_VALIDATION;
    for (int a = 0; a < n; a++) {
        SweepRow *r = &sum->rows[a];
        if (r->error_from != sum->pareto_from || r->active <= 0 || no_law(r) || strcmp(r->status, "finished")) continue;
        int dominated = 0;
        for (int b = 0; b < n && !dominated; b++) {
            const SweepRow *q = &sum->rows[b];
            if (b == a || q->error_from != sum->pareto_from || q->active <= 0 || no_law(q) || strcmp(q->status, "finished"))
                continue;
            if (q->error <= r->error && q->active <= r->active && (q->error < r->error || q->active < r->active))
                dominated = 1;
        }
        r->pareto = !dominated;
    }
    /* group equal structures; groups by size, then by their best rank */
    sum->groups = calloc((size_t)(n ? n : 1), sizeof *sum->groups);
    if (!sum->groups) {
        for (int i = 0; i < n; i++) free(keys[i]);
        free(keys);
        return status_set(st, ST_RUNTIME, "out of memory");
    }
    for (int a = 0; a < n; a++) {
        char *k = keys[sum->rows[a].member];
        if (!k) continue;
        int g = 0;
        while (g < sum->n_groups && strcmp(sum->groups[g].key, k)) g++;
        if (g == sum->n_groups) {
            sum->groups[g].key = k;
            sum->groups[g].best = a;
            sum->n_groups++;
            keys[sum->rows[a].member] = NULL;
        }
        sum->groups[g].count++;
        sum->rows[a].structure = g;
    }
    for (int i = 0; i < n; i++) free(keys[i]);
    free(keys);
    /* stable sort of the few groups by count (insertion), then renumber the rows */
    int *order = malloc(sizeof(int) * (size_t)(sum->n_groups ? sum->n_groups : 1));
    int *where = malloc(sizeof(int) * (size_t)(sum->n_groups ? sum->n_groups : 1));
    SweepGroup *sorted = malloc(sizeof(SweepGroup) * (size_t)(sum->n_groups ? sum->n_groups : 1));
    if (!order || !where || !sorted) {
        free(order), free(where), free(sorted);
        return status_set(st, ST_RUNTIME, "out of memory");
    }
    for (int g = 0; g < sum->n_groups; g++) order[g] = g;
    for (int g = 1; g < sum->n_groups; g++) {
        int v = order[g], h = g;
        while (h > 0 && (sum->groups[order[h - 1]].count < sum->groups[v].count ||
                         (sum->groups[order[h - 1]].count == sum->groups[v].count &&
                          sum->groups[order[h - 1]].best > sum->groups[v].best))) {
            order[h] = order[h - 1];
            h--;
        }
        order[h] = v;
    }
    for (int g = 0; g < sum->n_groups; g++) sorted[g] = sum->groups[order[g]], where[order[g]] = g;
    memcpy(sum->groups, sorted, sizeof(SweepGroup) * (size_t)sum->n_groups);
    for (int a = 0; a < n; a++)
        if (sum->rows[a].structure >= 0) sum->rows[a].structure = where[sum->rows[a].structure];
    free(order), free(where), free(sorted);
    sweep_inclusion(sw, &sum->inclusion);
    status_ok(st);
    return 0;
}

static void csv_field(TextBuf *b, const char *s) {
    if (!s) s = "";
    if (!strpbrk(s, ",\"\r\n")) { text_puts(b, s); return; }
    text_puts(b, "\"");
    for (; *s; s++) text_add(b, *s == '"' ? "\"\"" : s, *s == '"' ? 2 : 1);
    text_puts(b, "\"");
}

static void num(char *out, size_t n, double v) {
    if (isfinite(v)) snprintf(out, n, "%.6g", v);
    else out[0] = 0;
}

static const char *err_from_name(SweepErrorFrom e) {
    return e == ERR_FORECAST ? "forecast" : e == ERR_VALIDATION ? "validation" : "";
}

char *sweep_summary_csv(const Sweep *sw, const SweepSummary *sum) {
    TextBuf b = {0};
    text_puts(&b, "rank,id,status");
    for (int a = 0; a < sw->n_axes; a++) {
        text_puts(&b, ",");
        csv_field(&b, sw->axes[a].key);
    }
    if (sw->seeds_vary) text_puts(&b, ",train.seed");
    text_puts(&b, ",epochs,loss,reconstruction,dx,dz,validation,forecast_error,ranked_by,active_terms,pareto,"
                 "structure,same_structure,equations,folder,problem\n");
    for (int k = 0; k < sum->n_rows; k++) {
        const SweepRow *r = &sum->rows[k];
        const SweepMember *m = &sw->members[r->member];
        char v[1024];
        text_printf(&b, "%d,%s,%s", k + 1, m->id, r->status);
        for (int a = 0; a < sw->n_axes; a++) {
            sweep_member_value(sw, r->member, a, v, sizeof v);
            text_puts(&b, ",");
            csv_field(&b, v);
        }
        if (sw->seeds_vary) text_printf(&b, ",%llu", (unsigned long long)m->seed);
        char l[32], rc[32], dx[32], dz[32], va[32], fe[32];
        num(l, sizeof l, r->log.loss), num(rc, sizeof rc, r->log.reconstruction), num(dx, sizeof dx, r->log.dx);
        num(dz, sizeof dz, r->log.dz), num(va, sizeof va, r->log.validation);
        num(fe, sizeof fe, r->error_from == ERR_FORECAST ? r->error : NAN);
        text_printf(&b, ",%ld,%s,%s,%s,%s,%s,%s,%s,", r->log.epoch, l, rc, dx, dz, va, fe, err_from_name(r->error_from));
        if (r->active >= 0) text_printf(&b, "%ld", r->active);
        text_printf(&b, ",%s,", r->pareto ? "yes" : "");
        if (r->structure >= 0) text_printf(&b, "S%d,%d", r->structure + 1, sum->groups[r->structure].count);
        else text_puts(&b, ",");
        text_puts(&b, ",");
        csv_field(&b, r->equations);
        text_puts(&b, ",");
        csv_field(&b, m->dir);
        text_puts(&b, ",");
        csv_field(&b, r->problem);
        text_puts(&b, "\n");
    }
    return text_take(&b);
}

static void html_text(TextBuf *b, const char *s) {
    for (; s && *s; s++) {
        switch (*s) {
        case '<': text_puts(b, "&lt;"); break;
        case '>': text_puts(b, "&gt;"); break;
        case '&': text_puts(b, "&amp;"); break;
        case '"': text_puts(b, "&quot;"); break;
        default: text_add(b, s, 1);
        }
    }
}

char *sweep_summary_html(const Sweep *sw, const SweepSummary *sum) {
    TextBuf b = {0};
    int fin = 0, inc = 0, none = 0, by_val = 0;
    for (int k = 0; k < sum->n_rows; k++) {
        const SweepRow *r = &sum->rows[k];
        if (!strcmp(r->status, "finished")) fin++;
        else if (!strcmp(r->status, "incomplete")) inc++;
        else none++;
        if (r->error_from == ERR_VALIDATION) by_val++;
    }
    text_puts(&b, "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>framelaw sweep ");
    html_text(&b, sw->stem);
    text_puts(&b, "</title>\n<style>\n"
                 "body{font-family:system-ui,sans-serif;margin:2em;color:#222}\n"
                 "table{border-collapse:collapse;font-size:13px;margin:1em 0}\n"
                 "th,td{border:1px solid #ccc;padding:3px 7px;text-align:left;vertical-align:top}\n"
                 "th{background:#f0f0f0}\ntd.n{text-align:right;font-variant-numeric:tabular-nums}\n"
                 "tr.front td{background:#eef6ee}\ntd.eq{font-family:monospace;white-space:pre-wrap}\n"
                 ".muted{color:#888}\n"
                 ".bar{display:inline-block;width:6em;height:.75em;background:#eee;border:1px solid #bbb;"
                 "vertical-align:middle}.bar span{display:block;height:100%;background:#3465a4}\n</style>\n</head>\n<body>\n<h1>Sweep ");
    html_text(&b, sw->stem);
    text_puts(&b, "</h1>\n<p>");
    text_printf(&b, "%d members: %d finished, %d incomplete, %d not started. Sweep file: <code>", sum->n_rows, fin, inc, none);
    html_text(&b, sw->path);
    text_puts(&b, "</code>; folder: <code>");
    html_text(&b, sw->output);
    text_puts(&b, "</code>.</p>\n<p>Ranked by the forecast error on the held-out recordings (the mean over recordings of "
                 "<code>mean_error</code> in <code>forecast.json</code>); a member without forecasts is ranked after them "
                 "by its last validation loss, marked <b>(v)</b>. &#9670; marks the Pareto front of error against "
                 "active terms among the finished members ranked by ");
    text_puts(&b, sum->pareto_from == ERR_FORECAST ? "forecast error" : "validation loss");
    text_puts(&b, ": no other member has both a lower or equal error and fewer or as many terms.</p>\n<table>\n<tr><th>rank</th><th>member</th><th>status</th>");
    for (int a = 0; a < sw->n_axes; a++) {
        text_puts(&b, "<th>");
        html_text(&b, sw->axes[a].key);
        text_puts(&b, "</th>");
    }
    if (sw->seeds_vary) text_puts(&b, "<th>train.seed</th>");
    text_puts(&b, "<th>epochs</th><th>loss</th><th>validation</th><th>error</th><th>terms</th><th>front</th>"
                 "<th>structure</th><th>equations</th><th>report</th></tr>\n");
    for (int k = 0; k < sum->n_rows; k++) {
        const SweepRow *r = &sum->rows[k];
        const SweepMember *m = &sw->members[r->member];
        char v[1024], l[32], va[32], er[32];
        text_printf(&b, "<tr%s><td class=\"n\">%d</td><td>%s</td><td>%s</td>", r->pareto ? " class=\"front\"" : "", k + 1,
                   m->id, r->status);
        for (int a = 0; a < sw->n_axes; a++) {
            sweep_member_value(sw, r->member, a, v, sizeof v);
            text_puts(&b, "<td>");
            html_text(&b, v);
            text_puts(&b, "</td>");
        }
        if (sw->seeds_vary) text_printf(&b, "<td class=\"n\">%llu</td>", (unsigned long long)m->seed);
        num(l, sizeof l, r->log.loss), num(va, sizeof va, r->log.validation), num(er, sizeof er, r->error);
        text_printf(&b, "<td class=\"n\">%ld</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s%s</td>",
                   r->log.epoch, l, va, er, r->error_from == ERR_VALIDATION ? " (v)" : "");
        if (r->active >= 0) text_printf(&b, "<td class=\"n\">%ld</td>", r->active);
        else text_puts(&b, "<td></td>");
        text_printf(&b, "<td>%s</td>", r->pareto ? "&#9670;" : "");
        if (r->structure >= 0) text_printf(&b, "<td>S%d (%d)</td>", r->structure + 1, sum->groups[r->structure].count);
        else text_puts(&b, "<td></td>");
        text_puts(&b, "<td class=\"eq\">");
        if (r->equations) {
            for (const char *s = r->equations; *s; s++) {
                if (s[0] == ';' && s[1] == ' ') { text_puts(&b, "\n"); s++; }
                else html_text(&b, (char[]){*s, 0});
            }
        }
        if (r->problem) {
            text_puts(&b, "<span class=\"muted\">");
            html_text(&b, r->problem);
            text_puts(&b, "</span>");
        }
        /* the member's folder is <output>/<id>, beside this page */
        if (r->report) text_printf(&b, "</td><td><a href=\"%s/report.html\">report</a></td></tr>\n", m->id);
        else text_puts(&b, "</td><td class=\"muted\">not made yet</td></tr>\n");
    }
    text_puts(&b, "</table>\n<h2>Model structures</h2>\n");
    if (!sum->n_groups) {
        text_puts(&b, "<p class=\"muted\">No member has written its equations yet.</p>\n");
    } else {
        text_puts(&b, "<p>Members whose models have the same active terms in every equation (the coefficients may "
                     "differ). Latent variables are compared by their numbers: a model with z1 and z2 swapped counts "
                     "as another structure.</p>\n<table>\n<tr><th>structure</th><th>members</th><th>best member</th>"
                     "<th>active terms per equation</th><th>all members</th></tr>\n");
        for (int g = 0; g < sum->n_groups; g++) {
            const SweepGroup *gr = &sum->groups[g];
            text_printf(&b, "<tr><td>S%d</td><td class=\"n\">%d</td><td>%s</td><td class=\"eq\">", g + 1, gr->count,
                       sw->members[sum->rows[gr->best].member].id);
            for (const char *s = gr->key; *s; s++) {
                if (s[0] == ' ' && s[1] == '|' && s[2] == ' ') { text_puts(&b, "\n"); s += 2; }
                else html_text(&b, (char[]){*s, 0});
            }
            text_puts(&b, "</td><td>");
            int first = 1;
            for (int k = 0; k < sum->n_rows; k++)
                if (sum->rows[k].structure == g) {
                    text_printf(&b, "%s%s", first ? "" : ", ", sw->members[sum->rows[k].member].id);
                    first = 0;
                }
            text_puts(&b, "</td></tr>\n");
        }
        text_puts(&b, "</table>\n");
    }
    sweep_inclusion_html(&b, &sum->inclusion);
    if (by_val) text_printf(&b, "<p class=\"muted\">(v): %d member(s) ranked by the validation loss (no forecast.json).</p>\n", by_val);
    text_puts(&b, "</body>\n</html>\n");
    return text_take(&b);
}

/* Modification time of dir/name in nanoseconds; -1 when it does not exist. */
static long long mtime_ns(const char *dir, const char *name) {
    char p[CFG_PATH_MAX + 32];
    struct stat sb;
    snprintf(p, sizeof p, "%s/%s", dir, name);
    if (stat(p, &sb)) return -1;
    return (long long)sb.st_mtim.tv_sec * 1000000000LL + sb.st_mtim.tv_nsec;
}

/* A finished member's report, written when missing or older than its results. */
static void member_report(const Sweep *sw, SweepRow *r) {
    if (strcmp(r->status, "finished")) return;
    const char *dir = sw->members[r->member].dir;
    static const char *const results[] = {"log.csv", "equations.json", "forecast.json"};
    long long have = mtime_ns(dir, "report.html"), newest = -1;
    for (int i = 0; i < 3; i++) {
        long long t = mtime_ns(dir, results[i]);
        if (t > newest) newest = t;
    }
    if (have >= 0 && have >= newest) return;
    Status st;
    if (report_write(dir, NULL, NULL, &st)) {
        char why[1100];
        snprintf(why, sizeof why, "report: %s", st.msg);
        if (r->problem) {
            size_t l = strlen(r->problem) + strlen(why) + 3;
            char *b = malloc(l);
            if (b) snprintf(b, l, "%s; %s", r->problem, why);
            free(r->problem);
            r->problem = b;
        } else {
            r->problem = sweep_strdup(why);
        }
        return;
    }
    r->report = 1;
}

int sweep_write_summary(const Sweep *sw, SweepSummary *sum_in, Status *st) {
    SweepSummary own;
    SweepSummary *sum = sum_in ? sum_in : &own;
    int fd = -1;
    int rc = fs_make_dirs(sw->output, st);
    if (!rc) rc = sweep_lock(sw->output, ".summary.lock", &fd, st);
    if (!rc) atomic_remove_stale(sw->output, NULL); /* a killed writer's summary temporaries */
    if (!rc) rc = sweep_summary(sw, sum, st);
    if (rc) { sweep_unlock(fd); return rc; }
    for (int k = 0; k < sum->n_rows; k++) member_report(sw, &sum->rows[k]);
    char *csv = sweep_summary_csv(sw, sum), *html = sweep_summary_html(sw, sum), *inc = sweep_inclusion_csv(&sum->inclusion);
    char p[CFG_PATH_MAX + 32];
    if (!csv || !html || !inc) rc = status_set(st, ST_RUNTIME, "out of memory");
    if (!rc) {
        snprintf(p, sizeof p, "%s/summary.csv", sw->output);
        rc = atomic_write_bytes(p, csv, strlen(csv), st);
    }
    if (!rc) {
        snprintf(p, sizeof p, "%s/summary.html", sw->output);
        rc = atomic_write_bytes(p, html, strlen(html), st);
    }
    if (!rc) {
        snprintf(p, sizeof p, "%s/inclusion.csv", sw->output);
        rc = atomic_write_bytes(p, inc, strlen(inc), st);
    }
    free(inc);
    free(csv);
    free(html);
    sweep_unlock(fd);
    if (!sum_in) sweep_summary_free(&own);
    return rc;
}
