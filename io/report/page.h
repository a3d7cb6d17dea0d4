/* io/report/page.h: what the report's files (report.c: the page and its sections on training,
 * equations.c: the laws, recordings.c: the sections on recordings, ensemble.c) share; not part of the report's interface
 * (io/report/report.h), and included by nothing outside io/report/. */
#ifndef IO_REPORT_PAGE_H
#define IO_REPORT_PAGE_H

#include <stdio.h>

#include <cjson/cJSON.h>

#include "io/data/csv.h"
#include "io/report/report.h"
#include "io/report/svgplot.h"
#include "io/run/config.h"
#include "sparse/coef.h"
#include "sparse/library.h"

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

/* equations.json, read once for the sections that show the law (equations.c). */
typedef struct {
    char path[PATH_LEN];
    cJSON *root;            /* the whole file */
    Library lib;            /* the library it names */
    Coef co;                /* the learned law: xi, mask (n_terms, k) */
    int digits;             /* significant digits of its printed coefficients */
} PageEquations;

/* Read the run's equations.json: -1 when it is missing (nothing to free), 0 when read (free with
 * page_equations_free), else the status of a malformed file or one of a newer version. */
int page_equations_read(Report *r, PageEquations *e);
void page_equations_free(PageEquations *e);
/* A law as MathML (sparse/mathml.h) in a <div class="math">: see mathml_law. */
void page_math_law(Report *r, const Library *lib, const double *xi, const uint8_t *mask, char var,
                   const double *w, int digits);
/* The equations of a law in equations.json ("equations": k objects, each with "coefficients" and
 * "mask" of nt numbers) into xi, mask (nt, k); 0 when they are not all there. */
int page_law_read(const cJSON *eqs, int k, int nt, double *xi, uint8_t *mask);
/* A copy box: the source of what the page shows (LaTeX, text), selectable in a read-only
 * <textarea> inside a <details> whose summary is `what`. The only place LaTeX source appears. */
void page_copy_box(Report *r, const char *what, const char *text);

/* The section on the equations (equations.c): the learned law, the canonical law and its map as
 * MathML, the text and LaTeX files in copy boxes. e is NULL when equations.json is missing. */
int report_section_equations(Report *r, const PageEquations *e);

/* The sections on recordings (recordings.c); each returns 0 or the status of a malformed file. */
int report_section_trajectories(Report *r);
int report_section_forecast(Report *r);
/* The ensemble by bagging (ensemble.c); e is NULL when equations.json is missing. */
int report_section_ensemble(Report *r, const PageEquations *e);
void report_section_reconstructions(Report *r);

#endif
