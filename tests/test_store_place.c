/* tests/test_store_place.c: where the frame store lives (data.store, --store, the cache folder when
 * the frames' folder is read-only), status messages that carry an earlier message, and gaps in the
 * numbering of frames seen through `framelaw frames` (issue 19, items 5 and 6; docs/frames.md).
 *
 * Read-only folders: chmod 0555 stops writes for an ordinary user only. When the suite runs as root
 * (CI containers), the read-only cases run in a child that drops to user and group 65534 (nobody);
 * when that is impossible, or a probe write still succeeds, they are skipped with a printed note. */
#include "tests/testutil.h"

#include <dirent.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include "io/data/images.h"
#include "io/data/store.h"

static void write_frames_numbered(const char *dir, const int *nums, int n) {
    assert_true(mkdir(dir, 0755) == 0 || access(dir, F_OK) == 0);
    uint8_t px[6 * 4]; /* (4, 6) */
    for (int k = 0; k < n; k++) {
        for (int i = 0; i < 24; i++) px[i] = (uint8_t)(i * 5 + k * 17);
        char path[1024];
        snprintf(path, sizeof path, "%s/frame%04d.png", dir, nums[k]);
        Status st;
        if (image_write_png_gray(path, px, 6, 4, &st)) fail_msg("%s", st.msg);
    }
}

static void write_frames(const char *dir, int n) {
    int nums[64];
    for (int k = 0; k < n; k++) nums[k] = k + 1;
    write_frames_numbered(dir, nums, n);
}

/* Entries of dir whose names start with prefix. */
static int count_entries(const char *dir, const char *prefix) {
    DIR *d = opendir(dir);
    if (!d) return -1;
    int n = 0;
    for (struct dirent *e; (e = readdir(d));) n += !strncmp(e->d_name, prefix, strlen(prefix));
    closedir(d);
    return n;
}

/* Run `framelaw ARGS` with stderr and stdout to files in tmp; returns the exit status, stderr in err. */
static int run_cli(const char *tmp, const char *args, char *out, size_t n_out, char *err, size_t n_err) {
    char cmd[8192], po[600], pe[600];
    snprintf(po, sizeof po, "%s/out.txt", tmp);
    snprintf(pe, sizeof pe, "%s/err.txt", tmp);
    snprintf(cmd, sizeof cmd, "cd '%s' && '%s' %s >'%s' 2>'%s'", tmp, test_framelaw(), args, po, pe);
    int status = system(cmd);
    char *o = test_slurp(po), *e = test_slurp(pe);
    snprintf(out, n_out, "%s", o ? o : "");
    snprintf(err, n_err, "%s", e ? e : "");
    free(o), free(e);
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

/* status_set formats into a copy, so a message may carry the one before it (the store writer's
 * "framelaw:  (set the store path to a writable place)" and the Isomap start's doubled prefix came
 * from formatting a message into itself; C11 7.21.6.6: snprintf between overlapping objects is
 * undefined). */
static void test_status_message_into_itself(void **state) {
    (void)state;
    Status st;
    status_set(&st, ST_INPUT, "frames/a.png: cannot decode image");
    assert_int_equal(status_set(&st, ST_RUNTIME, "while building: %s (see docs/frames.md)", st.msg), ST_RUNTIME);
    assert_string_equal(st.msg, "while building: frames/a.png: cannot decode image (see docs/frames.md)");
    status_set(&st, st.code, "%s; %s", st.msg, st.msg); /* twice, as the first and a later argument */
    assert_string_equal(st.msg, "while building: frames/a.png: cannot decode image (see docs/frames.md); while "
                                "building: frames/a.png: cannot decode image (see docs/frames.md)");
}

/* A store path whose folder cannot be written: exit status 2, one line that names the path and
 * data.store / --store, and no temporary left behind. /proc refuses new files even to root. */
static void test_unwritable_store_path(void **state) {
    (void)state;
    char tmp[256], frames[512], out[8192], err[4096], args[1200];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(frames, sizeof frames, "%s/f", tmp);
    write_frames(frames, 5);
    FrameScan scan;
    Status st;
    assert_int_equal(frames_scan(frames, &scan, &st), 0);
    FrameSettings s = frame_settings_default();
    snprintf(s.store_path, sizeof s.store_path, "/proc/framelaw-test.store");
    FrameStore fs;
    StoreOpenInfo info;
    assert_int_equal(store_open_for(&scan, &s, 0, &fs, &info, &st), ST_INPUT);
    print_message("%s\n", st.msg);
    assert_true(!strncmp(st.msg, "/proc/framelaw-test.store", 25)); /* not an empty message */
    assert_non_null(strstr(st.msg, "set data.store"));
    assert_int_equal(count_entries("/proc", "framelaw-test"), 0);
    frames_scan_free(&scan);
    /* a folder that cannot be made */
    snprintf(args, sizeof args, "frames f --sheet none --store /proc/framelaw-test/x.store");
    assert_int_equal(run_cli(tmp, args, out, sizeof out, err, sizeof err), 2);
    assert_non_null(strstr(err, "framelaw: /proc/framelaw-test/x.store: cannot make the frame store's folder"));
    assert_non_null(strstr(err, "--store"));
    char *nl = strchr(err, '\n');
    assert_true(nl && nl[1] == 0); /* one line */
    test_rmtree(tmp);
}

/* data.store (here --store, and through --config) puts the store where it says, making its folder;
 * nothing is written beside the frames. */
static void test_store_where_asked(void **state) {
    (void)state;
    char tmp[256], frames[512], cfg[512], out[8192], err[4096], path[700];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(frames, sizeof frames, "%s/f", tmp);
    write_frames(frames, 5);
    assert_int_equal(run_cli(tmp, "frames f --sheet none --store stores/a/f.store", out, sizeof out, err, sizeof err), 0);
    assert_non_null(strstr(out, "frame store: stores/a/f.store"));
    snprintf(path, sizeof path, "%s/stores/a/f.store", tmp);
    assert_int_equal(access(path, F_OK), 0);
    assert_int_equal(count_entries(frames, ".framelaw-store"), 0);
    /* from a config: relative to the config file's folder */
    snprintf(cfg, sizeof cfg, "%s/c.json", tmp);
    test_write_file(cfg, "{\"data\": {\"frames\": \"f\", \"fps\": 25, \"store\": \"cache2/f.store\"}}\n");
    assert_int_equal(run_cli(tmp, "frames --config c.json --sheet none", out, sizeof out, err, sizeof err), 0);
    snprintf(path, sizeof path, "%s/cache2/f.store", tmp);
    assert_int_equal(access(path, F_OK), 0);
    assert_int_equal(count_entries(frames, ".framelaw-store"), 0);
    test_rmtree(tmp);
}

/* The read-only cases, run as the current (non-root) user. Returns 0 when every check passed, 77
 * when writes into a 0555 folder still succeed (skipped), else 1 after printing the failure. */
#define CHECK(c)                                                                  \
    do {                                                                          \
        if (!(c)) {                                                               \
            fprintf(stderr, "%s:%d: check failed: %s\n", __FILE__, __LINE__, #c); \
            return 1;                                                             \
        }                                                                         \
    } while (0)

static int readonly_checks(const char *tmp) {
    char ro[600], cache[600], probe[700];
    snprintf(ro, sizeof ro, "%s/ro", tmp);
    snprintf(cache, sizeof cache, "%s/cache", tmp);
    snprintf(probe, sizeof probe, "%s/probe", ro);
    FILE *pf = fopen(probe, "w");
    if (pf) { /* chmod does not stop this user */
        fclose(pf);
        unlink(probe);
        return 77;
    }
    setenv("XDG_CACHE_HOME", cache, 1);
    FrameScan scan;
    Status st;
    CHECK(frames_scan(ro, &scan, &st) == 0);
    FrameSettings s = frame_settings_default();
    FrameStore fs;
    StoreOpenInfo info;
    /* 1. no store beside the frames: built in the cache, with a note; nothing in the frames' folder */
    CHECK(store_open_for(&scan, &s, 0, &fs, &info, &st) == 0);
    fprintf(stderr, "note: %s\n", info.note);
    CHECK(info.built && info.cached);
    CHECK(!strncmp(info.path, cache, strlen(cache)) && strstr(info.path, "/framelaw/ro-"));
    CHECK(strstr(info.note, "/ro is not writable") && strstr(info.note, info.path) && strstr(info.note, "data.store"));
    CHECK(fs.n_frames == 5);
    store_close(&fs);
    CHECK(count_entries(ro, ".") == 2); /* "." and "..": no store, no temporary */
    /* 2. the next open reuses it; other settings get a file of their own */
    CHECK(store_open_for(&scan, &s, 0, &fs, &info, &st) == 0);
    CHECK(!info.built && info.cached);
    store_close(&fs);
    char first[4096];
    snprintf(first, sizeof first, "%s", info.path);
    FrameSettings s2 = s;
    s2.width = 3, s2.height = 2;
    CHECK(store_open_for(&scan, &s2, 0, &fs, &info, &st) == 0);
    CHECK(info.built && strcmp(info.path, first));
    store_close(&fs);
    /* 3. a store asked for inside the read-only folder: bad input naming it, nothing left there */
    snprintf(s2.store_path, sizeof s2.store_path, "%s/mine.store", ro);
    CHECK(store_open_for(&scan, &s2, 0, &fs, &info, &st) == ST_INPUT);
    fprintf(stderr, "error: %s\n", st.msg);
    CHECK(!strncmp(st.msg, s2.store_path, strlen(s2.store_path)) && strstr(st.msg, "set data.store"));
    CHECK(count_entries(ro, ".") == 2);
    /* 4. no cache folder to be had: bad input that says what to set */
    unsetenv("XDG_CACHE_HOME");
    char *home = getenv("HOME") ? strdup(getenv("HOME")) : NULL;
    unsetenv("HOME");
    CHECK(store_open_for(&scan, &s, 0, &fs, &info, &st) == ST_INPUT);
    CHECK(strstr(st.msg, "not writable") && strstr(st.msg, "set data.store"));
    if (home) setenv("HOME", home, 1);
    free(home);
    setenv("XDG_CACHE_HOME", cache, 1);
    /* 5. the command: exit 0, the note on stderr, the cache path in the summary */
    if (access(test_framelaw(), X_OK) == 0) {
        char args[1200], out[8192], err[4096];
        snprintf(args, sizeof args, "frames '%s' --sheet none", ro);
        char cmd[8192];
        snprintf(cmd, sizeof cmd, "XDG_CACHE_HOME='%s' '%s' %s 2>&1", cache, test_framelaw(), args);
        FILE *p = popen(cmd, "r");
        CHECK(p);
        size_t got = fread(out, 1, sizeof out - 1, p);
        out[got] = 0;
        int status = pclose(p);
        fprintf(stderr, "%s", out);
        CHECK(WIFEXITED(status) && WEXITSTATUS(status) == 0);
        CHECK(strstr(out, "framelaw: note: ") && strstr(out, "is not writable"));
        snprintf(err, sizeof err, "frame store: %s/framelaw/ro-", cache);
        CHECK(strstr(out, err));
    } else {
        fprintf(stderr, "note: %s is not executable by this user: the command's part skipped\n", test_framelaw());
    }
    frames_scan_free(&scan);
    return 0;
}

/* A read-only frames folder (issue 19, item 6): the store goes to the cache folder with a note; a
 * store asked for in the read-only folder is refused as bad input; nothing is written there. */
static void test_readonly_frames_folder(void **state) {
    (void)state;
    char tmp[256], ro[600], cache[600];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(ro, sizeof ro, "%s/ro", tmp);
    snprintf(cache, sizeof cache, "%s/cache", tmp);
    write_frames(ro, 5);
    assert_int_equal(mkdir(cache, 0777), 0);
    assert_int_equal(chmod(cache, 0777), 0); /* writable by whoever runs the checks */
    assert_int_equal(chmod(tmp, 0755), 0);
    assert_int_equal(chmod(ro, 0555), 0);
    fflush(NULL);
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        if (geteuid() == 0 && (setgid(65534) != 0 || setuid(65534) != 0)) _exit(78);
        _exit(readonly_checks(tmp));
    }
    int status;
    assert_int_equal(waitpid(pid, &status, 0), pid);
    chmod(ro, 0755);
    test_rmtree(tmp);
    assert_true(WIFEXITED(status));
    int rc = WEXITSTATUS(status);
    if (rc == 77 || rc == 78) {
        print_message("note: read-only checks skipped: %s\n",
                      rc == 77 ? "a 0555 folder is writable by this user (root without a way to drop privileges)"
                               : "running as root and cannot drop to user 65534");
        return;
    }
    if (rc != 0) fail_msg("read-only checks failed (see above)");
}

/* A current store beside read-only frames is used where it is: nothing goes to the cache. */
static void test_readonly_with_store_beside(void **state) {
    (void)state;
    char tmp[256], ro[600], cache[600];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(ro, sizeof ro, "%s/ro", tmp);
    snprintf(cache, sizeof cache, "%s/cache", tmp);
    write_frames(ro, 5);
    FrameScan scan;
    Status st;
    assert_int_equal(frames_scan(ro, &scan, &st), 0);
    FrameSettings s = frame_settings_default();
    FrameStore fs;
    StoreOpenInfo info;
    assert_int_equal(store_open_for(&scan, &s, 0, &fs, &info, &st), 0);
    assert_true(info.built && !info.cached);
    store_close(&fs);
    frames_scan_free(&scan);
    assert_int_equal(mkdir(cache, 0777), 0);
    assert_int_equal(chmod(cache, 0777), 0);
    assert_int_equal(chmod(tmp, 0755), 0);
    assert_int_equal(chmod(ro, 0555), 0);
    fflush(NULL);
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        if (geteuid() == 0 && (setgid(65534) != 0 || setuid(65534) != 0)) _exit(78);
        setenv("XDG_CACHE_HOME", cache, 1);
        FrameScan sc;
        Status s2;
        FrameStore f2;
        StoreOpenInfo i2;
        if (frames_scan(ro, &sc, &s2) || store_open_for(&sc, &s, 0, &f2, &i2, &s2)) _exit(1);
        int ok = !i2.built && !i2.cached && !i2.note[0] && strstr(i2.path, "/ro/.framelaw-store") &&
                 count_entries(cache, "framelaw") == 0;
        store_close(&f2);
        frames_scan_free(&sc);
        _exit(ok ? 0 : 1);
    }
    int status;
    assert_int_equal(waitpid(pid, &status, 0), pid);
    chmod(ro, 0755);
    test_rmtree(tmp);
    assert_true(WIFEXITED(status));
    if (WEXITSTATUS(status) == 78) {
        print_message("note: skipped: running as root and cannot drop to user 65534\n");
        return;
    }
    assert_int_equal(WEXITSTATUS(status), 0);
}

/* Gaps seen through the command (issue 19, item 5): a warning naming the folder and the missing
 * numbers, the pieces as recordings in the table, `--val NAME` holding out every piece of NAME; a
 * piece too short for the stencil: exit status 2, naming it and saying what to do. */
static void test_frames_command_gaps(void **state) {
    (void)state;
    char tmp[256], d[512], a[600], b[600], out[8192], err[4096];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(d, sizeof d, "%s/g", tmp);
    assert_int_equal(mkdir(d, 0755), 0);
    snprintf(a, sizeof a, "%s/take01", d);
    snprintf(b, sizeof b, "%s/take02", d);
    static const int gap[] = {1, 2, 3, 4, 5, 9, 10, 11, 12, 13};
    write_frames_numbered(a, gap, 10);
    write_frames(b, 6);
    /* central differences (3 frames), so that the sample counts below are the pieces' lengths - 2 */
    assert_int_equal(run_cli(tmp, "frames g --sheet none --fps 10 --val take01 --derivative central", out, sizeof out, err,
                             sizeof err), 0);
    print_message("%s%s", err, out);
    assert_non_null(strstr(err, "framelaw: warning: g/take01: frame numbers 6-8 missing: split into 2 recordings, "
                                "take01-part1 to take01-part2"));
    static const struct {
        const char *name;
        int n;
        const char *split;
    } rows[] = {{"take01-part1", 5, "validation"}, {"take01-part2", 5, "validation"}, {"take02", 6, "training"}};
    for (int r = 0; r < 3; r++) { /* name, source and stored frames, duration (n - 1) / fps, split */
        char row[200];
        snprintf(row, sizeof row, "  %-24s %8d %8d %9.2fs  %s\n", rows[r].name, rows[r].n, rows[r].n,
                 (rows[r].n - 1) / 10.0, rows[r].split);
        if (!strstr(out, row)) fail_msg("no row '%s'", row);
    }
    assert_non_null(strstr(out, "training set: 4 samples from 1 recording; validation: 6 samples from 2 recordings"));
    /* one frame between two gaps: a piece of one frame */
    static const int lone[] = {1, 2, 3, 4, 5, 7, 9, 10, 11, 12};
    char c[600];
    snprintf(c, sizeof c, "%s/h", tmp);
    write_frames_numbered(c, lone, 10);
    assert_int_equal(run_cli(tmp, "frames h --sheet none --fps 10", out, sizeof out, err, sizeof err), 2);
    print_message("%s", err);
    assert_non_null(strstr(err, "framelaw: warning: h: frame numbers 6, 8 missing: split into 3 recordings"));
    char *nl = strchr(err, '\n'); /* two lines: the warning, then the error */
    assert_non_null(nl);
    const char *last = nl + 1;
    assert_true(!strncmp(last, "framelaw: recording 'h-part2' has 1 frames", 42));
    assert_non_null(strstr(last, "restore the missing frames"));
    nl = strchr(last, '\n');
    assert_true(nl && nl[1] == 0);
    test_rmtree(tmp);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_status_message_into_itself),
        cmocka_unit_test(test_unwritable_store_path),
        cmocka_unit_test(test_store_where_asked),
        cmocka_unit_test(test_readonly_frames_folder),
        cmocka_unit_test(test_readonly_with_store_beside),
        cmocka_unit_test(test_frames_command_gaps),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
