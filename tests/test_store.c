/* tests/test_store.c: the frame store: build, load, reuse, invalidation, validation, concurrent
 * builders (io/data/store.h). */
#include "tests/testutil.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include "io/data/images.h"
#include "io/data/store.h"
#include "io/fs/hash.h"

/* Frame k of a recording: pixel i = (i * 7 + 13 k + seed) mod 256. */
static uint8_t pix(int i, int k, int seed) { return (uint8_t)((i * 7 + 13 * k + seed) % 256); }

static void write_rec(const char *dir, int n, int w, int h, int seed) {
    assert_true(mkdir(dir, 0755) == 0 || access(dir, F_OK) == 0);
    uint8_t px[64 * 64];   /* (h, w) */
    for (int k = 0; k < n; k++) {
        for (int i = 0; i < w * h; i++) px[i] = pix(i, k, seed);
        char path[1024];
        snprintf(path, sizeof path, "%s/frame%d.png", dir, k + 1);
        Status st;
        if (image_write_png_gray(path, px, w, h, &st)) fail_msg("%s", st.msg);
    }
}

static void rm_rf(const char *dir) {
    char cmd[1200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    assert_int_equal(system(cmd), 0);
}

static void open_store(const char *dir, const FrameSettings *s, FrameStore *fs, StoreOpenInfo *info) {
    FrameScan scan;
    Status st;
    if (frames_scan(dir, &scan, &st)) fail_msg("%s", st.msg);
    if (store_open_for(&scan, s, 0, fs, info, &st)) fail_msg("%s", st.msg);
    frames_scan_free(&scan);
}

/* Stored 8-bit frames equal the source pixels, recordings in order, with the recorded layout; a
 * second open reuses the store (issue 3, item 3). */
static void test_build_and_reuse(void **state) {
    (void)state;
    char dir[256], a[512], b[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(a, sizeof a, "%s/a", dir);
    snprintf(b, sizeof b, "%s/b", dir);
    write_rec(a, 5, 6, 4, 0);
    write_rec(b, 3, 6, 4, 100);
    FrameSettings s = frame_settings_default();
    FrameStore fs;
    StoreOpenInfo info;
    open_store(dir, &s, &fs, &info);
    assert_true(info.built);
    assert_string_equal(info.reason, "no store yet");
    assert_int_equal(fs.elem, STORE_U8);
    assert_int_equal(fs.width, 6);
    assert_int_equal(fs.height, 4);
    assert_int_equal(fs.n_frames, 8);
    assert_int_equal(fs.n_rec, 2);
    assert_string_equal(fs.rec[1].name, "b");
    assert_int_equal(fs.rec[1].first, 5);
    assert_int_equal(fs.rec[1].count, 3);
    for (int k = 0; k < 3; k++) {
        const uint8_t *f = store_frame(&fs, 5 + k);
        for (int i = 0; i < 24; i++) assert_int_equal(f[i], pix(i, k, 100));
    }
    /* The payload is page-aligned and the file is exactly header + payload + table. */
    assert_int_equal(((const char *)fs.payload - (const char *)fs.map) % 4096, 0);
    assert_int_equal(fs.map_bytes, 4096 + 8 * 24 + 2 * STORE_REC_BYTES);
    store_close(&fs);
    open_store(dir, &s, &fs, &info);
    assert_false(info.built);
    store_close(&fs);
    rm_rf(dir);
}

/* A changed frame (content and mtime) or a changed setting invalidates the store, which is rebuilt
 * with the new pixels (issue 3, item 3: stale cache detected and rebuilt). */
static void test_invalidation(void **state) {
    (void)state;
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    write_rec(dir, 4, 5, 5, 0);
    FrameSettings s = frame_settings_default();
    FrameStore fs;
    StoreOpenInfo info;
    open_store(dir, &s, &fs, &info);
    store_close(&fs);
    /* Replace frame 3 by a uniform image with an older mtime. */
    uint8_t px[25];
    memset(px, 42, sizeof px);
    snprintf(path, sizeof path, "%s/frame3.png", dir);
    Status st;
    assert_int_equal(image_write_png_gray(path, px, 5, 5, &st), 0);
    struct timespec ts[2] = {{12345, 0}, {12345, 0}};
    assert_int_equal(utimensat(AT_FDCWD, path, ts, 0), 0);
    open_store(dir, &s, &fs, &info);
    assert_true(info.built);
    assert_string_equal(info.reason, "sources or settings changed");
    const uint8_t *f = store_frame(&fs, 2);
    for (int i = 0; i < 25; i++) assert_int_equal(f[i], 42);
    store_close(&fs);
    open_store(dir, &s, &fs, &info);
    assert_false(info.built);
    store_close(&fs);
    s.stride = 2;
    open_store(dir, &s, &fs, &info);
    assert_true(info.built);
    assert_int_equal(fs.n_frames, 2);   /* frames 1 and 3 */
    assert_int_equal(fs.rec[0].source_count, 4);
    assert_int_equal(((const uint8_t *)store_frame(&fs, 1))[0], 42);
    store_close(&fs);
    rm_rf(dir);
}

/* A damaged store is refused before its payload is trusted, naming the file and the fault, and
 * store_open_for rebuilds it (common practice: magic, version, sizes and a CRC checked first). */
static void test_validation(void **state) {
    (void)state;
    char dir[256], sp[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    write_rec(dir, 3, 4, 4, 0);
    FrameSettings s = frame_settings_default();
    FrameStore fs;
    StoreOpenInfo info;
    open_store(dir, &s, &fs, &info);
    store_close(&fs);
    snprintf(sp, sizeof sp, "%s/.framelaw-store", dir);
    struct stat sb;
    assert_int_equal(stat(sp, &sb), 0);
    Status st;
    /* val 0: the byte's bits are flipped, so the file changes whatever it held (offset 73 is in
     * the settings digest, which differs from run to run: setting it to a fixed value left it
     * unchanged once in 256 runs). */
    struct { long off; unsigned char val; const char *msg; } cases[] = {
        {0, 'X', "bad magic"}, {8, 9, "version 9"}, {20, 5, "do not match"}, {73, 0, "CRC"},
        {(long)sb.st_size - 10, 0, "CRC"},
    };
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        int fd = open(sp, O_RDWR);
        unsigned char old;
        assert_int_equal(pread(fd, &old, 1, cases[c].off), 1);
        unsigned char val = cases[c].val ? cases[c].val : (unsigned char)(old ^ 0xFF);
        assert_int_not_equal(val, old);
        assert_int_equal(pwrite(fd, &val, 1, cases[c].off), 1);
        assert_int_equal(store_load(sp, &fs, &st), ST_INPUT);
        if (!strstr(st.msg, cases[c].msg) || !strstr(st.msg, sp)) fail_msg("case %zu: %s", c, st.msg);
        assert_int_equal(pwrite(fd, &old, 1, cases[c].off), 1);
        close(fd);
    }
    /* Truncated by one byte. */
    assert_int_equal(truncate(sp, sb.st_size - 1), 0);
    assert_int_equal(store_load(sp, &fs, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "truncated"));
    open_store(dir, &s, &fs, &info);
    assert_true(info.built);
    assert_non_null(strstr(info.reason, "invalid store"));
    store_close(&fs);
    rm_rf(dir);
}

/* 16-bit store, crop and area resize: stored values against a hand computation (issue 3, item 2). */
static void test_crop_resize_16(void **state) {
    (void)state;
    char dir[256];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    write_rec(dir, 3, 8, 6, 0);
    FrameSettings s = frame_settings_default();
    s.bits = 16;
    s.crop_x = 2, s.crop_y = 1, s.crop_w = 4, s.crop_h = 4;
    s.width = 2, s.height = 2;
    FrameStore fs;
    StoreOpenInfo info;
    open_store(dir, &s, &fs, &info);
    assert_int_equal(fs.elem, STORE_U16);
    assert_int_equal(fs.width, 2);
    assert_int_equal(fs.src_width, 8);
    assert_int_equal(fs.crop[2], 4);
    for (int k = 0; k < 3; k++) {
        const uint16_t *f = store_frame(&fs, k);
        for (int Y = 0; Y < 2; Y++)
            for (int X = 0; X < 2; X++) {
                double m = 0;   /* mean of the 2x2 source block at (2 + 2X, 1 + 2Y) */
                for (int dy = 0; dy < 2; dy++)
                    for (int dx = 0; dx < 2; dx++) m += pix((1 + 2 * Y + dy) * 8 + 2 + 2 * X + dx, k, 0) / 255.0 / 4;
                /* float32 preprocessing: within one 16-bit step of the exact value */
                assert_close(f[Y * 2 + X], m * 65535, 1.0, 0);
            }
    }
    store_close(&fs);
    rm_rf(dir);
}

/* Input errors of the build name the culprit: a frame of another size (the file and both sizes), a
 * crop outside the frame, an undecodable image (issue 3, bad input). */
static void test_build_errors(void **state) {
    (void)state;
    char dir[256], a[512], b[512], path[1024];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(a, sizeof a, "%s/a", dir);
    snprintf(b, sizeof b, "%s/b", dir);
    write_rec(a, 3, 6, 4, 0);
    write_rec(b, 3, 6, 4, 0);
    snprintf(path, sizeof path, "%s/frame2.png", b);
    uint8_t px[35] = {0};
    Status st;
    assert_int_equal(image_write_png_gray(path, px, 7, 5, &st), 0);
    FrameScan scan;
    FrameSettings s = frame_settings_default();
    FrameStore fs;
    StoreOpenInfo info;
    assert_int_equal(frames_scan(dir, &scan, &st), 0);
    assert_int_equal(store_open_for(&scan, &s, 0, &fs, &info, &st), ST_INPUT);
    if (!strstr(st.msg, "b/frame2.png is 7x5, but") || !strstr(st.msg, "a/frame1.png is 6x4")) fail_msg("%s", st.msg);
    frames_scan_free(&scan);
    rm_rf(b);
    assert_int_equal(frames_scan(dir, &scan, &st), 0);
    s.crop_x = 3, s.crop_y = 0, s.crop_w = 4, s.crop_h = 4;
    assert_int_equal(store_open_for(&scan, &s, 0, &fs, &info, &st), ST_INPUT);
    if (!strstr(st.msg, "crop 3,0,4,4 lies outside the 6x4 frame of") || !strstr(st.msg, "a/frame1.png"))
        fail_msg("%s", st.msg);
    frames_scan_free(&scan);
    snprintf(path, sizeof path, "%s/frame3.png", a);
    FILE *f = fopen(path, "wb");
    fputs("\x89PNG\r\n\x1a\nthis is not really a png", f);
    fclose(f);
    assert_int_equal(frames_scan(dir, &scan, &st), 0);
    s = frame_settings_default();
    assert_int_equal(store_open_for(&scan, &s, 0, &fs, &info, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, path));
    frames_scan_free(&scan);
    /* No temporary store left behind after failed builds. */
    char cmd[600];
    snprintf(cmd, sizeof cmd, "ls -a '%s' | grep -q tmp-", dir);
    assert_int_not_equal(system(cmd), 0);
    rm_rf(dir);
}

/* Numeric recordings are stored as float32 unchanged, with the stride; channel counts must agree
 * (issue 3, item 6). */
static void test_numeric(void **state) {
    (void)state;
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/r1.csv", dir);
    FILE *f = fopen(path, "w");
    fputs("t,x\n", f);
    for (int i = 0; i < 7; i++) fprintf(f, "%d,%.3f\n", i, 0.125 * i - 1);
    fclose(f);
    FrameSettings s = frame_settings_default();
    s.stride = 2;
    FrameStore fs;
    StoreOpenInfo info;
    open_store(dir, &s, &fs, &info);
    assert_int_equal(fs.elem, STORE_F32);
    assert_int_equal(fs.width, 1); /* the column named t is the clock, not a channel */
    assert_int_equal(fs.height, 1);
    assert_int_equal(fs.n_frames, 4);
    const float *v = store_frame(&fs, 3);
    assert_close(v[0], 0.125 * 6 - 1, 0, 0);
    store_close(&fs);
    snprintf(path, sizeof path, "%s/r2.csv", dir);
    f = fopen(path, "w");
    fputs("1,2,3\n4,5,6\n", f);
    fclose(f);
    FrameScan scan;
    Status st;
    assert_int_equal(frames_scan(dir, &scan, &st), 0);
    assert_int_equal(store_open_for(&scan, &s, 0, &fs, &info, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "r2.csv has 3 channels, but"));
    assert_non_null(strstr(st.msg, "has 1:"));
    s.width = 4, s.height = 4;
    frames_scan_free(&scan);
    rm_rf(dir);
}

/* Concurrent builders of the same store: each writes its own temporary and renames it; every
 * process ends with a valid mapped store and no temporary remains (issue 3, item 3). */
static void test_concurrent(void **state) {
    (void)state;
    char dir[256];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    write_rec(dir, 30, 32, 32, 0);
    enum { P = 4 };
    pid_t kids[P];
    for (int p = 0; p < P; p++) {
        kids[p] = fork();
        assert_true(kids[p] >= 0);
        if (kids[p] == 0) {
            FrameScan scan;
            FrameStore fs;
            StoreOpenInfo info;
            FrameSettings s = frame_settings_default();
            Status st;
            int ok = frames_scan(dir, &scan, &st) == 0 && store_open_for(&scan, &s, 1, &fs, &info, &st) == 0 &&
                     fs.n_frames == 30 && ((const uint8_t *)store_frame(&fs, 29))[5] == pix(5, 29, 0);
            _exit(ok ? 0 : 1);
        }
    }
    for (int p = 0; p < P; p++) {
        int status;
        assert_int_equal(waitpid(kids[p], &status, 0), kids[p]);
        assert_true(WIFEXITED(status) && WEXITSTATUS(status) == 0);
    }
    FrameSettings s = frame_settings_default();
    FrameStore fs;
    StoreOpenInfo info;
    open_store(dir, &s, &fs, &info);
    assert_false(info.built);
    store_close(&fs);
    char cmd[600];
    snprintf(cmd, sizeof cmd, "ls -a '%s' | grep -q tmp-", dir);
    assert_int_not_equal(system(cmd), 0);
    rm_rf(dir);
}

/* The writer API on its own (used by generators of synthetic recordings), and the CRC-32 check
 * value of the ISO-HDLC / IEEE 802.3 CRC: crc32("123456789") = 0xCBF43926 ("A Painless Guide to
 * CRC Error Detection Algorithms", 1993, check value table). */
static void test_writer_and_crc(void **state) {
    (void)state;
    assert_int_equal(fs_crc32(0, "123456789", 9), 0xCBF43926u);
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/w.store", dir);
    StoreLayout lay = {STORE_F32, 3, 1, 77, 3, 1, 0, {0, 0, 0, 0}, 1};
    StoreWriter *w;
    Status st;
    assert_int_equal(store_writer_open(&w, path, &lay, &st), 0);
    float fr[3] = {1, 2, 3};
    assert_int_equal(store_writer_recording(w, "one", 2, &st), 0);
    assert_int_equal(store_writer_frame(w, fr, &st), 0);
    fr[0] = 9;
    assert_int_equal(store_writer_frame(w, fr, &st), 0);
    FrameStore fs;
    assert_int_equal(store_writer_finish(w, &fs, &st), 0);
    assert_int_equal(fs.n_frames, 2);
    assert_true(fs.digest == 77);
    assert_close(((const float *)store_frame(&fs, 1))[0], 9, 0, 0);
    store_close(&fs);
    assert_int_equal(store_load(path, &fs, &st), 0);
    store_close(&fs);
    rm_rf(dir);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_build_and_reuse), cmocka_unit_test(test_invalidation),
        cmocka_unit_test(test_validation),      cmocka_unit_test(test_crop_resize_16),
        cmocka_unit_test(test_build_errors),    cmocka_unit_test(test_numeric),
        cmocka_unit_test(test_concurrent),      cmocka_unit_test(test_writer_and_crc),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
