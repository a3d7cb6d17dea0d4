/* tests/test_fs.c: io/fs: folders, reading whole files, the clock, little-endian bytes, FNV-1a 64
 * and CRC-32. */
#include "tests/testutil.h"

#include <errno.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "io/fs/bytes.h"
#include "io/fs/clock.h"
#include "io/fs/files.h"
#include "io/fs/hash.h"

static int is_dir(const char *p) {
    struct stat sb;
    return stat(p, &sb) == 0 && S_ISDIR(sb.st_mode);
}

/* Nested folders in one call; again is fine; a file in the way and an over-long path are refused
 * with the path in the message. */
static void test_make_dirs(void **state) {
    (void)state;
    char dir[256], p[600], f[600];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    Status st;
    snprintf(p, sizeof p, "%s/a/b//c/", dir);
    assert_int_equal(fs_make_dirs(p, &st), 0);
    snprintf(p, sizeof p, "%s/a/b/c", dir);
    assert_true(is_dir(p));
    assert_true(fs_is_dir(p) && fs_exists(p));
    assert_int_equal(fs_make_dirs(p, &st), 0);   /* exists already */
    snprintf(f, sizeof f, "%s/a/file", dir);
    test_write_file(f, "x");
    assert_true(fs_exists(f) && !fs_is_dir(f));
    snprintf(p, sizeof p, "%s/a/file/d", dir);
    assert_int_equal(fs_make_dirs(p, &st), ST_INPUT);   /* a file in the way: the path is at fault */
    assert_non_null(strstr(st.msg, f));
    assert_non_null(strstr(st.msg, "cannot create folder"));
    assert_int_equal(fs_make_dirs(f, &st), ST_INPUT);   /* the file itself: not a folder */
    assert_non_null(strstr(st.msg, "in the way"));
    char *longp = malloc(5000);
    memset(longp, 'x', 4999);
    longp[4999] = 0;
    assert_int_equal(fs_make_dirs(longp, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "path too long"));
    free(longp);
    test_rmtree(dir);
}

/* Whole files: the bytes and a NUL after them, the size cap (exactly max is fine, one more is
 * not), and refusals that name the file: missing, a folder, a pipe (without waiting for a writer). */
static void test_read_file(void **state) {
    (void)state;
    char dir[256], p[600];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    Status st;
    char *b;
    size_t n;
    snprintf(p, sizeof p, "%s/ten.txt", dir);
    test_write_file(p, "0123456789");
    assert_int_equal(fs_read_file(p, 10, &b, &n, &st), 0);
    assert_int_equal(n, 10);
    assert_string_equal(b, "0123456789");
    free(b);
    assert_int_equal(fs_read_file(p, 9, &b, &n, &st), ST_INPUT);
    assert_null(b);
    assert_non_null(strstr(st.msg, p));
    assert_non_null(strstr(st.msg, "more than the 9"));
    /* larger than the first buffer: read to the end, bytes unchanged */
    snprintf(p, sizeof p, "%s/big.bin", dir);
    FILE *f = fopen(p, "wb");
    assert_non_null(f);
    for (int i = 0; i < 100000; i++) fputc((i * 7) & 0xff, f);
    fclose(f);
    assert_int_equal(fs_read_file(p, SIZE_MAX, &b, &n, &st), 0);
    assert_int_equal(n, 100000);
    int same = 1;
    for (int i = 0; i < 100000; i++) same &= (unsigned char)b[i] == ((i * 7) & 0xff);
    assert_true(same);
    assert_int_equal(b[n], 0);
    free(b);
    /* empty */
    snprintf(p, sizeof p, "%s/empty", dir);
    test_write_file(p, "");
    assert_int_equal(fs_read_file(p, 0, &b, NULL, &st), 0);
    assert_string_equal(b, "");
    free(b);
    /* missing */
    snprintf(p, sizeof p, "%s/absent.csv", dir);
    assert_int_equal(fs_read_file(p, 100, &b, &n, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "absent.csv: cannot open"));
    /* a folder */
    assert_int_equal(fs_read_file(dir, 100, &b, &n, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "not a regular file"));
    /* a pipe with no writer: refused at once, not waited on */
    snprintf(p, sizeof p, "%s/fifo", dir);
    assert_int_equal(mkfifo(p, 0600), 0);
    assert_int_equal(fs_read_file(p, 100, &b, &n, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "fifo: not a regular file"));
    test_rmtree(dir);
}

/* Little-endian: least significant byte first, on any host; round trips. */
static void test_little_endian(void **state) {
    (void)state;
    unsigned char b[8];
    le_put_u16(b, 0x1234);
    assert_int_equal(b[0], 0x34);
    assert_int_equal(b[1], 0x12);
    assert_int_equal(le_get_u16(b), 0x1234);
    le_put_u32(b, 0x11223344u);
    assert_memory_equal(b, "\x44\x33\x22\x11", 4);
    assert_int_equal(le_get_u32(b), 0x11223344u);
    le_put_u64(b, 0x0102030405060708ULL);
    assert_memory_equal(b, "\x08\x07\x06\x05\x04\x03\x02\x01", 8);
    assert_true(le_get_u64(b) == 0x0102030405060708ULL);
    uint64_t vals[] = {0, 1, 0xffffffffffffffffULL, 0x8000000000000000ULL, 0xdeadbeefcafef00dULL};
    for (size_t i = 0; i < sizeof vals / sizeof vals[0]; i++) {
        le_put_u64(b, vals[i]);
        assert_true(le_get_u64(b) == vals[i]);
        le_put_u32(b, (uint32_t)vals[i]);
        assert_true(le_get_u32(b) == (uint32_t)vals[i]);
    }
}

/* CRC-32/ISO-HDLC check value: crc32("123456789") = 0xCBF43926 (the standard check value of the
 * catalogue of parametrised CRC algorithms; "A Painless Guide to CRC Error Detection Algorithms",
 * Williams, 1993). A second value, crc32 of "The quick brown fox jumps over the lazy dog" =
 * 0x414FA339, computed with Python's zlib.crc32 (the same CRC; common practice). A CRC continued
 * over two pieces equals the CRC of the whole. */
static void test_crc32(void **state) {
    (void)state;
    assert_int_equal(fs_crc32(0, "123456789", 9), 0xCBF43926u);
    const char *fox = "The quick brown fox jumps over the lazy dog";
    assert_int_equal(fs_crc32(0, fox, strlen(fox)), 0x414FA339u);
    assert_int_equal(fs_crc32(fs_crc32(0, "1234", 4), "56789", 5), 0xCBF43926u);
    assert_int_equal(fs_crc32(0, "", 0), 0u);
}

/* FNV-1a 64 test vectors of the FNV reference (Fowler, Noll, Vo; the test suite of the FNV
 * reference code): "" -> 0xcbf29ce484222325 (the offset basis), "a" -> 0xaf63dc4c8601ec8c,
 * "foobar" -> 0x85944171f73967e8. From memory, and checked by computing the published algorithm
 * (xor the byte, multiply by the prime 0x100000001b3, modulo 2^64) with Python. */
static void test_fnv1a64(void **state) {
    (void)state;
    assert_true(fnv1a64(FNV1A64_INIT, "", 0) == 0xcbf29ce484222325ULL);
    assert_true(fnv1a64_str(FNV1A64_INIT, "a") == 0xaf63dc4c8601ec8cULL);
    assert_true(fnv1a64_str(FNV1A64_INIT, "foobar") == 0x85944171f73967e8ULL);
    /* continued over pieces */
    assert_true(fnv1a64_str(fnv1a64_str(FNV1A64_INIT, "foo"), "bar") == 0x85944171f73967e8ULL);
    /* a u64 is its 8 little-endian bytes */
    unsigned char b[8];
    le_put_u64(b, 0x0123456789abcdefULL);
    assert_true(fnv1a64_u64(FNV1A64_INIT, 0x0123456789abcdefULL) == fnv1a64(FNV1A64_INIT, b, 8));
}

/* The clock never goes back, and a sleep of 20 ms shows as at least 20 ms (nanosleep sleeps at
 * least the time asked, measured on the monotonic clock; 1 microsecond for the rounding of the
 * double). */
static void test_clock(void **state) {
    (void)state;
    double a = clock_seconds();
    struct timespec ts = {0, 20000000};
    while (nanosleep(&ts, &ts) != 0 && errno == EINTR) {}
    double b = clock_seconds();
    assert_true(b >= a + 0.02 - 1e-6);
    assert_true(clock_seconds() >= b);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_make_dirs),   cmocka_unit_test(test_read_file), cmocka_unit_test(test_little_endian),
        cmocka_unit_test(test_crc32),       cmocka_unit_test(test_fnv1a64),   cmocka_unit_test(test_clock),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
