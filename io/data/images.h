/* io/data/images.h: decoding one image file and the per-frame preprocessing (grayscale, crop, resize).
 *
 * Decoding is done by stb_image (PNG, JPEG, BMP, TGA, GIF first frame), except binary PGM/PPM (P5,
 * P6), which framelaw reads itself: the stb_image release in Debian takes 16-bit PNM samples in the
 * wrong byte order and ignores maxval. 16-bit PNG and PGM keep their 16 bits. Values are returned
 * as floats in [0, 1] (samples / 255 for 8-bit, / 65535 for 16-bit, / maxval for PNM).
 *
 * Grayscale (luma) from gamma-encoded R'G'B', Y' = wr R' + wg G' + wb B':
 *   GRAY_BT601: wr 0.299,  wg 0.587,  wb 0.114   (Recommendation ITU-R BT.601)
 *   GRAY_BT709: wr 0.2126, wg 0.7152, wb 0.0722  (Recommendation ITU-R BT.709)
 * One- and two-channel images (gray, gray + alpha) are used as they are; alpha is ignored.
 *
 * Truncation: stb_image does not notice every truncated file, so a JPEG must contain its
 * end-of-image marker (FF D9) in its last 1024 bytes, a BMP must be at least as long as the file
 * size its header declares, and a PNM must hold all its samples; other formats rely on the
 * decoder's own checks.
 */
#ifndef IO_IMAGES_H
#define IO_IMAGES_H

#include <stdint.h>

#include "nn/core.h"

/* The most pixels a frame may have: 2^25, above 8K UHD (7680 x 4320 = 33,177,600). A larger image is
 * refused from its header, before it is decoded (a JPEG of 340 bytes can declare 147 million). */
#define IMAGE_MAX_PIXELS (1L << 25)

typedef enum { GRAY_BT601, GRAY_BT709, GRAY_COUNT } GrayStd;

extern const char *const gray_std_names[];   /* (GRAY_COUNT) "bt601", "bt709" */
GrayStd gray_std_from_name(const char *name);          /* GRAY_COUNT when unknown */
/* The standard's luma weights w[0..2] = (wr, wg, wb). */
void gray_weights(GrayStd g, double w[3]);

/* 1 when the file name has an image extension stb_image reads (png, jpg, jpeg, bmp, tga, pgm, ppm,
 * pnm, gif; any case). */
int image_is_image_name(const char *name);

/* Width and height from the file header, without decoding. ST_INPUT when unreadable. */
int image_probe(const char *path, int *w, int *h, Status *st);

/* Decode and convert to luma: out (h, w) floats in [0, 1], allocated with malloc (caller frees).
 * ST_INPUT with a message naming the file when it cannot be decoded or is truncated. */
int image_load_gray(const char *path, GrayStd g, float **out, int *w, int *h, Status *st);

/* Copy the rectangle (x, y, cw, ch) of src (sh, sw) to dst (ch, cw). The caller checks that the
 * rectangle lies inside the image. */
void image_crop(const float *src, int sw, int sh, int x, int y, int cw, int ch, float *dst);

/* Area-averaging resize of src (sh, sw) to dst (dh, dw): output pixel (X, Y) is the mean of src over
 * the rectangle [X sw/dw, (X+1) sw/dw) x [Y sh/dh, (Y+1) sh/dh), source pixels weighted by their
 * overlap with it. Works for shrinking and enlarging, any ratio. Separable: rows first, then
 * columns. tmp holds (sh, dw) floats. */
void image_resize_area(const float *src, int sw, int sh, float *dst, int dw, int dh, float *tmp);

/* Quantise [0, 1] floats to 8 or 16 bits (round to nearest, clamped). */
void image_quantise_u8(const float *src, long n, uint8_t *dst);
void image_quantise_u16(const float *src, long n, uint16_t *dst);

/* Write an 8-bit gray image (h, w) as PNG, atomically. ST_RUNTIME on failure. */
int image_write_png_gray(const char *path, const uint8_t *px, int w, int h, Status *st);

/* The same with a tEXt chunk key = text right after the header (PNG Specification, Second Edition,
 * 11.3.4.3; e.g. the predefined keyword "Software"), so that image_png_text finds it without reading
 * the image. key 1-79 bytes, key and text together at most IMAGE_PNG_TEXT_MAX - 1 bytes. */
#define IMAGE_PNG_TEXT_MAX 256
int image_write_png_gray_text(const char *path, const uint8_t *px, int w, int h, const char *key, const char *text,
                              Status *st);
/* 1 and the text in out (n bytes, NUL-terminated) when the file is a PNG with a tEXt chunk of that
 * key (CRC valid) before its image data, within its first 8 KiB; 0 otherwise (no such file, not a
 * PNG, no such chunk, a text longer than n - 1 bytes). */
int image_png_text(const char *path, const char *key, char *out, size_t n);

#endif
