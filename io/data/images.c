/* io/data/images.c: decoding and per-frame preprocessing (see images.h). */
#include "io/data/images.h"

#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include <stb/stb_image.h>
#include <stb/stb_image_write.h>

#include "io/fs/atomic_file.h"
#include "io/fs/files.h"
#include "io/fs/hash.h"

const char *const gray_std_names[] = {"bt601", "bt709"};
_Static_assert(sizeof gray_std_names / sizeof gray_std_names[0] == GRAY_COUNT, "one name per standard");

GrayStd gray_std_from_name(const char *name) {
    for (int g = 0; g < GRAY_COUNT; g++)
        if (!strcasecmp(name, gray_std_names[g])) return (GrayStd)g;
    return GRAY_COUNT;
}

void gray_weights(GrayStd g, double w[3]) {
    if (g == GRAY_BT709) w[0] = 0.2126, w[1] = 0.7152, w[2] = 0.0722;
    else w[0] = 0.299, w[1] = 0.587, w[2] = 0.114;
}

int image_is_image_name(const char *name) {
    static const char *const ext[] = {"png", "jpg", "jpeg", "bmp", "tga", "pgm", "ppm", "pnm", "gif"};
    const char *dot = strrchr(name, '.');
    if (!dot || dot == name) return 0;
    for (size_t i = 0; i < sizeof ext / sizeof ext[0]; i++)
        if (!strcasecmp(dot + 1, ext[i])) return 1;
    return 0;
}

static int check_truncation(const char *path, const unsigned char *b, long n, Status *st);
static long jpeg_start(const unsigned char *b, long n);
static int check_jpeg_huffman(const char *path, const unsigned char *b, long n, long i, Status *st);

int image_probe(const char *path, int *w, int *h, Status *st) {
    /* the file whole, a regular one, through the same checks as a decode: stb_image's header
     * parsing trips over the same faults (a JPEG's Huffman tables come before its frame header) */
    char *text;
    size_t len;
    if (fs_read_file(path, (size_t)INT_MAX, &text, &len, st)) return st->code;
    int c, rc = 0;
    long j = jpeg_start((const unsigned char *)text, (long)len); /* no end-of-image needed for the header */
    if (j ? check_jpeg_huffman(path, (const unsigned char *)text, (long)len, j, st)
          : check_truncation(path, (const unsigned char *)text, (long)len, st))
        rc = st->code;
    else if (!stbi_info_from_memory((const unsigned char *)text, (int)len, w, h, &c))
        rc = status_set(st, ST_INPUT, "%s: cannot read image header (%s)", path, stbi_failure_reason());
    else if (*w < 1 || *h < 1)
        rc = status_set(st, ST_INPUT, "%s: image of %d x %d pixels: empty", path, *w, *h);
    free(text);
    return rc;
}

/* Truncation checks that the decoder does not make (see images.h). */
/* A JPEG's Huffman tables (DHT segments, anywhere among the markers, also between the scans of a
 * progressive file): each holds at most 256 codes (ITU-T T.81 | ISO/IEC 10918-1, 1992, B.2.4.2:
 * the 16 counts L1..L16 sum to the number of values, which are 8-bit). Debian's stb_image 2.27
 * indexes past its 257-entry size table for more (found by tests/fuzz/fuzz_stb.c). */
static int check_jpeg_huffman(const char *path, const unsigned char *b, long n, long i, Status *st) {
    while (i + 4 <= n) {
        if (b[i] != 0xFF) { /* entropy-coded data after a scan header: on to the next marker */
            i++;
            continue;
        }
        unsigned m = b[i + 1];
        if (m == 0xFF || m == 0x00 || (m >= 0xD0 && m <= 0xD8) || m == 0x01) { /* fill, stuffing, RSTn, SOI, TEM */
            i += m == 0xFF ? 1 : 2;
            continue;
        }
        if (m == 0xD9) return 0; /* end of image */
        long len = (long)b[i + 2] << 8 | b[i + 3];
        if (len < 2) return 0; /* stb_image reports it */
        if (m == 0xC4) { /* as stb_image reads it: table after table while the length lasts, 0 past the end */
            for (long p = i + 4, end = i + 2 + len; p < end;) {
                int count = 0;
                for (int k = 1; k <= 16; k++) count += p + k < n ? b[p + k] : 0;
                if (count > 256)
                    return status_set(st, ST_INPUT, "%s: corrupt JPEG (a Huffman table of %d codes, at most 256)",
                                      path, count);
                p += 17 + count;
            }
        }
        if (i + 2 + len > n) return 0; /* a segment past the end: stb_image reports it */
        i += 2 + len;
    }
    return 0;
}

/* Where a JPEG's segments begin (after its start-of-image marker, FF D8, which stb_image takes after
 * any number of FF fill bytes), or 0 when b is not a JPEG to stb_image. */
static long jpeg_start(const unsigned char *b, long n) {
    if (n < 2 || b[0] != 0xFF) return 0;
    long i = 1;
    while (i < n && b[i] == 0xFF) i++;
    return i < n && b[i] == 0xD8 ? i + 1 : 0;
}

static int check_truncation(const char *path, const unsigned char *b, long n, Status *st) {
    long j = jpeg_start(b, n);
    if (j) {   /* JPEG */
        long from = n > 1024 ? n - 1024 : 0;
        for (long i = n - 2; i >= from; i--)
            if (b[i] == 0xFF && b[i + 1] == 0xD9) return check_jpeg_huffman(path, b, n, j, st);
        return status_set(st, ST_INPUT, "%s: truncated JPEG (no end-of-image marker)", path);
    }
    static const unsigned char png_sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1A, '\n'};
    if (n >= 8 && !memcmp(b, png_sig, 8)) {
        /* every chunk within the file: stb_image allocates an IDAT chunk's declared length before it
         * reads it (a 123-byte file made it ask for 2 GB; found by tests/fuzz/fuzz_stb.c). Chunks:
         * u32 length (big-endian), 4-byte type, data, u32 CRC ("PNG (Portable Network Graphics)
         * Specification", W3C Recommendation, 2003, 5.3). */
        long off = 8;
        while (off < n) {
            if (n - off < 12) /* a chunk's length, type and CRC alone take 12 bytes: stb_image reads zeros
                               * past the end, so a length cut short can still declare 2 GB (fuzz_stb) */
                return status_set(st, ST_INPUT, "%s: truncated or corrupt PNG (a chunk at byte %ld, %ld bytes left, "
                                  "fewer than a chunk's 12)", path, off, n - off);
            unsigned long len = (unsigned long)b[off] << 24 | (unsigned long)b[off + 1] << 16 |
                                (unsigned long)b[off + 2] << 8 | b[off + 3];
            if (len > (unsigned long)(n - off - 12)) {
                char type[5];
                for (int k = 0; k < 4; k++) {
                    unsigned char t = b[off + 4 + k];
                    type[k] = (t >= 'A' && t <= 'Z') || (t >= 'a' && t <= 'z') ? (char)t : '?';
                }
                type[4] = 0;
                return status_set(st, ST_INPUT, "%s: truncated or corrupt PNG (chunk %s of %lu bytes, %ld left in the file)",
                                  path, type, len, n - off - 12);
            }
            int iend = !memcmp(b + off + 4, "IEND", 4);
            off += 12 + (long)len;
            if (iend) break;
        }
    }
    if (n >= 6 && b[0] == 'B' && b[1] == 'M') {
        unsigned long declared = b[2] | (unsigned long)b[3] << 8 | (unsigned long)b[4] << 16 |
                                 (unsigned long)b[5] << 24;
        if (declared > (unsigned long)n)
            return status_set(st, ST_INPUT, "%s: truncated BMP (%ld bytes, header declares %lu)", path, n,
                              declared);
    }
    return 0;
}

/* Binary PGM (P5) and PPM (P6), any maxval up to 65535 (two bytes, most significant first, above
 * 255): header tokens separated by whitespace, '#' comments, then one whitespace byte. Returns 1
 * when the buffer is such a file (decoded into *out or an error set in st), 0 when it is not. */
static int load_pnm(const char *path, const unsigned char *b, long n, GrayStd g, float **out, int *w,
                    int *h, Status *st) {
    if (n < 2 || b[0] != 'P' || (b[1] != '5' && b[1] != '6')) return 0;
    int c = b[1] == '5' ? 1 : 3;
    long pos = 2, val[3];
    for (int k = 0; k < 3; k++) {
        for (;;) {
            while (pos < n && (b[pos] == ' ' || b[pos] == '\t' || b[pos] == '\n' || b[pos] == '\r' ||
                               b[pos] == '\v' || b[pos] == '\f'))
                pos++;
            if (pos < n && b[pos] == '#') {
                while (pos < n && b[pos] != '\n') pos++;
                continue;
            }
            break;
        }
        static const char *const what[3] = {"width", "height", "maxval"};
        static const long most[3] = {(1L << 24) - 1, (1L << 24) - 1, 65535};
        if (pos >= n || b[pos] < '0' || b[pos] > '9') {
            status_set(st, ST_INPUT, "%s: malformed PNM header (no %s)", path, what[k]);
            return 1;
        }
        /* every digit is read: a number too large is named as written, not cut short */
        long start = pos;
        val[k] = 0;
        while (pos < n && b[pos] >= '0' && b[pos] <= '9') {
            if (val[k] <= most[k]) val[k] = val[k] * 10 + (b[pos] - '0');
            pos++;
        }
        if (val[k] < 1 || val[k] > most[k]) {
            status_set(st, ST_INPUT, "%s: PNM %s %.*s%s is outside 1..%ld", path, what[k],
                       pos - start > 40 ? 40 : (int)(pos - start), (const char *)b + start, pos - start > 40 ? "..." : "",
                       most[k]);
            return 1;
        }
        if (pos < n && !(b[pos] == ' ' || b[pos] == '\t' || b[pos] == '\n' || b[pos] == '\r' || b[pos] == '\v' ||
                         b[pos] == '\f' || (k < 2 && b[pos] == '#'))) {
            status_set(st, ST_INPUT, "%s: malformed PNM header (byte 0x%02x after the %s)", path, b[pos], what[k]);
            return 1;
        }
    }
    pos++;   /* the single whitespace byte after maxval */
    int bps = val[2] > 255 ? 2 : 1;
    long np = val[0] * val[1], need = np * c * bps;
    if (np > IMAGE_MAX_PIXELS) {
        status_set(st, ST_INPUT, "%s: image of %ld x %ld pixels, more than the %ld a frame may have", path, val[0],
                   val[1], (long)IMAGE_MAX_PIXELS);
        return 1;
    }
    if (pos > n || n - pos < need) {
        status_set(st, ST_INPUT, "%s: truncated PNM (%ld data bytes, %ldx%ld needs %ld)", path,
                   pos > n ? 0 : n - pos, val[0], val[1], need);
        return 1;
    }
    float *f = malloc(sizeof(float) * (size_t)np);   /* (h, w) */
    if (!f) {
        status_set(st, ST_RUNTIME, "%s: out of memory", path);
        return 1;
    }
    double wt[3], unit = 1.0 / (double)val[2];
    gray_weights(g, wt);
    const unsigned char *d = b + pos;
    for (long i = 0; i < np; i++) {
        double s[3];
        for (int k = 0; k < c; k++) {
            const unsigned char *q = d + (i * c + k) * bps;
            s[k] = bps == 2 ? (double)(q[0] << 8 | q[1]) : (double)q[0];
            if (s[k] > (double)val[2]) { /* not a PNM sample: refused rather than clamped */
                free(f);
                status_set(st, ST_INPUT, "%s: PNM sample %ld (row %ld, column %ld) is %.0f, above the maxval %ld", path,
                           i * c + k, i / val[0], i % val[0], s[k], val[2]);
                return 1;
            }
        }
        double v = c == 3 ? wt[0] * s[0] + wt[1] * s[1] + wt[2] * s[2] : s[0];
        f[i] = (float)(v * unit);
    }
    *w = (int)val[0], *h = (int)val[1];
    *out = f;
    status_ok(st);
    return 1;
}

int image_load_gray(const char *path, GrayStd g, float **out, int *w, int *h, Status *st) {
    *out = NULL;
    char *text;
    size_t len;
    if (fs_read_file(path, (size_t)LONG_MAX, &text, &len, st)) return st->code;
    unsigned char *buf = (unsigned char *)text;
    long n = (long)len;
    if (n == 0) {
        free(buf);
        return status_set(st, ST_INPUT, "%s: empty file", path);
    }
    if (n > INT_MAX) { /* stb_image takes the length as an int */
        free(buf);
        return status_set(st, ST_INPUT, "%s: %ld bytes, more than the 2 GiB an image may have", path, n);
    }
    if (check_truncation(path, buf, n, st)) {
        free(buf);
        return st->code;
    }
    if (load_pnm(path, buf, n, g, out, w, h, st)) {
        free(buf);
        return st->code;
    }
    int c, is16 = stbi_is_16_bit_from_memory(buf, (int)n);
    /* the size from the header first: a file of a few hundred bytes may declare billions of pixels */
    if (stbi_info_from_memory(buf, (int)n, w, h, &c) && (long)*w * *h > IMAGE_MAX_PIXELS) {
        free(buf);
        return status_set(st, ST_INPUT, "%s: image of %d x %d pixels, more than the %ld a frame may have", path, *w,
                          *h, (long)IMAGE_MAX_PIXELS);
    }
    void *px = is16 ? (void *)stbi_load_16_from_memory(buf, (int)n, w, h, &c, 0)
                    : (void *)stbi_load_from_memory(buf, (int)n, w, h, &c, 0);
    free(buf);
    if (!px) {
        const char *why = stbi_failure_reason();
        return status_set(st, ST_INPUT, "%s: cannot decode image (%s)", path, why ? why : "unknown error");
    }
    long np = (long)*w * *h;
    if (*w < 1 || *h < 1) { /* stb_image gives a BMP of height 0 as an image (found by fuzz_stb) */
        stbi_image_free(px);
        return status_set(st, ST_INPUT, "%s: image of %d x %d pixels: empty", path, *w, *h);
    }
    float *f = malloc(sizeof(float) * (size_t)np);   /* (h, w) */
    if (!f) {
        stbi_image_free(px);
        return status_set(st, ST_RUNTIME, "%s: out of memory", path);
    }
    double wt[3];
    gray_weights(g, wt);
    double unit = is16 ? 1.0 / 65535.0 : 1.0 / 255.0;
    const unsigned char *p8 = px;
    const unsigned short *p16 = px;
    for (long i = 0; i < np; i++) {
        double v;
        if (c >= 3) {
            double r = is16 ? p16[i * c] : p8[i * c];
            double gg = is16 ? p16[i * c + 1] : p8[i * c + 1];
            double b = is16 ? p16[i * c + 2] : p8[i * c + 2];
            v = wt[0] * r + wt[1] * gg + wt[2] * b;
        } else {
            v = is16 ? p16[i * c] : p8[i * c];
        }
        f[i] = (float)(v * unit);
    }
    stbi_image_free(px);
    *out = f;
    return 0;
}

void image_crop(const float *src, int sw, int sh, int x, int y, int cw, int ch, float *dst) {
    (void)sh;
    for (int r = 0; r < ch; r++) memcpy(dst + (long)r * cw, src + (long)(y + r) * sw + x, sizeof(float) * (size_t)cw);
}

/* One axis of the area average: out[X] = sum_i in[i * step] * overlap(i, X) / S, where source
 * pixel i covers [i D, (i+1) D) and output pixel X covers [X S, (X+1) S) in units of 1/D. Exact
 * integer overlaps. */
static void area_axis(const float *in, long in_step, int S, float *out, long out_step, int D) {
    for (int X = 0; X < D; X++) {
        long a = (long)X * S, b = (long)(X + 1) * S;
        int i0 = (int)(a / D), i1 = (int)((b - 1) / D);
        double acc = 0;
        for (int i = i0; i <= i1; i++) {
            long lo = (long)i * D > a ? (long)i * D : a, hi = (long)(i + 1) * D < b ? (long)(i + 1) * D : b;
            acc += (double)in[i * in_step] * (double)(hi - lo);
        }
        out[X * out_step] = (float)(acc / S);
    }
}

void image_resize_area(const float *src, int sw, int sh, float *dst, int dw, int dh, float *tmp) {
    for (int r = 0; r < sh; r++) area_axis(src + (long)r * sw, 1, sw, tmp + (long)r * dw, 1, dw);   /* (sh, dw) */
    for (int c = 0; c < dw; c++) area_axis(tmp + c, dw, sh, dst + c, dw, dh);                        /* (dh, dw) */
}

void image_quantise_u8(const float *src, long n, uint8_t *dst) {
    for (long i = 0; i < n; i++) {
        float v = src[i] * 255.0f + 0.5f;
        dst[i] = v <= 0 ? 0 : v >= 255 ? 255 : (uint8_t)v;
    }
}

void image_quantise_u16(const float *src, long n, uint16_t *dst) {
    for (long i = 0; i < n; i++) {
        float v = src[i] * 65535.0f + 0.5f;
        dst[i] = v <= 0 ? 0 : v >= 65535 ? 65535 : (uint16_t)v;
    }
}

/* PNG layout (PNG Specification, Second Edition, W3C Recommendation 2003, 5.2-5.3): the 8-byte
 * signature, then chunks of a 4-byte big-endian length, a 4-byte type, the data and a CRC-32 of type
 * and data. IHDR comes first (13 data bytes), so it ends at byte 33. */
enum { PNG_IHDR_END = 8 + 4 + 4 + 13 + 4 };

typedef struct {
    FILE *f;
    int ok;
    long written;               /* bytes of stb's stream seen so far */
    const uint8_t *chunk;       /* a tEXt chunk to insert after IHDR, or NULL */
    size_t chunk_len;
} PngSink;

static void png_put(PngSink *s, const void *p, size_t n) {
    if (s->ok && n && fwrite(p, 1, n, s->f) != n) s->ok = 0;
}

static void png_sink(void *ctx, void *data, int size) {
    PngSink *s = ctx;
    const uint8_t *d = data;
    size_t n = (size_t)size, head = 0;
    if (s->chunk && s->written < PNG_IHDR_END && s->written + (long)n >= PNG_IHDR_END) {
        head = (size_t)(PNG_IHDR_END - s->written);
        png_put(s, d, head);
        png_put(s, s->chunk, s->chunk_len);
    }
    png_put(s, d + head, n - head);
    s->written += (long)n;
}

static void be32(uint8_t *p, uint32_t v) {
    p[0] = (uint8_t)(v >> 24), p[1] = (uint8_t)(v >> 16), p[2] = (uint8_t)(v >> 8), p[3] = (uint8_t)v;
}

static uint32_t get_be32(const uint8_t *p) {
    return (uint32_t)p[0] << 24 | (uint32_t)p[1] << 16 | (uint32_t)p[2] << 8 | p[3];
}

int image_write_png_gray_text(const char *path, const uint8_t *px, int w, int h, const char *key, const char *text,
                              Status *st) {
    uint8_t chunk[4 + 4 + IMAGE_PNG_TEXT_MAX + 4];
    size_t kl = key ? strlen(key) : 0, tl = text ? strlen(text) : 0, dl = kl + 1 + tl;
    if (key && (kl < 1 || kl > 79 || dl > IMAGE_PNG_TEXT_MAX)) /* keywords are 1-79 bytes (11.3.4.3) */
        return status_set(st, ST_RUNTIME, "%s: PNG text '%s' too long", path, key);
    if (key) {
        be32(chunk, (uint32_t)dl);
        memcpy(chunk + 4, "tEXt", 4);
        memcpy(chunk + 8, key, kl);
        chunk[8 + kl] = 0;
        memcpy(chunk + 9 + kl, text, tl);
        be32(chunk + 8 + dl, fs_crc32(0, chunk + 4, 4 + dl));
    }
    AtomicFile af;
    if (atomic_open(&af, path, st)) return st->code;
    PngSink s = {af.f, 1, 0, key ? chunk : NULL, key ? 12 + dl : 0};
    if (!stbi_write_png_to_func(png_sink, &s, w, h, 1, px, w) || !s.ok || s.written < PNG_IHDR_END) {
        atomic_abort(&af);
        return status_set(st, ST_RUNTIME, "%s: cannot write PNG", path);
    }
    return atomic_commit(&af, st);
}

int image_write_png_gray(const char *path, const uint8_t *px, int w, int h, Status *st) {
    return image_write_png_gray_text(path, px, w, h, NULL, NULL, st);
}

int image_png_text(const char *path, const char *key, char *out, size_t n) {
    uint8_t b[8192];
    FILE *f = fopen(path, "rb");
    if (!f) return 0;
    size_t len = fread(b, 1, sizeof b, f);
    fclose(f);
    static const uint8_t sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1A, '\n'};
    if (len < 8 || memcmp(b, sig, 8)) return 0;
    size_t kl = strlen(key);
    for (size_t at = 8; at + 12 <= len;) {
        uint32_t dl = get_be32(b + at);
        if (dl > len - at - 12 || !memcmp(b + at + 4, "IDAT", 4)) return 0; /* beyond what was read, or the image */
        const uint8_t *d = b + at + 8;
        if (!memcmp(b + at + 4, "tEXt", 4) && dl > kl && !memcmp(d, key, kl) && d[kl] == 0 &&
            fs_crc32(0, b + at + 4, 4 + dl) == get_be32(d + dl)) {
            size_t tl = dl - kl - 1;
            if (tl >= n) return 0;
            memcpy(out, d + kl + 1, tl);
            out[tl] = 0;
            return memchr(out, 0, tl) ? 0 : 1;
        }
        at += 12 + dl;
    }
    return 0;
}
