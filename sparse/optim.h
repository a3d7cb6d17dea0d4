/* sparse/optim.h: small dense numerical tools for searches over a few dozen parameters, in double.
 *
 * - BFGS on a function of up to OPT_MAX_PARAMS parameters with a finite-difference gradient
 *   (central differences) and a backtracking line search (Armijo condition), as in "Numerical
 *   Optimization" (Nocedal and Wright, Springer 2006, algorithm 6.1 and section 3.1).
 * - Levenberg-Marquardt on a vector of residuals with a forward-difference Jacobian and the
 *   scaling of the damping by the diagonal of J^T J ("An algorithm for least-squares estimation of
 *   nonlinear parameters", Marquardt, J. SIAM 1963).
 * - Square solves and inverses by Gaussian elimination with partial pivoting, the singular values
 *   (LAPACK dgesvd) and the eigen decomposition (LAPACK dgeev) of small matrices, from OpenBLAS.
 *
 * Every matrix is row-major. A function to minimise may return a non-finite value or HUGE_VAL for
 * a point outside its domain; the line search and the damping step back from it. */
#ifndef SPARSE_OPTIM_H
#define SPARSE_OPTIM_H

#define OPT_MAX_PARAMS 64

/* f(x (n), ctx) -> value. */
typedef double (*OptFn)(const double *x, void *ctx);
/* r (m) = residuals at x (n). Returns 0, or nonzero when x is outside the domain. */
typedef int (*OptResFn)(const double *x, double *r, void *ctx);

typedef struct {
    int max_iter;       /* iterations (BFGS: 200, LM: 100) */
    double h;           /* relative finite-difference step (BFGS: 1e-6, LM: 1e-7) */
    double tol;         /* stop when a step improves the value by less than tol relative (1e-12) */
} OptOptions;

OptOptions opt_bfgs_defaults(void);
OptOptions opt_lm_defaults(void);

/* Minimise f from x (n <= OPT_MAX_PARAMS) in place. Returns the final value. */
double opt_bfgs(OptFn f, void *ctx, double *x, int n, const OptOptions *o);

/* Minimise |r(x)|^2 over x (n <= OPT_MAX_PARAMS) from x in place; m residuals. Returns the final
 * |r|^2 (HUGE_VAL when the start itself is outside the domain). */
double opt_lm(OptResFn r, void *ctx, double *x, int n, int m, const OptOptions *o);

/* Solve a (n, n) x = b (n) in place (b becomes x); a is overwritten. Returns 0, or -1 when a pivot
 * is below 1e-300 or not finite (singular). */
int la_solve(double *a, double *b, int n);
/* inv (n, n) = a^-1 (a is not changed). Returns 0 or -1 (singular). */
int la_inverse(double *inv, const double *a, int n);
/* Singular values of a (m, n), descending, into sv (min(m, n)). Returns 0 or -1. */
int la_singular_values(double *sv, const double *a, int m, int n);
/* Condition number of a square a (n, n) in the 2-norm: largest over smallest singular value;
 * HUGE_VAL when singular or not finite. */
double la_cond(const double *a, int n);
/* Eigenvalues (re, im (n)) and right eigenvectors of a (n, n): vr (n, n) with eigenvector j in
 * column j, a complex pair j, j+1 stored as real part in column j and imaginary part in column
 * j+1 (LAPACK's layout). Returns 0 or -1. */
int la_eig(double *re, double *im, double *vr, const double *a, int n);

#endif
