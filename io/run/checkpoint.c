/* io/run/checkpoint.c: the checkpoint file (format in checkpoint.h). */
#include "io/run/checkpoint.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

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

/* A section's header: its tag, a reserved word, the bytes that follow. */
static void section_head(Buf *b, const char tag[4], uint64_t n) {
    buf_put(b, tag, 4);
    put_u32(b, 0);
    put_u64(b, n);
}

static void section(Buf *b, const char tag[4], const void *p, uint64_t n) {
    section_head(b, tag, n);
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
               const long *order, long n_order, Status *st) {
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
    section_head(&b, "ORDR", (uint64_t)n_order * 8);   /* the sample order as 64-bit integers */
    for (long i = 0; i < n_order; i++) put_u64(&b, (uint64_t)(int64_t)order[i]);
    put_u32(&b, fs_crc32(0, b.d, b.n));
    int rc = atomic_write_bytes(path, b.d, b.n, st);
    nn_free(b.d);
    return rc;
}

typedef struct {
    const uint8_t *p;
    uint64_t n;
} Sec;

/* ---- reading ---------------------------------------------------------------------------------
 * A checkpoint is trusted only when every value in it is one the writer can have written for this
 * run: a CRC guards against accidents, not against a file from another build, a writer's bug or a
 * hand edit. Each check names the file, the section and the value (docs/formats.md lists them). */

static const char TAGS[7][5] = {"META", "VIEW", "PVAL", "ADM1", "ADM2", "MASK", "ORDR"};
enum { S_META, S_VIEW, S_PVAL, S_ADM1, S_ADM2, S_MASK, S_ORDR, N_SECTIONS };

/* A 4-byte tag from the file as text, bytes outside printable ASCII as \xNN. */
static const char *tag_text(const uint8_t *t, char out[17]) {
    size_t k = 0;
    for (int i = 0; i < 4; i++) {
        if (t[i] >= 0x20 && t[i] < 0x7f && t[i] != '\\') out[k++] = (char)t[i];
        else k += (size_t)snprintf(out + k, 17 - k, "\\x%02x", t[i]);
    }
    out[k] = 0;
    return out;
}

/* Every float finite (and >= 0 when nonneg); else the index of the first that is not. */
static long first_bad_float(const uint8_t *p, size_t n, int nonneg) {
    for (size_t i = 0; i < n; i++) {
        float f;
        memcpy(&f, p + 4 * i, 4);
        if (!isfinite(f) || (nonneg && f < 0)) return (long)i;
    }
    return -1;
}

size_t ckpt_size(const ParamSet *ps, long n_mask, long n_order) {
    return 16 + N_SECTIONS * 16 + sizeof(MetaDisk) + (size_t)ps->n_views * sizeof(ParamView) + 3 * ps->n * sizeof(float) +
           (size_t)n_mask + (size_t)n_order * 8 + 4;
}

/* The META values against the run (n_order samples in batches of `batch`). */
static int check_meta(const char *path, const MetaDisk *md, long n_order, long batch, Status *st) {
#define BAD(...) status_set(st, ST_INPUT, __VA_ARGS__)
    const char *h = "checkpoint section META:";
    long long nb = n_order > 0 ? (n_order + batch - 1) / batch : 1; /* batches per epoch */
    if (md->batch < 0 || md->batch > nb) /* nb: the epoch's steps done, its end-of-epoch passes pending */
        return BAD("%s: %s batch position %lld is outside the epoch's %lld batches (0..%lld; %lld: the end-of-epoch "
                   "passes pending)", path, h, (long long)md->batch, nb, nb, nb);
    if (md->epoch < 0 || md->epoch > (INT64_MAX - md->batch) / nb)
        return BAD("%s: %s epoch %lld is not a number of epochs done", path, h, (long long)md->epoch);
    int64_t steps = md->epoch * nb + md->batch; /* batches done since the start */
    if (steps < 1)
        return BAD("%s: %s epoch 0 batch 0: no training step done, so no checkpoint can have been written", path, h);
    if (md->adam_step < 1 || md->adam_step > steps)
        return BAD("%s: %s Adam step count %lld is outside 1..%lld, the batches done by epoch %lld batch %lld", path,
                   h, (long long)md->adam_step, (long long)steps, (long long)md->epoch, (long long)md->batch);
    if (!(md->rng[0] | md->rng[1] | md->rng[2] | md->rng[3]))
        return BAD("%s: %s the random generator's state is all zero (xoshiro256** never reaches it)", path, h);
    for (int i = 0; i < 5; i++)
        if (!isfinite(md->acc[i]))
            return BAD("%s: %s partial loss sum %d is %g, not finite", path, h, i, md->acc[i]);
    if (md->acc_n < 0 || md->acc_n > n_order)
        return BAD("%s: %s %lld samples in the partial sums, outside 0..%ld", path, h, (long long)md->acc_n, n_order);
    if (md->batch > 0) {
        int64_t want = md->batch * batch < n_order ? md->batch * batch : n_order;
        if (md->acc_n != want)
            return BAD("%s: %s %lld samples in the partial sums after %lld batches of %ld, expected %lld", path, h,
                       (long long)md->acc_n, (long long)md->batch, batch, (long long)want);
    }
    if (isinf(md->best_val) && md->best_val > 0) {
        if (md->best_epoch != -1)
            return BAD("%s: %s best epoch %lld without a best validation loss (expected -1)", path, h,
                       (long long)md->best_epoch);
    } else if (!isfinite(md->best_val) || md->best_val < 0) {
        return BAD("%s: %s best validation loss %g is not a loss (finite, >= 0, or inf when none)", path, h,
                   md->best_val);
    } else if (md->best_epoch < 1 || md->best_epoch > md->epoch) {
        return BAD("%s: %s best epoch %lld is outside 1..%lld, the epochs done", path, h, (long long)md->best_epoch,
                   (long long)md->epoch);
    }
    if (md->n_thresholds < 0 || md->n_thresholds > md->epoch)
        return BAD("%s: %s %lld thresholding passes, outside 0..%lld (at most one an epoch)", path, h,
                   (long long)md->n_thresholds, (long long)md->epoch);
    if (!isfinite(md->seconds) || md->seconds < 0)
        return BAD("%s: %s training time %g s is not a duration", path, h, md->seconds);
    return 0;
#undef BAD
}

int ckpt_read(const char *path, CkptMeta *m, ParamSet *ps, uint8_t *mask, long n_mask, long *order,
              long n_order, long batch, Status *st) {
    NN_CHECK(n_mask >= 0 && n_order >= 0 && batch >= 1, "ckpt_read: n_mask %ld, n_order %ld, batch %ld", n_mask,
             n_order, batch);
    const size_t want = ckpt_size(ps, n_mask, n_order);
    struct stat sb;
    if (stat(path, &sb) == 0 && S_ISREG(sb.st_mode) && (unsigned long long)sb.st_size > want)
        return status_set(st, ST_INPUT,
                          "%s: checkpoint of %lld bytes, this model and data have %zu-byte checkpoints "
                          "(written for another model or data)", path, (long long)sb.st_size, want);
    char *text;
    size_t size;
    if (fs_read_file(path, want, &text, &size, st)) return st->code;
    const uint8_t *d = (const uint8_t *)text;
    int rc = ST_INPUT;
    Sec sec[N_SECTIONS];
    MetaDisk md;
    uint8_t *seen = NULL;
    char tag[17];
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
    if (size != want) {
        status_set(st, ST_INPUT, "%s: checkpoint of %zu bytes, this model and data have %zu-byte checkpoints "
                   "(truncated, or written for another model or data)", path, size, want);
        goto done;
    }
    crc = le_get_u32(d + size - 4);
#ifndef FRAMELAW_FUZZ /* the fuzz build skips the CRC so that mutated files reach the checks below */
    if (crc != fs_crc32(0, d, size - 4)) {
        status_set(st, ST_INPUT, "%s: checkpoint is corrupt (CRC mismatch: truncated or damaged)", path);
        goto done;
    }
#else
    (void)crc;
#endif
    /* the sections: the seven tags in order, each header's reserved word 0, tiling the file exactly */
    if (le_get_u32(d + 12) != N_SECTIONS) {
        status_set(st, ST_INPUT, "%s: checkpoint has %u sections, version %d has %d", path, le_get_u32(d + 12),
                   CKPT_VERSION, N_SECTIONS);
        goto done;
    }
    {
        size_t off = 16, end = size - 4;
        for (int i = 0; i < N_SECTIONS; i++) {
            if (end - off < 16) {
                status_set(st, ST_INPUT, "%s: checkpoint ends inside the header of section %s", path, TAGS[i]);
                goto done;
            }
            if (memcmp(d + off, TAGS[i], 4)) {
                status_set(st, ST_INPUT, "%s: checkpoint section %d is '%s', expected %s", path, i + 1,
                           tag_text(d + off, tag), TAGS[i]);
                goto done;
            }
            uint64_t len = le_get_u64(d + off + 8);
            if (le_get_u32(d + off + 4) != 0 || len > end - off - 16) {
                status_set(st, ST_INPUT, "%s: checkpoint section %s: bad header (reserved word %u, length %llu of "
                           "%zu bytes left)", path, TAGS[i], le_get_u32(d + off + 4), (unsigned long long)len,
                           end - off - 16);
                goto done;
            }
            sec[i].p = d + off + 16;
            sec[i].n = len;
            off += 16 + len;
        }
        if (off != end) {
            status_set(st, ST_INPUT, "%s: checkpoint has %zu bytes after its last section", path, end - off);
            goto done;
        }
    }
    if (sec[S_META].n != sizeof md) {
        status_set(st, ST_INPUT, "%s: checkpoint section META: %llu bytes, version %d has %zu", path,
                   (unsigned long long)sec[S_META].n, CKPT_VERSION, sizeof md);
        goto done;
    }
    memcpy(&md, sec[S_META].p, sizeof md);
    if (md.n_params != ps->n || md.n_views != (uint64_t)ps->n_views ||
        sec[S_VIEW].n != md.n_views * sizeof(ParamView) || sec[S_PVAL].n != ps->n * sizeof(float) ||
        sec[S_ADM1].n != sec[S_PVAL].n || sec[S_ADM2].n != sec[S_PVAL].n || md.n_mask != (uint64_t)n_mask ||
        sec[S_MASK].n != (uint64_t)n_mask || md.n_order != (uint64_t)n_order ||
        sec[S_ORDR].n != (uint64_t)n_order * 8) {
        status_set(st, ST_INPUT, "%s: checkpoint does not fit this model (parameter or data sizes differ)", path);
        goto done;
    }
    if (check_meta(path, &md, n_order, batch, st)) goto done;
    for (int i = 0; i < ps->n_views; i++) {
        ParamView v;
        memcpy(&v, sec[S_VIEW].p + (size_t)i * sizeof v, sizeof v);
        const ParamView *w = &ps->views[i];
        if (strncmp(v.name, w->name, PARAM_NAME_MAX) || v.rows != w->rows || v.cols != w->cols || v.off != w->off) {
            char name[4 * PARAM_NAME_MAX + 1];
            size_t k = 0;
            for (int j = 0; j < PARAM_NAME_MAX && v.name[j]; j++) {
                unsigned char c = (unsigned char)v.name[j];
                if (c >= 0x20 && c < 0x7f && c != '\\') name[k++] = (char)c;
                else k += (size_t)snprintf(name + k, sizeof name - k, "\\x%02x", c);
            }
            name[k] = 0;
            status_set(st, ST_INPUT, "%s: checkpoint section VIEW: tensor %d is %s (%d,%d), the model has %s (%d,%d)",
                       path, i, name, v.rows, v.cols, w->name, w->rows, w->cols);
            goto done;
        }
    }
    static const char *const what[3] = {"parameter value", "Adam first moment", "Adam second moment"};
    for (int s = S_PVAL; s <= S_ADM2; s++) {
        long bad = first_bad_float(sec[s].p, ps->n, s == S_ADM2);
        if (bad >= 0) {
            float f;
            memcpy(&f, sec[s].p + 4 * bad, 4);
            status_set(st, ST_INPUT, "%s: checkpoint section %s: %s %ld is %g, not %s", path, TAGS[s],
                       what[s - S_PVAL], bad, (double)f, s == S_ADM2 ? "finite and >= 0" : "finite");
            goto done;
        }
    }
    for (long i = 0; i < n_mask; i++)
        if (sec[S_MASK].p[i] > 1) {
            status_set(st, ST_INPUT, "%s: checkpoint section MASK: byte %ld is %u, not 0 or 1", path, i,
                       sec[S_MASK].p[i]);
            goto done;
        }
    /* ORDR: a permutation of the training samples 0..n_order-1 */
    seen = calloc((size_t)(n_order > 0 ? n_order : 1), 1);
    if (!seen) {
        rc = status_set(st, ST_RUNTIME, "%s: out of memory checking the sample order", path);
        goto done;
    }
    for (long i = 0; i < n_order; i++) {
        int64_t k = (int64_t)le_get_u64(sec[S_ORDR].p + 8 * i);
        if (k < 0 || k >= n_order) {
            status_set(st, ST_INPUT, "%s: checkpoint section ORDR: entry %ld is %lld, not a training sample "
                       "(0..%ld)", path, i, (long long)k, n_order - 1);
            goto done;
        }
        if (seen[k]) {
            status_set(st, ST_INPUT, "%s: checkpoint section ORDR: sample %lld appears twice (entry %ld): not a "
                       "permutation of the training samples", path, (long long)k, i);
            goto done;
        }
        seen[k] = 1;
    }
    /* everything checks out: only now is anything modified */
    memcpy(ps->val, sec[S_PVAL].p, sec[S_PVAL].n);
    memcpy(ps->m, sec[S_ADM1].p, sec[S_ADM1].n);
    memcpy(ps->v, sec[S_ADM2].p, sec[S_ADM2].n);
    ps->step = md.adam_step;
    if (n_mask) memcpy(mask, sec[S_MASK].p, sec[S_MASK].n);
    for (long i = 0; i < n_order; i++) order[i] = (long)(int64_t)le_get_u64(sec[S_ORDR].p + 8 * i);
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
    free(seen);
    free(text);
    return rc;
}
