/* io/run/runcanonical.h: the canonical form of a trained run's law (sparse/canonical.h on the encoded
 * training set, io/run/trainset.h), its settings from the config's canonical.* keys, its object in
 * equations.json and its lines in equations.txt / .tex (docs/canonical.md, docs/formats.md).
 *
 * It runs after training, beside the ensemble: at the end of `framelaw train` / `resume` (through
 * export), on demand with `framelaw canonical RUN_DIR`, and whenever `framelaw export` writes the
 * equations. It is a function of the final model, the data and the config (the search is seeded and
 * deterministic), so a resumed run gets the same bits. */
#ifndef IO_RUNCANONICAL_H
#define IO_RUNCANONICAL_H

#include <stdio.h>

#include <cjson/cJSON.h>

#include "io/run/results.h"
#include "sparse/canonical.h"
#include "sparse/canonical_select.h"

typedef struct RunCanonical {
    Canonical c;
    int by_forecast;            /* canonical.choose forecast: sel holds what the forecast choice did */
    CanonSelectReport sel;
    double seconds;             /* wall time: encoding the training set and the search */
} RunCanonical;

/* The search's options from the config (canonical.tolerance, canonical.cond_max); canonical.choose
 * forecast adds canonical_select (sparse/canonical_select.h) after the search. */
CanonOptions run_canonical_options(const Config *c);

/* Find the canonical form of r's law once (later calls return at once); r->canon holds it. Prints one
 * line on stderr unless quiet. ST_INPUT for data the search refuses, ST_RUNTIME on a failure. */
int run_canonical_get(LoadedRun *r, int quiet, Status *st);
void run_canonical_free(RunCanonical *rc);

/* The "canonical" object of equations.json (docs/canonical.md); NULL when r has none. */
cJSON *run_canonical_json(const LoadedRun *r, int digits);

/* The canonical law and its map as the text that opens equations.txt (style EQ_TEXT) or .tex
 * (EQ_LATEX), snprintf-like; empty unless a sparser law was found. */
size_t run_canonical_format(char *buf, size_t n, EqStyle style, const LoadedRun *r, int digits);

/* Print the canonical law, the map and the status line to f (after the learned equations). */
void run_canonical_print(FILE *f, const LoadedRun *r);

#endif
