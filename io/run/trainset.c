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

long *encoded_set_runs(const EncodedSet *es, int *n_runs) {
    long *rs = nn_alloc((size_t)(es->N + 1) * sizeof *rs);
    int nr = 0;
    for (long i = 0; i < es->N; i++)
        if (i == 0 || es->rec[i] != es->rec[i - 1] || es->step[i] != es->step[i - 1] + 1) rs[nr++] = i;
    rs[nr] = es->N;
    *n_runs = nr;
    return rs;
}

int encoded_training_set(EncodedSet *es, const Model *m, ParamSet *ps, RunData *data, Tape *tape, Status *st) {
    memset(es, 0, sizeof *es);
    const TrainData *td = &data->td;
    const Dataset *ds = &data->ds;
    int d = m->n_latent, nv = m->lib.n_vars, Bmax = data->batch;
    long N = td->n_train;
    es->N = N, es->n_vars = nv, es->d = d;
    es->state = nn_alloc((size_t)N * nv * sizeof *es->state);
    es->target = nn_alloc((size_t)N * d * sizeof *es->target);
    es->rec = nn_alloc((size_t)N * sizeof *es->rec);
    es->step = nn_alloc((size_t)N * sizeof *es->step);
    float *X = nn_alloc((size_t)td->k * Bmax * td->n_in * sizeof *X);   /* (blocks B, n_in) */
    int rc = train_encode_set(td, m, ps, tape, X, Bmax, es->state, es->target, st);
    for (long s = 0; s < N && !rc; s++) {
        long frame = ds->samples[SPLIT_TRAIN][s];
        int rec = dataset_recording_of(ds, frame);
        es->rec[s] = rec;
        es->step[s] = frame - ds->fs->rec[rec].first;
    }
    nn_free(X);
    if (rc) encoded_set_free(es);
    return rc;
}
