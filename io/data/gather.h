/* io/data/gather.h: the training set over a frame store: train / validation split by whole recordings,
 * valid samples, intensity scaling, and the batch gather that forms x, x' and x'' from neighbouring
 * frames with a derivative stencil (sparse/stencil.h). Nothing is stored but the frames.
 *
 * Samples: frame f of a recording of `count` frames starting at `first` is a valid sample when the
 * stencil stays inside the recording: first + m <= f <= first + count - 1 - m (m the half-width).
 * A recording shorter than the stencil (count < 2m + 1) is an input error.
 *
 * Values: x = q * gain[p] + offset[p] for stored value q at pixel (channel) p.
 *   SCALE_UNIT:     gain = 1/255 (8-bit), 1/65535 (16-bit), 1 (numeric float), offset 0;
 *   SCALE_STANDARD: per pixel (channel) mean 0 and standard deviation 1 over every frame of the
 *                   training recordings: gain = u / sd, offset = -mean / sd, with u the unit gain
 *                   and mean, sd those of q u (population sd; sd < 1e-6 is taken as 1).
 * Derivatives: x' = (1/dt) sum_k w1[k] x[f - m + k], x'' = (1/dt^2) sum_k w2[k] x[f - m + k],
 * dt = stride / fps; since the weights sum to zero, offset drops out.
 */
#ifndef IO_GATHER_H
#define IO_GATHER_H

#include "io/data/frames.h"
#include "io/data/store.h"
#include "nn/core.h"
#include "sparse/stencil.h"

typedef enum { SPLIT_TRAIN, SPLIT_VAL, SPLIT_COUNT } SplitId;

typedef struct {
    const FrameStore *fs;   /* not owned; must outlive the dataset */
    Stencil sten;
    double dt;              /* seconds between stored frames */
    ScaleMode scale;
    long n;                 /* values per frame (input width of the encoder) */
    float *gain, *offset;   /* (n) each */
    int *rec_split;         /* (n_rec) SPLIT_TRAIN or SPLIT_VAL */
    int n_rec_split[SPLIT_COUNT];
    long *samples[SPLIT_COUNT];   /* (count[s]) frame indices of the valid samples, recording order */
    long count[SPLIT_COUNT];
} Dataset;

/* Split, enumerate valid samples, compute the scaling. ST_INPUT naming the recording or setting at
 * fault: unknown validation name, no training recording left, a recording shorter than the stencil. */
int dataset_init(Dataset *ds, const FrameStore *fs, const FrameSettings *s, Status *st);
void dataset_free(Dataset *ds);

/* Batch of B samples of a split, idx (B) indexing ds->samples[split] (0 <= idx[b] < count[split]):
 * x, dx, ddx (B, n) float32. dx and ddx may be NULL (not computed). */
void dataset_gather(const Dataset *ds, SplitId split, const long *idx, int B, float *x, float *dx, float *ddx);

/* Batch of B samples as the stencil's frames: block j (B, n) of x (2m+1 blocks) holds the frame at
 * offset j - m of each sample (model.derivatives latent). */
void dataset_gather_window(const Dataset *ds, SplitId split, const long *idx, int B, float *x);

/* The same with each distinct frame once (samples that are neighbours share most of their
 * stencil's frames): x (U, n) the distinct frames, map (2m+1) B the row of x that holds the frame
 * at offset j - m of sample b at map[j B + b]; returns U (at most (2m+1) B). The samples' centre
 * frames come first, in the samples' order (with distinct samples map[m B + b] = b, so rows 0..B-1
 * are the centre block with no copy), then the other frames in frame order. work: 2 (2m+1) B longs
 * of scratch. The rows are those dataset_gather_window would give, bit for bit. */
int dataset_gather_window_shared(const Dataset *ds, SplitId split, const long *idx, int B, float *x, int *map,
                                 long *work);

/* The same from frame indices (each a valid sample of its recording). */
void dataset_gather_frames(const Dataset *ds, const long *frames, int B, float *x, float *dx, float *ddx);

/* One scaled frame, any frame of the store (edges included): x (n). */
void dataset_frame(const Dataset *ds, long frame, float *x);

/* Index of the recording that holds frame f. */
int dataset_recording_of(const Dataset *ds, long frame);

#endif
