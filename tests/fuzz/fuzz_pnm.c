/* tests/fuzz/fuzz_pnm.c: binary PGM / PPM (P5, P6), which framelaw reads itself (io/data/images.h).
 * The first byte picks the extension (.pgm, .ppm, .pnm); the rest is the file. */
#include "tests/fuzz/fuzz_image.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    static const char *const names[3] = {"frame.pgm", "frame.ppm", "frame.pnm"};
    return fuzz_image(data, size, names, 3, GRAY_BT709);
}
