/* tests/fuzz/fuzz_npy.c: a NumPy .npy recording (io/data/series.h). */
#include "io/data/series.h"
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    const char *path = fuzz_file("rec.npy", data, size);
    Series s;
    Status st;
    if (series_read_npy(path, &s, &st) == 0) series_free(&s);
    return 0;
}
