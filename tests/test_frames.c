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
    write_png(dir, "frame10.png", 4, 3, 0); /* 8, 9, 10: no gap, and byte order would put 10 first */
    write_png(dir, "frame9.png", 4, 3, 1);
    write_png(dir, "frame8.png", 4, 3, 2);
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
    assert_non_null(strstr(fs.rec[0].files[0].path, "/frame8.png"));
    assert_non_null(strstr(fs.rec[0].files[1].path, "/frame9.png"));
    assert_non_null(strstr(fs.rec[0].files[2].path, "/frame10.png"));
    assert_null(fs.gap_notes);
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

/* Gaps in the numbering (issue 19, item 5; docs/frames.md "Gaps in the numbering"): the step is the
 * lower median of the steps between consecutive numbers, a step of 1.5 or more of it is a gap, and
 * names that differ in more than one number, or in text, or steps that are neither are no frame
 * count (common practice: numbered frame files, as video tools write them, e.g. %06d). */
static void test_find_gaps(void **state) {
    (void)state;
    int cut[8];
    long long step, v[16];
    const char *a[] = {"f1.png", "f2.png", "f3.png", "f4.png", "f5.png", "f9.png", "f10.png"};
    assert_int_equal(frames_find_gaps(a, 7, v, cut, 8, &step), 1);
    assert_int_equal(cut[0], 5);                 /* f9 starts the second piece */
    assert_true(step == 1 && v[5] == 9 && v[4] == 5);
    const char *b[] = {"f1.png", "f2.png", "f3.png", "f4.png"};
    assert_int_equal(frames_find_gaps(b, 4, v, cut, 8, &step), 0);
    /* every 10th frame exported: 40-60 missing (the first gap), 90 (the second) */
    const char *c[] = {"take2_0010.png", "take2_0020.png", "take2_0030.png", "take2_0070.png",
                       "take2_0080.png", "take2_0100.png"};
    assert_int_equal(frames_find_gaps(c, 6, v, cut, 8, &step), 2);
    assert_true(step == 10);
    assert_int_equal(cut[0], 3);
    assert_int_equal(cut[1], 5);
    /* milliseconds at 30 per second: steps of 33 and 34 are regular, 67 misses one frame */
    const char *d[] = {"t0000.png", "t0033.png", "t0067.png", "t0100.png", "t0133.png", "t0200.png", "t0233.png"};
    assert_int_equal(frames_find_gaps(d, 7, v, cut, 8, &step), 1);
    assert_int_equal(cut[0], 5);
    assert_int_equal(frames_find_gaps(d, 5, v, cut, 8, &step), 0);
    /* a step of 13 where the step is 10: neither a step nor a gap, so no frame count */
    const char *e[] = {"f10.png", "f20.png", "f30.png", "f43.png", "f53.png", "f80.png"};
    assert_int_equal(frames_find_gaps(e, 6, v, cut, 8, &step), 0);
    /* two numbers vary, the text differs, a number repeats (f2 and f02): nothing detected */
    const char *f[] = {"s1_f1.png", "s1_f2.png", "s2_f1.png", "s2_f9.png"};
    assert_int_equal(frames_find_gaps(f, 4, v, cut, 8, &step), 0);
    const char *g[] = {"a1.png", "b2.png", "a9.png"};
    assert_int_equal(frames_find_gaps(g, 3, v, cut, 8, &step), 0);
    const char *h[] = {"f2.png", "f02.png", "f3.png", "f9.png"};
    assert_int_equal(frames_find_gaps(h, 4, v, cut, 8, &step), 0);
    /* a number that stays the same (the camera) beside the one that counts */
    const char *k[] = {"cam2_001.png", "cam2_002.png", "cam2_003.png", "cam2_005.png"};
    assert_int_equal(frames_find_gaps(k, 4, v, cut, 8, &step), 1);
    assert_int_equal(cut[0], 3);
    /* no digits at all, and numbers too long for 64 bits */
    const char *m[] = {"a.png", "b.png", "c.png"};
    assert_int_equal(frames_find_gaps(m, 3, v, cut, 8, &step), 0);
    const char *o[] = {"f1234567890123456789.png", "f1234567890123456790.png", "f1234567890123456799.png"};
    assert_int_equal(frames_find_gaps(o, 3, v, cut, 8, &step), 0);
}

/* A recording with gaps is split there: each piece a recording named NAME-partK in its place, the
 * note names the folder and the missing numbers; a recording without gaps is left alone. */
static void test_scan_splits_at_gaps(void **state) {
    (void)state;
    char dir[256], a[512], b[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    make_dir(dir, "take01", a, sizeof a);
    make_dir(dir, "take02", b, sizeof b);
    static const int nums[] = {1, 2, 3, 4, 8, 9, 10, 12, 13, 14};
    for (int i = 0; i < 10; i++) {
        char nm[32];
        snprintf(nm, sizeof nm, "frame%04d.png", nums[i]);
        write_png(a, nm, 4, 3, i);
        snprintf(nm, sizeof nm, "frame%04d.png", i + 1);
        write_png(b, nm, 4, 3, i);
    }
    FrameScan fs;
    Status st;
    assert_int_equal(frames_scan(dir, &fs, &st), 0);
    assert_int_equal(fs.n_rec, 4);
    assert_int_equal(fs.n_split, 1);
    static const char *const names[] = {"take01-part1", "take01-part2", "take01-part3", "take02"};
    static const int counts[] = {4, 3, 3, 10};
    for (int r = 0; r < 4; r++) {
        assert_string_equal(fs.rec[r].name, names[r]);
        assert_int_equal(fs.rec[r].n_files, counts[r]);
        assert_int_equal(fs.rec[r].piece, r < 3 ? r + 1 : 0);
    }
    assert_non_null(strstr(fs.rec[1].files[0].path, "/frame0008.png"));
    assert_non_null(strstr(fs.rec[2].files[2].path, "/frame0014.png"));
    assert_non_null(fs.gap_notes);
    print_message("%s", fs.gap_notes);
    assert_non_null(strstr(fs.gap_notes, "take01: frame numbers 5-7, 11 missing: split into 3 recordings"));
    assert_non_null(strstr(fs.gap_notes, "take01-part1 to take01-part3"));
    assert_null(strstr(fs.gap_notes, "take02"));
    frames_scan_free(&fs);
    /* the folder itself as the one recording: pieces named after it */
    assert_int_equal(frames_scan(a, &fs, &st), 0);
    assert_true(fs.single);
    assert_int_equal(fs.n_rec, 3);
    assert_string_equal(fs.rec[2].name, "take01-part3");
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
    c.derivative = DERIV_SAVGOL;
    c.scale = SCALE_STANDARD;
    assert_int_equal(frame_settings_from_config(&c, &s, &st), 0);
    assert_string_equal(s.val_names, "run3,run7");
    assert_int_equal(s.stencil, STENCIL_SAVGOL);
    assert_int_equal(s.scale, SCALE_STANDARD);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_natural_sort), cmocka_unit_test(test_scan_single), cmocka_unit_test(test_scan_multi),
        cmocka_unit_test(test_find_gaps),    cmocka_unit_test(test_scan_splits_at_gaps),
        cmocka_unit_test(test_scan_numeric), cmocka_unit_test(test_scan_empty),  cmocka_unit_test(test_digest),
        cmocka_unit_test(test_settings),     cmocka_unit_test(test_from_config),
        cmocka_unit_test(test_scan_refuses_non_regular),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
