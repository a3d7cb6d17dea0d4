/* tests/fuzz/fuzz_checkpoint.c: a checkpoint file (io/run/checkpoint.h), read for a small fixed
 * layout (two tensors, 4 mask bytes, 10 samples in batches of 4). The fuzz build skips the CRC, so
 * every field is reached; whatever ckpt_read accepts must satisfy docs/formats.md, checked here. */
#include <math.h>

#include "io/run/checkpoint.h"
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    static ParamSet ps;
    static int ready;
    if (!ready) {
        params_init(&ps);
        params_add(&ps, "enc.W0", 3, 4);
        params_add(&ps, "xi", 2, 2);
        params_alloc(&ps);
        ready = 1;
    }
    const char *path = fuzz_file("run.ckpt", data, size);
    CkptMeta meta;
    uint8_t mask[4];
    int64_t order[10];
    Status st;
    if (ckpt_read(path, &meta, &ps, mask, 4, order, 10, 4, &st) == 0) {
        int seen[10] = {0};
        for (int i = 0; i < 10; i++) {
            if (order[i] < 0 || order[i] >= 10 || seen[order[i]]++) abort();
        }
        for (int i = 0; i < 4; i++)
            if (mask[i] > 1) abort();
        for (size_t i = 0; i < ps.n; i++)
            if (!isfinite(ps.val[i]) || !isfinite(ps.m[i]) || !(ps.v[i] >= 0) || !isfinite(ps.v[i])) abort();
        if (meta.batch < 0 || meta.batch > 3 || meta.epoch < 0) abort(); /* 3: end-of-epoch passes pending */
    } else if (!strstr(st.msg, path) || strchr(st.msg, '\n')) {
        abort(); /* a refusal names the file, on one line */
    }
    return 0;
}
