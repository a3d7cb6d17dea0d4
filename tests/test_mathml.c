/* tests/test_mathml.c: laws as Presentation MathML (sparse/mathml.h). The element names and their
 * meaning are those of "MathML Core" (W3C, 2023: section 3, the elements mi, mn, mo, mrow, mfrac,
 * msub, msup, msubsup, mtable, mtr, mtd) and "Mathematical Markup Language (MathML) Version 3.0"
 * (W3C Recommendation, 2014: 3.2.5 for U+2062 INVISIBLE TIMES between factors and U+2061 FUNCTION
 * APPLICATION after a function name). Every law written is also read back by an outside XML parser
 * (Python's xml.etree, Debian's /usr/bin/python3), which fails on anything not well-formed
 * (Extensible Markup Language 1.0, W3C, section 2.1). */
#include "sparse/library.h"
#include "sparse/mathml.h"
#include "tests/testutil.h"

static int count(const char *hay, const char *needle) {
    int n = 0;
    for (const char *p = strstr(hay, needle); p; p = strstr(p + 1, needle)) n++;
    return n;
}

static char *law(const Library *lib, const double *xi, const uint8_t *mask, char var, const double *w) {
    size_t need = mathml_law(NULL, 0, lib, xi, mask, var, w, 4);
    char *s = malloc(need + 1);
    assert_int_equal(mathml_law(s, need + 1, lib, xi, mask, var, w, 4), need);
    assert_int_equal(strlen(s), need);
    return s;
}

/* The MathML parsed by Python's XML parser: prints the number of <mtr> rows, or fails. */
static int xml_rows(const char *m) {
    char tmp[256], path[300], cmd[1024];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(path, sizeof path, "%s/m.xml", tmp);
    test_write_file(path, m);
    snprintf(cmd, sizeof cmd,
             "/usr/bin/python3 -c \"import sys, xml.etree.ElementTree as E; r = E.parse(sys.argv[1]).getroot(); "
             "assert r.tag == 'math' and r.get('display') == 'block'; print(len(list(r.iter('mtr'))))\" '%s'",
             path);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    int rows = -1;
    if (fscanf(p, "%d", &rows) != 1) rows = -1;
    int rc = pclose(p);
    test_rmtree(tmp);
    if (rc != 0 || rows < 0) fail_msg("Python's XML parser refused the MathML (exit %d): %.600s", rc, m);
    return rows;
}

#define Z1 "<msub><mi>z</mi><mn>1</mn></msub>"
#define Z2 "<msub><mi>z</mi><mn>2</mn></msub>"
#define DZ1 "<mfrac><mrow><mi>d</mi>" Z1 "</mrow><mrow><mi>d</mi><mi>t</mi></mrow></mfrac>"
#define IT "<mo>&#x2062;</mo>"
#define MINUS "<mo>&#x2212;</mo>"

/* A second-order law of two variables: d2z1/dt2 = -0.05 dz1/dt - 0.98 sin(z1) (terms in library
 * order: the velocity comes before the sine), d2z2/dt2 = 0.5 z1 - 2.25 z2. */
static void test_second_order(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(2, 2);
    sp.degree = 1, sp.trig = 1;
    Library lib;
    Status st;
    if (library_init(&lib, &sp, &st)) fail_msg("%s", st.msg);
    double *xi = calloc((size_t)lib.n_terms * 2, sizeof(double));
    xi[library_find(&lib, "sin(z1)") * 2 + 0] = -0.98;
    xi[library_find(&lib, "dz1/dt") * 2 + 0] = -0.05;
    xi[library_find(&lib, "z1") * 2 + 1] = 0.5;
    xi[library_find(&lib, "z2") * 2 + 1] = -2.25;
    char *m = law(&lib, xi, NULL, 'z', NULL);
    assert_memory_equal(m, "<math display=\"block\"><mtable><mtr><mtd><mfrac><mrow><msup><mi>d</mi><mn>2</mn></msup>" Z1
                           "</mrow><mrow><mi>d</mi><msup><mi>t</mi><mn>2</mn></msup></mrow></mfrac></mtd><mtd><mo>=</mo>"
                           "</mtd><mtd><mrow>" MINUS "<mn>0.05</mn>" IT DZ1 MINUS "<mn>0.98</mn>" IT
                           "<mi>sin</mi><mo>&#x2061;</mo><mrow><mo>(</mo>" Z1 "<mo>)</mo></mrow></mrow></mtd></mtr>",
                        strlen("<math display=\"block\"><mtable><mtr><mtd><mfrac><mrow><msup><mi>d</mi><mn>2</mn></msup>" Z1
                               "</mrow><mrow><mi>d</mi><msup><mi>t</mi><mn>2</mn></msup></mrow></mfrac></mtd><mtd><mo>=</mo>"
                               "</mtd><mtd><mrow>" MINUS "<mn>0.05</mn>" IT DZ1 MINUS "<mn>0.98</mn>" IT
                               "<mi>sin</mi><mo>&#x2061;</mo><mrow><mo>(</mo>" Z1 "<mo>)</mo></mrow></mrow></mtd></mtr>"));
    assert_non_null(strstr(m, "<mtd><mrow><mn>0.5</mn>" IT Z1 MINUS "<mn>2.25</mn>" IT Z2 "</mrow></mtd></mtr></mtable></math>"));
    assert_int_equal(xml_rows(m), 2);
    assert_null(strchr(m, '\\'));   /* nothing of LaTeX */
    free(m);

    /* a mask drops a term; an equation left without terms reads 0 */
    uint8_t *mask = malloc((size_t)lib.n_terms * 2);
    memset(mask, 1, (size_t)lib.n_terms * 2);
    mask[library_find(&lib, "z1") * 2 + 1] = 0;
    mask[library_find(&lib, "z2") * 2 + 1] = 0;
    m = law(&lib, xi, mask, 'z', NULL);
    assert_non_null(strstr(m, "<mo>=</mo></mtd><mtd><mrow><mn>0</mn></mrow>"));
    assert_int_equal(count(m, "<mn>2.25</mn>"), 0);
    assert_int_equal(xml_rows(m), 2);
    free(m);

    /* snprintf-like: a short buffer is filled and terminated, the length needed is returned */
    char small[40];
    size_t need = mathml_law(NULL, 0, &lib, xi, NULL, 'z', NULL, 4);
    assert_int_equal(mathml_law(small, sizeof small, &lib, xi, NULL, 'z', NULL, 4), need);
    assert_int_equal(strlen(small), sizeof small - 1);
    free(mask);
    free(xi);
    library_free(&lib);
}

/* Coefficients of 1 and -1 are the sign alone; small and large ones are mantissa x 10^exponent;
 * powers are msubsup (z1^2) or a bracketed velocity under msup; products joined by invisible times;
 * a long right-hand side goes on in rows of its own. */
static void test_numbers_powers_rows(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(1, 2);
    sp.degree = 2, sp.trig = 1, sp.freq[0] = 3;
    Library lib;
    Status st;
    if (library_init(&lib, &sp, &st)) fail_msg("%s", st.msg);
    double *xi = calloc((size_t)lib.n_terms, sizeof(double));
    xi[library_find(&lib, "1")] = 1.5e-5;
    xi[library_find(&lib, "z1")] = 1;
    xi[library_find(&lib, "dz1/dt")] = -1;
    xi[library_find(&lib, "z1^2")] = 1e6;
    xi[library_find(&lib, "z1*dz1/dt")] = 2;
    xi[library_find(&lib, "(dz1/dt)^2")] = -0.25;
    xi[library_find(&lib, "cos(3*z1)")] = 0.125;
    char *m = law(&lib, xi, NULL, 'z', NULL);
    assert_non_null(strstr(m, "<mtd><mrow><mn>1.5</mn><mo>&#xD7;</mo><msup><mn>10</mn><mrow>" MINUS
                              "<mn>5</mn></mrow></msup><mo>+</mo>" Z1 MINUS DZ1));
    assert_non_null(strstr(m, "<mo>+</mo><msup><mn>10</mn><mn>6</mn></msup>" IT
                              "<msubsup><mi>z</mi><mn>1</mn><mn>2</mn></msubsup>"));
    /* 4 terms on the first row, the fifth starts the next one with its sign */
    assert_non_null(strstr(m, "</mrow></mtd></mtr><mtr><mtd></mtd><mtd></mtd><mtd><mrow><mo>+</mo><mn>2</mn>" IT Z1 IT DZ1));
    assert_non_null(strstr(m, MINUS "<mn>0.25</mn>" IT "<msup><mrow><mo>(</mo>" DZ1 "<mo>)</mo></mrow><mn>2</mn></msup>"));
    assert_non_null(strstr(m, "<mo>+</mo><mn>0.125</mn>" IT "<mi>cos</mi><mo>&#x2061;</mo><mrow><mo>(</mo><mn>3</mn>" IT Z1
                              "<mo>)</mo></mrow>"));
    assert_int_equal(xml_rows(m), 2);   /* 7 terms: one equation in two rows */
    assert_int_equal(count(m, "<mtr>"), 2);
    free(m);
    free(xi);
    library_free(&lib);
}

/* A canonical law: variables u, the trig argument k w_i u_i at 4 digits (3 x 0.1 = 0.3; 1 x 1 is
 * left out), and its map u = A z + b with the frequency factors. */
static void test_canonical_and_map(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(2, 1);
    sp.degree = 1, sp.trig = 1, sp.n_freq = 2, sp.freq[0] = 1, sp.freq[1] = 3;
    Library lib;
    Status st;
    if (library_init(&lib, &sp, &st)) fail_msg("%s", st.msg);
    double *xi = calloc((size_t)lib.n_terms * 2, sizeof(double)), w[2] = {1, 0.1};
    xi[library_find(&lib, "sin(z1)") * 2 + 0] = -2;
    xi[library_find(&lib, "sin(3*z2)") * 2 + 1] = 0.75;
    char *m = law(&lib, xi, NULL, 'u', w);
    assert_non_null(strstr(m, "<mfrac><mrow><mi>d</mi><msub><mi>u</mi><mn>1</mn></msub></mrow>"));
    assert_non_null(strstr(m, MINUS "<mn>2</mn>" IT "<mi>sin</mi><mo>&#x2061;</mo><mrow><mo>(</mo><msub><mi>u</mi>"
                                    "<mn>1</mn></msub><mo>)</mo></mrow>"));
    assert_non_null(strstr(m, "<mn>0.75</mn>" IT "<mi>sin</mi><mo>&#x2061;</mo><mrow><mo>(</mo><mn>0.3</mn>" IT
                              "<msub><mi>u</mi><mn>2</mn></msub><mo>)</mo></mrow>"));
    assert_int_equal(count(m, "<mi>z</mi>"), 0);
    assert_int_equal(xml_rows(m), 2);
    free(m);

    double A[4] = {2, -1, 0, 1}, b[2] = {0.5, 0};
    size_t need = mathml_map(NULL, 0, 2, A, b, w, 4);
    char *mp = malloc(need + 1);
    assert_int_equal(mathml_map(mp, need + 1, 2, A, b, w, 4), need);
    assert_non_null(strstr(mp, "<msub><mi>u</mi><mn>1</mn></msub></mtd><mtd><mo>=</mo></mtd><mtd><mrow><mn>2</mn>" IT Z1
                               MINUS Z2 "<mo>+</mo><mn>0.5</mn></mrow>"));
    assert_non_null(strstr(mp, "<mtd><mrow>" Z2 "</mrow></mtd>"));
    assert_non_null(strstr(mp, "<msub><mi>w</mi><mn>2</mn></msub></mtd><mtd><mo>=</mo></mtd><mtd><mrow><mn>0.1</mn>"));
    assert_int_equal(xml_rows(mp), 4);   /* u1, u2, w1, w2 */
    free(mp);
    free(xi);
    library_free(&lib);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_second_order),
        cmocka_unit_test(test_numbers_powers_rows),
        cmocka_unit_test(test_canonical_and_map),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
