/* io/fs/hash.h: the program's two checksums.
 *
 * FNV-1a 64 (Fowler, Noll, Vo): a fast, non-cryptographic hash for digests that tell whether
 * something changed (the config digest in checkpoints, the frame store's digest of its sources,
 * sweep member ids). Start from FNV1A64_INIT and feed pieces in order:
 *     uint64_t h = fnv1a64(FNV1A64_INIT, text, strlen(text));
 *     h = fnv1a64_u64(h, size);            // 8 bytes, little-endian
 *
 * CRC-32 (the ISO-HDLC / IEEE 802.3 CRC: reflected polynomial 0xEDB88320, initial value and final
 * xor 0xFFFFFFFF; check value crc32("123456789") = 0xCBF43926): the integrity check of the binary
 * files (checkpoints, frame store). Continued over pieces: crc = fs_crc32(fs_crc32(0, a, na), b, nb). */
#ifndef IO_FS_HASH_H
#define IO_FS_HASH_H

#include <stddef.h>
#include <stdint.h>

#define FNV1A64_INIT 0xcbf29ce484222325ULL   /* the offset basis */
#define FNV1A64_PRIME 0x100000001b3ULL

/* h continued over the n bytes at p. */
uint64_t fnv1a64(uint64_t h, const void *p, size_t n);
/* ... over the bytes of a NUL-terminated string (not the NUL). */
uint64_t fnv1a64_str(uint64_t h, const char *s);
/* ... over v as 8 little-endian bytes. */
uint64_t fnv1a64_u64(uint64_t h, uint64_t v);

/* CRC-32 of n bytes, continued from crc (0 to start). */
uint32_t fs_crc32(uint32_t crc, const void *data, size_t n);

#endif
