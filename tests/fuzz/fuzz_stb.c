/* tests/fuzz/fuzz_stb.c: PNG, JPEG, BMP, GIF and TGA through stb_image with framelaw's own checks
 * around it (io/data/images.h), Debian's stb_image release built into the target. The first byte picks the extension; the rest is the file. */
#include "io/data/images.h"
#include "tests/fuzz/fuzz.h"

/* stb_image compiled here, with the sanitizers and coverage, rather than taken uninstrumented from
 * Debian's libstb: the executable's definitions take precedence, so io/data/images.c calls these. */
#pragma clang diagnostic push
#pragma clang diagnostic ignored "-Wall"
#pragma clang diagnostic ignored "-Wextra"
#define STB_IMAGE_IMPLEMENTATION
#include <stb/stb_image.h>
#pragma clang diagnostic pop

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    if (size < 1) return 0;
    static const char *const names[5] = {"frame.png", "frame.jpg", "frame.bmp", "frame.gif", "frame.tga"};
    const char *path = fuzz_file(names[data[0] % 5], data + 1, size - 1);
    Status st;
    int w, h;
    (void)image_probe(path, &w, &h, &st);
    float *px = NULL;
    if (image_load_gray(path, GRAY_BT601, &px, &w, &h, &st) == 0) {
        long np = (long)w * h; /* the first, middle and last pixels: the whole image was written */
        double sum = px[0] + px[np / 2] + px[np - 1];
        fuzz_use(sum);
        free(px);
    }
    return 0;
}
