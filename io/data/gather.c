/* io/data/gather.c: split, valid samples, scaling and the batch gather (see gather.h). */
#include "io/data/gather.h"

#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "nn/core.h"
#include "nn/par.h"

void dataset_free(Dataset *ds) {
    free(ds->gain);
    free(ds->offset);
    free(ds->rec_split);
    for (int s = 0; s < SPLIT_COUNT; s++) free(ds->samples[s]);
    memset(ds, 0, sizeof *ds);
}

static double unit_gain(StoreElem e) { return e == STORE_U8 ? 1.0 / 255.0 : e == STORE_U16 ? 1.0 / 65535.0 : 1.0; }

static double load_value(const void *frame, StoreElem e, long p) {
    switch (e) {
    case STORE_U8: return ((const uint8_t *)frame)[p];
    case STORE_U16: return ((const uint16_t *)frame)[p];
    default: return ((const float *)frame)[p];
    }
}

/* Length of "NAME" when rec is "NAME-part<digits>", a piece of a recording split at gaps in its
 * numbering (frames_split_gaps in io/data/frames.c), else 0. */
static size_t piece_base(const char *rec) {
    const char *e = rec + strlen(rec), *p = e;
    while (p > rec && p[-1] >= '0' && p[-1] <= '9') p--;
    if (p == e || (size_t)(p - rec) < 6 || strncmp(p - 5, "-part", 5)) return 0;
    return (size_t)(p - 5 - rec);
}

/* Assign recordings to splits. A name held out holds out the pieces of a recording split at gaps. */
static int split_recordings(Dataset *ds, const FrameStore *fs, const FrameSettings *s, Status *st) {
    for (int r = 0; r < fs->n_rec; r++) ds->rec_split[r] = SPLIT_TRAIN;
    if (s->val_names[0]) {
        char buf[FRAMES_MAX_VAL_NAMES];
        snprintf(buf, sizeof buf, "%s", s->val_names);
        for (char *save = NULL, *tok = strtok_r(buf, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
            while (*tok == ' ') tok++;
            char *e = tok + strlen(tok);
            while (e > tok && e[-1] == ' ') *--e = 0;
            if (!*tok) continue;
            int found = -1;
            for (int r = 0; r < fs->n_rec; r++) {
                size_t b = piece_base(fs->rec[r].name);
                if (!strcmp(fs->rec[r].name, tok) || (b && b == strlen(tok) && !strncmp(fs->rec[r].name, tok, b))) {
                    found = r;
                    ds->rec_split[r] = SPLIT_VAL;
                }
            }
            if (found < 0) {
                char list[512] = "";
                size_t k = 0;
                for (int r = 0; r < fs->n_rec && k < sizeof list - 80; r++)
                    k += (size_t)snprintf(list + k, sizeof list - k, "%s%s", r ? ", " : "", fs->rec[r].name);
                return status_set(st, ST_INPUT, "validation recording '%s' not found (recordings: %s%s)", tok, list,
                                  k >= sizeof list - 80 ? ", ..." : "");
            }
        }
    } else if (s->val_last > 0 && fs->n_rec > s->val_last) {
        for (int r = fs->n_rec - s->val_last; r < fs->n_rec; r++) ds->rec_split[r] = SPLIT_VAL;
    }
    for (int r = 0; r < fs->n_rec; r++) ds->n_rec_split[ds->rec_split[r]]++;
    if (!ds->n_rec_split[SPLIT_TRAIN])
        return status_set(st, ST_INPUT, "every recording is held out for validation: no training recording left");
    return 0;
}

static int compute_scaling(Dataset *ds, const FrameStore *fs, Status *st) {
    double u = unit_gain(fs->elem);
    long n = ds->n;
    for (long p = 0; p < n; p++) ds->gain[p] = (float)u, ds->offset[p] = 0;
    if (ds->scale != SCALE_STANDARD) return 0;
    double *sum = calloc((size_t)n, sizeof(double)), *sq = calloc((size_t)n, sizeof(double));   /* (n) each */
    if (!sum || !sq) {
        free(sum), free(sq);
        return status_set(st, ST_RUNTIME, "out of memory for per-pixel statistics");
    }
    /* Shifted sums (by the first training frame) keep the variance accurate. */
    const void *ref = NULL;
    long cnt = 0;
    for (int r = 0; r < fs->n_rec; r++) {
        if (ds->rec_split[r] != SPLIT_TRAIN) continue;
        for (long f = fs->rec[r].first; f < fs->rec[r].first + fs->rec[r].count; f++) {
            const void *fr = store_frame(fs, f);
            if (!ref) ref = fr;
            for (long p = 0; p < n; p++) {
                double d = load_value(fr, fs->elem, p) - load_value(ref, fs->elem, p);
                sum[p] += d, sq[p] += d * d;
            }
            cnt++;
        }
    }
    for (long p = 0; p < n; p++) {
        double mean_d = sum[p] / cnt, var = sq[p] / cnt - mean_d * mean_d;
        double mean = (mean_d + load_value(ref, fs->elem, p)) * u, sd = sqrt(var > 0 ? var : 0) * u;
        if (sd < 1e-6) sd = 1;
        ds->gain[p] = (float)(u / sd);
        ds->offset[p] = (float)(-mean / sd);
    }
    free(sum), free(sq);
    return 0;
}

int dataset_init(Dataset *ds, const FrameStore *fs, const FrameSettings *s, Status *st) {
    memset(ds, 0, sizeof *ds);
    if (frame_settings_check(s, st) || frame_settings_stencil(s, &ds->sten, st)) return st->code;
    ds->fs = fs;
    ds->dt = frame_settings_dt(s);
    ds->scale = s->scale;
    ds->n = fs->n;
    int m = ds->sten.m;
    for (int r = 0; r < fs->n_rec; r++)
        if (fs->rec[r].count < 2L * m + 1)
            return status_set(st, ST_INPUT,
                              "recording '%s' has %ld frames (after stride %d), the %s stencil needs at least %d: %s",
                              fs->rec[r].name, fs->rec[r].count, s->stride, stencil_kind_names[ds->sten.kind], 2 * m + 1,
                              piece_base(fs->rec[r].name)
                                  ? "it lies between gaps in the numbering of its frames (framelaw frames lists them): "
                                    "restore the missing frames, or move its frames out of the folder"
                                  : "record longer recordings, lower data.stride or narrow data.derivative (central "
                                    "needs 3)");
    ds->gain = malloc(sizeof(float) * (size_t)ds->n);
    ds->offset = malloc(sizeof(float) * (size_t)ds->n);
    ds->rec_split = malloc(sizeof(int) * (size_t)fs->n_rec);
    if (!ds->gain || !ds->offset || !ds->rec_split) {
        dataset_free(ds);
        return status_set(st, ST_RUNTIME, "out of memory");
    }
    if (split_recordings(ds, fs, s, st) || compute_scaling(ds, fs, st)) {
        dataset_free(ds);
        return st->code;
    }
    for (int sp = 0; sp < SPLIT_COUNT; sp++) {
        long cnt = 0;
        for (int r = 0; r < fs->n_rec; r++)
            if (ds->rec_split[r] == sp) cnt += stencil_valid(&ds->sten, fs->rec[r].count);
        ds->samples[sp] = malloc(sizeof(long) * (size_t)(cnt ? cnt : 1));
        if (!ds->samples[sp]) {
            dataset_free(ds);
            return status_set(st, ST_RUNTIME, "out of memory");
        }
        long k = 0;
        for (int r = 0; r < fs->n_rec; r++)
            if (ds->rec_split[r] == sp)
                for (long f = fs->rec[r].first + m; f <= fs->rec[r].first + fs->rec[r].count - 1 - m; f++)
                    ds->samples[sp][k++] = f;
        ds->count[sp] = cnt;
    }
    return 0;
}

void dataset_frame(const Dataset *ds, long frame, float *x) {
    const FrameStore *fs = ds->fs;
    const void *q = store_frame(fs, frame);
    const float *g = ds->gain, *o = ds->offset;
    long n = ds->n;
    if (fs->elem == STORE_U8) {
        const uint8_t *v = q;
        for (long p = 0; p < n; p++) x[p] = (float)v[p] * g[p] + o[p];
    } else if (fs->elem == STORE_U16) {
        const uint16_t *v = q;
        for (long p = 0; p < n; p++) x[p] = (float)v[p] * g[p] + o[p];
    } else {
        const float *v = q;
        for (long p = 0; p < n; p++) x[p] = v[p] * g[p] + o[p];
    }
}

/* t (np) = the values of one frame's pixels as float */
static void to_float(float *restrict t, const void *q, long p0, int np, StoreElem e) {
    if (e == STORE_U8) {
        const uint8_t *v = (const uint8_t *)q + p0;
        for (int p = 0; p < np; p++) t[p] = (float)v[p];
    } else if (e == STORE_U16) {
        const uint16_t *v = (const uint16_t *)q + p0;
        for (int p = 0; p < np; p++) t[p] = (float)v[p];
    } else {
        memcpy(t, (const float *)q + p0, (size_t)np * sizeof(float));
    }
}

/* d (np) = w[0] t (k = 0), else d += w[k] t when w[k] != 0: sum_k w[k] q_k, tap by tap */
static void tap(float *restrict d, const float *restrict t, const float *w, int k, int np) {
    float a = w[k];
    if (k == 0)
        for (int p = 0; p < np; p++) d[p] = a * t[p];
    else if (a != 0)
        for (int p = 0; p < np; p++) d[p] += a * t[p];
}

/* The 3-tap window (the central stencil) of 8-bit frames in one loop over the pixels, with the
 * same operations in the same order as the tap-by-tap path below (same bits): x = q1 g + o,
 * x' = ((w0 q0 [+ w1 q1]) + w2 q2) (g / dt), x'' likewise with w2 and 1 / dt^2. */
static void gather_u8_3(long n, const uint8_t *restrict q0, const uint8_t *restrict q1, const uint8_t *restrict q2,
                        const float *restrict g, const float *restrict o, const float *w1, const float *w2,
                        float inv1, float inv2, float *restrict x, float *restrict dx, float *restrict ddx) {
    float a0 = w1[0], a1 = w1[1], a2 = w1[2], b0 = w2[0], b1 = w2[1], b2 = w2[2];
    if (a1 == 0 && b1 != 0) { /* the central stencil's weights */
        for (long p = 0; p < n; p++) {
            float t0 = (float)q0[p], t1 = (float)q1[p], t2 = (float)q2[p];
            x[p] = t1 * g[p] + o[p];
            dx[p] = (a0 * t0 + a2 * t2) * (g[p] * inv1);
            ddx[p] = (b0 * t0 + b1 * t1 + b2 * t2) * (g[p] * inv2);
        }
        return;
    }
    for (long p = 0; p < n; p++) {
        float t0 = (float)q0[p], t1 = (float)q1[p], t2 = (float)q2[p];
        float d1 = a0 * t0, d2 = b0 * t0;
        if (a1 != 0) d1 += a1 * t1;
        if (b1 != 0) d2 += b1 * t1;
        x[p] = t1 * g[p] + o[p];
        dx[p] = (a2 != 0 ? d1 + a2 * t2 : d1) * (g[p] * inv1);
        ddx[p] = (b2 != 0 ? d2 + b2 * t2 : d2) * (g[p] * inv2);
    }
}

/* One sample in one pass over its window's frames, in blocks of pixels that stay in cache: each
 * frame is converted to float once and feeds x (the centre frame), x' and x'' (every tap). */
static void gather_one(const Dataset *ds, const void *const *q, const float *w1, const float *w2, float inv1,
                       float inv2, float *x, float *dx, float *ddx) {
    enum { PB = 512 };
    float t[PB];
    long n = ds->n;
    int m = ds->sten.m, len = 2 * m + 1;
    StoreElem e = ds->fs->elem;
    const float *g = ds->gain, *o = ds->offset;
    for (long p0 = 0; p0 < n; p0 += PB) {
        int np = (int)(n - p0 < PB ? n - p0 : PB);
        for (int k = 0; k < len; k++) {
            to_float(t, q[k], p0, np, e);
            if (x && k == m)
                for (int p = 0; p < np; p++) x[p0 + p] = t[p] * g[p0 + p] + o[p0 + p];
            if (dx) tap(dx + p0, t, w1, k, np);
            if (ddx) tap(ddx + p0, t, w2, k, np);
        }
        if (dx)
            for (int p = 0; p < np; p++) dx[p0 + p] *= g[p0 + p] * inv1;
        if (ddx)
            for (int p = 0; p < np; p++) ddx[p0 + p] *= g[p0 + p] * inv2;
    }
}

void dataset_gather_frames(const Dataset *ds, const long *frames, int B, float *x, float *dx, float *ddx) {
    const FrameStore *fs = ds->fs;
    long n = ds->n;
    int m = ds->sten.m, len = 2 * m + 1;
    float inv1 = (float)(1.0 / ds->dt), inv2 = (float)(1.0 / (ds->dt * ds->dt));
    float w1[STENCIL_MAX_LEN], w2[STENCIL_MAX_LEN];   /* (len) stencil weights in float */
    for (int k = 0; k < len; k++) w1[k] = (float)ds->sten.w1[k], w2[k] = (float)ds->sten.w2[k];
    for (int b = 0; b < B; b++) {
        long f = frames[b];
        const void *q[STENCIL_MAX_LEN];   /* the window's frames f - m .. f + m */
        for (int k = 0; k < len; k++) q[k] = store_frame(fs, f - m + k);
        long off = (long)b * n;
        if (len == 3 && fs->elem == STORE_U8 && x && dx && ddx)
            gather_u8_3(n, q[0], q[1], q[2], ds->gain, ds->offset, w1, w2, inv1, inv2, x + off, dx + off, ddx + off);
        else
            gather_one(ds, q, w1, w2, inv1, inv2, x ? x + off : NULL, dx ? dx + off : NULL, ddx ? ddx + off : NULL);
    }
}

typedef struct {
    const Dataset *ds;
    SplitId split;
    const long *idx;
    float *x, *dx, *ddx;
} GatherJob;

/* samples [lo, hi) of a batch; each sample's rows depend on its frames alone */
static void gather_range(void *ctx, long lo, long hi) {
    enum { CHUNK = 256 };
    const GatherJob *j = ctx;
    long frames[CHUNK], n = j->ds->n;
    for (long b0 = lo; b0 < hi; b0 += CHUNK) {
        int nb = (int)(hi - b0 < CHUNK ? hi - b0 : CHUNK);
        for (int b = 0; b < nb; b++) frames[b] = j->ds->samples[j->split][j->idx[b0 + b]];
        long off = b0 * n;
        dataset_gather_frames(j->ds, frames, nb, j->x ? j->x + off : NULL, j->dx ? j->dx + off : NULL,
                              j->ddx ? j->ddx + off : NULL);
    }
}

/* The samples are split over the step's threads (nn/par.h); the result does not depend on it. */
void dataset_gather(const Dataset *ds, SplitId split, const long *idx, int B, float *x, float *dx, float *ddx) {
    GatherJob j = {ds, split, idx, x, dx, ddx};
    par_for(B, 32, gather_range, &j);
}

typedef struct {
    const Dataset *ds;
    SplitId split;
    const long *idx;
    int B;
    float *x;
} WindowJob;

static void window_range(void *ctx, long lo, long hi) {
    const WindowJob *j = ctx;
    long n = j->ds->n;
    int m = j->ds->sten.m;
    for (long b = lo; b < hi; b++) {
        long f = j->ds->samples[j->split][j->idx[b]];
        for (int k = 0; k <= 2 * m; k++) dataset_frame(j->ds, f - m + k, j->x + ((long)k * j->B + b) * n);
    }
}

void dataset_gather_window(const Dataset *ds, SplitId split, const long *idx, int B, float *x) {
    WindowJob j = {ds, split, idx, B, x};
    par_for(B, 32, window_range, &j);
}

int dataset_recording_of(const Dataset *ds, long frame) {
    int lo = 0, hi = ds->fs->n_rec - 1;
    while (lo < hi) {
        int mid = (lo + hi + 1) / 2;
        if (ds->fs->rec[mid].first <= frame) lo = mid;
        else hi = mid - 1;
    }
    return lo;
}

typedef struct {
    const Dataset *ds;
    const long *frames, *row; /* frame u to row row[u] */
    float *x;
} FramesJob;

static void frames_range(void *ctx, long lo, long hi) {
    const FramesJob *j = ctx;
    for (long u = lo; u < hi; u++) dataset_frame(j->ds, j->frames[u], j->x + j->row[u] * j->ds->n);
}

typedef struct {
    long f, b;
} FrameOfSample;

static int cmp_frame_of_sample(const void *a, const void *b) {
    const FrameOfSample *x = a, *y = b;
    return x->f != y->f ? (x->f > y->f) - (x->f < y->f) : (x->b > y->b) - (x->b < y->b);
}

int dataset_gather_window_shared(const Dataset *ds, SplitId split, const long *idx, int B, float *x, int *map,
                                 long *work) {
    int m = ds->sten.m, win = 2 * m + 1;
    long nw = (long)win * B, *all = work, *uniq = work + nw;
    NN_CHECK(m >= 1, "dataset_gather_window_shared: a stencil of %d frames", win);
    /* Sample b's window is the run of frames f_b - m .. f_b + m: with the samples sorted by f_b the
     * distinct frames come out in order by merging the runs, and each window is a stretch of
     * consecutive rows (2 B <= nw longs of all[] hold the sorted pairs) */
    FrameOfSample *srt = (FrameOfSample *)all;
    for (int b = 0; b < B; b++) srt[b] = (FrameOfSample){ds->samples[split][idx[b]], b};
    qsort(srt, (size_t)B, sizeof *srt, cmp_frame_of_sample);
    long U = 0, last = LONG_MIN; /* the last frame so far */
    for (int i = 0; i < B; i++) {
        long lo = srt[i].f - m, hi = srt[i].f + m;
        for (long f = lo > last ? lo : last + 1; f <= hi; f++) uniq[U++] = f;
        last = hi; /* hi never falls: the frames lo .. hi are the last win rows */
        for (int k = 0; k < win; k++) map[(long)k * B + srt[i].b] = (int)(U - win + k);
    }
    /* The rows: the centre frames first, in the samples' order, then the others in frame order.
     * all[] is free now and holds each sorted frame's row. */
    long *row = all, next = 0;
    for (long u = 0; u < U; u++) row[u] = -1;
    for (int b = 0; b < B; b++)
        if (row[map[(long)m * B + b]] < 0) row[map[(long)m * B + b]] = next++;
    for (long u = 0; u < U; u++)
        if (row[u] < 0) row[u] = next++;
    for (long i = 0; i < nw; i++) map[i] = (int)row[map[i]];
    FramesJob j = {ds, uniq, row, x};
    par_for(U, 8, frames_range, &j);
    return (int)U;
}
