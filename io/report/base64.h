/* io/report/base64.h: base64 encoding (RFC 4648, "The Base16, Base32, and Base64 Data Encodings", IETF
 * 2006, section 4: the standard alphabet A-Z a-z 0-9 + /, '=' padding to a multiple of 4
 * characters, no line breaks). The report uses it for images embedded as data: URIs. */
#ifndef IO_BASE64_H
#define IO_BASE64_H

#include <stddef.h>
#include <stdio.h>

/* Characters in the base64 text of n bytes (without a terminating NUL): 4 ceil(n / 3). */
static inline size_t base64_len(size_t n) { return (n + 2) / 3 * 4; }

/* Write the base64 text of data (n bytes) to out, which holds base64_len(n) + 1 bytes; the text is
 * NUL-terminated. Returns base64_len(n). */
size_t base64_encode(char *out, const void *data, size_t n);

/* The same text streamed to f. Returns 0, or -1 when writing failed. */
int base64_fwrite(FILE *f, const void *data, size_t n);

#endif
