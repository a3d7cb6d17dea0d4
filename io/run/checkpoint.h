/* io/run/checkpoint.h: checkpoints, everything needed to resume a run bit for bit.
 *
 * File format (version 1; docs/formats.md describes it completely), little-endian:
 *   offset 0   8 bytes   magic "FLAWCKPT"
 *          8   u32       format version (1)
 *         12   u32       number of sections
 *         16   sections: each  tag (4 ASCII bytes), u32 zero, u64 payload length, payload
 *         end  u32       CRC-32 (ISO-HDLC / IEEE 802.3 polynomial, reflected 0xEDB88320) of every
 *                        byte before it
 * Sections: "META" scalars (below), "VIEW" parameter names and shapes, "PVAL" values, "ADM1" and
 * "ADM2" Adam moments (float32), "MASK" the coefficient mask (u8), "ORDR" the current epoch's
 * sample order (i64).
 * The whole file is written to a temporary, flushed, fsync'ed and renamed (io/fs/atomic_file.h). */
#ifndef IO_CHECKPOINT_H
#define IO_CHECKPOINT_H

#include <stddef.h>
#include <stdint.h>

#include "nn/core.h"
#include "nn/params.h"
#include "nn/rng.h"

#define CKPT_VERSION 1

typedef struct {
    uint64_t config_digest;
    int64_t epoch;          /* epochs completed */
    int64_t batch;          /* batches completed in the current epoch (0 at an epoch boundary; all of them
                             * when a stop came during the end-of-epoch passes, which are pending) */
    Rng rng;
    double acc[5];          /* partial sums of the current epoch's loss terms (total, rec, dx, dz, l1) */
    int64_t acc_n;          /* samples in those sums */
    double best_val;        /* best validation loss so far (inf when none) */
    int64_t best_epoch;
    int64_t n_thresholds;   /* thresholding passes done */
    double seconds;         /* training time so far */
} CkptMeta;

/* Write params (values, Adam moments, step), the mask (n_mask) and the order (n_order). */
int ckpt_write(const char *path, const CkptMeta *meta, const ParamSet *ps, const uint8_t *mask, long n_mask,
               const long *order, long n_order, Status *st);

/* Read into an allocated ParamSet of the same layout (names and shapes must match), mask (n_mask)
 * and order (n_order: the training samples) of a run that trains in batches of `batch` samples
 * (train.batch, at most n_order). A bad magic, version, size, CRC or layout, or any value the writer
 * cannot have written for this run (docs/formats.md, "What a checkpoint must satisfy": the order a
 * permutation of 0..n_order-1, the batch position within the epoch, counters consistent with the
 * epoch, mask bytes 0 or 1, finite parameters and moments, ...) gives ST_INPUT naming the file, the
 * section and the value; nothing is modified unless the whole file checks out. */
int ckpt_read(const char *path, CkptMeta *meta, ParamSet *ps, uint8_t *mask, long n_mask, long *order,
              long n_order, long batch, Status *st);

/* The exact size in bytes of a checkpoint of this layout. */
size_t ckpt_size(const ParamSet *ps, long n_mask, long n_order);

#endif
