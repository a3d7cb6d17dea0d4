/* tests/test_runlog.c: the training log, log.csv (io/run/runlog.h): its bytes as docs/formats.md
 * describes them, trimming on resume, and reading the rows back. */
#include "tests/testutil.h"

#include <unistd.h>

#include "io/run/runlog.h"

static const char HEADER[] = "epoch,phase,lr,loss,reconstruction,dx,dz,l1,active,validation,seconds,epoch_seconds\n";

static char *log_text(const char *dir) {
    char p[600];
    snprintf(p, sizeof p, "%s/log.csv", dir);
    return test_slurp(p);
}

/* The header, then one row per epoch: lr %.6g, the losses %.8g, seconds %.3f, epoch_seconds %.4f,
 * validation empty when not computed (docs/formats.md, "log.csv"). */
static void test_write_bytes(void **state) {
    (void)state;
    char dir[256];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    RunLogWriter w;
    Status st;
    assert_int_equal(runlog_open(&w, dir, 0, 0, &st), 0);
    RunLogRow a = {1, RUNLOG_WARMUP, 0.001f, 1.0 / 3, 0.25, 1e-9, 12345.678901234, 0, 14, 0, NAN, 0.5, 0.5};
    RunLogRow b = {2, RUNLOG_TRAIN, 0.001f, 0.125, 0.0625, 2, 3, 0.5, 7, 1, 0.2, 1.25, 0.75};
    RunLogRow c = {3, RUNLOG_REFINE, 1e-4, 0.1, 0.05, 0.02, 0.03, 0.4, 7, 0, NAN, 2.0004, 0.00005};
    assert_int_equal(runlog_append(&w, &a, &st), 0);
    assert_int_equal(runlog_append(&w, &b, &st), 0);
    assert_int_equal(runlog_append(&w, &c, &st), 0);
    runlog_close(&w);
    char *t = log_text(dir);
    char want[2048];
    /* 0.001f is 0.0010000000474974513 as a float: %.6g prints 0.001 */
    snprintf(want, sizeof want,
             "%s"
             "1,warmup,0.001,0.33333333,0.25,1e-09,12345.679,0,14,,0.500,0.5000\n"
             "2,train,0.001,0.125,0.0625,2,3,0.5,7,0.2,1.250,0.7500\n"
             "3,refine,0.0001,0.1,0.05,0.02,0.03,0.4,7,,2.000,0.0001\n",
             HEADER);
    assert_string_equal(t, want);
    free(t);
    test_rmtree(dir);
}

/* Resume: the header and the rows up to the checkpoint's epoch stay, later rows and a row cut short
 * go; a missing log starts again from the header. */
static void test_trim_on_resume(void **state) {
    (void)state;
    char dir[256], p[600];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(p, sizeof p, "%s/log.csv", dir);
    char text[1024];
    snprintf(text, sizeof text, "%s1,train,0.001,1,1,1,1,1,5,,0.100,0.1000\n2,train,0.001,1,1,1,1,1,5,,0.200,0.1000\n"
             "3,train,0.001,1,1,1,1,1,5,,0.300,0.1000\n1", HEADER);
    test_write_file(p, text);
    RunLogWriter w;
    Status st;
    assert_int_equal(runlog_open(&w, dir, 1, 2, &st), 0);
    RunLogRow r3 = {3, RUNLOG_TRAIN, 0.001, 2, 2, 2, 2, 2, 5, 0, NAN, 0.4, 0.1};
    assert_int_equal(runlog_append(&w, &r3, &st), 0);
    runlog_close(&w);
    char *t = log_text(dir);
    char want[1024];
    snprintf(want, sizeof want, "%s1,train,0.001,1,1,1,1,1,5,,0.100,0.1000\n2,train,0.001,1,1,1,1,1,5,,0.200,0.1000\n"
             "3,train,0.001,2,2,2,2,2,5,,0.400,0.1000\n", HEADER);
    assert_string_equal(t, want);
    free(t);
    unlink(p);
    assert_int_equal(runlog_open(&w, dir, 1, 2, &st), 0);
    runlog_close(&w);
    t = log_text(dir);
    assert_string_equal(t, HEADER);
    free(t);
    test_rmtree(dir);
}

/* Reading: every figure of a row, the last validation, a row being written left out, columns of
 * an older log missing, and errors that name the file and the line. */
static void test_read(void **state) {
    (void)state;
    char dir[256], p[600];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(p, sizeof p, "%s/log.csv", dir);
    char text[1024];
    snprintf(text, sizeof text, "%s1,warmup,0.001,0.5,0.25,0.125,0.0625,0.03125,14,,0.100,0.1000\n"
             "2,refine,0.002,0.4,0.2,0.1,0.05,0.025,7,0.75,0.200,0.1000\n3,train,0.0", HEADER);
    test_write_file(p, text);
    RunLog L;
    Status st;
    assert_int_equal(runlog_read(dir, &L, &st), 0);
    assert_int_equal(L.n, 2);
    assert_true(L.have & RUNLOG_HAVE_EPOCH_SECONDS && L.have & RUNLOG_HAVE_PHASE);
    const RunLogRow *a = &L.rows[0], *b = &L.rows[1];
    assert_int_equal(a->epoch, 1);
    assert_int_equal(a->phase, RUNLOG_WARMUP);
    assert_true(a->lr == 0.001 && a->loss == 0.5 && a->reconstruction == 0.25 && a->dx == 0.125);
    assert_true(a->dz == 0.0625 && a->l1 == 0.03125 && a->seconds == 0.1 && a->epoch_seconds == 0.1);
    assert_int_equal(a->active, 14);
    assert_false(a->validated);
    assert_true(isnan(a->validation));
    assert_int_equal(b->phase, RUNLOG_REFINE);
    assert_true(b->validated && b->validation == 0.75);
    runlog_free(&L);

    /* an older writer without some columns */
    test_write_file(p, "epoch,phase,loss,active\n1,train,0.5,3\n");
    assert_int_equal(runlog_read(dir, &L, &st), 0);
    assert_int_equal(L.n, 1);
    assert_false(L.have & RUNLOG_HAVE_DX);
    assert_true(isnan(L.rows[0].dx) && L.rows[0].active == 3);
    runlog_free(&L);

    test_write_file(p, "when,what\n1,2\n");
    assert_int_equal(runlog_read(dir, &L, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "log.csv: no column \"epoch\""));
    test_write_file(p, "epoch,phase,loss\n1,train,0.5\n2.5,train,0.4\n");
    assert_int_equal(runlog_read(dir, &L, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "log.csv:3: the epoch is not a whole number"));
    test_write_file(p, "epoch,phase,loss\n1,sprint,0.5\n");
    assert_int_equal(runlog_read(dir, &L, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "log.csv:2: field 2 (phase) \"sprint\" is not a number"));
    unlink(p);
    assert_int_equal(runlog_read(dir, &L, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "log.csv: cannot open"));
    test_rmtree(dir);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_write_bytes),
        cmocka_unit_test(test_trim_on_resume),
        cmocka_unit_test(test_read),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
