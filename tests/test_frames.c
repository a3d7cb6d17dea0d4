/* tests/test_frames.c: natural sort, folder scan, digest, settings (io/data/frames.h). */
#include "tests/testutil.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include "io/data/frames.h"
#include "io/data/images.h"
#include "io/run/rundata.h"

static void write_png(const char *dir, const char *name, int w, int h, int seed) {
    char path[1024];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    uint8_t px[64 * 64];   /* (h, w) */
    for (int i = 0; i < w * h; i++) px[i] = (uint8_t)(i * 7 + seed * 13);
    Status st;
    if (image_write_png_gray(path, px, w, h, &st)) fail_msg("%s", st.msg);
}

static void write_text(const char *dir, const char *name, const char *text) {
    char path[1024];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs(text, f);
    fclose(f);
}

static void make_dir(const char *dir, const char *name, char *out, size_t n) {
    snprintf(out, n, "%s/%s", dir, name);
    assert_int_equal(mkdir(out, 0755), 0);
}

static void rm_rf(const char *dir) {
    char cmd[1200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    assert_int_equal(system(cmd), 0);
}

static int cmp_nat(const void *a, const void *b) {
    return frames_natural_cmp(*(const char *const *)a, *(const char *const *)b);
}

/* Natural sort order: digit runs compare by value, so frame2 precedes frame10 (common practice:
 * "natural sort order" of file names, as used by file managers). */
static void test_natural_sort(void **state) {
    (void)state;
    const char *names[] = {"frame10.png", "frame2.png", "frame1.png", "frame0002.png", "frame100.png",
                           "a9b10", "a9b9", "frame.png", "frame1a.png"};
    const char *want[] = {"a9b9", "a9b10", "frame.png", "frame1.png", "frame1a.png", "frame0002.png",
                          "frame2.png", "frame10.png", "frame100.png"};
    enum { N = sizeof names / sizeof names[0] };
    qsort(names, N, sizeof names[0], cmp_nat);
    for (int i = 0; i < N; i++) assert_string_equal(names[i], want[i]);
    assert_true(frames_natural_cmp("x2", "x10") < 0);
    assert_true(frames_natural_cmp("x10", "x2") > 0);
    assert_int_equal(frames_natural_cmp("x7", "x7"), 0);
    /* 1e30-sized digit runs do not overflow. */
    assert_true(frames_natural_cmp("f123456789012345678901234567890", "f123456789012345678901234567891") < 0);
}

/* One recording: images directly in the folder, natural order, other files and folders counted
 * (issue 3, "Reading"). */
static void test_scan_single(void **state) {
    (void)state;
    char dir[256], sub[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    write_png(dir, "frame10.png", 4, 3, 0);
    write_png(dir, "frame2.png", 4, 3, 1);
    write_png(dir, "frame1.png", 4, 3, 2);
    write_text(dir, "notes.txt", "x");
    write_text(dir, ".hidden.png", "x");
    make_dir(dir, "extra", sub, sizeof sub);
    FrameScan fs;
    Status st;
    assert_int_equal(frames_scan(dir, &fs, &st), 0);
    assert_int_equal(fs.n_rec, 1);
    assert_true(fs.single);
    assert_int_equal(fs.kind, REC_IMAGES);
    assert_int_equal(fs.rec[0].n_files, 3);
    assert_non_null(strstr(fs.rec[0].files[0].path, "/frame1.png"));
    assert_non_null(strstr(fs.rec[0].files[1].path, "/frame2.png"));
    assert_non_null(strstr(fs.rec[0].files[2].path, "/frame10.png"));
    assert_int_equal(fs.ignored_files, 1);
    assert_int_equal(fs.ignored_dirs, 1);
    const char *base = strrchr(dir, '/') + 1;
    assert_string_equal(fs.rec[0].name, base);
    char sp[4096];
    FrameSettings s = frame_settings_default();
    frames_store_path(&fs, &s, sp, sizeof sp);
    assert_non_null(strstr(sp, "/.framelaw-store"));
    frames_scan_free(&fs);
    rm_rf(dir);
}

/* A FIFO, a link to a device, or a dangling link named like a frame or a recording would leave a gap
 * or hang a reader: the scan refuses it, naming it (common practice: read only regular files). */
static void test_scan_refuses_non_regular(void **state) {
    (void)state;
    struct {
        const char *name; /* in a folder of frames (png) or of recordings (csv) */
        int kind;         /* 0 FIFO, 1 link to /dev/zero, 2 dangling link */
        const char *what;
    } cases[] = {
        {"frame2.png", 0, "named like a frame but not a regular file"},
        {"frame2.png", 1, "named like a frame but not a regular file"},
        {"frame2.png", 2, "cannot read"},
        {"rec2.csv", 0, "named like a recording but not a regular file"},
        {"rec2.npy", 1, "named like a recording but not a regular file"},
        {"rec2.csv", 2, "cannot read"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char dir[256], path[600];
        assert_non_null(test_tmpdir(dir, sizeof dir));
        int numeric = strstr(cases[i].name, ".png") == NULL;
        if (numeric) write_text(dir, "rec1.csv", "1,2\n3,4\n");
        else write_png(dir, "frame1.png", 4, 3, 0);
        snprintf(path, sizeof path, "%s/%s", dir, cases[i].name);
        if (cases[i].kind == 0) assert_int_equal(mkfifo(path, 0644), 0);
        else assert_int_equal(symlink(cases[i].kind == 1 ? "/dev/zero" : "/nonexistent/frame", path), 0);
        FrameScan fs;
        Status st;
        assert_int_equal(frames_scan(dir, &fs, &st), ST_INPUT);
        if (!strstr(st.msg, path) || !strstr(st.msg, cases[i].what))
            fail_msg("case %zu: \"%s\" should name %s and say \"%s\"", i, st.msg, path, cases[i].what);
        frames_scan_free(&fs);
        rm_rf(dir);
    }
    /* the path given is itself such a file */
    char dir[256], path[600];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/rec.npy", dir);
    assert_int_equal(symlink("/dev/zero", path), 0);
    FrameScan fs;
    Status st;
    assert_int_equal(frames_scan(path, &fs, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "not a folder, nor a regular file"));
    frames_scan_free(&fs);
    rm_rf(dir);
}

/* Several recordings: one sub-folder each, named and ordered naturally; sub-folders without images
 * ignored (issue 3, "Reading"). */
static void test_scan_multi(void **state) {
    (void)state;
    char dir[256], a[512], b[512], c[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    make_dir(dir, "run10", a, sizeof a);
    make_dir(dir, "run9", b, sizeof b);
    make_dir(dir, "empty", c, sizeof c);
    write_png(a, "f1.png", 4, 3, 0);
    write_png(a, "f2.png", 4, 3, 0);
    write_png(b, "f1.png", 4, 3, 0);
    write_text(b, "log.txt", "x");
    write_text(dir, "README", "x");
    FrameScan fs;
    Status st;
    assert_int_equal(frames_scan(dir, &fs, &st), 0);
    assert_false(fs.single);
    assert_int_equal(fs.n_rec, 2);
    assert_string_equal(fs.rec[0].name, "run9");
    assert_string_equal(fs.rec[1].name, "run10");
    assert_int_equal(fs.rec[1].n_files, 2);
    assert_int_equal(fs.ignored_files, 2);
    assert_int_equal(fs.ignored_dirs, 1);
    frames_scan_free(&fs);
    /* A numeric file beside image sub-folders: one kind only. */
    write_text(dir, "z.csv", "1,2\n3,4\n");
    assert_int_equal(frames_scan(dir, &fs, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "mixes image recordings"));
    rm_rf(dir);
}

/* Numeric recordings: a folder of .csv / .npy files, or one file (issue 3, item 6). */
static void test_scan_numeric(void **state) {
    (void)state;
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    write_text(dir, "b.csv", "1,2\n3,4\n");
    write_text(dir, "a.csv", "1,2\n3,4\n");
    FrameScan fs;
    Status st;
    assert_int_equal(frames_scan(dir, &fs, &st), 0);
    assert_int_equal(fs.kind, REC_NUMERIC);
    assert_int_equal(fs.n_rec, 2);
    assert_string_equal(fs.rec[0].name, "a");
    frames_scan_free(&fs);
    snprintf(path, sizeof path, "%s/a.csv", dir);
    assert_int_equal(frames_scan(path, &fs, &st), 0);
    assert_true(fs.single);
    assert_int_equal(fs.n_rec, 1);
    char sp[4096];
    FrameSettings s = frame_settings_default();
    frames_store_path(&fs, &s, sp, sizeof sp);
    assert_non_null(strstr(sp, "/.a.csv.framelaw-store"));
    frames_scan_free(&fs);
    rm_rf(dir);
}

/* An empty folder and a missing path are input errors naming the path (issue 3, bad input). */
static void test_scan_empty(void **state) {
    (void)state;
    char dir[256];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    FrameScan fs;
    Status st;
    assert_int_equal(frames_scan(dir, &fs, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, dir));
    assert_non_null(strstr(st.msg, "no image files or recordings"));
    rm_rf(dir);
    assert_int_equal(frames_scan(dir, &fs, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, dir));
}

/* The digest changes with a source file's mtime or size and with settings that change stored
 * bytes, not with gather-time settings (issue 3, item 3). */
static void test_digest(void **state) {
    (void)state;
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    write_png(dir, "f1.png", 4, 3, 0);
    write_png(dir, "f2.png", 4, 3, 1);
    FrameScan fs;
    Status st;
    FrameSettings s = frame_settings_default();
    assert_int_equal(frames_scan(dir, &fs, &st), 0);
    uint64_t d0 = frames_digest(&fs, &s);
    FrameSettings t = s;
    t.fps = 60, t.scale = SCALE_STANDARD, t.stencil = STENCIL_SAVGOL, t.val_last = 0;
    assert_true(frames_digest(&fs, &t) == d0);
    t = s, t.gray = GRAY_BT709;
    assert_true(frames_digest(&fs, &t) != d0);
    t = s, t.width = 2, t.height = 2;
    assert_true(frames_digest(&fs, &t) != d0);
    t = s, t.stride = 2;
    assert_true(frames_digest(&fs, &t) != d0);
    t = s, t.bits = 16;
    assert_true(frames_digest(&fs, &t) != d0);
    frames_scan_free(&fs);
    /* Change one file's modification time. */
    snprintf(path, sizeof path, "%s/f2.png", dir);
    struct timespec ts[2] = {{1000000, 0}, {1000000, 0}};
    assert_int_equal(utimensat(AT_FDCWD, path, ts, 0), 0);
    assert_int_equal(frames_scan(dir, &fs, &st), 0);
    assert_true(frames_digest(&fs, &s) != d0);
    frames_scan_free(&fs);
    rm_rf(dir);
}

/* Settings checks name the setting (issue 3, bad input: a frame rate that is not positive). */
static void test_settings(void **state) {
    (void)state;
    FrameSettings s = frame_settings_default();
    Status st;
    assert_int_equal(frame_settings_check(&s, &st), 0);
    assert_close(frame_settings_dt(&s), 1.0 / 30, 1e-15, 0);
    s.fps = 0;
    assert_int_equal(frame_settings_check(&s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "fps"));
    s = frame_settings_default(), s.fps = -5;
    assert_int_equal(frame_settings_check(&s, &st), ST_INPUT);
    s = frame_settings_default(), s.stride = 0;
    assert_int_equal(frame_settings_check(&s, &st), ST_INPUT);
    s = frame_settings_default(), s.bits = 12;
    assert_int_equal(frame_settings_check(&s, &st), ST_INPUT);
    s = frame_settings_default(), s.stencil = STENCIL_SAVGOL, s.sg_window = 4;
    assert_int_equal(frame_settings_check(&s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "window 4"));
    s = frame_settings_default(), s.stride = 3, s.fps = 60;
    assert_close(frame_settings_dt(&s), 0.05, 1e-15, 0);
}

/* The data.* keys of the run config map onto the settings (docs/config.md). */
static void test_from_config(void **state) {
    (void)state;
    Config c;
    config_defaults(&c);
    FrameSettings s, d = frame_settings_default();
    Status st;
    assert_int_equal(frame_settings_from_config(&c, &s, &st), 0);
    assert_close(s.fps, d.fps, 0, 0);
    assert_int_equal(s.gray, d.gray);
    assert_int_equal(s.scale, d.scale);
    assert_int_equal(s.stride, d.stride);
    assert_int_equal(s.bits, d.bits);
    assert_int_equal(s.stencil, d.stencil);
    assert_int_equal(s.sg_window, d.sg_window);
    assert_int_equal(s.sg_degree, d.sg_degree);
    assert_int_equal(s.val_last, d.val_last);
    c.n_val_names = 2;
    snprintf(c.val_names[0], sizeof c.val_names[0], "run3");
    snprintf(c.val_names[1], sizeof c.val_names[1], "run7");
    snprintf(c.derivative, sizeof c.derivative, "savgol");
    snprintf(c.scale, sizeof c.scale, "standardize");
    assert_int_equal(frame_settings_from_config(&c, &s, &st), 0);
    assert_string_equal(s.val_names, "run3,run7");
    assert_int_equal(s.stencil, STENCIL_SAVGOL);
    assert_int_equal(s.scale, SCALE_STANDARD);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_natural_sort), cmocka_unit_test(test_scan_single), cmocka_unit_test(test_scan_multi),
        cmocka_unit_test(test_scan_numeric), cmocka_unit_test(test_scan_empty),  cmocka_unit_test(test_digest),
        cmocka_unit_test(test_settings),     cmocka_unit_test(test_from_config),
        cmocka_unit_test(test_scan_refuses_non_regular),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
