/* tests/test_series.c: CSV and .npy readers, .npy writer (io/data/series.h). */
#include "tests/testutil.h"

#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "io/data/series.h"

#define REF "tests/reference/series/"

static void write_text(const char *path, const char *text) {
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    fputs(text, f);
    fclose(f);
}

static char *slurp(const char *path, long *n) {
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    fseek(f, 0, SEEK_END);
    *n = ftell(f);
    fseek(f, 0, SEEK_SET);
    char *b = malloc((size_t)*n + 1);
    assert_int_equal(fread(b, 1, (size_t)*n, f), (size_t)*n);
    fclose(f);
    return b;
}

/* v[r, c] = 10 r + c + 0.25 in every fixture (tests/reference/make_series.py). */
static void check_grid(const Series *s, long rows, int cols, double scale, int truncate) {
    assert_int_equal(s->rows, rows);
    assert_int_equal(s->cols, cols);
    for (long r = 0; r < rows; r++)
        for (int c = 0; c < cols; c++) {
            double v = scale * (10.0 * r + c + 0.25);
            if (truncate) v = trunc(v);
            assert_close(s->d[r * cols + c], v, 1e-6, 0);
        }
}

/* .npy files written by NumPy's numpy.lib.format.write_array (NumPy, "A Simple File Format for
 * NumPy Arrays", format versions 1.0 and 2.0), fixtures from tests/reference/make_series.py. */
static void test_npy_numpy_fixtures(void **state) {
    (void)state;
    Series s;
    Status st;
    assert_int_equal(series_read(REF "f8_4x3.npy", &s, &st), 0);
    check_grid(&s, 4, 3, 1, 0);
    series_free(&s);
    assert_int_equal(series_read(REF "f4_5x2.npy", &s, &st), 0);
    check_grid(&s, 5, 2, 1, 0);
    series_free(&s);
    assert_int_equal(series_read(REF "f8_6.npy", &s, &st), 0);
    check_grid(&s, 6, 1, 1, 0);
    series_free(&s);
    assert_int_equal(series_read(REF "f8_4x3_fortran.npy", &s, &st), 0);
    check_grid(&s, 4, 3, 1, 0);
    series_free(&s);
    assert_int_equal(series_read(REF "f8_4x3_v2.npy", &s, &st), 0);
    check_grid(&s, 4, 3, 1, 0);
    series_free(&s);
    assert_int_equal(series_read(REF "i8_3x2.npy", &s, &st), 0);
    check_grid(&s, 3, 2, 10, 1);
    series_free(&s);
}

/* Our writer produces the same bytes as NumPy's writer for the same array (format 1.0, header
 * padded to 64 bytes), and reads back. Source: the NumPy fixture above. */
static void test_npy_writer_matches_numpy(void **state) {
    (void)state;
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/out.npy", dir);
    double v[12];   /* (4, 3) */
    for (int r = 0; r < 4; r++)
        for (int c = 0; c < 3; c++) v[r * 3 + c] = 10.0 * r + c + 0.25;
    Status st;
    assert_int_equal(npy_write_f64(path, v, 4, 3, &st), 0);
    long na, nb;
    char *a = slurp(path, &na), *b = slurp(REF "f8_4x3.npy", &nb);
    assert_int_equal(na, nb);
    assert_memory_equal(a, b, (size_t)na);
    free(a), free(b);
    /* float32 and 1-D round trips. */
    float f[6] = {1.5f, -2.25f, 3, 4, 5, 6e-3f};   /* (3, 2) */
    assert_int_equal(npy_write_f32(path, f, 3, 2, &st), 0);
    Series s;
    assert_int_equal(series_read_npy(path, &s, &st), 0);
    assert_int_equal(s.rows, 3);
    assert_int_equal(s.cols, 2);
    for (int k = 0; k < 6; k++) assert_close(s.d[k], f[k], 0, 0);
    series_free(&s);
    assert_int_equal(npy_write_f64(path, v, 12, 0, &st), 0);
    assert_int_equal(series_read_npy(path, &s, &st), 0);
    assert_int_equal(s.rows, 12);
    assert_int_equal(s.cols, 1);
    series_free(&s);
    /* No temporary left behind (atomic write: temp, fsync, rename). */
    char tmp_glob[600];
    snprintf(tmp_glob, sizeof tmp_glob, "ls %s | grep -c tmp- >/dev/null", dir);
    assert_int_not_equal(system(tmp_glob), 0);
    unlink(path);
    rmdir(dir);
}

/* Truncated and malformed .npy files are input errors that name the file (common practice). */
static void test_npy_bad(void **state) {
    (void)state;
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/bad.npy", dir);
    long n;
    char *b = slurp(REF "f8_4x3.npy", &n);
    FILE *f = fopen(path, "wb");
    fwrite(b, 1, (size_t)n - 5, f);
    fclose(f);
    Series s;
    Status st;
    assert_int_equal(series_read_npy(path, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "bad.npy"));
    assert_non_null(strstr(st.msg, "truncated"));
    write_text(path, "not numpy at all");
    assert_int_equal(series_read_npy(path, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "magic"));
    /* An unsupported element type. */
    b[22] = 'c';   /* descr '<f8' -> '<c8' */
    f = fopen(path, "wb");
    fwrite(b, 1, (size_t)n, f);
    fclose(f);
    assert_int_equal(series_read_npy(path, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "'<c8' not supported"));
    /* a good header on a file of 8 GiB (sparse): refused from the header and the file's size, without
     * reading the file in (it was read whole first) */
    b[22] = 'f';
    f = fopen(path, "wb");
    fwrite(b, 1, (size_t)n, f);
    fclose(f);
    assert_int_equal(truncate(path, 8LL << 30), 0);
    struct timespec t0, t1;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    assert_int_equal(series_read_npy(path, &s, &st), ST_INPUT);
    clock_gettime(CLOCK_MONOTONIC, &t1);
    assert_non_null(strstr(st.msg, "shape (4, 3) of '<f8' needs 96"));
    /* reading 8 GiB takes seconds at best; the header alone, milliseconds (1 s: a loaded machine) */
    assert_true((double)(t1.tv_sec - t0.tv_sec) + 1e-9 * (double)(t1.tv_nsec - t0.tv_nsec) < 1.0);
    free(b);
    unlink(path);
    rmdir(dir);
}

/* CSV with and without a header row, comments, CRLF, spaces (common practice for CSV). */
static void test_csv_ok(void **state) {
    (void)state;
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/a.csv", dir);
    write_text(path, "# a comment\r\ntime, angle,velocity\r\n0.25, 1.25 ,2.25\r\n\r\n10.25,11.25,12.25\r\n");
    Series s;
    Status st;
    assert_int_equal(series_read(path, &s, &st), 0);
    check_grid(&s, 2, 3, 1, 0);
    assert_non_null(s.names);
    assert_string_equal(s.names[1], "angle");
    series_free(&s);
    write_text(path, "0.25,1.25\n10.25,11.25\n20.25,21.25");   /* no header, no final newline */
    assert_int_equal(series_read(path, &s, &st), 0);
    check_grid(&s, 3, 2, 1, 0);
    assert_null(s.names);
    series_free(&s);
    unlink(path);
    rmdir(dir);
}

/* Ragged rows and non-numbers name the file and the line (issue 3, bad-input list). */
static void test_csv_bad(void **state) {
    (void)state;
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/b.csv", dir);
    Series s;
    Status st;
    write_text(path, "a,b,c\n1,2,3\n4,5\n");
    assert_int_equal(series_read(path, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "b.csv:3: ragged row: 2 fields where line 1 has 3"));
    write_text(path, "1,2\n3,x4\n");
    assert_int_equal(series_read(path, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "b.csv:2: field 2 \"x4\" is not a finite number"));
    write_text(path, "1,2\n3,nan\n");
    assert_int_equal(series_read(path, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "b.csv:2"));
    write_text(path, "1,2\n3,\n");
    assert_int_equal(series_read(path, &s, &st), ST_INPUT);
    write_text(path, "x,y\n");
    assert_int_equal(series_read(path, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "no data rows"));
    unlink(path);
    assert_int_equal(series_read(path, &s, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "cannot open"));
    rmdir(dir);
    assert_int_equal(series_read("x.txt", &s, &st), ST_INPUT);
    assert_true(series_is_numeric_path("A.CSV") && series_is_numeric_path("b.npy"));
    assert_false(series_is_numeric_path("c.png"));
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_npy_numpy_fixtures), cmocka_unit_test(test_npy_writer_matches_numpy),
        cmocka_unit_test(test_npy_bad),            cmocka_unit_test(test_csv_ok),
        cmocka_unit_test(test_csv_bad),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
