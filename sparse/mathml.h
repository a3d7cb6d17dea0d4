/* sparse/mathml.h: a sparse law written as Presentation MathML, the markup of equations that
 * browsers render without script (MathML Core: Chromium since 109, Firefox). Built from the law's
 * structure (the library's terms, the coefficients and the mask), never from its LaTeX text.
 *
 * One <math display="block"> per law, holding an <mtable> with one row per equation and three
 * cells: the left-hand side, "=", the right-hand side. MathML Core breaks no lines, so a right-hand
 * side of more than MATHML_TERMS_PER_ROW terms goes on in further rows (first two cells empty, the
 * next term's sign first), and the page needs no scrolling for a law of the usual size:
 *     d z1 / dt      <mfrac><mrow><mi>d</mi><msub><mi>z</mi><mn>1</mn></msub></mrow>
 *                           <mrow><mi>d</mi><mi>t</mi></mrow></mfrac>
 *     d2 z1 / dt2    <mfrac> with <msup><mi>d</mi><mn>2</mn></msup> and <msup><mi>t</mi><mn>2</mn></msup>
 *     z1^2           <msubsup><mi>z</mi><mn>1</mn><mn>2</mn></msubsup>
 *     (dz1/dt)^2     <msup><mrow><mo>(</mo><mfrac>...</mfrac><mo>)</mo></mrow><mn>2</mn></msup>
 *     sin(2 z1)      <mi>sin</mi><mo>&#x2061;</mo><mrow><mo>(</mo><mn>2</mn><mo>&#x2062;</mo>...<mo>)</mo></mrow>
 *     products       factors joined by <mo>&#x2062;</mo> (invisible times)
 *     1.5e-05        <mn>1.5</mn><mo>&#xD7;</mo><msup><mn>10</mn><mrow><mo>&#x2212;</mo><mn>5</mn></mrow></msup>
 * The rules of the text and LaTeX forms (sparse/equation.h) hold: terms in library order, zero or
 * masked ones left out, `digits` significant digits, a coefficient that prints as 1 is the sign
 * alone, an equation without terms reads 0. A minus is U+2212.
 *
 * Everything written is markup of ours and numbers; the writer escapes every text node anyway, so
 * the result can go into an HTML page as it is. Functions are snprintf-like: they write at most n
 * bytes (terminated when n > 0) and return the length the whole text needs. */
#ifndef SPARSE_MATHML_H
#define SPARSE_MATHML_H

#include <stddef.h>
#include <stdint.h>

#include "sparse/library.h"

#define MATHML_TERMS_PER_ROW 4

/* The law xi, mask (n_terms, n_latent) on lib's terms (mask may be NULL: all active). var names the
 * variables ('z' for a learned law, 'u' for a canonical one). w (n_latent) or NULL: the frequency
 * factor of the trig terms of each variable (a canonical law: sin(k z_i) becomes sin(k w_i u_i),
 * written with the product k w_i at `digits`). */
size_t mathml_law(char *buf, size_t n, const Library *lib, const double *xi, const uint8_t *mask, char var,
                  const double *w, int digits);

/* The change of coordinates u = A z + b (A (k, k) row-major, b (k)), one row per u_i, and when w is
 * not NULL the rows w_i = ... (the frequency factors of a canonical law with trig terms). */
size_t mathml_map(char *buf, size_t n, int k, const double *A, const double *b, const double *w, int digits);

#endif
