/* io/report/recordings.c: the report's sections on recordings: latent trajectories against the
 * training region, forecasts of held-out recordings, reconstruction strips (docs/report.md). */
#include "io/report/page.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "io/fs/files.h"
#include "io/report/base64.h"

#define FORECAST_FORMAT "framelaw-forecast"
#define FORECAST_VERSION 1

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
    page_path(path, r, "region.json");
    if (!fs_exists(path)) return 0;
    cJSON *root;
    if (page_json_read(path, &root, r->st)) return r->st->code;
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
        page_note(r, "region.json: not written yet (framelaw export writes it), so the training region is not shown.");
        return;
    }
    fputs("<h3>Training region (region.json)</h3>\n<table><tr><th>variable</th><th>min</th><th>max</th>", r->f);
    if (g->has_dz) fputs("<th>min of dz/dt (latent units/s)</th><th>max of dz/dt (latent units/s)</th>", r->f);
    fputs("</tr>\n", r->f);
    char b[32];
    const double *src[4] = {g->lo, g->hi, g->dlo, g->dhi};
    for (int j = 0; j < g->k; j++) {
        fprintf(r->f, "<tr><td>z%d</td>", j + 1);
        for (int c = 0; c < (g->has_dz ? 4 : 2); c++) fprintf(r->f, "<td class=\"n\">%s</td>", page_num4(b, sizeof b, src[c][j]));
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

int report_section_trajectories(Report *r) {
    fputs("<h2 id=\"trajectories\">Latent trajectories</h2>\n", r->f);
    Region g;
    if (region_read(r, &g)) return r->st->code;
    char dir[PATH_LEN];
    page_path(dir, r, "trajectories");
    char **names;
    int n = page_list_files(dir, ".csv", &names);
    if (n <= 0) {
        page_note(r, "trajectories/: no trajectories yet (framelaw export writes them).");
        page_free_names(names, n > 0 ? n : 0);
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
            page_note(r, "%d more recordings in trajectories/ are not plotted.", n - MAX_RECORDINGS);
            break;
        }
        snprintf(path, sizeof path, "%s/%s", dir, names[i]);
        CsvTable t;
        if ((rc = page_table_read(path, NULL, &t, r->st))) break;
        fputs("<h3>Recording ", r->f);
        page_text(r, rec);
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
        if (!ns) page_note(r, "%s: no columns t, z1.. to plot.", names[i]);
        else {
            char title[320];
            snprintf(title, sizeof title, "%s: encoded latent trajectory", rec);
            PlotVLines v = {"leaves the training region", &out, isfinite(out) ? 1 : 0, "#7a5c00", DASH_DASHED};
            Plot p = {.title = title, .xlabel = "t (s)", .ylabel = "z (latent units)", .series = s, .n_series = ns,
                      .vlines = &v, .n_vlines = 1, .height = 280};
            page_plot(r, &p);
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
            page_plot(r, &p);
        }
        for (int j = 0; j < ns; j++) free((char *)s[j].name);
        csv_table_free(&t);
    }
    page_free_names(names, n);
    if (!rc) region_table(r, &g);
    region_free(&g);
    return rc;
}

/* Plots of one forecast: errors against time and encoded against integrated latents. */
static int forecast_recording(Report *r, const cJSON *rec, double bound) {
    const char *name = page_json_str(rec, "name");
    if (!name) return status_set(r->st, ST_INPUT, "%s/forecast.json: a recording without \"name\"", r->dir);
    fputs("<h3>Recording ", r->f);
    page_text(r, name);
    fputs("</h3>\n", r->f);
    double extra = page_json_num(rec, "extrapolating_from"), exceed = page_json_num(rec, "exceeds_bound_at");
    const char *stopped = page_json_str(rec, "stopped");
    if (isfinite(extra))
        fprintf(r->f, "<p class=\"flag\">extrapolating beyond the training data from t = %.4g s</p>\n", extra);
    if (stopped) {
        fputs("<p class=\"flag\">The integration stopped: ", r->f);
        page_text(r, stopped);
        fputs("</p>\n", r->f);
    }
    char path[PATH_LEN + 300];
    snprintf(path, sizeof path, "%s/forecast/%s.csv", r->dir, name);
    if (!fs_exists(path)) {
        page_note(r, "forecast/%s.csv: missing, so no plots for this recording.", name);
        return 0;
    }
    CsvTable t;
    if (page_table_read(path, NULL, &t, r->st)) return r->st->code;
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
    page_plot(r, &p);

    PlotSeries z[64];
    int nz = 0;
    for (int j = 1; j <= r->k && nz + 3 < 64; j++) {
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
        /* the ensemble's 5-95% band (columns written since the ensemble exists) */
        snprintf(a, sizeof a, "band_low%d", j);
        snprintf(b, sizeof b, "band_high%d", j);
        int lc2 = csv_col(&t, a), uc = csv_col(&t, b);
        if (lc2 >= 0 && uc >= 0) {
            snprintf(an, sizeof an, "z%d band 5%%", j);
            snprintf(bn, sizeof bn, "z%d band 95%%", j);
            z[nz++] = (PlotSeries){strdup(an), t.d + tc, t.d + lc2, t.rows, t.cols, plot_color(j - 1), DASH_DOTTED};
            z[nz++] = (PlotSeries){strdup(bn), t.d + tc, t.d + uc, t.rows, t.cols, plot_color(j - 1), DASH_DOTTED};
        }
    }
    if (nz) {
        snprintf(title, sizeof title, "%s: latent state, encoded against integrated, with the ensemble's band", name);
        double band_at = page_json_num(cJSON_GetObjectItemCaseSensitive(rec, "band"), "width_exceeds_bound_at");
        PlotVLines bv[2] = {v[1], {"band wider than the bound", &band_at, isfinite(band_at) ? 1 : 0, "#5c3566",
                                   DASH_DOTTED}};
        Plot q = {.title = title, .xlabel = "t (s)", .ylabel = "z (latent units)", .series = z, .n_series = nz,
                  .vlines = bv, .n_vlines = 2, .height = 280};
        page_plot(r, &q);
    } else page_note(r, "forecast/%s.csv: no columns z1.., zhat1.. to plot.", name);
    for (int j = 0; j < nz; j++) free((char *)z[j].name);
    csv_table_free(&t);
    return 0;
}

int report_section_forecast(Report *r) {
    fputs("<h2 id=\"forecast\">Forecasts of held-out recordings</h2>\n", r->f);
    char path[PATH_LEN];
    page_path(path, r, "forecast.json");
    if (!fs_exists(path)) {
        page_note(r, "forecast.json: no forecast yet (run framelaw forecast).");
        return 0;
    }
    cJSON *root;
    if (page_json_read(path, &root, r->st) || page_check_version(root, path, FORECAST_FORMAT, FORECAST_VERSION, r->st)) {
        cJSON_Delete(root);
        return r->st->code;
    }
    double bound = page_json_num(root, "bound");
    const cJSON *recs = cJSON_GetObjectItemCaseSensitive(root, "recordings");
    if (!cJSON_IsArray(recs)) {
        cJSON_Delete(root);
        return status_set(r->st, ST_INPUT, "%s: \"recordings\" must be an array", path);
    }
    if (!cJSON_GetArraySize(recs)) page_note(r, "forecast.json lists no recordings (no held-out recordings?).");
    else {
        fprintf(r->f, "<p>Each held-out recording is forecast from its first frame: the model is integrated over the "
                      "recording's duration, every step decoded and compared with the real frame. Errors are "
                      "relative L2 errors (0.1 = 10 %%); the bound is %.3g. Times are in seconds.</p>\n", bound);
        fputs("<table><tr><th>recording</th><th>frames</th><th>duration (s)</th><th>method</th><th>mean error</th>"
              "<th>final error</th><th>max error</th><th>exceeds bound at (s)</th><th>latent mean error</th>"
              "<th>latent exceeds bound at (s)</th><th>extrapolating from (s)</th>"
              "<th>ensemble band wider than bound at (s)</th></tr>\n", r->f);
        const cJSON *rec;
        cJSON_ArrayForEach(rec, recs) {
            char b[8][32];
            const char *m = page_json_str(rec, "method");
            fputs("<tr><td>", r->f);
            page_text(r, page_json_str(rec, "name") ? page_json_str(rec, "name") : "?");
            fprintf(r->f, "</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td>", page_num4(b[0], 32, page_json_num(rec, "frames")),
                    page_num4(b[1], 32, page_json_num(rec, "duration")));
            page_text(r, m ? m : "-");
            fprintf(r->f, "</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td>"
                          "<td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s</td></tr>\n",
                    page_num4(b[2], 32, page_json_num(rec, "mean_error")), page_num4(b[3], 32, page_json_num(rec, "final_error")),
                    page_num4(b[4], 32, page_json_num(rec, "max_error")), page_num4(b[5], 32, page_json_num(rec, "exceeds_bound_at")),
                    page_num4(b[6], 32, page_json_num(rec, "latent_mean_error")),
                    page_num4(b[7], 32, page_json_num(rec, "latent_exceeds_bound_at")),
                    page_num4(b[0], 32, page_json_num(rec, "extrapolating_from")),
                    page_num4(b[1], 32, page_json_num(cJSON_GetObjectItemCaseSensitive(rec, "band"), "width_exceeds_bound_at")));
        }
        fputs("</table>\n<p>A dash in a time column: never.</p>\n", r->f);
        int i = 0, rc = 0;
        cJSON_ArrayForEach(rec, recs) {
            if (i++ == MAX_RECORDINGS) {
                page_note(r, "%d more forecasts are in the table above but not plotted.", cJSON_GetArraySize(recs) - MAX_RECORDINGS);
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

void report_section_reconstructions(Report *r) {
    fputs("<h2 id=\"reconstructions\">Reconstructions</h2>\n", r->f);
    char dir[PATH_LEN];
    page_path(dir, r, "reconstructions");
    char **names;
    int n = page_list_files(dir, ".png", &names);
    if (n <= 0) {
        page_note(r, "reconstructions/: no reconstruction strips yet (framelaw export writes them).");
        page_free_names(names, n > 0 ? n : 0);
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
            page_note(r, "%s; not shown.", why.msg);
            continue;
        }
        unsigned char *png = (unsigned char *)data;
        if (!png_size(png, (long)len, &w, &h)) {
            page_note(r, "reconstructions/%s: not a PNG file, not shown.", names[i]);
            free(png);
            continue;
        }
        int scale = h < 360 ? 360 / h : 1;   /* small frames enlarged by a whole factor, pixel for pixel */
        if (scale * w > 1000) scale = 1000 / w;
        if (scale > 6) scale = 6;
        if (scale < 1) scale = 1;
        fprintf(r->f, "<figure><img class=\"strip\" width=\"%d\" height=\"%d\" alt=\"", w * scale, h * scale);
        page_text(r, names[i]);
        fputs("\" src=\"data:image/png;base64,", r->f);
        base64_fwrite(r->f, png, (size_t)len);
        fputs("\"><figcaption>", r->f);
        page_text(r, names[i]);
        fprintf(r->f, " (%d x %d px, shown x%d)</figcaption></figure>\n", w, h, scale);
        r->sum.images++;
        free(png);
    }
    fputs("</div>\n", r->f);
    page_free_names(names, n);
}
