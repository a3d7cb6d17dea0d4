/* tests/test_cmd_fit.c: `framelaw fit`, run as a user would (the binary from `make test`): its
 * help, Lorenz and the damped pendulum recovered from files, JSON output that reloads, and every
 * kind of bad input with its one-line message and exit status 2 (DESIGN.md: 2 = bad usage or bad
 * input; common practice for command-line tools). */
#include <sys/wait.h>

#include "io/data/series.h"
#include "sparse/equation.h"
#include "sparse/integrate.h"
#include "tests/testutil.h"

static char tmp[256];

static int setup(void **state) {
    (void)state;
    return test_tmpdir(tmp, sizeof tmp) ? 0 : -1;
}

static int teardown(void **state) {
    (void)state;
    char cmd[512];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", tmp);
    return system(cmd) == 0 ? 0 : -1;
}

/* --help lists every option with its default (STYLE.md: `--help` shows every option with its
 * default). */
static void test_help(void **state) {
    (void)state;
    static char out[16384];
    assert_int_equal(test_run_capture("fit --help", out, sizeof out), 0);
    static const char *const opts[] = {"--time-column", "--rate",       "--columns",        "--order",
                                       "--library-degree", "--no-constant", "--trig",       "--multipliers",
                                       "--no-trig-velocity", "--include", "--exclude",      "--threshold",
                                       "--ridge",       "--max-iter",   "--no-normalize",   "--derivative",
                                       "--window",      "--smooth-degree", "--digits",      "--format",
                                       "--names"};
    for (size_t i = 0; i < sizeof opts / sizeof *opts; i++) {
        char key[64];
        snprintf(key, sizeof key, "  %s ", opts[i]);
        const char *at = strstr(out, key);
        if (!at) fail_msg("--help lacks %s", opts[i]);
        const char *eol = strchr(at, '\n');
        const char *br = strchr(at, '[');
        if (!br || br > eol) fail_msg("--help: %s shows no default", opts[i]);
    }
    assert_int_equal(test_run_capture("help", out, sizeof out), 0);
    assert_non_null(strstr(out, "  fit "));
    /* framelaw help COMMAND is the command's --help; an unknown one is bad usage */
    char out2[8192];
    assert_int_equal(test_run_capture("help fit", out2, sizeof out2), 0);
    assert_int_equal(test_run_capture("fit --help", out, sizeof out), 0);
    assert_string_equal(out, out2);
    /* the smoothing degree is --smooth-degree; --degree is not listed any more (read with a note) */
    assert_null(strstr(out, "  --degree "));
    assert_int_equal(test_run_capture("help fitt", out, sizeof out), 2);
    assert_non_null(strstr(out, "unknown command 'fitt'"));
}

/* Lorenz ("Deterministic Nonperiodic Flow", J. Atmos. Sci. 1963; sigma 10, rho 28, beta 8/3):
 * simulated by our integrator, written as CSV with a time column and a header, fitted with the
 * defaults (degree-3 library, Savitzky-Golay 7/3): the printed equations are Lorenz's, written with
 * the header's names x, y, z (Lorenz's own letters); --names z writes them with z1, z2, z3. */
static void lorenz(double t, const double *s, double *d, void *ctx) {
    (void)t, (void)ctx;
    d[0] = 10.0 * (s[1] - s[0]);
    d[1] = s[0] * (28.0 - s[2]) - s[1];
    d[2] = s[0] * s[1] - 8.0 / 3.0 * s[2];
}

static double *simulate(OdeFn f, void *ctx, int dim, const double *y0, double dt, int n) {
    double *t = malloc(sizeof(double) * n), *y = malloc(sizeof(double) * n * dim);
    for (int i = 0; i < n; i++) t[i] = dt * (i + 1);
    OdeOptions opt = ode_defaults();
    opt.rtol = opt.atol = 1e-10;
    OdeReport rep;
    Status st;
    if (ode_solve(f, ctx, dim, 0.0, y0, t, n, y, NULL, &opt, &rep, &st)) fail_msg("%s", st.msg);
    free(t);
    return y;
}

static void test_lorenz_csv(void **state) {
    (void)state;
    const int n = 5000;
    const double dt = 0.002;
    double y0[3] = {-8, 7, 27};
    double *y = simulate(lorenz, NULL, 3, y0, dt, n);
    char path[512], args[1024];
    snprintf(path, sizeof path, "%s/lorenz.csv", tmp);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fprintf(f, "time, x, y, z\n");
    for (int i = 0; i < n; i++) fprintf(f, "%.17g, %.17g, %.17g, %.17g\n", dt * (i + 1), y[3 * i], y[3 * i + 1], y[3 * i + 2]);
    fclose(f);
    free(y);
    static char out[65536];
    snprintf(args, sizeof args, "fit '%s'", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    if (!strstr(out, "\ndx/dt = -10*x + 10*y\n")) fail_msg("output:\n%s", out);
    assert_non_null(strstr(out, "\ndy/dt = 28*x - y - x*z\n"));
    assert_non_null(strstr(out, "\ndz/dt = -2.667*z + x*y\n"));
    assert_non_null(strstr(out, "#   x (z1) = column 2\n"));
    assert_non_null(strstr(out, "#   z (z3) = column 4\n"));
    assert_non_null(strstr(out, "7 of 60 coefficients active"));
    assert_null(strstr(out, "deprecated"));
    assert_null(strstr(out, "note"));
    snprintf(args, sizeof args, "fit '%s' --names z", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "\ndz1/dt = -10*z1 + 10*z2\n"));
    assert_non_null(strstr(out, "\ndz2/dt = 28*z1 - z2 - z1*z3\n"));
    assert_non_null(strstr(out, "\ndz3/dt = -2.667*z3 + z1*z2\n"));
    assert_non_null(strstr(out, "z1 = x (column 2)"));
    assert_null(strstr(out, "note"));
    snprintf(args, sizeof args, "fit '%s' --format latex", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "\\dot{y} &= 28 x - y - x z \\\\\n"));

    /* --exclude by name: the z form or the header's names, with '*'; the old form with a space is read
     * one release more, with a note */
    snprintf(args, sizeof args, "fit '%s' --exclude 'z2*z3' --exclude 'z1^3'", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "library: 18 terms"));
    assert_null(strstr(out, "deprecated"));
    snprintf(args, sizeof args, "fit '%s' --exclude 'z*y' --exclude 'x^3' --exclude 'x*z'", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "library: 17 terms"));
    assert_null(strstr(out, "x*z"));
    snprintf(args, sizeof args, "fit '%s' --exclude 'z2 z3' --exclude 'z1^3'", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "library: 18 terms"));
    assert_non_null(strstr(out, "\ndy/dt = 28*x - y - x*z\n"));
    assert_non_null(strstr(out, "framelaw: note: --exclude \"z2 z3\": a space for a product is deprecated"));
    assert_non_null(strstr(out, "write \"z2*z3\"\n"));

    /* JSON output reloads into the same model */
    snprintf(args, sizeof args, "fit '%s' --format json --library-degree 2", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    Library lib;
    Coef c;
    Status st;
    if (equation_from_json(out, &lib, &c, &st)) fail_msg("%s", st.msg);
    assert_int_equal(lib.n_terms, 10);
    assert_close(c.xi[library_find(&lib, "z1") * 3 + 1], 28.0, 0, 1e-3);
    assert_close(c.xi[library_find(&lib, "z1*z3") * 3 + 1], -1.0, 0, 1e-3);
    assert_int_equal(coef_active(c.mask, 30), 7);
    cJSON *root = cJSON_Parse(out);
    /* plain state variables, not a latent space: the count is n_variables */
    assert_int_equal(cJSON_GetObjectItem(root, "n_variables")->valueint, 3);
    assert_null(cJSON_GetObjectItem(root, "n_latent"));
    assert_int_equal(cJSON_GetObjectItem(root, "digits")->valueint, 4);
    cJSON *fit = cJSON_GetObjectItem(root, "fit");
    assert_non_null(fit);
    assert_close(cJSON_GetObjectItem(fit, "dt")->valuedouble, dt, 1e-12, 0);
    assert_int_equal(cJSON_GetArraySize(cJSON_GetObjectItem(fit, "r2")), 3);
    /* the names: recorded beside the z names the terms keep (the keys a reader matches) */
    cJSON *vn = cJSON_GetObjectItem(root, "variable_names");
    assert_int_equal(cJSON_GetArraySize(vn), 3);
    assert_string_equal(cJSON_GetArrayItem(vn, 0)->valuestring, "x");
    assert_string_equal(cJSON_GetArrayItem(vn, 2)->valuestring, "z");
    assert_string_equal(cJSON_GetArrayItem(cJSON_GetObjectItem(root, "terms"), 1)->valuestring, "z1");
    cJSON *e1 = cJSON_GetArrayItem(cJSON_GetObjectItem(root, "equations"), 1);
    assert_string_equal(cJSON_GetObjectItem(e1, "lhs")->valuestring, "dy/dt");
    assert_string_equal(cJSON_GetObjectItem(e1, "text")->valuestring, "dy/dt = 28*x - y - x*z");
    assert_string_equal(cJSON_GetObjectItem(e1, "latex")->valuestring, "\\dot{y} = 28 x - y - x z");
    cJSON_Delete(root);
    /* the model read back names its variables too */
    assert_int_equal(lib.has_var_names, 1);
    assert_true(library_find(&lib, "x*z") >= 0);
    assert_int_equal(library_find(&lib, "x*z"), library_find(&lib, "z1*z3"));
    char line[256];
    equation_line(line, sizeof line, EQ_TEXT, &lib, c.xi, c.mask, 2, 4);
    assert_string_equal(line, "dz/dt = -2.667*z + x*y");
    coef_free(&c);
    library_free(&lib);
}

/* The damped pendulum theta'' = -(g/L) sin(theta) - c theta' with g = 9.80665 m/s^2 (standard
 * gravity, BIPM SI Brochure, 9th ed. 2019), L = 2 m, c = 0.2 1/s, as a one-column .npy at 100 Hz:
 * a second-order fit with sin terms prints g/L = 4.903 and c = 0.2 (a Savitzky-Golay stencil of
 * degree 4 over 9 samples: the default degree 3 over 7 reads 4.902 and 0.1999 at this dt). */
typedef struct {
    double gl, c;
} Pend;

static void pendulum(double t, const double *y, double *d, void *ctx) {
    (void)t;
    const Pend *p = ctx;
    d[0] = y[1];
    d[1] = -p->gl * sin(y[0]) - p->c * y[1];
}

static void test_pendulum_npy(void **state) {
    (void)state;
    Pend p = {9.80665 / 2, 0.2};
    const int n = 2000;
    double y0[2] = {2.5, 0};
    double *y = simulate(pendulum, &p, 2, y0, 0.01, n);
    double *th = malloc(sizeof(double) * n);
    for (int i = 0; i < n; i++) th[i] = y[2 * i];
    char path[512], args[1024];
    snprintf(path, sizeof path, "%s/pendulum.npy", tmp);
    Status st;
    if (npy_write_f64(path, th, n, 0, &st)) fail_msg("%s", st.msg);
    free(y), free(th);
    static char out[16384];
    snprintf(args, sizeof args,
             "fit '%s' --rate 100 --order 2 --trig --library-degree 2 --threshold 0.05 --window 9 --smooth-degree 4", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    if (!strstr(out, "\nd2z1/dt2 = -0.2*dz1/dt - 4.903*sin(z1)\n")) fail_msg("output:\n%s", out);
    assert_null(strstr(out, "note"));
    /* --degree is still the smoothing degree for one release, with a note saying so */
    snprintf(args, sizeof args, "fit '%s' --rate=100 --order=2 --multipliers=1 --library-degree=1 --window=9 --degree=4 --format latex",
             path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "\\ddot{z}_{1} &= -0.2 \\dot{z}_{1} - 4.903 \\sin(z_{1})"));
    assert_non_null(strstr(out, "framelaw: note: fit --degree is the Savitzky-Golay smoothing degree, now --smooth-degree "
                                "(--degree is read until the next release; the library's is --library-degree)\n"));
    snprintf(args, sizeof args, "fit '%s' --rate=100 --order=2 --trig --library-degree=1 --window=9 --degree=3 --smooth-degree=4",
             path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "\nd2z1/dt2 = -0.2*dz1/dt - 4.903*sin(z1)\n"));
    assert_non_null(strstr(out, "framelaw: note: fit --degree is the Savitzky-Golay smoothing degree"));

    /* the same angle in a CSV whose header names it theta: d2theta/dt2, dtheta/dt, sin(theta), and in
     * LaTeX the Greek letter */
    double *y2 = simulate(pendulum, &p, 2, y0, 0.01, n);
    snprintf(path, sizeof path, "%s/pendulum.csv", tmp);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fprintf(f, "t,theta\n");
    for (int i = 0; i < n; i++) fprintf(f, "%.17g,%.17g\n", 0.01 * (i + 1), y2[2 * i]);
    fclose(f);
    free(y2);
    snprintf(args, sizeof args, "fit '%s' --order 2 --trig --library-degree 1 --window 9 --smooth-degree 4", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    if (!strstr(out, "\nd2theta/dt2 = -0.2*dtheta/dt - 4.903*sin(theta)\n")) fail_msg("output:\n%s", out);
    snprintf(args, sizeof args, "fit '%s' --order 2 --trig --library-degree 1 --window 9 --smooth-degree 4 --format latex",
             path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "\\ddot{\\theta} &= -0.2 \\dot{\\theta} - 4.903 \\sin(\\theta)"));
    /* a velocity term named with the header's name */
    snprintf(args, sizeof args, "fit '%s' --order 2 --trig --library-degree 1 --window 9 --smooth-degree 4 "
                                "--exclude 'dtheta/dt'", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_null(strstr(out, "-0.2*dtheta/dt"));
}

/* A header whose names cannot name variables: the fit runs with z1, z2, ... and one note line says
 * which column and why (exit 0). The data: x = exp(-t), v = exp(-2t) at 10 Hz. */
static void test_names_fallback(void **state) {
    (void)state;
    static const char *const cases[][2] = {
        {"t,x pos,v", "column 2: 'x pos' is not a plain name (a letter, then letters, digits or _, at most 24)"},
        {"t,x,2v", "column 3: '2v' is not a plain name"},
        {"t,sin,v", "column 2: 'sin' is a word of the term names (sin, cos, t, dt)"},
        {"t,x,dx", "column 3: 'dx' reads as the derivative of 'x'"},
        {"t,z2,v", "column 2: 'z2' reads as another variable's z name (it names variable 1, z1)"},
        {"t,speed,speed", "column 3: 'speed' names two variables"},
        {"t,a_very_long_variable_name,v", "column 2: 'a_very_long_variable_name' is not a plain name"},
    };
    static char out[16384];
    for (size_t i = 0; i < sizeof cases / sizeof *cases; i++) {
        char path[512], args[1024], want[1024];
        snprintf(path, sizeof path, "%s/names%zu.csv", tmp, i);
        FILE *f = fopen(path, "w");
        assert_non_null(f);
        fprintf(f, "%s\n", cases[i][0]);
        for (int r = 0; r < 40; r++) fprintf(f, "%.17g,%.17g,%.17g\n", 0.1 * r, exp(-0.1 * r), exp(-0.2 * r));
        fclose(f);
        snprintf(args, sizeof args, "fit '%s' --library-degree 1", path);
        int rc = test_run_capture(args, out, sizeof out);
        if (rc != 0) fail_msg("%s: exit %d: %s", cases[i][0], rc, out);
        snprintf(want, sizeof want, "framelaw: note: %s: %s", path, cases[i][1]);
        if (!strstr(out, want)) fail_msg("%s: output lacks '%s':\n%s", cases[i][0], want, out);
        assert_non_null(strstr(out, "; the variables are named z1, z2, ... (--names z says so without this note)\n"));
        assert_non_null(strstr(out, "\ndz1/dt = "));
        assert_non_null(strstr(out, "\ndz2/dt = "));
        /* --names z: the same without the note */
        snprintf(args, sizeof args, "fit '%s' --library-degree 1 --names z", path);
        assert_int_equal(test_run_capture(args, out, sizeof out), 0);
        assert_null(strstr(out, "note"));
        assert_non_null(strstr(out, "\ndz1/dt = "));
    }
}

/* A .npy names no columns, so column 1 is the time unless --rate says there is none: without --rate
 * the message says to give it (exit 2), with it the fit runs. */
static void test_npy_without_time(void **state) {
    (void)state;
    const int n = 200;
    double *xy = malloc(sizeof(double) * 2 * n);
    for (int i = 0; i < n; i++) xy[2 * i] = cos(0.05 * i), xy[2 * i + 1] = sin(0.05 * i);
    char path[512], path1[512], args[1024];
    static char out[16384];
    Status st;
    snprintf(path, sizeof path, "%s/circle.npy", tmp);
    if (npy_write_f64(path, xy, n, 2, &st)) fail_msg("%s", st.msg);
    snprintf(path1, sizeof path1, "%s/cos.npy", tmp);
    for (int i = 0; i < n; i++) xy[i] = cos(0.05 * i);
    if (npy_write_f64(path1, xy, n, 0, &st)) fail_msg("%s", st.msg);
    free(xy);
    snprintf(args, sizeof args, "fit '%s'", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "circle.npy: row 2: time 0.99875026 is not greater than the time before it (1)"));
    assert_non_null(strstr(out, "column 1 is the time by default (a .npy names no columns): give --rate HZ when the "
                                "file holds no time column\n"));
    assert_ptr_equal(strchr(out, '\n'), out + strlen(out) - 1);
    snprintf(args, sizeof args, "fit '%s'", path1);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "cos.npy: no state columns besides the time column (column 1 is the time by default: "
                                "give --rate HZ when the file holds no time column)\n"));
    /* a header that names column 1 the time: it is one, no hint */
    snprintf(path1, sizeof path1, "%s/timeonly.csv", tmp);
    test_write_file(path1, "time\n0\n1\n2\n");
    snprintf(args, sizeof args, "fit '%s'", path1);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "timeonly.csv: no state columns besides the time column\n"));
    /* a time column given: no hint (the user chose it) */
    snprintf(args, sizeof args, "fit '%s' --time-column 1", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_null(strstr(out, "--rate HZ"));
    /* with --rate: x = cos t, y = sin t sampled at 20 Hz (t = i / 20) follow dx/dt = -y, dy/dt = x
     * (uniform circular motion; common practice), written z1, z2 as a .npy names nothing */
    snprintf(args, sizeof args, "fit '%s' --rate 20 --library-degree 1", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "\ndz1/dt = -z2\n"));
    assert_non_null(strstr(out, "\ndz2/dt = z1\n"));
}

typedef struct {
    const char *name;       /* file name in the temporary directory */
    const char *content;    /* NULL: no file */
    const char *args;       /* after the file name */
    const char *message;    /* expected in the one-line message, after "<dir>/" */
} Bad;

/* Each bad input: exit status 2 and one line "framelaw: ..." naming the file and line. */
static void test_bad_input(void **state) {
    (void)state;
    static const Bad cases[] = {
        {"ragged.csv", "t,x\n0,1\n0.1,2,3\n", "", "ragged.csv:3: ragged row: 3 fields where line 1 has 2"},
        {"word.csv", "# a comment\nt,x\n0,1\n\n0.1,abc\n", "", "word.csv:5: field 2 \"abc\" is not a finite number"},
        {"back.csv", "t,x\n0,1\n0.1,2\n# note\n\n0.05,3\n0.2,4\n", "",
         "back.csv:6 (data row 3): time 0.05 is not greater than the time before it (0.1)"},
        {"same.csv", "0,1\n0.1,2\n0.1,3\n", "", "same.csv:3 (data row 3): time 0.1 is not greater than the time before it"},
        {"uneven.csv", "t,x\n0,1\n0.1,2\n0.2,3\n0.35,4\n0.4,5\n", "",
         "uneven.csv:5 (data row 4): time step 0.15 (from 0.2 to 0.35) differs from the median step 0.1 by more than "
         "1% (the first of 2 such steps)"},
        /* a gap after data row 8: named there, though against the mean step (0.19) every step is off */
        {"gap.csv", "t,x\n# 10 Hz\n0,1\n0.1,2\n0.2,3\n0.3,4\n0.4,5\n0.5,6\n0.6,7\n0.7,8\n1.7,9\n1.8,10\n1.9,11\n", "",
         "gap.csv:11 (data row 9): time step 1 (from 0.7 to 1.7) differs from the median step 0.1 by more than 1%;"},
        {"nohead.csv", "1,0\n0.5,1\n0,2\n", "",
         "nohead.csv:2 (data row 2): time 0.5 is not greater than the time before it (1); the time column must "
         "increase; column 1 is the time by default: name it with --time-column, or give --rate HZ when the file "
         "holds no time column"},
        {"names.csv", "t,x\n0,1\n1,2\n", "--names q", "fit: --names 'q': expected header or z"},
        {"sdeg.csv", "t,x\n0,1\n1,2\n", "--smooth-degree 1", "fit: --smooth-degree '1': expected an integer in 2.."},
        {"few.csv", "t,x\n0,0\n1,1\n2,4\n3,9\n4,16\n5,25\n6,36\n7,49\n8,64\n9,81\n10,100\n11,121\n",
         "--library-degree 8", "few.csv: least squares: the library has 9 terms but there are only 6 samples"},
        {"short.csv", "t,x\n0,0\n1,1\n2,4\n", "", "short.csv: 3 samples; the savgol stencil reads 7 samples"},
        {"absent.csv", NULL, "", "absent.csv: cannot open"},
        {"col.csv", "t,x\n0,1\n1,2\n", "--time-column 5", "col.csv: time column 5 does not exist (the file has 2 columns)"},
        {"name.csv", "t,x\n0,1\n1,2\n", "--columns speed", "name.csv: state column 'speed' is neither"},
        {"opt.csv", "t,x\n0,1\n1,2\n", "--order 3", "fit: --order '3': expected an integer in 1..2"},
        {"opt2.csv", "t,x\n0,1\n1,2\n", "--smooth", "fit: unknown option '--smooth'"},
        {"opt3.csv", "t,x\n0,0\n1,1\n2,4\n3,9\n4,16\n5,25\n6,36\n7,49\n8,64\n", "--exclude 'z1*z3'",
         "fit: library exclude: term 'z1*z3': no variable z3 (the latent size is 1)"},
        {"opt4.csv", "t,x\n0,1\n1,2\n", "--rate -5", "fit: --rate '-5'"},
        {"text.txt", "0,1\n", "", "text.txt: not a numeric recording"},
    };
    static char out[8192];
    for (size_t i = 0; i < sizeof cases / sizeof *cases; i++) {
        const Bad *b = &cases[i];
        char path[512], args[1024], want[1024];
        snprintf(path, sizeof path, "%s/%s", tmp, b->name);
        if (b->content) test_write_file(path, b->content);
        snprintf(args, sizeof args, "fit '%s' %s", path, b->args);
        int rc = test_run_capture(args, out, sizeof out);
        if (rc != 2) fail_msg("%s %s: exit %d, expected 2; output: %s", b->name, b->args, rc, out);
        if (strncmp(out, "framelaw: ", 10) || strchr(out, '\n') != out + strlen(out) - 1)
            fail_msg("%s: not one line starting 'framelaw: ': %s", b->name, out);
        if (!strstr(out, b->message)) fail_msg("%s: message '%s' lacks '%s'", b->name, out, b->message);
        if (strncmp(b->message, "fit:", 4)) {   /* messages about the file name it with its path */
            snprintf(want, sizeof want, "%s/%s", tmp, b->message);
            if (!strstr(out, want)) fail_msg("%s: message '%s' does not name the file as '%s'", b->name, out, want);
        }
    }
    assert_int_equal(test_run_capture("fit", out, sizeof out), 2);
    assert_non_null(strstr(out, "no FILE given"));
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_help),
        cmocka_unit_test(test_lorenz_csv),
        cmocka_unit_test(test_pendulum_npy),
        cmocka_unit_test(test_names_fallback),
        cmocka_unit_test(test_npy_without_time),
        cmocka_unit_test(test_bad_input),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
