/* tests/fuzz/fuzz_pnm.c: binary PGM / PPM (P5, P6), which framelaw reads itself (io/data/images.h).
 * The first byte picks the extension (.pgm, .ppm, .pnm); the rest is the file. */
#include "io/data/images.h"
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    if (size < 1) return 0;
    static const char *const names[3] = {"frame.pgm", "frame.ppm", "frame.pnm"};
    const char *path = fuzz_file(names[data[0] % 3], data + 1, size - 1);
    Status st;
    int w, h;
    (void)image_probe(path, &w, &h, &st);
    float *px = NULL;
    if (image_load_gray(path, GRAY_BT709, &px, &w, &h, &st) == 0) {
        long np = (long)w * h; /* the first, middle and last pixels: the whole image was written */
        double sum = px[0] + px[np / 2] + px[np - 1];
        fuzz_use(sum);
        free(px);
    }
    return 0;
}
