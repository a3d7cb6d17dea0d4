/* io/run/provenance.h: where a run's results came from: provenance.json in the run folder, one entry
 * per session (train, then each resume) with the program version, the command line, the date (UTC),
 * the host, the threads actually used (train.threads 0 resolved to the cores), the OpenBLAS core and
 * its build configuration. Outside the config and its digest: bit-identical results depend on the
 * thread count, and this file says which one a run had (docs/formats.md). */
#ifndef IO_PROVENANCE_H
#define IO_PROVENANCE_H

#include <stddef.h>
#include <stdint.h>

#include "nn/core.h"

#define FRAMELAW_VERSION "0.1.0"   /* the program's version (framelaw --version) */

#define PROVENANCE_FORMAT "framelaw-provenance"
#define PROVENANCE_VERSION 1

/* Append this session to run_dir/provenance.json (created when missing; an unreadable or foreign
 * file is replaced, with a warning on stderr). what: "train", "resume" or "move"; argv: the command
 * line; threads: those the epoch loop will use; frames (NULL: not recorded):
 * where the frames were read, with content, their store's content digest (store_content_digest, as 16
 * hex digits), which lets a run follow its frames to a new place. Written atomically. */
int provenance_append(const char *run_dir, const char *what, int argc, char **argv, int threads, const char *frames,
                      uint64_t content, Status *st);

/* The content digest of the frames, and where they were, as the newest session that recorded them
 * says: 1 when found, 0 when the run records none (trained before this was recorded). */
int provenance_frames_content(const char *run_dir, uint64_t *content, char *frames, size_t n);

#endif
