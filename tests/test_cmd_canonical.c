/* tests/test_cmd_canonical.c: the canonical form in a run (io/run/runcanonical.h) and `framelaw
 * canonical RUN_DIR`, through the binary. The data: a harmonic oscillator z'' = -w^2 z, w = 2 rad/s,
 * seen through 16 fixed linear channels (so its state (z, z'/w) is a rotation in any coordinates the
 * encoder picks), 4 CSV recordings. Its law in the learned coordinates is dense; in the canonical
 * ones it is the real Jordan form u1' = -a u2, u2' = c u1 with a c = w^2 (the eigenvalues +-i w of
 * the linear law do not change under a change of coordinates; the oscillator's angular frequency,
 * common practice). The search itself is checked against outside values in tests/test_canonical.c. */
#include <signal.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "tests/testutil.h"

static const char CFG[] =
    "{\"data\": {\"frames\": \"%s/data\", \"fps\": 30, \"derivative\": {\"method\": \"central\"}},\n"
    " \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [16], \"activation\": \"tanh\", \"init\": \"pca\", "
    "\"derivatives\": \"frames\"},\n"
    " \"library\": {\"degree\": 2, \"trig\": false},\n"
    " \"loss\": {\"dx\": 0.1, \"dz\": 1, \"l1\": 1e-3, \"normalize\": false},\n"
    " \"train\": {\"batch\": 32, \"epochs\": 60, \"threads\": 1, \"validate_every\": 5, \"warmup_epochs\": 20},\n"
    " \"threshold\": {\"value\": 0.05, \"measure\": \"coefficient\", \"select\": \"none\", \"every\": 10, "
    "\"refine_epochs\": 10},\n"
    " \"checkpoint\": {\"every\": 25, \"keep\": 2},\n"
    " \"output\": \"%s/run\"}\n";

#define W_OSC 2.0

static char tmp[256];

static int setup(void **state) {
    (void)state;
    char dir[512], path[600], cfg[4096], args[1200], out[8192];
    if (!test_tmpdir(tmp, sizeof tmp)) return -1;
    snprintf(dir, sizeof dir, "%s/data", tmp);
    if (mkdir(dir, 0777)) return -1;
    for (int k = 0; k < 4; k++) {
        snprintf(path, sizeof path, "%s/rec%d.csv", dir, k);
        FILE *f = fopen(path, "w");
        if (!f) return -1;
        for (int i = 0; i < 120; i++) {
            double t = i / 30.0, a = 0.5 + 0.1 * k, z0 = a * sin(W_OSC * t + k), z1 = a * cos(W_OSC * t + k);
            for (int c = 0; c < 16; c++) fprintf(f, "%s%.9g", c ? "," : "", sin(c + 1.0) * z0 + cos(2.0 * c + 1) * z1);
            fputc('\n', f);
        }
        fclose(f);
    }
    snprintf(cfg, sizeof cfg, CFG, tmp, tmp);
    snprintf(path, sizeof path, "%s/config.json", tmp);
    test_write_file(path, cfg);
    snprintf(args, sizeof args, "train '%s'", path);
    int rc = test_run_capture(args, out, sizeof out);
    if (rc) fprintf(stderr, "train exited %d:\n%s", rc, out);
    return rc;
}

static int teardown(void **state) {
    (void)state;
    test_rmtree(tmp);
    return 0;
}

static char *run_file(const char *name) {
    char path[600];
    snprintf(path, sizeof path, "%s/run/%s", tmp, name);
    char *s = test_slurp(path);
    if (!s) fail_msg("%s missing", path);
    return s;
}

/* equations.json: the canonical object holds the two-term rotation with the oscillator's frequency,
 * a map within the condition bound; equations.txt opens with the canonical law, then the learned one. */
static void test_found_in_training(void **state) {
    (void)state;
    char *txt = run_file("equations.json");
    cJSON *root = cJSON_Parse(txt);
    assert_non_null(root);
    cJSON *c = cJSON_GetObjectItem(root, "canonical");
    assert_non_null(c);
    assert_string_equal(cJSON_GetObjectItem(c, "status")->valuestring, "found");
    cJSON *fit = cJSON_GetObjectItem(c, "fit");
    int active = cJSON_GetObjectItem(fit, "active")->valueint, learned = cJSON_GetObjectItem(fit, "active_learned")->valueint;
    assert_int_equal(active, 2);
    assert_true(learned > active);
    cJSON *map = cJSON_GetObjectItem(c, "map");
    double cond = cJSON_GetObjectItem(map, "cond")->valuedouble;
    assert_true(cond >= 1 && cond <= 1000);
    /* the product of the two coefficients is -w^2 */
    double prod = 1;
    int n = 0;
    cJSON *eqs = cJSON_GetObjectItem(c, "equations"), *eq;
    cJSON_ArrayForEach(eq, eqs) {
        cJSON *co = cJSON_GetObjectItem(eq, "coefficients"), *v;
        cJSON_ArrayForEach(v, co) if (v->valuedouble != 0) prod *= v->valuedouble, n++;
    }
    assert_int_equal(n, 2);
    double w = sqrt(-prod);
    if (!(fabs(w - W_OSC) < 0.02 * W_OSC)) fail_msg("canonical frequency %g, expected %g", w, W_OSC);
    char *eqt = run_file("equations.txt");
    /* the JSON's texts are equations.txt's lines: the same digits, and "digits" says how many */
    assert_int_equal(cJSON_GetObjectItem(root, "digits")->valueint, 4);
    const cJSON *lists[3] = {cJSON_GetObjectItem(root, "equations"), eqs, NULL};
    for (int l = 0; lists[l]; l++) cJSON_ArrayForEach(eq, lists[l]) {
        char line[512];
        snprintf(line, sizeof line, "\n%s\n", cJSON_GetObjectItem(eq, "text")->valuestring);
        if (!strstr(eqt, line)) fail_msg("equations.txt lacks the line '%s':\n%s", line + 1, eqt);
    }
    cJSON *mt;
    cJSON_ArrayForEach(mt, cJSON_GetObjectItem(map, "text")) {
        char line[512];
        snprintf(line, sizeof line, "\n# %s\n", mt->valuestring);
        if (!strstr(eqt, line)) fail_msg("equations.txt lacks the map line '%s':\n%s", line + 1, eqt);
    }
    cJSON_Delete(root);
    free(txt);
    assert_true(!strncmp(eqt, "# canonical law (2 terms", 24));
    assert_non_null(strstr(eqt, "du1/dt = "));
    assert_non_null(strstr(eqt, "# u1 = "));
    char *lrn = strstr(eqt, "# learned law, in z:\ndz1/dt = ");
    assert_non_null(lrn);
    free(eqt);
    char *tex = run_file("equations.tex");
    assert_true(!strncmp(tex, "% canonical law", 15));
    assert_non_null(strstr(tex, "\\dot{u}_{1}"));
    free(tex);
}

/* trajectories/rec*.csv gain the canonical coordinates: u = A z + b with the map of equations.json,
 * du = A dz, and the canonical law's prediction. In the canonical coordinates u1' = -a u2,
 * u2' = c u1, the phase atan2(sqrt(a) u2, sqrt(c) u1) of the oscillator advances at its angular
 * frequency w (common practice): measured on each recording's exported u, from its first to its last
 * row, it is W_OSC within 2% (the encoder's warp makes the phase rate wobble within a period, and
 * the learned law fits z' to 14% here, so the energy c u1^2 + a u2^2 is not a usable check). */
static void test_trajectory_columns(void **state) {
    (void)state;
    char *txt = run_file("equations.json");
    cJSON *root = cJSON_Parse(txt);
    free(txt);
    assert_non_null(root);
    cJSON *c = cJSON_GetObjectItem(root, "canonical"), *map = cJSON_GetObjectItem(c, "map");
    double A[2][2], b[2], coef[2] = {0, 0};
    for (int i = 0; i < 2; i++) {
        b[i] = cJSON_GetArrayItem(cJSON_GetObjectItem(map, "b"), i)->valuedouble;
        for (int j = 0; j < 2; j++)
            A[i][j] = cJSON_GetArrayItem(cJSON_GetArrayItem(cJSON_GetObjectItem(map, "A"), i), j)->valuedouble;
    }
    /* equation i (du_i/dt) has one term: coef[i] times the other variable */
    int e = 0;
    cJSON *eq, *v;
    cJSON_ArrayForEach(eq, cJSON_GetObjectItem(c, "equations")) {
        cJSON_ArrayForEach(v, cJSON_GetObjectItem(eq, "coefficients")) if (v->valuedouble != 0) coef[e] = v->valuedouble;
        e++;
    }
    cJSON_Delete(root);
    assert_true(coef[0] * coef[1] < 0);
    double a = fabs(coef[0]), cc = fabs(coef[1]);
    for (int r = 0; r < 4; r++) {
        char name[64];
        snprintf(name, sizeof name, "trajectories/rec%d.csv", r);
        char *csv = run_file(name);
        static const char head[] = "t,z1,z2,dz1,dz2,model_dz1,model_dz2,u1,u2,du1,du2,model_du1,model_du2\n";
        if (strncmp(csv, head, strlen(head))) fail_msg("%s header: %.200s", name, csv);
        char *p = csv + strlen(head);
        double th0 = 0, th = 0, prev = 0, t0 = 0, t1 = 0;
        long rows = 0;
        while (*p) {
            double x[13];
            for (int k = 0; k < 13; k++) {
                char *end;
                x[k] = strtod(p, &end);
                assert_true(end != p);
                p = end + (*end == ',' || *end == '\n');
            }
            for (int i = 0; i < 2; i++) {
                double u = A[i][0] * x[1] + A[i][1] * x[2] + b[i], du = A[i][0] * x[3] + A[i][1] * x[4];
                assert_true(fabs(u - x[7 + i]) <= 1e-9 * (1 + fabs(u)));
                assert_true(fabs(du - x[9 + i]) <= 1e-9 * (1 + fabs(du)));
            }
            double ang = atan2(sqrt(a) * x[8], sqrt(cc) * x[7]);
            if (!rows) th0 = th = ang, t0 = x[0];
            else {
                double step = ang - prev;
                step -= 2 * M_PI * round(step / (2 * M_PI)); /* unwrapped */
                th += step;
            }
            prev = ang, t1 = x[0], rows++;
        }
        free(csv);
        assert_true(rows > 100);
        double rate = fabs(th - th0) / (t1 - t0);
        if (!(fabs(rate - W_OSC) < 0.02 * W_OSC)) fail_msg("%s: the canonical phase advances at %g rad/s, expected %g", name, rate, W_OSC);
    }
}

/* The command: prints the law and the map; --set canonical.* is stored; other keys, bad values and
 * bad folders are refused with exit status 2. */
static void test_command(void **state) {
    (void)state;
    char args[1200], out[8192];
    snprintf(args, sizeof args, "canonical '%s/run' --set canonical.tolerance=0.1", tmp);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    assert_non_null(strstr(out, "canonical law (2 active terms)"));
    assert_non_null(strstr(out, "where\nu1 = "));
    char *cfg = run_file("config.json");
    assert_non_null(strstr(cfg, "\"tolerance\":\t0.1"));
    free(cfg);
    /* the forecast choice (sparse/canonical_select.h): each equation of the rotation has one term,
     * which it must keep, so the law stays; equations.json says what the choice did */
    snprintf(args, sizeof args, "canonical '%s/run' --set canonical.choose=forecast --quiet", tmp);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    cfg = run_file("config.json");
    assert_non_null(strstr(cfg, "\"choose\":\t\"forecast\""));
    free(cfg);
    char *eq = run_file("equations.json");
    cJSON *ej = cJSON_Parse(eq);
    free(eq);
    assert_non_null(ej);
    const cJSON *fc = cJSON_GetObjectItem(cJSON_GetObjectItem(ej, "canonical"), "forecast_choice");
    assert_non_null(fc);
    assert_true(cJSON_IsFalse(cJSON_GetObjectItem(fc, "changed")));
    assert_int_equal(cJSON_GetObjectItem(fc, "terms_before")->valueint, 2);
    assert_true(cJSON_GetObjectItem(fc, "score")->valuedouble > 0);
    const cJSON *fit = cJSON_GetObjectItem(cJSON_GetObjectItem(ej, "canonical"), "fit");
    assert_int_equal(cJSON_GetObjectItem(fit, "active")->valueint, 2);
    cJSON_Delete(ej);
    static const struct {
        const char *args, *msg;
    } bad[] = {
        {"canonical '%s/run' --set train.epochs=5", "only canonical.* keys may change here"},
        {"canonical '%s/run' --set canonical.cond_max=0.5", "canonical.cond_max: must be a number >= 1"},
        {"canonical '%s/run' --set canonical.choose=best", "canonical.choose: must be one of fit, forecast, auto"},
        {"canonical '%s/nowhere'", "no such run folder"},
        {"canonical", "missing RUN_DIR"},
        {"canonical '%s/run' --bogus", "--bogus: unknown option"},
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        snprintf(args, sizeof args, bad[i].args, tmp);
        int rc = test_run_capture(args, out, sizeof out);
        if (rc != 2 || !strstr(out, bad[i].msg)) fail_msg("%s: exit %d, '%s'", args, rc, out);
    }
    /* --opt=value is --opt value */
    snprintf(args, sizeof args, "canonical '%s/run' --set=canonical.cond_max=900 --quiet", tmp);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    cfg = run_file("config.json");
    assert_non_null(strstr(cfg, "\"cond_max\":\t900"));
    free(cfg);
    assert_int_equal(test_run_capture("canonical --help", out, sizeof out), 0);
    assert_non_null(strstr(out, "usage: framelaw canonical RUN_DIR"));
}

/* `framelaw canonical RUN --refine 15`: the reference (the canonical two-term rotation) trains on
 * with its mask fixed; leaving out either term cannot fit a rotation (one coupling alone has no
 * oscillation: both eigenvalues 0), so no sparser candidate is accepted, the refined law keeps both
 * terms, and their product is still -w^2 (within 3%). refine.json lists every candidate; the kept
 * model is the one with the lower validation loss; RUN/refine (the candidates' folders) is gone and
 * RUN/refined is a run folder with its results. */
static void test_refine(void **state) {
    (void)state;
    char args[1200], out[16384];
    snprintf(args, sizeof args, "canonical '%s/run' --refine 15", tmp);
    int rc = test_run_capture(args, out, sizeof out);
    if (rc) fail_msg("canonical --refine exited %d:\n%s", rc, out);
    assert_non_null(strstr(out, "refinement: 3 candidates of 15 epochs; the law kept has 2 terms"));
    char *txt = run_file("refine.json");
    cJSON *root = cJSON_Parse(txt);
    assert_non_null(root);
    cJSON *cands = cJSON_GetObjectItem(root, "candidates");
    assert_int_equal(cJSON_GetArraySize(cands), 3);
    double e_ref = cJSON_GetObjectItem(cJSON_GetArrayItem(cands, 0), "residual")->valuedouble;
    double tol = cJSON_GetObjectItem(root, "tolerance")->valuedouble;
    for (int i = 1; i < 3; i++) {
        cJSON *c = cJSON_GetArrayItem(cands, i);
        assert_int_equal(cJSON_GetObjectItem(c, "active")->valueint, 1);
        assert_true(cJSON_IsFalse(cJSON_GetObjectItem(c, "accepted")));
        assert_true(cJSON_GetObjectItem(c, "residual")->valuedouble > (1 + tol) * e_ref);
    }
    assert_int_equal(cJSON_GetObjectItem(root, "chosen")->valueint, 0);
    double vr = cJSON_GetObjectItem(cJSON_GetArrayItem(cands, 0), "validation")->valuedouble;
    double vl = cJSON_GetObjectItem(root, "learned_validation")->valuedouble;
    assert_string_equal(cJSON_GetObjectItem(root, "kept")->valuestring, vr < vl ? "refined" : "learned");
    cJSON_Delete(root);
    free(txt);
    char path[600];
    snprintf(path, sizeof path, "%s/run/refine", tmp);
    assert_int_equal(access(path, F_OK), -1);
    txt = run_file("refined/equations.json");
    root = cJSON_Parse(txt);
    assert_non_null(root);
    double prod = 1;
    int n = 0;
    cJSON *eq;
    cJSON_ArrayForEach(eq, cJSON_GetObjectItem(root, "equations")) {
        cJSON *co = cJSON_GetObjectItem(eq, "coefficients"), *v;
        cJSON_ArrayForEach(v, co) if (v->valuedouble != 0) prod *= v->valuedouble, n++;
    }
    assert_int_equal(n, 2);
    double w = sqrt(-prod);
    if (!(fabs(w - W_OSC) < 0.03 * W_OSC)) fail_msg("refined frequency %g, expected %g", w, W_OSC);
    cJSON_Delete(root);
    free(txt);
    char *f = run_file("refined/forecast.json");
    free(f);
    static const char *bad[] = {"--refine 0", "--refine x", "--refine"};
    for (int i = 0; i < 3; i++) {
        snprintf(args, sizeof args, "canonical '%s/run' %s", tmp, bad[i]);
        rc = test_run_capture(args, out, sizeof out);
        if (rc != 2 || !strstr(out, "--refine needs a number of epochs")) fail_msg("%s: exit %d, '%s'", args, rc, out);
    }
}

/* Ctrl-C during a refinement: exit 130 (128 + SIGINT, as shells expect), its work folder RUN/refine
 * removed, and the refinement kept from before (test_refine's RUN/refined, refine.json) untouched. */
static void test_refine_stopped(void **state) {
    (void)state;
    char run[600], work[700];
    snprintf(run, sizeof run, "%s/run", tmp);
    snprintf(work, sizeof work, "%s/refine", run);
    char *before_eq = run_file("refined/equations.json"), *before_json = run_file("refine.json");
    pid_t pid = test_spawn_quiet("canonical", run, "--refine", "1000000", "--quiet", (char *)NULL);
    int started = 0;
    for (int i = 0; i < 600 && !started; i++) { /* up to a minute for the refinement to begin */
        struct timespec ts = {0, 100000000};
        nanosleep(&ts, NULL);
        started = access(work, F_OK) == 0;
    }
    assert_true(started);
    struct timespec ts = {0, 300000000};
    nanosleep(&ts, NULL);
    kill(pid, SIGINT);
    int ws;
    assert_int_equal(waitpid(pid, &ws, 0), pid);
    assert_true(WIFEXITED(ws));
    assert_int_equal(WEXITSTATUS(ws), 128 + SIGINT);
    assert_int_equal(access(work, F_OK), -1);
    char *after_eq = run_file("refined/equations.json"), *after_json = run_file("refine.json");
    assert_string_equal(before_eq, after_eq);
    assert_string_equal(before_json, after_json);
    free(before_eq), free(after_eq), free(before_json), free(after_json);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_found_in_training),
        cmocka_unit_test(test_trajectory_columns),
        cmocka_unit_test(test_command),
        cmocka_unit_test(test_refine),
        cmocka_unit_test(test_refine_stopped),
    };
    return cmocka_run_group_tests_name("canonical form in a run", tests, setup, teardown);
}
