/* tests/test_images.c: decoding, grayscale, crop, area-average resize (io/data/images.h). */
#include "tests/testutil.h"

#include <unistd.h>

#include "io/data/images.h"

#define REF "tests/reference/images/"

typedef struct {
    int w, h, c, maxval;
    int px[16 * 16 * 3];   /* (h, w, c) */
} Expected;

/* Pixel values the outside tool was given (tests/reference/images/expected.txt, written by
 * tests/reference/make_images.py). */
static void load_expected(const char *name, Expected *e) {
    FILE *f = fopen(REF "expected.txt", "r");
    assert_non_null(f);
    char nm[64];
    int found = 0;
    while (!found && fscanf(f, "%63s", nm) == 1) {
        if (nm[0] == '#') {
            int ch;
            while ((ch = fgetc(f)) != '\n' && ch != EOF) {}
            continue;
        }
        assert_int_equal(fscanf(f, "%d %d %d %d", &e->w, &e->h, &e->c, &e->maxval), 4);
        for (int i = 0; i < e->w * e->h * e->c; i++) assert_int_equal(fscanf(f, "%d", &e->px[i]), 1);
        found = !strcmp(nm, name);
    }
    fclose(f);
    if (!found) fail_msg("%s not in expected.txt", name);
}

/* Decode `name` and compare its luma with the expected values (luma of the known RGB by the
 * standard's weights for colour fixtures) within tol (in [0, 1] units). */
static void check_decode(const char *name, GrayStd g, double tol) {
    Expected e;
    load_expected(name, &e);
    char path[256];
    snprintf(path, sizeof path, REF "%s", name);
    float *img;
    int w, h;
    Status st;
    if (image_load_gray(path, g, &img, &w, &h, &st)) fail_msg("%s", st.msg);
    assert_int_equal(w, e.w);
    assert_int_equal(h, e.h);
    double wt[3];
    gray_weights(g, wt);
    for (int i = 0; i < w * h; i++) {
        double ref = e.c == 3 ? wt[0] * e.px[3 * i] + wt[1] * e.px[3 * i + 1] + wt[2] * e.px[3 * i + 2]
                              : e.px[i];
        ref /= e.maxval;
        if (fabs(img[i] - ref) > tol) fail_msg("%s pixel %d: %.6f, expected %.6f (tol %g)", name, i, img[i], ref, tol);
    }
    int pw, ph;
    assert_int_equal(image_probe(path, &pw, &ph, &st), 0);
    assert_int_equal(pw, w);
    assert_int_equal(ph, h);
    free(img);
}

/* Lossless formats decode to exactly the values the outside tool wrote: PNG 8- and 16-bit and PGM
 * 8- and 16-bit written by Python's standard library following the PNG specification (W3C
 * Recommendation / ISO/IEC 15948, 2003) and the netpbm PGM format; BMP and PGM written by
 * ImageMagick's convert. */
static void test_decode_lossless(void **state) {
    (void)state;
    double exact = 1e-6;
    check_decode("gray8.png", GRAY_BT601, exact);
    check_decode("gray16.png", GRAY_BT601, exact);
    check_decode("gray8.pgm", GRAY_BT601, exact);
    check_decode("gray16.pgm", GRAY_BT601, exact);
    check_decode("gray8_im.pgm", GRAY_BT601, exact);
    check_decode("rgb8.png", GRAY_BT601, exact);
    check_decode("rgb8.png", GRAY_BT709, exact);
    check_decode("rgb8.bmp", GRAY_BT601, exact);
    check_decode("rgb8.bmp", GRAY_BT709, exact);
}

/* JPEG (ImageMagick convert, quality 95/98, no chroma subsampling) is lossy: baseline JPEG at
 * these qualities keeps a smooth gradient within a few grey levels (common practice); we allow
 * 4/255 on the gradient and 8/255 on luma of the high-contrast colour pattern. */
static void test_decode_jpeg(void **state) {
    (void)state;
    check_decode("smooth.jpg", GRAY_BT601, 4.0 / 255);
    check_decode("rgb8.jpg", GRAY_BT601, 8.0 / 255);
    check_decode("rgb8.jpg", GRAY_BT709, 8.0 / 255);
}

/* Luma coefficients as published: Recommendation ITU-R BT.601-7 (2011), item 2.5.1,
 * E'Y = 0.299 E'R + 0.587 E'G + 0.114 E'B; Recommendation ITU-R BT.709-6 (2015), item 3.2,
 * E'Y = 0.2126 E'R + 0.7152 E'G + 0.0722 E'B. */
static void test_gray_weights(void **state) {
    (void)state;
    double w[3];
    gray_weights(GRAY_BT601, w);
    assert_close(w[0], 0.299, 0, 0);
    assert_close(w[1], 0.587, 0, 0);
    assert_close(w[2], 0.114, 0, 0);
    gray_weights(GRAY_BT709, w);
    assert_close(w[0], 0.2126, 0, 0);
    assert_close(w[1], 0.7152, 0, 0);
    assert_close(w[2], 0.0722, 0, 0);
    assert_close(w[0] + w[1] + w[2], 1.0, 1e-15, 0);
    assert_int_equal(gray_std_from_name("BT709"), GRAY_BT709);
    assert_int_equal(gray_std_from_name("bt601"), GRAY_BT601);
    assert_int_equal(gray_std_from_name("srgb"), GRAY_COUNT);
}

/* Crop copies the rectangle (hand computation). */
static void test_crop(void **state) {
    (void)state;
    float src[5 * 4], dst[3 * 2];   /* (4, 5) -> (2, 3) */
    for (int i = 0; i < 20; i++) src[i] = (float)i;
    image_crop(src, 5, 4, 1, 2, 3, 2, dst);
    float ref[6] = {11, 12, 13, 16, 17, 18};
    for (int i = 0; i < 6; i++) assert_close(dst[i], ref[i], 0, 0);
}

/* Area averaging against a hand computation: every output pixel is the overlap-weighted mean of
 * the source pixels under it (common practice: box filter / pixel-area resampling). */
static void test_resize_area(void **state) {
    (void)state;
    float tmp[64];
    /* 4x4 -> 2x2: means of 2x2 blocks. */
    float a[16] = {1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16}, b[4];
    image_resize_area(a, 4, 4, b, 2, 2, tmp);
    assert_close(b[0], (1 + 2 + 5 + 6) / 4.0, 1e-6, 0);
    assert_close(b[1], (3 + 4 + 7 + 8) / 4.0, 1e-6, 0);
    assert_close(b[2], (9 + 10 + 13 + 14) / 4.0, 1e-6, 0);
    assert_close(b[3], (11 + 12 + 15 + 16) / 4.0, 1e-6, 0);
    /* 3x1 -> 2x1: output 0 covers [0, 1.5): (p0 + 0.5 p1) / 1.5; output 1: (0.5 p1 + p2) / 1.5. */
    float c[3] = {3, 6, 12}, d[2];
    image_resize_area(c, 3, 1, d, 2, 1, tmp);
    assert_close(d[0], (3 + 0.5 * 6) / 1.5, 1e-6, 0);
    assert_close(d[1], (0.5 * 6 + 12) / 1.5, 1e-6, 0);
    /* 2x1 -> 3x1 (enlarging): output 1 covers [2/3, 4/3): half of each source pixel. */
    float e[2] = {3, 9}, f[3];
    image_resize_area(e, 2, 1, f, 3, 1, tmp);
    assert_close(f[0], 3, 1e-6, 0);
    assert_close(f[1], 6, 1e-6, 0);
    assert_close(f[2], 9, 1e-6, 0);
    /* 5x3 -> 2x2 in both axes at once; and the mean of the image is preserved by any area resize. */
    float g[15], hh[4];
    double mean = 0;
    for (int i = 0; i < 15; i++) g[i] = (float)(i * i % 7), mean += g[i] / 15.0;
    image_resize_area(g, 5, 3, hh, 2, 2, tmp);
    /* hand: row weights over x: out0 = p0 + p1 + 0.5 p2 (/2.5); y: out0 = r0 + 0.5 r1 (/1.5) */
    double r0 = (g[0] + g[1] + 0.5 * g[2]) / 2.5, r1 = (g[5] + g[6] + 0.5 * g[7]) / 2.5;
    assert_close(hh[0], (r0 + 0.5 * r1) / 1.5, 1e-6, 0);
    assert_close((hh[0] + hh[1] + hh[2] + hh[3]) / 4, mean, 1e-5, 0);
}

/* Quantisation rounds to nearest and clamps (common practice). */
static void test_quantise(void **state) {
    (void)state;
    float v[5] = {-0.1f, 0, 0.5f, 1, 1.2f};
    uint8_t q8[5];
    uint16_t q16[5];
    image_quantise_u8(v, 5, q8);
    image_quantise_u16(v, 5, q16);
    assert_int_equal(q8[0], 0);
    assert_int_equal(q8[2], 128);
    assert_int_equal(q8[3], 255);
    assert_int_equal(q8[4], 255);
    assert_int_equal(q16[2], 32768);
    assert_int_equal(q16[4], 65535);
}

/* Truncated or undecodable files are input errors naming the file (issue 3, bad-input list). */
static void test_truncated(void **state) {
    (void)state;
    const char *bad[] = {REF "trunc_gray8.png", REF "trunc_smooth.jpg", REF "trunc_rgb8.bmp", REF "trunc_gray16.pgm", REF "expected.txt",
                         REF "missing.png"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        float *img = NULL;
        int w, h;
        Status st;
        assert_int_equal(image_load_gray(bad[i], GRAY_BT601, &img, &w, &h, &st), ST_INPUT);
        assert_null(img);
        if (!strstr(st.msg, bad[i])) fail_msg("message does not name %s: %s", bad[i], st.msg);
    }
}

/* A JPEG whose Huffman table declares more than 256 codes (ITU-T T.81 | ISO/IEC 10918-1, 1992,
 * B.2.4.2: the 16 counts sum to the number of 8-bit values) is refused before stb_image, which
 * indexes past its table for it (found by tests/fuzz/fuzz_stb.c; the input is kept in
 * tests/fuzz/regressions/). The good JPEGs above pass the same check. */
static void test_fuzz_regressions(void **state) {
    (void)state;
    const char *path = "tests/fuzz/regressions/huffman-257-codes.jpg";
    float *img = NULL;
    int w, h;
    Status st;
    assert_int_equal(image_load_gray(path, GRAY_BT601, &img, &w, &h, &st), ST_INPUT);
    assert_null(img);
    assert_non_null(strstr(st.msg, path));
    assert_non_null(strstr(st.msg, "Huffman table of"));
    /* reading the header alone meets the same table (stb_image parses it before the frame header) */
    assert_int_equal(image_probe(path, &w, &h, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "Huffman table of"));
    /* 340 bytes declaring 2312 x 63737 pixels (found by fuzz_stb: seconds and a gigabyte to decode)
     * are refused from the header, as is a PNM header past the same limit */
    path = "tests/fuzz/regressions/jpeg-147-megapixels.jpg";
    assert_int_equal(image_load_gray(path, GRAY_BT601, &img, &w, &h, &st), ST_INPUT);
    assert_null(img);
    assert_non_null(strstr(st.msg, "image of 2312 x 63737 pixels, more than the 33554432 a frame may have"));
    /* a PNG of 123 bytes whose IDAT chunk declares 2 GB, which stb_image allocated before reading
     * (chunk layout: "PNG (Portable Network Graphics) Specification", W3C, 2003, 5.3) */
    path = "tests/fuzz/regressions/png-idat-2gb.png";
    assert_int_equal(image_load_gray(path, GRAY_BT601, &img, &w, &h, &st), ST_INPUT);
    assert_null(img);
    assert_non_null(strstr(st.msg, "truncated or corrupt PNG (chunk IDAT of 2063597633 bytes, 77 left in the file)"));
    /* 42 bytes whose last chunk is cut inside its header: stb_image reads zeros past the end, so the
     * length's first bytes alone declared 2 GB (found by fuzz_stb after the check above) */
    path = "tests/fuzz/regressions/png-chunk-cut.png";
    assert_int_equal(image_load_gray(path, GRAY_BT601, &img, &w, &h, &st), ST_INPUT);
    assert_null(img);
    assert_non_null(strstr(st.msg, "truncated or corrupt PNG (a chunk at byte 33, 9 bytes left, fewer than a chunk's 12)"));
    /* a BMP of height 0, which stb_image returns as an image */
    path = "tests/fuzz/regressions/bmp-height-0.bmp";
    assert_int_equal(image_load_gray(path, GRAY_BT601, &img, &w, &h, &st), ST_INPUT);
    assert_null(img);
    assert_non_null(strstr(st.msg, "pixels: empty"));
}

/* Binary PNM headers and samples (Netpbm's pgm(5) and ppm(5): width, height and maxval as ASCII
 * decimals, maxval 1..65535, then one whitespace byte and the samples, each at most maxval). A
 * number too large is named as written (it was cut at 2^24 and misread), a sample above maxval is
 * refused rather than clamped. */
static void test_pnm_limits(void **state) {
    (void)state;
    char dir[256], path[320];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/frame.pgm", dir);
    struct {
        const char *bytes;
        size_t n;
        const char *what;
    } cases[] = {
        {"P5\n21474836480 1\n255\n\x10", 23, "PNM width 21474836480 is outside 1..16777215"},
        {"P5\n1 16777216\n255\n\x10", 20, "PNM height 16777216 is outside 1..16777215"},
        {"P5\n1 1\n65536\n\x10\x10", 15, "PNM maxval 65536 is outside 1..65535"},
        {"P5\n0 1\n255\n\x10", 12, "PNM width 0 is outside"},
        {"P5\n8192 4097\n255\n\x10", 19, "image of 8192 x 4097 pixels, more than the 33554432 a frame may have"},
        {"P5\n2x1\n255\n\x10\x10", 14, "byte 0x78 after the width"},
        {"P5\n2 1\n100\n\x32\xc8", 14, "PNM sample 1 (row 0, column 1) is 200, above the maxval 100"},
        {"P6\n1 1\n1000\n\x00\x01\x03\xe9\x00\x00", 19, "PNM sample 1 (row 0, column 0) is 1001, above the maxval 1000"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        FILE *f = fopen(path, "wb");
        assert_non_null(f);
        assert_int_equal(fwrite(cases[i].bytes, 1, cases[i].n, f), cases[i].n);
        fclose(f);
        float *img = NULL;
        int w, h;
        Status st;
        assert_int_equal(image_load_gray(path, GRAY_BT601, &img, &w, &h, &st), ST_INPUT);
        assert_null(img);
        if (!strstr(st.msg, path) || !strstr(st.msg, cases[i].what))
            fail_msg("case %zu: \"%s\" should name the file and say \"%s\"", i, st.msg, cases[i].what);
    }
    /* at the limits: maxval 100 with a sample of 100 is white */
    FILE *f = fopen(path, "wb");
    fwrite("P5\n2 1\n100\n\x00\x64", 1, 14, f);
    fclose(f);
    float *img = NULL;
    int w, h;
    Status st;
    assert_int_equal(image_load_gray(path, GRAY_BT601, &img, &w, &h, &st), 0);
    assert_int_equal(w, 2);
    assert_true(img[0] == 0.0f && img[1] == 1.0f);
    free(img);
    test_rmtree(dir);
}

/* Image names by extension (common practice). */
static void test_names(void **state) {
    (void)state;
    assert_true(image_is_image_name("a.PNG") && image_is_image_name("b.jpeg") && image_is_image_name("c.pgm"));
    assert_false(image_is_image_name("notes.txt") || image_is_image_name("png") || image_is_image_name(".png"));
}

/* The PNG writer round-trips through the decoder (common practice). */
static void test_png_write(void **state) {
    (void)state;
    char dir[256], path[512];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(path, sizeof path, "%s/sheet.png", dir);
    uint8_t px[7 * 3];   /* (3, 7) */
    for (int i = 0; i < 21; i++) px[i] = (uint8_t)(i * 12);
    Status st;
    assert_int_equal(image_write_png_gray(path, px, 7, 3, &st), 0);
    float *img;
    int w, h;
    assert_int_equal(image_load_gray(path, GRAY_BT709, &img, &w, &h, &st), 0);
    assert_int_equal(w, 7);
    assert_int_equal(h, 3);
    for (int i = 0; i < 21; i++) assert_close(img[i], px[i] / 255.0, 1e-6, 0);
    free(img);
    unlink(path);
    rmdir(dir);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_decode_lossless), cmocka_unit_test(test_decode_jpeg),
        cmocka_unit_test(test_gray_weights),    cmocka_unit_test(test_crop),
        cmocka_unit_test(test_resize_area),     cmocka_unit_test(test_quantise),
        cmocka_unit_test(test_truncated),       cmocka_unit_test(test_names),
        cmocka_unit_test(test_fuzz_regressions), cmocka_unit_test(test_pnm_limits),
        cmocka_unit_test(test_png_write),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
