/* io/report/report.c: see report.h. The page is written top to bottom into one atomic file; each section
 * reads its own files and, when they are missing, writes a one-line note instead. */
#include "io/report/report.h"

#include <dirent.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <cjson/cJSON.h>

#include "io/data/csv.h"
#include "io/fs/atomic_file.h"
#include "io/fs/files.h"
#include "io/report/base64.h"
#include "io/run/config.h"
#include "io/run/runlog.h"
#include "io/report/svgplot.h"
#include "sparse/coef.h"
#include "sparse/equation.h"
#include "sparse/library.h"

#define FORECAST_FORMAT "framelaw-forecast"
#define FORECAST_VERSION 1
#define MAX_RECORDINGS 16           /* recordings plotted per section; the rest are listed */
#define MAX_IMAGE_BYTES (32u << 20) /* larger PNGs are not embedded */
#define MAX_TEXT_BYTES (256u << 20) /* a CSV or JSON file of a run is far smaller */
#define PATH_LEN 4400

/* ---- files ----------------------------------------------------------------------------------- */

static int cmp_str(const void *a, const void *b) { return strcmp(*(char *const *)a, *(char *const *)b); }

/* Names of the files in dir ending in ext, sorted; malloc'ed (free with free_names). -1 when dir
 * cannot be opened. */
static int list_files(const char *dir, const char *ext, char ***names) {
    *names = NULL;
    DIR *d = opendir(dir);
    if (!d) return -1;
    int n = 0, cap = 0;
    size_t le = strlen(ext);
    struct dirent *e;
    while ((e = readdir(d))) {
        size_t l = strlen(e->d_name);
        if (e->d_name[0] == '.' || l <= le || strcmp(e->d_name + l - le, ext)) continue;
        if (n == cap) {
            cap = cap ? 2 * cap : 16;
            char **b = realloc(*names, sizeof(char *) * (size_t)cap);
            if (!b) break;
            *names = b;
        }
        (*names)[n] = strdup(e->d_name);
        if ((*names)[n]) n++;
    }
    closedir(d);
    if (n) qsort(*names, (size_t)n, sizeof(char *), cmp_str);
    return n;
}

static void free_names(char **names, int n) {
    for (int i = 0; i < n; i++) free(names[i]);
    free(names);
}

/* ---- CSV tables ------------------------------------------------------------------------------- */

/* A CSV file of the run with a header row (io/data/csv.h), read leniently for display: an empty
 * field is NaN, "nan" and "inf" are read as such, a field equal to words[i] is stored as i. A last
 * line without its newline is dropped (a file still being appended to). ST_INPUT for a malformed
 * or missing file: callers check existence first when the file is optional. */
static int table_read(const char *path, const char *const *words, CsvTable *t, Status *st) {
    const CsvOptions o = {.header = CSV_HEADER_REQUIRED, .lenient = 1, .words = words, .drop_unfinished = 1,
                          .max_bytes = MAX_TEXT_BYTES};
    return csv_read_table(path, &o, t, st);
}

/* ---- JSON ------------------------------------------------------------------------------------ */

/* Parse a JSON file; ST_INPUT naming the file when it is unreadable or malformed. */
static int json_read(const char *path, cJSON **root, Status *st) {
    char *buf;
    if (fs_read_file(path, MAX_TEXT_BYTES, &buf, NULL, st)) return st->code;
    *root = cJSON_Parse(buf);
    free(buf);
    if (!*root || !cJSON_IsObject(*root)) {
        cJSON_Delete(*root);
        *root = NULL;
        return status_set(st, ST_INPUT, "%s: not a JSON object (malformed or truncated)", path);
    }
    return 0;
}

/* "format" and "version" of one of our files: a newer version than this program reads is refused
 * with a message that says so. */
static int check_version(const cJSON *root, const char *path, const char *format, int version, Status *st) {
    const cJSON *f = cJSON_GetObjectItemCaseSensitive(root, "format");
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(root, "version");
    if (!cJSON_IsString(f) || strcmp(f->valuestring, format))
        return status_set(st, ST_INPUT, "%s: \"format\" is not \"%s\"", path, format);
    if (!cJSON_IsNumber(v) || v->valuedouble < 1 || v->valuedouble != floor(v->valuedouble))
        return status_set(st, ST_INPUT, "%s: \"version\" must be a positive integer", path);
    if (v->valuedouble > version)
        return status_set(st, ST_INPUT,
                          "%s: format version %.0f is newer than this program reads (%d): use a newer framelaw",
                          path, v->valuedouble, version);
    return 0;
}

static double json_num(const cJSON *o, const char *key) {
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    return cJSON_IsNumber(v) ? v->valuedouble : NAN;
}

static const char *json_str(const cJSON *o, const char *key) {
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    return cJSON_IsString(v) ? v->valuestring : NULL;
}

/* ---- the page -------------------------------------------------------------------------------- */

typedef struct {
    const char *dir;
    FILE *f;
    Config *cfg;
    int k, order;
    ReportSummary sum;
    Status *st;
} Report;

static void path_in(char *buf, const Report *r, const char *name) {
    snprintf(buf, PATH_LEN, "%s/%s", r->dir, name);
}

static void text(Report *r, const char *s) { xml_puts(r->f, s); }

static void note(Report *r, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void note(Report *r, const char *fmt, ...) {
    char b[1024];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(b, sizeof b, fmt, ap);
    va_end(ap);
    fputs("<p class=\"note\">", r->f);
    text(r, b);
    fputs("</p>\n", r->f);
    r->sum.notes++;
}

static void plot(Report *r, const Plot *p) {
    fputs("<figure>", r->f);
    svg_plot(r->f, p);
    fputs("</figure>\n", r->f);
    r->sum.plots++;
}

/* %.4g, or "-" for NaN / null. */
static const char *num4(char *b, size_t n, double v) {
    if (isnan(v)) snprintf(b, n, "-");
    else snprintf(b, n, "%.4g", v);
    return b;
}

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
    "figure{margin:.6em 0}svg{max-width:100%;height:auto}figcaption{font-size:.9em;color:#444}\n"
    "img.strip{image-rendering:pixelated;border:1px solid #ccc;background:#808080}\n"
    ".strips{display:flex;flex-wrap:wrap;gap:0 1.5em;align-items:flex-start}\n"
    "nav a{margin-right:1em}\n";

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
        note(r, "log.csv holds no epochs yet: training has not finished its first epoch.");
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
            last->epoch, refine, num4(a, sizeof a, last->loss), last->active);
    if (best_i >= 0)
        fprintf(r->f, "; lowest validation loss %s at epoch %ld", num4(b, sizeof b, row[best_i].validation),
                row[best_i].epoch);
    if (isfinite(last->seconds)) fprintf(r->f, "; %.1f s of training", last->seconds);
    fputs(".</p>\n", r->f);
}

static void section_equations(Report *r) {
    fputs("<h2 id=\"equations\">Equations</h2>\n", r->f);
    static const char *const files[2] = {"equations.txt", "equations.tex"};
    static const char *const what[2] = {"As text", "As LaTeX"};
    for (int i = 0; i < 2; i++) {
        char path[PATH_LEN];
        path_in(path, r, files[i]);
        char *s;
        Status missing;
        if (fs_read_file(path, MAX_TEXT_BYTES, &s, NULL, &missing)) {
            note(r, "%s: not written yet (training writes it at the end).", files[i]);
            continue;
        }
        fprintf(r->f, "<h3>%s (%s)</h3>\n<pre class=\"eq\">", what[i], files[i]);
        text(r, s);
        fputs("</pre>\n", r->f);
        free(s);
    }
}

static int section_coefficients(Report *r) {
    fputs("<h2 id=\"coefficients\">Coefficients</h2>\n", r->f);
    char path[PATH_LEN];
    path_in(path, r, "equations.json");
    if (!fs_exists(path)) {
        note(r, "equations.json: not written yet, so no coefficient table.");
        return 0;
    }
    cJSON *root;
    if (json_read(path, &root, r->st) || check_version(root, path, EQ_JSON_FORMAT, EQ_JSON_VERSION, r->st)) {
        cJSON_Delete(root);
        return r->st->code;
    }
    char *txt = cJSON_PrintUnformatted(root);
    Library lib;
    Coef co;
    Status es;
    int bad = !txt || equation_from_json(txt, &lib, &co, &es);
    free(txt);
    if (bad) {
        cJSON_Delete(root);
        return status_set(r->st, ST_INPUT, "%s: %s", path, txt ? es.msg : "out of memory");
    }
    int k = co.n_out, nt = co.n_terms, shown = 0;
    const cJSON *eqs = cJSON_GetObjectItemCaseSensitive(root, "equations");
    fputs("<table class=\"coef\"><tr><th>term</th>", r->f);
    for (int j = 0; j < k; j++) {
        const char *lhs = json_str(cJSON_GetArrayItem(eqs, j), "lhs");
        char b[64];
        if (!lhs) snprintf(b, sizeof b, lib.spec.order == 2 ? "d2z%d/dt2" : "dz%d/dt", j + 1), lhs = b;
        fputs("<th>", r->f);
        text(r, lhs);
        fputs("</th>", r->f);
    }
    fputs("</tr>\n", r->f);
    for (int t = 0; t < nt; t++) {
        int any = 0;
        for (int j = 0; j < k; j++) any |= co.mask[(long)t * k + j] && co.xi[(long)t * k + j] != 0;
        if (!any) continue;
        shown++;
        fputs("<tr><td>", r->f);
        text(r, lib.names[t]);
        fputs("</td>", r->f);
        for (int j = 0; j < k; j++) {
            double v = co.xi[(long)t * k + j];
            if (co.mask[(long)t * k + j] && v != 0) fprintf(r->f, "<td class=\"n\">%.6g</td>", v);
            else fputs("<td class=\"n off\">0</td>", r->f);
        }
        fputs("</tr>\n", r->f);
    }
    fputs("<tr><th>active terms</th>", r->f);
    for (int j = 0; j < k; j++) {
        int a = 0;
        for (int t = 0; t < nt; t++) a += co.mask[(long)t * k + j] && co.xi[(long)t * k + j] != 0;
        fprintf(r->f, "<th class=\"n\">%d</th>", a);
    }
    fputs("</tr></table>\n", r->f);
    fprintf(r->f, "<p>%d of the library's %d candidate terms appear in some equation; the others were pruned "
                  "from every equation and are not listed. Latent variables z1..z%d are in the units the "
                  "encoder chose; time in seconds.</p>\n", shown, nt, k);
    library_free(&lib);
    coef_free(&co);
    cJSON_Delete(root);
    return 0;
}

static void section_training(Report *r, const RunLog *L) {
    fputs("<h2 id=\"training\">Training</h2>\n", r->f);
    long n = L->n;
    if (!n) {
        note(r, "No epochs logged yet.");
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
        note(r, "Out of memory: the training plots are left out.");
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
    if (L->have & RUNLOG_HAVE_DX) s[ns++] = (PlotSeries){dname, ep, d + DX, n, NC, plot_color(2), DASH_SOLID};
    if (L->have & RUNLOG_HAVE_DZ) s[ns++] = (PlotSeries){zname, ep, d + DZ, n, NC, plot_color(4), DASH_SOLID};
    if (nv) s[ns++] = (PlotSeries){"validation loss (no L1)", ve, vv, nv, 1, plot_color(3), DASH_DASHED};
    Plot p = {.title = "Loss over epochs (log scale)", .xlabel = "epoch", .ylabel = "loss (no unit)",
              .ylog = 1, .series = s, .n_series = ns, .vlines = marks, .n_vlines = 3};
    plot(r, &p);
    fputs("<p>The loss terms are means over the batch and the components, before weighting (docs/training.md); "
          "the total is weighted and includes the L1 term. A thresholding pass that removed no coefficient "
          "leaves no mark.</p>\n", r->f);
    PlotSeries a = {"active coefficients", ep, d + ACT, n, NC, plot_color(0), DASH_SOLID};
    Plot q = {.title = "Active coefficients over epochs", .xlabel = "epoch", .ylabel = "active coefficients (count)",
              .y_zero = 1, .height = 260, .series = &a, .n_series = 1, .vlines = marks, .n_vlines = 3};
    plot(r, &q);
    free(d);
    free(passes);
    free(ve);
}

/* The latent region that training covered (region.json). */
typedef struct {
    int present, k, has_dz;
    double *lo, *hi;        /* (k) z_min, z_max */
    double *dlo, *dhi;      /* (k) dz_min, dz_max when has_dz */
} Region;

static void region_free(Region *g) {
    free(g->lo);
    memset(g, 0, sizeof *g);
}

static int region_read(Report *r, Region *g) {
    memset(g, 0, sizeof *g);
    char path[PATH_LEN];
    path_in(path, r, "region.json");
    if (!fs_exists(path)) return 0;
    cJSON *root;
    if (json_read(path, &root, r->st)) return r->st->code;
    static const char *const keys[4] = {"z_min", "z_max", "dz_min", "dz_max"};
    const cJSON *a[4];
    for (int i = 0; i < 4; i++) a[i] = cJSON_GetObjectItemCaseSensitive(root, keys[i]);
    int k = cJSON_IsArray(a[0]) ? cJSON_GetArraySize(a[0]) : 0;
    if (!k || !cJSON_IsArray(a[1]) || cJSON_GetArraySize(a[1]) != k) {
        cJSON_Delete(root);
        return status_set(r->st, ST_INPUT, "%s: needs arrays \"z_min\" and \"z_max\" of the same length", path);
    }
    g->has_dz = cJSON_IsArray(a[2]) && cJSON_IsArray(a[3]) && cJSON_GetArraySize(a[2]) == k &&
                cJSON_GetArraySize(a[3]) == k;
    g->lo = malloc(sizeof(double) * 4 * (size_t)k);
    if (!g->lo) {
        cJSON_Delete(root);
        return status_set(r->st, ST_RUNTIME, "out of memory");
    }
    g->hi = g->lo + k, g->dlo = g->hi + k, g->dhi = g->dlo + k;
    double *dst[4] = {g->lo, g->hi, g->dlo, g->dhi};
    for (int c = 0; c < 4; c++)
        for (int j = 0; j < k; j++) {
            const cJSON *v = c < 2 || g->has_dz ? cJSON_GetArrayItem(a[c], j) : NULL;
            dst[c][j] = cJSON_IsNumber(v) ? v->valuedouble : NAN;
        }
    g->k = k;
    g->present = 1;
    cJSON_Delete(root);
    return 0;
}

static void region_table(Report *r, const Region *g) {
    if (!g->present) {
        note(r, "region.json: not written yet (framelaw export writes it), so the training region is not shown.");
        return;
    }
    fputs("<h3>Training region (region.json)</h3>\n<table><tr><th>variable</th><th>min</th><th>max</th>", r->f);
    if (g->has_dz) fputs("<th>min of dz/dt (latent units/s)</th><th>max of dz/dt (latent units/s)</th>", r->f);
    fputs("</tr>\n", r->f);
    char b[32];
    const double *src[4] = {g->lo, g->hi, g->dlo, g->dhi};
    for (int j = 0; j < g->k; j++) {
        fprintf(r->f, "<tr><td>z%d</td>", j + 1);
        for (int c = 0; c < (g->has_dz ? 4 : 2); c++) fprintf(r->f, "<td class=\"n\">%s</td>", num4(b, sizeof b, src[c][j]));
        fputs("</tr>\n", r->f);
    }
    fputs("</table>\n<p>The learned model is supported by data only inside this range: a recording or a forecast "
          "that leaves it is flagged.</p>\n", r->f);
}

/* First time at which a trajectory leaves the training region (z, and dz for a second-order model),
 * NaN when it never does. A margin of 1e-6 of each range absorbs the rounding of the files. */
static double first_outside(const Region *g, const CsvTable *t, int tc, int order) {
    if (!g->present || tc < 0) return NAN;
    for (long i = 0; i < t->rows; i++) {
        const double *row = t->d + i * t->cols;
        for (int j = 0; j < g->k; j++)
            for (int d = 0; d < (order == 2 && g->has_dz ? 2 : 1); d++) {
                char name[32];
                snprintf(name, sizeof name, d ? "dz%d" : "z%d", j + 1);
                int c = csv_col(t, name);
                double lo = d ? g->dlo[j] : g->lo[j], hi = d ? g->dhi[j] : g->hi[j];
                if (c < 0 || !isfinite(lo) || !isfinite(hi) || !isfinite(row[c])) continue;
                double m = 1e-6 * (hi - lo);
                if (row[c] < lo - m || row[c] > hi + m) return row[tc];
            }
    }
    return NAN;
}

static int section_trajectories(Report *r) {
    fputs("<h2 id=\"trajectories\">Latent trajectories</h2>\n", r->f);
    Region g;
    if (region_read(r, &g)) return r->st->code;
    char dir[PATH_LEN];
    path_in(dir, r, "trajectories");
    char **names;
    int n = list_files(dir, ".csv", &names);
    if (n <= 0) {
        note(r, "trajectories/: no trajectories yet (framelaw export writes them).");
        free_names(names, n > 0 ? n : 0);
        region_table(r, &g);
        region_free(&g);
        return 0;
    }
    fputs("<p>Each recording encoded frame by frame (trajectories/): the latent state over time, and its time "
          "derivative as the encoder gives it against the one the learned model predicts from the state.</p>\n", r->f);
    const char *pre = r->order == 2 ? "d2z" : "dz";
    const char *unit = r->order == 2 ? "1/s\xc2\xb2" : "1/s";
    int rc = 0;
    for (int i = 0; i < n && !rc; i++) {
        char rec[256], path[PATH_LEN + 300];
        snprintf(rec, sizeof rec, "%.*s", (int)(strlen(names[i]) - 4), names[i]);
        if (i >= MAX_RECORDINGS) {
            note(r, "%d more recordings in trajectories/ are not plotted.", n - MAX_RECORDINGS);
            break;
        }
        snprintf(path, sizeof path, "%s/%s", dir, names[i]);
        CsvTable t;
        if ((rc = table_read(path, NULL, &t, r->st))) break;
        fputs("<h3>Recording ", r->f);
        text(r, rec);
        fputs("</h3>\n", r->f);
        int tc = csv_col(&t, "t");
        double out = first_outside(&g, &t, tc, r->order);
        if (isfinite(out))
            fprintf(r->f, "<p class=\"flag\">extrapolating beyond the training data from t = %.4g s</p>\n", out);
        PlotSeries s[64];
        int ns = 0;
        for (int j = 1; j <= r->k && ns < 64; j++) {
            char c[32];
            snprintf(c, sizeof c, "z%d", j);
            int zc = csv_col(&t, c);
            if (tc < 0 || zc < 0) continue;
            s[ns++] = (PlotSeries){strdup(c), t.d + tc, t.d + zc, t.rows, t.cols, plot_color(j - 1), DASH_SOLID};
        }
        if (!ns) note(r, "%s: no columns t, z1.. to plot.", names[i]);
        else {
            char title[320];
            snprintf(title, sizeof title, "%s: encoded latent trajectory", rec);
            PlotVLines v = {"leaves the training region", &out, isfinite(out) ? 1 : 0, "#7a5c00", DASH_DASHED};
            Plot p = {.title = title, .xlabel = "t (s)", .ylabel = "z (latent units)", .series = s, .n_series = ns,
                      .vlines = &v, .n_vlines = 1, .height = 280};
            plot(r, &p);
        }
        for (int j = 0; j < ns; j++) free((char *)s[j].name);
        ns = 0;
        for (int j = 1; j <= r->k && ns + 1 < 64; j++) {
            char c[32], m[40];
            snprintf(c, sizeof c, "%s%d", pre, j);
            snprintf(m, sizeof m, "model_%s%d", pre, j);
            int ec = csv_col(&t, c), mc = csv_col(&t, m);
            if (tc < 0 || ec < 0 || mc < 0) continue;
            char en[64], mn[64];
            snprintf(en, sizeof en, "%s%d/dt%s from the encoder", r->order == 2 ? "d2z" : "dz", j, r->order == 2 ? "2" : "");
            snprintf(mn, sizeof mn, "%s%d/dt%s from the model", r->order == 2 ? "d2z" : "dz", j, r->order == 2 ? "2" : "");
            s[ns++] = (PlotSeries){strdup(en), t.d + tc, t.d + ec, t.rows, t.cols, plot_color(j - 1), DASH_SOLID};
            s[ns++] = (PlotSeries){strdup(mn), t.d + tc, t.d + mc, t.rows, t.cols, plot_color(j - 1), DASH_DASHED};
        }
        if (ns) {
            char title[320], yl[64];
            snprintf(title, sizeof title, "%s: %s derivative, encoder against model", rec,
                     r->order == 2 ? "second" : "first");
            snprintf(yl, sizeof yl, "%s (latent units \xc2\xb7 %s)", r->order == 2 ? "d\xc2\xb2z/dt\xc2\xb2" : "dz/dt", unit);
            Plot p = {.title = title, .xlabel = "t (s)", .ylabel = yl, .series = s, .n_series = ns, .height = 280};
            plot(r, &p);
        }
        for (int j = 0; j < ns; j++) free((char *)s[j].name);
        csv_table_free(&t);
    }
    free_names(names, n);
    if (!rc) region_table(r, &g);
    region_free(&g);
    return rc;
}

/* Plots of one forecast: errors against time and encoded against integrated latents. */
static int forecast_recording(Report *r, const cJSON *rec, double bound) {
    const char *name = json_str(rec, "name");
    if (!name) return status_set(r->st, ST_INPUT, "%s/forecast.json: a recording without \"name\"", r->dir);
    fputs("<h3>Recording ", r->f);
    text(r, name);
    fputs("</h3>\n", r->f);
    double extra = json_num(rec, "extrapolating_from"), exceed = json_num(rec, "exceeds_bound_at");
    const char *stopped = json_str(rec, "stopped");
    if (isfinite(extra))
        fprintf(r->f, "<p class=\"flag\">extrapolating beyond the training data from t = %.4g s</p>\n", extra);
    if (stopped) {
        fputs("<p class=\"flag\">The integration stopped: ", r->f);
        text(r, stopped);
        fputs("</p>\n", r->f);
    }
    char path[PATH_LEN + 300];
    snprintf(path, sizeof path, "%s/forecast/%s.csv", r->dir, name);
    if (!fs_exists(path)) {
        note(r, "forecast/%s.csv: missing, so no plots for this recording.", name);
        return 0;
    }
    CsvTable t;
    if (table_read(path, NULL, &t, r->st)) return r->st->code;
    int tc = csv_col(&t, "t"), ec = csv_col(&t, "error"), lc = csv_col(&t, "latent_error");
    if (tc < 0 || (ec < 0 && lc < 0)) {
        csv_table_free(&t);
        return status_set(r->st, ST_INPUT, "%s: needs the columns t, error and latent_error", path);
    }
    PlotSeries s[2];
    int ns = 0;
    if (ec >= 0) s[ns++] = (PlotSeries){"frame error (decoded against real)", t.d + tc, t.d + ec, t.rows, t.cols,
                                        plot_color(0), DASH_SOLID};
    if (lc >= 0) s[ns++] = (PlotSeries){"latent error (integrated against encoded)", t.d + tc, t.d + lc, t.rows,
                                        t.cols, plot_color(1), DASH_SOLID};
    char bname[64];
    snprintf(bname, sizeof bname, "bound %.3g", bound);
    PlotHLine h = {bname, bound, "#a40000", DASH_DASHED};
    PlotVLines v[2] = {{"frame error first exceeds the bound", &exceed, isfinite(exceed) ? 1 : 0, "#a40000", DASH_DOTTED},
                       {"leaves the training region", &extra, isfinite(extra) ? 1 : 0, "#7a5c00", DASH_DASHED}};
    char title[320];
    snprintf(title, sizeof title, "%s: forecast error against time", name);
    Plot p = {.title = title, .xlabel = "t (s)", .ylabel = "relative L2 error (no unit)", .y_zero = 1,
              .series = s, .n_series = ns, .hlines = &h, .n_hlines = isfinite(bound) ? 1 : 0, .vlines = v,
              .n_vlines = 2, .height = 280};
    plot(r, &p);

    PlotSeries z[64];
    int nz = 0;
    for (int j = 1; j <= r->k && nz + 1 < 64; j++) {
        char a[32], b[32];
        snprintf(a, sizeof a, "z%d", j);
        snprintf(b, sizeof b, "zhat%d", j);
        int zc = csv_col(&t, a), hc = csv_col(&t, b);
        if (zc < 0 || hc < 0) continue;
        char an[64], bn[64];
        snprintf(an, sizeof an, "z%d encoded", j);
        snprintf(bn, sizeof bn, "z%d integrated", j);
        z[nz++] = (PlotSeries){strdup(an), t.d + tc, t.d + zc, t.rows, t.cols, plot_color(j - 1), DASH_SOLID};
        z[nz++] = (PlotSeries){strdup(bn), t.d + tc, t.d + hc, t.rows, t.cols, plot_color(j - 1), DASH_DASHED};
    }
    if (nz) {
        snprintf(title, sizeof title, "%s: latent state, encoded against integrated", name);
        Plot q = {.title = title, .xlabel = "t (s)", .ylabel = "z (latent units)", .series = z, .n_series = nz,
                  .vlines = &v[1], .n_vlines = 1, .height = 280};
        plot(r, &q);
    } else note(r, "forecast/%s.csv: no columns z1.., zhat1.. to plot.", name);
    for (int j = 0; j < nz; j++) free((char *)z[j].name);
    csv_table_free(&t);
    return 0;
}

static int section_forecast(Report *r) {
    fputs("<h2 id=\"forecast\">Forecasts of held-out recordings</h2>\n", r->f);
    char path[PATH_LEN];
    path_in(path, r, "forecast.json");
    if (!fs_exists(path)) {
        note(r, "forecast.json: no forecast yet (run framelaw forecast).");
        return 0;
    }
    cJSON *root;
    if (json_read(path, &root, r->st) || check_version(root, path, FORECAST_FORMAT, FORECAST_VERSION, r->st)) {
        cJSON_Delete(root);
        return r->st->code;
    }
    double bound = json_num(root, "bound");
    const cJSON *recs = cJSON_GetObjectItemCaseSensitive(root, "recordings");
    if (!cJSON_IsArray(recs)) {
        cJSON_Delete(root);
        return status_set(r->st, ST_INPUT, "%s: \"recordings\" must be an array", path);
    }
    if (!cJSON_GetArraySize(recs)) note(r, "forecast.json lists no recordings (no held-out recordings?).");
    else {
        fprintf(r->f, "<p>Each held-out recording is forecast from its first frame: the model is integrated over the "
                      "recording's duration, every step decoded and compared with the real frame. Errors are "
                      "relative L2 errors (0.1 = 10 %%); the bound is %.3g. Times are in seconds.</p>\n", bound);
        fputs("<table><tr><th>recording</th><th>frames</th><th>duration (s)</th><th>method</th><th>mean error</th>"
              "<th>final error</th><th>max error</th><th>exceeds bound at (s)</th><th>latent mean error</th>"
              "<th>latent exceeds bound at (s)</th><th>extrapolating from (s)</th></tr>\n", r->f);
        const cJSON *rec;
        cJSON_ArrayForEach(rec, recs) {
            char b[8][32];
            const char *m = json_str(rec, "method");
            fputs("<tr><td>", r->f);
            text(r, json_str(rec, "name") ? json_str(rec, "name") : "?");
            fprintf(r->f, "</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td>", num4(b[0], 32, json_num(rec, "frames")),
                    num4(b[1], 32, json_num(rec, "duration")));
            text(r, m ? m : "-");
            fprintf(r->f, "</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td>"
                          "<td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td></tr>\n",
                    num4(b[2], 32, json_num(rec, "mean_error")), num4(b[3], 32, json_num(rec, "final_error")),
                    num4(b[4], 32, json_num(rec, "max_error")), num4(b[5], 32, json_num(rec, "exceeds_bound_at")),
                    num4(b[6], 32, json_num(rec, "latent_mean_error")),
                    num4(b[7], 32, json_num(rec, "latent_exceeds_bound_at")),
                    num4(b[0], 32, json_num(rec, "extrapolating_from")));
        }
        fputs("</table>\n<p>A dash in a time column: never.</p>\n", r->f);
        int i = 0, rc = 0;
        cJSON_ArrayForEach(rec, recs) {
            if (i++ == MAX_RECORDINGS) {
                note(r, "%d more forecasts are in the table above but not plotted.", cJSON_GetArraySize(recs) - MAX_RECORDINGS);
                break;
            }
            if ((rc = forecast_recording(r, rec, bound))) break;
        }
        if (rc) {
            cJSON_Delete(root);
            return rc;
        }
    }
    cJSON_Delete(root);
    return 0;
}

/* Width and height from a PNG's IHDR chunk (PNG specification, ISO/IEC 15948, section 11.2.2);
 * 0 when data is not a PNG. */
static int png_size(const unsigned char *p, long n, int *w, int *h) {
    static const unsigned char sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
    if (n < 24 || memcmp(p, sig, 8) || memcmp(p + 12, "IHDR", 4)) return 0;
    *w = (int)((uint32_t)p[16] << 24 | (uint32_t)p[17] << 16 | (uint32_t)p[18] << 8 | p[19]);
    *h = (int)((uint32_t)p[20] << 24 | (uint32_t)p[21] << 16 | (uint32_t)p[22] << 8 | p[23]);
    return *w > 0 && *h > 0;
}

static void section_reconstructions(Report *r) {
    fputs("<h2 id=\"reconstructions\">Reconstructions</h2>\n", r->f);
    char dir[PATH_LEN];
    path_in(dir, r, "reconstructions");
    char **names;
    int n = list_files(dir, ".png", &names);
    if (n <= 0) {
        note(r, "reconstructions/: no reconstruction strips yet (framelaw export writes them).");
        free_names(names, n > 0 ? n : 0);
        return;
    }
    fputs("<p>Each row is one frame: original | decoded | difference (mid-gray = no difference; lighter = the "
          "decoder is brighter).</p>\n<div class=\"strips\">\n", r->f);
    for (int i = 0; i < n; i++) {
        char path[PATH_LEN + 300];
        snprintf(path, sizeof path, "%s/%s", dir, names[i]);
        char *data;
        size_t len = 0;
        Status why;
        int w, h;
        if (fs_read_file(path, MAX_IMAGE_BYTES, &data, &len, &why)) {
            note(r, "%s; not shown.", why.msg);
            continue;
        }
        unsigned char *png = (unsigned char *)data;
        if (!png_size(png, (long)len, &w, &h)) {
            note(r, "reconstructions/%s: not a PNG file, not shown.", names[i]);
            free(png);
            continue;
        }
        int scale = h < 360 ? 360 / h : 1;   /* small frames enlarged by a whole factor, pixel for pixel */
        if (scale * w > 1000) scale = 1000 / w;
        if (scale > 6) scale = 6;
        if (scale < 1) scale = 1;
        fprintf(r->f, "<figure><img class=\"strip\" width=\"%d\" height=\"%d\" alt=\"", w * scale, h * scale);
        text(r, names[i]);
        fputs("\" src=\"data:image/png;base64,", r->f);
        base64_fwrite(r->f, png, (size_t)len);
        fputs("\"><figcaption>", r->f);
        text(r, names[i]);
        fprintf(r->f, " (%d x %d px, shown x%d)</figcaption></figure>\n", w, h, scale);
        r->sum.images++;
        free(png);
    }
    fputs("</div>\n", r->f);
    free_names(names, n);
}

/* One row: key and value (strings bare, anything else as compact JSON). */
static void setting_row(Report *r, const char *key, const cJSON *it) {
    fputs("<tr><td>", r->f);
    text(r, key);
    fputs("</td><td>", r->f);
    if (cJSON_IsString(it)) text(r, it->valuestring);
    else {
        char *s = cJSON_PrintUnformatted(it);
        text(r, s ? s : "?");
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
        text(r, it->string);
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
    text(r, name);
    fprintf(f, "</title>\n<style>\n%s</style>\n</head>\n<body>\n<h1>framelaw report: ", style_sheet);
    text(r, name);
    fputs("</h1>\n<p class=\"caution\"><b>Caution.</b> " REPORT_CAUTION "</p>\n", f);
    fputs("<nav><a href=\"#summary\">Summary</a><a href=\"#equations\">Equations</a>"
          "<a href=\"#coefficients\">Coefficients</a><a href=\"#training\">Training</a>"
          "<a href=\"#trajectories\">Trajectories</a><a href=\"#forecast\">Forecasts</a>"
          "<a href=\"#reconstructions\">Reconstructions</a><a href=\"#settings\">Settings</a></nav>\n", f);
    section_summary(r, L);
    section_equations(r);
    if (section_coefficients(r)) return r->st->code;
    section_training(r, L);
    if (section_trajectories(r)) return r->st->code;
    if (section_forecast(r)) return r->st->code;
    section_reconstructions(r);
    section_settings(r);
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
    path_in(path, &r, "config.json");
    if (!fs_exists(path)) return status_set(st, ST_INPUT, "%s: missing (not a run folder?)", path);
    r.cfg = malloc(sizeof *r.cfg);
    if (!r.cfg) return status_set(st, ST_RUNTIME, "out of memory");
    config_defaults(r.cfg);
    if (config_load(r.cfg, path, st)) {
        free(r.cfg);
        return st->code;
    }
    r.k = r.cfg->latent;
    r.order = r.cfg->order;
    path_in(path, &r, RUNLOG_FILE);
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
    else path_in(out, &r, "report.html");
    AtomicFile af;
    int rc = atomic_open(&af, out, st);
    if (!rc) {
        r.f = af.f;
        rc = write_page(&r, &L);
        if (!rc && ferror(af.f)) rc = status_set(st, ST_RUNTIME, "%s: write error", out);
        if (rc) atomic_abort(&af);
        else rc = atomic_commit(&af, st);
    }
    runlog_free(&L);
    free(r.cfg);
    if (!rc && sum) *sum = r.sum;
    return rc;
}
