/* io/data/glyphs.h: short labels drawn into 8-bit gray images (the contact sheet's recording names)
 * with a built-in font of 5 x 7 pixel glyphs, drawn by hand for this program: digits, both cases
 * of the Latin letters and the punctuation of file names (- _ . , : ( ) [ ] + = # % @ & ' / ~ !).
 * Any other byte is drawn as '?', once per UTF-8 character. Each font pixel becomes a scale x scale
 * square; characters are 6 font pixels apart (one blank column between them). */
#ifndef IO_DATA_GLYPHS_H
#define IO_DATA_GLYPHS_H

#include <stdint.h>

#define GLYPH_W 5
#define GLYPH_H 7
#define GLYPH_ADVANCE 6

/* Characters text draws as (a UTF-8 sequence counts once). */
long glyph_count(const char *text);
/* Draw text into px (H, W), 8-bit gray, row-major, its top-left corner at (x, y), in value ink;
 * what falls outside the image is left out. */
void glyph_draw(uint8_t *px, long W, long H, long x, long y, const char *text, int scale, uint8_t ink);
/* dst (n bytes) = text shortened to at most max characters by "..." in its middle (the start and the
 * end of a name tell recordings apart); text itself when it fits. */
void glyph_fit(char *dst, unsigned long n, const char *text, long max);

#endif
