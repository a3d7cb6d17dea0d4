/* io/fs/bytes.h: unsigned integers as little-endian bytes, whatever the host's byte order. Every
 * binary file of ours (frame store, checkpoint, .npy) stores its integers this way.
 *
 *     unsigned char hdr[16];
 *     le_put_u32(hdr + 8, version);
 *     ... le_get_u32(hdr + 8) == version ... */
#ifndef IO_FS_BYTES_H
#define IO_FS_BYTES_H

#include <stdint.h>

static inline void le_put_u16(unsigned char *p, uint16_t v) {
    p[0] = (unsigned char)v;
    p[1] = (unsigned char)(v >> 8);
}
static inline void le_put_u32(unsigned char *p, uint32_t v) {
    for (int i = 0; i < 4; i++) p[i] = (unsigned char)(v >> (8 * i));
}
static inline void le_put_u64(unsigned char *p, uint64_t v) {
    for (int i = 0; i < 8; i++) p[i] = (unsigned char)(v >> (8 * i));
}

static inline uint16_t le_get_u16(const unsigned char *p) { return (uint16_t)(p[0] | p[1] << 8); }
static inline uint32_t le_get_u32(const unsigned char *p) {
    return (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 | (uint32_t)p[3] << 24;
}
static inline uint64_t le_get_u64(const unsigned char *p) {
    return (uint64_t)le_get_u32(p) | (uint64_t)le_get_u32(p + 4) << 32;
}

#endif
