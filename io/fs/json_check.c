/* io/fs/json_check.c: a strict RFC 8259 syntax check (see json_check.h). Recursive descent with an
 * explicit depth bound, so that no input can exhaust the stack. */
#include "io/fs/json_check.h"

#include <stdio.h>
#include <string.h>

typedef struct {
    const unsigned char *s;
    size_t n, i;
    int depth;
    JsonFault *f;
} P;

static int fail(P *p, const char *what) {
    JsonFault *f = p->f;
    f->offset = p->i;
    f->line = 1, f->col = 1;
    for (size_t k = 0; k < p->i && k < p->n; k++) {
        if (p->s[k] == '\n') f->line++, f->col = 1;
        else f->col++;
    }
    snprintf(f->what, sizeof f->what, "%s", what);
    return -1;
}

static void ws(P *p) { /* RFC 8259, 2: space, horizontal tab, line feed, carriage return */
    while (p->i < p->n && (p->s[p->i] == ' ' || p->s[p->i] == '\t' || p->s[p->i] == '\n' || p->s[p->i] == '\r'))
        p->i++;
}

static int at(P *p, char c) { return p->i < p->n && p->s[p->i] == (unsigned char)c; }
static int digit(P *p) { return p->i < p->n && p->s[p->i] >= '0' && p->s[p->i] <= '9'; }

static int hex(unsigned char c) {
    return c >= '0' && c <= '9' ? c - '0' : c >= 'a' && c <= 'f' ? c - 'a' + 10 : c >= 'A' && c <= 'F' ? c - 'A' + 10 : -1;
}

/* One UTF-8 sequence (RFC 3629, 4: no overlong forms, no surrogates, at most U+10FFFF). */
static int utf8(P *p) {
    const unsigned char *s = p->s + p->i;
    size_t left = p->n - p->i;
    unsigned c = s[0];
    int len;
    unsigned lo = 0x80, hi = 0xBF;
    if (c < 0x80) len = 1;
    else if (c >= 0xC2 && c <= 0xDF) len = 2;
    else if (c >= 0xE0 && c <= 0xEF) len = 3, lo = c == 0xE0 ? 0xA0 : 0x80, hi = c == 0xED ? 0x9F : 0xBF;
    else if (c >= 0xF0 && c <= 0xF4) len = 4, lo = c == 0xF0 ? 0x90 : 0x80, hi = c == 0xF4 ? 0x8F : 0xBF;
    else return fail(p, "a byte that is not UTF-8 in a string");
    if ((size_t)len > left) return fail(p, "a UTF-8 sequence cut by the end of the text");
    for (int k = 1; k < len; k++) {
        unsigned b = s[k];
        if (b < (k == 1 ? lo : 0x80) || b > (k == 1 ? hi : 0xBF)) return fail(p, "a byte that is not UTF-8 in a string");
    }
    p->i += (size_t)len;
    return 0;
}

static int string(P *p) {
    p->i++; /* the opening quote */
    for (;;) {
        if (p->i >= p->n) return fail(p, "a string without its closing quote");
        unsigned char c = p->s[p->i];
        if (c == '"') {
            p->i++;
            return 0;
        }
        if (c < 0x20) return fail(p, "a control character in a string (write it as an escape, \\n or \\u00XX)");
        if (c == '\\') {
            p->i++;
            if (p->i >= p->n) return fail(p, "a string without its closing quote");
            c = p->s[p->i];
            if (c == 'u') {
                unsigned v = 0;
                for (int k = 1; k <= 4; k++) {
                    int h = p->i + k < p->n ? hex(p->s[p->i + k]) : -1;
                    if (h < 0) return fail(p, "\\u needs four hexadecimal digits");
                    v = v << 4 | (unsigned)h;
                }
                if (v == 0) return fail(p, "\\u0000 in a string (a NUL would cut the text short)");
                p->i += 5;
            } else if (strchr("\"\\/bfnrt", c) && c) {
                p->i++;
            } else {
                return fail(p, "an escape other than \\\" \\\\ \\/ \\b \\f \\n \\r \\t \\uXXXX");
            }
            continue;
        }
        if (utf8(p)) return -1;
    }
}

/* RFC 8259, 6: -? (0 | [1-9][0-9]*) (. [0-9]+)? ([eE] [+-]? [0-9]+)? */
static int number(P *p) {
    if (at(p, '-')) p->i++;
    if (!digit(p)) return fail(p, "a number needs a digit here");
    if (at(p, '0')) {
        p->i++;
        if (digit(p)) return fail(p, "a number may not have a leading zero");
    } else {
        while (digit(p)) p->i++;
    }
    if (at(p, '.')) {
        p->i++;
        if (!digit(p)) return fail(p, "a number needs digits after its decimal point");
        while (digit(p)) p->i++;
    }
    if (at(p, 'e') || at(p, 'E')) {
        p->i++;
        if (at(p, '+') || at(p, '-')) p->i++;
        if (!digit(p)) return fail(p, "a number needs digits in its exponent");
        while (digit(p)) p->i++;
    }
    return 0;
}

static int word(P *p, const char *w) {
    size_t k = strlen(w);
    if (p->n - p->i < k || memcmp(p->s + p->i, w, k)) return fail(p, "not a JSON value (true, false, null, a number, a string, [ or {)");
    p->i += k;
    return 0;
}

static int value(P *p);

static int container(P *p, char close) {
    if (++p->depth > JSON_MAX_DEPTH) return fail(p, "nested too deep (more than 1000 levels of [ and {)");
    p->i++; /* [ or { */
    ws(p);
    if (at(p, close)) {
        p->i++;
        p->depth--;
        return 0;
    }
    for (;;) {
        if (close == '}') {
            if (!at(p, '"')) return fail(p, "a member name (a string in double quotes) expected");
            if (string(p)) return -1;
            ws(p);
            if (!at(p, ':')) return fail(p, "':' expected after a member name");
            p->i++;
            ws(p);
        }
        if (value(p)) return -1;
        ws(p);
        if (at(p, ',')) {
            p->i++;
            ws(p);
            if (at(p, close)) return fail(p, "a comma before the closing bracket");
            continue;
        }
        if (at(p, close)) {
            p->i++;
            p->depth--;
            return 0;
        }
        return fail(p, close == '}' ? "',' or '}' expected" : "',' or ']' expected");
    }
}

static int value(P *p) {
    if (p->i >= p->n) return fail(p, "a value expected, the text ends");
    switch (p->s[p->i]) {
    case '{': return container(p, '}');
    case '[': return container(p, ']');
    case '"': return string(p);
    case 't': return word(p, "true");
    case 'f': return word(p, "false");
    case 'n': return word(p, "null");
    default:
        if (p->s[p->i] != '-' && !digit(p)) return fail(p, "not a JSON value (true, false, null, a number, a string, [ or {)");
        return number(p);
    }
}

int json_check(const char *text, size_t n, JsonFault *f) {
    P p = {(const unsigned char *)text, n, 0, 0, f};
    if (n >= 3 && !memcmp(text, "\xEF\xBB\xBF", 3)) p.i = 3; /* a byte order mark (RFC 8259, 8.1: may be ignored) */
    ws(&p);
    if (value(&p)) return -1;
    ws(&p);
    if (p.i < p.n) return fail(&p, "text after the JSON value");
    return 0;
}
