/* tests/fuzz/fuzz_png_text.c: the tEXt chunk of a PNG as `framelaw frames` reads it to know its own
 * contact sheets (image_png_text in io/data/images.h): the chunk walk over the first 8 KiB of a file.
 * Whatever it accepts is a NUL-terminated text shorter than the buffer. */
#include "io/data/images.h"
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    const char *path = fuzz_file("sheet.png", data, size);
    char out[64];
    memset(out, 'x', sizeof out);
    if (image_png_text(path, "Software", out, sizeof out)) {
        size_t n = strnlen(out, sizeof out);
        if (n == sizeof out) abort(); /* not terminated */
    }
    return 0;
}
