/* sparse/equation.h: a sparse model written as equations people read, and as JSON.
 *
 * Plain text, one line per latent variable j (n_latent lines, each ending in '\n'), a product
 * written with '*' so that the right-hand side pastes into a calculator or a script:
 *     dz1/dt = -10*z1 + 10*z2                      (first order)
 *     d2z1/dt2 = -0.98*sin(z1) - 0.05*dz1/dt       (second order)
 * LaTeX, an aligned block:
 *     \begin{aligned}
 *     \dot{z}_{1} &= -10 z_{1} + 10 z_{2} \\
 *     \dot{z}_{2} &= ...
 *     \end{aligned}
 * Terms appear in library order; a term whose coefficient is zero or masked out is left out; a
 * coefficient is written with `digits` significant digits (1..17), a coefficient of exactly 1 or
 * -1 at that precision is written as the sign alone (z2, - z1), and an equation without terms reads
 * "= 0". LaTeX writes 1.5e-05 as 1.5 \times 10^{-5}.
 *
 * JSON (docs/sparse.md has the full format): the library settings, the term names, and per
 * equation the full coefficient and mask vectors (coefficients with full double precision, so the
 * model reloads exactly) beside its text and LaTeX forms at `digits`. Version 2 renamed
 * library.frequencies to library.multipliers, writes products with '*' and lets fit say
 * n_variables for n_latent; the reader takes versions 1 and 2.
 *
 * Nothing here opens a file: the functions write to a caller's buffer or FILE*, or return a cJSON
 * tree or string for io/ to store. */
#ifndef SPARSE_EQUATION_H
#define SPARSE_EQUATION_H

#include <stddef.h>
#include <stdint.h>
#include <stdio.h>

#include <cjson/cJSON.h>

#include "nn/core.h"
#include "sparse/coef.h"
#include "sparse/library.h"

#define EQ_JSON_FORMAT "framelaw-equations"
#define EQ_JSON_VERSION 2

/* Significant digits of the coefficients in a run's printed equations: equations.txt and .tex, the
 * text and latex members of equations.json (its "digits"), the console; fit's --digits default. */
#define EQ_DIGITS 4

typedef enum { EQ_TEXT, EQ_LATEX } EqStyle;

/* Equation j alone ("dz1/dt = ...", no newline). Like snprintf: writes at most n bytes (always
 * terminated when n > 0) and returns the length the whole text needs. xi, mask (n_terms, n_latent);
 * mask may be NULL. */
size_t equation_line(char *buf, size_t n, EqStyle style, const Library *lib, const double *xi,
                     const uint8_t *mask, int j, int digits);

/* Name of term t in a style, written to buf (n bytes); returns 1 when the term is the constant
 * (its coefficient is then written alone, as a number), else 0. */
typedef int (*EqTermNameFn)(const void *ctx, int t, EqStyle style, char *buf, size_t n);

/* One equation with the same layout rules from explicit parts: lhs is written as given ("du1/dt =",
 * "\dot{u}_{1} &="), then the terms t = 0..n_terms-1 named by name(ctx, t, ...) with coefficients
 * coef[t * stride] and mask[t * stride] (mask may be NULL). snprintf-like. */
size_t equation_line_with(char *buf, size_t n, EqStyle style, const char *lhs, int n_terms, EqTermNameFn name,
                          const void *ctx, const double *coef, const uint8_t *mask, long stride, int digits);

/* Every equation (text: one line each; LaTeX: the aligned block), snprintf-like. */
size_t equation_format(char *buf, size_t n, EqStyle style, const Library *lib, const double *xi,
                       const uint8_t *mask, int digits);

/* The same to a FILE*; 0, or -1 when writing failed. */
int equation_fprint(FILE *f, EqStyle style, const Library *lib, const double *xi, const uint8_t *mask,
                    int digits);

/* A number as JSON that reads back bit for bit: raw text, the shortest of %.15g, %.16g, %.17g that
 * does (cJSON's own printing accepts a difference of one rounding step); null when not finite. The
 * one writer of exact numbers: equations, the canonical form and the config use it. */
cJSON *equation_exact_number(double v);

/* The JSON object described in docs/sparse.md (the caller may add members, then cJSON_Delete). */
cJSON *equation_json(const Library *lib, const double *xi, const uint8_t *mask, int digits);
/* The name of the number of equations: "n_latent" for a run's latent variables, "n_variables" for
 * the plain state variables fit reads from a file. */
typedef enum { EQ_COUNT_LATENT, EQ_COUNT_VARIABLES } EqCountKey;
/* equation_json with the count under the given name (equation_json: EQ_COUNT_LATENT). */
cJSON *equation_json_as(const Library *lib, const double *xi, const uint8_t *mask, int digits, EqCountKey count);
/* The same printed (indented); free() the result. NULL only when memory runs out. */
char *equation_json_string(const Library *lib, const double *xi, const uint8_t *mask, int digits);

/* Read a model back from its JSON text, version 1 or 2: builds lib (library_free it) and coef
 * (coef_free it). The term names in the file must match the ones the library settings give
 * (version 1: as terms, its names have spaces for products). Returns 0 or ST_INPUT with a one-line
 * message naming the member at fault (the caller adds the file name). */
int equation_from_json(const char *text, Library *lib, Coef *coef, Status *st);

#endif
