/* tests/test_video.c: video files as recordings (io/data/video.h). Reference: the frames themselves,
 * encoded by Debian's ffmpeg with a lossless codec (FFV1, "FFV1 Video Coding Format", RFC 9043,
 * IETF 2021) in 8-bit gray: decoding must give back every frame's bytes, so the frame store built
 * from the videos equals the one built from the PNG frames; the frame rate comes from the file. */
#include <sys/stat.h>
#include <unistd.h>

#include "io/data/frames.h"
#include "io/data/store.h"
#include "io/data/video.h"
#include "io/run/config.h"
#include "io/run/rundata.h"
#include "tests/testutil.h"

static char tmp[256];

static int setup(void **state) {
    (void)state;
    char cmd[2048], out[4096];
    if (!test_tmpdir(tmp, sizeof tmp)) return -1;
    snprintf(cmd, sizeof cmd, "demo spring '%s/png' --recordings 2 --frames 40", tmp);
    if (test_run_capture(cmd, out, sizeof out)) return -1;
    snprintf(cmd, sizeof cmd, "mkdir -p '%s/videos' && for r in rec00 rec01; do ffmpeg -v error -framerate 25 -i "
             "'%s/png/'$r/frame%%06d.png -c:v ffv1 -pix_fmt gray '%s/videos/'$r.mkv || exit 1; done", tmp, tmp, tmp);
    return system(cmd) ? -1 : 0;
}

static int teardown(void **state) {
    (void)state;
    test_rmtree(tmp);
    return 0;
}

static void build(const char *sub, FrameStore *fs, FrameScan *scan, int stride) {
    char dir[600], store[700];
    snprintf(dir, sizeof dir, "%s/%s", tmp, sub);
    snprintf(store, sizeof store, "%s/%s-%d.store", tmp, sub, stride);
    Status st;
    if (frames_scan(dir, scan, &st)) fail_msg("%s", st.msg);
    FrameSettings s = frame_settings_default();
    s.stride = stride;
    if (store_build(scan, &s, store, fs, &st)) fail_msg("%s", st.msg);
}

static void test_same_frames_as_png(void **state) {
    (void)state;
    FrameStore a, b;
    FrameScan sa, sb;
    build("png", &a, &sa, 1);
    build("videos", &b, &sb, 1);
    assert_int_equal(sb.n_rec, 2);
    assert_true(sb.rec[0].video);
    assert_int_equal(sb.rec[0].vinfo.width, 32);
    assert_true(sb.rec[0].vinfo.fps == 25);
    assert_string_equal(sb.rec[1].name, "rec01");
    assert_int_equal(a.n_frames, 80);
    assert_int_equal(b.n_frames, a.n_frames);
    assert_int_equal(b.width, a.width);
    assert_int_equal(b.rec[1].count, 40);
    assert_int_equal(b.rec[1].source_count, 40);
    assert_memory_equal(store_frame(&b, 0), store_frame(&a, 0), store_payload_bytes(&a));
    store_close(&a), store_close(&b);
    frames_scan_free(&sa), frames_scan_free(&sb);
    /* every third frame: the same frames kept */
    build("png", &a, &sa, 3);
    build("videos", &b, &sb, 3);
    assert_int_equal(a.n_frames, 28); /* 14 of 40 per recording */
    assert_int_equal(b.n_frames, a.n_frames);
    assert_memory_equal(store_frame(&b, 0), store_frame(&a, 0), store_payload_bytes(&a));
    store_close(&a), store_close(&b);
    frames_scan_free(&sa), frames_scan_free(&sb);
}

/* One video file as the source: its store lies beside it as .NAME.framelaw-store (it was
 * "NAME/.framelaw-store", inside the file, which could never be written). */
static void test_single_video_store(void **state) {
    (void)state;
    char path[600], want[700];
    snprintf(path, sizeof path, "%s/videos/rec01.mkv", tmp);
    FrameScan scan;
    Status st;
    if (frames_scan(path, &scan, &st)) fail_msg("%s", st.msg);
    FrameSettings s = frame_settings_default();
    FrameStore fs;
    StoreOpenInfo info;
    if (store_open_for(&scan, &s, 0, &fs, &info, &st)) fail_msg("%s", st.msg);
    snprintf(want, sizeof want, "%s/videos/.rec01.mkv.framelaw-store", tmp);
    assert_string_equal(info.path, want);
    assert_int_equal(fs.n_frames, 40);
    assert_string_equal(fs.rec[0].name, "rec01");
    store_close(&fs);
    frames_scan_free(&scan);
    assert_int_equal(unlink(want), 0);
}

/* The rate comes from the videos when data.fps is not given; a given rate must agree. */
static void test_rate(void **state) {
    (void)state;
    Config c;
    config_defaults(&c);
    char set[700];
    snprintf(set, sizeof set, "data.frames=%s/videos", tmp);
    Status st;
    assert_int_equal(config_set(&c, set, &st), 0);
    assert_int_equal(rundata_source_fps(&c, &st), 0);
    assert_true(c.fps == 25);
    assert_true(config_given(&c, "data.fps"));
    assert_int_equal(config_set(&c, "data.fps=30", &st), 0);
    RunData d;
    assert_int_equal(rundata_open(&d, &c, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "data.fps 30 disagrees with"));
    assert_non_null(strstr(st.msg, "(25 frames per second)"));
    rundata_close(&d);
}

/* Without ffmpeg on PATH: a one-line message with the install command; a file that is no video: a
 * message naming it. */
static void test_missing_ffmpeg_and_bad_files(void **state) {
    (void)state;
    char path[600];
    snprintf(path, sizeof path, "%s/videos/rec00.mkv", tmp);
    const char *old = getenv("PATH");
    char *keep = old ? strdup(old) : NULL;
    setenv("PATH", tmp, 1); /* a folder without ffprobe */
    VideoInfo vi;
    Status st;
    int rc = video_probe(path, &vi, &st);
    if (keep) setenv("PATH", keep, 1);
    free(keep);
    assert_int_equal(rc, ST_INPUT);
    assert_non_null(strstr(st.msg, "ffprobe: not found; install it with: apt-get install ffmpeg"));
    snprintf(path, sizeof path, "%s/fake.mp4", tmp);
    test_write_file(path, "not a video at all\n");
    assert_int_equal(video_probe(path, &vi, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "fake.mp4: not a readable video"));
    assert_true(video_is_video_name("a/B.MOV") && video_is_video_name("x.mkv") && !video_is_video_name("x.png"));
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_same_frames_as_png),
        cmocka_unit_test(test_single_video_store),
        cmocka_unit_test(test_rate),
        cmocka_unit_test(test_missing_ffmpeg_and_bad_files),
    };
    return cmocka_run_group_tests_name("video files", tests, setup, teardown);
}
