/* tests/test_par.c: nn/par's parallel loop: every index runs exactly once, each call is one whole
 * chunk of `grain`, small passes stay on the calling thread as one call, and the pool follows the
 * thread count (common practice: a chunked loop covers its range exactly). */
#include <pthread.h>

#include "nn/par.h"
#include "tests/testutil.h"

typedef struct {
    int *hits;      /* (n) how often each index ran */
    long grain, n;
    int calls;
    int bad_bounds;
    pthread_t caller;
    int other_thread;
    pthread_mutex_t mu;
} Count;

static void count_range(void *ctx, long lo, long hi) {
    Count *c = ctx;
    pthread_mutex_lock(&c->mu);
    c->calls++;
    if (lo % c->grain || (hi - lo != c->grain && hi != c->n) || hi <= lo) c->bad_bounds++;
    if (!pthread_equal(pthread_self(), c->caller)) c->other_thread = 1;
    pthread_mutex_unlock(&c->mu);
    for (long i = lo; i < hi; i++) c->hits[i]++;   /* disjoint ranges: no lock needed */
}

static void test_every_index_once(void **state) {
    (void)state;
    static const long ns[] = {0, 1, 5, 63, 64, 1000, 12345};
    static const long grains[] = {1, 7, 64, 5000};
    for (int th = 1; th <= 4; th++) {
        par_set_threads(th);
        assert_int_equal(par_threads(), th);
        for (size_t a = 0; a < sizeof ns / sizeof ns[0]; a++)
            for (size_t g = 0; g < sizeof grains / sizeof grains[0]; g++) {
                long n = ns[a];
                Count c = {calloc((size_t)n + 1, sizeof(int)), grains[g], n, 0, 0, pthread_self(), 0,
                           PTHREAD_MUTEX_INITIALIZER};
                par_for(n, grains[g], count_range, &c);
                for (long i = 0; i < n; i++) assert_int_equal(c.hits[i], 1);
                long chunks = (n + grains[g] - 1) / grains[g];
                if (chunks < 2 || th == 1) { /* one call, on the caller */
                    assert_int_equal(c.calls, n > 0 ? 1 : 0);
                    assert_false(c.other_thread);
                } else { /* one call per chunk, each a whole grain (the last up to n) */
                    assert_int_equal(c.calls, chunks);
                    assert_int_equal(c.bad_bounds, 0);
                }
                free(c.hits);
            }
    }
    par_set_threads(1);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_every_index_once),
    };
    return cmocka_run_group_tests_name("par", tests, NULL, NULL);
}
