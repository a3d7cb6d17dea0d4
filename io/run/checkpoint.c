/* io/run/checkpoint.c: the checkpoint file (format in checkpoint.h). */
#include "io/run/checkpoint.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/fs/atomic_file.h"
#include "io/fs/bytes.h"
#include "io/fs/files.h"
#include "io/fs/hash.h"

static const char MAGIC[8] = {'F', 'L', 'A', 'W', 'C', 'K', 'P', 'T'};

_Static_assert(sizeof(float) == 4 && sizeof(double) == 8, "IEEE 754 binary32 / binary64 expected");

static int host_is_little_endian(void) {
    const uint16_t one = 1;
    return *(const uint8_t *)&one == 1;
}

/* ---- a growable byte buffer ------------------------------------------------------------------ */

typedef struct {
    uint8_t *d;
    size_t n, cap;
} Buf;

static void buf_put(Buf *b, const void *p, size_t n) {
    if (b->n + n > b->cap) {
        size_t cap = b->cap ? b->cap : 4096;
        while (cap < b->n + n) cap *= 2;
        uint8_t *d = nn_alloc(cap);
        if (b->n) memcpy(d, b->d, b->n);
        nn_free(b->d);
        b->d = d;
        b->cap = cap;
    }
    memcpy(b->d + b->n, p, n);
    b->n += n;
}

static void put_u32(Buf *b, uint32_t v) {
    unsigned char x[4];
    le_put_u32(x, v);
    buf_put(b, x, 4);
}
static void put_u64(Buf *b, uint64_t v) {
    unsigned char x[8];
    le_put_u64(x, v);
    buf_put(b, x, 8);
}

static void section(Buf *b, const char tag[4], const void *p, uint64_t n) {
    buf_put(b, tag, 4);
    put_u32(b, 0);
    put_u64(b, n);
    if (n) buf_put(b, p, n);
}

/* META payload: the CkptMeta fields in a fixed order. */
typedef struct {
    uint64_t digest;
    int64_t epoch, batch;
    uint64_t rng[4];
    double acc[5];
    int64_t acc_n;
    double best_val;
    int64_t best_epoch, n_thresholds;
    double seconds;
    int64_t adam_step;
    uint64_t n_params, n_mask, n_order, n_views;
} MetaDisk;

int ckpt_write(const char *path, const CkptMeta *m, const ParamSet *ps, const uint8_t *mask, long n_mask,
               const int64_t *order, long n_order, Status *st) {
    if (!host_is_little_endian()) return status_set(st, ST_RUNTIME, "%s: checkpoints need a little-endian host", path);
    MetaDisk md;
    memset(&md, 0, sizeof md);
    md.digest = m->config_digest;
    md.epoch = m->epoch;
    md.batch = m->batch;
    memcpy(md.rng, m->rng.s, sizeof md.rng);
    memcpy(md.acc, m->acc, sizeof md.acc);
    md.acc_n = m->acc_n;
    md.best_val = m->best_val;
    md.best_epoch = m->best_epoch;
    md.n_thresholds = m->n_thresholds;
    md.seconds = m->seconds;
    md.adam_step = ps->step;
    md.n_params = ps->n;
    md.n_mask = (uint64_t)n_mask;
    md.n_order = (uint64_t)n_order;
    md.n_views = (uint64_t)ps->n_views;
    Buf b = {0};
    buf_put(&b, MAGIC, 8);
    put_u32(&b, CKPT_VERSION);
    put_u32(&b, 7);
    section(&b, "META", &md, sizeof md);
    section(&b, "VIEW", ps->views, (uint64_t)ps->n_views * sizeof(ParamView));
    section(&b, "PVAL", ps->val, ps->n * sizeof(float));
    section(&b, "ADM1", ps->m, ps->n * sizeof(float));
    section(&b, "ADM2", ps->v, ps->n * sizeof(float));
    section(&b, "MASK", mask, (uint64_t)n_mask);
    section(&b, "ORDR", order, (uint64_t)n_order * sizeof(int64_t));
    put_u32(&b, fs_crc32(0, b.d, b.n));
    int rc = atomic_write_bytes(path, b.d, b.n, st);
    nn_free(b.d);
    return rc;
}

/* ---- reading --------------------------------------------------------------------------------- */

typedef struct {
    const uint8_t *p;
    uint64_t n;
} Sec;

static int find_section(const uint8_t *d, size_t size, const char tag[4], Sec *out) {
    size_t off = 16;
    size_t end = size - 4;
    while (off + 16 <= end) {
        uint64_t len = le_get_u64(d + off + 8);
        if (len > end - off - 16) return -1;
        if (!memcmp(d + off, tag, 4)) {
            out->p = d + off + 16;
            out->n = len;
            return 0;
        }
        off += 16 + len;
    }
    return -1;
}

int ckpt_read(const char *path, CkptMeta *m, ParamSet *ps, uint8_t *mask, long n_mask, int64_t *order,
              long n_order, Status *st) {
    char *text;
    size_t size;
    if (fs_read_file(path, SIZE_MAX, &text, &size, st)) return st->code;
    const uint8_t *d = (const uint8_t *)text;
    int rc = ST_INPUT;
    Sec meta, view, pval, adm1, adm2, msk, ord;
    MetaDisk md;
    uint32_t version, crc;
    if (size < 16 + 4 || memcmp(d, MAGIC, 8)) {
        status_set(st, ST_INPUT, "%s: not a framelaw checkpoint (bad magic or too short)", path);
        goto done;
    }
    version = le_get_u32(d + 8);
    if (version != CKPT_VERSION) {
        status_set(st, ST_INPUT, "%s: checkpoint format version %u, this framelaw reads version %d", path, version,
                   CKPT_VERSION);
        goto done;
    }
    crc = le_get_u32(d + size - 4);
    if (crc != fs_crc32(0, d, size - 4)) {
        status_set(st, ST_INPUT, "%s: checkpoint is corrupt (CRC mismatch: truncated or damaged)", path);
        goto done;
    }
    if (find_section(d, size, "META", &meta) || meta.n != sizeof md || find_section(d, size, "VIEW", &view) ||
        find_section(d, size, "PVAL", &pval) || find_section(d, size, "ADM1", &adm1) ||
        find_section(d, size, "ADM2", &adm2) || find_section(d, size, "MASK", &msk) ||
        find_section(d, size, "ORDR", &ord)) {
        status_set(st, ST_INPUT, "%s: checkpoint is missing a section", path);
        goto done;
    }
    memcpy(&md, meta.p, sizeof md);
    if (md.n_params != ps->n || md.n_views != (uint64_t)ps->n_views || view.n != md.n_views * sizeof(ParamView) ||
        pval.n != ps->n * sizeof(float) || adm1.n != pval.n || adm2.n != pval.n || md.n_mask != (uint64_t)n_mask ||
        msk.n != (uint64_t)n_mask || md.n_order != (uint64_t)n_order || ord.n != (uint64_t)n_order * 8) {
        status_set(st, ST_INPUT, "%s: checkpoint does not fit this model (parameter or data sizes differ)", path);
        goto done;
    }
    for (int i = 0; i < ps->n_views; i++) {
        ParamView v;
        memcpy(&v, view.p + (size_t)i * sizeof v, sizeof v);
        const ParamView *w = &ps->views[i];
        if (strncmp(v.name, w->name, PARAM_NAME_MAX) || v.rows != w->rows || v.cols != w->cols || v.off != w->off) {
            status_set(st, ST_INPUT, "%s: checkpoint tensor %d is %.32s (%d,%d), the model has %s (%d,%d)", path, i,
                       v.name, v.rows, v.cols, w->name, w->rows, w->cols);
            goto done;
        }
    }
    memcpy(ps->val, pval.p, pval.n);
    memcpy(ps->m, adm1.p, adm1.n);
    memcpy(ps->v, adm2.p, adm2.n);
    ps->step = md.adam_step;
    if (n_mask) memcpy(mask, msk.p, msk.n);
    if (n_order) memcpy(order, ord.p, ord.n);
    m->config_digest = md.digest;
    m->epoch = md.epoch;
    m->batch = md.batch;
    memcpy(m->rng.s, md.rng, sizeof md.rng);
    memcpy(m->acc, md.acc, sizeof md.acc);
    m->acc_n = md.acc_n;
    m->best_val = md.best_val;
    m->best_epoch = md.best_epoch;
    m->n_thresholds = md.n_thresholds;
    m->seconds = md.seconds;
    rc = 0;
    status_ok(st);
done:
    free(text);
    return rc;
}
