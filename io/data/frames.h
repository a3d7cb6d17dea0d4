/* io/data/frames.h: frames folders (one or several recordings), the preprocessing settings, and the
 * scan that lists recordings and their files.
 *
 * Layout of a source path (docs/frames.md):
 *   - a folder with image files directly inside: one recording, named after the folder;
 *     its sub-folders are ignored (and counted);
 *   - otherwise a folder whose sub-folders with image files and whose .csv / .npy files are the
 *     recordings, named after the sub-folder or the file name without extension; sub-folders
 *     without images and other files are ignored (and counted);
 *   - a .csv or .npy file: one numeric recording.
 * Names starting with '.' are skipped silently (the frame store lives in such a file). Image files
 * are recognised by extension (io/data/images.h) and ordered by natural sort (frames_natural_cmp).
 * All recordings must be of one kind: images, or numeric.
 */
#ifndef IO_FRAMES_H
#define IO_FRAMES_H

#include <stdint.h>
#include <stdio.h>

#include "io/data/images.h"
#include "io/data/video.h"
#include "nn/core.h"
#include "sparse/stencil.h"

/* ---- Settings ---------------------------------------------------------------------------- */

typedef enum { SCALE_UNIT, SCALE_STANDARD, SCALE_COUNT } ScaleMode;
extern const char *const scale_mode_names[];   /* (SCALE_COUNT) "unit", "standardize" */
ScaleMode scale_mode_from_name(const char *name);          /* SCALE_COUNT when unknown */

#define FRAMES_MAX_VAL_NAMES 1024

/* Everything that turns a frames folder into training samples. The config parser fills it; the
 * defaults (frame_settings_default) are listed on the right. Fields marked [store] change the bytes
 * in the frame store and are part of its digest; the others act at gather time. */
typedef struct {
    GrayStd gray;            /* [store] luma weights: GRAY_BT601                           */
    int crop_x, crop_y;      /* [store] crop rectangle in source pixels, top-left corner   */
    int crop_w, crop_h;      /* [store] 0 x 0: no crop (default)                           */
    int width, height;       /* [store] frame size after crop and resize; 0 x 0: keep       */
    int bits;                /* [store] 8 (default) or 16 bits per pixel for images         */
    int stride;              /* [store] keep every stride-th frame of a recording: 1        */
    double fps;              /* frames (samples) per second of the source: 30               */
    ScaleMode scale;         /* SCALE_UNIT: pixels in [0, 1], numeric values as they are;
                                SCALE_STANDARD: per pixel (channel) mean 0, std 1 over the
                                training recordings                                        */
    StencilKind stencil;     /* STENCIL_CENTRAL                                            */
    int sg_window, sg_degree;/* Savitzky-Golay window and degree: 7, 3                       */
    char val_names[FRAMES_MAX_VAL_NAMES];  /* comma-separated validation recordings: ""     */
    int val_last;            /* else the last N recordings (in name order) validate: 1; none
                                when there are not more than N recordings                  */
    char store_path[4096];   /* frame store file; "": beside the source (frames_store_path) */
} FrameSettings;

FrameSettings frame_settings_default(void);

/* Time between stored frames: stride / fps. */
static inline double frame_settings_dt(const FrameSettings *s) { return s->stride / s->fps; }

/* Check values that need no data (fps > 0, stride >= 1, bits 8 or 16, sizes >= 0, stencil
 * parameters). ST_INPUT naming the setting. */
int frame_settings_check(const FrameSettings *s, Status *st);

/* Build the stencil the settings ask for. */
int frame_settings_stencil(const FrameSettings *s, Stencil *out, Status *st);

/* ---- Scan -------------------------------------------------------------------------------- */

typedef enum { REC_IMAGES, REC_NUMERIC } RecKind;

typedef struct {
    char *path;          /* full path; owned */
    int64_t size;        /* bytes */
    int64_t mtime_ns;    /* modification time, ns since the epoch */
} SourceFile;

typedef struct {
    char name[256];      /* recording name */
    RecKind kind;        /* a video file is a recording of images */
    int video;           /* 1: files[0] is a video file (io/data/video.h), decoded by ffmpeg */
    VideoInfo vinfo;     /* video: its size and rate from ffprobe */
    int n_files;         /* image files in natural order, or 1 numeric file */
    SourceFile *files;   /* (n_files); owned */
    int piece;           /* 0: a whole recording; k >= 1: piece k of one split at gaps in its numbering,
                            named "<name>-part<k>" (frames_split_gaps) */
} ScanRecording;

typedef struct {
    char root[4096];     /* the source path as given */
    int single;          /* 1: the source itself is the one recording */
    RecKind kind;        /* kind of every recording */
    int n_rec;
    ScanRecording *rec;  /* (n_rec), sorted by natural order of names */
    int ignored_files;   /* non-image files that were skipped */
    int ignored_dirs;    /* sub-folders that were skipped */
    int n_split;         /* recordings split at gaps in their numbering */
    char *gap_notes;     /* NULL, or one line per split recording (each ending in '\n') naming the
                            missing numbers and the pieces: the commands print them as warnings; owned */
} FrameScan;

/* Largest relative deviation of a time step from the median step that counts as equally spaced. */
#define FRAMES_DT_TOL 0.01

/* The rate the recordings carry: a video's frame rate, or 1 / the step of a CSV time column (a column
 * named t or time: the clock, never a channel). *fps 0 when none carries one; from receives the file
 * that gave it. ST_INPUT when recordings disagree (0.1%) or a time column is uneven (naming the line). */
int frames_source_rate(const FrameScan *fs, double *fps, char *from, size_t n, Status *st);

/* List the recordings under path. ST_INPUT naming the path when it does not exist, holds no
 * recording ("no image files or recordings"), or mixes image and numeric recordings. A recording of
 * image files with a gap in its numbering is split there (frames_split_gaps); fs->gap_notes says so. */
int frames_scan(const char *path, FrameScan *fs, Status *st);
void frames_scan_free(FrameScan *fs);
/* Print fs->gap_notes to f, each line as "framelaw: warning: <line>" (nothing when there are none). */
void frames_warn_gaps(const FrameScan *fs, FILE *f);

/* Gaps in the numbering of a recording of image files (docs/frames.md, "Gaps in the numbering").
 * The file names must differ in one number only (frame0001.png, frame0002.png, ...; any text before
 * and after it, other numbers equal); its values v_0 <= v_1 <= ... in natural order have steps
 * d_i = v_{i+1} - v_i and a step s, the lower median of the d_i. A d_i with 2 d_i >= 3 s is a gap
 * (round(d_i / s) - 1 frames missing); every other d_i must be regular, |d_i - s| <= s / 4 (integer
 * division: exact for s < 4, a jitter of a quarter step allowed for timestamps in milliseconds), or
 * the numbers are not a frame count and nothing is detected. Returns the number of gaps (0 when
 * none or no numbering; -1 out of memory) and fills cut[] with the index of the first file after each
 * gap (at most max_cut of them; cut may be NULL), vals (n, may be NULL) with the numbers and *step
 * with s. names: the files' base names in natural order. */
int frames_find_gaps(const char *const *names, int n, long long *vals, int *cut, int max_cut, long long *step);

/* Natural order: runs of digits compare by numeric value (frame2 < frame10), everything else byte
 * by byte; names equal in that sense fall back to plain strcmp, so the order is total. */
int frames_natural_cmp(const char *a, const char *b);

/* 64-bit FNV-1a digest of everything the stored bytes depend on: the store format version, every
 * recording's name and kind, every source file's name (relative to the root), size and mtime, and
 * the [store] settings. */
uint64_t frames_digest(const FrameScan *fs, const FrameSettings *s);

/* The store path: s->store_path when given, else "<dir>/.framelaw-store" for a folder,
 * "<dir>/.<file>.framelaw-store" for a numeric or video file. */
void frames_store_path(const FrameScan *fs, const FrameSettings *s, char *out, size_t n);

/* Where the store goes when the frames' folder is not writable: $XDG_CACHE_HOME/framelaw (when that
 * variable is an absolute path, else $HOME/.cache/framelaw) / "<source name>-<16 hex>.framelaw-store",
 * the hex an FNV-1a 64 of the source's absolute path and the [store] settings: one file per source
 * and settings, replaced when the frames change, as the store beside them would be. ST_INPUT when
 * neither variable gives a folder. */
int frames_store_cache_path(const FrameScan *fs, const FrameSettings *s, char *out, size_t n, Status *st);

#endif
