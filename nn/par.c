/* nn/par.c: a small pool of threads for par_for (see par.h).
 *
 * Workers sleep on a condition variable between calls (no spinning: OpenBLAS's threads share the
 * same cores and spin after each product). A call publishes the job under the mutex, bumps the
 * generation and wakes every worker; worker i runs part i when the job has that many parts. */
#include "nn/par.h"

#include <pthread.h>

#include "nn/core.h"

static struct {
    pthread_mutex_t mu, call;       /* mu guards the fields below; call serialises par_for */
    pthread_cond_t go, done;
    int threads;                    /* parts a call may use */
    int started;                    /* workers running (ids 1..started) */
    unsigned long gen;              /* job generation */
    int pending;                    /* workers that have not finished the current job */
    ParFn fn;
    void *ctx;
    long n, grain;
    int parts;
} pool = {PTHREAD_MUTEX_INITIALIZER, PTHREAD_MUTEX_INITIALIZER, PTHREAD_COND_INITIALIZER,
          PTHREAD_COND_INITIALIZER, 1, 0, 0, 0, NULL, NULL, 0, 0, 0};

/* Part p of n in `parts` pieces of whole grains. */
static void part_range(long n, long grain, int parts, int p, long *lo, long *hi) {
    long chunks = (n + grain - 1) / grain;
    *lo = chunks * p / parts * grain;
    *hi = p == parts - 1 ? n : chunks * (p + 1) / parts * grain;
    if (*hi > n) *hi = n;
}

static unsigned long start_gen[PAR_MAX_THREADS]; /* the generation current when worker i started */

static void *worker(void *arg) {
    int id = (int)(long)arg;
    pthread_mutex_lock(&pool.mu);
    unsigned long seen = start_gen[id];
    for (;;) {
        while (pool.gen == seen) pthread_cond_wait(&pool.go, &pool.mu);
        seen = pool.gen;
        ParFn fn = pool.fn;
        void *ctx = pool.ctx;
        long n = pool.n, grain = pool.grain;
        int parts = pool.parts;
        pthread_mutex_unlock(&pool.mu);
        if (id < parts) {
            long lo, hi;
            part_range(n, grain, parts, id, &lo, &hi);
            if (lo < hi) fn(ctx, lo, hi);
        }
        pthread_mutex_lock(&pool.mu);
        if (--pool.pending == 0) pthread_cond_signal(&pool.done);
    }
    return NULL;
}

void par_set_threads(int n) {
    if (n < 1) n = 1;
    if (n > PAR_MAX_THREADS) n = PAR_MAX_THREADS;
    pthread_mutex_lock(&pool.call);
    pool.threads = n;
    pthread_mutex_unlock(&pool.call);
}

int par_threads(void) {
    pthread_mutex_lock(&pool.call);
    int n = pool.threads;
    pthread_mutex_unlock(&pool.call);
    return n;
}

void par_for(long n, long grain, ParFn fn, void *ctx) {
    if (n <= 0) return;
    if (grain < 1) grain = 1;
    long chunks = (n + grain - 1) / grain;
    if (chunks < 2 || pthread_mutex_trylock(&pool.call) != 0) {
        fn(ctx, 0, n);
        return;
    }
    if (pool.threads < 2) {
        pthread_mutex_unlock(&pool.call);
        fn(ctx, 0, n);
        return;
    }
    int parts = pool.threads < chunks ? pool.threads : (int)chunks;
    pthread_mutex_lock(&pool.mu);
    while (pool.started < parts - 1) { /* start the workers this call needs */
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
    if (parts > pool.started + 1) parts = pool.started + 1;
    pool.fn = fn;
    pool.ctx = ctx;
    pool.n = n;
    pool.grain = grain;
    pool.parts = parts;
    pool.pending = pool.started;
    pool.gen++;
    if (pool.started) pthread_cond_broadcast(&pool.go);
    pthread_mutex_unlock(&pool.mu);
    long lo, hi;
    part_range(n, grain, parts, 0, &lo, &hi);
    fn(ctx, lo, hi);
    pthread_mutex_lock(&pool.mu);
    while (pool.pending > 0) pthread_cond_wait(&pool.done, &pool.mu);
    pthread_mutex_unlock(&pool.mu);
    pthread_mutex_unlock(&pool.call);
}
