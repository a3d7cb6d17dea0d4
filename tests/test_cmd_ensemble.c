/* tests/test_cmd_ensemble.c: the ensemble of a trained run through the binary: `framelaw train`
 * writes it into equations.json and the forecasts' bands into forecast.json and forecast/<rec>.csv;
 * `framelaw ensemble RUN_DIR` writes the same bytes again (a function of the final model, the data
 * and the seed); bad settings and a run without a finished model exit 2 naming the key or saying
 * what to do. The data: a linear oscillator (w = 2 rad/s) seen through 16 fixed channels, 4 CSV
 * recordings (our own, as in tests/test_golden_run.c). The method itself is checked against outside
 * values in tests/test_ensemble.c. */
#include <sys/stat.h>

#include <cjson/cJSON.h>

#include "io/run/runensemble.h"
#include "tests/testutil.h"

static const char CFG[] =
    "{\"data\": {\"frames\": \"%s/data\", \"fps\": 30, \"derivative\": {\"method\": \"central\"}},\n"
    " \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [16], \"activation\": \"tanh\", \"init\": \"pca\", "
    "\"derivatives\": \"frames\"},\n"
    " \"library\": {\"degree\": 2, \"trig\": false},\n"
    " \"loss\": {\"l1\": 1e-3, \"normalize\": false},\n"
    " \"train\": {\"batch\": 32, \"epochs\": 60, \"threads\": 1, \"validate_every\": 5, \"warmup_epochs\": 20},\n"
    " \"threshold\": {\"value\": 0.05, \"measure\": \"coefficient\", \"select\": \"none\", \"every\": 10, "
    "\"refine_epochs\": 10},\n"
    " \"checkpoint\": {\"every\": 25, \"keep\": 2},\n"
    " \"output\": \"%s/run\"}\n";

static char tmp[256];

static int setup(void **state) {
    (void)state;
    char dir[512], cfg[4096], path[600], out[16384];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(dir, sizeof dir, "%s/data", tmp);
    assert_int_equal(mkdir(dir, 0777), 0);
    for (int k = 0; k < 4; k++) {
        snprintf(path, sizeof path, "%s/rec%d.csv", dir, k);
        FILE *f = fopen(path, "w");
        assert_non_null(f);
        for (int i = 0; i < 120; i++) {
            double t = i / 30.0, a = 0.5 + 0.1 * k, z0 = a * sin(2 * t + k), z1 = a * cos(2 * t + k);
            for (int c = 0; c < 16; c++) fprintf(f, "%s%.9g", c ? "," : "", sin(c + 1.0) * z0 + cos(2.0 * c + 1) * z1);
            fputc('\n', f);
        }
        fclose(f);
    }
    snprintf(cfg, sizeof cfg, CFG, tmp, tmp);
    snprintf(path, sizeof path, "%s/config.json", tmp);
    test_write_file(path, cfg);
    char args[1200];
    snprintf(args, sizeof args, "train '%s'", path);
    int rc = test_run_capture(args, out, sizeof out);
    if (rc != 0) fail_msg("train exited %d:\n%s", rc, out);
    if (!strstr(out, "ensemble: 100 members")) fail_msg("train did not report the ensemble:\n%s", out);
    return 0;
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

/* equations.json: the ensemble object with its settings, one entry per equation with per-term
 * arrays as long as "terms", probabilities in [0, 1], low <= median <= high. */
static void test_equations_json(void **state) {
    (void)state;
    char *txt = run_file("equations.json");
    cJSON *root = cJSON_Parse(txt);
    assert_non_null(root);
    int T = cJSON_GetArraySize(cJSON_GetObjectItem(root, "terms"));
    assert_int_equal(T, 6); /* 1, z1, z2, z1^2, z1*z2, z2^2 */
    cJSON *e = cJSON_GetObjectItem(root, "ensemble");
    assert_non_null(e);
    assert_int_equal(cJSON_GetObjectItem(e, "members")->valueint, 100);
    assert_int_equal(cJSON_GetObjectItem(e, "block")->valueint, 10); /* central differences: the automatic 10 */
    assert_true(cJSON_GetObjectItem(e, "inclusion_threshold")->valuedouble == 0.5);
    assert_true(cJSON_GetObjectItem(e, "seed")->valuedouble == 1);
    assert_true(cJSON_IsFalse(cJSON_GetObjectItem(e, "library_bagging")));
    /* 3 training recordings of 120 frames, less the stencil's end frames */
    assert_int_equal(cJSON_GetObjectItem(e, "samples")->valueint, 3 * 118);
    cJSON *eqs = cJSON_GetObjectItem(e, "equations");
    assert_int_equal(cJSON_GetArraySize(eqs), 2);
    cJSON *q;
    cJSON_ArrayForEach(q, eqs) {
        cJSON *p = cJSON_GetObjectItem(q, "inclusion"), *m = cJSON_GetObjectItem(q, "median"),
              *lo = cJSON_GetObjectItem(q, "low"), *hi = cJSON_GetObjectItem(q, "high"),
              *c = cJSON_GetObjectItem(q, "coefficients"), *mk = cJSON_GetObjectItem(q, "mask");
        assert_int_equal(cJSON_GetArraySize(p), T);
        assert_int_equal(cJSON_GetArraySize(c), T);
        assert_non_null(cJSON_GetObjectItem(q, "text"));
        for (int t = 0; t < T; t++) {
            double pv = cJSON_GetArrayItem(p, t)->valuedouble;
            assert_true(pv >= 0 && pv <= 1);
            double l = cJSON_GetArrayItem(lo, t)->valuedouble, md = cJSON_GetArrayItem(m, t)->valuedouble,
                   h = cJSON_GetArrayItem(hi, t)->valuedouble;
            assert_true(l <= md && md <= h);
            /* the ensemble law holds exactly the terms at or above the inclusion threshold */
            assert_int_equal(cJSON_GetArrayItem(mk, t)->valueint, pv >= 0.5);
        }
    }
    cJSON_Delete(root);
    free(txt);
}

/* forecast.json: a band per held-out recording; forecast/<rec>.csv: the band columns, the median
 * inside the band. */
static void test_forecast_bands(void **state) {
    (void)state;
    char *txt = run_file("forecast.json");
    cJSON *root = cJSON_Parse(txt);
    assert_non_null(root);
    cJSON *recs = cJSON_GetObjectItem(root, "recordings");
    assert_int_equal(cJSON_GetArraySize(recs), 1);
    cJSON *band = cJSON_GetObjectItem(cJSON_GetArrayItem(recs, 0), "band");
    assert_non_null(band);
    assert_int_equal(cJSON_GetObjectItem(band, "members")->valueint, 100);
    assert_non_null(cJSON_GetObjectItem(band, "width_exceeds_bound_at"));
    const char *name = cJSON_GetObjectItem(cJSON_GetArrayItem(recs, 0), "name")->valuestring;
    char rel[300];
    snprintf(rel, sizeof rel, "forecast/%s.csv", name);
    cJSON_Delete(root);
    free(txt);
    char *csv = run_file(rel);
    char *nl = strchr(csv, '\n');
    assert_non_null(nl);
    *nl = 0;
    assert_non_null(strstr(csv, ",band_median1,band_low1,band_high1,band_median2,band_low2,band_high2,band_width"));
    /* columns: t,error,latent_error,z1,z2,zhat1,zhat2,outside, then the band */
    int rows = 0;
    for (char *line = nl + 1, *end; (end = strchr(line, '\n')); line = end + 1, rows++) {
        *end = 0;
        double v[16];
        int n = 0;
        for (char *f = line; n < 16; n++) {
            v[n] = strtod(f, NULL);
            char *comma = strchr(f, ',');
            if (!comma) {
                n++;
                break;
            }
            f = comma + 1;
        }
        assert_int_equal(n, 15);
        for (int j = 0; j < 2; j++) {
            double med = v[8 + 3 * j], lo = v[9 + 3 * j], hi = v[10 + 3 * j];
            if (isfinite(lo) && isfinite(hi) && isfinite(med)) assert_true(lo <= med && med <= hi);
        }
        if (rows == 0) assert_true(v[14] == 0); /* every member starts from the same state */
    }
    assert_true(rows > 100);
    free(csv);
}

/* The on-demand command writes the same bytes as the end of training. */
static void test_on_demand_same_bytes(void **state) {
    (void)state;
    char *eq0 = run_file("equations.json"), *fc0 = run_file("forecast.json"), out[16384], args[700];
    snprintf(args, sizeof args, "ensemble '%s/run'", tmp);
    int rc = test_run_capture(args, out, sizeof out);
    if (rc) fail_msg("ensemble exited %d:\n%s", rc, out);
    assert_non_null(strstr(out, "inclusion probability"));
    assert_non_null(strstr(out, "ensemble law"));
    char *eq1 = run_file("equations.json"), *fc1 = run_file("forecast.json");
    assert_string_equal(eq0, eq1);
    assert_string_equal(fc0, fc1);
    free(eq0), free(eq1), free(fc0), free(fc1);
}

static void expect_exit2(const char *args_fmt, const char *word) {
    char args[1200], out[16384];
    snprintf(args, sizeof args, args_fmt, tmp);
    int rc = test_run_capture(args, out, sizeof out);
    if (rc != 2) fail_msg("framelaw %s: exit %d, expected 2:\n%s", args, rc, out);
    if (!strstr(out, word)) fail_msg("framelaw %s: the message does not say '%s':\n%s", args, word, out);
}

static void test_bad_input(void **state) {
    (void)state;
    expect_exit2("ensemble '%s/run' --set ensemble.members=0", "ensemble.members");
    expect_exit2("ensemble '%s/run' --set ensemble.inclusion=0", "ensemble.inclusion");
    expect_exit2("ensemble '%s/run' --set ensemble.inclusion=1.5", "ensemble.inclusion");
    expect_exit2("ensemble '%s/run' --set ensemble.drop_fraction=1", "ensemble.drop_fraction");
    expect_exit2("ensemble '%s/run' --set ensemble.block=119", "ensemble.block"); /* runs are 118 samples */
    expect_exit2("ensemble '%s/run' --set ensemble.block_seconds=10", "ensemble.block_seconds");
    expect_exit2("ensemble '%s/run' --set train.epochs=5", "only ensemble.");
    expect_exit2("ensemble '%s/nothing-here'", "nothing-here");
    expect_exit2("ensemble '%s/data'", "data"); /* a folder that is not a run */
    expect_exit2("ensemble", "RUN_DIR");
    /* none of these changed the run's config */
    char *cfg = run_file("config.json");
    assert_non_null(strstr(cfg, "\"members\":\t100"));
    assert_non_null(strstr(cfg, "\"block_seconds\":\t0,"));
    assert_non_null(strstr(cfg, "\"inclusion\":\t0.5,"));
    free(cfg);
}

/* A run whose config asks for more epochs than the log holds has no finished model: exit 2 with the
 * command that finishes it. */
static void test_unfinished(void **state) {
    (void)state;
    char path[600];
    snprintf(path, sizeof path, "%s/run/config.json", tmp);
    char *cfg = test_slurp(path), *keep = strdup(cfg);
    char *p = strstr(cfg, "\"epochs\":\t60");
    assert_non_null(p);
    memcpy(p, "\"epochs\":\t90", 12);
    test_write_file(path, cfg);
    expect_exit2("ensemble '%s/run'", "framelaw resume");
    test_write_file(path, keep);
    free(cfg), free(keep);
}

/* --set stores the setting: fewer members, and the bands use at most that many. */
static void test_set_members(void **state) {
    (void)state;
    char args[700], out[16384];
    snprintf(args, sizeof args, "ensemble '%s/run' --quiet --set ensemble.members=20 --set ensemble.library_bagging=true", tmp);
    int rc = test_run_capture(args, out, sizeof out);
    if (rc) fail_msg("exit %d:\n%s", rc, out);
    assert_string_equal(out, ""); /* --quiet */
    char *eq = run_file("equations.json"), *fc = run_file("forecast.json"), *cfg = run_file("config.json");
    cJSON *root = cJSON_Parse(eq), *e = cJSON_GetObjectItem(root, "ensemble");
    assert_int_equal(cJSON_GetObjectItem(e, "members")->valueint, 20);
    assert_true(cJSON_IsTrue(cJSON_GetObjectItem(e, "library_bagging")));
    assert_true(cJSON_GetObjectItem(e, "drop_fraction")->valuedouble == 0.2);
    assert_non_null(strstr(fc, "\"members\":\t20"));
    assert_non_null(strstr(cfg, "\"members\":\t20"));
    cJSON_Delete(root);
    free(eq), free(fc), free(cfg);
}

/* ensemble.method: the run trains with threshold.select none, so auto fits the members by
 * thresholding; selection bags the forecast-scored selection and says so in equations.json (the
 * pool, the segments, how many members chose the trained law) and in the term table (with a note
 * when fewer than half chose it); library bagging with selection and a
 * pool of 0 laws exit 2 naming the key. */
static void test_method(void **state) {
    (void)state;
    char args[800], out[16384];
    snprintf(args, sizeof args,
             "ensemble '%s/run' --set ensemble.method=selection --set ensemble.library_bagging=false "
             "--set ensemble.candidates=5 --set ensemble.members=12",
             tmp);
    int rc = test_run_capture(args, out, sizeof out);
    if (rc) fail_msg("exit %d:\n%s", rc, out);
    char *eq = run_file("equations.json");
    cJSON *root = cJSON_Parse(eq), *e = cJSON_GetObjectItem(root, "ensemble");
    assert_string_equal(cJSON_GetObjectItem(e, "fit")->valuestring, "selection");
    int cand = cJSON_GetObjectItem(e, "candidates")->valueint, chose = cJSON_GetObjectItem(e, "chose_trained_law")->valueint;
    assert_true(cand >= 1 && cand <= 6); /* the 5 best of the path, and the trained law if not among them */
    assert_true(chose >= 0 && chose <= 12);
    /* the term table says so when fewer than half of the members chose the trained law */
    assert_true((strstr(out, "fewer than half of the members chose the trained law") != NULL) == (2 * chose < 12));
    char want[64];
    snprintf(want, sizeof want, "(%d of 12 chose the trained law)", chose);
    assert_non_null(strstr(out, want));
    assert_null(strstr(out, "blocks of")); /* one header, the selection's */
    /* three periods (3 pi s) are longer than the recordings (4 s), so each training recording is one
     * segment of its whole length */
    int segs = cJSON_GetObjectItem(e, "segments")->valueint;
    assert_true(segs >= 2 && segs <= 4);
    assert_int_equal(cJSON_GetObjectItem(e, "block")->valueint, 118);
    assert_null(cJSON_GetObjectItem(e, "threshold"));
    cJSON_Delete(root);
    free(eq);
    snprintf(args, sizeof args, "ensemble '%s/run' --quiet --set ensemble.method=auto", tmp);
    rc = test_run_capture(args, out, sizeof out);
    if (rc) fail_msg("exit %d:\n%s", rc, out);
    eq = run_file("equations.json");
    root = cJSON_Parse(eq), e = cJSON_GetObjectItem(root, "ensemble");
    assert_string_equal(cJSON_GetObjectItem(e, "fit")->valuestring, "thresholding");
    assert_non_null(cJSON_GetObjectItem(e, "threshold"));
    cJSON_Delete(root);
    free(eq);
    expect_exit2("ensemble '%s/run' --set ensemble.method=selection --set ensemble.library_bagging=true",
                 "ensemble.library_bagging");
    expect_exit2("ensemble '%s/run' --set ensemble.candidates=0", "ensemble.candidates");
    expect_exit2("ensemble '%s/run' --set ensemble.method=vote", "ensemble.method");
}

/* The term table's header, alone: with members by selection it counts the members that chose the
 * trained law and warns under it when fewer than half did; with thresholding it names the block.
 * One header line either way. */
static void test_header(void **state) {
    (void)state;
    RunEnsemble re;
    memset(&re, 0, sizeof re);
    re.by_selection = 1;
    re.e.members = 10;
    re.e.bag.horizon = 58;
    int agree[3] = {10, 5, 4}, warned[3] = {0, 0, 1};
    for (int k = 0; k < 3; k++) {
        re.e.bag.agree_extra = agree[k];
        char *buf = NULL;
        size_t n = 0;
        FILE *f = open_memstream(&buf, &n);
        assert_non_null(f);
        run_ensemble_print_header(f, &re);
        fclose(f);
        char want[64];
        snprintf(want, sizeof want, "(%d of 10 chose the trained law)", agree[k]);
        assert_non_null(strstr(buf, want));
        assert_int_equal(strstr(buf, "fewer than half") != NULL, warned[k]);
        assert_null(strstr(buf, "blocks of"));
        free(buf);
    }
    re.by_selection = 0;
    re.opt.block = 18;
    char *buf = NULL;
    size_t n = 0;
    FILE *f = open_memstream(&buf, &n);
    run_ensemble_print_header(f, &re);
    fclose(f);
    assert_non_null(strstr(buf, "blocks of 18 samples"));
    assert_null(strstr(buf, "chose"));
    free(buf);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_equations_json),
        cmocka_unit_test(test_forecast_bands),
        cmocka_unit_test(test_on_demand_same_bytes),
        cmocka_unit_test(test_bad_input),
        cmocka_unit_test(test_unfinished),
        cmocka_unit_test(test_set_members),
        cmocka_unit_test(test_method),
        cmocka_unit_test(test_header),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
