/* tests/test_csv.c: the CSV reader (io/data/csv.h). Quoting follows RFC 4180 ("Common Format and
 * MIME Type for Comma-Separated Values (CSV) Files", IETF, 2005, section 2, rules 5-7: a field may
 * be enclosed in double quotes, may then hold commas, and a double quote inside it is written
 * twice); the leniencies (spaces around fields, comments, blank lines) are our own, docs/formats.md. */
#include "tests/testutil.h"

#include <unistd.h>

#include "io/data/csv.h"

static const CsvOptions STRICT = {.header = CSV_HEADER_AUTO, .need_rows = 1};

/* Header, rows, line numbers; CRLF, a byte order mark, spaces and tabs around fields; blank lines
 * (also of spaces) and comment lines (also indented) are skipped but counted. */
static void test_table(void **state) {
    (void)state;
    const char *text = "\xEF\xBB\xBF# recorded 2024\r\n"
                       " t ,\tx\r\n"
                       "0, 1.5\r\n"
                       "\r\n"
                       "   \t\n"
                       "  # a note\n"
                       "0.1 ,-2e-3\n"
                       "0.2,3";   /* no line end at the end: still a row */
    CsvTable t;
    Status st;
    assert_int_equal(csv_parse_table("a.csv", text, &STRICT, &t, &st), 0);
    assert_int_equal(t.cols, 2);
    assert_int_equal(t.rows, 3);
    assert_non_null(t.names);
    assert_string_equal(t.names[0], "t");
    assert_string_equal(t.names[1], "x");
    assert_int_equal(csv_col(&t, "x"), 1);
    assert_int_equal(csv_col(&t, "y"), -1);
    double want[6] = {0, 1.5, 0.1, -2e-3, 0.2, 3};
    for (int i = 0; i < 6; i++) assert_true(t.d[i] == want[i]);   /* strtod: the nearest double, both sides */
    assert_int_equal(t.lines[0], 3);
    assert_int_equal(t.lines[1], 7);
    assert_int_equal(t.lines[2], 8);
    csv_table_free(&t);

    /* all numbers: no header */
    assert_int_equal(csv_parse_table("b.csv", "1,2\n3,4\n", &STRICT, &t, &st), 0);
    assert_null(t.names);
    assert_int_equal(t.rows, 2);
    assert_true(t.d[3] == 4);
    csv_table_free(&t);
}

/* RFC 4180 quoting: commas and doubled quotes inside a quoted field, spaces kept inside quotes,
 * quoted numbers read as numbers. */
static void test_quoted_fields(void **state) {
    (void)state;
    CsvReader r;
    Status st;
    int has;
    assert_int_equal(csv_open_text(&r, "q.csv", "\"time (s)\", \"x, y\" ,\"say \"\"hi\"\"\",\"\",plain\n", &st), 0);
    assert_int_equal(csv_next(&r, &has, &st), 0);
    assert_int_equal(has, 1);
    assert_int_equal(r.n, 5);
    assert_string_equal(r.f[0], "time (s)");
    assert_string_equal(r.f[1], "x, y");
    assert_string_equal(r.f[2], "say \"hi\"");
    assert_string_equal(r.f[3], "");
    assert_string_equal(r.f[4], "plain");
    assert_int_equal(r.line, 1);
    assert_int_equal(csv_next(&r, &has, &st), 0);
    assert_int_equal(has, 0);
    csv_close(&r);

    CsvTable t;
    assert_int_equal(csv_parse_table("q.csv", "\"a,b\",c\n\"1.5\", \"2\"\n", &STRICT, &t, &st), 0);
    assert_string_equal(t.names[0], "a,b");
    assert_int_equal(t.rows, 1);
    assert_true(t.d[0] == 1.5 && t.d[1] == 2);
    csv_table_free(&t);
}

/* Every error names the file and the line. */
static void test_errors(void **state) {
    (void)state;
    CsvTable t;
    Status st;
    struct {
        const char *text, *msg;
    } cases[] = {
        {"x,y\n# c\n1,2\n1,2,3\n", "e.csv:4: ragged row: 3 fields where line 1 has 2"},
        {"\n1,2\n3\n", "e.csv:3: ragged row: 1 fields where line 2 has 2"},
        {"x,y\n1,abc\n", "e.csv:2: field 2 \"abc\" is not a finite number"},
        {"x,y\n1,nan\n", "e.csv:2: field 2 \"nan\" is not a finite number"},
        {"x,y\n1,\n", "e.csv:2: field 2 \"\" is not a finite number"},
        {"x,y\n1,\"2\n3,4\n", "e.csv:2: field 2: unterminated quoted field"},
        {"x,y\n\"1\"z,2\n", "e.csv:2: field 1: text after the closing quote"},
        {"x,y\n", "e.csv: no data rows"},
        {"# only a comment\n\n", "e.csv: no data rows"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        assert_int_equal(csv_parse_table("e.csv", cases[i].text, &STRICT, &t, &st), ST_INPUT);
        if (!strstr(st.msg, cases[i].msg)) fail_msg("case %zu: got \"%s\", want \"%s\"", i, st.msg, cases[i].msg);
        assert_null(t.d);
        assert_null(t.names);
    }
    /* a zero byte, which strlen-based text cannot hold: through a file */
    char dir[256], p[600];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(p, sizeof p, "%s/z.csv", dir);
    FILE *f = fopen(p, "wb");
    assert_non_null(f);
    fwrite("x\n1\n2\0\n", 1, 7, f);
    fclose(f);
    assert_int_equal(csv_read_table(p, &STRICT, &t, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "z.csv:3: a zero byte"));
    unlink(p);
    assert_int_equal(csv_read_table(p, &STRICT, &t, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "z.csv: cannot open"));
    test_rmtree(dir);
}

/* The lenient reading of our own files: empty fields and "nan" are NaN, "inf" is infinite, words
 * are numbered; the header is required; an unfinished last line is left out; errors name the
 * column. */
static void test_lenient(void **state) {
    (void)state;
    static const char *const words[] = {"train", "refine", NULL};
    const CsvOptions o = {.header = CSV_HEADER_REQUIRED, .lenient = 1, .words = words, .drop_unfinished = 1};
    CsvTable t;
    Status st;
    assert_int_equal(csv_parse_table("l.csv", "epoch,phase,loss\n1,train,\n2,refine,nan\n3,train,inf\n4,tr", &o, &t, &st), 0);
    assert_int_equal(t.rows, 3);
    assert_true(t.d[1] == 0 && isnan(t.d[2]));
    assert_true(t.d[4] == 1 && isnan(t.d[5]));
    assert_true(isinf(t.d[8]) && t.d[8] > 0);
    csv_table_free(&t);
    /* the header alone, even without its line end, is a table of no rows */
    assert_int_equal(csv_parse_table("l.csv", "epoch,phase", &o, &t, &st), 0);
    assert_int_equal(t.rows, 0);
    assert_int_equal(t.cols, 2);
    csv_table_free(&t);
    /* a header of numbers is still the header */
    assert_int_equal(csv_parse_table("l.csv", "1,2\n3,4\n", &o, &t, &st), 0);
    assert_string_equal(t.names[1], "2");
    assert_int_equal(t.rows, 1);
    csv_table_free(&t);
    assert_int_equal(csv_parse_table("l.csv", "epoch,phase,loss\n1,train,0.5\n2,train,oops\n", &o, &t, &st), ST_INPUT);
    assert_string_equal(st.msg, "l.csv:3: field 3 (loss) \"oops\" is not a number");
    assert_int_equal(csv_parse_table("l.csv", "\n# nothing\n", &o, &t, &st), ST_INPUT);
    assert_string_equal(st.msg, "l.csv: empty (no header row)");
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_table),
        cmocka_unit_test(test_quoted_fields),
        cmocka_unit_test(test_errors),
        cmocka_unit_test(test_lenient),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
