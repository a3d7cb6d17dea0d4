/* sparse/mathml.c: laws as Presentation MathML (see mathml.h). */
#include "sparse/mathml.h"

#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

#define MINUS "&#x2212;"
#define TIMES "<mo>&#x2062;</mo>"   /* invisible times: a product */
#define APPLY "<mo>&#x2061;</mo>"   /* function application */

/* A bounded builder that counts what it would need, like snprintf. */
typedef struct {
    char *buf;
    size_t n, len;
} Mb;

static void put(Mb *b, const char *s) {
    size_t l = strlen(s);
    if (b->len < b->n) {
        size_t room = b->n - b->len - 1, c = l < room ? l : room;
        memcpy(b->buf + b->len, s, c);
        b->buf[b->len + c] = 0;
    }
    b->len += l;
}

/* A text node, escaped. */
static void put_text(Mb *b, const char *s) {
    char one[2] = {0, 0};
    for (; *s; s++) {
        if (*s == '<') put(b, "&lt;");
        else if (*s == '>') put(b, "&gt;");
        else if (*s == '&') put(b, "&amp;");
        else if (*s == '"') put(b, "&quot;");
        else one[0] = *s, put(b, one);
    }
}

static void elem(Mb *b, const char *tag, const char *text) {
    put(b, "<"), put(b, tag), put(b, ">");
    put_text(b, text);
    put(b, "</"), put(b, tag), put(b, ">");
}

static void mn_int(Mb *b, int v) {
    char t[16];
    snprintf(t, sizeof t, "%d", v);
    elem(b, "mn", t);
}

static int clamp_digits(int d) { return d < 1 ? 1 : d > 17 ? 17 : d; }

/* |v| at `digits` significant digits: "<mn>0.98</mn>", or mantissa x 10^exponent. */
static void magnitude(Mb *b, double v, int digits) {
    char t[64];
    snprintf(t, sizeof t, "%.*g", clamp_digits(digits), fabs(v));
    char *e = strchr(t, 'e');
    if (!e) {
        elem(b, "mn", t);
        return;
    }
    *e = 0;
    int ex = atoi(e + 1);
    if (strcmp(t, "1")) {
        elem(b, "mn", t);
        put(b, "<mo>&#xD7;</mo>");
    }
    put(b, "<msup><mn>10</mn>");
    if (ex < 0) put(b, "<mrow><mo>" MINUS "</mo>"), mn_int(b, -ex), put(b, "</mrow>");
    else mn_int(b, ex);
    put(b, "</msup>");
}

/* x_i as <msub><mi>x</mi><mn>i</mn></msub> (i from 1). */
static void sub(Mb *b, char var, int i) {
    char v[2] = {var, 0};
    put(b, "<msub>"), elem(b, "mi", v), mn_int(b, i), put(b, "</msub>");
}

/* d^order x_i / dt^order as a fraction. */
static void deriv(Mb *b, char var, int i, int order) {
    put(b, "<mfrac><mrow>");
    if (order == 2) put(b, "<msup><mi>d</mi><mn>2</mn></msup>");
    else put(b, "<mi>d</mi>");
    sub(b, var, i);
    put(b, "</mrow><mrow><mi>d</mi>");
    put(b, order == 2 ? "<msup><mi>t</mi><mn>2</mn></msup>" : "<mi>t</mi>");
    put(b, "</mrow></mfrac>");
}

/* Variable v of the state: positions 0..k-1, velocities k..2k-1. */
static void variable(Mb *b, char var, int k, int v) {
    if (v >= k) deriv(b, var, v - k + 1, 1);
    else sub(b, var, v + 1);
}

static void power(Mb *b, char var, int k, int v, int p) {
    if (p == 1) {
        variable(b, var, k, v);
        return;
    }
    char v1[2] = {var, 0};
    if (v < k) {
        put(b, "<msubsup>"), elem(b, "mi", v1), mn_int(b, v + 1), mn_int(b, p), put(b, "</msubsup>");
        return;
    }
    put(b, "<msup><mrow><mo>(</mo>");
    variable(b, var, k, v);
    put(b, "<mo>)</mo></mrow>");
    mn_int(b, p);
    put(b, "</msup>");
}

/* Term t: 1 when it is the constant (written by the caller as its coefficient alone). */
static int term(Mb *b, const Library *lib, const Term *t, char var, const double *w, int digits) {
    int k = lib->spec.n_latent;
    if (t->kind == TERM_CONST) return 1;
    if (t->kind == TERM_MONO) {
        for (int f = 0; f < t->n_fac; f++) {
            if (f) put(b, TIMES);
            power(b, var, k, t->var[f], t->pow[f]);
        }
        return 0;
    }
    elem(b, "mi", t->kind == TERM_SIN ? "sin" : "cos");
    put(b, APPLY "<mrow><mo>(</mo>");
    if (w) {   /* the canonical law's fitted frequency, as its text prints it */
        char fr[40];
        snprintf(fr, sizeof fr, "%.*g", clamp_digits(digits), t->freq * w[t->var[0] % k]);
        if (strcmp(fr, "1")) {
            double f = strtod(fr, NULL);
            if (f < 0) put(b, "<mo>" MINUS "</mo>");
            magnitude(b, f, digits);
            put(b, TIMES);
        }
    } else if (t->freq != 1) {
        mn_int(b, t->freq);
        put(b, TIMES);
    }
    variable(b, var, k, t->var[0]);
    put(b, "<mo>)</mo></mrow>");
    return 0;
}

/* One coefficient and what it multiplies, with its sign; `first` leaves a + out. name(ctx) writes the
 * factor and returns 1 when there is none (the constant). */
static void signed_term(Mb *b, double c, int first, int digits, int (*name)(Mb *, const void *), const void *ctx) {
    if (c < 0) put(b, "<mo>" MINUS "</mo>");
    else if (!first) put(b, "<mo>+</mo>");
    char t[64];
    snprintf(t, sizeof t, "%.*g", clamp_digits(digits), fabs(c));
    Mb probe = {NULL, 0, 0};
    int constant = name(&probe, ctx);
    if (constant) {
        magnitude(b, c, digits);
        return;
    }
    if (strcmp(t, "1")) {
        magnitude(b, c, digits);
        put(b, TIMES);
    }
    name(b, ctx);
}

typedef struct {
    const Library *lib;
    const Term *t;
    char var;
    const double *w;
    int digits;
} TermCtx;

static int term_fn(Mb *b, const void *vctx) {
    const TermCtx *c = vctx;
    return term(b, c->lib, c->t, c->var, c->w, c->digits);
}

static void row_start(Mb *b) { put(b, "<mtr><mtd>"); }
static void row_eq(Mb *b) { put(b, "</mtd><mtd><mo>=</mo></mtd><mtd><mrow>"); }
static void row_end(Mb *b) { put(b, "</mrow></mtd></mtr>"); }
/* Before a term: after every MATHML_TERMS_PER_ROW terms, the right-hand side goes on in a row of its own. */
static void row_wrap(Mb *b, int written) {
    if (written && written % MATHML_TERMS_PER_ROW == 0) put(b, "</mrow></mtd></mtr><mtr><mtd></mtd><mtd></mtd><mtd><mrow>");
}

size_t mathml_law(char *buf, size_t n, const Library *lib, const double *xi, const uint8_t *mask, char var,
                  const double *w, int digits) {
    Mb b = {buf, n, 0};
    if (n) buf[0] = 0;
    int k = lib->spec.n_latent;
    put(&b, "<math display=\"block\"><mtable>");
    for (int j = 0; j < k; j++) {
        row_start(&b);
        deriv(&b, var, j + 1, lib->spec.order == 2 ? 2 : 1);
        row_eq(&b);
        int written = 0;
        for (int t = 0; t < lib->n_terms; t++) {
            long q = (long)t * k + j;
            if ((mask && !mask[q]) || xi[q] == 0) continue;
            TermCtx ctx = {lib, &lib->terms[t], var, w, digits};
            row_wrap(&b, written);
            signed_term(&b, xi[q], !written, digits, term_fn, &ctx);
            written++;
        }
        if (!written) put(&b, "<mn>0</mn>");
        row_end(&b);
    }
    put(&b, "</mtable></math>");
    return b.len;
}

typedef struct {
    int j;   /* z_{j+1}, or -1 for the offset */
} MapCtx;

static int map_fn(Mb *b, const void *vctx) {
    const MapCtx *c = vctx;
    if (c->j < 0) return 1;
    sub(b, 'z', c->j + 1);
    return 0;
}

size_t mathml_map(char *buf, size_t n, int k, const double *A, const double *b0, const double *w, int digits) {
    Mb b = {buf, n, 0};
    if (n) buf[0] = 0;
    put(&b, "<math display=\"block\"><mtable>");
    for (int i = 0; i < k; i++) {
        row_start(&b);
        sub(&b, 'u', i + 1);
        row_eq(&b);
        int written = 0;
        for (int j = 0; j <= k; j++) {
            double c = j < k ? A[(long)i * k + j] : b0[i];
            if (c == 0) continue;
            MapCtx ctx = {j < k ? j : -1};
            row_wrap(&b, written);
            signed_term(&b, c, !written, digits, map_fn, &ctx);
            written++;
        }
        if (!written) put(&b, "<mn>0</mn>");
        row_end(&b);
    }
    for (int i = 0; w && i < k; i++) {
        row_start(&b);
        sub(&b, 'w', i + 1);
        row_eq(&b);
        if (w[i] < 0) put(&b, "<mo>" MINUS "</mo>");
        magnitude(&b, w[i], digits);
        row_end(&b);
    }
    put(&b, "</mtable></math>");
    return b.len;
}
