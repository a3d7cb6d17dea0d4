/* tests/test_results.c: `framelaw export` and `framelaw forecast` on a run whose model is set by
 * hand, so that the exact answer is known.
 *
 * Data: two-channel recordings of the harmonic oscillator x = (A sin(w t + p), A cos(w t + p)),
 * whose exact law is dx1/dt = w x2, dx2/dt = -w x1 (common practice: the harmonic oscillator). The
 * model: identity encoder and decoder (no hidden layer, W = I, b = 0) and Xi holding that law. A
 * forecast from the first frame must then follow the real frames to the integrator's tolerance. */
#include <sys/stat.h>
#include <unistd.h>
#include <sys/wait.h>

#include <cjson/cJSON.h>

#include "io/run/checkpoint.h"
#include "io/data/images.h"
#include "io/run/config.h"
#include "io/run/rundata.h"
#include "io/data/series.h"
#include "io/run/train.h"
#include "tests/testutil.h"

#define W_OSC 2.0
enum { NT = 150 };

static const double AMP[3] = {0.5, 0.4, 0.8}; /* rec0 trains; rec1 (inside) and rec2 (outside) are held out */

static void write_rec(const char *dir, int k) {
    char path[600];
    snprintf(path, sizeof path, "%s/rec%d.csv", dir, k);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    for (int i = 0; i < NT; i++) {
        double t = i / 30.0;
        fprintf(f, "%.17g,%.17g\n", AMP[k] * sin(W_OSC * t + k), AMP[k] * cos(W_OSC * t + k));
    }
    fclose(f);
}

static int run(const char *cmd, const char *dir) {
    char line[1200];
    snprintf(line, sizeof line, "'%s' %s '%s' >/dev/null 2>&1", test_framelaw(), cmd, dir);
    int ws = system(line);
    return WIFEXITED(ws) ? WEXITSTATUS(ws) : -1;
}

typedef struct {
    char root[256], run[512], data[512];
} Fx;

/* The run folder: config.json, and one checkpoint holding the hand-set model; with `latent`, the
 * config asks for derivatives in latent space (model.derivatives). */
static int setup_mode(void **state, int latent) {
    Fx *fx = calloc(1, sizeof *fx);
    assert_non_null(test_tmpdir(fx->root, sizeof fx->root));
    snprintf(fx->data, sizeof fx->data, "%s/data", fx->root);
    snprintf(fx->run, sizeof fx->run, "%s/run", fx->root);
    assert_int_equal(mkdir(fx->data, 0777), 0);
    assert_int_equal(mkdir(fx->run, 0777), 0);
    for (int k = 0; k < 3; k++) write_rec(fx->data, k);
    Config *c = malloc(sizeof *c);
    config_defaults(c);
    snprintf(c->frames, sizeof c->frames, "%s", fx->data);
    snprintf(c->output, sizeof c->output, "%s", fx->run);
    c->latent = 2;
    c->order = 1;
    c->n_encoder = 0;
    c->n_decoder = -1;
    c->lib_degree = 1;
    c->lib_constant = 0;
    c->n_val_names = 2;
    snprintf(c->val_names[0], CFG_NAME_MAX, "rec1");
    snprintf(c->val_names[1], CFG_NAME_MAX, "rec2");
    c->epochs = 10;
    c->refine_epochs = 1;
    /* a linear library and none of the image levers (the defaults before the template of round 2) */
    c->lib_trig = 0;
    c->loss_normalize = 0;
    c->init = INIT_GLOROT;
    c->derivatives = DERIVS_FRAMES;
    c->derivative = DERIV_CENTRAL;
    c->threshold_measure = MEASURE_COEFFICIENT;
    c->threshold_select = SELECT_NONE;
    if (latent) {
        c->derivatives = DERIVS_LATENT;
        c->loss_normalize = 1; /* required with latent derivatives */
    }
    char path[700];
    snprintf(path, sizeof path, "%s/config.json", fx->run);
    char *json = config_to_json(c);
    FILE *f = fopen(path, "w");
    fputs(json, f);
    fclose(f);
    free(json);

    Status st;
    RunData d;
    assert_int_equal(rundata_open(&d, c, &st), 0);
    ModelSpec sp;
    assert_int_equal(model_spec_from_config(c, (int)d.ds.n, &sp, &st), 0);
    Model m;
    ParamSet ps;
    params_init(&ps);
    assert_int_equal(model_init(&m, &ps, &sp, &st), 0);
    params_alloc(&ps);
    assert_int_equal(m.lib.n_terms, 2); /* z1, z2 */
    Mat e = params_val(&ps, m.enc.W[0]), dw = params_val(&ps, m.dec.W[0]), xi = params_val(&ps, m.xi);
    e.d[0] = e.d[3] = dw.d[0] = dw.d[3] = 1.0f;
    xi.d[1 * 2 + 0] = (float)W_OSC;  /* dz1/dt = w z2 */
    xi.d[0 * 2 + 1] = (float)-W_OSC; /* dz2/dt = -w z1 */
    long n_train = d.td.n_train;
    long *order = malloc((size_t)n_train * sizeof *order);
    for (long i = 0; i < n_train; i++) order[i] = i;
    CkptMeta meta = {0}; /* values a real run can have written (ckpt_read checks them) */
    meta.config_digest = config_digest(c);
    meta.epoch = c->epochs;
    meta.best_val = INFINITY;
    meta.best_epoch = -1;
    rng_seed(&meta.rng, 1);
    ps.step = 1;
    snprintf(path, sizeof path, "%s/checkpoints", fx->run);
    assert_int_equal(mkdir(path, 0777), 0);
    snprintf(path, sizeof path, "%s/checkpoints/ckpt-00000010-000000.ckpt", fx->run);
    assert_int_equal(ckpt_write(path, &meta, &ps, m.mask, 4, order, n_train, &st), 0);
    free(order);
    model_free(&m);
    params_free(&ps);
    rundata_close(&d);
    free(c);
    *state = fx;
    return 0;
}

static int setup(void **state) { return setup_mode(state, 0); }
static int setup_latent(void **state) { return setup_mode(state, 1); }

static int teardown(void **state) {
    Fx *fx = *state;
    test_rmtree(fx->root);
    free(fx);
    return 0;
}

static const cJSON *rec_entry(const cJSON *root, const char *name) {
    const cJSON *e;
    cJSON_ArrayForEach(e, cJSON_GetObjectItem(root, "recordings")) {
        if (!strcmp(cJSON_GetObjectItem(e, "name")->valuestring, name)) return e;
    }
    return NULL;
}

/* The exact model forecasts its held-out recordings to the integrator's tolerance: dopri5 at
 * rtol 1e-8 over 5 s, plus float32 decoding (relative 6e-8): mean error below 1e-5. */
static void test_forecast_of_exact_model(void **state) {
    Fx *fx = *state;
    assert_int_equal(run("forecast", fx->run), 0);
    char path[700];
    snprintf(path, sizeof path, "%s/forecast.json", fx->run);
    char *txt = test_slurp(path);
    assert_non_null(txt);
    cJSON *root = cJSON_Parse(txt);
    assert_non_null(root);
    const cJSON *r1 = rec_entry(root, "rec1"), *r2 = rec_entry(root, "rec2");
    assert_non_null(r1);
    assert_non_null(r2);
    assert_true(cJSON_GetObjectItem(r1, "mean_error")->valuedouble < 1e-5);
    assert_true(cJSON_GetObjectItem(r1, "max_error")->valuedouble < 1e-5);
    assert_true(cJSON_GetObjectItem(r1, "latent_mean_error")->valuedouble < 1e-5);
    /* identity encoder and decoder: decoding the encoded frames gives them back (float32) */
    assert_true(cJSON_GetObjectItem(r1, "reconstruction_floor")->valuedouble < 1e-6);
    assert_true(cJSON_IsNull(cJSON_GetObjectItem(r1, "exceeds_bound_at")));
    /* rec1 (amplitude 0.4) stays inside the training box |z_i| <= 0.5; rec2 (0.8) leaves it */
    assert_true(cJSON_IsNull(cJSON_GetObjectItem(r1, "extrapolating_from")));
    assert_true(cJSON_IsNumber(cJSON_GetObjectItem(r2, "extrapolating_from")));
    assert_true(cJSON_GetObjectItem(r2, "mean_error")->valuedouble < 1e-5);
    assert_close(cJSON_GetObjectItem(r1, "duration")->valuedouble, (NT - 1) / 30.0, 1e-12, 0);
    /* the trivial law z' = 0 (holding the first state): the state moves on a circle of radius A, so
     * its distance from the start after a time tau is the chord 2 A |sin(w tau / 2)| (common
     * practice, elementary geometry), and |z| = A is the latent's root mean square: its mean error
     * over the frames tau = 0, 1/30, .. is the mean of 2 |sin(w tau / 2)|. The exact law beats it. */
    double chord = 0;
    for (int i = 0; i < NT - 1; i++) chord += 2 * fabs(sin(W_OSC * (i / 30.0) / 2));
    chord /= NT - 1;
    assert_close(cJSON_GetObjectItem(r1, "persistence_latent_mean_error")->valuedouble, chord, 1e-6, 0);
    assert_true(cJSON_IsTrue(cJSON_GetObjectItem(r1, "beats_persistence")));
    /* the start state was fitted to a window of 32 frames (149 frames forecast: a quarter is 37), and
     * with exact codes the fit keeps the exact start (the errors above stay below 1e-5) */
    assert_int_equal(cJSON_GetObjectItem(r1, "start_frames")->valueint, 32);
    cJSON_Delete(root);
    free(txt);
    /* the CSV has one row per frame after the first stencil sample */
    Series s;
    Status st;
    snprintf(path, sizeof path, "%s/forecast/rec1.csv", fx->run);
    assert_int_equal(series_read_csv(path, &s, &st), 0);
    assert_int_equal(s.rows, NT - 1);
    assert_close(s.d[0], 1 / 30.0, 1e-9, 0); /* first time: the first sample with a full stencil */
    series_free(&s);
}

/* Export: trajectories as CSV and .npy (read back by NumPy), equal to the known values. */
static void test_export_trajectories(void **state) {
    Fx *fx = *state;
    assert_int_equal(run("export", fx->run), 0);
    char npy[700], csv[700];
    snprintf(npy, sizeof npy, "%s/trajectories/rec0.npy", fx->run);
    snprintf(csv, sizeof csv, "%s/trajectories/rec0.csv", fx->run);
    /* NumPy (Debian python3-numpy) reads our .npy and finds the CSV's values */
    char cmd[1600];
    snprintf(cmd, sizeof cmd, "/usr/bin/python3 tests/reference/check_npy.py '%s' '%s'", npy, csv);
    assert_int_equal(system(cmd), 0);
    Series s;
    Status st;
    assert_int_equal(series_read_csv(csv, &s, &st), 0);
    assert_int_equal(s.cols, 7); /* t, z1, z2, dz1, dz2, model_dz1, model_dz2 */
    assert_int_equal(s.rows, NT - 2);
    for (long i = 0; i < s.rows; i++) {
        const double *row = s.d + i * 7;
        double t = row[0];
        assert_close(t, (i + 1) / 30.0, 1e-9, 0);
        assert_close(row[1], AMP[0] * sin(W_OSC * t), 1e-6, 0); /* identity encoder: z = x */
        assert_close(row[2], AMP[0] * cos(W_OSC * t), 1e-6, 0);
        /* central difference of second order: error h^2/6 |x'''| = (1/30)^2 / 6 * 0.5 * 8 < 8e-4 */
        assert_close(row[3], AMP[0] * W_OSC * cos(W_OSC * t), 8e-4, 0);
        assert_close(row[5], W_OSC * row[2], 1e-6, 0); /* the model's dz1/dt = w z2 */
        assert_close(row[6], -W_OSC * row[1], 1e-6, 0);
    }
    series_free(&s);
    char path[700];
    snprintf(path, sizeof path, "%s/region.json", fx->run);
    char *txt = test_slurp(path);
    assert_non_null(txt);
    cJSON *root = cJSON_Parse(txt);
    double zmax = cJSON_GetArrayItem(cJSON_GetObjectItem(root, "z_max"), 0)->valuedouble;
    assert_close(zmax, 0.5, 0, 1e-3); /* the training recording's amplitude */
    cJSON_Delete(root);
    free(txt);
    snprintf(path, sizeof path, "%s/equations.txt", fx->run);
    txt = test_slurp(path);
    assert_non_null(strstr(txt, "dz1/dt = 2*z2"));
    free(txt);
}

/* Derivatives in latent space: with the identity encoder the stencil applied to the codes is the
 * stencil applied to the frames, so the exported z' is the central difference of x, and the exact
 * model still forecasts the held-out recordings (the initial state's encoding goes through the
 * stencil's window of frames). Central difference error as above: < 8e-4. */
static void test_latent_derivatives(void **state) {
    Fx *fx = *state;
    assert_int_equal(run("export", fx->run), 0);
    char csv[700];
    snprintf(csv, sizeof csv, "%s/trajectories/rec0.csv", fx->run);
    Series s;
    Status st;
    assert_int_equal(series_read_csv(csv, &s, &st), 0);
    assert_int_equal(s.cols, 7);
    assert_int_equal(s.rows, NT - 2);
    for (long i = 0; i < s.rows; i++) {
        const double *row = s.d + i * 7;
        double t = row[0];
        assert_close(row[1], AMP[0] * sin(W_OSC * t), 1e-6, 0);
        assert_close(row[3], AMP[0] * W_OSC * cos(W_OSC * t), 8e-4, 0);
        assert_close(row[4], -AMP[0] * W_OSC * sin(W_OSC * t), 8e-4, 0);
    }
    series_free(&s);
    assert_int_equal(run("forecast", fx->run), 0);
    char path[700];
    snprintf(path, sizeof path, "%s/forecast.json", fx->run);
    char *txt = test_slurp(path);
    assert_non_null(txt);
    cJSON *root = cJSON_Parse(txt);
    const cJSON *e = rec_entry(root, "rec1");
    assert_non_null(e);
    assert_true(cJSON_GetObjectItem(e, "mean_error")->valuedouble < 1e-5);
    cJSON_Delete(root);
    free(txt);
}

/* A model that blows up (dz/dt = 3 z: growth e^{3t}) is stopped at ten times the training range and
 * reported, not integrated forever; the frames after it count as lost. */
static void test_forecast_of_blowing_up_model(void **state) {
    Fx *fx = *state;
    Config *c = malloc(sizeof *c);
    Status st;
    char path[700];
    snprintf(path, sizeof path, "%s/config.json", fx->run);
    assert_int_equal(config_load(c, path, &st), 0);
    Model m;
    ParamSet ps;
    RunData d;
    assert_int_equal(rundata_open(&d, c, &st), 0);
    assert_int_equal(train_load_latest(fx->run, c, (int)d.ds.n, d.td.n_train, &m, &ps, NULL, &st), 0);
    Mat xi = params_val(&ps, m.xi);
    memset(xi.d, 0, 4 * sizeof(float));
    xi.d[0 * 2 + 0] = 3.0f; /* dz1/dt = 3*z1 */
    xi.d[1 * 2 + 1] = 3.0f; /* dz2/dt = 3*z2 */
    long n_train = d.td.n_train;
    long *order = malloc((size_t)n_train * sizeof *order);
    for (long i = 0; i < n_train; i++) order[i] = i;
    CkptMeta meta = {0};
    meta.config_digest = config_digest(c);
    meta.epoch = 11;
    meta.best_val = INFINITY;
    meta.best_epoch = -1;
    rng_seed(&meta.rng, 1);
    snprintf(path, sizeof path, "%s/checkpoints/ckpt-00000011-000000.ckpt", fx->run);
    assert_int_equal(ckpt_write(path, &meta, &ps, m.mask, 4, order, n_train, &st), 0);
    free(order);
    model_free(&m);
    params_free(&ps);
    rundata_close(&d);
    free(c);
    assert_int_equal(run("forecast", fx->run), 0);
    snprintf(path, sizeof path, "%s/forecast.json", fx->run);
    char *txt = test_slurp(path);
    cJSON *root = cJSON_Parse(txt);
    const cJSON *r1 = rec_entry(root, "rec1");
    assert_true(cJSON_IsString(cJSON_GetObjectItem(r1, "stopped")));
    assert_non_null(strstr(cJSON_GetObjectItem(r1, "stopped")->valuestring, "bound"));
    double t_exceed = cJSON_GetObjectItem(r1, "exceeds_bound_at")->valuedouble;
    assert_true(t_exceed > 0 && t_exceed < 1.0); /* 10% off within a fraction of a second */
    assert_true(cJSON_IsFalse(cJSON_GetObjectItem(r1, "beats_persistence"))); /* worse than a law that says nothing */
    cJSON_Delete(root);
    free(txt);
}

/* Missing or unusable run folders: one line, exit 2. */
static void test_bad_run_folders(void **state) {
    Fx *fx = *state;
    assert_int_equal(run("export", "/nonexistent/run"), 2);
    assert_int_equal(run("forecast", fx->data), 2); /* a folder without config.json */
    assert_int_equal(run("verify", fx->run), 2);     /* not trained on a demo scenario: no demo.json */
    char path[700], cmd[1600];
    snprintf(path, sizeof path, "%s/checkpoints/ckpt-00000010-000000.ckpt", fx->run);
    /* a checkpoint from a newer format version */
    FILE *f = fopen(path, "r+b");
    assert_non_null(f);
    fseek(f, 8, SEEK_SET);
    unsigned char v[4] = {99, 0, 0, 0};
    fwrite(v, 1, 4, f);
    fclose(f);
    snprintf(cmd, sizeof cmd, "'%s' forecast '%s' 2>&1 | grep -q 'version 99'", test_framelaw(), fx->run);
    assert_int_equal(system(cmd), 0);
    assert_int_equal(run("forecast", fx->run), 2);
    unlink(path);
    assert_int_equal(run("export", fx->run), 2); /* no checkpoint at all */
}

/* Image data: a bright spot moving on a circle in 12 x 10 frames; after a short training, export
 * writes one reconstruction strip per recording: 3 panels wide, 4 frames high. */
static void test_reconstruction_strips_for_images(void **state) {
    Fx *fx = *state;
    char dir[700], path[800];
    Status st;
    for (int r = 0; r < 2; r++) {
        snprintf(dir, sizeof dir, "%s/frames/r%d", fx->root, r);
        char cmd[900];
        snprintf(cmd, sizeof cmd, "mkdir -p '%s'", dir);
        assert_int_equal(system(cmd), 0);
        for (int i = 0; i < 40; i++) {
            uint8_t px[12 * 10];
            double cx = 6 + 3 * cos(0.2 * i + r), cy = 5 + 3 * sin(0.2 * i + r);
            for (int y = 0; y < 10; y++)
                for (int x = 0; x < 12; x++)
                    px[y * 12 + x] = (uint8_t)(30 + 200 * exp(-((x - cx) * (x - cx) + (y - cy) * (y - cy)) / 4));
            snprintf(path, sizeof path, "%s/f%d.png", dir, i);
            assert_int_equal(image_write_png_gray(path, px, 12, 10, &st), 0);
        }
    }
    snprintf(path, sizeof path, "%s/img.json", fx->root);
    FILE *f = fopen(path, "w");
    fprintf(f, "{\"data\": {\"frames\": \"%s/frames\", \"fps\": 30}, \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [8]},"
               " \"train\": {\"epochs\": 4, \"batch\": 16, \"threads\": 1}, \"threshold\": {\"refine_epochs\": 1},"
               " \"output\": \"%s/imgrun\"}", fx->root, fx->root);
    fclose(f);
    char cmd[1800];
    snprintf(cmd, sizeof cmd, "'%s' train '%s' --quiet >/dev/null 2>&1", test_framelaw(), path);
    assert_int_equal(system(cmd), 0);
    snprintf(path, sizeof path, "%s/imgrun/reconstructions/r0.png", fx->root);
    float *img;
    int w, h;
    assert_int_equal(image_load_gray(path, GRAY_BT601, &img, &w, &h, &st), 0);
    assert_int_equal(w, 3 * 12);
    assert_int_equal(h, 4 * 10);
    /* the left panel is the original frame 0: its brightest pixel is near the spot's centre */
    int best = 0;
    for (int p = 0; p < 12 * 10; p++)
        if (img[(p / 12) * w + p % 12] > img[(best / 12) * w + best % 12]) best = p;
    assert_true(abs(best % 12 - 9) <= 1 && abs(best / 12 - 5) <= 1); /* cx = 6 + 3, cy = 5 */
    free(img);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_forecast_of_exact_model, setup, teardown),
        cmocka_unit_test_setup_teardown(test_export_trajectories, setup, teardown),
        cmocka_unit_test_setup_teardown(test_latent_derivatives, setup_latent, teardown),
        cmocka_unit_test_setup_teardown(test_bad_run_folders, setup, teardown),
        cmocka_unit_test_setup_teardown(test_forecast_of_blowing_up_model, setup, teardown),
        cmocka_unit_test_setup_teardown(test_reconstruction_strips_for_images, setup, teardown),
    };
    return cmocka_run_group_tests_name("export and forecast", tests, NULL, NULL);
}
