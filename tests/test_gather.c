/* tests/test_gather.c: split, valid samples, scaling and the batch gather (io/data/gather.h). */
#include "tests/testutil.h"

#include <sys/stat.h>
#include <unistd.h>

#include "io/data/gather.h"
#include "io/data/images.h"
#include "io/data/series.h"

static void rm_rf(const char *dir) {
    char cmd[1200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    assert_int_equal(system(cmd), 0);
}

/* Channel c of recording r at sample i: a smooth signal. */
static double sig(int r, int c, int i, double dt) {
    double t = i * dt;
    return sin((1.0 + 0.3 * c) * t + r) + 0.2 * c * t;
}

/* Numeric recordings with lengths lens[] written as .npy files (float64). */
static void write_numeric(const char *dir, const int *lens, int n_rec, int cols, double dt) {
    for (int r = 0; r < n_rec; r++) {
        double *d = malloc(sizeof(double) * (size_t)lens[r] * (size_t)cols);   /* (lens[r], cols) */
        for (int i = 0; i < lens[r]; i++)
            for (int c = 0; c < cols; c++) d[i * cols + c] = sig(r, c, i, dt);
        char path[512];
        snprintf(path, sizeof path, "%s/rec%d.npy", dir, r + 1);
        Status st;
        assert_int_equal(npy_write_f64(path, d, lens[r], cols, &st), 0);
        free(d);
    }
}

static void open_all(const char *dir, const FrameSettings *s, FrameStore *fs, Dataset *ds, Status *st, int expect) {
    FrameScan scan;
    StoreOpenInfo info;
    if (frames_scan(dir, &scan, st)) fail_msg("%s", st->msg);
    if (store_open_for(&scan, s, 0, fs, &info, st)) fail_msg("%s", st->msg);
    frames_scan_free(&scan);
    int rc = dataset_init(ds, fs, s, st);
    if (rc != expect) fail_msg("dataset_init returned %d (%s), expected %d", rc, st->msg, expect);
}

/* Valid samples exclude the stencil's reach past each recording's ends; the split is by whole
 * recordings, the last N by default (issue 3, items 4 and 5). */
static void test_samples_and_split(void **state) {
    (void)state;
    char dir[256];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    int lens[3] = {10, 12, 9};
    write_numeric(dir, lens, 3, 2, 0.1);
    FrameSettings s = frame_settings_default();
    FrameStore fs;
    Dataset ds;
    Status st;
    open_all(dir, &s, &fs, &ds, &st, 0);
    assert_int_equal(ds.count[SPLIT_TRAIN], 8 + 10);
    assert_int_equal(ds.count[SPLIT_VAL], 7);
    assert_int_equal(ds.rec_split[2], SPLIT_VAL);
    assert_int_equal(ds.samples[SPLIT_TRAIN][0], 1);
    assert_int_equal(ds.samples[SPLIT_TRAIN][7], 8);
    assert_int_equal(ds.samples[SPLIT_TRAIN][8], 11);   /* second recording starts at frame 10 */
    assert_int_equal(ds.samples[SPLIT_VAL][0], 23);
    assert_int_equal(ds.samples[SPLIT_VAL][6], 29);
    assert_int_equal(dataset_recording_of(&ds, 9), 0);
    assert_int_equal(dataset_recording_of(&ds, 10), 1);
    assert_int_equal(dataset_recording_of(&ds, 30), 2);
    dataset_free(&ds);
    /* Savitzky-Golay window 7: three frames lost at each end. */
    s.stencil = STENCIL_SAVGOL, s.sg_window = 7, s.sg_degree = 3;
    snprintf(s.val_names, sizeof s.val_names, "rec1, rec3");
    assert_int_equal(dataset_init(&ds, &fs, &s, &st), 0);
    assert_int_equal(ds.count[SPLIT_TRAIN], 6);
    assert_int_equal(ds.count[SPLIT_VAL], 4 + 3);
    assert_int_equal(ds.n_rec_split[SPLIT_VAL], 2);
    dataset_free(&ds);
    /* Errors: unknown name, nothing left to train on, a recording shorter than the stencil. */
    snprintf(s.val_names, sizeof s.val_names, "rec9");
    assert_int_equal(dataset_init(&ds, &fs, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "validation recording 'rec9' not found (recordings: rec1, rec2, rec3)"));
    snprintf(s.val_names, sizeof s.val_names, "rec1,rec2,rec3");
    assert_int_equal(dataset_init(&ds, &fs, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "no training recording"));
    s.val_names[0] = 0;
    s.sg_window = 11, s.sg_degree = 4;
    assert_int_equal(dataset_init(&ds, &fs, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "recording 'rec1' has 10 frames (after stride 1), the savgol stencil needs at least 11: record longer"));
    /* val_last 0: all training; val_last >= number of recordings: none held out. */
    s = frame_settings_default();
    s.val_last = 0;
    assert_int_equal(dataset_init(&ds, &fs, &s, &st), 0);
    assert_int_equal(ds.count[SPLIT_VAL], 0);
    dataset_free(&ds);
    s.val_last = 3;
    assert_int_equal(dataset_init(&ds, &fs, &s, &st), 0);
    assert_int_equal(ds.count[SPLIT_VAL], 0);
    dataset_free(&ds);
    store_close(&fs);
    rm_rf(dir);
}

/* The gather equals the stencil applied to the source series in double (sparse/stencil.h), per
 * sample and channel, for central differences and Savitzky-Golay, with dt = stride / fps
 * (common practice: the reference is the same formula in double precision). */
static void test_gather_numeric(void **state) {
    (void)state;
    char dir[256];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    int lens[2] = {40, 30};
    double dt_src = 0.05;
    write_numeric(dir, lens, 2, 3, dt_src);
    for (int kind = 0; kind < 2; kind++)
        for (int stride = 1; stride <= 2; stride++) {
            FrameSettings s = frame_settings_default();
            s.fps = 1 / dt_src, s.stride = stride, s.val_last = 1;
            if (kind) s.stencil = STENCIL_SAVGOL, s.sg_window = 5, s.sg_degree = 2;
            FrameStore fs;
            Dataset ds;
            Status st;
            open_all(dir, &s, &fs, &ds, &st, 0);
            Stencil sten;
            assert_int_equal(frame_settings_stencil(&s, &sten, &st), 0);
            double dt = dt_src * stride;
            assert_close(ds.dt, dt, 1e-15, 0);
            for (int sp = 0; sp < SPLIT_COUNT; sp++) {
                int B = (int)ds.count[sp], r = sp;   /* split sp holds recording sp here */
                long *idx = malloc(sizeof *idx * (size_t)B);
                float *x = malloc(sizeof(float) * (size_t)B * 3), *dx = malloc(sizeof(float) * (size_t)B * 3),
                      *ddx = malloc(sizeof(float) * (size_t)B * 3);   /* (B, 3) each */
                for (int b = 0; b < B; b++) idx[b] = B - 1 - b;     /* any order */
                dataset_gather(&ds, (SplitId)sp, idx, B, x, dx, ddx);
                long rows = (lens[r] + stride - 1) / stride;
                double *src = malloc(sizeof(double) * (size_t)rows * 3);   /* (rows, 3) strided series */
                for (long i = 0; i < rows; i++)
                    for (int c = 0; c < 3; c++) src[i * 3 + c] = (float)sig(r, c, (int)(i * stride), dt_src);
                for (int b = 0; b < B; b++) {
                    long i = idx[b] + sten.m;   /* sample index within the recording */
                    double d1[3], d2[3];
                    stencil_apply(&sten, dt, src, 3, i, d1, d2);
                    for (int c = 0; c < 3; c++) {
                        assert_close(x[b * 3 + c], src[i * 3 + c], 1e-6, 0);
                        assert_close(dx[b * 3 + c], d1[c], 1e-4, 1e-5);
                        assert_close(ddx[b * 3 + c], d2[c], 1e-2, 1e-4);
                    }
                }
                free(idx), free(x), free(dx), free(ddx), free(src);
            }
            dataset_free(&ds);
            store_close(&fs);
        }
    rm_rf(dir);
}

/* The shared gather (each distinct frame once, and a map) places the same rows as the window
 * gather, bit for bit, and holds each frame once: a whole recording's samples in any order need
 * its frames and no more (common practice: a gather's result does not depend on its order), the
 * samples' centre frames in rows 0..B-1 (what the reconstruction reads in place). */
static void test_gather_window_shared(void **state) {
    (void)state;
    char dir[256];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    int lens[2] = {40, 30};
    write_numeric(dir, lens, 2, 3, 0.05);
    FrameSettings s = frame_settings_default();
    s.fps = 20, s.val_last = 1, s.stencil = STENCIL_SAVGOL, s.sg_window = 7, s.sg_degree = 3;
    FrameStore fs;
    Dataset ds;
    Status st;
    open_all(dir, &s, &fs, &ds, &st, 0);
    int win = 2 * ds.sten.m + 1;
    assert_int_equal(win, 7);
    for (int sp = 0; sp < SPLIT_COUNT; sp++) {
        int B = (int)ds.count[sp];
        long *idx = malloc(sizeof *idx * (size_t)B), *work = malloc(sizeof *work * 2 * (size_t)win * B);
        float *xw = malloc(sizeof(float) * (size_t)win * B * 3), *xu = malloc(sizeof(float) * (size_t)win * B * 3);
        int *map = malloc(sizeof *map * (size_t)win * B);
        for (int b = 0; b < B; b++) idx[b] = (b * 7) % B; /* any order (7 is prime to 34 and 24) */
        dataset_gather_window(&ds, (SplitId)sp, idx, B, xw);
        int U = dataset_gather_window_shared(&ds, (SplitId)sp, idx, B, xu, map, work);
        assert_int_equal(U, B + win - 1); /* the recording's frames, each once */
        for (int b = 0; b < B; b++) /* the centre frames first, in the samples' order */
            assert_int_equal(map[(long)(win / 2) * B + b], b);
        for (long i = 0; i < (long)win * B; i++) {
            assert_true(map[i] >= 0 && map[i] < U);
            assert_memory_equal(xu + (long)map[i] * 3, xw + i * 3, 3 * sizeof(float));
        }
        /* two samples, far apart: nothing to share */
        long two[2] = {0, B - 1};
        assert_int_equal(dataset_gather_window_shared(&ds, (SplitId)sp, two, 2, xu, map, work), 2 * win);
        /* a sample twice, and one a frame further: each frame once, every row where the window gather puts it */
        long dup[3] = {1, 1, 0};
        dataset_gather_window(&ds, (SplitId)sp, dup, 3, xw);
        assert_int_equal(dataset_gather_window_shared(&ds, (SplitId)sp, dup, 3, xu, map, work), win + 1);
        for (long i = 0; i < 3L * win; i++) assert_memory_equal(xu + (long)map[i] * 3, xw + i * 3, 3 * sizeof(float));
        free(idx), free(work), free(xw), free(xu), free(map);
    }
    dataset_free(&ds);
    store_close(&fs);
    rm_rf(dir);
}

/* 8-bit frames: x = q / 255 and x' = (q[f+1] - q[f-1]) / (2 dt 255), x'' = (q[f+1] - 2 q[f] +
 * q[f-1]) / (dt^2 255) (second-order central differences; common practice). dx and ddx may be
 * NULL. */
static void test_gather_images(void **state) {
    (void)state;
    char dir[256];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    enum { W = 5, H = 3, N = 6 };
    uint8_t q[N][W * H];
    for (int k = 0; k < N; k++) {
        for (int i = 0; i < W * H; i++) q[k][i] = (uint8_t)((i * 17 + k * k * 5) % 256);
        char path[512];
        snprintf(path, sizeof path, "%s/img%d.png", dir, k);
        Status st;
        assert_int_equal(image_write_png_gray(path, q[k], W, H, &st), 0);
    }
    FrameSettings s = frame_settings_default();
    s.fps = 25;
    FrameStore fs;
    Dataset ds;
    Status st;
    open_all(dir, &s, &fs, &ds, &st, 0);
    assert_int_equal(ds.count[SPLIT_TRAIN], N - 2);
    assert_int_equal(ds.count[SPLIT_VAL], 0);   /* one recording: nothing held out */
    long idx[2] = {2, 0};                        /* frames 3 and 1 */
    float x[2 * W * H], dx[2 * W * H], ddx[2 * W * H];   /* (2, W*H) */
    dataset_gather(&ds, SPLIT_TRAIN, idx, 2, x, dx, ddx);
    double dt = 1.0 / 25;
    for (int b = 0; b < 2; b++) {
        int f = idx[b] + 1;
        for (int p = 0; p < W * H; p++) {
            assert_close(x[b * W * H + p], q[f][p] / 255.0, 1e-7, 0);
            assert_close(dx[b * W * H + p], (q[f + 1][p] - q[f - 1][p]) / (2 * dt * 255), 1e-4, 1e-6);
            assert_close(ddx[b * W * H + p], (q[f + 1][p] - 2.0 * q[f][p] + q[f - 1][p]) / (dt * dt * 255), 1e-2, 1e-6);
        }
    }
    float x2[2 * W * H];
    dataset_gather(&ds, SPLIT_TRAIN, idx, 2, x2, NULL, NULL);
    assert_memory_equal(x, x2, sizeof x);
    /* Edge frames are reachable one by one. */
    dataset_frame(&ds, 0, x2);
    assert_close(x2[4], q[0][4] / 255.0, 1e-7, 0);
    dataset_free(&ds);
    store_close(&fs);
    rm_rf(dir);
}

/* Standardised scaling: over the training recordings every channel has mean 0 and population
 * standard deviation 1; a constant channel stays 0 (common practice: z-scores). */
static void test_standardize(void **state) {
    (void)state;
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/a.csv", dir);
    FILE *f = fopen(path, "w");
    for (int i = 0; i < 20; i++) fprintf(f, "%g,%g,5\n", 1000 + 3.0 * sin(i), 0.01 * i);
    fclose(f);
    snprintf(path, sizeof path, "%s/b.csv", dir);
    f = fopen(path, "w");
    for (int i = 0; i < 20; i++) fprintf(f, "1e6,1e6,1e6\n");
    fclose(f);
    FrameSettings s = frame_settings_default();
    s.scale = SCALE_STANDARD;
    FrameStore fs;
    Dataset ds;
    Status st;
    open_all(dir, &s, &fs, &ds, &st, 0);
    double sum[3] = {0}, sq[3] = {0};
    for (int fr = 0; fr < 20; fr++) {
        float x[3];
        dataset_frame(&ds, fr, x);
        for (int c = 0; c < 3; c++) sum[c] += x[c], sq[c] += (double)x[c] * x[c];
    }
    for (int c = 0; c < 2; c++) {
        assert_close(sum[c] / 20, 0, 1e-4, 0);
        assert_close(sq[c] / 20, 1, 1e-3, 0);
    }
    assert_close(sq[2], 0, 1e-9, 0);
    dataset_free(&ds);
    store_close(&fs);
    rm_rf(dir);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_samples_and_split), cmocka_unit_test(test_gather_numeric),
        cmocka_unit_test(test_gather_window_shared),
        cmocka_unit_test(test_gather_images),     cmocka_unit_test(test_standardize),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
