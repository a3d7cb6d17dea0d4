/* tests/fuzz/fuzz_store.c: a frame store file (io/data/store.h). The fuzz build skips its CRC; a
 * store that loads is read whole (every frame's every value), so a header that lies about sizes
 * shows up as an out-of-bounds read. */
#include "io/data/store.h"
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    const char *path = fuzz_file("frames.framelaw-store", data, size);
    FrameStore fs;
    Status st;
    if (store_load(path, &fs, &st) == 0) {
        double sum = 0;
        size_t bytes = store_payload_bytes(&fs);
        const unsigned char *p = fs.payload;
        for (size_t i = 0; i < bytes; i++) sum += p[i];
        long frames = 0;
        for (int r = 0; r < fs.n_rec; r++) frames += fs.rec[r].count;
        if (frames != fs.n_frames) abort();
        fuzz_use(sum);
        store_close(&fs);
    }
    return 0;
}
