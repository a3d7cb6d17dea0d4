/* nn/isomap.c: Isomap embedding (see isomap.h). */
#include "nn/isomap.h"

#include <cblas.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "nn/mat.h"

/* LAPACK (Fortran interface, in OpenBLAS): eigenpairs of a symmetric matrix, by index range. */
extern void dsyevr_(const char *jobz, const char *range, const char *uplo, const int *n, double *a, const int *lda,
                    const double *vl, const double *vu, const int *il, const int *iu, const double *abstol, int *m,
                    double *w, double *z, const int *ldz, int *isuppz, double *work, const int *lwork, int *iwork,
                    const int *liwork, int *info);

/* ---- k nearest neighbours ---------------------------------------------------------------------- */

/* The kmax nearest of sample i (itself excluded), nearest first, ties by index: a bounded insertion
 * (kmax is small), no sort of the whole row. */
static void nearest(const double *row, long n, long i, int kmax, long *out, double *dist) {
    int cnt = 0;
    for (long j = 0; j < n; j++) {
        if (j == i) continue;
        double d = row[j];
        if (cnt == kmax && d >= dist[kmax - 1]) continue;
        int p = cnt < kmax ? cnt++ : kmax - 1;
        while (p > 0 && dist[p - 1] > d) dist[p] = dist[p - 1], out[p] = out[p - 1], p--;
        dist[p] = d, out[p] = j;
    }
}

static long find(long *parent, long i) {
    while (parent[i] != i) i = parent[i] = parent[parent[i]];
    return i;
}

/* components of the symmetrised k-nearest-neighbour graph */
static long components(const long *nbr, long n, int kmax, int k, long *parent) {
    for (long i = 0; i < n; i++) parent[i] = i;
    long c = n;
    for (long i = 0; i < n; i++)
        for (int a = 0; a < k; a++) {
            long ri = find(parent, i), rj = find(parent, nbr[i * kmax + a]);
            if (ri != rj) parent[ri] = rj, c--;
        }
    return c;
}

/* ---- shortest paths (Dijkstra with a binary heap, lazy deletion) ------------------------------- */

typedef struct {
    double d;
    long v;
} HeapItem;

static void heap_push(HeapItem *h, long *size, double d, long v) {
    long i = (*size)++;
    while (i > 0) {
        long p = (i - 1) / 2;
        if (h[p].d <= d) break;
        h[i] = h[p];
        i = p;
    }
    h[i].d = d, h[i].v = v;
}

static HeapItem heap_pop(HeapItem *h, long *size) {
    HeapItem top = h[0], last = h[--(*size)];
    long i = 0, n = *size;
    for (;;) {
        long c = 2 * i + 1;
        if (c >= n) break;
        if (c + 1 < n && h[c + 1].d < h[c].d) c++;
        if (last.d <= h[c].d) break;
        h[i] = h[c];
        i = c;
    }
    if (n > 0) h[i] = last;
    return top;
}

/* ---- the embedding ----------------------------------------------------------------------------- */

static int embed(const float *X, long n, long dim, int d, int k, double *Y, int *k_used, int *bridges, Status *st) {
    if (d > 64) return status_set(st, ST_INPUT, "isomap: at most 64 dimensions (asked %d)", d);
    if (d < 1 || n < d + 2) return status_set(st, ST_INPUT, "isomap: %ld samples for %d dimensions", n, d);
    int kmax = ISOMAP_KMAX < n - 1 ? ISOMAP_KMAX : (int)(n - 1);
    if (k > kmax) return status_set(st, ST_INPUT, "isomap: %d neighbours asked of %ld samples", k, n);
    int rc = 0;
    double *Xd = nn_alloc((size_t)n * dim * sizeof(double));
    double *D = nn_alloc((size_t)n * n * sizeof(double)); /* squared distances, then the centred matrix */
    double *S = nn_alloc((size_t)n * n * sizeof(double)); /* geodesic distances */
    double *sq = nn_alloc((size_t)n * sizeof(double));
    long *nbr = nn_alloc((size_t)n * kmax * sizeof(long));
    long *parent = nn_alloc((size_t)n * sizeof(long));
    for (long i = 0; i < n * dim; i++) Xd[i] = X[i];
    /* Gram matrix (upper triangle, row-major), then squared distances |xi|^2 + |xj|^2 - 2 xi.xj */
    cblas_dsyrk(CblasRowMajor, CblasUpper, CblasNoTrans, (int)n, (int)dim, 1.0, Xd, (int)dim, 0.0, D, (int)n);
    for (long i = 0; i < n; i++) sq[i] = D[i * n + i];
    for (long i = 0; i < n; i++)
        for (long j = i; j < n; j++) {
            double v = sq[i] + sq[j] - 2 * D[i * n + j];
            D[i * n + j] = D[j * n + i] = i == j || v < 0 ? 0 : v;
        }
    nn_free(Xd);
    /* the kmax nearest of each sample (itself excluded) */
    for (long i = 0; i < n; i++) nearest(D + i * n, n, i, kmax, nbr + i * kmax, sq); /* sq: scratch */
    long bi[ISOMAP_MAX_BRIDGES], bj[ISOMAP_MAX_BRIDGES]; /* extra edges that join separate groups */
    int nb = 0;
    if (k == 0) {
        for (k = 4; k <= kmax && components(nbr, n, kmax, k, parent) > 1; k++) {}
        if (k > kmax) {
            /* separate groups of samples (recordings that never pass through the same states): keep the
             * neighbours of ISOMAP_KBRIDGE and join the groups, nearest pair first, by the shortest edge
             * between two of them (a minimum spanning tree over the groups) */
            k = ISOMAP_KBRIDGE < kmax ? ISOMAP_KBRIDGE : kmax;
            long groups = components(nbr, n, kmax, k, parent);
            if (groups - 1 > ISOMAP_MAX_BRIDGES) {
                rc = status_set(st, ST_INPUT, "isomap: the samples form %ld separate groups (at most %d can be joined)",
                                groups, ISOMAP_MAX_BRIDGES + 1);
                goto out;
            }
            while (groups > 1) {
                double best = INFINITY;
                long a = -1, b = -1;
                for (long i = 0; i < n; i++)
                    for (long j = i + 1; j < n; j++)
                        if (D[i * n + j] < best && find(parent, i) != find(parent, j)) best = D[i * n + j], a = i, b = j;
                bi[nb] = a, bj[nb] = b, nb++;
                parent[find(parent, a)] = find(parent, b);
                groups--;
            }
        }
    } else if (components(nbr, n, kmax, k, parent) > 1) {
        rc = status_set(st, ST_INPUT, "isomap: the %d-nearest-neighbour graph of the %ld samples is in %ld pieces", k, n,
                        components(nbr, n, kmax, k, parent));
        goto out;
    }
    *k_used = k;
    if (bridges) *bridges = nb;
    {
        /* symmetrised adjacency: i -> its k nearest, and j -> i whenever i lists j */
        long *deg = nn_calloc((size_t)n + 1, sizeof(long));
        for (long i = 0; i < n; i++)
            for (int a = 0; a < k; a++) deg[i + 1]++, deg[nbr[i * kmax + a] + 1]++;
        for (int e = 0; e < nb; e++) deg[bi[e] + 1]++, deg[bj[e] + 1]++;
        for (long i = 0; i < n; i++) deg[i + 1] += deg[i];
        long m = deg[n], *fill = nn_alloc((size_t)n * sizeof(long)), *adj = nn_alloc((size_t)m * sizeof(long));
        double *len = nn_alloc((size_t)m * sizeof(double));
        memcpy(fill, deg, (size_t)n * sizeof(long));
        for (long i = 0; i < n; i++)
            for (int a = 0; a < k; a++) {
                long j = nbr[i * kmax + a];
                double l = sqrt(D[i * n + j]);
                adj[fill[i]] = j, len[fill[i]++] = l;
                adj[fill[j]] = i, len[fill[j]++] = l;
            }
        for (int e = 0; e < nb; e++) {
            long i = bi[e], j = bj[e];
            double l = sqrt(D[i * n + j]);
            adj[fill[i]] = j, len[fill[i]++] = l;
            adj[fill[j]] = i, len[fill[j]++] = l;
        }
        HeapItem *heap = nn_alloc((size_t)(m + 1) * sizeof(HeapItem));
        for (long s = 0; s < n; s++) {
            double *dist = S + s * n;
            for (long j = 0; j < n; j++) dist[j] = INFINITY;
            long size = 0;
            dist[s] = 0;
            heap_push(heap, &size, 0, s);
            while (size > 0) {
                HeapItem it = heap_pop(heap, &size);
                if (it.d > dist[it.v]) continue;
                for (long e = deg[it.v]; e < deg[it.v + 1]; e++) {
                    double nd = it.d + len[e];
                    if (nd < dist[adj[e]]) dist[adj[e]] = nd, heap_push(heap, &size, nd, adj[e]);
                }
            }
        }
        nn_free(heap), nn_free(len), nn_free(adj), nn_free(fill), nn_free(deg);
    }
    /* classical scaling: B = -1/2 J S^2 J (S symmetrised against rounding), into D */
    {
        double tot = 0;
        for (long i = 0; i < n; i++) sq[i] = 0;
        for (long i = 0; i < n; i++)
            for (long j = 0; j < n; j++) {
                double s = 0.5 * (S[i * n + j] + S[j * n + i]);
                D[i * n + j] = s * s;
                sq[i] += s * s;
            }
        for (long i = 0; i < n; i++) tot += sq[i], sq[i] /= (double)n;
        tot /= (double)n * (double)n;
        for (long i = 0; i < n; i++)
            for (long j = 0; j < n; j++) D[i * n + j] = -0.5 * (D[i * n + j] - sq[i] - sq[j] + tot);
    }
    {
        int N = (int)n, il = N - d + 1, iu = N, mfound = 0, info = 0, lwork = -1, liwork = -1, iwq = 0;
        double vl = 0, vu = 0, abstol = 0, wq = 0, w[64];
        double *z = S; /* the geodesic distances are no longer needed */
        int *isuppz = nn_alloc((size_t)2 * d * sizeof(int));
        double *wall = nn_alloc((size_t)n * sizeof(double));
        dsyevr_("V", "I", "U", &N, D, &N, &vl, &vu, &il, &iu, &abstol, &mfound, wall, z, &N, isuppz, &wq, &lwork, &iwq,
                &liwork, &info);
        lwork = (int)wq;
        liwork = iwq;
        double *work = nn_alloc((size_t)lwork * sizeof(double));
        int *iwork = nn_alloc((size_t)liwork * sizeof(int));
        dsyevr_("V", "I", "U", &N, D, &N, &vl, &vu, &il, &iu, &abstol, &mfound, wall, z, &N, isuppz, work, &lwork,
                iwork, &liwork, &info);
        memcpy(w, wall, (size_t)d * sizeof(double));
        nn_free(work), nn_free(iwork), nn_free(isuppz), nn_free(wall);
        if (info != 0 || mfound != d) {
            rc = status_set(st, ST_RUNTIME, "isomap: LAPACK dsyevr failed (info %d, %d of %d eigenpairs)", info, mfound, d);
            goto out;
        }
        for (int c = 0; c < d; c++) {
            int src = d - 1 - c; /* ascending from dsyevr: largest first */
            if (!(w[src] > 0)) {
                rc = status_set(st, ST_INPUT, "isomap: the geodesic distances have only %d positive directions", c);
                goto out;
            }
            const double *v = z + (long)src * n;
            double mean = 0, var = 0, big = 0;
            for (long i = 0; i < n; i++) mean += v[i];
            mean /= (double)n;
            for (long i = 0; i < n; i++) {
                double e = v[i] - mean;
                var += e * e;
                if (fabs(e) > fabs(big)) big = e;
            }
            double scale = (big < 0 ? -1 : 1) / sqrt(var / (double)n);
            for (long i = 0; i < n; i++) Y[i * d + c] = (v[i] - mean) * scale;
        }
    }
out:
    nn_free(D), nn_free(S), nn_free(sq), nn_free(nbr), nn_free(parent);
    return rc;
}

int isomap_embed(const float *X, long n, long dim, int d, int k, double *Y, int *k_used, int *bridges, Status *st) {
    int blas = nn_blas_wide(); /* the LAPACK and level-3 calls on every thread of the pool */
    int rc = embed(X, n, dim, d, k, Y, k_used, bridges, st);
    nn_set_blas_threads(blas);
    return rc;
}
