/* tests/fuzz/make_seeds.c: writes the seeds of the fuzz corpora that are binary files of our own
 * formats, through the real writers: a checkpoint of the layout fuzz_checkpoint.c reads, and a small
 * frame store of each element type. `make fuzz-seeds` runs it; the files are committed under
 * tests/fuzz/corpus/. The other seeds are copies of the test fixtures and configs (docs/reliability.md). */
#include <stdio.h>
#include <string.h>

#include "io/data/store.h"
#include "io/run/checkpoint.h"
#include "nn/rng.h"

static int write_store(const char *path, StoreElem elem, int w, int h, Status *st) {
    StoreLayout lay = {elem, w, h, 0x1234, w, h, 0, {0, 0, w, h}, 1};
    StoreWriter *sw;
    if (store_writer_open(&sw, path, &lay, st)) return 1;
    unsigned char frame[4 * 64];
    for (int r = 0; r < 2; r++) {
        if (store_writer_recording(sw, r ? "rec1" : "rec0", 3, st)) return 1;
        for (int f = 0; f < 3; f++) {
            for (int i = 0; i < (int)sizeof frame; i++) frame[i] = (unsigned char)(i * 7 + f + r);
            if (elem == STORE_F32)
                for (int i = 0; i < w * h; i++) {
                    float v = 0.1f * (float)(i + f);
                    memcpy(frame + 4 * i, &v, 4);
                }
            if (store_writer_frame(sw, frame, st)) return 1;
        }
    }
    return store_writer_finish(sw, NULL, st);
}

int main(int argc, char **argv) {
    const char *dir = argc > 1 ? argv[1] : "tests/fuzz/corpus";
    char path[512];
    Status st;
    /* the checkpoint: 5 epochs and 1 batch done (3 batches of 4 of 10 samples an epoch) */
    ParamSet ps;
    params_init(&ps);
    params_add(&ps, "enc.W0", 3, 4);
    params_add(&ps, "xi", 2, 2);
    params_alloc(&ps);
    for (size_t i = 0; i < ps.n; i++) ps.val[i] = 0.1f * (float)i - 0.5f, ps.m[i] = 0.01f, ps.v[i] = 1e-4f;
    ps.step = 16;
    uint8_t mask[4] = {1, 0, 1, 1};
    int64_t order[10] = {3, 7, 0, 9, 1, 2, 8, 4, 6, 5};
    CkptMeta meta;
    memset(&meta, 0, sizeof meta);
    meta.epoch = 5;
    meta.batch = 1;
    rng_seed(&meta.rng, 7);
    meta.acc_n = 4;
    meta.best_val = 0.5;
    meta.best_epoch = 5;
    meta.n_thresholds = 1;
    meta.seconds = 1.5;
    snprintf(path, sizeof path, "%s/checkpoint/valid.ckpt", dir);
    if (ckpt_write(path, &meta, &ps, mask, 4, order, 10, &st)) goto fail;
    params_free(&ps);
    static const StoreElem elems[3] = {STORE_U8, STORE_U16, STORE_F32};
    static const char *const names[3] = {"u8", "u16", "f32"};
    for (int k = 0; k < 3; k++) {
        snprintf(path, sizeof path, "%s/store/%s.framelaw-store", dir, names[k]);
        if (write_store(path, elems[k], k == 2 ? 8 : 4, k == 2 ? 1 : 3, &st)) goto fail;
    }
    return 0;
fail:
    fprintf(stderr, "make_seeds: %s\n", st.msg);
    return 1;
}
