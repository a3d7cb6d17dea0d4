/* tests/test_base64.c: base64 encoding (io/report/base64.h) against the test vectors of RFC 4648 ("The
 * Base16, Base32, and Base64 Data Encodings", IETF 2006, section 10), both as a string and streamed
 * to a file, plus every byte value through a buffer longer than the streaming buffer. */
#include "tests/testutil.h"

#include "io/report/base64.h"

/* RFC 4648, section 10: BASE64("") = "", ... BASE64("foobar") = "Zm9vYmFy". */
static const char *const rfc_in[] = {"", "f", "fo", "foo", "foob", "fooba", "foobar"};
static const char *const rfc_out[] = {"", "Zg==", "Zm8=", "Zm9v", "Zm9vYg==", "Zm9vYmE=", "Zm9vYmFy"};

/* What base64_fwrite writes for data (n bytes), read back from a temporary file; malloc'ed. */
static char *streamed(const void *data, size_t n) {
    FILE *f = tmpfile();
    assert_non_null(f);
    assert_int_equal(base64_fwrite(f, data, n), 0);
    long len = ftell(f);
    rewind(f);
    char *s = malloc((size_t)len + 1);
    assert_int_equal(fread(s, 1, (size_t)len, f), (size_t)len);
    s[len] = 0;
    fclose(f);
    return s;
}

static void test_rfc_vectors(void **state) {
    (void)state;
    for (size_t i = 0; i < sizeof rfc_in / sizeof *rfc_in; i++) {
        size_t n = strlen(rfc_in[i]);
        char out[16];
        assert_int_equal(base64_len(n), strlen(rfc_out[i]));
        assert_int_equal(base64_encode(out, rfc_in[i], n), strlen(rfc_out[i]));
        assert_string_equal(out, rfc_out[i]);
        char *s = streamed(rfc_in[i], n);
        assert_string_equal(s, rfc_out[i]);
        free(s);
    }
}

/* Every byte value, in a buffer that crosses the streaming buffer's boundary (4096 characters =
 * 3072 bytes) with a remainder: the stream equals the string, and decoding by hand (the alphabet's
 * index of each character, RFC 4648 table 1) gives the bytes back. */
static void test_all_bytes(void **state) {
    (void)state;
    enum { N = 3 * 1024 + 1001 };   /* = 2 mod 3 */
    static unsigned char data[N];
    for (int i = 0; i < N; i++) data[i] = (unsigned char)(i * 7 + i / 256);
    static char out[(N + 2) / 3 * 4 + 1];
    size_t len = base64_encode(out, data, N);
    assert_int_equal(len, base64_len(N));
    assert_int_equal(out[len - 1], '=');    /* N = 2 mod 3: one pad character */
    assert_int_not_equal(out[len - 2], '=');
    char *s = streamed(data, N);
    assert_string_equal(s, out);
    free(s);
    static const char alpha[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    size_t o = 0;
    for (size_t i = 0; i + 4 <= len; i += 4) {
        unsigned v = 0;
        int pads = 0;
        for (int c = 0; c < 4; c++) {
            if (out[i + c] == '=') { pads++; v <<= 6; continue; }
            const char *p = strchr(alpha, out[i + c]);
            assert_non_null(p);
            v = v << 6 | (unsigned)(p - alpha);
        }
        unsigned char b[3] = {(unsigned char)(v >> 16), (unsigned char)(v >> 8), (unsigned char)v};
        for (int c = 0; c < 3 - pads; c++, o++) assert_int_equal(b[c], data[o]);
    }
    assert_int_equal(o, N);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rfc_vectors),
        cmocka_unit_test(test_all_bytes),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
