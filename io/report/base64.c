/* io/report/base64.c: see base64.h. */
#include "io/report/base64.h"

#include <stdint.h>

static const char alphabet[65] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";

/* One group: up to 3 input bytes (m of them, 1..3) to 4 characters, '=' for the missing ones. */
static void group(char out[4], const uint8_t *in, size_t m) {
    uint32_t v = (uint32_t)in[0] << 16;
    if (m > 1) v |= (uint32_t)in[1] << 8;
    if (m > 2) v |= in[2];
    out[0] = alphabet[v >> 18 & 63];
    out[1] = alphabet[v >> 12 & 63];
    out[2] = m > 1 ? alphabet[v >> 6 & 63] : '=';
    out[3] = m > 2 ? alphabet[v & 63] : '=';
}

size_t base64_encode(char *out, const void *data, size_t n) {
    const uint8_t *in = data;
    size_t j = 0;
    for (size_t i = 0; i < n; i += 3, j += 4) group(out + j, in + i, n - i < 3 ? n - i : 3);
    out[j] = 0;
    return j;
}

int base64_fwrite(FILE *f, const void *data, size_t n) {
    const uint8_t *in = data;
    char buf[4096];     /* a multiple of 4 */
    size_t j = 0;
    for (size_t i = 0; i < n; i += 3) {
        group(buf + j, in + i, n - i < 3 ? n - i : 3);
        j += 4;
        if (j == sizeof buf) {
            if (fwrite(buf, 1, j, f) != j) return -1;
            j = 0;
        }
    }
    if (j && fwrite(buf, 1, j, f) != j) return -1;
    return 0;
}
