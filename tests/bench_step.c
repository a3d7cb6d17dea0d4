/* tests/bench_step.c: the time of one training step (`make bench`, never part of `make test`).
 *
 * The step: a second-order (k = 3: x, x', x'') 2304-64-32-1 encoder (48x48 frames, the video
 * workload V of tests/bench_compare.c) and the mirrored 1-32-64-2304 decoder, sigmoid hidden
 * layers, linear last layers, batch 256 (768 stacked rows); loss mean|x - x_hat|^2 +
 * 0.25 mean|x'' - x_hat''|^2 + 0.1 mean|z'' - c|^2, the decoder's last layer fused with the two
 * reconstruction terms as in sparse/model.c (nn_dense_sq_err: only the x_hat and x_hat'' blocks
 * are computed); forward with tangents, backward, one Adam step.
 * Reported: median, min and max over repeated steps after a warm-up, at 1 and 2 threads, and the
 * same for the matrix products alone (cblas_sgemm on exactly the step's shapes and transposes), as
 * the ceiling the step can reach.
 *
 * Analytic count (multiply-adds count 2): a layer (n_in -> n_out) over R rows costs
 * 2 R n_in n_out forward (A = h W), and 2x that backward (dW = h^T dA and dh = dA W^T), dh skipped
 * for the first encoder layer (its input x wants no gradient); the decoder's last layer runs over
 * R = 2B rows (two products of B rows each way). The elementwise work (activations, tangents,
 * loss, Adam) is O(R n) and not counted. */
#include <time.h>

#include "nn/adam.h"
#include "nn/mlp.h"
#include "nn/rng.h"
#include "nn/tape.h"
#include "tests/testutil.h"

enum { B = 256, K = 3, R = K * B, NX = 48 * 48, NL = 3, WARMUP = 3, RUNS = 21 };
static const int WE[NL + 1] = {NX, 64, 32, 1}, WD[NL + 1] = {1, 32, 64, NX};
_Static_assert(NL == 3, "the printout names four widths per network");

static double now(void) {
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int cmp_double(const void *a, const void *b) {
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

typedef struct { double med, min, max; } Stat;

static Stat stat_of(double *t, int n) {
    qsort(t, (size_t)n, sizeof *t, cmp_double);
    Stat s = {n % 2 ? t[n / 2] : 0.5 * (t[n / 2 - 1] + t[n / 2]), t[0], t[n - 1]};
    return s;
}

typedef struct {
    Mlp enc, dec;
    ParamSet ps;
    float *X, *c;   /* (R, NX) stacked x, x', x''; (B, 1) latent target */
    Tape t;
    AdamCfg adam;
} Model;

static Node *build(Model *m) {
    Tape *t = &m->t;
    Node *x = nn_input(t, m->X, R, NX);
    Node *z = mlp_forward(t, &m->enc, &m->ps, x, K);
    Node *hd = mlp_forward_hidden(t, &m->dec, &m->ps, z, K, NL - 1);
    static const int blocks[2] = {0, 2};
    static const float w[2] = {1.0f, 0.25f};
    Node *lx = nn_dense_sq_err(t, hd, nn_param(t, &m->ps, m->dec.W[NL - 1]), nn_param(t, &m->ps, m->dec.b[NL - 1]), x, K,
                               2, blocks, w);
    Node *lz = nn_mean_sq(t, nn_sub(t, nn_rows(t, z, 2 * B, B), nn_input(t, m->c, B, 1)));
    return nn_add(t, lx, nn_scale(t, lz, 0.1f));
}

/* One step; phase times (forward, backward, Adam) into ph[0..2]. */
static float step(Model *m, double ph[3]) {
    double t0 = now();
    tape_reset(&m->t);
    params_zero_grad(&m->ps);
    Node *loss = build(m);
    double t1 = now();
    tape_backward(&m->t, loss);
    double t2 = now();
    adam_step(&m->ps, &m->adam);
    double t3 = now();
    ph[0] = t1 - t0;
    ph[1] = t2 - t1;
    ph[2] = t3 - t2;
    return loss->val.d[0];
}

/* The step's matrix products alone, same shapes, transposes and beta, on scratch buffers. */
typedef struct { float *h[2 * NL], *W[2 * NL], *dA[2 * NL], *dW[2 * NL], *dh[2 * NL]; } Gemms;

static void gemms_alloc(Gemms *g, Rng *r) {
    for (int l = 0; l < 2 * NL; l++) {
        int ni = l < NL ? WE[l] : WD[l - NL], no = l < NL ? WE[l + 1] : WD[l - NL + 1];
        g->h[l] = malloc((size_t)R * ni * sizeof(float));
        g->dh[l] = malloc((size_t)R * ni * sizeof(float));
        g->W[l] = malloc((size_t)ni * no * sizeof(float));
        g->dW[l] = malloc((size_t)ni * no * sizeof(float));
        g->dA[l] = malloc((size_t)R * no * sizeof(float));
        if (!g->h[l] || !g->dh[l] || !g->W[l] || !g->dW[l] || !g->dA[l]) { fprintf(stderr, "out of memory\n"); exit(1); }
        for (long i = 0; i < (long)R * ni; i++) g->h[l][i] = (float)rng_uniform(r), g->dh[l][i] = 0;
        for (long i = 0; i < (long)ni * no; i++) g->W[l][i] = (float)(rng_uniform(r) - 0.5), g->dW[l][i] = 0;
        for (long i = 0; i < (long)R * no; i++) g->dA[l][i] = (float)(rng_uniform(r) - 0.5);
    }
}

static void gemms_free(Gemms *g) {
    for (int l = 0; l < 2 * NL; l++) free(g->h[l]), free(g->dh[l]), free(g->W[l]), free(g->dW[l]), free(g->dA[l]);
}

/* the decoder's last layer (l = 2 NL - 1) runs over blocks 0 and 2 only: one product of B rows per
 * block each way, as nn_dense_sq_err does */
static void gemms_run(Gemms *g) {
    for (int l = 0; l < 2 * NL; l++) { /* forward, in layer order */
        int ni = l < NL ? WE[l] : WD[l - NL], no = l < NL ? WE[l + 1] : WD[l - NL + 1];
        for (int blk = 0; blk < (l == 2 * NL - 1 ? 2 : 1); blk++) {
            int rows = l == 2 * NL - 1 ? B : R;
            float *h = g->h[l] + (long)blk * B * ni, *A = g->dA[l] + (long)blk * B * no;
            mat_gemm(0, 0, 1.0f, mat_view(h, rows, ni), mat_view(g->W[l], ni, no), 0.0f, mat_view(A, rows, no));
        }
    }
    for (int l = 2 * NL - 1; l >= 0; l--) { /* backward, in reverse */
        int ni = l < NL ? WE[l] : WD[l - NL], no = l < NL ? WE[l + 1] : WD[l - NL + 1];
        for (int blk = 0; blk < (l == 2 * NL - 1 ? 2 : 1); blk++) {
            int rows = l == 2 * NL - 1 ? B : R;
            float *h = g->h[l] + (long)blk * B * ni, *A = g->dA[l] + (long)blk * B * no, *dh = g->dh[l] + (long)blk * B * ni;
            mat_gemm(1, 0, 1.0f, mat_view(h, rows, ni), mat_view(A, rows, no), 1.0f, mat_view(g->dW[l], ni, no));
            if (l > 0) mat_gemm(0, 1, 1.0f, mat_view(A, rows, no), mat_view(g->W[l], ni, no), 1.0f, mat_view(dh, rows, ni));
        }
    }
}

int main(void) {
    double fwd = 0, bwd = 0;
    for (int l = 0; l < 2 * NL; l++) {
        int ni = l < NL ? WE[l] : WD[l - NL], no = l < NL ? WE[l + 1] : WD[l - NL + 1];
        double f = 2.0 * (l == 2 * NL - 1 ? 2 * B : R) * ni * no;
        fwd += f;
        bwd += l == 0 ? f : 2 * f;
    }
    double flops = fwd + bwd;

    Model m;
    params_init(&m.ps);
    mlp_declare(&m.enc, &m.ps, "enc", WE, NL, ACT_SIGMOID);
    mlp_declare(&m.dec, &m.ps, "dec", WD, NL, ACT_SIGMOID);
    params_alloc(&m.ps);
    Rng r;
    rng_seed(&r, 2024);
    mlp_init_glorot(&m.enc, &m.ps, &r);
    mlp_init_glorot(&m.dec, &m.ps, &r);
    m.X = malloc((size_t)R * NX * sizeof(float));
    m.c = calloc(B, sizeof(float));
    if (!m.X || !m.c) { fprintf(stderr, "out of memory\n"); return 1; }
    for (long i = 0; i < (long)B * NX; i++) m.X[i] = (float)rng_uniform(&r);          /* pixels in [0, 1) */
    for (long i = (long)B * NX; i < (long)R * NX; i++) m.X[i] = (float)(0.1 * (rng_uniform(&r) - 0.5));
    tape_init(&m.t, 64, (size_t)64 << 20);
    m.adam = adam_defaults();
    Gemms g;
    gemms_alloc(&g, &r);

    printf("one training step: second-order encoder %d-%d-%d-%d, decoder %d-%d-%d-%d, sigmoid hidden,\n"
           "linear outputs (the last fused with the loss: x_hat and x_hat'' only), batch %d (%d stacked rows x, x', x''); "
           "forward with tangents, backward, Adam\n", WE[0], WE[1], WE[2], WE[3], WD[0], WD[1], WD[2], WD[3], B, R);
    printf("BLAS: OpenBLAS, core %s\n", nn_blas_corename());
    printf("analytic count: %.3f GFLOP per step (forward %.3f, backward %.3f; 2 R n_in n_out per product)\n",
           flops * 1e-9, fwd * 1e-9, bwd * 1e-9);
    double load[1] = {-1};
    if (getloadavg(load, 1) < 1) load[0] = -1;
    printf("median of %d runs after %d warm-up runs; times in ms; load average before: %.2f\n\n", RUNS, WARMUP,
           load[0]);
    printf("threads | step median    min    max  GFLOP/s | fwd   bwd  Adam | sgemm only median  GFLOP/s | sgemm/step\n");
    printf("--------+-----------------------------------+-----------------+---------------------------+-----------\n");
    for (int th = 1; th <= 2; th++) {
        nn_set_threads(th);
        double ts[RUNS], tf[RUNS], tb[RUNS], ta[RUNS], tg[RUNS], ph[3];
        float first = 0, last = 0;
        /* steps and products alternate, so that both see the same machine load */
        for (int i = 0; i < WARMUP + RUNS; i++) {
            double t0 = now();
            last = step(&m, ph);
            double t1 = now();
            gemms_run(&g);
            double t2 = now();
            if (i == 0) first = last;
            if (i < WARMUP) continue;
            ts[i - WARMUP] = t1 - t0, tg[i - WARMUP] = t2 - t1;
            tf[i - WARMUP] = ph[0], tb[i - WARMUP] = ph[1], ta[i - WARMUP] = ph[2];
        }
        Stat s = stat_of(ts, RUNS), f = stat_of(tf, RUNS), b = stat_of(tb, RUNS), a = stat_of(ta, RUNS),
             gs = stat_of(tg, RUNS);
        printf("%7d | %11.1f %6.1f %6.1f %8.1f | %5.1f %5.1f %4.1f | %17.1f %8.1f | %9.0f%%\n", nn_get_threads(),
               1e3 * s.med, 1e3 * s.min, 1e3 * s.max, flops / s.med * 1e-9, 1e3 * f.med, 1e3 * b.med, 1e3 * a.med,
               1e3 * gs.med, flops / gs.med * 1e-9, 100 * gs.med / s.med);
        if (!(last < first) || !isfinite(last)) {
            fprintf(stderr, "bench: the loss did not decrease (%g -> %g)\n", first, last);
            return 1;
        }
    }
    printf("\narena high-water mark: %.1f MB\n", m.t.arena.high / 1048576.0);
    gemms_free(&g);
    tape_free(&m.t);
    params_free(&m.ps);
    free(m.X);
    free(m.c);
    return 0;
}
