/* io/run/config.c: the run config (see config.h): parsing, files and overrides, validation,
 * writing and the digest.
 *
 * One table, `config_keys` (config_keys.c, shared through the internal config_keys.h), drives
 * everything: one row per key with its path, type, default (as JSON text), allowed range or
 * choices, the Config field it fills and a one-line meaning. Parsing, defaults, config_to_json,
 * config_set (--set), the digest and the Markdown key list in docs/config.md all walk that table,
 * so a key added there is parsed, written, digested and documented at once (tests/test_config.c
 * checks the docs page against the table). A key with a fixed set of string values (T_CHOICE) is
 * parsed once into its enum; the Config never holds the string, and writing gives back the name.
 *
 * JSON per RFC 8259 (IETF, 2017), parsed with cJSON; cJSON keeps repeated object members as
 * separate children, which is how duplicate keys are found. */
#include "io/run/config.h"
#include "io/run/config_keys.h"

#include <ctype.h>
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "io/fs/files.h"
#include "io/fs/hash.h"
#include "io/fs/json_check.h"
#include "nn/mlp.h"
#include "sparse/ensemble.h"
#include "sparse/equation.h"
#include "sparse/library.h"
#include "sparse/stencil.h"

/* ---- errors ------------------------------------------------------------------------------- */

typedef struct {
    const char *origin;     /* prefix of messages, or NULL */
    const char *base_dir;   /* for a relative data.frames or data.store, or NULL */
} Ctx;

static int key_error(Status *st, const Ctx *x, const char *path, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

static int key_error(Status *st, const Ctx *x, const char *path, const char *fmt, ...) {
    char m[600];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(m, sizeof m, fmt, ap);
    va_end(ap);
    if (x->origin) return status_set(st, ST_INPUT, "%s: %.200s: %s", x->origin, path, m);
    return status_set(st, ST_INPUT, "%.200s: %s", path, m);
}

static int rule_error(Status *st, const Ctx *x, const char *path, const KeyDef *k) {
    char r[400];
    config_key_rule(r, sizeof r, k);
    return key_error(st, x, path, "must be %s", r);
}

/* Optimal string alignment distance (edits, with adjacent transpositions), for suggestions. */
static int edit_distance(const char *a, const char *b) {
    size_t n = strlen(a), m = strlen(b);
    if (n > 64 || m > 64) return 1000;
    int d[65][65];
    for (size_t i = 0; i <= n; i++) d[i][0] = (int)i;
    for (size_t j = 0; j <= m; j++) d[0][j] = (int)j;
    for (size_t i = 1; i <= n; i++)
        for (size_t j = 1; j <= m; j++) {
            int cost = a[i - 1] != b[j - 1];
            int v = d[i - 1][j] + 1;
            if (d[i][j - 1] + 1 < v) v = d[i][j - 1] + 1;
            if (d[i - 1][j - 1] + cost < v) v = d[i - 1][j - 1] + cost;
            if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] && d[i - 2][j - 2] + 1 < v)
                v = d[i - 2][j - 2] + 1;
            d[i][j] = v;
        }
    return d[n][m];
}

static const char *last_part(const char *path) {
    const char *p = strrchr(path, '.');
    return p ? p + 1 : path;
}

/* The closest key or section to an unknown path, or NULL when nothing is close. A key whose last
 * part matches ("epochs" for train.epochs) counts as one edit away. */
static void suggest(const char *path, char *out, size_t n) {
    int best = 1000;
    out[0] = 0;
    for (int i = 0; i < config_n_keys; i++) {
        /* the key itself and each of its sections */
        char cand[128];
        snprintf(cand, sizeof cand, "%s", config_keys[i].path);
        for (;;) {
            int d = edit_distance(path, cand);
            if (!strcmp(last_part(path), last_part(cand)) && d > 1) d = 1;
            if (d < best) best = d, snprintf(out, n, "%s", cand);
            char *dot = strrchr(cand, '.');
            if (!dot) break;
            *dot = 0;
        }
    }
    size_t len = strlen(path);
    if (!(best <= 2 || (size_t)best * 3 <= len)) out[0] = 0;
}

/* ---- applying one value ------------------------------------------------------------------- */

static void *field(Config *c, const KeyDef *k) { return (char *)c + k->off; }
static const void *cfield(const Config *c, const KeyDef *k) { return (const char *)c + k->off; }
static int *count_field(Config *c, const KeyDef *k) { return (int *)((char *)c + k->off_n); }
static int count_of(const Config *c, const KeyDef *k) { return *(const int *)((const char *)c + k->off_n); }

/* 1 when v is an integral number in [lo, min(hi, limit)] and (when given) one of the choices. */
static int int_ok(const cJSON *v, double lo, double hi, double limit, const char *choices) {
    if (!cJSON_IsNumber(v)) return 0;
    double d = v->valuedouble;
    if (!isfinite(d) || d != floor(d) || d < lo || d > hi || d > limit) return 0;
    if (choices) {
        char s[32];
        snprintf(s, sizeof s, "%.0f", d);
        size_t n = strlen(s);
        for (const char *p = choices; p; p = strchr(p, '|') ? strchr(p, '|') + 1 : NULL)
            if (!strncmp(p, s, n) && (p[n] == '|' || p[n] == 0)) return 1;
        return 0;
    }
    return 1;
}

/* An integer list (T_INTS, T_INTS_NULL, T_CROP, T_SIZE). */
static int apply_int_list(Config *c, const KeyDef *k, const cJSON *v, const char *path, const Ctx *x,
                          Status *st) {
    int *dst = field(c, k);
    int cap = (int)(k->size / sizeof(int));
    int fixed = k->type == T_CROP || k->type == T_SIZE;
    if (k->type == T_INTS_NULL && cJSON_IsNull(v)) {
        memset(dst, 0, k->size);
        *count_field(c, k) = -1;
        return 0;
    }
    if (!cJSON_IsArray(v)) return rule_error(st, x, path, k);
    int n = cJSON_GetArraySize(v);
    if (fixed && n != cap) return rule_error(st, x, path, k);
    if (n > cap) return key_error(st, x, path, "must have at most %d entries (has %d)", cap, n);
    if (n < k->min_n)
        return key_error(st, x, path, "must have at least %d entr%s", k->min_n, k->min_n == 1 ? "y" : "ies");
    int vals[CFG_MAX_LIST > 8 ? CFG_MAX_LIST : 8];
    int i = 0;
    for (const cJSON *e = v->child; e; e = e->next, i++) {
        if (!int_ok(e, k->min, k->max, INT_MAX, NULL)) {
            char r[160], p[300];
            config_int_rule(r, sizeof r, k->min, k->max, NULL);
            snprintf(p, sizeof p, "%s[%d]", path, i);
            if (cJSON_IsNumber(e) && isinf(k->max) && e->valuedouble > INT_MAX && e->valuedouble == floor(e->valuedouble))
                return key_error(st, x, p, "must be at most %d", INT_MAX);
            return key_error(st, x, p, "must be %s", r);
        }
        vals[i] = (int)e->valuedouble;
    }
    memset(dst, 0, k->size);
    memcpy(dst, vals, (size_t)n * sizeof(int));
    if (!fixed) *count_field(c, k) = n;
    return 0;
}

static int apply_str_list(Config *c, const KeyDef *k, const cJSON *v, const char *path, const Ctx *x,
                          Status *st) {
    int cap = (int)(k->size / CFG_NAME_MAX);
    if (!cJSON_IsArray(v)) return rule_error(st, x, path, k);
    int n = cJSON_GetArraySize(v);
    if (n > cap) return key_error(st, x, path, "must have at most %d entries (has %d)", cap, n);
    int i = 0;
    for (const cJSON *e = v->child; e; e = e->next, i++) {
        char p[300];
        snprintf(p, sizeof p, "%s[%d]", path, i);
        if (!cJSON_IsString(e) || !e->valuestring[0] || strlen(e->valuestring) >= CFG_NAME_MAX)
            return key_error(st, x, p, "must be a non-empty string of at most %d characters", CFG_NAME_MAX - 1);
    }
    char (*dst)[CFG_NAME_MAX] = field(c, k);
    memset(dst, 0, k->size);
    i = 0;
    for (const cJSON *e = v->child; e; e = e->next, i++) memcpy(dst[i], e->valuestring, strlen(e->valuestring));
    *count_field(c, k) = n;
    return 0;
}

static int apply_value(Config *c, const KeyDef *k, const cJSON *v, const char *path, const Ctx *x, Status *st);

/* Set key k and remember that it was given. */
static int apply_key(Config *c, const KeyDef *k, const cJSON *v, const char *path, const Ctx *x, Status *st) {
    int rc = apply_value(c, k, v, path, x, st);
    if (!rc) {
        int i = (int)(k - config_keys);
        c->given[i / 8] |= (unsigned char)(1u << (i % 8));
    }
    return rc;
}

static int given(const Config *c, const char *path) {
    for (int i = 0; i < config_n_keys; i++)
        if (!strcmp(config_keys[i].path, path)) return c->given[i / 8] >> (i % 8) & 1;
    return 0;
}

int config_given(const Config *c, const char *path) { return given(c, path); }

const char *config_old_term(const Config *c, const char **key) {
    for (int i = 0; i < c->n_lib_include; i++)
        if (library_name_old_form(c->lib_include[i], NULL, 0)) return *key = "library.include", c->lib_include[i];
    for (int i = 0; i < c->n_lib_exclude; i++)
        if (library_name_old_form(c->lib_exclude[i], NULL, 0)) return *key = "library.exclude", c->lib_exclude[i];
    return NULL;
}

/* The schedule follows train.epochs unless given: a pass every sixth of the run, the last fifth
 * refines (500 and 600 of the default 3000), so that a short run (--set train.epochs=50) works. */
static void resolve(Config *c) {
    if (!given(c, "threshold.every")) c->threshold_every = c->epochs / 6 > 1 ? (int)((c->epochs + 3) / 6) : 1;
    if (!given(c, "threshold.refine_epochs")) c->refine_epochs = (c->epochs + 2) / 5;
}

static int apply_value(Config *c, const KeyDef *k, const cJSON *v, const char *path, const Ctx *x, Status *st) {
    switch (k->type) {
    case T_NUM: {
        if (!cJSON_IsNumber(v) || !isfinite(v->valuedouble)) return rule_error(st, x, path, k);
        double d = v->valuedouble;
        int lo_bad = k->flags & LO_OPEN ? !(d > k->min) : !(d >= k->min);
        int hi_bad = k->flags & HI_OPEN ? !(d < k->max) : !(d <= k->max);
        if (lo_bad || hi_bad) return rule_error(st, x, path, k);
        *(double *)field(c, k) = d;
        return 0;
    }
    case T_INT: case T_LONG: case T_U64: {
        double limit = config_int_limit(k->type);
        if (!int_ok(v, k->min, k->max, limit, k->choices)) {
            if (cJSON_IsNumber(v) && isinf(k->max) && v->valuedouble > limit && v->valuedouble == floor(v->valuedouble))
                return key_error(st, x, path, "must be at most %.0f", limit);
            return rule_error(st, x, path, k);
        }
        double d = v->valuedouble;
        if (k->type == T_INT) *(int *)field(c, k) = (int)d;
        else if (k->type == T_LONG) *(long *)field(c, k) = (long)d;
        else *(uint64_t *)field(c, k) = (uint64_t)d;
        return 0;
    }
    case T_BOOL:
        if (!cJSON_IsBool(v)) return rule_error(st, x, path, k);
        *(int *)field(c, k) = cJSON_IsTrue(v) ? 1 : 0;
        return 0;
    case T_CHOICE: /* parsed once: the Config holds the enum value, never the string */
        if (cJSON_IsString(v))
            for (int i = 0; i < k->n_names; i++)
                if (!strcmp(v->valuestring, k->names[i])) {
                    *(int *)field(c, k) = config_choice_value(k, i);
                    return 0;
                }
        return rule_error(st, x, path, k);
    case T_PATH: {
        if (!cJSON_IsString(v)) return rule_error(st, x, path, k);
        const char *s = v->valuestring;
        char buf[CFG_PATH_MAX];
        int n;
        if ((!strcmp(k->path, "data.frames") || !strcmp(k->path, "data.store")) && s[0] &&
            s[0] != '/' && x->base_dir &&
            x->base_dir[0] && strcmp(x->base_dir, "."))
            n = snprintf(buf, sizeof buf, "%s%s%s", x->base_dir,
                         x->base_dir[strlen(x->base_dir) - 1] == '/' ? "" : "/", s);
        else
            n = snprintf(buf, sizeof buf, "%s", s);
        if (n < 0 || (size_t)n >= k->size)
            return key_error(st, x, path, "path too long (at most %zu bytes)", k->size - 1);
        memset(field(c, k), 0, k->size);
        memcpy(field(c, k), buf, (size_t)n);
        return 0;
    }
    case T_INTS: case T_INTS_NULL: case T_CROP: case T_SIZE: return apply_int_list(c, k, v, path, x, st);
    case T_STRS: return apply_str_list(c, k, v, path, x, st);
    case T_COUNT: break;
    }
    return key_error(st, x, path, "internal: key without a type");
}

/* ---- walking a JSON tree ------------------------------------------------------------------ */

static int walk(Config *c, const cJSON *obj, const char *prefix, const Ctx *x, Status *st) {
    for (const cJSON *it = obj->child; it; it = it->next) {
        char path[256];
        const char *name = it->string ? it->string : "";
        const char *dot = strchr(name, '.');
        if (dot && !prefix && (config_find_key(name) || config_is_section(name)))
            return key_error(st, x, name, "unknown key (write nested objects, not dotted names)");
        int n = prefix ? snprintf(path, sizeof path, "%s.%s", prefix, name) : snprintf(path, sizeof path, "%s", name);
        if (n < 0 || (size_t)n >= sizeof path) return key_error(st, x, path, "unknown key");
        for (const cJSON *p = obj->child; p != it; p = p->next)
            if (p->string && !strcmp(p->string, name)) return key_error(st, x, path, "duplicate key");
        const KeyDef *k = dot ? NULL : config_find_key(path);
        if (k) {
            if (apply_key(c, k, it, path, x, st)) return st->code;
        } else if (!dot && config_is_section(path)) {
            if (!cJSON_IsObject(it)) return key_error(st, x, path, "must be an object");
            if (walk(c, it, path, x, st)) return st->code;
        } else {
            char s[128];
            suggest(path, s, sizeof s);
            if (s[0]) return key_error(st, x, path, "unknown key (did you mean %s?)", s);
            return key_error(st, x, path, "unknown key");
        }
    }
    return 0;
}

/* Apply a parsed tree to a copy of *c; commit only when every key was good. */
static int apply_tree(Config *c, const cJSON *root, const Ctx *x, Status *st) {
    Config *tmp = nn_alloc(sizeof *tmp);
    memcpy(tmp, c, sizeof *tmp);
    int rc = walk(tmp, root, NULL, x, st);
    if (!rc) {
        resolve(tmp);
        memcpy(c, tmp, sizeof *c);
    }
    nn_free(tmp);
    return rc;
}

void config_defaults(Config *c) {
    memset(c, 0, sizeof *c);
    Ctx x = {"config_defaults", NULL};
    for (int i = 0; i < config_n_keys; i++) {
        cJSON *v = cJSON_Parse(config_keys[i].def);
        NN_CHECK(v, "default of %s is not JSON: %s", config_keys[i].path, config_keys[i].def);
        Status st;
        int rc = apply_key(c, &config_keys[i], v, config_keys[i].path, &x, &st);
        cJSON_Delete(v);
        NN_CHECK(rc == 0, "default of %s rejected: %s", config_keys[i].path, st.msg);
    }
    memset(c->given, 0, sizeof c->given); /* defaults are not given */
    resolve(c);
}

int config_parse(Config *c, const char *json, const char *origin, const char *base_dir, Status *st) {
    Ctx x = {origin, base_dir};
    const char *pre = origin ? origin : "config", *sep = ": ";
    if (!strncmp(json, "\xEF\xBB\xBF", 3)) json += 3;   /* a UTF-8 byte order mark */
    const char *p = json;
    while (isspace((unsigned char)*p)) p++;
    if (!*p) return status_set(st, ST_INPUT, "%s%sempty (expected a JSON object)", pre, sep);
    JsonFault jf; /* RFC 8259 first: cJSON accepts 01, 5. and \u0000, and says only "malformed" */
    if (json_check(json, strlen(json), &jf)) {
        char near[32];
        size_t j = 0;
        for (const unsigned char *q = (const unsigned char *)json + jf.offset; *q && *q != '\n' && *q != '\r' && j < 20; q++)
            near[j++] = *q >= 0x20 && *q < 0x7f ? (char)*q : '?';
        near[j] = 0;
        if (j)
            return status_set(st, ST_INPUT, "%s%sline %d, column %d: malformed JSON: %s, near '%s'", pre, sep, jf.line,
                              jf.col, jf.what, near);
        return status_set(st, ST_INPUT, "%s%sline %d, column %d: malformed JSON: %s", pre, sep, jf.line, jf.col, jf.what);
    }
    const char *end = NULL;
    cJSON *root = cJSON_ParseWithOpts(json, &end, 1);
    if (!root) {
        size_t pos = end && end >= json ? (size_t)(end - json) : 0;
        int line = 1, col = 1;
        for (size_t i = 0; i < pos && json[i]; i++) {
            if (json[i] == '\n') line++, col = 1;
            else col++;
        }
        char near[32];
        size_t j = 0;
        for (const char *q = json + pos; *q && *q != '\n' && *q != '\r' && j < 20; q++) near[j++] = *q;
        near[j] = 0;
        if (j) return status_set(st, ST_INPUT, "%s%sline %d, column %d: malformed JSON near '%s'", pre, sep, line, col, near);
        return status_set(st, ST_INPUT, "%s%sline %d, column %d: malformed JSON at the end of the text", pre, sep, line, col);
    }
    int rc;
    if (!cJSON_IsObject(root))
        rc = status_set(st, ST_INPUT, "%s%sthe top level must be a JSON object ({ ... })", pre, sep);
    else
        rc = apply_tree(c, root, &x, st);
    cJSON_Delete(root);
    if (!rc) status_ok(st);
    return rc;
}

/* ---- files and overrides ------------------------------------------------------------------ */

static int read_text(const char *path, char **out, Status *st) {
    size_t len;
    Status rs;
    if (fs_read_file_as(path, NULL, 1u << 24, out, &len, &rs)) /* rs.msg: the reason alone */
        return status_set(st, rs.code, "%s: cannot read the config: %s", path, rs.msg);
    if (strlen(*out) != len) {
        free(*out);
        *out = NULL;
        return status_set(st, ST_INPUT, "%s: not a text file (holds a zero byte)", path);
    }
    return 0;
}

/* Keys added after the first release, with the value that behaves as framelaw did before the key
 * existed (its compat value). A run folder's config.json written before a key existed lacks it, and
 * config_load_run reads it as the compat value, not today's default; in the digest a late key counts
 * only away from its compat value, so those runs still match their checkpoints. */
static const struct {
    const char *path, *compat;
} late_keys[] = {{"model.derivatives", "\"frames\""},       {"model.init_epochs", "200"},
                 {"model.init_frames", "2000"},            {"threshold.measure", "\"coefficient\""},
                 {"threshold.select", "\"none\""},       {"data.store", "\"\""},
                 {"model.map", "\"curved\""},           {"canonical.choose", "\"fit\""},
                 {"train.run_length", "1"}};

static const char *late_compat(const char *path) {
    for (size_t i = 0; i < sizeof late_keys / sizeof late_keys[0]; i++)
        if (!strcmp(path, late_keys[i].path)) return late_keys[i].compat;
    return NULL;
}

static int load_file(Config *c, const char *path, int compat, Status *st) {
    char *text;
    if (read_text(path, &text, st)) return st->code;
    config_defaults(c); /* the file is read over the defaults */
    if (compat) /* a run's config: keys it lacks behave as before they existed */
        for (int i = 0; i < config_n_keys; i++) {
            const char *cv = late_compat(config_keys[i].path);
            if (!cv) continue;
            cJSON *v = cJSON_Parse(cv);
            Ctx x = {"compat", NULL};
            Status s2;
            int rc = v ? apply_key(c, &config_keys[i], v, config_keys[i].path, &x, &s2) : -1;
            cJSON_Delete(v);
            NN_CHECK(rc == 0, "compat value of %s rejected: %s", config_keys[i].path, cv);
        }
    if (compat) memset(c->given, 0, sizeof c->given);
    /* the file's folder, made absolute */
    char dir[CFG_PATH_MAX];
    const char *slash = strrchr(path, '/');
    if (!slash) snprintf(dir, sizeof dir, ".");
    else if (slash == path) snprintf(dir, sizeof dir, "/");
    else snprintf(dir, sizeof dir, "%.*s", (int)(slash - path), path);
    char *abs = realpath(dir, NULL);
    int had_output = c->output[0] != 0;
    int rc = config_parse(c, text, path, abs ? abs : dir, st);
    free(abs);
    free(text);
    if (rc) return rc;
    if (!had_output && !c->output[0]) {
        const char *base = slash ? slash + 1 : path;
        const char *dot = strrchr(base, '.');
        int n = dot && dot != base ? (int)(dot - base) : (int)strlen(base);
        if (n == 0) snprintf(c->output, sizeof c->output, "runs/run");
        else snprintf(c->output, sizeof c->output, "runs/%.*s", n, base);
    }
    return 0;
}

int config_load(Config *c, const char *path, Status *st) { return load_file(c, path, 0, st); }

int config_load_run(Config *c, const char *path, Status *st) { return load_file(c, path, 1, st); }

int config_set(Config *c, const char *assignment, Status *st) { return config_set_as(c, assignment, "--set", st); }

int config_set_as(Config *c, const char *assignment, const char *origin, Status *st) {
    /* messages: "<origin>: why" or "<origin> <key>: why", without origin "why" or "<key>: why" */
    const char *pre = origin ? origin : "", *colon = origin ? ": " : "", *space = origin ? " " : "";
    const char *eq = strchr(assignment, '=');
    if (!eq || eq == assignment)
        return status_set(st, ST_INPUT, "%s%s%s: expected KEY=VALUE (for example train.epochs=100)", pre, space, assignment);
    size_t klen = (size_t)(eq - assignment);
    char key[256];
    if (klen >= sizeof key) return status_set(st, ST_INPUT, "%s%skey too long", pre, colon);
    memcpy(key, assignment, klen);
    key[klen] = 0;
    /* the key path: non-empty parts joined by dots */
    for (size_t i = 0; i < klen; i++)
        if ((key[i] == '.' && (i == 0 || i + 1 == klen || key[i + 1] == '.')) || isspace((unsigned char)key[i]))
            return status_set(st, ST_INPUT, "%s%sbad key path '%s'", pre, colon, key);
    if (!config_find_key(key) && !config_is_section(key)) {
        char s[128];
        suggest(key, s, sizeof s);
        if (s[0]) return status_set(st, ST_INPUT, "%s%s%s: unknown key (did you mean %s?)", pre, colon, key, s);
        return status_set(st, ST_INPUT, "%s%s%s: unknown key", pre, colon, key);
    }
    cJSON *value = cJSON_ParseWithOpts(eq + 1, NULL, 1);
    JsonFault jf;
    if (value && json_check(eq + 1, strlen(eq + 1), &jf)) { /* what cJSON takes but RFC 8259 does not */
        cJSON_Delete(value);
        return status_set(st, ST_INPUT, "%s%s%s: the value is not JSON (RFC 8259): column %d: %s", pre, space, key, jf.col, jf.what);
    }
    if (!value) value = cJSON_CreateString(eq + 1);   /* a bare word */
    if (!value) return status_set(st, ST_RUNTIME, "%s%sout of memory", pre, colon);
    /* nest it: {"a": {"b": value}} for "a.b" */
    cJSON *root = cJSON_CreateObject(), *cur = root;
    char *part = key;
    for (char *dot; (dot = strchr(part, '.')); part = dot + 1) {
        *dot = 0;
        cJSON *o = cJSON_CreateObject();
        cJSON_AddItemToObject(cur, part, o);
        cur = o;
    }
    cJSON_AddItemToObject(cur, part, value);
    char cwd[CFG_PATH_MAX];
    Ctx x = {origin, getcwd(cwd, sizeof cwd) ? cwd : NULL};
    int rc = apply_tree(c, root, &x, st);
    cJSON_Delete(root);
    if (!rc) status_ok(st);
    return rc;
}

/* ---- validation --------------------------------------------------------------------------- */

int config_validate(const Config *c, Status *st) {
    if (!c->frames[0]) return status_set(st, ST_INPUT, "data.frames: required (the folder of frames or recordings)");
    if (c->refine_epochs >= c->epochs)
        return status_set(st, ST_INPUT,
                          "threshold.refine_epochs (%ld) must be less than train.epochs (%ld): lower it, or leave it "
                          "out of the config and it follows train.epochs (a fifth)",
                          c->refine_epochs, c->epochs);
    if (c->warmup_epochs > 0 && c->warmup_epochs + c->refine_epochs >= c->epochs)
        return status_set(st, ST_INPUT,
                          "train.warmup_epochs (%ld) + threshold.refine_epochs (%ld) must be less than train.epochs "
                          "(%ld): shorten the warm-up or the refinement, or train longer",
                          c->warmup_epochs, c->refine_epochs, c->epochs);
    if (c->derivatives == DERIVS_LATENT && !c->loss_normalize)
        return status_set(st, ST_INPUT,
                          "model.derivatives latent needs loss.normalize true: without the decoder's derivative "
                          "term only the relative latent term keeps the latent from shrinking to nothing");
    if (c->derivative == DERIV_SAVGOL) {
        if (c->sg_window % 2 == 0)
            return status_set(st, ST_INPUT, "data.derivative.window: must be odd for savgol (is %d)", c->sg_window);
        if (c->sg_window <= c->sg_degree)
            return status_set(st, ST_INPUT, "data.derivative.window (%d) must be greater than data.derivative.degree (%d)",
                              c->sg_window, c->sg_degree);
    }
    if (c->crop[2] != 0 || c->crop[3] != 0) {
        if (c->crop[2] <= 0 || c->crop[3] <= 0)
            return status_set(st, ST_INPUT, "data.crop: width and height must both be positive (or both 0 for no crop)");
    }
    if ((c->size[0] == 0) != (c->size[1] == 0))
        return status_set(st, ST_INPUT, "data.size: width and height must both be positive (or [0, 0] to keep the size)");
    if (c->latent * c->order > LIB_MAX_VARS)
        return status_set(st, ST_INPUT, "model.latent: at most %d for a model of order %d", LIB_MAX_VARS / c->order,
                          c->order);
    if (c->lib_degree == 0 && !c->lib_constant && !c->lib_trig && c->n_lib_include == 0)
        return status_set(st, ST_INPUT, "library: no candidate terms (degree 0, no constant, no trig, nothing included)");
    for (int i = 0; i < c->n_val_names; i++)
        for (int j = 0; j < i; j++)
            if (!strcmp(c->val_names[i], c->val_names[j]))
                return status_set(st, ST_INPUT, "data.validation.recordings[%d]: '%s' is listed twice", i, c->val_names[i]);
    if (c->schedule == SCHED_COSINE && c->lr_min > c->lr)
        return status_set(st, ST_INPUT, "optimizer.lr_min (%g) must not exceed optimizer.lr (%g)", c->lr_min, c->lr);
    status_ok(st);
    return 0;
}

/* ---- writing ------------------------------------------------------------------------------ */

static cJSON *int_exact(long long v) {
    char b[32];
    snprintf(b, sizeof b, "%lld", v);
    return cJSON_CreateRaw(b);
}

static cJSON *key_value(const Config *c, const KeyDef *k) {
    switch (k->type) {
    /* numbers as raw text that reads back to the same bits (cJSON's printer accepts a shorter form
     * when it is merely close); a config's numbers are finite */
    case T_NUM: return equation_exact_number(*(const double *)cfield(c, k));
    case T_INT: return int_exact(*(const int *)cfield(c, k));
    case T_LONG: return int_exact(*(const long *)cfield(c, k));
    case T_U64: return int_exact((long long)*(const uint64_t *)cfield(c, k));   /* <= 2^53 */
    case T_BOOL: return cJSON_CreateBool(*(const int *)cfield(c, k));
    case T_PATH: return cJSON_CreateString(cfield(c, k));
    case T_CHOICE: {
        int i = config_choice_index(k, *(const int *)cfield(c, k));
        NN_CHECK(i >= 0, "%s: value %d is none of its choices", k->path, *(const int *)cfield(c, k));
        return cJSON_CreateString(k->names[i]);
    }
    case T_INTS: case T_INTS_NULL: case T_CROP: case T_SIZE: {
        int n = k->type == T_CROP || k->type == T_SIZE ? (int)(k->size / sizeof(int)) : count_of(c, k);
        if (n < 0) return cJSON_CreateNull();
        const int *v = cfield(c, k);
        cJSON *a = cJSON_CreateArray();
        for (int i = 0; i < n; i++) cJSON_AddItemToArray(a, int_exact(v[i]));
        return a;
    }
    case T_STRS: {
        const char(*v)[CFG_NAME_MAX] = cfield(c, k);
        cJSON *a = cJSON_CreateArray();
        for (int i = 0; i < count_of(c, k); i++) cJSON_AddItemToArray(a, cJSON_CreateString(v[i]));
        return a;
    }
    case T_COUNT: break;
    }
    return cJSON_CreateNull();
}

static int late_at_compat(const Config *c, const KeyDef *k) {
    const char *compat = late_compat(k->path);
    if (!compat) return 0;
    cJSON *v = key_value(c, k), *d = cJSON_Parse(compat); /* compared as printed (exact integers are raw) */
    char *pv = v ? cJSON_PrintUnformatted(v) : NULL, *pd = d ? cJSON_PrintUnformatted(d) : NULL;
    int same = pv && pd && !strcmp(pv, pd);
    free(pv), free(pd);
    cJSON_Delete(v), cJSON_Delete(d);
    return same;
}

/* Every key (but the resume-safe ones when skip_safe) as a nested tree, in table order. */
/* skip_safe: the digest's tree (no resume-safe keys, no late keys at their compat values). */
static cJSON *config_tree(const Config *c, int skip_safe) {
    cJSON *root = cJSON_CreateObject();
    for (int i = 0; i < config_n_keys; i++) {
        const KeyDef *k = &config_keys[i];
        if (skip_safe && (config_is_resume_safe(k->path) || late_at_compat(c, k) || !strcmp(k->path, "data.frames_origin")))
            continue;
        char path[128];
        snprintf(path, sizeof path, "%s", k->path);
        cJSON *cur = root;
        char *part = path;
        for (char *dot; (dot = strchr(part, '.')); part = dot + 1) {
            *dot = 0;
            cJSON *o = cJSON_GetObjectItemCaseSensitive(cur, part);
            if (!o) {
                o = cJSON_CreateObject();
                cJSON_AddItemToObject(cur, part, o);
            }
            cur = o;
        }
        /* moved frames: the digest is the one of the place they were trained at */
        int moved = skip_safe && c->frames_origin[0] && !strcmp(k->path, "data.frames");
        cJSON_AddItemToObject(cur, part, moved ? cJSON_CreateString(c->frames_origin) : key_value(c, k));
    }
    return root;
}

char *config_to_json(const Config *c) {
    cJSON *t = config_tree(c, 0);
    char *s = cJSON_Print(t);
    cJSON_Delete(t);
    NN_CHECK(s, "config_to_json: out of memory");
    return s;
}

uint64_t config_digest(const Config *c) {
    cJSON *t = config_tree(c, 1);
    char *s = cJSON_PrintUnformatted(t);
    cJSON_Delete(t);
    NN_CHECK(s, "config_digest: out of memory");
    uint64_t h = fnv1a64_str(FNV1A64_INIT, s);
    free(s);
    return h;
}

void config_apply_map(Config *c, FramesMap map) {
    c->map = map;
    if (map != MAP_LINEAR) return;
    /* by value, not by config_given: a run's or a sweep member's config.json writes every key */
    Config *d = malloc(sizeof *d);
    NN_CHECK(d, "config_apply_map: out of memory");
    config_defaults(d);
    if (c->n_encoder == d->n_encoder && !memcmp(c->encoder, d->encoder, (size_t)d->n_encoder * sizeof *d->encoder))
        c->n_encoder = 0;
    if (c->init == d->init) c->init = INIT_PCA;
    if (c->derivatives == d->derivatives) c->derivatives = DERIVS_FRAMES;
    free(d);
}
