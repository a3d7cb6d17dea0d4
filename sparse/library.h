/* sparse/library.h: the library of candidate functions Theta(s) of a state vector s.
 *
 * The state s holds the model's variables: s = z (n_latent values) for a first-order model, and
 * s = (z, z') (2 n_latent values) for a second-order one. Variable i is named z<i+1>; the velocity
 * n_latent + i is named dz<i+1>/dt (LaTeX: z_{i+1} and \dot{z}_{i+1}).
 *
 * Term order (fixed; tests/test_library.c pins it, docs/sparse.md describes it):
 *   1. the constant "1"                                  (when spec.constant)
 *   2. monomials of total degree 1, 2, ..., spec.degree; inside one degree, the sorted variable
 *      index tuples (i1 <= i2 <= ... <= id) in lexicographic order:
 *          z1, z2, z1^2, z1*z2, z2^2, z1^3, z1^2*z2, ...
 *   3. when spec.trig: for each multiplier k in spec.freq (in the given order), for each variable
 *      that takes trig terms (every variable, or only z when spec.trig_velocity is 0):
 *          sin(k*zi), cos(k*zi)             written sin(zi), cos(zi) when k = 1
 *   4. spec.include, in the given order (terms already present are not repeated);
 *   then every term named in spec.exclude is removed.
 *
 * Names: "1", "z1", "z1^2", "z1*z2", "z1^2*dz2/dt", "(dz1/dt)^2", "sin(z1)", "cos(2*dz1/dt)": a
 * product is written with '*', so a name pastes into a calculator or a script. LaTeX keeps a space
 * for a product: "z_{1} z_{2}", "\sin(2 z_{1})".
 * Variable names: a library may carry a name for each z variable (library_init_named; fit takes them
 * from a CSV header). Then the names shown (NAME_TEXT, NAME_LATEX) use them: "x", "dx/dt", "v*x",
 * "sin(x)", "(dx/dt)^2"; LaTeX "x", "\dot{x}", "\mathit{vel}", "x_{1}" for x_1, "\theta" for theta.
 * NAME_KEY is always the z form: the names in lib->names, in equations JSON "terms" and in
 * include / exclude, so a file reads back whatever the variables were called.
 * A name given in include / exclude is parsed, so "z2*z1", "z1 * z2" and "z1*z2" are the same term;
 * with variable names, "x*v" is that term too.
 * The parser also reads the old form with a space for a product ("z1 z2", "sin(2 z1)"), the names
 * of version-1 equations JSON; library_name_old_form tells a caller when to note that it is
 * deprecated.
 *
 * Each kind of term is one row of a table with its name, evaluation and gradient (library.c), so
 * the names in exported equations come from the row that computes the term.
 *
 * Evaluation on a batch: theta (B, n_terms) = Theta(s (B, n_vars)). On the tape (library_op) the
 * backward accumulates ds[b, j] += sum_t dtheta[b, t] d Theta_t / d s_j. */
#ifndef SPARSE_LIBRARY_H
#define SPARSE_LIBRARY_H

#include <stddef.h>

#include "nn/core.h"
#include "nn/tape.h"

#define LIB_MAX_VARS 32       /* n_vars = order * n_latent */
#define LIB_MAX_DEGREE 8      /* highest total degree of a monomial */
#define LIB_MAX_FREQ 8        /* multipliers k in sin(k z), cos(k z) */
#define LIB_MAX_EDITS 32      /* names in include / exclude */
#define LIB_NAME_MAX 96       /* a term name, with its terminating zero */
#define LIB_MAX_TERMS 10000   /* more is a configuration error, not a model */
#define LIB_VAR_NAME_MAX 25   /* a variable name (library_var_names_check), with its terminating zero */
#define LIB_SHOWN_MAX 1024    /* a term name shown with variable names (text or LaTeX), with its zero */

typedef enum { TERM_CONST, TERM_MONO, TERM_SIN, TERM_COS, TERM_KIND_COUNT } TermKind;

/* Kind name ("constant", "monomial", "sin", "cos") from the term table, for messages. */
const char *term_kind_name(TermKind k);

typedef struct {
    TermKind kind;
    int n_fac;                  /* monomial: number of distinct variables */
    int var[LIB_MAX_DEGREE];    /* monomial: variable indices, increasing; sin / cos: var[0] */
    int pow[LIB_MAX_DEGREE];    /* monomial: exponent of each var, >= 1 */
    int freq;                   /* sin / cos: multiplier k >= 1 */
} Term;

typedef struct {
    int n_latent;               /* k: latent size, >= 1 */
    int order;                  /* 1: s = z; 2: s = (z, z') */
    int constant;               /* 1: include the constant term */
    int degree;                 /* highest total degree of the monomials, 0..LIB_MAX_DEGREE */
    int trig;                   /* 1: include sin and cos terms */
    int trig_velocity;          /* 1: sin / cos of velocities too (order 2); 0: of z only */
    int n_freq;                 /* multipliers k (1..LIB_MAX_FREQ of them) */
    int freq[LIB_MAX_FREQ];
    int n_include, n_exclude;
    char include[LIB_MAX_EDITS][LIB_NAME_MAX];
    char exclude[LIB_MAX_EDITS][LIB_NAME_MAX];
} LibrarySpec;

/* n_latent, order 1, constant, degree 2, no trig (trig_velocity 1, freq {1} when switched on). */
LibrarySpec library_spec_default(int n_latent, int order);

typedef struct {
    LibrarySpec spec;
    int n_vars;                         /* order * n_latent */
    int n_terms;
    Term *terms;                        /* (n_terms) */
    char (*names)[LIB_NAME_MAX];        /* (n_terms) plain-text names, NAME_KEY (z1, dz1/dt) */
    int has_var_names;                  /* 1: var_names name the z variables in shown names */
    char var_names[LIB_MAX_VARS][LIB_VAR_NAME_MAX];   /* (n_latent) when has_var_names */
} Library;

/* Build the terms of a spec. Returns 0, or ST_INPUT with a message naming the bad setting or term. */
int library_init(Library *lib, const LibrarySpec *spec, Status *st);
/* The same with a name for each of the spec->n_latent z variables (var_names NULL: z1, z2, ...); the
 * names must pass library_var_names_check. include / exclude may use them. */
int library_init_named(Library *lib, const LibrarySpec *spec, const char *const *var_names, Status *st);
/* Can these k strings name the z variables? Each a plain name (a letter, then letters, digits or '_',
 * at most LIB_VAR_NAME_MAX - 1 characters), none a word of the term names (sin, cos, t, dt), none
 * z<i> or dz<i> but z<j+1> for variable j itself, no two the same, none "d" followed by another (dx
 * would read as the velocity of x). 0, or ST_INPUT with a message that starts with the quoted name
 * and says why; *bad (when not NULL) gets the index of that name. */
int library_var_names_check(const char *const *names, int k, int *bad, Status *st);
void library_free(Library *lib);

/* Index of a term by name (parsed, so spacing and factor order do not matter); -1 when absent. */
int library_find(const Library *lib, const char *name);

/* NAME_TEXT and NAME_LATEX: the names shown, with the variable names when the library has them;
 * NAME_KEY: plain text with z1, dz1/dt always (the same as NAME_TEXT without variable names). */
typedef enum { NAME_TEXT, NAME_LATEX, NAME_KEY } NameStyle;

/* Name of variable i (z1, dz1/dt; LaTeX z_{1}, \dot{z}_{1}; x, dx/dt, \dot{x} with names). Returns
 * the length snprintf would. */
int library_var_name(const Library *lib, int i, NameStyle style, char *buf, size_t n);
/* The d-th time derivative (0, 1 or 2) of z variable j (0..n_latent-1): z1, dz1/dt, d2z1/dt2; LaTeX
 * z_{1}, \dot{z}_{1}, \ddot{z}_{1}; with names x, dx/dt, d2x/dt2, \ddot{x}. snprintf-like. */
int library_deriv_name(const Library *lib, int j, int d, NameStyle style, char *buf, size_t n);
/* The unnamed form of variable j's d-th derivative with another letter: u1, du1/dt, d2u1/dt2; LaTeX
 * u_{1}, \dot{u}_{1}, \ddot{u}_{1} (library_deriv_name is this with 'z' for a library without
 * variable names). snprintf-like. */
int library_symbol_name(char letter, int j, int d, NameStyle style, char *buf, size_t n);
/* Term names are composed in one place (the term table in library.c); a caller whose variables are
 * not the library's (the canonical coordinates u) gives their names here: var names variable i
 * (i >= k a velocity, written in parentheses under a power), freq (NULL: the term's integer
 * frequency) writes the factor inside a sin or cos, "1" leaving it out. */
typedef struct {
    int k;
    int (*var)(const void *ctx, int i, NameStyle style, char *buf, size_t n);
    int (*freq)(const void *ctx, const Term *t, char *buf, size_t n);
    const void *ctx;
} TermNamer;
int library_name_with(const Term *term, NameStyle style, const TermNamer *nm, char *buf, size_t n);
/* Name of term t in a style; the text names are also in lib->names. */
int library_term_name(const Library *lib, int t, NameStyle style, char *buf, size_t n);
/* The same for any term of the library's variables (one library_parse_term gave, say). */
int library_name_of(const Library *lib, const Term *term, NameStyle style, char *buf, size_t n);
/* Parse a plain-text term name against a library's variables (n_latent, order). 0 or ST_INPUT.
 * Products with '*' or (the old form) with spaces. */
int library_parse_term(const Library *lib, const char *name, Term *out, Status *st);
/* 1 when a name writes a product with a space instead of '*' ("z1 z2", "sin(2 z1)"): the form
 * before equations JSON version 2, read for one more release. Spaces next to '*', '(' or ')' are
 * not products. When fixed is not NULL it gets the name in today's form (n bytes, terminated):
 * products as '*', other spaces left out. */
int library_name_old_form(const char *name, char *fixed, size_t n);

/* Plain evaluation in double: theta (B, n_terms) = Theta(s (B, n_vars)). */
void library_eval(const Library *lib, double *theta, const double *s, long B);
/* One row, only the n terms listed (indices into lib->terms): theta[terms[i]] = Theta_terms[i](s);
 * theta's other entries are left as they were. What a law with few active terms needs. */
void library_eval_terms(const Library *lib, double *theta, const double *s, const int *terms, int n);
/* Gradient in double: ds (B, n_vars) += dtheta (B, n_terms) dTheta/ds at s (B, n_vars). */
void library_grad(const Library *lib, double *ds, const double *dtheta, const double *s, long B);
/* The same in float32 (each row computed in double, stored as float): the training path. */
void library_eval_f(const Library *lib, float *theta, const float *s, long B);
void library_grad_f(const Library *lib, float *ds, const float *dtheta, const float *s, long B);

/* The library as one op on the tape: s (B, n_vars) -> Theta(s) (B, n_terms). The backward is
 * hand-written (library_grad_f). lib must outlive the step. */
Node *library_op(Tape *t, const Library *lib, Node *s);

#endif
