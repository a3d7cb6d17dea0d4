/* io/run/runrefine.h: refinement in canonical form: training on with the canonical structure fixed.
 *
 * The canonical step (runcanonical.h) can only undo affine changes of coordinates. An encoder whose
 * coordinate is a warped function of the physical one (a bend that grows with the amplitude) needs
 * terms that the physics does not have, such as u (du/dt)^2, and the canonical law keeps them.
 * Refinement lets the encoder straighten its coordinate:
 *
 *  1. the model is rewritten in the canonical coordinates (sparse/canonfold.h) and trained for
 *     `epochs` epochs with the canonical law's mask fixed (no L1 term, no thresholding): the
 *     reference, whose law fits its encoded training set with relative residual e_ref;
 *  2. backward elimination by training: from the current mask, each active term in turn is left
 *     out (the law refitted by least squares on the canonical coordinates without it), and the
 *     model trained again from the canonical start with that mask; the candidate with the lowest
 *     residual is accepted when its residual is within (1 + canonical.tolerance) e_ref (plus the
 *     float floor), and elimination goes on from it; otherwise it stops;
 *  3. the sparsest accepted candidate is compared with the learned model on the validation set
 *     (the validation loss of training, without the L1 term): the better one is kept, and said.
 *
 * Each candidate trains in RUN/refine/NN; the chosen one becomes RUN/refined, a run folder of its
 * own (config.json, log.csv, checkpoints/, and the results of export and forecast), the others are
 * removed. RUN/refine.json records every candidate. docs/canonical.md tells the story. */
#ifndef IO_RUNREFINE_H
#define IO_RUNREFINE_H

#include <signal.h>

#include "io/run/results.h"

#define REFINE_MAX_CANDIDATES 64

typedef struct {
    long epochs;                        /* training epochs per candidate, >= 1 */
    int quiet;
    volatile sig_atomic_t *stop;        /* a stop request ends the refinement (RUN is unchanged) */
} RefineOptions;

typedef struct {
    long active;                        /* terms of the candidate's law */
    char dropped[64];                   /* the term left out from its parent ("" for the reference) */
    double residual;                    /* relative residual of its law on its encoded training set */
    double val;                         /* its validation loss */
    int accepted;
} RefineCandidate;

typedef struct {
    int n;
    RefineCandidate cand[REFINE_MAX_CANDIDATES];
    int chosen;                         /* index of the sparsest accepted candidate */
    double val_before;                  /* the learned model's validation loss */
    long active_before;
    int kept_refined;                   /* 1: the refined model validates better: RUN/refined is the result */
    double seconds;
} RefineResult;

/* Refine the run r (its model, data and canonical form: computed when not yet there). Writes
 * RUN/refined and RUN/refine.json. ST_INPUT when there is nothing to refine (no canonical map, no
 * active term) or no validation set to compare on; ST_RUNTIME when stopped (RUN/refine removed). */
int run_refine(LoadedRun *r, const RefineOptions *o, RefineResult *res, Status *st);

#endif
