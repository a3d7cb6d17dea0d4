/* nn/par.h: parallel loops for the elementwise passes of a training step.
 *
 * par_for(n, grain, fn, ctx) runs fn(ctx, lo, hi) over a static partition of [0, n) into at most
 * par_threads() parts of whole grains (part p is [lo, hi) with lo, hi multiples of grain, except
 * the last hi = n); the calling thread runs part 0, pool threads the others, and par_for returns
 * when every part is done. A pass with fewer than two grains runs on the calling thread alone.
 *
 * Determinism: an elementwise pass gives the same bits for any partition. A reduction must not sum
 * across parts in arrival order: give each fixed block of the index range (not each part) its own
 * partial result and combine the blocks in index order afterwards; then the result is the same for
 * every thread count (nn/tape.c's reductions do so).
 *
 * The pool is process-wide, like OpenBLAS's own threads, and holds no data between calls. Its size
 * follows nn_set_threads (nn/mat.h), which sets both. A par_for called while another is running
 * (from a second thread) runs serially on its caller. */
#ifndef NN_PAR_H
#define NN_PAR_H

typedef void (*ParFn)(void *ctx, long lo, long hi);

#define PAR_MAX_THREADS 64

void par_set_threads(int n);    /* 1..PAR_MAX_THREADS; workers start on the first parallel call */
int par_threads(void);
void par_for(long n, long grain, ParFn fn, void *ctx);

#endif
