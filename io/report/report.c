/* io/report/report.c: see report.h. The page is written top to bottom into one atomic file; each section
 * reads its own files and, when they are missing, writes a one-line note instead. This file: the
 * page, and the sections on the run as a whole (summary, equations, coefficients, training,
 * settings); recordings.c: the sections on recordings; page.c: what both use. */
#include "io/report/report.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <cjson/cJSON.h>

#include "io/fs/atomic_file.h"
#include "io/fs/files.h"
#include "io/report/page.h"
#include "io/run/runlog.h"
#include "sparse/coef.h"
#include "sparse/equation.h"
#include "sparse/library.h"

static const char *const style_sheet =
    "body{font-family:sans-serif;max-width:1120px;margin:1.5em auto;padding:0 1em;color:#1d1d1d;line-height:1.45}\n"
    "h1{font-size:1.6em;margin-bottom:.2em}h2{border-bottom:1px solid #ccc;padding-bottom:.15em;margin-top:1.8em}\n"
    "h3{margin:1.2em 0 .3em}\n"
    ".caution{border-left:5px solid #c75000;background:#fff3e6;padding:.6em 1em;margin:1em 0}\n"
    ".note{color:#666;font-style:italic}.flag{color:#a40000;font-weight:bold}\n"
    "table{border-collapse:collapse;font-size:.9em;margin:.4em 0}td,th{border:1px solid #d6d6d6;padding:2px 8px;"
    "text-align:left;vertical-align:top}th{background:#f2f2f2}td.n{text-align:right;font-family:monospace}\n"
    "td.off{color:#bbb}.settings{display:flex;flex-wrap:wrap;gap:1em;align-items:flex-start}\n"
    ".settings table{margin:0}.settings caption{font-weight:bold;text-align:left}\n"
    "pre{background:#f5f5f5;padding:.6em .8em;overflow-x:auto;font-size:.95em}\n"
    ".math{overflow-x:auto;margin:.5em 0}.math math{font-size:1.2em}.math mtd{padding:.3em .2em}\n"
    ".math mtd:first-child{text-align:right}.math mtd:last-child{text-align:left}\n"
    "details.copy{margin:.3em 0}details.copy summary{cursor:pointer;color:#1864ab}\n"
    "details.copy textarea{display:block;width:100%;box-sizing:border-box;font-family:monospace;font-size:.9em;"
    "margin-top:.3em}\n"
    "figure{margin:.6em 0}svg{max-width:100%;height:auto}figcaption{font-size:.9em;color:#444}\n"
    "img.strip{image-rendering:pixelated;border:1px solid #ccc;background:#808080}\n"
    ".strips{display:flex;flex-wrap:wrap;gap:0 1.5em;align-items:flex-start}\n"
    "nav a{margin-right:1em}\n"
    ".bar{display:inline-block;width:6em;height:.75em;background:#eee;border:1px solid #bbb;vertical-align:middle}"
    ".bar span{display:block;height:100%;background:#3465a4}\n";

/* ---- sections -------------------------------------------------------------------------------- */

/* The log (io/run/runlog.h): these columns are required, the others may be missing in a log from an
 * older writer. */
static int log_read(Report *r, RunLog *L) {
    if (runlog_read(r->dir, L, r->st)) return r->st->code;
    static const char *const req[] = {"phase", "loss", "active"};
    static const unsigned bit[] = {RUNLOG_HAVE_PHASE, RUNLOG_HAVE_LOSS, RUNLOG_HAVE_ACTIVE};
    for (int i = 0; i < 3; i++)
        if (!(L->have & bit[i])) {
            runlog_free(L);
            return status_set(r->st, ST_INPUT, "%s/" RUNLOG_FILE ": no column \"%s\" in the header (not a framelaw log?)",
                              r->dir, req[i]);
        }
    return 0;
}

static void section_summary(Report *r, const RunLog *L) {
    fputs("<h2 id=\"summary\">Summary</h2>\n", r->f);
    long n = L->n;
    if (!n) {
        page_note(r, "log.csv holds no epochs yet: training has not finished its first epoch.");
        return;
    }
    const RunLogRow *row = L->rows, *last = &row[n - 1];
    long refine = 0, best_i = -1;
    for (long i = 0; i < n; i++) {
        if (row[i].phase == RUNLOG_REFINE) refine++;
        double v = row[i].validation;
        if (isfinite(v) && (best_i < 0 || v < row[best_i].validation)) best_i = i;
    }
    char a[32], b[32];
    fprintf(r->f, "<p>%ld epochs logged (%ld in the refinement phase); last loss %s, %ld active coefficients",
            last->epoch, refine, page_num4(a, sizeof a, last->loss), last->active);
    if (best_i >= 0)
        fprintf(r->f, "; lowest validation loss %s at epoch %ld", page_num4(b, sizeof b, row[best_i].validation),
                row[best_i].epoch);
    if (isfinite(last->seconds)) fprintf(r->f, "; %.1f s of training", last->seconds);
    fputs(".</p>\n", r->f);
}

static void section_coefficients(Report *r, const PageEquations *e) {
    fputs("<h2 id=\"coefficients\">Coefficients</h2>\n", r->f);
    if (!e) {
        page_note(r, "equations.json: not written yet, so no coefficient table.");
        return;
    }
    const Library *lib = &e->lib;
    const Coef *co = &e->co;
    int k = co->n_out, nt = co->n_terms, shown = 0;
    const cJSON *eqs = cJSON_GetObjectItemCaseSensitive(e->root, "equations");
    fputs("<table class=\"coef\"><tr><th>term</th>", r->f);
    for (int j = 0; j < k; j++) {
        const char *lhs = page_json_str(cJSON_GetArrayItem(eqs, j), "lhs");
        char b[64];
        if (!lhs) snprintf(b, sizeof b, lib->spec.order == 2 ? "d2z%d/dt2" : "dz%d/dt", j + 1), lhs = b;
        fputs("<th>", r->f);
        page_text(r, lhs);
        fputs("</th>", r->f);
    }
    fputs("</tr>\n", r->f);
    for (int t = 0; t < nt; t++) {
        int any = 0;
        for (int j = 0; j < k; j++) any |= co->mask[(long)t * k + j] && co->xi[(long)t * k + j] != 0;
        if (!any) continue;
        shown++;
        fputs("<tr><td>", r->f);
        page_text(r, lib->names[t]);
        fputs("</td>", r->f);
        for (int j = 0; j < k; j++) {
            double v = co->xi[(long)t * k + j];
            if (co->mask[(long)t * k + j] && v != 0) fprintf(r->f, "<td class=\"n\">%.6g</td>", v);
            else fputs("<td class=\"n off\">0</td>", r->f);
        }
        fputs("</tr>\n", r->f);
    }
    fputs("<tr><th>active terms</th>", r->f);
    for (int j = 0; j < k; j++) {
        int a = 0;
        for (int t = 0; t < nt; t++) a += co->mask[(long)t * k + j] && co->xi[(long)t * k + j] != 0;
        fprintf(r->f, "<th class=\"n\">%d</th>", a);
    }
    fputs("</tr></table>\n", r->f);
    fprintf(r->f, "<p>%d of the library's %d candidate terms appear in some equation; the others were pruned "
                  "from every equation and are not listed. ", shown, nt);
    if (k == 1) fputs("The latent variable z1 is", r->f);
    else fprintf(r->f, "Latent variables z1..z%d are", k);
    fputs(" in the units the encoder chose; time in seconds.</p>\n", r->f);
}

static void section_training(Report *r, const RunLog *L) {
    fputs("<h2 id=\"training\">Training</h2>\n", r->f);
    long n = L->n;
    if (!n) {
        page_note(r, "No epochs logged yet.");
        return;
    }
    /* the plotted figures as a table (n, 6): epoch, loss, reconstruction, dx, dz, active */
    enum { EP, LOSS, REC, DX, DZ, ACT, NC };
    double *d = malloc(sizeof(double) * (size_t)n * NC);
    /* thresholding passes that removed coefficients: epochs where `active` drops */
    double *passes = malloc(sizeof(double) * (size_t)n), refine_at = NAN, warm_end = NAN;
    double *ve = malloc(sizeof(double) * (size_t)n * 2), *vv = ve + n;
    if (!d || !passes || !ve) {
        free(d), free(passes), free(ve);
        page_note(r, "Out of memory: the training plots are left out.");
        return;
    }
    long np = 0, nv = 0;
    for (long i = 0; i < n; i++) {
        const RunLogRow *w = &L->rows[i];
        double *e = d + i * NC;
        e[EP] = (double)w->epoch, e[LOSS] = w->loss, e[REC] = w->reconstruction, e[DX] = w->dx, e[DZ] = w->dz;
        e[ACT] = w->active >= 0 ? (double)w->active : NAN;
        if (i > 0 && e[ACT] < e[ACT - NC]) passes[np++] = e[EP];
        if (isnan(refine_at) && w->phase == RUNLOG_REFINE) refine_at = e[EP] - 1;
        if (w->phase == RUNLOG_WARMUP) warm_end = e[EP];
        if (isfinite(w->validation)) ve[nv] = e[EP], vv[nv++] = w->validation;
    }
    PlotVLines marks[3] = {
        {"thresholding pass (terms removed)", passes, np, "#888", DASH_DASHED},
        {"refinement phase starts", &refine_at, isnan(refine_at) ? 0 : 1, "#a61e4d", DASH_DOTTED},
        {"warm-up ends", &warm_end, isnan(warm_end) ? 0 : 1, "#1864ab", DASH_DOTTED},
    };
    const char *dname = r->order == 2 ? "x'' term" : "x' term";
    const char *zname = r->order == 2 ? "z'' term" : "z' term";
    PlotSeries s[6];
    int ns = 0;
    const double *ep = d + EP;
    s[ns++] = (PlotSeries){"loss (weighted total)", ep, d + LOSS, n, NC, plot_color(0), DASH_SOLID};
    if (L->have & RUNLOG_HAVE_RECONSTRUCTION)
        s[ns++] = (PlotSeries){"reconstruction term", ep, d + REC, n, NC, plot_color(1), DASH_SOLID};
    /* with derivatives in latent space the decoder's derivative term is not used (logged as 0) */
    int dx_used = r->cfg->derivatives != DERIVS_LATENT;
    if ((L->have & RUNLOG_HAVE_DX) && dx_used) s[ns++] = (PlotSeries){dname, ep, d + DX, n, NC, plot_color(2), DASH_SOLID};
    if (L->have & RUNLOG_HAVE_DZ) s[ns++] = (PlotSeries){zname, ep, d + DZ, n, NC, plot_color(4), DASH_SOLID};
    if (nv) s[ns++] = (PlotSeries){"validation loss (no L1)", ve, vv, nv, 1, plot_color(3), DASH_DASHED};
    Plot p = {.title = "Loss over epochs (log scale)", .xlabel = "epoch", .ylabel = "loss (no unit)",
              .ylog = 1, .series = s, .n_series = ns, .vlines = marks, .n_vlines = 3};
    page_plot(r, &p);
    fputs("<p>The loss terms are means over the batch and the components, before weighting (docs/training.md); "
          "the total is weighted and includes the L1 term. A thresholding pass that removed no coefficient "
          "leaves no mark.", r->f);
    if (!dx_used)
        fprintf(r->f, " The %s term is not shown: with model.derivatives latent the frames' derivatives are not "
                      "used.", r->order == 2 ? "x''" : "x'");
    fputs("</p>\n", r->f);
    PlotSeries a = {"active coefficients", ep, d + ACT, n, NC, plot_color(0), DASH_SOLID};
    Plot q = {.title = "Active coefficients over epochs", .xlabel = "epoch", .ylabel = "active coefficients (count)",
              .y_zero = 1, .height = 260, .series = &a, .n_series = 1, .vlines = marks, .n_vlines = 3};
    page_plot(r, &q);
    free(d);
    free(passes);
    free(ve);
}

/* One row: key and value (strings bare, anything else as compact JSON). */
static void setting_row(Report *r, const char *key, const cJSON *it) {
    fputs("<tr><td>", r->f);
    page_text(r, key);
    fputs("</td><td>", r->f);
    if (cJSON_IsString(it)) page_text(r, it->valuestring);
    else {
        char *s = cJSON_PrintUnformatted(it);
        page_text(r, s ? s : "?");
        free(s);
    }
    fputs("</td></tr>\n", r->f);
}

/* Rows of an object, nested objects flattened to dotted keys. */
static void settings_rows(Report *r, const cJSON *o, const char *prefix) {
    const cJSON *it;
    cJSON_ArrayForEach(it, o) {
        char key[256];
        snprintf(key, sizeof key, "%s%s%s", prefix, *prefix ? "." : "", it->string);
        if (cJSON_IsObject(it)) settings_rows(r, it, key);
        else setting_row(r, key, it);
    }
}

/* One small table per config section, and one for the top-level keys (output). */
static void section_settings(Report *r) {
    fputs("<h2 id=\"settings\">Settings (config.json)</h2>\n<div class=\"settings\">\n", r->f);
    char *json = config_to_json(r->cfg);
    cJSON *root = cJSON_Parse(json);
    free(json);
    const cJSON *it;
    int loose = 0;
    cJSON_ArrayForEach(it, root) {
        if (!cJSON_IsObject(it)) {
            loose = 1;
            continue;
        }
        fputs("<table><caption>", r->f);
        page_text(r, it->string);
        fputs("</caption>\n", r->f);
        settings_rows(r, it, "");
        fputs("</table>\n", r->f);
    }
    if (loose) {
        fputs("<table><caption>run</caption>\n", r->f);
        cJSON_ArrayForEach(it, root) if (!cJSON_IsObject(it)) setting_row(r, it->string, it);
        fputs("</table>\n", r->f);
    }
    fputs("</div>\n<p>Every key is described in docs/config.md.</p>\n", r->f);
    cJSON_Delete(root);
}

/* provenance.json: one row per session (io/run/provenance.h). */
static void section_provenance(Report *r) {
    fputs("<h2 id=\"provenance\">Provenance (provenance.json)</h2>\n", r->f);
    char path[PATH_LEN], *text;
    page_path(path, r, "provenance.json");
    Status ps;
    if (fs_read_file(path, MAX_TEXT_BYTES, &text, NULL, &ps)) {
        page_note(r, "provenance.json: none (a run made before framelaw recorded it).");
        return;
    }
    cJSON *root = cJSON_Parse(text);
    free(text);
    const cJSON *sessions = root ? cJSON_GetObjectItem(root, "sessions") : NULL, *s;
    if (!cJSON_IsArray(sessions)) {
        page_note(r, "provenance.json: not readable.");
        cJSON_Delete(root);
        return;
    }
    fputs("<table>\n<tr><th>command</th><th>started (UTC)</th><th>framelaw</th><th>host</th><th>threads</th>"
          "<th>BLAS</th><th>arguments</th></tr>\n", r->f);
    static const char *const keys[5] = {"command", "started", "framelaw", "host", "threads"};
    cJSON_ArrayForEach(s, sessions) {
        fputs("<tr>", r->f);
        for (int i = 0; i < 5; i++) {
            const cJSON *v = cJSON_GetObjectItem(s, keys[i]);
            fputs("<td>", r->f);
            if (cJSON_IsString(v)) page_text(r, v->valuestring);
            else if (cJSON_IsNumber(v)) fprintf(r->f, "%d", v->valueint);
            fputs("</td>", r->f);
        }
        const cJSON *core = cJSON_GetObjectItem(s, "blas_config"), *argv = cJSON_GetObjectItem(s, "argv"), *a;
        fputs("<td>", r->f);
        if (cJSON_IsString(core)) page_text(r, core->valuestring);
        fputs("</td><td><code>", r->f);
        cJSON_ArrayForEach(a, argv) if (cJSON_IsString(a)) {
            page_text(r, a->valuestring);
            fputs(" ", r->f);
        }
        fputs("</code></td></tr>\n", r->f);
    }
    fputs("</table>\n", r->f);
    cJSON_Delete(root);
}

/* ---- the whole page -------------------------------------------------------------------------- */

static int write_page(Report *r, const RunLog *L) {
    FILE *f = r->f;
    char name[256];
    const char *d = r->dir;
    size_t l = strlen(d);
    while (l > 1 && d[l - 1] == '/') l--;
    size_t b = l;
    while (b > 0 && d[b - 1] != '/') b--;
    snprintf(name, sizeof name, "%.*s", (int)(l - b), d + b);

    fputs("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
          "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>framelaw report: ", f);
    page_text(r, name);
    fprintf(f, "</title>\n<style>\n%s</style>\n</head>\n<body>\n<h1>framelaw report: ", style_sheet);
    page_text(r, name);
    fputs("</h1>\n<p class=\"caution\"><b>Caution.</b> " REPORT_CAUTION "</p>\n", f);
    fputs("<nav><a href=\"#summary\">Summary</a><a href=\"#equations\">Equations</a>"
          "<a href=\"#coefficients\">Coefficients</a><a href=\"#ensemble\">Ensemble</a><a href=\"#training\">Training</a>"
          "<a href=\"#trajectories\">Trajectories</a><a href=\"#forecast\">Forecasts</a>"
          "<a href=\"#reconstructions\">Reconstructions</a><a href=\"#settings\">Settings</a>"
          "<a href=\"#provenance\">Provenance</a></nav>\n", f);
    section_summary(r, L);
    PageEquations eq;
    int have = page_equations_read(r, &eq);
    if (have > 0) return have;
    const PageEquations *e = have ? NULL : &eq;
    int rc = report_section_equations(r, e);
    if (!rc) section_coefficients(r, e);
    if (!rc) rc = report_section_ensemble(r, e);
    page_equations_free(&eq);
    if (rc) return rc;
    section_training(r, L);
    if (report_section_trajectories(r)) return r->st->code;
    if (report_section_forecast(r)) return r->st->code;
    report_section_reconstructions(r);
    section_settings(r);
    section_provenance(r);
    fputs("<hr>\n<p><small>Written by framelaw report. The guide to this page is docs/report.md.</small></p>\n"
          "</body>\n</html>\n", f);
    return 0;
}

int report_write(const char *run_dir, const char *out_path, ReportSummary *sum, Status *st) {
    struct stat sb;
    if (stat(run_dir, &sb) != 0 || !S_ISDIR(sb.st_mode))
        return status_set(st, ST_INPUT, "%s: no such run folder", run_dir);
    Report r = {.dir = run_dir, .st = st};
    char path[PATH_LEN];
    page_path(path, &r, "config.json");
    if (!fs_exists(path)) return status_set(st, ST_INPUT, "%s: missing (not a run folder?)", path);
    r.cfg = malloc(sizeof *r.cfg);
    if (!r.cfg) return status_set(st, ST_RUNTIME, "out of memory");
    config_defaults(r.cfg);
    if (config_load_run(r.cfg, path, st)) {
        free(r.cfg);
        return st->code;
    }
    r.k = r.cfg->latent;
    r.order = r.cfg->order;
    page_path(path, &r, RUNLOG_FILE);
    if (!fs_exists(path)) {
        free(r.cfg);
        return status_set(st, ST_INPUT, "%s: missing (training has not started, or not a run folder)", path);
    }
    RunLog L;
    if (log_read(&r, &L)) {
        free(r.cfg);
        return st->code;
    }
    char out[PATH_LEN];
    if (out_path) snprintf(out, sizeof out, "%s", out_path);
    else page_path(out, &r, "report.html");
    AtomicFile af;
    int rc = atomic_open(&af, out, st);
    if (!rc) {
        r.f = af.f;
        rc = write_page(&r, &L);
        if (rc) atomic_abort(&af); /* a write error is named by atomic_commit, with its cause */
        else rc = atomic_commit(&af, st);
    }
    runlog_free(&L);
    free(r.cfg);
    if (!rc && sum) *sum = r.sum;
    return rc;
}
