/* tests/test_moved_run.c: a run follows its frames to a new place (io/run/rundata.h,
 * run_frames_move) through the binary. Four CSV recordings of a rotation seen through 6 channels; a
 * 20-epoch run. Then the frames folder is moved: export names the old place and the fix; a folder
 * with other frames is refused; the real new place is taken, config.json follows (with
 * data.frames_origin), and a resume to 30 epochs gives the same equations.json, byte for byte, as
 * the same run resumed where its frames never moved (the config digest still matches the
 * checkpoints). A copy with new file times (so the store is rebuilt) is accepted too; a run that
 * records no content digest and whose old place is gone is refused with the reason. */
#include <sys/stat.h>

#include "tests/testutil.h"

static char tmp[256];

static void write_data(const char *dir, double bump) {
    assert_int_equal(mkdir(dir, 0777), 0);
    for (int k = 0; k < 4; k++) {
        char path[600];
        snprintf(path, sizeof path, "%s/rec%d.csv", dir, k);
        FILE *f = fopen(path, "w");
        assert_non_null(f);
        for (int i = 0; i < 90; i++) {
            double t = i / 30.0, z0 = sin(2 * t + k), z1 = cos(2 * t + k);
            for (int c = 0; c < 6; c++)
                fprintf(f, "%s%.9g", c ? "," : "", sin(c + 1.0) * z0 + cos(2.0 * c + 1) * z1 + (i == 50 ? bump : 0));
            fputc('\n', f);
        }
        fclose(f);
    }
}

static void write_config(const char *name, const char *data, const char *run, int epochs) {
    char path[600], text[2048];
    snprintf(path, sizeof path, "%s/%s", tmp, name);
    snprintf(text, sizeof text,
             "{\"data\": {\"frames\": \"%s\", \"fps\": 30, \"derivative\": {\"method\": \"central\"}},\n"
             " \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [8], \"activation\": \"tanh\", \"init\": \"pca\", "
             "\"derivatives\": \"frames\"},\n"
             " \"library\": {\"degree\": 1, \"trig\": false},\n"
             " \"train\": {\"batch\": 32, \"epochs\": %d, \"threads\": 1, \"validate_every\": 5},\n"
             " \"threshold\": {\"select\": \"none\", \"every\": 10, \"refine_epochs\": 5},\n"
             " \"checkpoint\": {\"every\": 10, \"keep\": 2},\n"
             " \"output\": \"%s\"}\n",
             data, epochs, run);
    test_write_file(path, text);
}

static int run(const char *fmt, const char *a, const char *b, char *out, size_t n) {
    char args[2000];
    snprintf(args, sizeof args, fmt, a, b);
    return test_run_capture(args, out, n);
}

static char *slurp2(const char *dir, const char *name) {
    char path[700];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    char *s = test_slurp(path);
    if (!s) fail_msg("%s missing", path);
    return s;
}

static void test_frames_moved(void **state) {
    (void)state;
    char data[300], moved[300], other[300], copy[300], runa[300], runb[300], cfg[400], out[8192], cmd[2000];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(data, sizeof data, "%s/data", tmp);
    snprintf(moved, sizeof moved, "%s/disk", tmp);
    snprintf(other, sizeof other, "%s/other", tmp);
    snprintf(copy, sizeof copy, "%s/copy", tmp);
    snprintf(runa, sizeof runa, "%s/a", tmp);
    snprintf(runb, sizeof runb, "%s/b", tmp);
    write_data(data, 0);
    write_data(other, 0.5); /* one value per recording differs */
    write_config("a.json", data, runa, 20);
    write_config("b.json", data, runb, 20);
    for (int i = 0; i < 2; i++) {
        snprintf(cfg, sizeof cfg, "%s/%s.json", tmp, i ? "b" : "a");
        if (run("train '%s' --quiet%s", cfg, "", out, sizeof out)) fail_msg("train: %s", out);
    }
    /* the frames move; the run still names the old place */
    assert_int_equal(mkdir(moved, 0777), 0);
    strcat(moved, "/data");
    assert_int_equal(rename(data, moved), 0);
    int rc = run("export '%s'%s", runb, "", out, sizeof out);
    if (rc != 2 || !strstr(out, "the run's frames are not at") || !strstr(out, "--set data.frames=NEW"))
        fail_msg("export of a run whose frames moved: exit %d: %s", rc, out);
    rc = run("resume '%s' --set train.epochs=30%s", runb, "", out, sizeof out);
    if (rc != 2 || !strstr(out, "framelaw resume")) fail_msg("resume: exit %d: %s", rc, out);
    /* other frames are refused, and nothing changes */
    char *before = slurp2(runb, "config.json");
    rc = run("export '%s' --set data.frames='%s'", runb, other, out, sizeof out);
    if (rc != 2 || !strstr(out, "not the frames this run was trained on")) fail_msg("other frames: exit %d: %s", rc, out);
    char *after = slurp2(runb, "config.json");
    assert_string_equal(before, after);
    free(after);
    /* only data.frames may be given to export */
    rc = run("export '%s' --set train.epochs=3%s", runb, "", out, sizeof out);
    if (rc != 2 || !strstr(out, "only data.frames=NEW")) fail_msg("export --set: exit %d: %s", rc, out);
    /* the new place: config.json follows, the move is in provenance.json */
    rc = run("export '%s' --set=data.frames='%s'", runb, moved, out, sizeof out);
    if (rc || !strstr(out, "the frames moved from")) fail_msg("export to the new place: exit %d: %s", rc, out);
    after = slurp2(runb, "config.json");
    snprintf(cmd, sizeof cmd, "\"frames\":\t\"%s\"", moved);
    if (!strstr(after, cmd)) fail_msg("config.json does not name %s:\n%s", moved, after);
    snprintf(cmd, sizeof cmd, "\"frames_origin\":\t\"%s\"", data);
    if (!strstr(after, cmd)) fail_msg("config.json does not keep the origin %s:\n%s", data, after);
    free(before);
    free(after);
    char *prov = slurp2(runb, "provenance.json");
    assert_non_null(strstr(prov, "\"command\":\t\"move\""));
    free(prov);
    /* resumed where it moved to: the same bytes as the run whose frames stay (put back for it) */
    rc = run("resume '%s' --set train.epochs=30 --quiet%s", runb, "", out, sizeof out);
    if (rc) fail_msg("resume after the move: exit %d: %s", rc, out);
    snprintf(cmd, sizeof cmd, "cp -r '%s' '%s'", moved, data);
    assert_int_equal(system(cmd), 0);
    rc = run("resume '%s' --set train.epochs=30 --quiet%s", runa, "", out, sizeof out);
    if (rc) fail_msg("resume of the run that stayed: exit %d: %s", rc, out);
    char *ea = slurp2(runa, "equations.json"), *eb = slurp2(runb, "equations.json");
    assert_string_equal(ea, eb);
    free(ea);
    free(eb);
    /* a copy with new file times and no store: the store is rebuilt, the content is the same */
    assert_int_equal(mkdir(copy, 0777), 0);
    snprintf(cmd, sizeof cmd, "cp '%s'/*.csv '%s'", moved, copy);
    assert_int_equal(system(cmd), 0);
    rc = run("resume '%s' --set data.frames='%s' --set train.epochs=35 --quiet", runb, copy, out, sizeof out);
    if (rc) fail_msg("resume onto a copy: exit %d: %s", rc, out);
    /* a run that records no content digest (from before it was recorded), its old place gone */
    snprintf(cmd, sizeof cmd, "%s/provenance.json", runb);
    test_write_file(cmd, "{\"format\": \"framelaw-provenance\", \"version\": 1, \"sessions\": []}\n");
    snprintf(cmd, sizeof cmd, "rm -r '%s'", copy);
    assert_int_equal(system(cmd), 0);
    rc = run("export '%s' --set data.frames='%s'", runb, moved, out, sizeof out);
    if (rc != 2 || !strstr(out, "records no digest of its frames' content"))
        fail_msg("no recorded digest: exit %d: %s", rc, out);
    test_rmtree(tmp);
}

int main(void) {
    const struct CMUnitTest tests[] = {cmocka_unit_test(test_frames_moved)};
    return cmocka_run_group_tests(tests, NULL, NULL);
}
