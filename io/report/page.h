/* io/report/page.h: what the report's files (report.c: the page and its sections on training,
 * recordings.c: the sections on recordings) share; not part of the report's interface
 * (io/report/report.h), and included by nothing outside io/report/. */
#ifndef IO_REPORT_PAGE_H
#define IO_REPORT_PAGE_H

#include <stdio.h>

#include <cjson/cJSON.h>

#include "io/data/csv.h"
#include "io/report/report.h"
#include "io/report/svgplot.h"
#include "io/run/config.h"

#define MAX_RECORDINGS 16           /* recordings plotted per section; the rest are listed */
#define MAX_IMAGE_BYTES (32u << 20) /* larger PNGs are not embedded */
#define MAX_TEXT_BYTES (256u << 20) /* a CSV or JSON file of a run is far smaller */
#define PATH_LEN 4400

/* The page being written. */
typedef struct {
    const char *dir;        /* the run folder */
    FILE *f;                /* the page */
    Config *cfg;            /* the run's config */
    int k, order;           /* latent size, model order */
    ReportSummary sum;
    Status *st;
} Report;

/* buf (PATH_LEN) = <run folder>/name */
void page_path(char *buf, const Report *r, const char *name);
/* Text with the HTML special characters escaped. */
void page_text(Report *r, const char *s);
/* A one-line note in place of what a missing file would show. */
void page_note(Report *r, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
/* One SVG plot in a <figure>. */
void page_plot(Report *r, const Plot *p);
/* %.4g, or "-" for NaN / null. */
const char *page_num4(char *b, size_t n, double v);

/* Names of the files in dir ending in ext, sorted; malloc'ed (free with page_free_names). -1 when dir
 * cannot be opened. */
int page_list_files(const char *dir, const char *ext, char ***names);
void page_free_names(char **names, int n);

/* A CSV file of the run with a header row (io/data/csv.h), read leniently for display: an empty
 * field is NaN, "nan" and "inf" are read as such, a field equal to words[i] is stored as i. A last
 * line without its newline is dropped (a file still being appended to). ST_INPUT for a malformed
 * or missing file: callers check existence first when the file is optional. */
int page_table_read(const char *path, const char *const *words, CsvTable *t, Status *st);

/* Parse a JSON file; ST_INPUT naming the file when it is unreadable or malformed. */
int page_json_read(const char *path, cJSON **root, Status *st);
/* "format" and "version" of one of our files: a newer version than this program reads is refused
 * with a message that says so. */
int page_check_version(const cJSON *root, const char *path, const char *format, int version, Status *st);
double page_json_num(const cJSON *o, const char *key);      /* NaN when absent or not a number */
const char *page_json_str(const cJSON *o, const char *key); /* NULL when absent or not a string */

/* The sections on recordings (recordings.c); each returns 0 or the status of a malformed file. */
int report_section_trajectories(Report *r);
int report_section_forecast(Report *r);
/* The ensemble by bagging (ensemble.c). */
int report_section_ensemble(Report *r);
void report_section_reconstructions(Report *r);

#endif
