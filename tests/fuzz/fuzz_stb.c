/* tests/fuzz/fuzz_stb.c: PNG, JPEG, BMP, GIF and TGA through stb_image with framelaw's own checks
 * around it (io/data/images.h), Debian's stb_image release built into the target. The first byte
 * picks the extension; the rest is the file. */
#include "tests/fuzz/fuzz_image.h"

/* stb_image compiled here, with the sanitizers and coverage, rather than taken uninstrumented from
 * Debian's libstb: the executable's definitions take precedence, so io/data/images.c calls these. */
#pragma clang diagnostic push
#pragma clang diagnostic ignored "-Wall"
#pragma clang diagnostic ignored "-Wextra"
#define STB_IMAGE_IMPLEMENTATION
#include <stb/stb_image.h>
#pragma clang diagnostic pop

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    static const char *const names[5] = {"frame.png", "frame.jpg", "frame.bmp", "frame.gif", "frame.tga"};
    return fuzz_image(data, size, names, 5, GRAY_BT601);
}
