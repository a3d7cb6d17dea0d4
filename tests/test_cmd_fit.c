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
                                       "--window",      "--degree",     "--digits",         "--format"};
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
    assert_int_equal(test_run_capture("help fitt", out, sizeof out), 2);
    assert_non_null(strstr(out, "unknown command 'fitt'"));
}

/* Lorenz ("Deterministic Nonperiodic Flow", J. Atmos. Sci. 1963; sigma 10, rho 28, beta 8/3):
 * simulated by our integrator, written as CSV with a time column and a header, fitted with the
 * defaults (degree-3 library, Savitzky-Golay 7/3): the printed equations are Lorenz's. */
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
    assert_non_null(strstr(out, "\ndz1/dt = -10*z1 + 10*z2\n"));
    assert_non_null(strstr(out, "\ndz2/dt = 28*z1 - z2 - z1*z3\n"));
    assert_non_null(strstr(out, "\ndz3/dt = -2.667*z3 + z1*z2\n"));
    assert_non_null(strstr(out, "z1 = x (column 2)"));
    assert_non_null(strstr(out, "7 of 60 coefficients active"));
    assert_null(strstr(out, "deprecated"));

    /* --exclude by name, with '*' and in the old form with a space (one release more, with a note) */
    snprintf(args, sizeof args, "fit '%s' --exclude 'z2*z3' --exclude 'z1^3'", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "library: 18 terms"));
    assert_null(strstr(out, "deprecated"));
    snprintf(args, sizeof args, "fit '%s' --exclude 'z2 z3' --exclude 'z1^3'", path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "library: 18 terms"));
    assert_non_null(strstr(out, "\ndz2/dt = 28*z1 - z2 - z1*z3\n"));
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
    cJSON_Delete(root);
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
    snprintf(args, sizeof args, "fit '%s' --rate 100 --order 2 --trig --library-degree 2 --threshold 0.05 --window 9 --degree 4",
             path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    if (!strstr(out, "\nd2z1/dt2 = -0.2*dz1/dt - 4.903*sin(z1)\n")) fail_msg("output:\n%s", out);
    snprintf(args, sizeof args, "fit '%s' --rate=100 --order=2 --multipliers=1 --library-degree=1 --window=9 --degree=4 --format latex",
             path);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "\\ddot{z}_{1} &= -0.2 \\dot{z}_{1} - 4.903 \\sin(z_{1})"));
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
         "back.csv:6: time 0.05 is not greater than the time before it (0.1)"},
        {"same.csv", "0,1\n0.1,2\n0.1,3\n", "", "same.csv:3: time 0.1 is not greater than the time before it"},
        {"uneven.csv", "t,x\n0,1\n0.1,2\n0.2,3\n0.35,4\n0.4,5\n", "",
         "uneven.csv:5: time step 0.15 differs from the mean step 0.1"},
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
        cmocka_unit_test(test_bad_input),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
