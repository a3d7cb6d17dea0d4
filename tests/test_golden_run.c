/* tests/test_golden_run.c: two short runs through the binary whose equations.json must stay the same
 * bytes as the fixtures in tests/reference/golden/, written by the build before io/ moved into
 * sub-folders. A change that is meant to change no behaviour (a move, a de-duplication) must pass it
 * unchanged; a change that is meant to change training results re-records the fixtures and says why
 * in its commit (GOLDEN_WRITE=1 build/tests/test_golden_run records them). Re-recorded when the
 * texts in the JSON took the digits of equations.txt (4, was 6), and for the equations JSON version 2
 * (products written with '*', "multipliers"): every number as before, only "digits", the version,
 * those names and the texts changed. Re-recorded when the ensemble object gained "fit" (how its
 * members were fitted): one line more, every number as before. The lantern's re-recorded when latent
 * mode took each distinct frame of a batch once with shuffled samples too (2026-12-05): the gradient
 * sums over a frame's windows in another order, so the last bits differ; every coefficient of the
 * law as before to 3 or 4 digits.
 *
 * The runs cover both derivative modes and every start-up: an image run (the lantern demo at 20 px,
 * Isomap start, derivatives in latent space, loss.normalize) and a numeric run (CSV recordings of a
 * linear oscillator seen through 16 channels, PCA start, tangents, the warm-up and its least-squares
 * fit). One thread, so the bits do not depend on the machine's core count; OpenBLAS's Haswell kernels
 * (OPENBLAS_CORETYPE, set below), so they do not depend on the kernels OpenBLAS would pick for the
 * processor (Haswell, SkylakeX, Cooperlake and Zen kernels give different last bits, and so different
 * laws after a few hundred steps; the fixtures were recorded once with Cooperlake kernels, re-recorded
 * with Haswell kernels when they were pinned). Machines without AVX2 and FMA skip the test. The configs name every key
 * whose default changed with the template of round 2 (docs/battery.md), at its earlier value, so
 * that change of defaults left the fixtures as they were; likewise train.run_length 1 (single samples, the
 * default until runs of 16 became it). This is a regression check
 * of our own output (no outside reference: what it guards is "the same as before"). */
#include <sys/stat.h>

#include "tests/testutil.h"

#define GOLDEN_DIR "tests/reference/golden"

static const char LANTERN_CFG[] =
    "{\"data\": {\"frames\": \"%s/data\", \"fps\": 30, \"derivative\": {\"method\": \"savgol\", \"window\": 7, "
    "\"degree\": 3}, \"validation\": {\"last\": 1}},\n"
    " \"model\": {\"latent\": 1, \"order\": 2, \"encoder\": [16, 8], \"activation\": \"sigmoid\", \"init\": \"isomap\", "
    "\"derivatives\": \"latent\", \"init_epochs\": 20},\n"
    " \"library\": {\"degree\": 3, \"trig\": true},\n"
    " \"loss\": {\"l1\": 1e-4, \"normalize\": true},\n"
    " \"train\": {\"epochs\": 40, \"batch\": 64, \"run_length\": 1, \"threads\": 1, \"validate_every\": 10, \"warmup_epochs\": 0},\n"
    " \"threshold\": {\"value\": 0.002, \"measure\": \"coefficient\", \"select\": \"none\", \"every\": 10, "
    "\"refine_epochs\": 10},\n"
    " \"checkpoint\": {\"every\": 20, \"keep\": 2},\n"
    " \"output\": \"%s/run\"}\n";

static const char NUMERIC_CFG[] =
    "{\"data\": {\"frames\": \"%s/data\", \"fps\": 30, \"derivative\": {\"method\": \"central\"}},\n"
    " \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [16], \"activation\": \"tanh\", \"init\": \"pca\", "
    "\"derivatives\": \"frames\"},\n"
    " \"library\": {\"degree\": 2, \"trig\": false},\n"
    " \"loss\": {\"dx\": 0.1, \"dz\": 1, \"l1\": 1e-3, \"normalize\": false},\n"
    " \"train\": {\"batch\": 32, \"run_length\": 1, \"epochs\": 60, \"threads\": 1, \"validate_every\": 5, \"warmup_epochs\": 20, "
    "\"warmup_fit\": true},\n"
    " \"threshold\": {\"value\": 0.05, \"measure\": \"coefficient\", \"select\": \"none\", \"every\": 10, "
    "\"refine_epochs\": 10},\n"
    " \"checkpoint\": {\"every\": 25, \"keep\": 2},\n"
    " \"output\": \"%s/run\"}\n";

/* A linear oscillator (w = 2 rad/s) seen through 16 fixed channels, 4 CSV recordings. */
static void write_numeric(const char *dir) {
    for (int k = 0; k < 4; k++) {
        char path[600];
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
}

static void golden(const char *name, const char *cfg_fmt, int image) {
    char tmp[256], dir[512], cfg[4096], path[600], out[8192], args[1200];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(dir, sizeof dir, "%s/data", tmp);
    if (image) {
        snprintf(args, sizeof args, "demo lantern '%s' --size 20 --recordings 3 --frames 60 --noise 0.01", dir);
        assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    } else {
        assert_int_equal(mkdir(dir, 0777), 0);
        write_numeric(dir);
    }
    snprintf(cfg, sizeof cfg, cfg_fmt, tmp, tmp);
    snprintf(path, sizeof path, "%s/config.json", tmp);
    test_write_file(path, cfg);
    snprintf(args, sizeof args, "train '%s'", path);
    int rc = test_run_capture(args, out, sizeof out);
    if (rc != 0) fail_msg("train exited %d:\n%s", rc, out);
    snprintf(path, sizeof path, "%s/run/equations.json", tmp);
    char *got = test_slurp(path);
    assert_non_null(got);
    char fixture[256];
    snprintf(fixture, sizeof fixture, GOLDEN_DIR "/%s-equations.json", name);
    if (getenv("GOLDEN_WRITE")) {
        test_write_file(fixture, got);
        fprintf(stderr, "recorded %s\n", fixture);
    } else {
        char *want = test_slurp(fixture);
        if (!want) fail_msg("%s: missing (run from the repository root)", fixture);
        if (strcmp(got, want)) fail_msg("%s differs from this build's run:\n%s", fixture, got);
        free(want);
    }
    free(got);
    test_rmtree(tmp);
}

static void test_lantern_isomap_latent(void **state) {
    (void)state;
    golden("lantern-isomap-latent", LANTERN_CFG, 1);
}

static void test_numeric_pca_warmup(void **state) {
    (void)state;
    golden("numeric-pca-warmup", NUMERIC_CFG, 0);
}

int main(void) {
#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
    if (!__builtin_cpu_supports("avx2") || !__builtin_cpu_supports("fma")) {
        fprintf(stderr, "test_golden_run: skipped (OpenBLAS's Haswell kernels need AVX2 and FMA)\n");
        return 0;
    }
    setenv("OPENBLAS_CORETYPE", "Haswell", 1); /* read by the framelaw processes the tests start */
#else
    fprintf(stderr, "test_golden_run: skipped (the fixtures are x86-64 OpenBLAS Haswell-kernel bits)\n");
    return 0;
#endif
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_lantern_isomap_latent),
        cmocka_unit_test(test_numeric_pca_warmup),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
