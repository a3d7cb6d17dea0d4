/* io/run/trainset.h: the encoded training set of a trained model, as the sparse fits see it: per
 * training sample the library's state (z for a first-order model, (z, z') for a second-order one),
 * the target (z' or z''), the recording it belongs to and its frame within that recording. The
 * derivatives are those of training (model.derivatives: the frames' stencil carried through the
 * encoder, or the stencil applied to the codes). */
#ifndef IO_TRAINSET_H
#define IO_TRAINSET_H

#include "io/run/rundata.h"
#include "nn/params.h"
#include "nn/tape.h"
#include "sparse/model.h"

typedef struct {
    long N;             /* training samples */
    int n_vars, d;      /* state size (order * latent), latent size */
    double *state;      /* (N, n_vars) */
    double *target;     /* (N, d) */
    int *rec;           /* (N) recording index in the frame store */
    long *step;         /* (N) frame index within the recording */
} EncodedSet;

/* Encode every training sample of data with model m (ps its parameters; tape is a scratch tape).
 * ST_RUNTIME on a gather failure. */
int encoded_training_set(EncodedSet *es, const Model *m, ParamSet *ps, RunData *data, Tape *tape, Status *st);
void encoded_set_free(EncodedSet *es);

/* The first sample of each run of consecutive samples (a new one at every change of recording or
 * gap in its frames), then es->N: (n_runs + 1) values, nn_free'd by the caller; *n_runs receives
 * their number. The recording boundaries the selection's forecasts respect (sparse/select.h). */
long *encoded_set_runs(const EncodedSet *es, int *n_runs);

#endif
