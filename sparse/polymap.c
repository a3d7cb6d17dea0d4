/* sparse/polymap.c: exact affine substitution in polynomial laws (see polymap.h). */
#include "sparse/polymap.h"

#include <stdlib.h>
#include <string.h>

/* Exponent vector of a term (n_vars) into e. */
static void exponents(const Term *t, int n_vars, unsigned char *e) {
    memset(e, 0, (size_t)n_vars);
    if (t->kind == TERM_MONO)
        for (int f = 0; f < t->n_fac; f++) e[t->var[f]] = (unsigned char)t->pow[f];
}

static int find_exp(const unsigned char *exps, int n_terms, int n_vars, const unsigned char *e) {
    for (int r = 0; r < n_terms; r++)
        if (!memcmp(exps + (long)r * n_vars, e, (size_t)n_vars)) return r;
    return -1;
}

int polybasis_init(PolyBasis *pb, int n_latent, int order, int degree, Status *st) {
    memset(pb, 0, sizeof *pb);
    LibrarySpec sp = library_spec_default(n_latent, order);
    sp.constant = 1;
    sp.degree = degree;
    sp.trig = 0;
    if (library_init(&pb->basis, &sp, st)) return st->code;
    int n = pb->basis.n_vars, p = pb->basis.n_terms;
    if (p > POLYMAP_MAX_TERMS) {
        library_free(&pb->basis);
        return status_set(st, ST_INPUT,
                          "canonical form: the complete polynomial basis has %d terms, more than the %d the "
                          "search handles (lower the degree or the latent size)",
                          p, POLYMAP_MAX_TERMS);
    }
    pb->n_vars = n;
    pb->degree = degree;
    pb->n_terms = p;
    pb->deg = nn_calloc((size_t)p, sizeof *pb->deg);
    pb->mul = nn_alloc((size_t)p * n * sizeof *pb->mul);
    pb->work = nn_alloc((size_t)3 * p * sizeof *pb->work);
    pb->parent = nn_alloc((size_t)p * sizeof *pb->parent);
    pb->pvar = nn_alloc((size_t)p * sizeof *pb->pvar);
    for (int r = 0; r < p; r++) pb->parent[r] = pb->pvar[r] = -1;
    unsigned char *exps = nn_calloc((size_t)p * n, 1);   /* (p, n) */
    for (int r = 0; r < p; r++) {
        exponents(&pb->basis.terms[r], n, exps + (long)r * n);
        for (int v = 0; v < n; v++) pb->deg[r] += exps[(long)r * n + v];
    }
    unsigned char e[LIB_MAX_VARS];
    for (int r = 0; r < p; r++)
        for (int v = 0; v < n; v++) {
            if (pb->deg[r] >= degree) {
                pb->mul[(long)r * n + v] = -1;
                continue;
            }
            memcpy(e, exps + (long)r * n, (size_t)n);
            e[v]++;
            int to = find_exp(exps, p, n, e);
            pb->mul[(long)r * n + v] = to;
            if (to >= 0 && pb->parent[to] < 0) pb->parent[to] = r, pb->pvar[to] = v;
        }
    nn_free(exps);
    status_ok(st);
    return 0;
}

void polybasis_free(PolyBasis *pb) {
    library_free(&pb->basis);
    if (pb->deg) nn_free(pb->deg);
    if (pb->mul) nn_free(pb->mul);
    if (pb->work) nn_free(pb->work);
    if (pb->parent) nn_free(pb->parent);
    if (pb->pvar) nn_free(pb->pvar);
    memset(pb, 0, sizeof *pb);
}

void polybasis_eval(const PolyBasis *pb, double *theta, const double *sigma, long B) {
    int p = pb->n_terms, n = pb->n_vars;
    for (long b = 0; b < B; b++) {
        double *th = theta + b * p;
        const double *sg = sigma + b * n;
        th[0] = 1.0;
        for (int r = 1; r < p; r++) th[r] = th[pb->parent[r]] * sg[pb->pvar[r]];
    }
}

int polybasis_index(const PolyBasis *pb, const Term *t) {
    if (t->kind == TERM_CONST) return 0;
    if (t->kind != TERM_MONO) return -1;
    int d = 0;
    for (int f = 0; f < t->n_fac; f++) d += t->pow[f];
    if (d > pb->degree) return -1;
    /* the basis is a library: match by term */
    for (int r = 0; r < pb->n_terms; r++) {
        const Term *b = &pb->basis.terms[r];
        if (b->kind != TERM_MONO || b->n_fac != t->n_fac) continue;
        int same = 1;
        for (int f = 0; f < t->n_fac && same; f++) same = b->var[f] == t->var[f] && b->pow[f] == t->pow[f];
        if (same) return r;
    }
    return -1;
}

/* dst (p) = src (p) * (sum_w q[w] sigma_w + q0): one factor of an expansion. */
static void mul_affine(const PolyBasis *pb, double *dst, const double *src, const double *q, double q0) {
    int p = pb->n_terms, n = pb->n_vars;
    memset(dst, 0, (size_t)p * sizeof *dst);
    for (int r = 0; r < p; r++) {
        double a = src[r];
        if (a == 0) continue;
        dst[r] += a * q0;
        const int *m = pb->mul + (long)r * n;
        for (int w = 0; w < n; w++)
            if (q[w] != 0 && m[w] >= 0) dst[m[w]] += a * q[w];
    }
}

void polymap_apply(PolyBasis *pb, double *out, const Library *lib, const double *coef, int m, const double *Q,
                   const double *c) {
    int p = pb->n_terms, n = pb->n_vars;
    NN_CHECK(lib->n_vars == n, "polymap_apply: the library has %d variables, the basis %d", lib->n_vars, n);
    double q0[LIB_MAX_VARS];   /* q0 = -Q c */
    for (int v = 0; v < n; v++) {
        double acc = 0;
        if (c)
            for (int w = 0; w < n; w++) acc -= Q[v * n + w] * c[w];
        q0[v] = acc;
    }
    memset(out, 0, (size_t)p * m * sizeof *out);
    double *a = pb->work, *b = pb->work + p;
    for (int t = 0; t < lib->n_terms; t++) {
        const Term *term = &lib->terms[t];
        if (term->kind != TERM_CONST && term->kind != TERM_MONO) continue;
        const double *row = coef + (long)t * m;
        int any = 0;
        for (int j = 0; j < m; j++) any |= row[j] != 0;
        if (!any) continue;
        memset(a, 0, (size_t)p * sizeof *a);
        a[0] = 1.0;   /* the constant is the first basis term */
        if (term->kind == TERM_MONO)
            for (int f = 0; f < term->n_fac; f++)
                for (int e = 0; e < term->pow[f]; e++) {
                    int v = term->var[f];
                    mul_affine(pb, b, a, Q + (long)v * n, q0[v]);
                    double *tmp = a;
                    a = b;
                    b = tmp;
                }
        for (int r = 0; r < p; r++) {
            if (a[r] == 0) continue;
            for (int j = 0; j < m; j++) out[(long)r * m + j] += a[r] * row[j];
        }
    }
}
