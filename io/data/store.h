/* io/data/store.h: the frame store, a binary cache of preprocessed frames, memory-mapped when loaded.
 *
 * File layout (little-endian; docs/frames.md has the full description):
 *
 *   offset  size  field
 *        0     8  magic "FLAWFRMS"
 *        8     4  u32 version (STORE_VERSION)
 *       12     4  u32 header bytes (STORE_HEADER_BYTES = 128)
 *       16     4  u32 element type: 1 uint8, 2 uint16, 3 float32
 *       20     4  u32 width    (pixels; channels for numeric recordings)
 *       24     4  u32 height   (pixels; 1 for numeric recordings)
 *       28     4  u32 number of recordings R
 *       32     8  u64 number of frames N (all recordings)
 *       40     8  u64 payload offset (STORE_PAYLOAD_ALIGN = 4096)
 *       48     8  u64 payload bytes = N * width * height * element size
 *       56     8  u64 table offset = payload offset + payload bytes
 *       64     8  u64 table bytes = R * STORE_REC_BYTES
 *       72     8  u64 digest of sources and settings (frames_digest)
 *       80     4  u32 source width, 84: u32 source height (before crop and resize)
 *       88    20  i32 gray standard, crop x, y, w, h
 *      108     4  u32 stride
 *      112     4  u32 CRC-32 of bytes 0..111 followed by the recording table
 *      116    12  zero
 *      128        zero padding up to the payload offset
 *   payload       N frames of width * height elements, row-major, recordings one after another
 *   table         R entries of STORE_REC_BYTES = 256 bytes:
 *                 u64 first frame, u64 frame count, u64 source frames (before stride),
 *                 char name[232] (NUL-terminated, NUL-padded)
 *
 * The file size must equal table offset + table bytes. Every field is checked, and the CRC, before
 * the payload is trusted. Images are stored as 8- or 16-bit intensities (value / 255 or / 65535 is
 * the [0, 1] intensity after preprocessing); numeric recordings as float32 values unchanged.
 *
 * Writing goes to a temporary file that is flushed, fsync'ed and renamed over the target, so a
 * reader never sees a partial store and concurrent builders are safe (the last rename wins; each
 * builder maps the file it wrote).
 */
#ifndef IO_STORE_H
#define IO_STORE_H

#include <stddef.h>
#include <stdint.h>

#include "io/data/frames.h"
#include "nn/core.h"

#define STORE_VERSION 1
#define STORE_HEADER_BYTES 128
#define STORE_PAYLOAD_ALIGN 4096
#define STORE_REC_BYTES 256
#define STORE_NAME_MAX 232

typedef enum { STORE_U8 = 1, STORE_U16 = 2, STORE_F32 = 3 } StoreElem;

static inline int store_elem_size(StoreElem e) { return e == STORE_U8 ? 1 : e == STORE_U16 ? 2 : 4; }

typedef struct {
    char name[STORE_NAME_MAX];
    long first;          /* index of its first frame in the store */
    long count;          /* frames stored */
    long source_count;   /* source frames before the stride */
} StoreRec;

/* A loaded (memory-mapped) store. */
typedef struct {
    StoreElem elem;
    int width, height;
    long n;              /* values per frame: width * height */
    long n_frames;
    int n_rec;
    StoreRec *rec;       /* (n_rec); owned */
    uint64_t digest;
    int src_width, src_height;
    int gray, crop[4], stride;
    const void *payload; /* (n_frames, n) elements of type elem, inside the mapping */
    void *map;
    size_t map_bytes;
    char path[4096];
} FrameStore;

/* Pointer to frame f (0 <= f < n_frames), n elements. */
static inline const void *store_frame(const FrameStore *fs, long f) {
    return (const char *)fs->payload + (size_t)f * (size_t)fs->n * (size_t)store_elem_size(fs->elem);
}
/* Bytes of frame data (the payload). */
static inline size_t store_payload_bytes(const FrameStore *fs) {
    return (size_t)fs->n_frames * (size_t)fs->n * (size_t)store_elem_size(fs->elem);
}

/* Map and validate a store file. ST_INPUT with a message naming the file and the field at fault
 * when it is not a valid store (the caller may then rebuild it); ST_RUNTIME on a system error. */
int store_load(const char *path, FrameStore *fs, Status *st);
void store_close(FrameStore *fs);

/* What the store holds, independent of where its sources are or when they were written: a 64-bit
 * digest (FNV-1a, io/fs/hash.h) of the element type, frame size, every recording's name and frame
 * count, and the payload. Two stores with the same digest hold the same frames (up to a collision,
 * about 1 in 2^64). Reads the whole payload. */
uint64_t store_content_digest(const FrameStore *fs);

/* ---- Writing ------------------------------------------------------------------------------ */

typedef struct StoreWriter StoreWriter;

typedef struct {
    StoreElem elem;
    int width, height;
    uint64_t digest;
    int src_width, src_height, gray, crop[4], stride;   /* recorded for inspection */
} StoreLayout;

/* Start writing a store to a temporary beside path. */
int store_writer_open(StoreWriter **w, const char *path, const StoreLayout *lay, Status *st);
/* Start the next recording. */
int store_writer_recording(StoreWriter *w, const char *name, long source_count, Status *st);
/* Append one frame of width * height elements of the layout's type. */
int store_writer_frame(StoreWriter *w, const void *frame, Status *st);
/* Write header and table, flush, fsync, rename over the target. When fs is not NULL, the file just
 * written is also mapped into fs (even if another process renames its own store over the target
 * meanwhile). Frees the writer in every case. */
int store_writer_finish(StoreWriter *w, FrameStore *fs, Status *st);
/* Remove the temporary, free the writer. */
void store_writer_abort(StoreWriter *w);

/* ---- Building from a frames folder -------------------------------------------------------- */

typedef struct {
    int built;           /* 1 when this call (re)built the store */
    char reason[512];    /* why: "no store yet", "sources or settings changed", "invalid store: ..." */
    double seconds;      /* time spent building or loading */
    char path[4096];     /* the store file */
    int cached;          /* 1: in the cache folder, since the frames' folder is not writable */
    char note[1024];     /* "" or what the commands print as a note: the frames' folder is not writable,
                            so the store is in the cache folder (frames_store_cache_path) */
} StoreOpenInfo;

/* Decode and preprocess every frame of the scan into a new store at path (images: grayscale, crop,
 * area resize, quantise; numeric: float32 with stride). Input errors name the file: a frame whose
 * size differs from the first one (both sizes), an undecodable image, a crop outside the frame,
 * numeric recordings with different channel counts. */
int store_build(const FrameScan *scan, const FrameSettings *s, const char *path, FrameStore *fs, Status *st);

/* Load the store for scan + settings if it is valid and its digest matches, else (or when
 * force_rebuild) build it. Where (docs/frames.md, "The frame store"): s->store_path when given (its
 * folder is made when missing); else beside the frames (frames_store_path), or, when that folder is
 * not writable and holds no current store, in the cache folder (frames_store_cache_path; info->note
 * says so). ST_INPUT naming the path and data.store when the chosen folder cannot be written. */
int store_open_for(const FrameScan *scan, const FrameSettings *s, int force_rebuild, FrameStore *fs,
                   StoreOpenInfo *info, Status *st);

#endif
