/* io/fs/hash.c: see hash.h. */
#include "io/fs/hash.h"

#include <string.h>

#include "io/fs/bytes.h"

uint64_t fnv1a64(uint64_t h, const void *p, size_t n) {
    const unsigned char *b = p;
    for (size_t i = 0; i < n; i++) h = (h ^ b[i]) * FNV1A64_PRIME;
    return h;
}

uint64_t fnv1a64_str(uint64_t h, const char *s) { return fnv1a64(h, s, strlen(s)); }

uint64_t fnv1a64_u64(uint64_t h, uint64_t v) {
    unsigned char b[8];
    le_put_u64(b, v);
    return fnv1a64(h, b, 8);
}

/* Bit by bit, no table: the reflected polynomial shifted in one bit at a time. */
uint32_t fs_crc32(uint32_t crc, const void *data, size_t n) {
    const unsigned char *b = data;
    crc = ~crc;
    for (size_t i = 0; i < n; i++) {
        crc ^= b[i];
        for (int k = 0; k < 8; k++) crc = (crc >> 1) ^ (0xEDB88320u & (0u - (crc & 1u)));
    }
    return ~crc;
}
