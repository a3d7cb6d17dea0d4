/* tests/fuzz/fuzz_stb.c: PNG, JPEG, BMP, GIF and TGA through stb_image with framelaw's own checks
 * around it (io/data/images.h), Debian's stb_image release built into the target. The first byte
 * picks the extension; the rest is the file. */
#include "tests/fuzz/fuzz_image.h"

/* stb_image compiled here, with the sanitizers and coverage, rather than taken uninstrumented from
 * Debian's libstb: the executable's definitions take precedence, so io/data/images.c calls these.
 * One check is off for stb_image's own functions: signed overflow. Its JPEG decoder adds each
 * block's DC difference to a running int prediction and multiplies it by the quantiser with no
 * bound, so a corrupt file overflows there (found by this target, docs/reliability.md item 6); the
 * release build, Debian's library, wraps, which gives wrong pixels of a file that is corrupt, not a
 * memory fault. Every other check (address, bounds, shifts, the rest of UBSan) stays on. */
#pragma clang diagnostic push
#pragma clang diagnostic ignored "-Wall"
#pragma clang diagnostic ignored "-Wextra"
#pragma clang attribute push(__attribute__((no_sanitize("signed-integer-overflow"))), apply_to = function)
#define STB_IMAGE_IMPLEMENTATION
#include <stb/stb_image.h>
#pragma clang attribute pop
#pragma clang diagnostic pop

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    static const char *const names[5] = {"frame.png", "frame.jpg", "frame.bmp", "frame.gif", "frame.tga"};
    return fuzz_image(data, size, names, 5, GRAY_BT601);
}
