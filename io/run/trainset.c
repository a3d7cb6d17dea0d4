/* io/run/trainset.c: the encoded training set (see trainset.h). */
#include "io/run/trainset.h"

#include <string.h>

void encoded_set_free(EncodedSet *es) {
    nn_free(es->state);
    nn_free(es->target);
    nn_free(es->rec);
    nn_free(es->step);
    memset(es, 0, sizeof *es);
}

int encoded_training_set(EncodedSet *es, const Model *m, ParamSet *ps, RunData *data, Tape *tape, Status *st) {
    memset(es, 0, sizeof *es);
    const TrainData *td = &data->td;
    const Dataset *ds = &data->ds;
    int d = m->n_latent, k = m->order + 1, nv = m->lib.n_vars, Bmax = data->batch;
    long N = td->n_train;
    es->N = N, es->n_vars = nv, es->d = d;
    es->state = nn_alloc((size_t)N * nv * sizeof *es->state);
    es->target = nn_alloc((size_t)N * d * sizeof *es->target);
    es->rec = nn_alloc((size_t)N * sizeof *es->rec);
    es->step = nn_alloc((size_t)N * sizeof *es->step);
    float *X = nn_alloc((size_t)td->k * Bmax * td->n_in * sizeof *X);   /* (blocks B, n_in) */
    float *z = nn_alloc((size_t)k * Bmax * d * sizeof *z);              /* (k B, d) */
    int64_t *idx = nn_alloc((size_t)Bmax * sizeof *idx);
    int rc = 0;
    for (long s0 = 0; s0 < N && !rc; s0 += Bmax) {
        int B = (int)(N - s0 < Bmax ? N - s0 : Bmax);
        for (int i = 0; i < B; i++) idx[i] = s0 + i;
        if ((rc = td->gather(td->ctx, 0, idx, B, X, st))) break;
        tape_reset(tape);
        model_encode(tape, m, ps, X, B, k, z);
        for (int b = 0; b < B; b++) {
            long s = s0 + b, frame = ds->samples[SPLIT_TRAIN][s];
            for (int j = 0; j < nv; j++) es->state[s * nv + j] = z[((long)(j / d) * B + b) * d + j % d];
            for (int j = 0; j < d; j++) es->target[s * d + j] = z[((long)(k - 1) * B + b) * d + j];
            int rec = dataset_recording_of(ds, frame);
            es->rec[s] = rec;
            es->step[s] = frame - ds->fs->rec[rec].first;
        }
    }
    nn_free(X);
    nn_free(z);
    nn_free(idx);
    if (rc) encoded_set_free(es);
    return rc;
}
