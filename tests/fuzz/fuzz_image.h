/* tests/fuzz/fuzz_image.h: what the image targets share (fuzz_pnm.c, fuzz_stb.c): the first byte
 * picks the file's extension among `names`, the rest is the file; it is probed and decoded, and a
 * decoded image must hold w x h readable pixels. */
#ifndef FUZZ_IMAGE_H
#define FUZZ_IMAGE_H

#include "io/data/images.h"
#include "tests/fuzz/fuzz.h"

static inline int fuzz_image(const uint8_t *data, size_t size, const char *const *names, int n_names, GrayStd g) {
    if (size < 1) return 0;
    const char *path = fuzz_file(names[data[0] % n_names], data + 1, size - 1);
    Status st;
    int w, h;
    (void)image_probe(path, &w, &h, &st);
    float *px = NULL;
    if (image_load_gray(path, g, &px, &w, &h, &st) == 0) {
        long np = (long)w * h; /* the first, middle and last pixels: the whole image was written */
        fuzz_use(px[0] + px[np / 2] + px[np - 1]);
        free(px);
    }
    return 0;
}

#endif
