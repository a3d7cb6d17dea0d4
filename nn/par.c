/* nn/par.c: a small pool of threads for par_for (see par.h).
 *
 * A call publishes the job (function, range, chunk count) under the mutex with a new generation,
 * then every thread, the caller included, claims chunks in order with a compare-and-swap on a
 * counter tagged with the generation, until none is left; the caller then waits for the chunks
 * still running. The caller never waits for a worker to wake up: a worker that starts late finds
 * the chunks taken and goes back to waiting, so a call costs no more than running it alone.
 *
 * Between calls a worker watches for the next job for PAR_SPIN_NS (0.1 ms), then sleeps on a
 * condition variable. A training step is a chain of passes and products split here (mat_gemm
 * splits its large products through par_for, with OpenBLAS's own threading at 1) with short serial
 * stretches between them: a worker that waits for the next job awake takes its share at once, where
 * one woken from sleep often comes too late for a short job. A longer pause (between epochs, the
 * serial passes) costs it 0.1 ms of one core. A worker woken late costs nothing either: it finds the
 * chunks taken. */
#include "nn/par.h"

#include <pthread.h>
#include <sched.h>
#include <stdatomic.h>
#include <time.h>

#include "nn/core.h"

static struct {
    pthread_mutex_t mu, call;       /* mu guards the job and the counts; call serialises par_for */
    pthread_cond_t go;
    int threads;                    /* threads a call may use, the caller included */
    int started;                    /* workers running (ids 1..started) */
    int sleeping;                   /* workers waiting on go */
    atomic_ulong gen;               /* job generation, bumped under mu when a job is published */
    ParFn fn;                       /* the job (under mu) */
    void *ctx;
    long n, grain, chunks;
    atomic_ulong claim;             /* (generation << 32) | next chunk */
    atomic_long done;               /* chunks finished in the current job */
} pool = {PTHREAD_MUTEX_INITIALIZER, PTHREAD_MUTEX_INITIALIZER, PTHREAD_COND_INITIALIZER, 1, 0, 0, 0, NULL, NULL,
          0, 0, 0, 0, 0};

#define PAR_SPIN_NS 100000L /* how long a worker watches for the next job */
static inline void spin_pause(void) {
#if defined(__x86_64__) || defined(__i386__)
    __builtin_ia32_pause();
#else
    atomic_signal_fence(memory_order_seq_cst);
#endif
}

static long now_ns(void) {
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec * 1000000000L + ts.tv_nsec;
}

/* A worker done with a job watches for the next one for PAR_SPIN_NS before it sleeps. */
static void spin_while_idle(unsigned long seen) {
    long until = now_ns() + PAR_SPIN_NS;
    for (;;) {
        for (int k = 0; k < 64; k++) {
            if (atomic_load(&pool.gen) != seen) return;
            spin_pause();
        }
        if (now_ns() > until) return;
    }
}

static unsigned long start_gen[PAR_MAX_THREADS]; /* the generation current when worker i started */

/* Claim and run chunks of job `gen` until none is left. */
static void run_chunks(unsigned long gen, ParFn fn, void *ctx, long n, long grain, long chunks) {
    unsigned long tag = (gen & 0xffffffffUL) << 32;
    for (;;) {
        unsigned long c = atomic_load(&pool.claim);
        if ((c & ~0xffffffffUL) != tag || (long)(c & 0xffffffffUL) >= chunks) return;
        if (!atomic_compare_exchange_weak(&pool.claim, &c, c + 1)) continue;
        long i = (long)(c & 0xffffffffUL), lo = i * grain, hi = lo + grain < n ? lo + grain : n;
        fn(ctx, lo, hi);
        atomic_fetch_add(&pool.done, 1);
    }
}

static void *worker(void *arg) {
    int id = (int)(long)arg;
    pthread_mutex_lock(&pool.mu);
    unsigned long seen = start_gen[id];
    pthread_mutex_unlock(&pool.mu);
    for (;;) {
        spin_while_idle(seen);
        pthread_mutex_lock(&pool.mu);
        if (pool.gen == seen) {
            pool.sleeping++;
            while (pool.gen == seen) pthread_cond_wait(&pool.go, &pool.mu);
            pool.sleeping--;
        }
        seen = pool.gen;
        ParFn fn = pool.fn;
        void *ctx = pool.ctx;
        long n = pool.n, grain = pool.grain, chunks = pool.chunks;
        int active = id < pool.threads;
        pthread_mutex_unlock(&pool.mu);
        if (active) run_chunks(seen, fn, ctx, n, grain, chunks);
    }
    return NULL;
}

void par_set_threads(int n) {
    if (n < 1) n = 1;
    if (n > PAR_MAX_THREADS) n = PAR_MAX_THREADS;
    pthread_mutex_lock(&pool.call);
    pthread_mutex_lock(&pool.mu);
    pool.threads = n;
    pthread_mutex_unlock(&pool.mu);
    pthread_mutex_unlock(&pool.call);
}

int par_threads(void) {
    pthread_mutex_lock(&pool.mu);
    int n = pool.threads;
    pthread_mutex_unlock(&pool.mu);
    return n;
}

void par_for(long n, long grain, ParFn fn, void *ctx) {
    if (n <= 0) return;
    if (grain < 1) grain = 1;
    long chunks = (n + grain - 1) / grain;
    if (chunks < 2 || chunks > 0xffffffffL || pthread_mutex_trylock(&pool.call) != 0) {
        fn(ctx, 0, n);
        return;
    }
    pthread_mutex_lock(&pool.mu);
    int threads = pool.threads;
    if (threads < 2) {
        pthread_mutex_unlock(&pool.mu);
        pthread_mutex_unlock(&pool.call);
        fn(ctx, 0, n);
        return;
    }
    while (pool.started < threads - 1) { /* start the workers this call may use */
        pthread_t th;
        pthread_attr_t at;
        pthread_attr_init(&at);
        pthread_attr_setdetachstate(&at, PTHREAD_CREATE_DETACHED);
        start_gen[pool.started + 1] = pool.gen;
        int rc = pthread_create(&th, &at, worker, (void *)(long)(pool.started + 1));
        pthread_attr_destroy(&at);
        if (rc) break;
        pool.started++;
    }
    unsigned long gen = pool.gen + 1;
    pool.fn = fn;
    pool.ctx = ctx;
    pool.n = n;
    pool.grain = grain;
    pool.chunks = chunks;
    atomic_store(&pool.done, 0);
    atomic_store(&pool.claim, (gen & 0xffffffffUL) << 32);
    atomic_store(&pool.gen, gen);
    if (pool.sleeping) pthread_cond_broadcast(&pool.go);
    pthread_mutex_unlock(&pool.mu);
    run_chunks(gen, fn, ctx, n, grain, chunks);
    for (int k = 0; atomic_load(&pool.done) < chunks; k++) /* chunks still running elsewhere */
        if (k > 64) sched_yield();
    pthread_mutex_unlock(&pool.call);
}
