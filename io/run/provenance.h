/* io/run/provenance.h: where a run's results came from: provenance.json in the run folder, one entry
 * per session (train, then each resume) with the program version, the command line, the date (UTC),
 * the host, the threads actually used (train.threads 0 resolved to the cores), the OpenBLAS core and
 * its build configuration. Outside the config and its digest: bit-identical results depend on the
 * thread count, and this file says which one a run had (docs/formats.md). */
#ifndef IO_PROVENANCE_H
#define IO_PROVENANCE_H

#include "nn/core.h"

#define PROVENANCE_FORMAT "framelaw-provenance"
#define PROVENANCE_VERSION 1

/* Append this session to run_dir/provenance.json (created when missing; an unreadable or foreign
 * file is replaced, with a warning on stderr). what: "train" or "resume"; argv: the command line;
 * version: the program's; threads: those the epoch loop will use. Written atomically. */
int provenance_append(const char *run_dir, const char *what, int argc, char **argv, const char *version,
                      int threads, Status *st);

#endif
