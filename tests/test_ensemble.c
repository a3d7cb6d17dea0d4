/* tests/test_ensemble.c: ensembles by bagging (sparse/ensemble.h; the method of ensembles of sparse
 * regressions in the low-data, high-noise limit, Proceedings of the Royal Society A, 2022).
 *
 * - Coverage: targets that are a known linear function of smooth states plus Gaussian noise of
 *   known variance; over 1000 or 2000 independent data sets (trials) the 90% interval of every
 *   coefficient must hold the true value in 86-94% of the trials. The binomial standard deviation
 *   at 90% is 0.95 points for 1000 trials and 0.67 for 2000, so a method whose true coverage is
 *   near 90% passes by several standard deviations, and one that covers 80% (or 97%) fails.
 *   Ensembles of 50 members: with the quantile definition of sparse/ensemble.h the interval between
 *   the 5% and 95% quantiles of M members holds a further member with probability 0.90 for any M,
 *   so 50 members give the same expected coverage as 100 at half the cost.
 * - Inclusion: a noisy Lorenz trajectory ("Deterministic nonperiodic flow", Journal of the
 *   Atmospheric Sciences, 1963: sigma 10, rho 28, beta 8/3), degree-2 library.
 * - Blocks never cross a recording boundary; determinism; forecast bands; bad arguments. */
#include "nn/mat.h"
#include "nn/rng.h"
#include "sparse/ensemble.h"
#include "sparse/integrate.h"
#include "sparse/library.h"
#include "sparse/stencil.h"
#include "tests/testutil.h"

/* ---- coverage ---------------------------------------------------------------------------------- */

enum { COV_REC = 4, COV_LEN = 250, COV_N = COV_REC * COV_LEN, COV_T = 3, COV_D = 1, COV_M = 50 };

/* The known law: y = 0.5 + 2 z1 - 1.5 z2 + noise, library [1, z1, z2]. Every coefficient is far
 * above the threshold 0.1 (its standard error is about 0.005), so the threshold passes prune
 * nothing and the interval is that of the least-squares coefficient. */
static const double XI_TRUE[COV_T * COV_D] = {0.5, 2.0, -1.5};

/* One data set: per recording, z(t) = amplitude (cos(w t + phase), sin(w' t + phase')) with random
 * amplitudes, frequencies and phases (smooth, so neighbouring samples are alike), and noise e of
 * standard deviation sigma that is white (phi = 0) or AR(1), e_i = phi e_{i-1} + sqrt(1 - phi^2)
 * sigma n_i, whose stationary variance is sigma^2 (common practice). */
static void cov_data(Rng *r, double phi, double *theta, double *y, int *rec, long *step) {
    const double sigma = 0.1, dt = 0.05;
    for (int k = 0; k < COV_REC; k++) {
        double a1 = 0.5 + rng_uniform(r), a2 = 0.5 + rng_uniform(r);
        double w1 = 1.5 + rng_uniform(r), w2 = 1.5 + rng_uniform(r);
        double p1 = 6.283185307179586 * rng_uniform(r), p2 = 6.283185307179586 * rng_uniform(r);
        double e[COV_D];
        for (int j = 0; j < COV_D; j++) e[j] = sigma * rng_normal(r);
        for (int i = 0; i < COV_LEN; i++) {
            long s = (long)k * COV_LEN + i;
            double t = i * dt, z1 = a1 * cos(w1 * t + p1), z2 = a2 * sin(w2 * t + p2);
            double *th = theta + s * COV_T;
            th[0] = 1, th[1] = z1, th[2] = z2;
            if (i > 0)
                for (int j = 0; j < COV_D; j++) e[j] = phi * e[j] + sqrt(1 - phi * phi) * sigma * rng_normal(r);
            for (int j = 0; j < COV_D; j++)
                y[s * COV_D + j] = th[0] * XI_TRUE[j] + th[1] * XI_TRUE[COV_D + j] + th[2] * XI_TRUE[2 * COV_D + j] + e[j];
            rec[s] = k;
            step[s] = i;
        }
    }
}

/* Coverage of every coefficient over `trials` data sets (fractions, (T, d)). */
static void coverage(double phi, long block, uint64_t seed, int trials, double *cov) {
    double *theta = malloc(sizeof(double) * COV_N * COV_T), *y = malloc(sizeof(double) * COV_N * COV_D);
    int *rec = malloc(sizeof(int) * COV_N);
    long *step = malloc(sizeof(long) * COV_N);
    int hits[COV_T * COV_D] = {0};
    Rng data, boot;
    rng_seed(&data, seed);
    rng_seed(&boot, seed + 1000);
    EnsembleOptions o = ensemble_defaults();
    o.members = COV_M;
    o.block = block;
    for (int trial = 0; trial < trials; trial++) {
        cov_data(&data, phi, theta, y, rec, step);
        Ensemble e;
        Status st;
        if (ensemble_fit_theta(&e, theta, y, rec, step, COV_N, COV_T, COV_D, &o, &boot, &st)) fail_msg("%s", st.msg);
        for (int i = 0; i < COV_T * COV_D; i++) hits[i] += e.q05[i] <= XI_TRUE[i] && XI_TRUE[i] <= e.q95[i];
        ensemble_free(&e);
    }
    for (int i = 0; i < COV_T * COV_D; i++) cov[i] = (double)hits[i] / trials;
    free(theta), free(y), free(rec), free(step);
}

static void print_coverage(const char *what, int trials, const double *cov) {
    printf("  %s: %d trials, the 90%% interval holds the true value in", what, trials);
    for (int i = 0; i < COV_T * COV_D; i++) printf(" %.1f%%", 100 * cov[i]);
    printf("\n");
}

static void check_coverage(const char *what, int trials, const double *cov) {
    print_coverage(what, trials, cov);
    for (int i = 0; i < COV_T * COV_D; i++)
        if (!(cov[i] >= 0.86 && cov[i] <= 0.94))
            fail_msg("%s: coefficient %d covered in %.1f%% of %d trials, outside 86-94%%", what, i + 1, 100 * cov[i],
                     trials);
}

/* White noise: every sample is independent given the states, so blocks of one sample (the plain
 * pairs bootstrap) are what the data call for; blocks of 10 must give the right coverage too (a
 * block of independent samples is as good a unit as one sample). */
static void test_coverage_white_noise(void **state) {
    (void)state;
    double cov[COV_T * COV_D];
    coverage(0.0, 1, 11, 1000, cov);
    check_coverage("white noise, block 1", 1000, cov);
    coverage(0.0, 10, 12, 1000, cov);
    check_coverage("white noise, block 10", 1000, cov);
}

/* AR(1) noise with phi = 0.3 (correlation 0.3^k at lag k): the long-run variance of a mean is
 * (1 + phi) / (1 - phi) = 1.86 times that of white noise (common practice), so blocks of one
 * sample make the interval of a mean about 1 / sqrt(1.86) = 0.73 times too narrow (coverage 77%;
 * about 80% measured here): blocks of one must fail the 86% edge for every coefficient. Blocks of 20 samples hold the correlations that matter (0.3^20 = 3e-11). The block
 * bootstrap still underestimates the variance somewhat (it down-weights the correlation at lag k
 * by 1 - k / block: 3% of the variance here) and, with 50 blocks per resample, a few per cent
 * more through the leverage of each block; its coverage sits near 88% (measured), and the 2000
 * trials keep that clear of the 86% edge (0.67 point standard deviation). */
static void test_coverage_correlated_noise(void **state) {
    (void)state;
    double cov[COV_T * COV_D];
    coverage(0.3, 20, 21, 2000, cov);
    check_coverage("AR(1) noise phi 0.3, block 20", 2000, cov);
    coverage(0.3, 1, 22, 500, cov);
    print_coverage("AR(1) noise phi 0.3, block 1", 500, cov);
    for (int i = 0; i < COV_T * COV_D; i++)
        if (!(cov[i] < 0.86))
            fail_msg("block 1 on correlated noise should under-cover; coefficient %d covered in %.1f%%", i + 1,
                     100 * cov[i]);
}

/* ---- Lorenz ------------------------------------------------------------------------------------ */

static const double SIGMA = 10.0, RHO = 28.0, BETA = 8.0 / 3.0;

static void lorenz(double t, const double *s, double *d, void *ctx) {
    (void)t, (void)ctx;
    d[0] = SIGMA * (s[1] - s[0]);
    d[1] = s[0] * (RHO - s[2]) - s[1];
    d[2] = s[0] * s[1] - BETA * s[2];
}

enum { LZ_REC = 4, LZ_LEN = 1000 };

/* Noisy Lorenz recordings: states with Gaussian noise of standard deviation `noise`, derivatives by
 * a Savitzky-Golay stencil (window 11, degree 3) of the noisy states, as `framelaw fit` does.
 * Fills s (N, 3), dx (N, 3), rec, step; returns N. */
static long lorenz_data(double noise, double **s_out, double **dx_out, int **rec_out, long **step_out) {
    const double dt = 0.005;
    Stencil sg;
    Status st;
    if (stencil_savgol(&sg, 11, 3, &st)) fail_msg("%s", st.msg);
    long nv = stencil_valid(&sg, LZ_LEN), N = LZ_REC * nv;
    double *s = malloc(sizeof(double) * N * 3), *dx = malloc(sizeof(double) * N * 3);
    int *rec = malloc(sizeof(int) * N);
    long *step = malloc(sizeof(long) * N);
    double *t = malloc(sizeof(double) * LZ_LEN), *y = malloc(sizeof(double) * LZ_LEN * 3);
    Rng r;
    rng_seed(&r, 7);
    for (int k = 0; k < LZ_REC; k++) {
        double y0[3] = {-8 + 4 * k, 7 - 3 * k, 27 + 2 * k};
        for (int i = 0; i < LZ_LEN; i++) t[i] = dt * (i + 1);
        OdeOptions opt = ode_defaults();
        opt.rtol = opt.atol = 1e-10;
        OdeReport rep;
        if (ode_solve(lorenz, NULL, 3, 0.0, y0, t, LZ_LEN, y, NULL, &opt, &rep, &st)) fail_msg("%s", st.msg);
        for (long i = 0; i < LZ_LEN * 3; i++) y[i] += noise * rng_normal(&r);
        stencil_apply_all(&sg, dt, y, LZ_LEN, 3, dx + (long)k * nv * 3, NULL);
        for (long i = 0; i < nv; i++) {
            long q = (long)k * nv + i;
            memcpy(s + q * 3, y + (i + sg.m) * 3, sizeof(double) * 3);
            rec[q] = k;
            step[q] = i + sg.m;
        }
    }
    free(t), free(y);
    *s_out = s, *dx_out = dx, *rec_out = rec, *step_out = step;
    return N;
}

/* The published law's coefficients (10 terms of degree <= 2, 3 equations). */
static void lorenz_truth(const Library *lib, double *truth) {
    for (int i = 0; i < 30; i++) truth[i] = 0;
    truth[library_find(lib, "z1") * 3 + 0] = -SIGMA;
    truth[library_find(lib, "z2") * 3 + 0] = SIGMA;
    truth[library_find(lib, "z1") * 3 + 1] = RHO;
    truth[library_find(lib, "z2") * 3 + 1] = -1;
    truth[library_find(lib, "z1*z3") * 3 + 1] = -1;
    truth[library_find(lib, "z3") * 3 + 2] = -BETA;
    truth[library_find(lib, "z1*z2") * 3 + 2] = 1;
}

/* Four recordings of 5 s sampled every 0.005 s, Gaussian noise of standard deviation 0.1 on every
 * state (about 1.2% of the states' standard deviation, printed), blocks of 25 samples (a little
 * over two stencil windows: the derivative errors of samples closer than a window are
 * correlated), threshold 0.5, 100 members. The 7 terms of the law have inclusion >= 0.9, every
 * other one <= 0.2; the ensemble law is the true law within 3% per coefficient (the
 * errors-in-variables bias and the smoothing of the stencil are what is left at this noise). */
static void test_lorenz_inclusion(void **state) {
    (void)state;
    double *s, *dx;
    int *rec;
    long *step;
    const double noise = 0.1;
    long N = lorenz_data(noise, &s, &dx, &rec, &step);
    LibrarySpec spec = library_spec_default(3, 1); /* constant, degree 2: 10 terms */
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &spec, &st), 0);
    assert_int_equal(lib.n_terms, 10);
    double truth[30];
    lorenz_truth(&lib, truth);
    EnsembleOptions o = ensemble_defaults();
    o.members = 100;
    o.block = 25;
    o.lsq.threshold = 0.5;
    Rng r;
    rng_seed(&r, 3);
    Ensemble e;
    if (ensemble_fit(&e, &lib, s, dx, rec, step, N, &o, &r, &st)) fail_msg("%s", st.msg);
    double sd[3];
    for (int j = 0; j < 3; j++) {
        double m = 0, q = 0;
        for (long i = 0; i < N; i++) m += s[i * 3 + j] / N;
        for (long i = 0; i < N; i++) q += (s[i * 3 + j] - m) * (s[i * 3 + j] - m) / N;
        sd[j] = sqrt(q);
    }
    printf("  Lorenz, %ld samples, state noise %g (states' standard deviation %.1f %.1f %.1f), block %ld, threshold "
           "%g: inclusion p and [5%%, 95%%]\n",
           N, noise, sd[0], sd[1], sd[2], o.block, o.lsq.threshold);
    for (int t = 0; t < 10; t++) {
        printf("   %-6s", lib.names[t]);
        for (int j = 0; j < 3; j++) printf("  p %.2f [%8.3f %8.3f]", e.prob[t * 3 + j], e.q05[t * 3 + j], e.q95[t * 3 + j]);
        printf("\n");
    }
    for (int tj = 0; tj < 30; tj++) {
        if (truth[tj] != 0) {
            if (e.prob[tj] < 0.9) fail_msg("true term %s (eq %d) has inclusion %.2f < 0.9", lib.names[tj / 3], tj % 3 + 1, e.prob[tj]);
            assert_int_equal(e.mask[tj], 1);
            assert_close(e.xi[tj], truth[tj], 0, 0.03);
        } else {
            if (e.prob[tj] > 0.2) fail_msg("term %s (eq %d) has inclusion %.2f > 0.2", lib.names[tj / 3], tj % 3 + 1, e.prob[tj]);
            assert_int_equal(e.mask[tj], 0);
            assert_true(e.xi[tj] == 0);
        }
    }
    ensemble_free(&e);
    library_free(&lib);
    free(s), free(dx), free(rec), free(step);
}

/* The same recordings, the members fitted by the selection bagged over its forecast segments
 * (ensemble_fit_select; segments of 100 samples, half a time unit: chaos separates longer forecasts
 * whatever the law), 30 members among the 8 best laws of the path: the same outside check as
 * thresholding (the 7 terms of the published law with inclusion >= 0.9, every other <= 0.2, the
 * ensemble law within 3%), the statistics those of the members' choices, and library bagging
 * refused by name. */
static void test_lorenz_inclusion_by_selection(void **state) {
    (void)state;
    double *s, *dx;
    int *rec;
    long *step;
    long N = lorenz_data(0.1, &s, &dx, &rec, &step);
    LibrarySpec spec = library_spec_default(3, 1);
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &spec, &st), 0);
    double truth[30];
    lorenz_truth(&lib, truth);
    long rs[LZ_REC + 1];
    int nr = 0;
    for (long i = 0; i < N; i++) /* the samples are in recording order, consecutive within each */
        if (i == 0 || rec[i] != rec[i - 1]) rs[nr++] = i;
    rs[nr] = N;
    assert_int_equal(nr, LZ_REC);
    SelectData D = {N, 3, 3, s, dx, nr, rs, 0.005};
    SelectOptions so = select_defaults();
    so.horizon = 100;
    EnsembleOptions o = ensemble_defaults();
    o.members = 30;
    Rng r;
    rng_seed(&r, 3);
    Ensemble e;
    if (ensemble_fit_select(&e, &lib, &D, &so, NULL, 8, &o, &r, &st)) fail_msg("%s", st.msg);
    assert_true(e.by_selection);
    assert_int_equal(e.segments, e.bag.segments);
    assert_int_equal(e.bag.horizon, 100);
    for (int tj = 0; tj < 30; tj++) {
        int kept = 0;
        for (int m = 0; m < e.members; m++) kept += e.kept[(long)m * 30 + tj];
        assert_true(e.prob[tj] == (double)kept / e.members);
        if (truth[tj] != 0) {
            if (e.prob[tj] < 0.9) fail_msg("true term %s (eq %d) has inclusion %.2f < 0.9", lib.names[tj / 3], tj % 3 + 1, e.prob[tj]);
            assert_int_equal(e.mask[tj], 1);
            assert_close(e.xi[tj], truth[tj], 0, 0.03);
        } else {
            if (e.prob[tj] > 0.2) fail_msg("term %s (eq %d) has inclusion %.2f > 0.2", lib.names[tj / 3], tj % 3 + 1, e.prob[tj]);
            assert_int_equal(e.mask[tj], 0);
        }
    }
    ensemble_free(&e);
    o.library_bagging = 1;
    assert_int_equal(ensemble_fit_select(&e, &lib, &D, &so, NULL, 8, &o, &r, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "library_bagging"));
    library_free(&lib);
    free(s), free(dx), free(rec), free(step);
}

/* ---- blocks ------------------------------------------------------------------------------------ */

/* Recordings of lengths 40, 3, 57 and 20 (the last with a gap in time after step 9), given in a
 * shuffled order: every drawn block is `block` samples of one recording with consecutive steps;
 * samples of runs shorter than the block are never drawn, all the others are. */
static void test_blocks_stay_in_recordings(void **state) {
    (void)state;
    enum { N = 40 + 3 + 57 + 20 };
    int rec[N];
    long step[N];
    long perm[N];
    long n = 0;
    const int len[4] = {40, 3, 57, 20};
    for (int k = 0; k < 4; k++)
        for (int i = 0; i < len[k]; i++, n++) {
            rec[n] = 10 + k;
            step[n] = i + (k == 3 && i >= 10 ? 5 : 0); /* recording 13: steps 0..9, then 15..24 */
        }
    Rng r;
    rng_seed(&r, 5);
    for (int i = 0; i < N; i++) perm[i] = i;
    rng_shuffle(&r, perm, N);
    int prec[N];
    long pstep[N];
    for (int i = 0; i < N; i++) prec[i] = rec[perm[i]], pstep[i] = step[perm[i]];
    const long blocks[3] = {1, 7, 12};
    for (int bi = 0; bi < 3; bi++) {
        BlockPlan bp;
        Status st;
        long B = blocks[bi];
        assert_int_equal(block_plan_init(&bp, prec, pstep, N, B, &st), 0);
        assert_int_equal(bp.n_seg, 5);
        long nb = block_plan_blocks(&bp);
        assert_int_equal(nb, (N + B - 1) / B);
        long idx[N], starts[N];
        int seen[N] = {0};
        for (int rep = 0; rep < 400; rep++) {
            block_plan_draw(&bp, &r, idx, starts);
            for (long b = 0; b < nb; b++) {
                long first = b * B, last = first + B < N ? first + B : N; /* idx positions of block b */
                for (long q = first; q < last; q++) {
                    long i = idx[q];
                    seen[i] = 1;
                    assert_int_equal(i, bp.order[starts[b] + (q - first)]);
                    if (q > first) {
                        long p = idx[q - 1];
                        if (prec[p] != prec[i] || pstep[i] != pstep[p] + 1)
                            fail_msg("block %ld of length %ld crosses from (recording %d, step %ld) to (%d, %ld)", b, B,
                                     prec[p], pstep[p], prec[i], pstep[i]);
                    }
                }
            }
        }
        for (int i = 0; i < N; i++) {
            /* runs: 40, 3, 57, 10, 10 samples */
            int run = prec[i] == 11 ? 3 : prec[i] == 13 ? 10 : prec[i] == 10 ? 40 : 57;
            if (seen[i] != (run >= B))
                fail_msg("block %ld: sample of recording %d step %ld %s", B, prec[i], pstep[i],
                         seen[i] ? "drawn from a run shorter than the block" : "never drawn");
        }
        long unreach = (B > 3 ? 3 : 0) + (B > 10 ? 20 : 0);
        assert_int_equal(bp.unreachable, unreach);
        block_plan_free(&bp);
    }
    /* longer than every run: refused, naming the block */
    BlockPlan bp;
    Status st;
    assert_int_equal(block_plan_init(&bp, prec, pstep, N, 58, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "block"));
    assert_non_null(strstr(st.msg, "57"));
}

/* ---- determinism, bands, library bagging ------------------------------------------------------- */

static void small_fit(Ensemble *e, uint64_t seed, int bag) {
    double *theta = malloc(sizeof(double) * COV_N * COV_T), *y = malloc(sizeof(double) * COV_N * COV_D);
    int *rec = malloc(sizeof(int) * COV_N);
    long *step = malloc(sizeof(long) * COV_N);
    Rng r;
    rng_seed(&r, 99);
    cov_data(&r, 0.0, theta, y, rec, step);
    EnsembleOptions o = ensemble_defaults();
    o.members = 50;
    o.block = 5;
    o.library_bagging = bag;
    o.drop_fraction = 0.34; /* one of the 3 terms */
    rng_seed(&r, seed);
    Status st;
    if (ensemble_fit_theta(e, theta, y, rec, step, COV_N, COV_T, COV_D, &o, &r, &st)) fail_msg("%s", st.msg);
    free(theta), free(y), free(rec), free(step);
}

static int same_bits(const Ensemble *a, const Ensemble *b) {
    long n = (long)a->members * a->n_terms * a->n_out, td = (long)a->n_terms * a->n_out;
    return !memcmp(a->coef, b->coef, sizeof(double) * n) && !memcmp(a->kept, b->kept, n) &&
           !memcmp(a->prob, b->prob, sizeof(double) * td) && !memcmp(a->median, b->median, sizeof(double) * td) &&
           !memcmp(a->q05, b->q05, sizeof(double) * td) && !memcmp(a->q95, b->q95, sizeof(double) * td) &&
           !memcmp(a->xi, b->xi, sizeof(double) * td);
}

static void test_determinism(void **state) {
    (void)state;
    Ensemble a, b, c;
    int threads = nn_get_threads();
    nn_set_threads(1);
    small_fit(&a, 42, 1);
    nn_set_threads(2);
    small_fit(&b, 42, 1);
    nn_set_threads(threads);
    small_fit(&c, 43, 1);
    assert_true(same_bits(&a, &b));
    assert_false(same_bits(&a, &c));
    ensemble_free(&a), ensemble_free(&b), ensemble_free(&c);
}

/* Library bagging: each member offers exactly 2 of the 3 terms; the inclusion probability counts
 * only the members that offered a term, so the true terms (never pruned when offered) still have
 * probability 1 and the interval holds the true value. */
static void test_library_bagging(void **state) {
    (void)state;
    Ensemble e;
    small_fit(&e, 1, 1);
    for (int m = 0; m < e.members; m++) {
        int off = 0;
        for (int t = 0; t < COV_T; t++) off += e.offered[m * COV_T + t];
        assert_int_equal(off, 2);
        for (int t = 0; t < COV_T; t++)
            for (int j = 0; j < COV_D; j++)
                if (!e.offered[m * COV_T + t]) assert_int_equal(e.kept[(m * COV_T + t) * COV_D + j], 0);
    }
    int total = 0;
    for (int t = 0; t < COV_T; t++) {
        total += e.n_offered[t];
        for (int j = 0; j < COV_D; j++) assert_true(e.prob[t * COV_D + j] == 1.0);
    }
    assert_int_equal(total, 2 * e.members);
    ensemble_free(&e);
}

/* Definition 6 of "Sample quantiles in statistical packages" (The American Statistician, 1996):
 * position p (n + 1). For 1..9: p = 0.5 -> 5; p = 0.05 -> position 0.5, clamped to 1; p = 0.25 ->
 * position 2.5 -> 2.5; values worked by hand. */
static void test_quantile(void **state) {
    (void)state;
    double v[9] = {9, 1, 8, 2, 7, 3, 6, 4, 5};
    assert_true(ensemble_quantile(v, 9, 0.5) == 5);
    assert_true(ensemble_quantile(v, 9, 0.05) == 1);
    assert_true(ensemble_quantile(v, 9, 0.25) == 2.5);
    assert_true(ensemble_quantile(v, 9, 0.95) == 9);
    double w[4] = {-INFINITY, 1, 2, 3};
    assert_true(ensemble_quantile(w, 4, 0.25) == -INFINITY); /* between -inf and 1 */
    assert_true(ensemble_quantile(w, 4, 0.1) == -INFINITY);
    assert_true(ensemble_quantile(w, 4, 0.5) == 1.5);
    assert_true(isnan(ensemble_quantile(w, 0, 0.5)));
}

/* Bands of dz/dt = a z fitted from noisy samples of exponential decays: every median lies in its
 * band; the band starts at width 0 (every member starts from y0) and widens like
 * y0 exp(a t) |q95(a) - q05(a)| t; a member that blows up counts as outside the band. */
static void test_bands(void **state) {
    (void)state;
    enum { R = 3, L = 200 };
    const double a = -0.7, dt = 0.02;
    double *s = malloc(sizeof(double) * R * L), *dx = malloc(sizeof(double) * R * L);
    int rec[R * L];
    long step[R * L];
    Rng r;
    rng_seed(&r, 8);
    for (int k = 0; k < R; k++)
        for (int i = 0; i < L; i++) {
            long q = (long)k * L + i;
            s[q] = (1 + k) * exp(a * i * dt);
            dx[q] = a * s[q] + 0.05 * rng_normal(&r);
            rec[q] = k, step[q] = i;
        }
    LibrarySpec spec = library_spec_default(1, 1);
    spec.degree = 1;
    spec.constant = 0;
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &spec, &st), 0);
    EnsembleOptions o = ensemble_defaults();
    o.block = 10;
    Ensemble e;
    if (ensemble_fit(&e, &lib, s, dx, rec, step, R * L, &o, &r, &st)) fail_msg("%s", st.msg);
    assert_true(e.q05[0] < a && a < e.q95[0]);
    enum { NO = 50 };
    double t_out[NO], y0 = 2.0, exact_width[NO];
    for (int i = 0; i < NO; i++) t_out[i] = 0.1 * i;
    OdeOptions opt = ode_defaults();
    opt.rtol = 1e-10, opt.atol = 1e-12;
    /* the bound: half the widest band, computed from the members' exact solutions below */
    double widest = 0;
    for (int i = 0; i < NO; i++) {
        double v[100];
        for (int m = 0; m < 100; m++) v[m] = y0 * exp(e.coef[m] * t_out[i]);
        double w = ensemble_quantile(v, 100, 0.95) - ensemble_quantile(v, 100, 0.05);
        if (w > widest) widest = w;
    }
    EnsembleBands b;
    if (ensemble_bands(&b, &e, &lib, &y0, 0.0, t_out, NO, 0, &opt, 1, 1.0, widest / 2, &st)) fail_msg("%s", st.msg);
    assert_int_equal(b.members, 100);
    assert_int_equal(b.stopped, 0);
    assert_true(b.width[0] == 0);
    for (int i = 0; i < NO; i++) {
        assert_int_equal(b.alive[i], 100);
        assert_true(b.q05[i] <= b.median[i] && b.median[i] <= b.q95[i]);
        /* member m is y0 exp(a_m t) exactly; the band is the quantiles of those values (rtol 1e-7:
         * dopri5 at rtol 1e-10 over a few time units) */
        double v[100];
        for (int m = 0; m < 100; m++) v[m] = y0 * exp(e.coef[m] * t_out[i]);
        assert_close(b.q05[i], ensemble_quantile(v, 100, 0.05), 1e-9, 1e-7);
        assert_close(b.q95[i], ensemble_quantile(v, 100, 0.95), 1e-9, 1e-7);
        assert_close(b.median[i], ensemble_quantile(v, 100, 0.5), 1e-9, 1e-7);
        exact_width[i] = ensemble_quantile(v, 100, 0.95) - ensemble_quantile(v, 100, 0.05);
    }
    /* the first time the width passes the bound */
    int first = -1;
    for (int i = 0; i < NO && first < 0; i++)
        if (exact_width[i] > widest / 2) first = i;
    assert_true(first > 0);
    if (first >= 0) assert_true(b.exceeds_at == t_out[first]);
    else assert_true(isnan(b.exceeds_at));
    ensemble_bands_free(&b);
    /* 10 of 20 members with a growing law that leaves the bound: the upper edge is +inf, the width
     * infinite, and the band is reported exceeded there */
    for (int m = 0; m < 10; m++) e.coef[m] = 5.0, e.kept[m] = 1;
    opt.bound = 100;
    for (int i = 0; i < NO; i++) t_out[i] = 0.2 * i;
    if (ensemble_bands(&b, &e, &lib, &y0, 0.0, t_out, NO, 20, &opt, 1, 1.0, 1e9, &st)) fail_msg("%s", st.msg);
    assert_int_equal(b.members, 20);
    assert_int_equal(b.stopped, 10);
    assert_true(isinf(b.q95[NO - 1]) && isinf(b.q05[NO - 1]) && isinf(b.width[NO - 1]));
    assert_int_equal(b.alive[NO - 1], 10);
    assert_true(!isnan(b.median[NO - 1])); /* half of them still run */
    assert_true(b.exceeds_at <= t_out[NO - 1]);
    ensemble_bands_free(&b);
    ensemble_free(&e);
    library_free(&lib);
    free(s), free(dx);
}

/* ---- bad arguments ------------------------------------------------------------------------------ */

static void expect_refused(EnsembleOptions o, const char *word) {
    double theta[20 * 2], y[20];
    int rec[20];
    long step[20];
    for (int i = 0; i < 20; i++) theta[2 * i] = 1, theta[2 * i + 1] = i, y[i] = 2 * i, rec[i] = i / 10, step[i] = i % 10;
    Rng r;
    rng_seed(&r, 1);
    Ensemble e;
    Status st;
    int rc = ensemble_fit_theta(&e, theta, y, rec, step, 20, 2, 1, &o, &r, &st);
    if (rc != ST_INPUT) fail_msg("expected ST_INPUT naming %s, got %d (%s)", word, rc, st.msg);
    if (!strstr(st.msg, word)) fail_msg("message does not name %s: %s", word, st.msg);
}

static void test_bad_arguments(void **state) {
    (void)state;
    EnsembleOptions o = ensemble_defaults();
    o.members = 0;
    expect_refused(o, "members");
    o = ensemble_defaults();
    o.inclusion = 0;
    expect_refused(o, "inclusion");
    o.inclusion = 1.01;
    expect_refused(o, "inclusion");
    o.inclusion = NAN;
    expect_refused(o, "inclusion");
    o = ensemble_defaults();
    o.block = 11; /* two recordings of 10 samples */
    expect_refused(o, "block");
    o.block = 0;
    expect_refused(o, "block");
    o = ensemble_defaults();
    o.library_bagging = 1;
    o.drop_fraction = 1;
    expect_refused(o, "drop_fraction");
    o = ensemble_defaults();
    o.inclusion = 1; /* the edge of (0, 1] is allowed */
    o.block = 10;
    double theta[20 * 2], y[20];
    int rec[20];
    long step[20];
    for (int i = 0; i < 20; i++) theta[2 * i] = 1, theta[2 * i + 1] = i, y[i] = 2 * i, rec[i] = i / 10, step[i] = i % 10;
    Rng r;
    rng_seed(&r, 1);
    Ensemble e;
    Status st;
    assert_int_equal(ensemble_fit_theta(&e, theta, y, rec, step, 20, 2, 1, &o, &r, &st), 0);
    assert_true(e.prob[1] == 1 && e.mask[1] == 1);
    assert_close(e.xi[1], 2.0, 1e-12, 1e-12);
    ensemble_free(&e);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_quantile),
        cmocka_unit_test(test_blocks_stay_in_recordings),
        cmocka_unit_test(test_bad_arguments),
        cmocka_unit_test(test_determinism),
        cmocka_unit_test(test_library_bagging),
        cmocka_unit_test(test_bands),
        cmocka_unit_test(test_lorenz_inclusion),
        cmocka_unit_test(test_lorenz_inclusion_by_selection),
        cmocka_unit_test(test_coverage_white_noise),
        cmocka_unit_test(test_coverage_correlated_noise),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
