/* io/fs/json_check.h: is a text JSON as RFC 8259 defines it ("The JavaScript Object Notation (JSON)
 * Data Interchange Format", IETF, 2017), before cJSON (which is lenient) reads it.
 *
 * cJSON accepts what RFC 8259 does not: numbers with a leading zero (`01`), a decimal point without
 * digits after it (`5.`), `\u0000` in a string, raw control characters in strings, and calls text
 * nested deeper than its limit simply malformed. Every JSON file a user writes (configs, `--set`
 * values, sweep files) passes this check first, so the message says what is wrong and where:
 *
 *     JsonFault f;
 *     if (json_check(text, strlen(text), &f)) -> "line %d, column %d: %s", f.line, f.col, f.what
 */
#ifndef IO_FS_JSON_CHECK_H
#define IO_FS_JSON_CHECK_H

#include <stddef.h>

/* The nesting limit: cJSON's (CJSON_NESTING_LIMIT, 1000 in Debian's build). */
#define JSON_MAX_DEPTH 1000

typedef struct {
    size_t offset;      /* byte offset of the fault */
    int line, col;      /* 1-based; col counts bytes */
    char what[96];      /* "a number may not have a leading zero", "nested deeper than 1000 levels", ... */
} JsonFault;

/* 0 when text[0..n) is one JSON value (whitespace around it allowed, a UTF-8 byte order mark
 * first too), else -1 with the first fault in *f. */
int json_check(const char *text, size_t n, JsonFault *f);

#endif
