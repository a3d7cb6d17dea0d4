/* sparse/equation.c: equations as text, LaTeX and JSON (see equation.h). */
#include "sparse/equation.h"

#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

/* A bounded string builder that counts what it would need, like snprintf. */
typedef struct {
    char *buf;
    size_t n, len;
} Sb;

static void sb_printf(Sb *b, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void sb_printf(Sb *b, const char *fmt, ...) {
    va_list ap;
    va_start(ap, fmt);
    int w = b->len < b->n ? vsnprintf(b->buf + b->len, b->n - b->len, fmt, ap) : vsnprintf(NULL, 0, fmt, ap);
    va_end(ap);
    if (w > 0) b->len += (size_t)w;
}

static int clamp_digits(int d) { return d < 1 ? 1 : d > 17 ? 17 : d; }

/* |v| with `digits` significant digits; LaTeX turns 1.5e-05 into 1.5 \times 10^{-5}. */
static void fmt_magnitude(char *out, size_t n, double v, int digits, EqStyle style) {
    char t[64];
    snprintf(t, sizeof t, "%.*g", clamp_digits(digits), fabs(v));
    char *e = strchr(t, 'e');
    if (style != EQ_LATEX || !e) {
        snprintf(out, n, "%s", t);
        return;
    }
    *e = 0;
    int ex = atoi(e + 1);
    if (!strcmp(t, "1")) snprintf(out, n, "10^{%d}", ex);
    else snprintf(out, n, "%s \\times 10^{%d}", t, ex);
}

/* The right-hand side: " -10*z1 + 10*z2" (LaTeX " -10 z_{1} + 10 z_{2}"; terms in order, zero or
 * masked ones left out). */
static void write_rhs(Sb *b, EqStyle style, int n_terms, EqTermNameFn name_fn, const void *ctx, const double *coef,
                      const uint8_t *mask, long stride, int digits) {
    int written = 0;
    for (int t = 0; t < n_terms; t++) {
        double c = coef[(long)t * stride];
        if ((mask && !mask[(long)t * stride]) || c == 0) continue;
        char mag[96], name[LIB_SHOWN_MAX];
        fmt_magnitude(mag, sizeof mag, c, digits, style);
        int constant = name_fn(ctx, t, style, name, sizeof name);
        int unit = !constant && !strcmp(mag, "1");
        const char *sign = c < 0 ? (written ? " - " : " -") : (written ? " + " : " ");
        sb_printf(b, "%s", sign);
        if (constant) sb_printf(b, "%s", mag);
        else if (unit) sb_printf(b, "%s", name);
        else sb_printf(b, style == EQ_LATEX ? "%s %s" : "%s*%s", mag, name);
        written++;
    }
    if (!written) sb_printf(b, " 0");
}

static int library_name_fn(const void *ctx, int t, EqStyle style, char *buf, size_t n) {
    const Library *lib = ctx;
    library_term_name(lib, t, style == EQ_LATEX ? NAME_LATEX : NAME_TEXT, buf, n);
    return lib->terms[t].kind == TERM_CONST;
}

static void write_line(Sb *b, EqStyle style, const Library *lib, const double *xi, const uint8_t *mask,
                       int j, int digits) {
    int k = lib->spec.n_latent;
    char lhs[LIB_SHOWN_MAX];
    library_deriv_name(lib, j, lib->spec.order, style == EQ_LATEX ? NAME_LATEX : NAME_TEXT, lhs, sizeof lhs);
    sb_printf(b, style == EQ_LATEX ? "%s &=" : "%s =", lhs);
    write_rhs(b, style, lib->n_terms, library_name_fn, lib, xi + j, mask ? mask + j : NULL, k, digits);
}

size_t equation_line_with(char *buf, size_t n, EqStyle style, const char *lhs, int n_terms, EqTermNameFn name,
                          const void *ctx, const double *coef, const uint8_t *mask, long stride, int digits) {
    Sb b = {buf, n, 0};
    if (n) buf[0] = 0;
    sb_printf(&b, "%s", lhs);
    write_rhs(&b, style, n_terms, name, ctx, coef, mask, stride, digits);
    return b.len;
}

size_t equation_line(char *buf, size_t n, EqStyle style, const Library *lib, const double *xi,
                     const uint8_t *mask, int j, int digits) {
    Sb b = {buf, n, 0};
    if (n) buf[0] = 0;
    write_line(&b, style, lib, xi, mask, j, digits);
    return b.len;
}

size_t equation_format(char *buf, size_t n, EqStyle style, const Library *lib, const double *xi,
                       const uint8_t *mask, int digits) {
    Sb b = {buf, n, 0};
    if (n) buf[0] = 0;
    int k = lib->spec.n_latent;
    if (style == EQ_LATEX) sb_printf(&b, "\\begin{aligned}\n");
    for (int j = 0; j < k; j++) {
        write_line(&b, style, lib, xi, mask, j, digits);
        sb_printf(&b, style == EQ_LATEX && j + 1 < k ? " \\\\\n" : "\n");
    }
    if (style == EQ_LATEX) sb_printf(&b, "\\end{aligned}\n");
    return b.len;
}

int equation_fprint(FILE *f, EqStyle style, const Library *lib, const double *xi, const uint8_t *mask,
                    int digits) {
    size_t need = equation_format(NULL, 0, style, lib, xi, mask, digits);
    char *s = nn_alloc(need + 1);
    equation_format(s, need + 1, style, lib, xi, mask, digits);
    int ok = fputs(s, f) >= 0;
    nn_free(s);
    return ok ? 0 : -1;
}

/* ---- JSON ------------------------------------------------------------------------------------- */

cJSON *equation_exact_number(double v) {
    if (!isfinite(v)) return cJSON_CreateNull();
    char b[40];
    for (int d = 15; d <= 17; d++) {
        snprintf(b, sizeof b, "%.*g", d, v);
        if (strtod(b, NULL) == v) break;
    }
    return cJSON_CreateRaw(b);
}

static char *line_string(EqStyle style, const Library *lib, const double *xi, const uint8_t *mask, int j,
                         int digits) {
    size_t need = equation_line(NULL, 0, style, lib, xi, mask, j, digits);
    char *s = malloc(need + 1);
    if (s) equation_line(s, need + 1, style, lib, xi, mask, j, digits);
    return s;
}

/* An include / exclude name as this version writes it ("z1*z2" for a given "z2 z1"). */
static cJSON *edit_name(const Library *lib, const char *given) {
    Term t;
    Status st;
    char b[LIB_NAME_MAX];
    if (library_parse_term(lib, given, &t, &st) || library_name_of(lib, &t, NAME_KEY, b, sizeof b) >= (int)sizeof b)
        return cJSON_CreateString(given);   /* library_init read it, so this does not happen */
    return cJSON_CreateString(b);
}

cJSON *equation_json(const Library *lib, const double *xi, const uint8_t *mask, int digits) {
    return equation_json_as(lib, xi, mask, digits, EQ_COUNT_LATENT);
}

cJSON *equation_json_as(const Library *lib, const double *xi, const uint8_t *mask, int digits, EqCountKey count) {
    const LibrarySpec *sp = &lib->spec;
    int k = sp->n_latent;
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "format", EQ_JSON_FORMAT);
    cJSON_AddNumberToObject(root, "version", EQ_JSON_VERSION);
    cJSON_AddNumberToObject(root, "order", sp->order);
    cJSON_AddNumberToObject(root, count == EQ_COUNT_VARIABLES ? "n_variables" : "n_latent", k);
    cJSON_AddNumberToObject(root, "digits", clamp_digits(digits));

    cJSON *l = cJSON_AddObjectToObject(root, "library");
    cJSON_AddBoolToObject(l, "constant", sp->constant != 0);
    cJSON_AddNumberToObject(l, "degree", sp->degree);
    cJSON_AddBoolToObject(l, "trig", sp->trig != 0);
    cJSON_AddBoolToObject(l, "trig_velocity", sp->trig_velocity != 0);
    cJSON_AddItemToObject(l, "multipliers", cJSON_CreateIntArray(sp->freq, sp->n_freq));
    cJSON *inc = cJSON_AddArrayToObject(l, "include");
    for (int i = 0; i < sp->n_include; i++) cJSON_AddItemToArray(inc, edit_name(lib, sp->include[i]));
    cJSON *exc = cJSON_AddArrayToObject(l, "exclude");
    for (int i = 0; i < sp->n_exclude; i++) cJSON_AddItemToArray(exc, edit_name(lib, sp->exclude[i]));

    cJSON *vars = cJSON_AddArrayToObject(root, "variables");
    for (int i = 0; i < lib->n_vars; i++) {
        char v[32];
        library_var_name(lib, i, NAME_KEY, v, sizeof v);
        cJSON_AddItemToArray(vars, cJSON_CreateString(v));
    }
    if (lib->has_var_names) {   /* the names shown for z1, z2, ... (text, latex and lhs use them) */
        cJSON *vn = cJSON_AddArrayToObject(root, "variable_names");
        for (int j = 0; j < k; j++) cJSON_AddItemToArray(vn, cJSON_CreateString(lib->var_names[j]));
    }
    cJSON *terms = cJSON_AddArrayToObject(root, "terms");
    for (int t = 0; t < lib->n_terms; t++) cJSON_AddItemToArray(terms, cJSON_CreateString(lib->names[t]));

    cJSON *eqs = cJSON_AddArrayToObject(root, "equations");
    for (int j = 0; j < k; j++) {
        cJSON *e = cJSON_CreateObject();
        char lhs[LIB_SHOWN_MAX];
        library_deriv_name(lib, j, sp->order, NAME_TEXT, lhs, sizeof lhs);
        cJSON_AddStringToObject(e, "lhs", lhs);
        cJSON *co = cJSON_AddArrayToObject(e, "coefficients");
        cJSON *ma = cJSON_AddArrayToObject(e, "mask");
        int active = 0;
        for (int t = 0; t < lib->n_terms; t++) {
            int on = mask ? mask[(long)t * k + j] != 0 : 1;
            cJSON_AddItemToArray(co, equation_exact_number(on ? xi[(long)t * k + j] : 0.0));
            cJSON_AddItemToArray(ma, cJSON_CreateNumber(on));
            active += on && xi[(long)t * k + j] != 0;
        }
        cJSON_AddNumberToObject(e, "active", active);
        char *txt = line_string(EQ_TEXT, lib, xi, mask, j, digits);
        char *tex = line_string(EQ_LATEX, lib, xi, mask, j, digits);
        if (tex) {   /* the LaTeX line alone, without the alignment mark */
            char *amp = strstr(tex, " &=");
            if (amp) memmove(amp + 1, amp + 2, strlen(amp + 2) + 1);
        }
        cJSON_AddStringToObject(e, "text", txt ? txt : "");
        cJSON_AddStringToObject(e, "latex", tex ? tex : "");
        free(txt);
        free(tex);
        cJSON_AddItemToArray(eqs, e);
    }
    return root;
}

char *equation_json_string(const Library *lib, const double *xi, const uint8_t *mask, int digits) {
    cJSON *j = equation_json(lib, xi, mask, digits);
    char *s = j ? cJSON_Print(j) : NULL;
    cJSON_Delete(j);
    return s;
}

static int get_int(const cJSON *o, const char *key, int lo, int hi, int *out, Status *st) {
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    if (!cJSON_IsNumber(v) || v->valuedouble != floor(v->valuedouble) || v->valuedouble < lo ||
        v->valuedouble > hi)
        return status_set(st, ST_INPUT, "equations JSON: \"%s\" must be an integer in %d..%d", key, lo, hi);
    *out = (int)v->valuedouble;
    return 0;
}

static int get_bool(const cJSON *o, const char *key, int *out, Status *st) {
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    if (!cJSON_IsBool(v)) return status_set(st, ST_INPUT, "equations JSON: \"library.%s\" must be true or false", key);
    *out = cJSON_IsTrue(v);
    return 0;
}

static int get_names(const cJSON *o, const char *key, char (*dst)[LIB_NAME_MAX], int *count, Status *st) {
    const cJSON *a = cJSON_GetObjectItemCaseSensitive(o, key);
    if (!cJSON_IsArray(a) || cJSON_GetArraySize(a) > LIB_MAX_EDITS)
        return status_set(st, ST_INPUT, "equations JSON: \"library.%s\" must be an array of at most %d names", key,
                          LIB_MAX_EDITS);
    int n = 0;
    const cJSON *it;
    cJSON_ArrayForEach(it, a) {
        if (!cJSON_IsString(it) || strlen(it->valuestring) >= LIB_NAME_MAX)
            return status_set(st, ST_INPUT, "equations JSON: \"library.%s\" entry %d is not a term name", key, n + 1);
        snprintf(dst[n++], LIB_NAME_MAX, "%s", it->valuestring);
    }
    *count = n;
    return 0;
}

static int from_json(const cJSON *root, Library *lib, Coef *coef, Status *st) {
    if (!cJSON_IsObject(root)) return status_set(st, ST_INPUT, "equations JSON: not a JSON object");
    const cJSON *fmt = cJSON_GetObjectItemCaseSensitive(root, "format");
    if (!cJSON_IsString(fmt) || strcmp(fmt->valuestring, EQ_JSON_FORMAT))
        return status_set(st, ST_INPUT, "equations JSON: \"format\" is not \"%s\"", EQ_JSON_FORMAT);
    int version, order, k;
    if (get_int(root, "version", 1, 1000000, &version, st)) return st->code;
    if (version > EQ_JSON_VERSION)
        return status_set(st, ST_INPUT, "equations JSON: version %d is newer than this program reads (1..%d)",
                          version, EQ_JSON_VERSION);
    /* the number of equations: "n_latent" (a run), or since version 2 "n_variables" (fit) */
    int has_latent = cJSON_GetObjectItemCaseSensitive(root, "n_latent") != NULL;
    int has_vars = version >= 2 && cJSON_GetObjectItemCaseSensitive(root, "n_variables") != NULL;
    if (has_latent && has_vars)
        return status_set(st, ST_INPUT, "equations JSON: \"n_latent\" and \"n_variables\" given, expected one");
    if (get_int(root, "order", 1, 2, &order, st) ||
        get_int(root, has_vars ? "n_variables" : "n_latent", 1, LIB_MAX_VARS, &k, st))
        return st->code;
    const cJSON *l = cJSON_GetObjectItemCaseSensitive(root, "library");
    if (!cJSON_IsObject(l)) return status_set(st, ST_INPUT, "equations JSON: \"library\" must be an object");
    LibrarySpec sp = library_spec_default(k, order);
    if (get_bool(l, "constant", &sp.constant, st) || get_int(l, "degree", 0, LIB_MAX_DEGREE, &sp.degree, st) ||
        get_bool(l, "trig", &sp.trig, st) || get_bool(l, "trig_velocity", &sp.trig_velocity, st) ||
        get_names(l, "include", sp.include, &sp.n_include, st) ||
        get_names(l, "exclude", sp.exclude, &sp.n_exclude, st))
        return st->code;
    const char *mul_key = version >= 2 ? "multipliers" : "frequencies";   /* its name in version 1 */
    const cJSON *fr = cJSON_GetObjectItemCaseSensitive(l, mul_key);
    if (!cJSON_IsArray(fr) || cJSON_GetArraySize(fr) < 1 || cJSON_GetArraySize(fr) > LIB_MAX_FREQ)
        return status_set(st, ST_INPUT, "equations JSON: \"library.%s\" must hold 1..%d integers", mul_key,
                          LIB_MAX_FREQ);
    sp.n_freq = 0;
    const cJSON *it;
    cJSON_ArrayForEach(it, fr) {
        if (!cJSON_IsNumber(it) || it->valuedouble != floor(it->valuedouble) || fabs(it->valuedouble) > 1e6)
            return status_set(st, ST_INPUT, "equations JSON: \"library.%s\" must hold integers", mul_key);
        sp.freq[sp.n_freq++] = (int)it->valuedouble;
    }
    /* since version 2, optional: the names shown for the variables (fit, from a CSV header) */
    const cJSON *vn = version >= 2 ? cJSON_GetObjectItemCaseSensitive(root, "variable_names") : NULL;
    const char *names[LIB_MAX_VARS];
    if (vn) {
        int n = 0;
        const cJSON *v;
        if (!cJSON_IsArray(vn) || cJSON_GetArraySize(vn) != k)
            return status_set(st, ST_INPUT, "equations JSON: \"variable_names\" must hold %d names", k);
        cJSON_ArrayForEach(v, vn) {
            if (!cJSON_IsString(v))
                return status_set(st, ST_INPUT, "equations JSON: \"variable_names\" entry %d is not a string", n + 1);
            names[n++] = v->valuestring;
        }
        if (library_var_names_check(names, k, NULL, st)) {
            char why[sizeof st->msg];
            memcpy(why, st->msg, sizeof why);
            return status_set(st, ST_INPUT, "equations JSON: \"variable_names\": %.900s", why);
        }
    }
    if (library_init_named(lib, &sp, vn ? names : NULL, st)) return st->code;

    const cJSON *terms = cJSON_GetObjectItemCaseSensitive(root, "terms");
    if (!cJSON_IsArray(terms) || cJSON_GetArraySize(terms) != lib->n_terms) {
        int n = lib->n_terms;
        library_free(lib);
        return status_set(st, ST_INPUT, "equations JSON: \"terms\" must list the %d terms of the library settings", n);
    }
    int t = 0;
    cJSON_ArrayForEach(it, terms) {
        /* version 1 wrote a product with a space ("z1 z2"): its names are compared as terms */
        int same = cJSON_IsString(it) &&
                   (version >= 2 ? !strcmp(it->valuestring, lib->names[t]) : library_find(lib, it->valuestring) == t);
        if (!same) {
            char want[LIB_NAME_MAX];
            snprintf(want, sizeof want, "%s", lib->names[t]);
            library_free(lib);
            return status_set(st, ST_INPUT, "equations JSON: term %d is not \"%s\" as the library settings give", t + 1,
                              want);
        }
        t++;
    }
    const cJSON *eqs = cJSON_GetObjectItemCaseSensitive(root, "equations");
    if (!cJSON_IsArray(eqs) || cJSON_GetArraySize(eqs) != k) {
        library_free(lib);
        return status_set(st, ST_INPUT, "equations JSON: \"equations\" must hold %d equations", k);
    }
    coef_init(coef, lib->n_terms, k);
    int j = 0;
    const cJSON *e;
    cJSON_ArrayForEach(e, eqs) {
        const cJSON *co = cJSON_GetObjectItemCaseSensitive(e, "coefficients");
        const cJSON *ma = cJSON_GetObjectItemCaseSensitive(e, "mask");
        int ok = cJSON_IsArray(co) && cJSON_IsArray(ma) && cJSON_GetArraySize(co) == lib->n_terms &&
                 cJSON_GetArraySize(ma) == lib->n_terms;
        for (int i = 0; ok && i < lib->n_terms; i++) {
            const cJSON *c = cJSON_GetArrayItem(co, i), *m = cJSON_GetArrayItem(ma, i);
            ok = cJSON_IsNumber(c) && isfinite(c->valuedouble) && cJSON_IsNumber(m) &&
                 (m->valuedouble == 0 || m->valuedouble == 1);
            if (ok) {
                coef->mask[(long)i * k + j] = (uint8_t)(m->valuedouble != 0);
                coef->xi[(long)i * k + j] = m->valuedouble != 0 ? c->valuedouble : 0.0;
            }
        }
        if (!ok) {
            int n = lib->n_terms;
            library_free(lib);
            coef_free(coef);
            return status_set(st, ST_INPUT,
                              "equations JSON: equation %d needs \"coefficients\" (%d finite numbers) and "
                              "\"mask\" (%d zeros or ones)",
                              j + 1, n, n);
        }
        j++;
    }
    status_ok(st);
    return 0;
}

int equation_from_json(const char *text, Library *lib, Coef *coef, Status *st) {
    memset(lib, 0, sizeof *lib);
    memset(coef, 0, sizeof *coef);
    const char *end = NULL;
    cJSON *root = cJSON_ParseWithOpts(text, &end, 0);
    if (!root) {
        long line = 1;
        for (const char *p = text; end && p < end && *p; p++) line += *p == '\n';
        return status_set(st, ST_INPUT, "equations JSON: not valid JSON (line %ld)", line);
    }
    int code = from_json(root, lib, coef, st);
    cJSON_Delete(root);
    return code;
}
