/* tests/test_cmd_frames.c: `framelaw frames` end to end through the binary (io/cli/cmd_frames.c). */
#include "tests/testutil.h"

#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include "io/data/images.h"

static char g_dir[256];

static void rm_rf(const char *dir) {
    char cmd[1200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    assert_int_equal(system(cmd), 0);
}

/* Run `framelaw ARGS` with stdout and stderr captured; returns the exit status, fills out/err. */
static int run(const char *args, char *out, size_t n_out, char *err, size_t n_err) {
    char cmd[4096], po[512], pe[512];
    snprintf(po, sizeof po, "%s/stdout.txt", g_dir);
    snprintf(pe, sizeof pe, "%s/stderr.txt", g_dir);
    snprintf(cmd, sizeof cmd, "cd '%s' && '%s' %s >'%s' 2>'%s'", g_dir, test_framelaw(), args, po, pe);
    int status = system(cmd);
    assert_true(WIFEXITED(status));
    const char *paths[2] = {po, pe};
    char *bufs[2] = {out, err};
    size_t ns[2] = {n_out, n_err};
    for (int k = 0; k < 2; k++) {
        FILE *f = fopen(paths[k], "r");
        assert_non_null(f);
        size_t got = fread(bufs[k], 1, ns[k] - 1, f);
        bufs[k][got] = 0;
        fclose(f);
    }
    return WEXITSTATUS(status);
}

static void write_frames(const char *dir, int n, int w, int h) {
    assert_true(mkdir(dir, 0755) == 0 || access(dir, F_OK) == 0);
    uint8_t px[64 * 64];   /* (h, w) */
    for (int k = 0; k < n; k++) {
        for (int i = 0; i < w * h; i++) px[i] = (uint8_t)(i * 3 + k * 11);
        char path[1024];
        snprintf(path, sizeof path, "%s/frame%d.png", dir, k + 1);
        Status st;
        if (image_write_png_gray(path, px, w, h, &st)) fail_msg("%s", st.msg);
    }
}

static int setup(void **state) {
    (void)state;
    return test_tmpdir(g_dir, sizeof g_dir) ? 0 : -1;
}
static int teardown(void **state) {
    (void)state;
    rm_rf(g_dir);
    return 0;
}

/* Expect exit status 2 and a one-line message holding `want` (issue 3: bad input gives a one-line
 * error naming the culprit, exit status 2). */
static void expect_bad(const char *args, const char *want) {
    char out[8192], err[4096];
    int rc = run(args, out, sizeof out, err, sizeof err);
    if (rc != 2 || !strstr(err, want)) fail_msg("framelaw %s: exit %d, stderr: %s (wanted '%s')", args, rc, err, want);
    char *nl = strchr(err, '\n');
    assert_true(nl && nl[1] == 0);   /* exactly one line */
    assert_non_null(strstr(err, "framelaw: "));
}

/* The labels "run1" and "run2" (io/data/glyphs.h): ink only in each row's label band, from the left
 * gap to at most 4 characters of 12 pixels, none in the 4 white pixels between band and tiles; the
 * two labels share their first 3 characters pixel for pixel and differ in the last. */
static void check_labels(const char *sheet, int w) {
    float *img;
    int iw, ih;
    Status st;
    assert_int_equal(image_load_gray(sheet, GRAY_BT601, &img, &iw, &ih, &st), 0);
    assert_int_equal(iw, w);
    long tops[2] = {4, 4 + 18 + 72 + 4};
    for (int r = 0; r < 2; r++) {
        long ink = 0, left = w, right = -1;
        for (long y = tops[r]; y < tops[r] + 18; y++)
            for (long x = 0; x < w; x++) {
                if (img[y * w + x] > 0.5f) continue;
                if (y >= tops[r] + 14) fail_msg("row %d: ink at (%ld, %ld), in the gap under the label", r, x, y);
                ink++;
                if (x < left) left = x;
                if (x > right) right = x;
            }
        if (ink < 40) fail_msg("row %d: the label has %ld dark pixels", r, ink);
        assert_int_equal(left, 4);   /* 'r' has ink in its first column */
        assert_true(right <= 4 + 4 * 12 - 2 - 1);
    }
    long same = 0, differ = 0;
    for (long y = 0; y < 14; y++)
        for (long x = 4; x < 4 + 4 * 12; x++) {
            int a = img[(tops[0] + y) * w + x] < 0.5f, b = img[(tops[1] + y) * w + x] < 0.5f;
            if (x < 4 + 3 * 12) same += a == b;
            else differ += a != b;
        }
    assert_int_equal(same, 14 * 3 * 12);
    assert_true(differ > 0);
    free(img);
}

/* A good folder: the summary names recordings, counts, size, durations, store and training set;
 * the contact sheet is a PNG of 2 rows x 3 frames; the second run reuses the store (issue 3,
 * item 7). */
static void test_summary_and_sheet(void **state) {
    (void)state;
    char d[512], a[600], b[600], out[8192], err[4096];
    snprintf(d, sizeof d, "%s/good", g_dir);
    snprintf(a, sizeof a, "%s/run1", d);
    snprintf(b, sizeof b, "%s/run2", d);
    assert_int_equal(mkdir(d, 0755), 0);
    write_frames(a, 11, 16, 12);
    write_frames(b, 7, 16, 12);
    /* central differences (3 frames): 9 + 5 samples */
    assert_int_equal(run("frames good --fps 10 --size 8x6 --derivative central --sheet sheet.png", out, sizeof out, err,
                         sizeof err), 0);
    const char *want[] = {"2 image recordings", "run1", "run2", "validation", "frame size: 8x6 (source 16x12",
                          "time step: 0.1 s", "built", "training set: 9 samples from 1 recording; validation: 5 samples",
                          "contact sheet: sheet.png", "1.00s"};
    for (size_t i = 0; i < sizeof want / sizeof want[0]; i++)
        if (!strstr(out, want[i])) fail_msg("'%s' missing from:\n%s", want[i], out);
    char sheet[600];
    snprintf(sheet, sizeof sheet, "%s/sheet.png", g_dir);
    int w, h;
    Status st;
    assert_int_equal(image_probe(sheet, &w, &h, &st), 0);
    /* 8x6 tiles enlarged 12x to 96x72; 3 columns, 2 rows, 4-pixel gaps; above each row its label:
     * 7-pixel glyphs at twice their size and a gap (18 pixels). */
    assert_int_equal(w, 3 * 96 + 4 * 4);
    assert_int_equal(h, 2 * (18 + 72) + 3 * 4);
    check_labels(sheet, w);
    assert_int_equal(run("frames good --fps 10 --size 8x6 --sheet none", out, sizeof out, err, sizeof err), 0);
    assert_non_null(strstr(out, "reused"));
    assert_null(strstr(out, "contact sheet"));
}

/* --help lists every option with its default (DEVELOPERS.md: every command has --help listing each option with its default). */
static void test_help(void **state) {
    (void)state;
    char out[8192], err[4096];
    assert_int_equal(run("frames --help", out, sizeof out, err, sizeof err), 0);
    const char *opts[] = {"--config", "--gray", "[bt601]", "--crop", "--size", "--bits", "--stride", "--fps", "[30]",
                          "--scale", "[unit]", "--derivative", "[auto]", "--window", "[7]", "--degree", "[3]",
                          "--val ", "--val-last", "--store", "--sheet", "--rebuild"};
    for (size_t i = 0; i < sizeof opts / sizeof opts[0]; i++)
        if (!strstr(out, opts[i])) fail_msg("'%s' missing from --help", opts[i]);
    assert_int_equal(run("--help", out, sizeof out, err, sizeof err), 0);
    assert_non_null(strstr(out, "frames"));
}

/* The bad inputs of issue 3, each with its message and exit status 2. */
static void test_bad_inputs(void **state) {
    (void)state;
    char p[600];
    snprintf(p, sizeof p, "%s/empty", g_dir);
    assert_int_equal(mkdir(p, 0755), 0);
    expect_bad("frames empty", "empty: no image files or recordings found");
    expect_bad("frames missing-folder", "missing-folder");

    snprintf(p, sizeof p, "%s/sizes", g_dir);
    assert_int_equal(mkdir(p, 0755), 0);
    snprintf(p, sizeof p, "%s/sizes/a", g_dir);
    write_frames(p, 4, 8, 8);
    snprintf(p, sizeof p, "%s/sizes/b", g_dir);
    write_frames(p, 4, 8, 8);
    write_frames(p, 3, 9, 8);   /* b/frame1..3 now 9x8 */
    expect_bad("frames sizes --sheet none", "sizes/b/frame1.png is 9x8, but sizes/a/frame1.png is 8x8");

    snprintf(p, sizeof p, "%s/trunc", g_dir);
    write_frames(p, 4, 8, 6);
    char cmd[1400];
    snprintf(cmd, sizeof cmd, "cp tests/reference/images/trunc_gray8.png '%s/frame3.png'", p);
    assert_int_equal(system(cmd), 0);
    expect_bad("frames trunc", "trunc/frame3.png: truncated or corrupt PNG");
    /* raw bytes from the input (an escape sequence, a byte that is not UTF-8) are shown as \xNN, never
     * sent to the terminal: the message stays one printable line (common practice) */
    expect_bad("frames 'no\x1b[31mred\xff'", "no\\x1b[31mred\\xff: No such file or directory");

    expect_bad("frames trunc --crop 4,2,5,4", "crop 4,2,5,4 lies outside the 8x6 frame of");
    expect_bad("frames trunc --fps 0", "--fps '0': the frame rate must be a positive number");
    expect_bad("frames trunc --fps -3", "--fps '-3'");

    snprintf(p, sizeof p, "%s/short", g_dir);
    write_frames(p, 2, 8, 6);
    expect_bad("frames short --sheet none", "recording 'short' has 2 frames (after stride 1), the central stencil needs at least 3");
    snprintf(p, sizeof p, "%s/short2", g_dir);
    write_frames(p, 6, 8, 6);
    expect_bad("frames short2 --derivative savgol --window 7", "needs at least 7");
    expect_bad("frames short2 --stride 3", "has 2 frames (after stride 3)");

    snprintf(p, sizeof p, "%s/ragged.csv", g_dir);
    FILE *f = fopen(p, "w");
    fputs("x,y\n1,2\n3,4\n5\n", f);
    fclose(f);
    expect_bad("frames ragged.csv", "ragged.csv:4: ragged row: 1 fields where line 1 has 2");
    f = fopen(p, "w");
    fputs("1,2\n3,four\n", f);
    fclose(f);
    expect_bad("frames ragged.csv", "ragged.csv:2: field 2 \"four\" is not a finite number");

    expect_bad("frames short2 --size 8", "--size '8'");
    expect_bad("frames short2 --gray srgb", "--gray 'srgb'");
    expect_bad("frames short2 --bogus 1", "unknown option '--bogus'");
    expect_bad("frames short2 --val nope", "validation recording 'nope' not found");
    expect_bad("frames", "which folder");
}

/* Numeric recordings: summary in channels, no contact sheet (issue 3, item 6). */
static void test_numeric(void **state) {
    (void)state;
    char p[600], out[8192], err[4096];
    snprintf(p, sizeof p, "%s/sensors", g_dir);
    assert_int_equal(mkdir(p, 0755), 0);
    for (int r = 0; r < 2; r++) {
        char fp[700];
        snprintf(fp, sizeof fp, "%s/s%d.csv", p, r);
        FILE *f = fopen(fp, "w");
        fputs("a,b,c\n", f);
        for (int i = 0; i < 50; i++) fprintf(f, "%d,%g,%g\n", i, sin(0.1 * i), cos(0.1 * i));
        fclose(f);
    }
    assert_int_equal(run("frames sensors --fps 100 --derivative savgol --window 9 --degree 4", out, sizeof out, err, sizeof err), 0);
    const char *want[] = {"2 numeric recordings", "channels: 3", "savgol stencil over 9 frames (degree 4)",
                          "training set: 42 samples", "none for numeric"};
    for (size_t i = 0; i < sizeof want / sizeof want[0]; i++)
        if (!strstr(out, want[i])) fail_msg("'%s' missing from:\n%s", want[i], out);
    /* a column named time (or t) is the clock: it gives the rate and is no channel (the same rule as
     * framelaw train); an uneven clock is refused naming the line */
    snprintf(p, sizeof p, "%s/clocked", g_dir);
    assert_int_equal(mkdir(p, 0755), 0);
    for (int r = 0; r < 2; r++) {
        char fp[700];
        snprintf(fp, sizeof fp, "%s/c%d.csv", p, r);
        FILE *f = fopen(fp, "w");
        fputs("Time,x,v\n", f);
        for (int i = 0; i < 50; i++) fprintf(f, "%.6f,%g,%g\n", 0.05 * i, sin(0.1 * i), cos(0.1 * i));
        fclose(f);
    }
    assert_int_equal(run("frames clocked", out, sizeof out, err, sizeof err), 0);
    const char *want2[] = {"channels: 2", "fps 20,", "duration"};
    for (size_t i = 0; i < sizeof want2 / sizeof want2[0]; i++)
        if (!strstr(out, want2[i])) fail_msg("'%s' missing from:\n%s", want2[i], out);
    snprintf(p, sizeof p, "%s/uneven.csv", g_dir);
    FILE *f = fopen(p, "w");
    fputs("t,x\n0,1\n0.1,2\n0.2,3\n0.35,4\n0.4,5\n", f);
    fclose(f);
    expect_bad("frames uneven.csv", "uneven.csv:5 (data row 4): time step 0.15 (from 0.2 to 0.35) differs from the median step 0.1");
}

/* --config reads the data.* keys of a run config (docs/config.md); flags override them. */
static void test_config(void **state) {
    (void)state;
    char p[600], out[8192], err[4096];
    snprintf(p, sizeof p, "%s/cfgframes", g_dir);
    write_frames(p, 5, 12, 8);
    snprintf(p, sizeof p, "%s/run.json", g_dir);
    FILE *f = fopen(p, "w");
    fputs("{\"data\": {\"frames\": \"cfgframes\", \"fps\": 4, \"size\": [6, 4]}}\n", f);
    fclose(f);
    int rc = run("frames --config run.json --sheet none", out, sizeof out, err, sizeof err);
    if (rc) fail_msg("exit %d: %s", rc, err);
    assert_non_null(strstr(out, "frame size: 6x4"));
    assert_non_null(strstr(out, "fps 4,"));
    assert_int_equal(run("frames --config run.json --fps 8 --sheet none", out, sizeof out, err, sizeof err), 0);
    assert_non_null(strstr(out, "fps 8,"));
    expect_bad("frames --config nothere.json", "nothere.json");
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_summary_and_sheet), cmocka_unit_test(test_help), cmocka_unit_test(test_bad_inputs),
        cmocka_unit_test(test_numeric),           cmocka_unit_test(test_config),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
