/* io/report/page.c: see page.h. */
#include "io/report/page.h"

#include <dirent.h>
#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

#include "io/fs/files.h"

static int cmp_str(const void *a, const void *b) { return strcmp(*(char *const *)a, *(char *const *)b); }

int page_list_files(const char *dir, const char *ext, char ***names) {
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

void page_free_names(char **names, int n) {
    for (int i = 0; i < n; i++) free(names[i]);
    free(names);
}

int page_table_read(const char *path, const char *const *words, CsvTable *t, Status *st) {
    const CsvOptions o = {.header = CSV_HEADER_REQUIRED, .lenient = 1, .words = words, .drop_unfinished = 1,
                          .max_bytes = MAX_TEXT_BYTES};
    return csv_read_table(path, &o, t, st);
}

int page_json_read(const char *path, cJSON **root, Status *st) {
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

int page_check_version(const cJSON *root, const char *path, const char *format, int version, Status *st) {
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

double page_json_num(const cJSON *o, const char *key) {
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    return cJSON_IsNumber(v) ? v->valuedouble : NAN;
}

const char *page_json_str(const cJSON *o, const char *key) {
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    return cJSON_IsString(v) ? v->valuestring : NULL;
}

void page_path(char *buf, const Report *r, const char *name) {
    snprintf(buf, PATH_LEN, "%s/%s", r->dir, name);
}

void page_text(Report *r, const char *s) { xml_puts(r->f, s); }

void page_note(Report *r, const char *fmt, ...) {
    char b[1024];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(b, sizeof b, fmt, ap);
    va_end(ap);
    fputs("<p class=\"note\">", r->f);
    page_text(r, b);
    fputs("</p>\n", r->f);
    r->sum.notes++;
}

void page_plot(Report *r, const Plot *p) {
    fputs("<figure>", r->f);
    svg_plot(r->f, p);
    fputs("</figure>\n", r->f);
    r->sum.plots++;
}

const char *page_num4(char *b, size_t n, double v) {
    if (isnan(v)) snprintf(b, n, "-");
    else snprintf(b, n, "%.4g", v);
    return b;
}
