/* nn/par.h: parallel loops for the elementwise passes of a training step.
 *
 * par_for(n, grain, fn, ctx) splits [0, n) into chunks of `grain` (the last one shorter) and runs
 * fn(ctx, lo, hi) once per chunk; the calling thread and up to par_threads() - 1 pool threads take
 * the chunks in order as they come free, and par_for returns when every chunk is done. A pass with
 * fewer than two chunks runs on the calling thread alone, as one call.
 *
 * Determinism: which thread runs a chunk varies from call to call, so fn must not depend on it.
 * An elementwise pass gives the same bits anyway. A reduction must not sum across chunks in
 * arrival order: give each fixed block of the index range its own partial result and combine the
 * blocks in index order afterwards; then the result is the same for every thread count (nn/tape.c's
 * reductions do so).
 *
 * The pool is process-wide and holds no data between calls. Its size follows nn_set_threads
 * (nn/mat.h), which also makes mat_gemm split its large products over it. A par_for called while
 * another is running (from a second thread, or from one of its own chunks) runs serially on its
 * caller. */
#ifndef NN_PAR_H
#define NN_PAR_H

typedef void (*ParFn)(void *ctx, long lo, long hi);

#define PAR_MAX_THREADS 64

void par_set_threads(int n);    /* 1..PAR_MAX_THREADS; workers start on the first parallel call */
int par_threads(void);
void par_for(long n, long grain, ParFn fn, void *ctx);

#endif
