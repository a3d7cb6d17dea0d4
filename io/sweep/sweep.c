/* io/sweep/sweep.c: sweep files, members, their folders, the shared frame store, the Slurm batch script and
 * the summary. Formats and rules: docs/sweeps.md. */
#include "io/sweep/sweep.h"

#include <ctype.h>
#include <stdarg.h>
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "io/fs/atomic_file.h"
#include "io/fs/files.h"
#include "io/fs/hash.h"
#include "io/data/frames.h"
#include "io/data/store.h"
#include "io/run/rundata.h"
#include "io/run/runlog.h"
#include "sparse/equation.h"

/* ---- small helpers ----------------------------------------------------------------------------- */

static char *xstrdup(const char *s) {
    size_t n = strlen(s) + 1;
    char *d = malloc(n);
    if (d) memcpy(d, s, n);
    return d;
}

/* A growing text buffer; on allocation failure it stops growing and marks itself failed. */
typedef struct {
    char *b;
    size_t n, cap;
    int failed;
} Buf;

static void buf_add(Buf *b, const char *s, size_t len) {
    if (b->failed) return;
    if (b->n + len + 1 > b->cap) {
        size_t cap = b->cap ? b->cap : 4096;
        while (cap < b->n + len + 1) cap *= 2;
        char *nb = realloc(b->b, cap);
        if (!nb) { b->failed = 1; return; }
        b->b = nb;
        b->cap = cap;
    }
    memcpy(b->b + b->n, s, len);
    b->n += len;
    b->b[b->n] = 0;
}

static void buf_puts(Buf *b, const char *s) { buf_add(b, s, strlen(s)); }

__attribute__((format(printf, 2, 3))) static void buf_printf(Buf *b, const char *fmt, ...) {
    char tmp[2048];
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(tmp, sizeof tmp, fmt, ap);
    va_end(ap);
    if (n < 0) return;
    if ((size_t)n < sizeof tmp) { buf_add(b, tmp, (size_t)n); return; }
    char *big = malloc((size_t)n + 1);
    if (!big) { b->failed = 1; return; }
    va_start(ap, fmt);
    vsnprintf(big, (size_t)n + 1, fmt, ap);
    va_end(ap);
    buf_add(b, big, (size_t)n);
    free(big);
}

/* Take the text (NULL when memory ran out). */
static char *buf_take(Buf *b) {
    if (b->failed) { free(b->b); return NULL; }
    if (!b->b) return xstrdup("");
    return b->b;
}

/* Whole file as text; NULL when it cannot be read, with the reason (naming the file) in why. */
static char *read_text(const char *path, size_t max, char *why, size_t n_why) {
    char *text;
    Status st;
    if (fs_read_file(path, max, &text, NULL, &st)) {
        snprintf(why, n_why, "%s", st.msg);
        return NULL;
    }
    return text;
}

/* Exclusive lock on <dir>/<name> (created if needed), held until lock_release. Waits for it. */
static int lock_take(const char *dir, const char *name, int *fd_out, Status *st) {
    char p[CFG_PATH_MAX + 64];
    snprintf(p, sizeof p, "%s/%s", dir, name);
    int fd = open(p, O_RDWR | O_CREAT, 0666);
    if (fd < 0) return status_set(st, ST_RUNTIME, "%s: cannot open the lock file: %s", p, strerror(errno));
    struct flock fl;
    memset(&fl, 0, sizeof fl);
    fl.l_type = F_WRLCK;
    fl.l_whence = SEEK_SET;
    while (fcntl(fd, F_SETLKW, &fl) != 0) {
        if (errno == EINTR) continue;
        int e = errno;
        close(fd);
        return status_set(st, ST_RUNTIME, "%s: cannot lock: %s", p, strerror(e));
    }
    *fd_out = fd;
    return 0;
}

static void lock_release(int fd) {
    if (fd >= 0) close(fd);   /* closing drops the lock */
}

/* ---- parsing the sweep file -------------------------------------------------------------------- */

static const char *const TOP_KEYS[] = {"base", "vary", "restarts", "seeds", "output", "slurm", "description", NULL};
static const char *const SLURM_KEYS[] = {"partition", "time", "cpus_per_task", "memory", "max_running",
                                         "sbatch", "setup", NULL};

static int in_list(const char *s, const char *const *list) {
    for (int i = 0; list[i]; i++)
        if (!strcmp(s, list[i])) return 1;
    return 0;
}

static void free_strings(char **v, int n) {
    if (!v) return;
    for (int i = 0; i < n; i++) free(v[i]);
    free(v);
}

void sweep_free(Sweep *sw) {
    for (int a = 0; a < sw->n_axes; a++) free_strings(sw->axes[a].values, sw->axes[a].n_values);
    free(sw->axes);
    for (int i = 0; i < sw->n_members; i++) {
        free(sw->members[i].choice);
        free(sw->members[i].dir);
    }
    free(sw->members);
    free(sw->seeds);
    free(sw->base);
    free_strings(sw->slurm.sbatch, sw->slurm.n_sbatch);
    free_strings(sw->slurm.setup, sw->slurm.n_setup);
    memset(sw, 0, sizeof *sw);
}

/* Duplicate member names in an object (cJSON keeps them): the first repeated name, or NULL. */
static const char *duplicate_name(const cJSON *obj) {
    for (const cJSON *a = obj->child; a; a = a->next)
        for (const cJSON *b = a->next; b; b = b->next)
            if (a->string && b->string && !strcmp(a->string, b->string)) return a->string;
    return NULL;
}

/* A string safe inside a batch script line: printable, no quotes that would end ours. */
static int script_safe(const char *s, int allow_space) {
    for (const unsigned char *p = (const unsigned char *)s; *p; p++)
        if (*p < 32 || *p == 127 || (!allow_space && *p == ' ')) return 0;
    return 1;
}

static int slurm_word(const cJSON *v, const char *key, char *out, size_t n, const char *file, Status *st) {
    if (cJSON_IsNumber(v) && !strcmp(key, "memory") && v->valuedouble >= 1 && v->valuedouble == floor(v->valuedouble)) {
        snprintf(out, n, "%.0f", v->valuedouble);   /* megabytes, as sbatch reads a bare number */
        return 0;
    }
    if (!cJSON_IsString(v) || !v->valuestring[0] || strlen(v->valuestring) >= n)
        return status_set(st, ST_INPUT, "%s: slurm.%s: must be a non-empty string of at most %zu characters", file, key, n - 1);
    for (const char *p = v->valuestring; *p; p++)
        if (!isalnum((unsigned char)*p) && !strchr(":-_.+", *p))
            return status_set(st, ST_INPUT, "%s: slurm.%s: '%s' has a character Slurm does not take here ('%c')", file,
                              key, v->valuestring, *p);
    snprintf(out, n, "%s", v->valuestring);
    return 0;
}

static int string_list(const cJSON *v, const char *key, char ***out, int *n_out, const char *file, Status *st) {
    if (!cJSON_IsArray(v)) return status_set(st, ST_INPUT, "%s: slurm.%s: must be a list of strings", file, key);
    int n = cJSON_GetArraySize(v), i = 0;
    char **list = calloc((size_t)(n ? n : 1), sizeof *list);
    if (!list) return status_set(st, ST_RUNTIME, "out of memory");
    for (const cJSON *e = v->child; e; e = e->next, i++) {
        if (!cJSON_IsString(e) || !script_safe(e->valuestring, 1)) {
            free_strings(list, i);
            return status_set(st, ST_INPUT, "%s: slurm.%s[%d]: must be a string on one line", file, key, i);
        }
        if (!(list[i] = xstrdup(e->valuestring))) {
            free_strings(list, i);
            return status_set(st, ST_RUNTIME, "out of memory");
        }
    }
    *out = list;
    *n_out = n;
    return 0;
}

static int parse_slurm(Sweep *sw, const cJSON *s, Status *st) {
    const char *file = sw->path;
    if (!cJSON_IsObject(s)) return status_set(st, ST_INPUT, "%s: slurm: must be an object", file);
    const char *dup = duplicate_name(s);
    if (dup) return status_set(st, ST_INPUT, "%s: slurm.%s: given twice", file, dup);
    for (const cJSON *e = s->child; e; e = e->next) {
        const char *k = e->string;
        int rc = 0;
        if (!in_list(k, SLURM_KEYS))
            rc = status_set(st, ST_INPUT, "%s: slurm.%s: unknown key (known: partition, time, cpus_per_task, memory, "
                                          "max_running, sbatch, setup)", file, k);
        else if (!strcmp(k, "partition")) rc = slurm_word(e, k, sw->slurm.partition, sizeof sw->slurm.partition, file, st);
        else if (!strcmp(k, "time")) rc = slurm_word(e, k, sw->slurm.time, sizeof sw->slurm.time, file, st);
        else if (!strcmp(k, "memory")) rc = slurm_word(e, k, sw->slurm.memory, sizeof sw->slurm.memory, file, st);
        else if (!strcmp(k, "cpus_per_task") || !strcmp(k, "max_running")) {
            if (!cJSON_IsNumber(e) || e->valuedouble != floor(e->valuedouble) || e->valuedouble < 1 || e->valuedouble > 100000)
                rc = status_set(st, ST_INPUT, "%s: slurm.%s: must be an integer from 1 to 100000", file, k);
            else if (k[0] == 'c') sw->slurm.cpus_per_task = (int)e->valuedouble;
            else sw->slurm.max_running = (int)e->valuedouble;
        } else if (!strcmp(k, "sbatch")) {
            if (sw->slurm.sbatch) free_strings(sw->slurm.sbatch, sw->slurm.n_sbatch);
            rc = string_list(e, k, &sw->slurm.sbatch, &sw->slurm.n_sbatch, file, st);
        } else {
            rc = string_list(e, k, &sw->slurm.setup, &sw->slurm.n_setup, file, st);
        }
        if (rc) return rc;
    }
    return 0;
}

static int parse_axes(Sweep *sw, const cJSON *vary, Status *st) {
    const char *file = sw->path;
    if (!cJSON_IsObject(vary))
        return status_set(st, ST_INPUT, "%s: vary: must be an object of config keys and value lists, "
                                        "e.g. {\"loss.dx\": [0.01, 0.1]}", file);
    const char *dup = duplicate_name(vary);
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
        if ((rc = assignment(sw, i, a, as, CFG_PATH_MAX * 3, st)) || (rc = config_set(c, as, st))) {
            char msg[sizeof st->msg];
            const char *p = st->msg;
            if (!strncmp(p, "--set: ", 7)) p += 7;
            else if (!strncmp(p, "--set ", 6)) p += 6;
            snprintf(msg, sizeof msg, "%s", p);
            rc = status_set(st, ST_INPUT, "%s: member %s (%s): vary: %s", sw->path, m->id, label, msg);
        }
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
    Buf b = {0};
    char v[512];
    for (int a = 0; a < sw->n_axes; a++) {
        sweep_member_value(sw, i, a, v, sizeof v);
        buf_printf(&b, "%s%s=%s", a ? ", " : "", sw->axes[a].key, v);
    }
    if (sw->seeds_vary) buf_printf(&b, "%strain.seed=%llu", sw->n_axes ? ", " : "", (unsigned long long)sw->members[i].seed);
    if (!b.n) buf_puts(&b, "the base config");
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
        if (!(m->dir = xstrdup(dir))) return status_set(st, ST_RUNTIME, "out of memory");
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
    } else if ((dup = duplicate_name(root))) {
        rc = status_set(st, ST_INPUT, "%s: %s: given twice", path, dup);
    } else {
        for (const cJSON *e = root->child; e && !rc; e = e->next)
            if (!in_list(e->string, TOP_KEYS))
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
    if (!rc && sl_) rc = parse_slurm(sw, sl_, st);
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

/* ---- member folders ---------------------------------------------------------------------------- */

/* The last row of the member's log (io/run/runlog.h) and its last validation loss. A missing log
 * gives epoch 0 and no error; a malformed one gives the same with the reason in st. */
static int read_log(const char *run_dir, SweepLog *log, Status *st) {
    log->epoch = 0;
    log->loss = log->reconstruction = log->dx = log->dz = log->validation = NAN;
    log->active = -1;
    char p[CFG_PATH_MAX + 32];
    snprintf(p, sizeof p, "%s/" RUNLOG_FILE, run_dir);
    if (!fs_exists(p)) return 0;
    RunLog rl;
    if (runlog_read(run_dir, &rl, st)) return st->code;
    if (rl.n) {
        const RunLogRow *last = &rl.rows[rl.n - 1];
        log->epoch = last->epoch;
        log->loss = last->loss;
        log->reconstruction = last->reconstruction;
        log->dx = last->dx;
        log->dz = last->dz;
        log->active = last->active;
    }
    for (long i = 0; i < rl.n; i++)
        if (rl.rows[i].validated) log->validation = rl.rows[i].validation;
    runlog_free(&rl);
    return 0;
}

void sweep_read_log(const char *run_dir, SweepLog *log) {
    Status st;
    read_log(run_dir, log, &st);
}

int sweep_member_state(const Sweep *sw, int i, MemberState *state, Status *st) {
    const char *dir = sw->members[i].dir;
    char p[CFG_PATH_MAX + 64];
    Config *mine = malloc(sizeof *mine), *theirs = malloc(sizeof *theirs);
    if (!mine || !theirs) { free(mine); free(theirs); return status_set(st, ST_RUNTIME, "out of memory"); }
    int rc = sweep_member_config(sw, i, mine, st);
    snprintf(p, sizeof p, "%s/config.json", dir);
    if (!rc && fs_exists(p)) {
        Status ls;
        if (config_load(theirs, p, &ls))
            rc = status_set(st, ST_INPUT, "member %s: %s (move the folder away to start this member over)", sw->members[i].id, ls.msg);
        else if (config_digest(theirs) != config_digest(mine))
            rc = status_set(st, ST_INPUT, "member %s: %s holds a run of another config (the sweep file or its base config "
                                          "changed since it started); move the folder away or give the sweep another output",
                            sw->members[i].id, dir);
    }
    if (!rc) {
        SweepLog log;
        sweep_read_log(dir, &log);
        snprintf(p, sizeof p, "%s/equations.json", dir);
        int eq = fs_exists(p);
        snprintf(p, sizeof p, "%s/checkpoints", dir);
        if (eq && log.epoch >= mine->epochs) *state = MEMBER_DONE;
        else if (fs_is_dir(p)) *state = MEMBER_RESUME;
        else *state = MEMBER_NEW;
    }
    free(mine);
    free(theirs);
    return rc;
}

int sweep_member_prepare(const Sweep *sw, int i, MemberState state, int threads, Status *st) {
    const char *dir = sw->members[i].dir;
    if (fs_make_dirs(dir, st)) return st->code;
    if (state != MEMBER_NEW) return 0;
    Config *c = malloc(sizeof *c);
    if (!c) return status_set(st, ST_RUNTIME, "out of memory");
    int rc = sweep_member_config(sw, i, c, st);
    if (!rc) {
        c->threads = threads;
        char p[CFG_PATH_MAX + 32];
        snprintf(p, sizeof p, "%s/config.json", dir);
        char *json = config_to_json(c);
        rc = json ? atomic_write_bytes(p, json, strlen(json), st) : status_set(st, ST_RUNTIME, "out of memory");
        free(json);
    }
    free(c);
    return rc;
}

void sweep_store_key(const Config *c, char *buf, size_t n) {
    snprintf(buf, n, "%s|%s|%d,%d,%d,%d|%d,%d|%d|%d", c->frames, c->gray, c->crop[0], c->crop[1], c->crop[2],
             c->crop[3], c->size[0], c->size[1], c->stride, c->store_bits);
}

int sweep_prepare_store(const Sweep *sw, int i, Status *st) {
    Config *c = malloc(sizeof *c);
    if (!c) return status_set(st, ST_RUNTIME, "out of memory");
    int rc = sweep_member_config(sw, i, c, st), fd = -1;
    FrameSettings s;
    if (!rc) rc = frame_settings_from_config(c, &s, st);
    if (!rc) rc = fs_make_dirs(sw->output, st);
    if (!rc) rc = lock_take(sw->output, ".store.lock", &fd, st);
    if (!rc) {
        FrameScan scan;
        if (!(rc = frames_scan(c->frames, &scan, st))) {
            FrameStore fs;
            StoreOpenInfo info;
            if (!(rc = store_open_for(&scan, &s, 0, &fs, &info, st))) store_close(&fs);
            frames_scan_free(&scan);
        }
    }
    lock_release(fd);
    free(c);
    return rc;
}

/* ---- Slurm ------------------------------------------------------------------------------------- */

static void shell_quote(Buf *b, const char *s) {
    buf_puts(b, "'");
    for (; *s; s++) {
        if (*s == '\'') buf_puts(b, "'\\''");
        else buf_add(b, s, 1);
    }
    buf_puts(b, "'");
}

char *sweep_slurm_script(const Sweep *sw, const char *exe, const char *workdir, Status *st) {
    char out_abs[CFG_PATH_MAX * 2];
    snprintf(out_abs, sizeof out_abs, "%s%s%s", sw->output[0] == '/' ? "" : workdir, sw->output[0] == '/' ? "" : "/",
             sw->output);
    if (!script_safe(out_abs, 0) || !script_safe(workdir, 0) || strchr(out_abs, '%')) {
        status_set(st, ST_INPUT, "%s: the sweep folder %s (or the working folder %s) has a space, a %% or a control "
                                 "character, which #SBATCH lines cannot take", sw->path, out_abs, workdir);
        return NULL;
    }
    if (!script_safe(exe, 1) || !script_safe(sw->abs_path, 1)) {
        status_set(st, ST_INPUT, "%s: a control character in the program's or the sweep file's path", sw->path);
        return NULL;
    }
    Buf b = {0};
    buf_puts(&b, "#!/bin/bash\n");
    buf_printf(&b, "# framelaw sweep %s: %d members as one Slurm job array, one member per array task.\n", sw->stem,
               sw->n_members);
    buf_printf(&b, "# Written by `framelaw sweep %s --slurm`; submit with: sbatch %s/sweep.sbatch\n", sw->path, out_abs);
    buf_puts(&b, "# Task I runs member I (grid order, docs/sweeps.md); a finished member is skipped, an interrupted one\n"
                 "# resumes from its checkpoint, so the same script can be submitted again.\n");
    buf_printf(&b, "#SBATCH --job-name=framelaw-%s\n", script_safe(sw->stem, 0) && !strchr(sw->stem, '%') ? sw->stem : "sweep");
    if (sw->slurm.max_running) buf_printf(&b, "#SBATCH --array=0-%d%%%d\n", sw->n_members - 1, sw->slurm.max_running);
    else buf_printf(&b, "#SBATCH --array=0-%d\n", sw->n_members - 1);
    if (sw->slurm.partition[0]) buf_printf(&b, "#SBATCH --partition=%s\n", sw->slurm.partition);
    if (sw->slurm.time[0]) buf_printf(&b, "#SBATCH --time=%s\n", sw->slurm.time);
    if (sw->slurm.cpus_per_task) buf_printf(&b, "#SBATCH --cpus-per-task=%d\n", sw->slurm.cpus_per_task);
    if (sw->slurm.memory[0]) buf_printf(&b, "#SBATCH --mem=%s\n", sw->slurm.memory);
    buf_printf(&b, "#SBATCH --output=%s/slurm/%%A_%%a.out\n", out_abs);
    buf_printf(&b, "#SBATCH --chdir=%s\n", workdir);
    for (int k = 0; k < sw->slurm.n_sbatch; k++) buf_printf(&b, "#SBATCH %s\n", sw->slurm.sbatch[k]);
    buf_puts(&b, "set -u\n");
    for (int k = 0; k < sw->slurm.n_setup; k++) buf_printf(&b, "%s\n", sw->slurm.setup[k]);
    buf_puts(&b, "exec ");
    shell_quote(&b, exe);
    buf_puts(&b, " sweep ");
    shell_quote(&b, sw->abs_path);
    buf_puts(&b, " --member \"$SLURM_ARRAY_TASK_ID\"\n");
    char *s = buf_take(&b);
    if (!s) status_set(st, ST_RUNTIME, "out of memory");
    return s;
}

int sweep_write_slurm(const Sweep *sw, const char *exe, const char *workdir, char *path_out, size_t n, Status *st) {
    char *s = sweep_slurm_script(sw, exe, workdir, st);
    if (!s) return st->code;
    char logs[CFG_PATH_MAX + 16];
    snprintf(logs, sizeof logs, "%s/slurm", sw->output);
    snprintf(path_out, n, "%s/sweep.sbatch", sw->output);
    int rc = fs_make_dirs(logs, st);
    if (!rc) rc = atomic_write_bytes(path_out, s, strlen(s), st);
    if (!rc && chmod(path_out, 0755) != 0) rc = status_set(st, ST_RUNTIME, "%s: chmod: %s", path_out, strerror(errno));
    free(s);
    return rc;
}

/* ---- the summary ------------------------------------------------------------------------------- */

/* Model structure of an equations.json: per equation, the terms with a nonzero active
 * coefficient. *active gets their number. malloc'ed key, or NULL with a message in why. */
static char *structure_of(const char *path, long *active, char *why, size_t n_why) {
    char *text = read_text(path, 64u << 20, why, n_why);
    if (!text) return NULL;
    Library lib;
    Coef coef;
    Status st;
    if (equation_from_json(text, &lib, &coef, &st)) {
        free(text);
        snprintf(why, n_why, "equations.json: %s", st.msg);
        return NULL;
    }
    free(text);
    Buf b = {0};
    int k = lib.spec.n_latent;
    *active = 0;
    for (int j = 0; j < k; j++) {
        if (lib.spec.order == 2) buf_printf(&b, "%sd2z%d/dt2:", j ? " | " : "", j + 1);
        else buf_printf(&b, "%sdz%d/dt:", j ? " | " : "", j + 1);
        int any = 0;
        for (int t = 0; t < lib.n_terms; t++) {
            long q = (long)t * k + j;
            if (!coef.mask[q] || coef.xi[q] == 0) continue;
            buf_printf(&b, "%s %s", any ? "," : "", lib.names[t]);
            any = 1;
            (*active)++;
        }
        if (!any) buf_puts(&b, " 0");
    }
    library_free(&lib);
    coef_free(&coef);
    char *key = buf_take(&b);
    if (!key) snprintf(why, n_why, "out of memory");
    return key;
}

/* Mean over recordings of mean_error in forecast.json; NAN when absent or unreadable. */
static double forecast_error(const char *dir, char *why, size_t n_why) {
    char p[CFG_PATH_MAX + 32];
    snprintf(p, sizeof p, "%s/forecast.json", dir);
    if (!fs_exists(p)) return NAN;
    char *text = read_text(p, 64u << 20, why, n_why);
    if (!text) return NAN;
    cJSON *root = text ? cJSON_Parse(text) : NULL;
    free(text);
    const cJSON *recs = root ? cJSON_GetObjectItemCaseSensitive(root, "recordings") : NULL;
    double sum = 0;
    int n = 0;
    for (const cJSON *r = cJSON_IsArray(recs) ? recs->child : NULL; r; r = r->next) {
        const cJSON *e = cJSON_GetObjectItemCaseSensitive(r, "mean_error");
        if (cJSON_IsNumber(e) && isfinite(e->valuedouble)) sum += e->valuedouble, n++;
    }
    if (!root || !cJSON_IsArray(recs)) snprintf(why, n_why, "forecast.json: unreadable or without \"recordings\"");
    else if (!n) snprintf(why, n_why, "forecast.json: no recording with a mean_error");
    cJSON_Delete(root);
    return n ? sum / n : NAN;
}

static char *equations_line(const char *dir) {
    char p[CFG_PATH_MAX + 32];
    snprintf(p, sizeof p, "%s/equations.txt", dir);
    char *t;
    Status missing;   /* no equations.txt yet: no equations to show */
    if (fs_read_file(p, 1u << 20, &t, NULL, &missing)) return NULL;
    Buf b = {0};
    int first = 1;
    for (char *line = strtok(t, "\r\n"); line; line = strtok(NULL, "\r\n")) {
        if (!*line) continue;
        if (!first) buf_puts(&b, "; ");
        buf_puts(&b, line);
        first = 0;
    }
    free(t);
    return buf_take(&b);
}

/* why += "; " msg */
static void add_problem(char *why, size_t n, const char *msg) {
    size_t l = strlen(why);
    snprintf(why + l, n - l, "%s%s", l ? "; " : "", msg);
}

static int row_cmp(const void *pa, const void *pb) {
    const SweepRow *a = pa, *b = pb;
    int ra = a->error_from == ERR_FORECAST ? 0 : a->error_from == ERR_VALIDATION ? 1 : 2;
    int rb = b->error_from == ERR_FORECAST ? 0 : b->error_from == ERR_VALIDATION ? 1 : 2;
    if (ra != rb) return ra - rb;
    if (ra < 2 && a->error != b->error) return a->error < b->error ? -1 : 1;
    return a->member - b->member;
}

void sweep_summary_free(SweepSummary *sum) {
    for (int r = 0; r < sum->n_rows; r++) {
        free(sum->rows[r].equations);
        free(sum->rows[r].problem);
    }
    for (int g = 0; g < sum->n_groups; g++) free(sum->groups[g].key);
    free(sum->rows);
    free(sum->groups);
    memset(sum, 0, sizeof *sum);
}

int sweep_summary(const Sweep *sw, SweepSummary *sum, Status *st) {
    memset(sum, 0, sizeof *sum);
    int n = sw->n_members;
    sum->rows = calloc((size_t)(n ? n : 1), sizeof *sum->rows);
    char **keys = calloc((size_t)(n ? n : 1), sizeof *keys);
    Config *c = malloc(sizeof *c);
    if (!sum->rows || !keys || !c) {
        free(keys);
        free(c);
        free(sum->rows);
        sum->rows = NULL;
        return status_set(st, ST_RUNTIME, "out of memory");
    }
    sum->n_rows = n;
    int have_forecast = 0;
    for (int i = 0; i < n; i++) {
        SweepRow *r = &sum->rows[i];
        const char *dir = sw->members[i].dir;
        char why[3200] = "", one[1100] = "", p[CFG_PATH_MAX + 32];
        r->member = i;
        r->structure = -1;
        Status ls;
        if (read_log(dir, &r->log, &ls)) add_problem(why, sizeof why, ls.msg);
        r->active = r->log.active;
        long epochs = sweep_member_config(sw, i, c, st) ? 0 : c->epochs;
        snprintf(p, sizeof p, "%s/equations.json", dir);
        int eq = fs_exists(p);
        if (eq) {
            long act = 0;
            keys[i] = structure_of(p, &act, one, sizeof one);
            if (keys[i]) r->active = act;
            else add_problem(why, sizeof why, one);
        }
        r->status = eq && r->log.epoch >= epochs ? "finished" : fs_exists(dir) ? "incomplete" : "not started";
        r->equations = equations_line(dir);
        one[0] = 0;
        r->error = forecast_error(dir, one, sizeof one);
        if (one[0]) add_problem(why, sizeof why, one);
        if (isfinite(r->error)) {
            r->error_from = ERR_FORECAST;
            have_forecast = 1;
        } else if (isfinite(r->log.validation)) {
            r->error = r->log.validation;
            r->error_from = ERR_VALIDATION;
        } else {
            r->error = NAN;
            r->error_from = ERR_NONE;
        }
        if (why[0]) r->problem = xstrdup(why);
    }
    free(c);
    /* rank: forecast errors first, then validation losses, then members without either */
    qsort(sum->rows, (size_t)n, sizeof *sum->rows, row_cmp);
    /* Pareto front of (error, active terms) among the finished members ranked by the best source */
    sum->pareto_from = have_forecast ? ERR_FORECAST : ERR_VALIDATION;
    for (int a = 0; a < n; a++) {
        SweepRow *r = &sum->rows[a];
        if (r->error_from != sum->pareto_from || r->active < 0 || strcmp(r->status, "finished")) continue;
        int dominated = 0;
        for (int b = 0; b < n && !dominated; b++) {
            const SweepRow *q = &sum->rows[b];
            if (b == a || q->error_from != sum->pareto_from || q->active < 0 || strcmp(q->status, "finished")) continue;
            if (q->error <= r->error && q->active <= r->active && (q->error < r->error || q->active < r->active))
                dominated = 1;
        }
        r->pareto = !dominated;
    }
    /* group equal structures; groups by size, then by their best rank */
    sum->groups = calloc((size_t)(n ? n : 1), sizeof *sum->groups);
    if (!sum->groups) {
        for (int i = 0; i < n; i++) free(keys[i]);
        free(keys);
        return status_set(st, ST_RUNTIME, "out of memory");
    }
    for (int a = 0; a < n; a++) {
        char *k = keys[sum->rows[a].member];
        if (!k) continue;
        int g = 0;
        while (g < sum->n_groups && strcmp(sum->groups[g].key, k)) g++;
        if (g == sum->n_groups) {
            sum->groups[g].key = k;
            sum->groups[g].best = a;
            sum->n_groups++;
            keys[sum->rows[a].member] = NULL;
        }
        sum->groups[g].count++;
        sum->rows[a].structure = g;
    }
    for (int i = 0; i < n; i++) free(keys[i]);
    free(keys);
    /* stable sort of the few groups by count (insertion), then renumber the rows */
    int *order = malloc(sizeof(int) * (size_t)(sum->n_groups ? sum->n_groups : 1));
    int *where = malloc(sizeof(int) * (size_t)(sum->n_groups ? sum->n_groups : 1));
    SweepGroup *sorted = malloc(sizeof(SweepGroup) * (size_t)(sum->n_groups ? sum->n_groups : 1));
    if (!order || !where || !sorted) {
        free(order), free(where), free(sorted);
        return status_set(st, ST_RUNTIME, "out of memory");
    }
    for (int g = 0; g < sum->n_groups; g++) order[g] = g;
    for (int g = 1; g < sum->n_groups; g++) {
        int v = order[g], h = g;
        while (h > 0 && (sum->groups[order[h - 1]].count < sum->groups[v].count ||
                         (sum->groups[order[h - 1]].count == sum->groups[v].count &&
                          sum->groups[order[h - 1]].best > sum->groups[v].best))) {
            order[h] = order[h - 1];
            h--;
        }
        order[h] = v;
    }
    for (int g = 0; g < sum->n_groups; g++) sorted[g] = sum->groups[order[g]], where[order[g]] = g;
    memcpy(sum->groups, sorted, sizeof(SweepGroup) * (size_t)sum->n_groups);
    for (int a = 0; a < n; a++)
        if (sum->rows[a].structure >= 0) sum->rows[a].structure = where[sum->rows[a].structure];
    free(order), free(where), free(sorted);
    status_ok(st);
    return 0;
}

static void csv_field(Buf *b, const char *s) {
    if (!s) s = "";
    if (!strpbrk(s, ",\"\r\n")) { buf_puts(b, s); return; }
    buf_puts(b, "\"");
    for (; *s; s++) buf_add(b, *s == '"' ? "\"\"" : s, *s == '"' ? 2 : 1);
    buf_puts(b, "\"");
}

static void num(char *out, size_t n, double v) {
    if (isfinite(v)) snprintf(out, n, "%.6g", v);
    else out[0] = 0;
}

static const char *err_from_name(SweepErrorFrom e) {
    return e == ERR_FORECAST ? "forecast" : e == ERR_VALIDATION ? "validation" : "";
}

char *sweep_summary_csv(const Sweep *sw, const SweepSummary *sum) {
    Buf b = {0};
    buf_puts(&b, "rank,id,status");
    for (int a = 0; a < sw->n_axes; a++) {
        buf_puts(&b, ",");
        csv_field(&b, sw->axes[a].key);
    }
    if (sw->seeds_vary) buf_puts(&b, ",train.seed");
    buf_puts(&b, ",epochs,loss,reconstruction,dx,dz,validation,forecast_error,ranked_by,active_terms,pareto,"
                 "structure,same_structure,equations,folder,problem\n");
    for (int k = 0; k < sum->n_rows; k++) {
        const SweepRow *r = &sum->rows[k];
        const SweepMember *m = &sw->members[r->member];
        char v[1024];
        buf_printf(&b, "%d,%s,%s", k + 1, m->id, r->status);
        for (int a = 0; a < sw->n_axes; a++) {
            sweep_member_value(sw, r->member, a, v, sizeof v);
            buf_puts(&b, ",");
            csv_field(&b, v);
        }
        if (sw->seeds_vary) buf_printf(&b, ",%llu", (unsigned long long)m->seed);
        char l[32], rc[32], dx[32], dz[32], va[32], fe[32];
        num(l, sizeof l, r->log.loss), num(rc, sizeof rc, r->log.reconstruction), num(dx, sizeof dx, r->log.dx);
        num(dz, sizeof dz, r->log.dz), num(va, sizeof va, r->log.validation);
        num(fe, sizeof fe, r->error_from == ERR_FORECAST ? r->error : NAN);
        buf_printf(&b, ",%ld,%s,%s,%s,%s,%s,%s,%s,", r->log.epoch, l, rc, dx, dz, va, fe, err_from_name(r->error_from));
        if (r->active >= 0) buf_printf(&b, "%ld", r->active);
        buf_printf(&b, ",%s,", r->pareto ? "yes" : "");
        if (r->structure >= 0) buf_printf(&b, "S%d,%d", r->structure + 1, sum->groups[r->structure].count);
        else buf_puts(&b, ",");
        buf_puts(&b, ",");
        csv_field(&b, r->equations);
        buf_puts(&b, ",");
        csv_field(&b, m->dir);
        buf_puts(&b, ",");
        csv_field(&b, r->problem);
        buf_puts(&b, "\n");
    }
    return buf_take(&b);
}

static void html_text(Buf *b, const char *s) {
    for (; s && *s; s++) {
        switch (*s) {
        case '<': buf_puts(b, "&lt;"); break;
        case '>': buf_puts(b, "&gt;"); break;
        case '&': buf_puts(b, "&amp;"); break;
        case '"': buf_puts(b, "&quot;"); break;
        default: buf_add(b, s, 1);
        }
    }
}

char *sweep_summary_html(const Sweep *sw, const SweepSummary *sum) {
    Buf b = {0};
    int fin = 0, inc = 0, none = 0, by_val = 0;
    for (int k = 0; k < sum->n_rows; k++) {
        const SweepRow *r = &sum->rows[k];
        if (!strcmp(r->status, "finished")) fin++;
        else if (!strcmp(r->status, "incomplete")) inc++;
        else none++;
        if (r->error_from == ERR_VALIDATION) by_val++;
    }
    buf_puts(&b, "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>framelaw sweep ");
    html_text(&b, sw->stem);
    buf_puts(&b, "</title>\n<style>\n"
                 "body{font-family:system-ui,sans-serif;margin:2em;color:#222}\n"
                 "table{border-collapse:collapse;font-size:13px;margin:1em 0}\n"
                 "th,td{border:1px solid #ccc;padding:3px 7px;text-align:left;vertical-align:top}\n"
                 "th{background:#f0f0f0}\ntd.n{text-align:right;font-variant-numeric:tabular-nums}\n"
                 "tr.front td{background:#eef6ee}\ntd.eq{font-family:monospace;white-space:pre-wrap}\n"
                 ".muted{color:#888}\n</style>\n</head>\n<body>\n<h1>Sweep ");
    html_text(&b, sw->stem);
    buf_puts(&b, "</h1>\n<p>");
    buf_printf(&b, "%d members: %d finished, %d incomplete, %d not started. Sweep file: <code>", sum->n_rows, fin, inc, none);
    html_text(&b, sw->path);
    buf_puts(&b, "</code>; folder: <code>");
    html_text(&b, sw->output);
    buf_puts(&b, "</code>.</p>\n<p>Ranked by the forecast error on the held-out recordings (the mean over recordings of "
                 "<code>mean_error</code> in <code>forecast.json</code>); a member without forecasts is ranked after them "
                 "by its last validation loss, marked <b>(v)</b>. &#9670; marks the Pareto front of error against "
                 "active terms among the finished members ranked by ");
    buf_puts(&b, sum->pareto_from == ERR_FORECAST ? "forecast error" : "validation loss");
    buf_puts(&b, ": no other member has both a lower or equal error and fewer or as many terms.</p>\n<table>\n<tr><th>rank</th><th>member</th><th>status</th>");
    for (int a = 0; a < sw->n_axes; a++) {
        buf_puts(&b, "<th>");
        html_text(&b, sw->axes[a].key);
        buf_puts(&b, "</th>");
    }
    if (sw->seeds_vary) buf_puts(&b, "<th>train.seed</th>");
    buf_puts(&b, "<th>epochs</th><th>loss</th><th>validation</th><th>error</th><th>terms</th><th>front</th>"
                 "<th>structure</th><th>equations</th></tr>\n");
    for (int k = 0; k < sum->n_rows; k++) {
        const SweepRow *r = &sum->rows[k];
        const SweepMember *m = &sw->members[r->member];
        char v[1024], l[32], va[32], er[32];
        buf_printf(&b, "<tr%s><td class=\"n\">%d</td><td>%s</td><td>%s</td>", r->pareto ? " class=\"front\"" : "", k + 1,
                   m->id, r->status);
        for (int a = 0; a < sw->n_axes; a++) {
            sweep_member_value(sw, r->member, a, v, sizeof v);
            buf_puts(&b, "<td>");
            html_text(&b, v);
            buf_puts(&b, "</td>");
        }
        if (sw->seeds_vary) buf_printf(&b, "<td class=\"n\">%llu</td>", (unsigned long long)m->seed);
        num(l, sizeof l, r->log.loss), num(va, sizeof va, r->log.validation), num(er, sizeof er, r->error);
        buf_printf(&b, "<td class=\"n\">%ld</td><td class=\"n\">%s</td><td class=\"n\">%s</td><td class=\"n\">%s%s</td>",
                   r->log.epoch, l, va, er, r->error_from == ERR_VALIDATION ? " (v)" : "");
        if (r->active >= 0) buf_printf(&b, "<td class=\"n\">%ld</td>", r->active);
        else buf_puts(&b, "<td></td>");
        buf_printf(&b, "<td>%s</td>", r->pareto ? "&#9670;" : "");
        if (r->structure >= 0) buf_printf(&b, "<td>S%d (%d)</td>", r->structure + 1, sum->groups[r->structure].count);
        else buf_puts(&b, "<td></td>");
        buf_puts(&b, "<td class=\"eq\">");
        if (r->equations) {
            for (const char *s = r->equations; *s; s++) {
                if (s[0] == ';' && s[1] == ' ') { buf_puts(&b, "\n"); s++; }
                else html_text(&b, (char[]){*s, 0});
            }
        }
        if (r->problem) {
            buf_puts(&b, "<span class=\"muted\">");
            html_text(&b, r->problem);
            buf_puts(&b, "</span>");
        }
        buf_puts(&b, "</td></tr>\n");
    }
    buf_puts(&b, "</table>\n<h2>Model structures</h2>\n");
    if (!sum->n_groups) {
        buf_puts(&b, "<p class=\"muted\">No member has written its equations yet.</p>\n");
    } else {
        buf_puts(&b, "<p>Members whose models have the same active terms in every equation (the coefficients may "
                     "differ). Latent variables are compared by their numbers: a model with z1 and z2 swapped counts "
                     "as another structure.</p>\n<table>\n<tr><th>structure</th><th>members</th><th>best member</th>"
                     "<th>active terms per equation</th><th>all members</th></tr>\n");
        for (int g = 0; g < sum->n_groups; g++) {
            const SweepGroup *gr = &sum->groups[g];
            buf_printf(&b, "<tr><td>S%d</td><td class=\"n\">%d</td><td>%s</td><td class=\"eq\">", g + 1, gr->count,
                       sw->members[sum->rows[gr->best].member].id);
            for (const char *s = gr->key; *s; s++) {
                if (s[0] == ' ' && s[1] == '|' && s[2] == ' ') { buf_puts(&b, "\n"); s += 2; }
                else html_text(&b, (char[]){*s, 0});
            }
            buf_puts(&b, "</td><td>");
            int first = 1;
            for (int k = 0; k < sum->n_rows; k++)
                if (sum->rows[k].structure == g) {
                    buf_printf(&b, "%s%s", first ? "" : ", ", sw->members[sum->rows[k].member].id);
                    first = 0;
                }
            buf_puts(&b, "</td></tr>\n");
        }
        buf_puts(&b, "</table>\n");
    }
    if (by_val) buf_printf(&b, "<p class=\"muted\">(v): %d member(s) ranked by the validation loss (no forecast.json).</p>\n", by_val);
    buf_puts(&b, "</body>\n</html>\n");
    return buf_take(&b);
}

int sweep_write_summary(const Sweep *sw, SweepSummary *sum_in, Status *st) {
    SweepSummary own;
    SweepSummary *sum = sum_in ? sum_in : &own;
    int fd = -1;
    int rc = fs_make_dirs(sw->output, st);
    if (!rc) rc = lock_take(sw->output, ".summary.lock", &fd, st);
    if (!rc) rc = sweep_summary(sw, sum, st);
    if (rc) { lock_release(fd); return rc; }
    char *csv = sweep_summary_csv(sw, sum), *html = sweep_summary_html(sw, sum);
    char p[CFG_PATH_MAX + 32];
    if (!csv || !html) rc = status_set(st, ST_RUNTIME, "out of memory");
    if (!rc) {
        snprintf(p, sizeof p, "%s/summary.csv", sw->output);
        rc = atomic_write_bytes(p, csv, strlen(csv), st);
    }
    if (!rc) {
        snprintf(p, sizeof p, "%s/summary.html", sw->output);
        rc = atomic_write_bytes(p, html, strlen(html), st);
    }
    free(csv);
    free(html);
    lock_release(fd);
    if (!sum_in) sweep_summary_free(&own);
    return rc;
}
