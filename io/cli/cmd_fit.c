/* io/cli/cmd_fit.c: `framelaw fit FILE`: a sparse ODE fitted to a time series of state coordinates.
 *
 * Reads a CSV or .npy series (io/data/series.h), takes the time from a column or a sample rate,
 * estimates the time derivatives with a stencil (sparse/stencil.h), evaluates the candidate library
 * (sparse/library.h) and fits it by sequentially thresholded least squares (sparse/thresh_lsq.h), then
 * prints the equations (sparse/equation.h) as text, LaTeX or JSON, with the variables named from the
 * CSV header when its names can be (library_var_names_check). docs/fit.md is the user guide. */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/cli/cli.h"
#include "io/data/series.h"
#include "sparse/equation.h"
#include "sparse/library.h"
#include "sparse/stencil.h"
#include "sparse/thresh_lsq.h"

/* Largest relative deviation of one time step from the median step that is still "equally spaced". */
#define FIT_DT_TOL 0.01

typedef enum { OUT_TEXT, OUT_LATEX, OUT_JSON, OUT_COUNT } OutFormat;
static const char *const out_names[] = {"text", "latex", "json"};
_Static_assert(sizeof out_names / sizeof out_names[0] == OUT_COUNT, "one name per output format");

typedef struct {
    const char *path;
    const char *time_col;       /* number (1-based) or header name; NULL with a rate */
    double rate;                /* samples per second; 0: use the time column */
    const char *columns;        /* comma-separated numbers or names; NULL: every other column */
    LibrarySpec lib;            /* n_latent is set from the columns */
    ThreshLsqOptions ls;
    StencilKind stencil;
    int window, sg_degree;
    int old_degree;             /* 1: the smoothing degree came as --degree (a note says it is renamed) */
    int time_given;             /* 1: --time-column or --rate given (else column 1 is the time) */
    int names_z;                /* 1: --names z, the variables are z1, z2, ... whatever the header says */
    int digits;
    OutFormat format;
} FitSettings;

static FitSettings fit_defaults(void) {
    FitSettings s;
    memset(&s, 0, sizeof s);
    s.time_col = "1";
    s.lib = library_spec_default(1, 1);
    s.lib.degree = 3;
    s.ls = thresh_lsq_defaults();
    s.stencil = STENCIL_SAVGOL;
    s.window = 7;
    s.sg_degree = 3;
    s.digits = EQ_DIGITS;
    s.format = OUT_TEXT;
    return s;
}

static void opt_row(FILE *f, const char *opt, const char *what, const char *dflt) {
    fprintf(f, "  %-28s %-54s [%s]\n", opt, what, dflt);
}

static void fit_usage(FILE *f) {
    FitSettings d = fit_defaults();
    char b[16][32];
    fprintf(f,
            "usage: framelaw fit FILE [options]\n\n"
            "Fits a sparse ordinary differential equation to a time series of state coordinates and\n"
            "prints it. FILE is a CSV (one row per sample, optional header row) or a .npy array\n"
            "(rows = samples). The time derivatives are estimated with a stencil, the candidate\n"
            "library is evaluated on the samples, and sequentially thresholded least squares keeps\n"
            "the few terms that explain the derivatives. Variables take the names of their columns in\n"
            "the CSV header (x, dx/dt, v*x) when those are plain names, else z1, z2, ... in the order\n"
            "of the state columns.\n\n"
            "options (default in brackets):\n");
    opt_row(f, "--time-column N|NAME", "column holding the time: number (1 = first) or name", d.time_col);
    opt_row(f, "--rate HZ", "samples per second; then no column is time", "none");
    opt_row(f, "--columns LIST", "state columns, numbers or names, comma-separated", "all but time");
    opt_row(f, "--names header|z", "variable names: the header's, or z1, z2, ...", "header");
    snprintf(b[0], sizeof b[0], "%d", d.lib.order);
    opt_row(f, "--order 1|2", "1: dz/dt = f(z); 2: d2z/dt2 = f(z, dz/dt)", b[0]);
    snprintf(b[1], sizeof b[1], "%d", d.lib.degree);
    opt_row(f, "--library-degree N", "highest total degree of the monomials (0..8)", b[1]);
    opt_row(f, "--no-constant", "leave out the constant term", "with");
    opt_row(f, "--trig", "add sin(k*zi) and cos(k*zi) of every variable", "off");
    snprintf(b[2], sizeof b[2], "%d", d.lib.freq[0]);
    opt_row(f, "--multipliers K[,K...]", "the multipliers k of sin and cos (implies --trig)", b[2]);
    opt_row(f, "--no-trig-velocity", "order 2: sin and cos of z only, not of dz/dt", "with");
    opt_row(f, "--include TERM", "add a term by name, e.g. \"z1^4\" (repeatable)", "none");
    opt_row(f, "--exclude TERM", "remove a term by name, e.g. \"z1*z2\" (repeatable)", "none");
    snprintf(b[3], sizeof b[3], "%g", d.ls.threshold);
    opt_row(f, "--threshold T", "prune coefficients with |value| < T (data units)", b[3]);
    snprintf(b[4], sizeof b[4], "%g", d.ls.ridge);
    opt_row(f, "--ridge A", "ridge weight on the unit-norm columns", b[4]);
    snprintf(b[5], sizeof b[5], "%d", d.ls.max_iter);
    opt_row(f, "--max-iter N", "threshold passes", b[5]);
    opt_row(f, "--no-normalize", "solve on the raw columns, not unit-norm ones", "normalize");
    opt_row(f, "--derivative central|savgol", "derivative stencil", stencil_kind_names[d.stencil]);
    snprintf(b[6], sizeof b[6], "%d", d.window);
    opt_row(f, "--window N", "Savitzky-Golay window (odd)", b[6]);
    snprintf(b[7], sizeof b[7], "%d", d.sg_degree);
    opt_row(f, "--smooth-degree N", "Savitzky-Golay polynomial degree (was --degree)", b[7]);
    snprintf(b[8], sizeof b[8], "%d", d.digits);
    opt_row(f, "--digits N", "significant digits of the printed coefficients (1..17)", b[8]);
    opt_row(f, "--format text|latex|json", "output", out_names[d.format]);
    fprintf(f,
            "  --help                       this text\n\n"
            "Terms are named 1, z1, z1^2, z1*z2, dz1/dt, (dz1/dt)^2, sin(z1), cos(2*z1) (or with the\n"
            "variable names: x^2, v*x, sin(x)); --include and --exclude take either; docs/fit.md and\n"
            "docs/sparse.md describe the library, the fit and the JSON output.\n\n"
            "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input\n");
}

static int parse_long(const char *opt, const char *v, long lo, long hi, long *out) {
    char *e;
    errno = 0;
    long x = strtol(v, &e, 10);
    if (e == v || *e || errno || x < lo || x > hi)
        return cli_error(2, "fit: %s '%s': expected an integer in %ld..%ld", opt, v, lo, hi);
    *out = x;
    return 0;
}

static int parse_int(const char *opt, const char *v, int lo, int hi, int *out) {
    long x = 0;
    if (parse_long(opt, v, lo, hi, &x)) return 2;
    *out = (int)x;
    return 0;
}

static int parse_double(const char *opt, const char *v, double lo, double *out) {
    char *e;
    errno = 0;
    double x = strtod(v, &e);
    if (e == v || *e || errno || !isfinite(x) || x < lo)
        return cli_error(2, "fit: %s '%s': expected a number >= %g", opt, v, lo);
    *out = x;
    return 0;
}

/* Flags without a value. Returns 1 when name is one (and applies it). */
static int apply_flag(FitSettings *s, const char *name) {
    if (!strcmp(name, "--no-constant")) s->lib.constant = 0;
    else if (!strcmp(name, "--trig")) s->lib.trig = 1;
    else if (!strcmp(name, "--no-trig-velocity")) s->lib.trig_velocity = 0;
    else if (!strcmp(name, "--no-normalize")) s->ls.normalize = 0;
    else return 0;
    return 1;
}

static int add_name(char (*dst)[LIB_NAME_MAX], int *n, const char *opt, const char *v) {
    if (*n >= LIB_MAX_EDITS) return cli_error(2, "fit: at most %d %s options", LIB_MAX_EDITS, opt);
    if (strlen(v) >= LIB_NAME_MAX) return cli_error(2, "fit: %s '%.40s...': name too long", opt, v);
    snprintf(dst[(*n)++], LIB_NAME_MAX, "%s", v);
    return 0;
}

static int apply_option(FitSettings *s, const char *name, const char *val) {
    if (!strcmp(name, "--time-column")) s->time_col = val, s->time_given = 1;
    else if (!strcmp(name, "--rate")) {
        s->time_given = 1;
        if (parse_double(name, val, 0, &s->rate)) return 2;
        if (s->rate <= 0) return cli_error(2, "fit: --rate '%s': expected a number > 0", val);
    } else if (!strcmp(name, "--columns")) s->columns = val;
    else if (!strcmp(name, "--names")) {
        if (strcmp(val, "header") && strcmp(val, "z")) return cli_error(2, "fit: --names '%s': expected header or z", val);
        s->names_z = !strcmp(val, "z");
    }
    else if (!strcmp(name, "--order")) return parse_int(name, val, 1, 2, &s->lib.order);
    else if (!strcmp(name, "--library-degree")) return parse_int(name, val, 0, LIB_MAX_DEGREE, &s->lib.degree);
    else if (!strcmp(name, "--multipliers")) {
        s->lib.trig = 1;
        s->lib.n_freq = 0;
        char buf[256];
        snprintf(buf, sizeof buf, "%s", val);
        for (char *tok = strtok(buf, ","); tok; tok = strtok(NULL, ",")) {
            if (s->lib.n_freq >= LIB_MAX_FREQ) return cli_error(2, "fit: --multipliers: at most %d", LIB_MAX_FREQ);
            if (parse_int(name, tok, 1, 1000, &s->lib.freq[s->lib.n_freq++])) return 2;
        }
        if (!s->lib.n_freq) return cli_error(2, "fit: --multipliers '%s': expected integers like 1,2,3", val);
    } else if (!strcmp(name, "--include")) return add_name(s->lib.include, &s->lib.n_include, name, val);
    else if (!strcmp(name, "--exclude")) return add_name(s->lib.exclude, &s->lib.n_exclude, name, val);
    else if (!strcmp(name, "--threshold")) return parse_double(name, val, 0, &s->ls.threshold);
    else if (!strcmp(name, "--ridge")) return parse_double(name, val, 0, &s->ls.ridge);
    else if (!strcmp(name, "--max-iter")) return parse_int(name, val, 0, 1000, &s->ls.max_iter);
    else if (!strcmp(name, "--derivative")) {
        s->stencil = stencil_kind_from_name(val);
        if (s->stencil == STENCIL_KIND_COUNT) return cli_error(2, "fit: --derivative '%s': expected central or savgol", val);
    } else if (!strcmp(name, "--window")) return parse_int(name, val, 3, STENCIL_MAX_LEN, &s->window);
    else if (!strcmp(name, "--smooth-degree") || !strcmp(name, "--degree")) {
        s->old_degree |= !strcmp(name, "--degree");
        return parse_int(name, val, 2, STENCIL_MAX_LEN - 1, &s->sg_degree);
    }
    else if (!strcmp(name, "--digits")) return parse_int(name, val, 1, 17, &s->digits);
    else if (!strcmp(name, "--format")) {
        int f = 0;
        while (f < OUT_COUNT && strcmp(val, out_names[f])) f++;
        if (f == OUT_COUNT) return cli_error(2, "fit: --format '%s': expected text, latex or json", val);
        s->format = (OutFormat)f;
    } else return cli_error(2, "fit: unknown option '%s' (framelaw fit --help lists them)", name);
    return 0;
}

static int parse_args(FitSettings *s, int argc, char **argv) {
    int operands = 0; /* after "--": FILE even when it starts with '-' */
    for (int i = 1; i < argc; i++) {
        const char *arg = argv[i];
        if (!operands && !strcmp(arg, "--")) {
            operands = 1;
            continue;
        }
        if (operands || strncmp(arg, "--", 2)) {
            if (s->path) return cli_error(2, "fit: one FILE expected, got '%s' and '%s'", s->path, arg);
            s->path = arg;
            continue;
        }
        char name[64];
        const char *val = NULL, *eq = strchr(arg, '=');
        if (eq) {
            snprintf(name, sizeof name, "%.*s", (int)(eq - arg), arg);
            val = eq + 1;
        } else {
            snprintf(name, sizeof name, "%s", arg);
        }
        if (!val && apply_flag(s, name)) continue;
        static const char *const valued[] = {"--time-column", "--rate",       "--columns",   "--names",
                                             "--order",       "--library-degree", "--multipliers", "--include",
                                             "--exclude",     "--threshold",  "--ridge",     "--max-iter",
                                             "--derivative",  "--window",     "--smooth-degree", "--degree",
                                             "--digits",      "--format"};
        int known = 0;
        for (size_t v = 0; v < sizeof valued / sizeof *valued; v++) known |= !strcmp(name, valued[v]);
        if (!known) return cli_error(2, "fit: unknown option '%s' (framelaw fit --help lists them)", name);
        if (!val) {
            if (i + 1 >= argc) return cli_error(2, "fit: %s needs a value (framelaw fit --help)", name);
            val = argv[++i];
        }
        if (apply_option(s, name, val)) return 2;
    }
    if (!s->path) return cli_error(2, "fit: no FILE given (usage: framelaw fit FILE [options])");
    /* --degree, easily taken for the library's degree, is read for one more release */
    if (s->old_degree)
        fprintf(stderr, "framelaw: note: fit --degree is the Savitzky-Golay smoothing degree, now --smooth-degree "
                        "(--degree is read until the next release; the library's is --library-degree)\n");
    return 0;
}

/* Column by 1-based number or header name; -1 (message printed) when there is none. */
static int find_column(const Series *ser, const char *path, const char *what, const char *key) {
    char *e;
    long c = strtol(key, &e, 10);
    if (e != key && !*e) {
        if (c < 1 || c > ser->cols) {
            cli_error(2, "%s: %s %ld does not exist (the file has %d columns)", path, what, c, ser->cols);
            return -1;
        }
        return (int)c - 1;
    }
    for (int i = 0; ser->names && i < ser->cols; i++)
        if (!strcmp(ser->names[i], key)) return i;
    cli_error(2, "%s: %s '%s' is neither a column number nor a header name", path, what, key);
    return -1;
}

/* The state columns: every column but the time one, or the --columns list. Returns the count. */
static int state_columns(const FitSettings *s, const Series *ser, int tc, int *cols) {
    int k = 0, kmax = LIB_MAX_VARS / s->lib.order;
    if (!s->columns) {
        for (int c = 0; c < ser->cols; c++)
            if (c != tc) {
                if (k >= kmax) return cli_error(2, "%s: more than %d state columns (choose some with --columns)", s->path, kmax), -1;
                cols[k++] = c;
            }
        if (!k)
            return cli_error(2, "%s: no state columns besides the time column%s", s->path,
                             s->time_given || series_time_column(ser) == tc
                                 ? ""
                                 : " (column 1 is the time by default: give --rate HZ when the file holds no time column)"),
                   -1;
        return k;
    }
    char buf[1024];
    snprintf(buf, sizeof buf, "%s", s->columns);
    for (char *tok = strtok(buf, ","); tok; tok = strtok(NULL, ",")) {
        while (*tok == ' ') tok++;
        if (k >= kmax) return cli_error(2, "fit: --columns: at most %d state columns", kmax), -1;
        int c = find_column(ser, s->path, "state column", tok);
        if (c < 0) return -1;
        if (c == tc) return cli_error(2, "fit: --columns: column %d is the time column", c + 1), -1;
        cols[k++] = c;
    }
    if (!k) return cli_error(2, "fit: --columns '%s': no columns", s->columns), -1;
    return k;
}

int cmd_fit(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        fit_usage(stdout);
        return 0;
    }
    FitSettings s = fit_defaults();
    if (parse_args(&s, argc, argv)) return 2;
    if (s.rate > 0) s.time_col = NULL;

    Status st;
    Stencil sg;
    if (stencil_make(&sg, s.stencil, s.window, s.sg_degree, &st)) return cli_error(st.code, "fit: %s", st.msg);
    Series ser;
    if (series_read(s.path, &ser, &st)) return cli_error(st.code, "%s", st.msg);

    int rc = 0, cols[LIB_MAX_VARS];
    double *x = NULL, *d1 = NULL, *d2 = NULL, *state = NULL, *theta = NULL, *xi = NULL;
    uint8_t *mask = NULL;
    Library lib = {0};
    const char *p = s.path;
    int tc = -1, k;
    double dt = 0;
    if (s.time_col) {
        tc = find_column(&ser, p, "time column", s.time_col);
        if (tc < 0) {
            rc = 2;
            goto done;
        }
    }
    k = state_columns(&s, &ser, tc, cols);
    if (k < 0) {
        rc = 2;
        goto done;
    }
    if (ser.rows < 2) {
        rc = cli_error(2, "%s: %ld sample; a time series needs more", p, ser.rows);
        goto done;
    }
    if (tc >= 0) {
        if (series_time_step(&ser, tc, p, FIT_DT_TOL, &dt, &st)) {
            /* column 1 taken as the time by default, and no header names it so: the file may hold none */
            const char *hint = s.time_given || series_time_column(&ser) == tc ? ""
                               : ser.lines ? "; column 1 is the time by default: name it with --time-column, or give "
                                             "--rate HZ when the file holds no time column"
                                           : "; column 1 is the time by default (a .npy names no columns): give "
                                             "--rate HZ when the file holds no time column";
            rc = cli_error(st.code, "%s%s", st.msg, hint);
            goto done;
        }
    } else {
        dt = 1.0 / s.rate;
    }

    long n = ser.rows, nv = stencil_valid(&sg, n);
    if (nv < 1) {
        rc = cli_error(2, "%s: %ld samples; the %s stencil reads %d samples per estimate", p, n,
                       stencil_kind_names[sg.kind], 2 * sg.m + 1);
        goto done;
    }
    x = malloc(sizeof(double) * (size_t)n * k);            /* (n, k) state columns */
    d1 = malloc(sizeof(double) * (size_t)nv * k);          /* (nv, k) x' */
    d2 = malloc(sizeof(double) * (size_t)nv * k);          /* (nv, k) x'' */
    if (!x || !d1 || !d2) {
        rc = cli_error(1, "%s: out of memory", p);
        goto done;
    }
    for (long r = 0; r < n; r++)
        for (int j = 0; j < k; j++) x[r * k + j] = ser.d[r * ser.cols + cols[j]];
    stencil_apply_all(&sg, dt, x, n, k, d1, d2);

    /* the variables' names: the header's for the state columns, when they can name variables */
    const char *names[LIB_MAX_VARS];
    int named = ser.names && !s.names_z;
    for (int j = 0; named && j < k; j++) names[j] = ser.names[cols[j]];
    if (named) {
        int bad = -1;
        if (library_var_names_check(names, k, &bad, &st)) {
            fprintf(stderr, "framelaw: note: %s: column %d: %s; the variables are named z1, z2, ... (--names z says so "
                            "without this note)\n", p, cols[bad] + 1, st.msg);
            named = 0;
        }
    }
    s.lib.n_latent = k;
    if (library_init_named(&lib, &s.lib, named ? names : NULL, &st)) {
        rc = cli_error(st.code, "fit: %s", st.msg);
        goto done;
    }
    for (int i = 0, noted = 0; i < s.lib.n_include + s.lib.n_exclude && !noted; i++) {   /* one note at most */
        int inc = i < s.lib.n_include;
        const char *name = inc ? s.lib.include[i] : s.lib.exclude[i - s.lib.n_include];
        if ((noted = library_name_old_form(name, NULL, 0))) cli_note_old_term(inc ? "--include" : "--exclude", name);
    }
    int V = lib.n_vars, T = lib.n_terms;
    state = malloc(sizeof(double) * (size_t)nv * V);        /* (nv, V): z or (z, z') */
    theta = malloc(sizeof(double) * (size_t)nv * T);        /* (nv, T) */
    xi = malloc(sizeof(double) * (size_t)T * k);            /* (T, k) */
    mask = malloc((size_t)T * k);                           /* (T, k) */
    if (!state || !theta || !xi || !mask) {
        rc = cli_error(1, "%s: out of memory (%ld samples x %d terms)", p, nv, T);
        goto done;
    }
    for (long r = 0; r < nv; r++)
        for (int j = 0; j < k; j++) {
            state[r * V + j] = x[(r + sg.m) * k + j];
            if (s.lib.order == 2) state[r * V + k + j] = d1[r * k + j];
        }
    const double *target = s.lib.order == 2 ? d2 : d1;     /* (nv, k) */
    library_eval(&lib, theta, state, nv);
    ThreshLsqReport rep;
    if (thresh_lsq_fit(xi, mask, theta, target, nv, T, k, NULL, &s.ls, &rep, &st)) {
        rc = cli_error(st.code, "%s: %s", p, st.msg);
        goto done;
    }

    /* goodness of fit per equation: R^2 = 1 - SS_res / SS_tot of the derivative */
    double r2[LIB_MAX_VARS];
    {
        double ssr[LIB_MAX_VARS] = {0}, mean[LIB_MAX_VARS] = {0}, sst[LIB_MAX_VARS] = {0};
        for (long r = 0; r < nv; r++)
            for (int j = 0; j < k; j++) mean[j] += target[r * k + j] / nv;
        for (long r = 0; r < nv; r++) {
            for (int j = 0; j < k; j++) {
                double v = 0;
                for (int t = 0; t < T; t++) v += theta[r * T + t] * xi[t * k + j];
                double e = target[r * k + j] - v, dv = target[r * k + j] - mean[j];
                ssr[j] += e * e;
                sst[j] += dv * dv;
            }
        }
        for (int j = 0; j < k; j++) r2[j] = sst[j] > 0 ? 1.0 - ssr[j] / sst[j] : (ssr[j] == 0 ? 1.0 : 0.0);
    }

    if (s.format == OUT_JSON) {
        cJSON *root = equation_json_as(&lib, xi, mask, s.digits, EQ_COUNT_VARIABLES);
        cJSON *fit = cJSON_AddObjectToObject(root, "fit");
        cJSON_AddNumberToObject(fit, "samples", (double)n);
        cJSON_AddNumberToObject(fit, "samples_fitted", (double)nv);
        cJSON_AddNumberToObject(fit, "dt", dt);
        cJSON *cn = cJSON_AddArrayToObject(fit, "columns");
        for (int j = 0; j < k; j++) {
            char b[32];
            snprintf(b, sizeof b, "%d", cols[j] + 1);
            cJSON_AddItemToArray(cn, cJSON_CreateString(ser.names ? ser.names[cols[j]] : b));
        }
        cJSON *dv = cJSON_AddObjectToObject(fit, "derivative");
        cJSON_AddStringToObject(dv, "stencil", stencil_kind_names[sg.kind]);
        cJSON_AddNumberToObject(dv, "window", 2 * sg.m + 1);
        cJSON_AddNumberToObject(dv, "degree", sg.degree);
        cJSON_AddNumberToObject(fit, "threshold", s.ls.threshold);
        cJSON_AddNumberToObject(fit, "ridge", s.ls.ridge);
        cJSON_AddNumberToObject(fit, "max_iter", s.ls.max_iter);
        cJSON_AddBoolToObject(fit, "normalize", s.ls.normalize != 0);
        cJSON_AddBoolToObject(fit, "converged", rep.converged != 0);
        cJSON_AddItemToObject(fit, "r2", cJSON_CreateDoubleArray(r2, k));
        char *js = cJSON_Print(root);
        cJSON_Delete(root);
        if (!js) {
            rc = cli_error(1, "fit: out of memory");
            goto done;
        }
        puts(js);
        free(js);
    } else if (s.format == OUT_LATEX) {
        equation_fprint(stdout, EQ_LATEX, &lib, xi, mask, s.digits);
    } else {
        printf("# %s: %ld samples, dt = %.6g, %d state variable%s\n", p, n, dt, k, k > 1 ? "s" : "");
        for (int j = 0; j < k; j++) {
            if (named) printf("#   %s (z%d) = column %d\n", names[j], j + 1, cols[j] + 1);
            else if (ser.names) printf("#   z%d = %s (column %d)\n", j + 1, ser.names[cols[j]], cols[j] + 1);
            else printf("#   z%d = column %d\n", j + 1, cols[j] + 1);
        }
        printf("# derivatives: %s stencil of %d samples (degree %d), %ld samples fitted\n",
               stencil_kind_names[sg.kind], 2 * sg.m + 1, sg.degree, nv);
        printf("# library: %d terms (order %d, degree %d%s%s); threshold %g, ridge %g: %ld of %d coefficients "
               "active%s\n",
               T, lib.spec.order, lib.spec.degree, lib.spec.constant ? ", constant" : "", lib.spec.trig ? ", sin/cos" : "",
               s.ls.threshold, s.ls.ridge, rep.active, T * k,
               rep.converged ? "" : " (not converged: raise --max-iter)");
        printf("# R^2 of the fitted derivatives:");
        for (int j = 0; j < k; j++) printf(" %.6f", r2[j]);
        printf("\n");
        equation_fprint(stdout, EQ_TEXT, &lib, xi, mask, s.digits);
    }
    if (fflush(stdout)) rc = cli_error(1, "fit: writing the output failed");

done:
    free(x), free(d1), free(d2), free(state), free(theta), free(xi), free(mask);
    library_free(&lib);
    series_free(&ser);
    return rc;
}
