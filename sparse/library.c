/* sparse/library.c: the candidate library (see library.h for the term order and names). */
#include "sparse/library.h"

#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- the term table: one row per kind of term ------------------------------------------------ */

typedef struct {
    const char *kind;
    /* value of the term at s (n_vars) */
    double (*eval)(const Term *t, const double *s);
    /* ds (n_vars) += g * d term / d s */
    void (*grad)(const Term *t, const double *s, double g, double *ds);
    /* the term's name in a style, its variables named by nm; returns what snprintf returns */
    int (*name)(const Term *t, NameStyle style, const TermNamer *nm, char *buf, size_t n);
} TermRow;

static double ipow(double x, int p) {
    double r = 1.0;
    for (int i = 0; i < p; i++) r *= x;
    return r;
}

/* constant: 1 */
static double const_eval(const Term *t, const double *s) {
    (void)t, (void)s;
    return 1.0;
}
static void const_grad(const Term *t, const double *s, double g, double *ds) {
    (void)t, (void)s, (void)g, (void)ds;
}
static int const_name(const Term *t, NameStyle style, const TermNamer *nm, char *buf, size_t n) {
    (void)t, (void)style, (void)nm;
    return snprintf(buf, n, "1");
}

/* monomial: prod_f s[var_f]^pow_f */
static double mono_eval(const Term *t, const double *s) {
    double r = 1.0;
    for (int f = 0; f < t->n_fac; f++) r *= ipow(s[t->var[f]], t->pow[f]);
    return r;
}
/* d/ds_{var_f} = pow_f s_f^(pow_f - 1) prod_{g != f} s_g^pow_g */
static void mono_grad(const Term *t, const double *s, double g, double *ds) {
    for (int f = 0; f < t->n_fac; f++) {
        double d = t->pow[f] * ipow(s[t->var[f]], t->pow[f] - 1);
        for (int h = 0; h < t->n_fac; h++)
            if (h != f) d *= ipow(s[t->var[h]], t->pow[h]);
        ds[t->var[f]] += g * d;
    }
}
static int mono_name(const Term *t, NameStyle style, const TermNamer *nm, char *buf, size_t n) {
    char out[LIB_SHOWN_MAX] = "";   /* every factor fits in LIB_SHOWN_MAX / LIB_MAX_DEGREE characters */
    size_t len = 0;
    for (int f = 0; f < t->n_fac; f++) {
        char v[LIB_SHOWN_MAX / LIB_MAX_DEGREE - 8];
        nm->var(nm->ctx, t->var[f], style, v, sizeof v);
        int vel = t->var[f] >= nm->k;
        const char *sep = !f ? "" : style == NAME_LATEX ? " " : "*";
        char *o = out + len;
        size_t room = sizeof out - len;
        int w;
        if (t->pow[f] == 1) w = snprintf(o, room, "%s%s", sep, v);
        else if (style == NAME_LATEX) w = snprintf(o, room, "%s%s^{%d}", sep, v, t->pow[f]);
        else if (vel) w = snprintf(o, room, "%s(%s)^%d", sep, v, t->pow[f]);
        else w = snprintf(o, room, "%s%s^%d", sep, v, t->pow[f]);
        len += (size_t)w < room ? (size_t)w : room - 1;
    }
    return snprintf(buf, n, "%s", out);
}

/* sin(k s_i), cos(k s_i) */
static double sin_eval(const Term *t, const double *s) { return sin(t->freq * s[t->var[0]]); }
static void sin_grad(const Term *t, const double *s, double g, double *ds) {
    ds[t->var[0]] += g * t->freq * cos(t->freq * s[t->var[0]]);
}
static double cos_eval(const Term *t, const double *s) { return cos(t->freq * s[t->var[0]]); }
static void cos_grad(const Term *t, const double *s, double g, double *ds) {
    ds[t->var[0]] -= g * t->freq * sin(t->freq * s[t->var[0]]);
}
static int trig_name(const char *fn, const Term *t, NameStyle style, const TermNamer *nm, char *buf, size_t n) {
    char v[LIB_SHOWN_MAX / LIB_MAX_DEGREE - 8], fr[40];
    nm->var(nm->ctx, t->var[0], style, v, sizeof v);
    if (nm->freq) nm->freq(nm->ctx, t, fr, sizeof fr);
    else snprintf(fr, sizeof fr, "%d", t->freq);
    const char *pre = style == NAME_LATEX ? "\\" : "";
    if (!strcmp(fr, "1")) return snprintf(buf, n, "%s%s(%s)", pre, fn, v);
    return snprintf(buf, n, style == NAME_LATEX ? "%s%s(%s %s)" : "%s%s(%s*%s)", pre, fn, fr, v);
}
static int sin_name(const Term *t, NameStyle style, const TermNamer *nm, char *buf, size_t n) {
    return trig_name("sin", t, style, nm, buf, n);
}
static int cos_name(const Term *t, NameStyle style, const TermNamer *nm, char *buf, size_t n) {
    return trig_name("cos", t, style, nm, buf, n);
}

static const TermRow term_rows[] = {
    [TERM_CONST] = {"constant", const_eval, const_grad, const_name},
    [TERM_MONO] = {"monomial", mono_eval, mono_grad, mono_name},
    [TERM_SIN] = {"sin", sin_eval, sin_grad, sin_name},
    [TERM_COS] = {"cos", cos_eval, cos_grad, cos_name},
};
_Static_assert(sizeof term_rows / sizeof term_rows[0] == TERM_KIND_COUNT,
               "every kind of term needs a row in term_rows");

const char *term_kind_name(TermKind k) {
    return (unsigned)k < TERM_KIND_COUNT ? term_rows[k].kind : "unknown";
}

/* ---- names ------------------------------------------------------------------------------------ */

/* LaTeX of a variable name: one letter as it is, a Greek letter's name as the letter, longer names
 * upright-italic as one word (\mathit{vel}); what follows the first '_' is the subscript, further
 * '_' written as commas: x_1 -> x_{1}, v_a_b -> v_{a,b}. The base and the subscript go apart so that
 * a dot or an exponent sits on the base: \dot{x}_{1}. */
static void latex_parts(const char *name, char *base, size_t nb, char *sub, size_t ns) {
    static const char *const greek[] = {"alpha", "beta",  "gamma",   "delta", "epsilon", "zeta",  "eta",   "theta",
                                        "iota",  "kappa", "lambda",  "mu",    "nu",      "xi",    "pi",    "rho",
                                        "sigma", "tau",   "upsilon", "phi",   "chi",     "psi",   "omega", "Gamma",
                                        "Delta", "Theta", "Lambda",  "Xi",    "Pi",      "Sigma", "Phi",   "Psi",
                                        "Omega"};
    const char *us = strchr(name, '_');
    int bl = us ? (int)(us - name) : (int)strlen(name);
    int is_greek = 0;
    for (size_t g = 0; g < sizeof greek / sizeof *greek && !is_greek; g++)
        is_greek = (int)strlen(greek[g]) == bl && !strncmp(name, greek[g], (size_t)bl);
    if (bl == 1) snprintf(base, nb, "%.*s", bl, name);
    else if (is_greek) snprintf(base, nb, "\\%.*s", bl, name);
    else snprintf(base, nb, "\\mathit{%.*s}", bl, name);
    size_t k = 0;
    for (const char *p = us ? us + 1 : ""; *p && k + 1 < ns; p++) sub[k++] = *p == '_' ? ',' : *p;
    if (ns) sub[k] = 0;
}

int library_symbol_name(char letter, int j, int d, NameStyle style, char *buf, size_t n) {
    if (style == NAME_LATEX) {
        const char *dot = d == 1 ? "\\dot" : d == 2 ? "\\ddot" : "";
        return d ? snprintf(buf, n, "%s{%c}_{%d}", dot, letter, j + 1) : snprintf(buf, n, "%c_{%d}", letter, j + 1);
    }
    if (d == 1) return snprintf(buf, n, "d%c%d/dt", letter, j + 1);
    if (d == 2) return snprintf(buf, n, "d2%c%d/dt2", letter, j + 1);
    return snprintf(buf, n, "%c%d", letter, j + 1);
}

int library_deriv_name(const Library *lib, int j, int d, NameStyle style, char *buf, size_t n) {
    int named = lib->has_var_names && style != NAME_KEY && j >= 0 && j < lib->spec.n_latent;
    if (!named) return library_symbol_name('z', j, d, style, buf, n);
    if (style == NAME_LATEX) {
        const char *dot = d == 1 ? "\\dot" : d == 2 ? "\\ddot" : "";
        char base[LIB_VAR_NAME_MAX + 16], sub[LIB_VAR_NAME_MAX];
        latex_parts(lib->var_names[j], base, sizeof base, sub, sizeof sub);
        char tail[LIB_VAR_NAME_MAX + 8] = "";
        if (sub[0]) snprintf(tail, sizeof tail, "_{%s}", sub);
        return d ? snprintf(buf, n, "%s{%s}%s", dot, base, tail) : snprintf(buf, n, "%s%s", base, tail);
    }
    char v[LIB_VAR_NAME_MAX + 16];
    snprintf(v, sizeof v, "%s", lib->var_names[j]);
    if (d == 1) return snprintf(buf, n, "d%s/dt", v);
    if (d == 2) return snprintf(buf, n, "d2%s/dt2", v);
    return snprintf(buf, n, "%s", v);
}

int library_var_name(const Library *lib, int i, NameStyle style, char *buf, size_t n) {
    int k = lib->spec.n_latent;
    return i >= k ? library_deriv_name(lib, i - k, 1, style, buf, n) : library_deriv_name(lib, i, 0, style, buf, n);
}

/* "z<digits>" (dz = 0) or "dz<digits>" (dz = 1): the index, else 0. */
static long z_index(const char *s, int dz) {
    if (dz && *s++ != 'd') return 0;
    if (*s++ != 'z' || !*s) return 0;
    long v = 0;
    for (; *s; s++) {
        if (!isdigit((unsigned char)*s) || v > 100000) return 0;
        v = v * 10 + (*s - '0');
    }
    return v;
}

int library_var_names_check(const char *const *names, int k, int *bad, Status *st) {
    static const char *const words[] = {"sin", "cos", "t", "dt"};
    for (int j = 0; j < k; j++) {
        const char *a = names[j];
        if (bad) *bad = j;
        size_t len = strlen(a);
        int plain = len > 0 && isalpha((unsigned char)a[0]) && len < LIB_VAR_NAME_MAX;
        for (size_t c = 0; plain && c < len; c++) plain = isalnum((unsigned char)a[c]) || a[c] == '_';
        if (!plain)
            return status_set(st, ST_INPUT,
                              "'%.40s' is not a plain name (a letter, then letters, digits or _, at most %d)", a,
                              LIB_VAR_NAME_MAX - 1);
        for (size_t w = 0; w < sizeof words / sizeof *words; w++)
            if (!strcmp(a, words[w])) return status_set(st, ST_INPUT, "'%s' is a word of the term names (sin, cos, t, dt)", a);
        long zi = z_index(a, 0);
        if ((zi && zi != j + 1) || z_index(a, 1))
            return status_set(st, ST_INPUT, "'%s' reads as another variable's z name (it names variable %d, z%d)", a,
                              j + 1, j + 1);
        for (int i = 0; i < k; i++) {
            if (i < j && !strcmp(a, names[i])) return status_set(st, ST_INPUT, "'%s' names two variables", a);
            if (a[0] == 'd' && !strcmp(a + 1, names[i]))
                return status_set(st, ST_INPUT, "'%s' reads as the derivative of '%s'", a, names[i]);
        }
    }
    if (bad) *bad = -1;
    return 0;
}

int library_term_name(const Library *lib, int t, NameStyle style, char *buf, size_t n) {
    return library_name_of(lib, &lib->terms[t], style, buf, n);
}

static int lib_var(const void *ctx, int i, NameStyle style, char *buf, size_t n) {
    return library_var_name(ctx, i, style, buf, n);
}

int library_name_of(const Library *lib, const Term *term, NameStyle style, char *buf, size_t n) {
    TermNamer nm = {lib->spec.n_latent, lib_var, NULL, lib};
    return library_name_with(term, style, &nm, buf, n);
}

int library_name_with(const Term *term, NameStyle style, const TermNamer *nm, char *buf, size_t n) {
    return term_rows[term->kind].name(term, style, nm, buf, n);
}

static int term_equal(const Term *a, const Term *b) {
    if (a->kind != b->kind) return 0;
    switch (a->kind) {
    case TERM_CONST: return 1;
    case TERM_MONO:
        if (a->n_fac != b->n_fac) return 0;
        for (int f = 0; f < a->n_fac; f++)
            if (a->var[f] != b->var[f] || a->pow[f] != b->pow[f]) return 0;
        return 1;
    default: return a->var[0] == b->var[0] && a->freq == b->freq;
    }
}

/* A variable at *p: "z<i>" or "dz<i>/dt"; advances *p. Returns the index or -1 (message in st). */
static int parse_var(const Library *lib, const char *name, const char **p, Status *st) {
    const char *q = *p;
    int vel = 0;
    if (lib->has_var_names) {   /* a whole word that is a name, or d<name>/dt */
        size_t w = 0;
        while (isalnum((unsigned char)q[w]) || q[w] == '_') w++;
        for (int j = 0; j < lib->spec.n_latent; j++) {
            const char *v = lib->var_names[j];
            if (strlen(v) == w && !strncmp(q, v, w)) {
                *p = q + w;
                return j;
            }
            if (q[0] == 'd' && strlen(v) == w - 1 && !strncmp(q + 1, v, w - 1) && !strncmp(q + w, "/dt", 3)) {
                if (lib->spec.order < 2) {
                    status_set(st, ST_INPUT, "term '%s': velocities (d%s/dt) exist only in a second-order library",
                               name, v);
                    return -1;
                }
                *p = q + w + 3;
                return lib->spec.n_latent + j;
            }
        }
    }
    if (q[0] == 'd' && q[1] == 'z') vel = 1, q += 2;
    else if (q[0] == 'z') q += 1;
    else {
        if (lib->has_var_names)
            status_set(st, ST_INPUT, "term '%s': expected a variable (%s, z1, dz1/dt) at '%s'", name, lib->var_names[0], q);
        else
            status_set(st, ST_INPUT, "term '%s': expected a variable (z1, dz1/dt) at '%s'", name, q);
        return -1;
    }
    if (!isdigit((unsigned char)*q)) {
        status_set(st, ST_INPUT, "term '%s': expected a variable number at '%s'", name, q);
        return -1;
    }
    long idx = 0;
    while (isdigit((unsigned char)*q) && idx < 100000) idx = idx * 10 + (*q++ - '0');
    if (vel) {
        if (strncmp(q, "/dt", 3)) {
            status_set(st, ST_INPUT, "term '%s': a velocity is written dz<i>/dt", name);
            return -1;
        }
        q += 3;
    }
    int k = lib->spec.n_latent;
    if (idx < 1 || idx > k) {
        status_set(st, ST_INPUT, "term '%s': no variable %s%ld%s (the latent size is %d)", name,
                   vel ? "dz" : "z", idx, vel ? "/dt" : "", k);
        return -1;
    }
    if (vel && lib->spec.order < 2) {
        status_set(st, ST_INPUT, "term '%s': velocities (dz/dt) exist only in a second-order library",
                   name);
        return -1;
    }
    *p = q;
    return (int)(vel ? k + idx - 1 : idx - 1);
}

/* A positive integer at *p; advances *p. -1 when there is none. */
static long parse_uint(const char **p) {
    const char *q = *p;
    if (!isdigit((unsigned char)*q)) return -1;
    long v = 0;
    while (isdigit((unsigned char)*q) && v < 100000) v = v * 10 + (*q++ - '0');
    *p = q;
    return v;
}

static const char *skip_space(const char *p) {
    while (*p == ' ' || *p == '\t') p++;
    return p;
}

int library_parse_term(const Library *lib, const char *name, Term *out, Status *st) {
    memset(out, 0, sizeof *out);
    const char *p = skip_space(name);
    if (!*p) return status_set(st, ST_INPUT, "empty term name");
    if (p[0] == '1' && !*skip_space(p + 1)) {
        out->kind = TERM_CONST;
        return 0;
    }
    if (!strncmp(p, "sin(", 4) || !strncmp(p, "cos(", 4)) {
        out->kind = p[0] == 's' ? TERM_SIN : TERM_COS;
        p = skip_space(p + 4);
        long k = 1;
        if (isdigit((unsigned char)*p)) {
            k = parse_uint(&p);
            if (k < 1 || k > 100000)
                return status_set(st, ST_INPUT, "term '%s': the multiplier must be a positive integer", name);
            p = skip_space(p);
            if (*p == '*') p = skip_space(p + 1);   /* sin(2*z1); the old form sin(2 z1) has none */
        }
        int v = parse_var(lib, name, &p, st);
        if (v < 0) return st->code;
        p = skip_space(p);
        if (*p != ')' || *skip_space(p + 1))
            return status_set(st, ST_INPUT, "term '%s': expected ')' at the end", name);
        out->var[0] = v;
        out->freq = (int)k;
        return 0;
    }
    /* monomial: factors separated by '*' (or, the old form, by spaces), each VAR, VAR^p or (VAR)^p */
    int pw[LIB_MAX_VARS] = {0};
    int total = 0;
    while (*p) {
        int paren = 0;
        if (*p == '(') paren = 1, p = skip_space(p + 1);
        int v = parse_var(lib, name, &p, st);
        if (v < 0) return st->code;
        if (paren) {
            p = skip_space(p);
            if (*p != ')') return status_set(st, ST_INPUT, "term '%s': missing ')'", name);
            p++;
        }
        long e = 1;
        if (*p == '^') {
            p++;
            e = parse_uint(&p);
            if (e < 1) return status_set(st, ST_INPUT, "term '%s': an exponent must be a positive integer", name);
        }
        if (*p && *p != ' ' && *p != '\t' && *p != '*')
            return status_set(st, ST_INPUT, "term '%s': unexpected '%c'", name, *p);
        if (total + e > LIB_MAX_DEGREE)
            return status_set(st, ST_INPUT, "term '%s': total degree above the maximum %d", name,
                              LIB_MAX_DEGREE);
        pw[v] += (int)e;
        total += (int)e;
        p = skip_space(p);
        if (*p == '*') {
            p = skip_space(p + 1);
            if (!*p) return status_set(st, ST_INPUT, "term '%s': a factor must follow '*'", name);
        }
    }
    out->kind = TERM_MONO;
    for (int i = 0; i < lib->n_vars; i++)
        if (pw[i]) out->var[out->n_fac] = i, out->pow[out->n_fac] = pw[i], out->n_fac++;
    return 0;
}

int library_find(const Library *lib, const char *name) {
    Status st;
    Term t;
    if (library_parse_term(lib, name, &t, &st)) return -1;
    for (int i = 0; i < lib->n_terms; i++)
        if (term_equal(&lib->terms[i], &t)) return i;
    return -1;
}

int library_name_old_form(const char *name, char *fixed, size_t n) {
    int old = 0;
    size_t len = 0;
    for (const char *p = name; *p; p++) {
        char c = *p;
        if (c == ' ' || c == '\t') {   /* a run of spaces: a product between two factors, or nothing */
            const char *q = p;
            while (*q == ' ' || *q == '\t') q++;
            int product = 0;
            if (p > name && *q) {
                char a = p[-1], b = *q;
                product = (isalnum((unsigned char)a) || a == ')') && (isalnum((unsigned char)b) || b == '(');
            }
            old |= product;
            p = q - 1;
            if (!product) continue;
            c = '*';
        }
        if (fixed && len + 1 < n) fixed[len++] = c;
    }
    if (fixed && n) fixed[len] = 0;
    return old;
}

/* ---- building --------------------------------------------------------------------------------- */

LibrarySpec library_spec_default(int n_latent, int order) {
    LibrarySpec s;
    memset(&s, 0, sizeof s);
    s.n_latent = n_latent;
    s.order = order;
    s.constant = 1;
    s.degree = 2;
    s.trig = 0;
    s.trig_velocity = 1;
    s.n_freq = 1;
    s.freq[0] = 1;
    return s;
}

/* C(n + d - 1, d): monomials of degree d in n variables; capped at LIB_MAX_TERMS + 1. */
static long n_monomials(int n, int d) {
    double c = 1;
    for (int i = 1; i <= d; i++) {
        c = c * (n + i - 1) / i;
        if (c > LIB_MAX_TERMS) return LIB_MAX_TERMS + 1;
    }
    return (long)(c + 0.5);
}

static int spec_check(const LibrarySpec *s, Status *st) {
    if (s->n_latent < 1) return status_set(st, ST_INPUT, "library: latent size %d must be at least 1", s->n_latent);
    if (s->order != 1 && s->order != 2)
        return status_set(st, ST_INPUT, "library: order %d must be 1 or 2", s->order);
    if (s->order * s->n_latent > LIB_MAX_VARS)
        return status_set(st, ST_INPUT, "library: %d state variables exceed the maximum %d",
                          s->order * s->n_latent, LIB_MAX_VARS);
    if (s->degree < 0 || s->degree > LIB_MAX_DEGREE)
        return status_set(st, ST_INPUT, "library: degree %d must be in 0..%d", s->degree, LIB_MAX_DEGREE);
    if (s->trig) {
        if (s->n_freq < 1 || s->n_freq > LIB_MAX_FREQ)
            return status_set(st, ST_INPUT, "library: %d trig multipliers, expected 1..%d", s->n_freq,
                              LIB_MAX_FREQ);
        for (int i = 0; i < s->n_freq; i++) {
            if (s->freq[i] < 1 || s->freq[i] > 1000)
                return status_set(st, ST_INPUT, "library: trig multiplier %d must be in 1..1000", s->freq[i]);
            for (int j = 0; j < i; j++)
                if (s->freq[j] == s->freq[i])
                    return status_set(st, ST_INPUT, "library: trig multiplier %d given twice", s->freq[i]);
        }
    }
    if (s->n_include < 0 || s->n_include > LIB_MAX_EDITS || s->n_exclude < 0 || s->n_exclude > LIB_MAX_EDITS)
        return status_set(st, ST_INPUT, "library: at most %d terms to include and %d to exclude",
                          LIB_MAX_EDITS, LIB_MAX_EDITS);
    for (int i = 0; i < s->n_include; i++)
        if (memchr(s->include[i], 0, LIB_NAME_MAX) == NULL)
            return status_set(st, ST_INPUT, "library: an included term name is too long");
    for (int i = 0; i < s->n_exclude; i++)
        if (memchr(s->exclude[i], 0, LIB_NAME_MAX) == NULL)
            return status_set(st, ST_INPUT, "library: an excluded term name is too long");
    return 0;
}

int library_init(Library *lib, const LibrarySpec *spec, Status *st) {
    return library_init_named(lib, spec, NULL, st);
}

int library_init_named(Library *lib, const LibrarySpec *spec, const char *const *var_names, Status *st) {
    memset(lib, 0, sizeof *lib);
    if (spec_check(spec, st)) return st->code;
    if (var_names) {
        if (library_var_names_check(var_names, spec->n_latent, NULL, st)) {
            char why[sizeof st->msg];
            memcpy(why, st->msg, sizeof why);
            return status_set(st, ST_INPUT, "library: variable name %.900s", why);
        }
        for (int j = 0; j < spec->n_latent; j++) snprintf(lib->var_names[j], LIB_VAR_NAME_MAX, "%s", var_names[j]);
        lib->has_var_names = 1;
    }
    lib->spec = *spec;
    int n = spec->order * spec->n_latent;
    lib->n_vars = n;
    int n_trig_vars = spec->trig_velocity ? n : spec->n_latent;

    long cap = (spec->constant ? 1 : 0) + spec->n_include;
    for (int d = 1; d <= spec->degree; d++) cap += n_monomials(n, d);
    if (spec->trig) cap += 2L * spec->n_freq * n_trig_vars;
    if (cap > LIB_MAX_TERMS)
        return status_set(st, ST_INPUT, "library: more than %d terms (lower the degree)", LIB_MAX_TERMS);
    if (cap < 1) cap = 1;
    Term *terms = nn_calloc((size_t)cap, sizeof *terms);   /* (cap) */
    int nt = 0;

    if (spec->constant) terms[nt++].kind = TERM_CONST;
    for (int d = 1; d <= spec->degree; d++) {
        int idx[LIB_MAX_DEGREE] = {0};   /* sorted variable tuple i1 <= ... <= id */
        for (;;) {
            Term *t = &terms[nt++];
            t->kind = TERM_MONO;
            for (int j = 0; j < d; j++) {
                if (t->n_fac && t->var[t->n_fac - 1] == idx[j]) t->pow[t->n_fac - 1]++;
                else t->var[t->n_fac] = idx[j], t->pow[t->n_fac] = 1, t->n_fac++;
            }
            int j = d - 1;
            while (j >= 0 && idx[j] == n - 1) j--;
            if (j < 0) break;
            idx[j]++;
            for (int h = j + 1; h < d; h++) idx[h] = idx[j];
        }
    }
    if (spec->trig)
        for (int f = 0; f < spec->n_freq; f++)
            for (int v = 0; v < n_trig_vars; v++) {
                terms[nt].kind = TERM_SIN, terms[nt].var[0] = v, terms[nt].freq = spec->freq[f], nt++;
                terms[nt].kind = TERM_COS, terms[nt].var[0] = v, terms[nt].freq = spec->freq[f], nt++;
            }
    lib->terms = terms;
    lib->n_terms = nt;

    for (int i = 0; i < spec->n_include; i++) {
        Term t;
        if (library_parse_term(lib, spec->include[i], &t, st)) {
            char why[sizeof st->msg];
            memcpy(why, st->msg, sizeof why);
            library_free(lib);
            return status_set(st, ST_INPUT, "library include: %.900s", why);
        }
        int dup = 0;
        for (int j = 0; j < nt && !dup; j++) dup = term_equal(&terms[j], &t);
        if (!dup) terms[nt++] = t;
        lib->n_terms = nt;
    }
    for (int i = 0; i < spec->n_exclude; i++) {
        Term t;
        if (library_parse_term(lib, spec->exclude[i], &t, st)) {
            char why[sizeof st->msg];
            memcpy(why, st->msg, sizeof why);
            library_free(lib);
            return status_set(st, ST_INPUT, "library exclude: %.900s", why);
        }
        int at = -1;
        for (int j = 0; j < nt && at < 0; j++)
            if (term_equal(&terms[j], &t)) at = j;
        if (at < 0) {
            library_free(lib);
            return status_set(st, ST_INPUT, "library exclude: no term '%s' in the library", spec->exclude[i]);
        }
        memmove(&terms[at], &terms[at + 1], (size_t)(nt - at - 1) * sizeof *terms);
        nt--;
        lib->n_terms = nt;
    }
    if (nt < 1) {
        library_free(lib);
        return status_set(st, ST_INPUT, "library: no terms left (enable the constant, a degree or trig terms)");
    }
    lib->names = nn_calloc((size_t)nt, sizeof *lib->names);
    for (int i = 0; i < nt; i++) {
        int w = library_term_name(lib, i, NAME_KEY, lib->names[i], LIB_NAME_MAX);
        if (w >= LIB_NAME_MAX) {
            library_free(lib);
            return status_set(st, ST_INPUT, "library: a term name is longer than %d characters", LIB_NAME_MAX - 1);
        }
    }
    status_ok(st);
    return 0;
}

void library_free(Library *lib) {
    if (lib->terms) nn_free(lib->terms);
    if (lib->names) nn_free(lib->names);
    lib->terms = NULL;
    lib->names = NULL;
    lib->n_terms = 0;
}

/* ---- evaluation ------------------------------------------------------------------------------- */

static void eval_row(const Library *lib, double *theta, const double *s) {
    for (int t = 0; t < lib->n_terms; t++) {
        const Term *term = &lib->terms[t];
        theta[t] = term_rows[term->kind].eval(term, s);
    }
}

static void grad_row(const Library *lib, double *ds, const double *dtheta, const double *s) {
    for (int t = 0; t < lib->n_terms; t++) {
        const Term *term = &lib->terms[t];
        if (dtheta[t] != 0) term_rows[term->kind].grad(term, s, dtheta[t], ds);
    }
}

void library_eval(const Library *lib, double *theta, const double *s, long B) {
    for (long b = 0; b < B; b++) eval_row(lib, theta + b * lib->n_terms, s + b * lib->n_vars);
}

void library_eval_terms(const Library *lib, double *theta, const double *s, const int *terms, int n) {
    for (int i = 0; i < n; i++) {
        const Term *term = &lib->terms[terms[i]];
        theta[terms[i]] = term_rows[term->kind].eval(term, s);
    }
}

void library_grad(const Library *lib, double *ds, const double *dtheta, const double *s, long B) {
    for (long b = 0; b < B; b++)
        grad_row(lib, ds + b * lib->n_vars, dtheta + b * lib->n_terms, s + b * lib->n_vars);
}

void library_eval_f(const Library *lib, float *theta, const float *s, long B) {
    int nv = lib->n_vars, nt = lib->n_terms;
    double sd[LIB_MAX_VARS];
    for (long b = 0; b < B; b++) {
        for (int j = 0; j < nv; j++) sd[j] = s[b * nv + j];
        float *row = theta + b * nt;
        for (int t = 0; t < nt; t++) {
            const Term *term = &lib->terms[t];
            row[t] = (float)term_rows[term->kind].eval(term, sd);
        }
    }
}

void library_grad_f(const Library *lib, float *ds, const float *dtheta, const float *s, long B) {
    int nv = lib->n_vars, nt = lib->n_terms;
    double sd[LIB_MAX_VARS], dsd[LIB_MAX_VARS];
    for (long b = 0; b < B; b++) {
        for (int j = 0; j < nv; j++) sd[j] = s[b * nv + j], dsd[j] = 0;
        const float *g = dtheta + b * nt;
        for (int t = 0; t < nt; t++) {
            const Term *term = &lib->terms[t];
            if (g[t] != 0) term_rows[term->kind].grad(term, sd, g[t], dsd);
        }
        for (int j = 0; j < nv; j++) ds[b * nv + j] += (float)dsd[j];
    }
}

/* ---- the op on the tape ----------------------------------------------------------------------- */

/* forward was: out (B, T) = Theta(s (B, n_vars)), row by row;
 * so: ds[b, j] += sum_t dout[b, t] dTheta_t/ds_j (s[b]). */
static void library_backward(Tape *t, Node *n) {
    (void)t;
    const Library *lib = n->ctx;
    Node *s = n->in[0];
    if (!s->grad || !n->grad) return;
    library_grad_f(lib, s->grad, n->grad, s->val.d, s->val.rows);
}

static const CustomOp library_custom_op = {"library", library_backward};

Node *library_op(Tape *t, const Library *lib, Node *s) {
    NN_CHECK(s->val.cols == lib->n_vars, "library_op: input has %d columns, the library has %d variables",
             s->val.cols, lib->n_vars);
    Node *out = nn_custom(t, &library_custom_op, (void *)lib, &s, 1, s->val.rows, lib->n_terms);
    library_eval_f(lib, out->val.d, s->val.d, s->val.rows);
    return out;
}
