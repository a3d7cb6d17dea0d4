/* io/sweep/sweep.c: the sweep file and its grid of members: parsing and checking the file, the
 * members' values, seeds, ids, folders and resolved configs. The rest of the sweep: members.c (the
 * state of a member's folder, the shared frame store), slurm.c (the batch script), summary.c (the
 * summary). Formats and rules: docs/sweeps.md. */
#include "io/sweep/sweep.h"

#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "io/fs/files.h"
#include "io/fs/hash.h"
#include "io/fs/json_check.h"
#include "io/sweep/common.h"

/* ---- parsing the sweep file -------------------------------------------------------------------- */

static const char *const TOP_KEYS[] = {"base", "vary", "restarts", "seeds", "output", "slurm", "description", NULL};
void sweep_free(Sweep *sw) {
    for (int a = 0; a < sw->n_axes; a++) sweep_free_strings(sw->axes[a].values, sw->axes[a].n_values);
    free(sw->axes);
    for (int i = 0; i < sw->n_members; i++) {
        free(sw->members[i].choice);
        free(sw->members[i].dir);
    }
    free(sw->members);
    free(sw->seeds);
    free(sw->base);
    sweep_free_strings(sw->slurm.sbatch, sw->slurm.n_sbatch);
    sweep_free_strings(sw->slurm.setup, sw->slurm.n_setup);
    memset(sw, 0, sizeof *sw);
}

static int parse_axes(Sweep *sw, const cJSON *vary, Status *st) {
    const char *file = sw->path;
    if (!cJSON_IsObject(vary))
        return status_set(st, ST_INPUT, "%s: vary: must be an object of config keys and value lists, "
                                        "e.g. {\"loss.dx\": [0.01, 0.1]}", file);
    const char *dup = sweep_duplicate_name(vary);
    if (dup) return status_set(st, ST_INPUT, "%s: vary.%s: given twice", file, dup);
    int n = cJSON_GetArraySize(vary);
    sw->axes = calloc((size_t)(n ? n : 1), sizeof *sw->axes);
    if (!sw->axes) return status_set(st, ST_RUNTIME, "out of memory");
    for (const cJSON *e = vary->child; e; e = e->next) {
        const char *k = e->string;
        SweepAxis *ax = &sw->axes[sw->n_axes];
        if (strlen(k) >= sizeof ax->key) return status_set(st, ST_INPUT, "%s: vary.%.60s...: key too long", file, k);
        if (!strcmp(k, "output"))
            return status_set(st, ST_INPUT, "%s: vary.output: set by the sweep (each member runs in <output>/<member id>)", file);
        if (!strcmp(k, "train.threads"))
            return status_set(st, ST_INPUT, "%s: vary.train.threads: set by the sweep (--jobs, --threads)", file);
        if (!strcmp(k, "train.seed") && sw->seeds_vary)
            return status_set(st, ST_INPUT, "%s: vary.train.seed: the seeds come from restarts / seeds; give one or the other", file);
        snprintf(ax->key, sizeof ax->key, "%s", k);
        sw->n_axes++;
        if (!cJSON_IsArray(e)) return status_set(st, ST_INPUT, "%s: vary.%s: must be a list of values", file, k);
        int nv = cJSON_GetArraySize(e);
        if (nv == 0) return status_set(st, ST_INPUT, "%s: vary.%s: empty list of values (give at least one)", file, k);
        ax->values = calloc((size_t)nv, sizeof *ax->values);
        if (!ax->values) return status_set(st, ST_RUNTIME, "out of memory");
        for (const cJSON *v = e->child; v; v = v->next) {
            char *txt = cJSON_PrintUnformatted(v);
            if (!txt) return status_set(st, ST_RUNTIME, "out of memory");
            for (int j = 0; j < ax->n_values; j++)
                if (!strcmp(ax->values[j], txt)) {
                    int rc = status_set(st, ST_INPUT, "%s: vary.%s: value %.200s is listed twice", file, k, txt);
                    free(txt);
                    return rc;
                }
            ax->values[ax->n_values++] = txt;
        }
    }
    return 0;
}

static int parse_seeds(Sweep *sw, const cJSON *restarts, const cJSON *seeds, Status *st) {
    const char *file = sw->path;
    const double max_seed = 9007199254740992.0;
    if (restarts && seeds) return status_set(st, ST_INPUT, "%s: restarts and seeds: give one or the other", file);
    if (seeds) {
        if (!cJSON_IsArray(seeds) || cJSON_GetArraySize(seeds) == 0)
            return status_set(st, ST_INPUT, "%s: seeds: must be a non-empty list of integers", file);
        int n = cJSON_GetArraySize(seeds), i = 0;
        if (!(sw->seeds = calloc((size_t)n, sizeof *sw->seeds))) return status_set(st, ST_RUNTIME, "out of memory");
        for (const cJSON *e = seeds->child; e; e = e->next, i++) {
            if (!cJSON_IsNumber(e) || e->valuedouble != floor(e->valuedouble) || e->valuedouble < 0 || e->valuedouble > max_seed)
                return status_set(st, ST_INPUT, "%s: seeds[%d]: must be an integer from 0 to 9007199254740992", file, i);
            sw->seeds[i] = (uint64_t)e->valuedouble;
            for (int j = 0; j < i; j++)
                if (sw->seeds[j] == sw->seeds[i])
                    return status_set(st, ST_INPUT, "%s: seeds[%d]: %llu is listed twice", file, i, (unsigned long long)sw->seeds[i]);
        }
        sw->n_seeds = n;
        sw->seeds_vary = 1;
        return 0;
    }
    int r = 1;
    if (restarts) {
        if (!cJSON_IsNumber(restarts) || restarts->valuedouble != floor(restarts->valuedouble) ||
            restarts->valuedouble < 1 || restarts->valuedouble > 10000)
            return status_set(st, ST_INPUT, "%s: restarts: must be an integer from 1 to 10000", file);
        r = (int)restarts->valuedouble;
        sw->seeds_vary = 1;
    }
    if (!(sw->seeds = calloc((size_t)r, sizeof *sw->seeds))) return status_set(st, ST_RUNTIME, "out of memory");
    for (int i = 0; i < r; i++) sw->seeds[i] = sw->base->seed + (uint64_t)i;
    if (sw->seeds_vary && (double)sw->seeds[r - 1] > max_seed)
        return status_set(st, ST_INPUT, "%s: restarts: train.seed + %d is beyond 9007199254740992", file, r - 1);
    sw->n_seeds = r;
    return 0;
}

static int parse_base(Sweep *sw, const cJSON *base, Status *st) {
    const char *file = sw->path;
    if (!(sw->base = malloc(sizeof *sw->base))) return status_set(st, ST_RUNTIME, "out of memory");
    config_defaults(sw->base);
    if (!base) return status_set(st, ST_INPUT, "%s: base: missing (a config file, relative to the sweep file, or an inline config object)", file);
    if (cJSON_IsString(base)) {
        char p[CFG_PATH_MAX];
        const char *b = base->valuestring;
        if (!b[0]) return status_set(st, ST_INPUT, "%s: base: empty path", file);
        if (snprintf(p, sizeof p, "%s%s%s", b[0] == '/' ? "" : sw->dir, b[0] == '/' ? "" : "/", b) >= (int)sizeof p)
            return status_set(st, ST_INPUT, "%s: base: path too long", file);
        if (config_load(sw->base, p, st)) {
            char m[sizeof st->msg];
            snprintf(m, sizeof m, "%s", st->msg);
            return status_set(st, ST_INPUT, "%s: base: %s", file, m);
        }
        return 0;
    }
    if (!cJSON_IsObject(base))
        return status_set(st, ST_INPUT, "%s: base: must be a path (string) or an inline config (object)", file);
    char *txt = cJSON_Print(base);
    if (!txt) return status_set(st, ST_RUNTIME, "out of memory");
    char origin[CFG_PATH_MAX + 16];
    snprintf(origin, sizeof origin, "%s: base", file);
    int rc = config_parse(sw->base, txt, origin, sw->dir, st);
    free(txt);
    return rc;
}

/* Axis a's value for member i, made ready for config_set: a relative data.frames is taken relative
 * to the sweep file's folder. */
static int assignment(const Sweep *sw, int i, int a, char *out, size_t n, Status *st) {
    const SweepAxis *ax = &sw->axes[a];
    const char *v = ax->values[sw->members[i].choice[a]];
    if (!strcmp(ax->key, "data.frames") && v[0] == '"') {
        cJSON *s = cJSON_Parse(v);
        char *txt = NULL;
        if (s && cJSON_IsString(s) && s->valuestring[0] && s->valuestring[0] != '/') {
            char abs[CFG_PATH_MAX * 2];
            snprintf(abs, sizeof abs, "%s/%s", sw->dir, s->valuestring);
            cJSON_SetValuestring(s, abs);
            txt = cJSON_PrintUnformatted(s);
        }
        cJSON_Delete(s);
        if (txt) {
            int k = snprintf(out, n, "%s=%s", ax->key, txt);
            free(txt);
            if (k < 0 || (size_t)k >= n) return status_set(st, ST_INPUT, "data.frames: path too long");
            return 0;
        }
    }
    if ((size_t)snprintf(out, n, "%s=%s", ax->key, v) >= n) return status_set(st, ST_INPUT, "%s: value too long", ax->key);
    return 0;
}

int sweep_member_config(const Sweep *sw, int i, Config *c, Status *st) {
    const SweepMember *m = &sw->members[i];
    *c = *sw->base;
    char label[512];
    sweep_member_label(sw, i, label, sizeof label);
    char *as = malloc(CFG_PATH_MAX * 3);
    if (!as) return status_set(st, ST_RUNTIME, "out of memory");
    int rc = 0;
    for (int a = 0; a < sw->n_axes && !rc; a++) {
        if ((rc = assignment(sw, i, a, as, CFG_PATH_MAX * 3, st)) || (rc = config_set_as(c, as, NULL, st)))
            rc = status_set(st, ST_INPUT, "%s: member %s (%s): vary: %s", sw->path, m->id, label, st->msg);
    }
    free(as);
    if (rc) return rc;
    if (sw->seeds_vary) c->seed = m->seed;
    if (snprintf(c->output, sizeof c->output, "%s", m->dir) >= (int)sizeof c->output)
        return status_set(st, ST_INPUT, "%s: output: path too long", sw->path);
    if (config_validate(c, st)) {
        char msg[sizeof st->msg];
        snprintf(msg, sizeof msg, "%s", st->msg);
        return status_set(st, ST_INPUT, "%s: member %s (%s): %s", sw->path, m->id, label, msg);
    }
    return 0;
}

void sweep_member_value(const Sweep *sw, int i, int a, char *buf, size_t n) {
    const char *v = sw->axes[a].values[sw->members[i].choice[a]];
    cJSON *j = v[0] == '"' ? cJSON_Parse(v) : NULL;
    snprintf(buf, n, "%s", j && cJSON_IsString(j) ? j->valuestring : v);
    cJSON_Delete(j);
}

size_t sweep_member_label(const Sweep *sw, int i, char *buf, size_t n) {
    TextBuf b = {0};
    char v[512];
    for (int a = 0; a < sw->n_axes; a++) {
        sweep_member_value(sw, i, a, v, sizeof v);
        text_printf(&b, "%s%s=%s", a ? ", " : "", sw->axes[a].key, v);
    }
    if (sw->seeds_vary) text_printf(&b, "%strain.seed=%llu", sw->n_axes ? ", " : "", (unsigned long long)sw->members[i].seed);
    if (!b.n) text_puts(&b, "the base config");
    size_t len = b.failed ? 0 : b.n;
    if (n) snprintf(buf, n, "%s", b.b && !b.failed ? b.b : "");
    free(b.b);
    return len;
}

static int expand(Sweep *sw, Status *st) {
    double total = sw->n_seeds;
    for (int a = 0; a < sw->n_axes; a++) total *= sw->axes[a].n_values;
    if (total > SWEEP_MAX_MEMBERS)
        return status_set(st, ST_INPUT, "%s: %.0f members: more than %d (fewer values or restarts)", sw->path, total,
                          SWEEP_MAX_MEMBERS);
    int n = (int)total;   /* ids: 4 digits, 5 past 10000 members (SWEEP_MAX_MEMBERS = 100000) */
    if (!(sw->members = calloc((size_t)n, sizeof *sw->members))) return status_set(st, ST_RUNTIME, "out of memory");
    for (int i = 0; i < n; i++) {
        SweepMember *m = &sw->members[i];
        sw->n_members = i + 1;
        m->index = i;
        if (!(m->choice = calloc((size_t)(sw->n_axes ? sw->n_axes : 1), sizeof *m->choice)))
            return status_set(st, ST_RUNTIME, "out of memory");
        /* restarts innermost, then the last key fastest */
        int rest = i / sw->n_seeds;
        m->seed = sw->seeds[i % sw->n_seeds];
        for (int a = sw->n_axes - 1; a >= 0; a--) {
            m->choice[a] = rest % sw->axes[a].n_values;
            rest /= sw->axes[a].n_values;
        }
        uint64_t h = FNV1A64_INIT;
        for (int a = 0; a < sw->n_axes; a++) {
            h = fnv1a64_str(h, sw->axes[a].key);
            h = fnv1a64_str(h, "=");
            h = fnv1a64_str(h, sw->axes[a].values[m->choice[a]]);
            h = fnv1a64_str(h, "\n");
        }
        if (sw->seeds_vary) {
            char s[64];
            snprintf(s, sizeof s, "train.seed=%llu\n", (unsigned long long)m->seed);
            h = fnv1a64_str(h, s);
        }
        unsigned hh = (unsigned)((h ^ (h >> 32)) & 0xffffffffu), ii = (unsigned)i % 100000u;
        if (n > 10000) snprintf(m->id, sizeof m->id, "m%05u-%08x", ii, hh);
        else snprintf(m->id, sizeof m->id, "m%04u-%08x", ii, hh);
        char dir[CFG_PATH_MAX + 64];
        snprintf(dir, sizeof dir, "%s/%s", sw->output, m->id);
        if (strlen(dir) >= CFG_PATH_MAX) return status_set(st, ST_INPUT, "%s: output: path too long", sw->path);
        if (!(m->dir = sweep_strdup(dir))) return status_set(st, ST_RUNTIME, "out of memory");
    }
    return 0;
}

static int load_inner(Sweep *sw, const char *path, Status *st) {
    if (snprintf(sw->path, sizeof sw->path, "%s", path) >= (int)sizeof sw->path)
        return status_set(st, ST_INPUT, "%.200s...: path too long", path);
    char *text;
    if (fs_read_file(path, 16u << 20, &text, NULL, st)) return st->code;
    if (!realpath(path, sw->abs_path)) {
        free(text);
        return status_set(st, ST_INPUT, "%s: %s", path, strerror(errno));
    }
    snprintf(sw->dir, sizeof sw->dir, "%s", sw->abs_path);
    char *slash = strrchr(sw->dir, '/');
    if (slash == sw->dir) slash[1] = 0;
    else if (slash) *slash = 0;
    const char *name = strrchr(sw->abs_path, '/') ? strrchr(sw->abs_path, '/') + 1 : sw->abs_path;
    size_t sl = strlen(name) < sizeof sw->stem ? strlen(name) : sizeof sw->stem - 1;
    memcpy(sw->stem, name, sl);
    sw->stem[sl] = 0;
    if (sl > 5 && !strcmp(sw->stem + sl - 5, ".json")) sw->stem[sl - 5] = 0;

    JsonFault jf; /* RFC 8259 first: cJSON accepts 01, 5. and \u0000, and says only "malformed" */
    if (json_check(text, strlen(text), &jf)) {
        free(text);
        return status_set(st, ST_INPUT, "%s: line %d, column %d: malformed JSON: %s", path, jf.line, jf.col, jf.what);
    }
    const char *end = NULL;
    cJSON *root = cJSON_ParseWithOpts(text, &end, 1);
    if (!root) {
        int line = 1, col = 1;
        for (const char *p = text; end && p < end && *p; p++) {
            if (*p == '\n') line++, col = 1;
            else col++;
        }
        free(text);
        return status_set(st, ST_INPUT, "%s: line %d, column %d: malformed JSON", path, line, col);
    }
    free(text);
    int rc = 0;
    const char *dup;
    if (!cJSON_IsObject(root)) {
        rc = status_set(st, ST_INPUT, "%s: the top level must be a JSON object ({ ... })", path);
    } else if ((dup = sweep_duplicate_name(root))) {
        rc = status_set(st, ST_INPUT, "%s: %s: given twice", path, dup);
    } else {
        for (const cJSON *e = root->child; e && !rc; e = e->next)
            if (!sweep_in_list(e->string, TOP_KEYS))
                rc = status_set(st, ST_INPUT, "%s: %s: unknown key (known: base, vary, restarts, seeds, output, slurm, "
                                              "description)", path, e->string);
    }
    if (!rc) rc = parse_base(sw, cJSON_GetObjectItemCaseSensitive(root, "base"), st);
    if (!rc) rc = parse_seeds(sw, cJSON_GetObjectItemCaseSensitive(root, "restarts"),
                              cJSON_GetObjectItemCaseSensitive(root, "seeds"), st);
    const cJSON *vary = cJSON_GetObjectItemCaseSensitive(root, "vary");
    if (!rc && vary) rc = parse_axes(sw, vary, st);
    const cJSON *out = cJSON_GetObjectItemCaseSensitive(root, "output");
    if (!rc) {
        if (out && (!cJSON_IsString(out) || !out->valuestring[0]))
            rc = status_set(st, ST_INPUT, "%s: output: must be a non-empty path", path);
        else if (snprintf(sw->output, sizeof sw->output, "%s", out ? out->valuestring : "sweeps/") >= (int)sizeof sw->output - 64)
            rc = status_set(st, ST_INPUT, "%s: output: path too long", path);
        else if (!out)
            snprintf(sw->output + strlen(sw->output), sizeof sw->output - strlen(sw->output), "%s", sw->stem);
        size_t ol = strlen(sw->output);
        while (ol > 1 && sw->output[ol - 1] == '/') sw->output[--ol] = 0;
    }
    const cJSON *sl_ = cJSON_GetObjectItemCaseSensitive(root, "slurm");
    if (!rc && sl_) rc = sweep_parse_slurm(sw, sl_, st);
    cJSON_Delete(root);
    if (!rc) rc = expand(sw, st);
    if (!rc) {
        Config *c = malloc(sizeof *c);
        if (!c) return status_set(st, ST_RUNTIME, "out of memory");
        for (int i = 0; i < sw->n_members && !rc; i++) rc = sweep_member_config(sw, i, c, st);
        free(c);
    }
    return rc;
}

int sweep_load(Sweep *sw, const char *path, Status *st) {
    memset(sw, 0, sizeof *sw);
    int rc = load_inner(sw, path, st);
    if (rc) sweep_free(sw);
    else status_ok(st);
    return rc;
}
