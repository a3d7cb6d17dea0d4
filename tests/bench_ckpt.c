/* tests/bench_ckpt.c: what checkpointing costs a run (part of `make bench`).
 *
 * The model of the video workload V of tests/bench_compare.c (second order, 48x48 frames,
 * 2304-64-32-1 encoder, mirrored decoder, degree-3 library of (z, z') with sin terms): the time to
 * write one checkpoint (atomic: temporary file, fsync, rename, directory fsync) against the time of
 * the epochs between two checkpoints at the default cadence (checkpoint.every = 100), with the
 * epoch time measured from training steps of batch 256 here (40 steps an epoch: 10,240 samples).
 * Target: under 2% of the run. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "io/run/checkpoint.h"
#include "io/run/config.h"
#include "nn/adam.h"
#include "sparse/model.h"

static double now(void) {
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int cmp(const void *a, const void *b) {
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int main(void) {
    Config c;
    config_defaults(&c);
    ModelSpec sp = {0};
    sp.n_in = 48 * 48;
    sp.n_latent = 1;
    sp.order = 2;
    sp.n_enc = 2;
    sp.enc_widths[0] = 64, sp.enc_widths[1] = 32;
    sp.dec_mirror = 1;
    sp.act = ACT_SIGMOID;
    sp.lib = library_spec_default(1, 2);
    sp.lib.degree = 3;
    sp.lib.trig = 1;
    ParamSet ps;
    params_init(&ps);
    Model m;
    Status st;
    if (model_init(&m, &ps, &sp, &st)) {
        fprintf(stderr, "%s\n", st.msg);
        return 1;
    }
    params_alloc(&ps);
    Rng rng;
    rng_seed(&rng, 1);
    model_init_params(&m, &ps, &rng);
    nn_set_threads(2);
    int B = 256, k = 3;
    int64_t n_train = 10240;
    int steps_per_epoch = (int)(n_train / B);
    float *X = malloc((size_t)k * B * sp.n_in * sizeof(float));
    for (long i = 0; i < (long)k * B * sp.n_in; i++) X[i] = (float)rng_uniform(&rng);
    Tape t;
    tape_init(&t, 256, (size_t)64 << 20);
    AdamCfg ad = adam_defaults();
    LossWeights w = {1, 0.1f, 1, 1e-3f};
    double steps[7];
    for (int i = 0; i < 7; i++) {
        double t0 = now();
        tape_reset(&t);
        params_zero_grad(&ps);
        tape_backward(&t, model_loss(&t, &m, &ps, X, B, &w, NULL));
        adam_step(&ps, &ad);
        steps[i] = now() - t0;
    }
    qsort(steps + 2, 5, sizeof(double), cmp); /* first two are warm-up */
    double epoch = steps_per_epoch * steps[4];
    int64_t *order = malloc((size_t)n_train * sizeof *order);
    for (int64_t i = 0; i < n_train; i++) order[i] = i;
    CkptMeta meta = {0};
    meta.rng = rng;
    char dir[] = "/tmp/framelaw-bench-XXXXXX";
    if (!mkdtemp(dir)) return 1;
    char path[128];
    snprintf(path, sizeof path, "%s/ckpt.ckpt", dir);
    double w_t[7];
    for (int i = 0; i < 7; i++) {
        double t0 = now();
        if (ckpt_write(path, &meta, &ps, m.mask, (long)m.lib.n_terms, order, n_train, &st)) {
            fprintf(stderr, "%s\n", st.msg);
            return 1;
        }
        w_t[i] = now() - t0;
    }
    qsort(w_t, 7, sizeof(double), cmp);
    long bytes = 0;
    FILE *f = fopen(path, "rb");
    if (f) {
        fseek(f, 0, SEEK_END);
        bytes = ftell(f);
        fclose(f);
    }
    unlink(path);
    rmdir(dir);
    double every = c.ckpt_every;
    printf("checkpoint cost, video workload V (%zu parameters, checkpoint %.1f MB)\n", ps.n, bytes / 1e6);
    printf("  training step (batch %d, 2 threads): median %.3f s; epoch of %d steps: %.2f s\n", B, steps[4],
           steps_per_epoch, epoch);
    printf("  checkpoint write: median %.4f s (min %.4f, max %.4f)\n", w_t[3], w_t[0], w_t[6]);
    printf("  at checkpoint.every = %.0f epochs: %.4f%% of the run (target < 2%%)\n", every,
           100.0 * w_t[3] / (every * epoch + w_t[3]));
    free(order);
    free(X);
    tape_free(&t);
    model_free(&m);
    params_free(&ps);
    return 0;
}
