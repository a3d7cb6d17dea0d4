/* tests/test_glyphs.c: the labels of the contact sheet (io/data/glyphs.h): characters counted as
 * UTF-8 characters (RFC 3629, IETF, 2003, section 3: a character is one lead byte and its 10xxxxxx
 * continuation bytes), long names shortened in the middle without cutting a character, bytes the
 * font lacks drawn as '?', drawing clipped at the image's edges. */
#include "io/data/glyphs.h"
#include "tests/testutil.h"

static void test_count_and_fit(void **state) {
    (void)state;
    assert_int_equal(glyph_count(""), 0);
    assert_int_equal(glyph_count("rec01"), 5);
    assert_int_equal(glyph_count("\xc3\xbc" "ber"), 4);          /* "über": 2-byte u-umlaut */
    assert_int_equal(glyph_count("a\xe2\x82\xac" "b"), 3);       /* euro sign: 3 bytes */
    char b[64];
    glyph_fit(b, sizeof b, "rec01", 10);
    assert_string_equal(b, "rec01");
    glyph_fit(b, sizeof b, "pendulum_take_017", 10);             /* 4 + "..." + 3 */
    assert_string_equal(b, "pend...017");
    assert_int_equal(glyph_count(b), 10);
    glyph_fit(b, sizeof b, "\xc3\xbc\xc3\xbc\xc3\xbc\xc3\xbc\xc3\xbc\xc3\xbc" "xyz", 8);   /* 3 + ... + 2 */
    assert_string_equal(b, "\xc3\xbc\xc3\xbc\xc3\xbc...yz");
    assert_int_equal(glyph_count(b), 8);
}

static long ink(const uint8_t *px, long n) {
    long k = 0;
    for (long i = 0; i < n; i++) k += px[i] == 0;
    return k;
}

static void test_draw(void **state) {
    (void)state;
    enum { W = 40, H = 20 };
    uint8_t a[W * H], b[W * H];
    /* a byte the font lacks (a control character, a non-ASCII character) is drawn as '?' */
    memset(a, 255, sizeof a), memset(b, 255, sizeof b);
    glyph_draw(a, W, H, 1, 1, "?\x01", 1, 0);
    glyph_draw(b, W, H, 1, 1, "?\xc3\xbc", 1, 0);
    assert_memory_equal(a, b, sizeof a);
    assert_true(ink(a, W * H) > 8);
    /* scale 2: four times the ink of scale 1 */
    memset(b, 255, sizeof b);
    glyph_draw(b, W, H, 1, 1, "?", 2, 0);
    assert_int_equal(ink(b, W * H), 2 * ink(a, W * H));   /* "??" at 1 against "?" at 2 */
    /* clipped at every edge: nothing written outside (ASan in make sanitize), part of it inside */
    memset(a, 255, sizeof a);
    glyph_draw(a, W, H, -3, -4, "Wg", 3, 0);
    glyph_draw(a, W, H, W - 4, H - 3, "Wg", 3, 0);
    assert_true(ink(a, W * H) > 0);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_count_and_fit),
        cmocka_unit_test(test_draw),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
