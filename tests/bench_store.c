/* tests/bench_store.c: peak resident memory of the frame store and the gather (`make bench`).
 *
 * 20,000 frames of 64x64 (10 recordings of 2,000), 8-bit, are written to a store, loaded
 * (memory-mapped) and iterated for one epoch of shuffled gathers of x, x' and x'' in batches of
 * 1024 (central differences). The peak resident set size (getrusage ru_maxrss) must stay within
 * 1.5 x the frame bytes in the store + 50 MB (issue 3, "Memory"). Exit status 1 when it does not. */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <time.h>
#include <unistd.h>

#include "io/data/gather.h"
#include "io/data/store.h"
#include "nn/rng.h"

enum { N_REC = 10, PER_REC = 2000, W = 64, H = 64, BATCH = 1024 };

static double now(void) {
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static double peak_mb(void) {
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    return (double)ru.ru_maxrss * 1024.0 / 1e6;   /* ru_maxrss is in kilobytes on Linux */
}

int main(void) {
    const char *base = getenv("TMPDIR");
    char dir[512], path[600];
    snprintf(dir, sizeof dir, "%s/framelaw-bench-XXXXXX", base && *base ? base : "/tmp");
    if (!mkdtemp(dir)) {
        perror("mkdtemp");
        return 1;
    }
    snprintf(path, sizeof path, "%s/bench.store", dir);
    Status st;
    double t0 = now();
    /* Write: a moving bright square per recording, streamed frame by frame. */
    StoreLayout lay = {STORE_U8, W, H, 1, W, H, 0, {0, 0, 0, 0}, 1};
    StoreWriter *w;
    if (store_writer_open(&w, path, &lay, &st)) {
        fprintf(stderr, "%s\n", st.msg);
        return 1;
    }
    static uint8_t frame[W * H];   /* (H, W) */
    for (int r = 0; r < N_REC && !st.code; r++) {
        char name[32];
        snprintf(name, sizeof name, "rec%02d", r);
        if (store_writer_recording(w, name, PER_REC, &st)) break;
        for (int k = 0; k < PER_REC; k++) {
            int cx = (int)(32 + 20 * sin(0.01 * k * (r + 1))), cy = (int)(32 + 20 * cos(0.013 * k));
            for (int y = 0; y < H; y++)
                for (int x = 0; x < W; x++) frame[y * W + x] = (abs(x - cx) < 5 && abs(y - cy) < 5) ? 230 : 20;
            if (store_writer_frame(w, frame, &st)) break;
        }
    }
    if (st.code || store_writer_finish(w, NULL, &st)) {
        fprintf(stderr, "%s\n", st.msg);
        return 1;
    }
    double t_write = now() - t0, rss_after_write = peak_mb();

    t0 = now();
    FrameStore fs;
    if (store_load(path, &fs, &st)) {
        fprintf(stderr, "%s\n", st.msg);
        return 1;
    }
    FrameSettings s = frame_settings_default();
    Dataset ds;
    if (dataset_init(&ds, &fs, &s, &st)) {
        fprintf(stderr, "%s\n", st.msg);
        return 1;
    }
    double t_load = now() - t0;
    long n_train = ds.count[SPLIT_TRAIN];
    long *order = malloc(sizeof *order * (size_t)n_train);                      /* (n_train) */
    float *x = malloc(sizeof(float) * (size_t)BATCH * (size_t)ds.n);            /* (B, n) */
    float *dx = malloc(sizeof(float) * (size_t)BATCH * (size_t)ds.n);           /* (B, n) */
    float *ddx = malloc(sizeof(float) * (size_t)BATCH * (size_t)ds.n);          /* (B, n) */
    if (!order || !x || !dx || !ddx) return 1;
    for (long i = 0; i < n_train; i++) order[i] = i;
    Rng rng;
    rng_seed(&rng, 7);
    rng_shuffle(&rng, order, n_train);
    t0 = now();
    double checksum = 0;
    for (long b0 = 0; b0 < n_train; b0 += BATCH) {
        int nb = (int)(n_train - b0 < BATCH ? n_train - b0 : BATCH);
        dataset_gather(&ds, SPLIT_TRAIN, order + b0, nb, x, dx, ddx);
        checksum += x[0] + dx[ds.n / 2] + ddx[ds.n - 1];
    }
    double t_epoch = now() - t0;
    /* The validation split too, as a training run would. */
    for (long b0 = 0; b0 < ds.count[SPLIT_VAL]; b0 += BATCH) {
        int nb = (int)(ds.count[SPLIT_VAL] - b0 < BATCH ? ds.count[SPLIT_VAL] - b0 : BATCH);
        for (int b = 0; b < nb; b++) order[b] = b0 + b;
        dataset_gather(&ds, SPLIT_VAL, order, nb, x, dx, ddx);
    }
    double frame_mb = (double)store_payload_bytes(&fs) / 1e6, peak = peak_mb();
    double target = 1.5 * frame_mb + 50.0;
    printf("frames: %ld of %dx%d, 8-bit; store file %.1f MB (frame bytes %.1f MB)\n", fs.n_frames, W, H,
           (double)fs.map_bytes / 1e6, frame_mb);
    printf("write %.2f s (peak RSS so far %.1f MB), load + split %.3f s, one epoch of %ld training samples in "
           "batches of %d: %.2f s (checksum %.3g)\n",
           t_write, rss_after_write, t_load, n_train, BATCH, t_epoch, checksum);
    printf("batch buffers x, x', x'': %.1f MB\n", 3.0 * BATCH * (double)ds.n * 4 / 1e6);
    printf("peak resident memory: %.1f MB; target 1.5 x %.1f MB + 50 MB = %.1f MB: %s\n", peak, frame_mb, target,
           peak <= target ? "ok" : "OVER");
    free(order), free(x), free(dx), free(ddx);
    dataset_free(&ds);
    store_close(&fs);
    unlink(path);
    rmdir(dir);
    return peak <= target ? 0 : 1;
}
