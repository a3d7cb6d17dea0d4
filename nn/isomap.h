/* nn/isomap.h: a low-dimensional embedding of samples that lie near a curved manifold, for
 * initialising an encoder whose latent must follow the manifold without folding.
 *
 * Isomap (J. B. Tenenbaum, V. de Silva, J. C. Langford, "A Global Geometric Framework for Nonlinear
 * Dimensionality Reduction", Science 290, 2000): a k-nearest-neighbour graph with Euclidean edge
 * lengths, geodesic distances as shortest paths in it (Dijkstra), then classical multidimensional
 * scaling of those distances (the top eigenvectors of the double-centred matrix -1/2 J D^2 J).
 *
 *     double *Y = ...;                       (n, d)
 *     isomap_embed(X (n, dim) float, n, dim, d, k, Y, &k_used, st);
 *
 * k = 0 picks the smallest k from 4 up to ISOMAP_KMAX that connects the graph: a larger k than that
 * risks edges that short-cut the manifold (two frames far apart along it that look alike), and a
 * smaller one leaves it in pieces that classical scaling cannot place. Each output column is
 * centred and scaled to unit variance, its sign fixed so that its largest-magnitude entry is
 * positive. Deterministic. Memory: about 3 n^2 doubles (n = 2000: 96 MB); callers subsample. */
#ifndef NN_ISOMAP_H
#define NN_ISOMAP_H

#include "nn/core.h"

#define ISOMAP_KMAX 32
#define ISOMAP_KBRIDGE 8        /* k = 0 and no k up to ISOMAP_KMAX connects: neighbours kept */
#define ISOMAP_MAX_BRIDGES 64   /* groups that can be joined, less one */

/* k = 0 and the graph still in pieces at ISOMAP_KMAX neighbours (separate groups of samples, such as
 * recordings that never pass through the same states): the graph of ISOMAP_KBRIDGE neighbours is
 * kept and its groups are joined by the shortest edges between them, nearest groups first (the
 * minimum spanning tree over the groups; *bridges, when not NULL, receives their number, else 0),
 * so that geodesic distances across groups run through their closest samples.
 * ST_INPUT when n < d + 2 or d < 1, when the graph is not connected at a k given by the caller, when
 * there are more than ISOMAP_MAX_BRIDGES + 1 groups, or when the geodesic distances have fewer than
 * d positive directions; ST_RUNTIME when LAPACK fails. */
int isomap_embed(const float *X, long n, long dim, int d, int k, double *Y, int *k_used, int *bridges, Status *st);

#endif
