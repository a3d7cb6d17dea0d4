/* io/data/store.c: the frame store file (see store.h). */
#include "io/data/store.h"

#include <errno.h>
#include <fcntl.h>
#include <float.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "io/fs/atomic_file.h"
#include "io/fs/bytes.h"
#include "io/fs/clock.h"
#include "io/fs/files.h"
#include "io/fs/hash.h"
#include "io/data/images.h"
#include "io/data/series.h"

#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ != __ORDER_LITTLE_ENDIAN__
#error "the frame store payload is little-endian and mapped directly: a little-endian host is required"
#endif

static const char STORE_MAGIC[8] = {'F', 'L', 'A', 'W', 'F', 'R', 'M', 'S'};

/* ---- loading ----------------------------------------------------------------------------- */

void store_close(FrameStore *fs) {
    if (fs->map) munmap(fs->map, fs->map_bytes);
    free(fs->rec);
    memset(fs, 0, sizeof *fs);
}

uint64_t store_content_digest(const FrameStore *fs) {
    uint64_t h = fnv1a64_u64(FNV1A64_INIT, (uint64_t)fs->elem);
    h = fnv1a64_u64(h, (uint64_t)fs->width);
    h = fnv1a64_u64(h, (uint64_t)fs->height);
    h = fnv1a64_u64(h, (uint64_t)fs->n_rec);
    for (int r = 0; r < fs->n_rec; r++) {
        h = fnv1a64_str(h, fs->rec[r].name);
        h = fnv1a64_u64(h, (uint64_t)fs->rec[r].count);
    }
    /* the payload a word at a time (FNV-1a's step on 8 bytes): 8x fewer multiplies than by byte */
    const unsigned char *p = fs->payload;
    size_t n = store_payload_bytes(fs), i = 0;
    for (; i + 8 <= n; i += 8) {
        uint64_t w;
        memcpy(&w, p + i, 8);
        h = (h ^ w) * FNV1A64_PRIME;
    }
    return fnv1a64(h, p + i, n - i);
}

/* Validate the mapped bytes and fill fs. */
static int store_parse(FrameStore *fs, const unsigned char *b, size_t size, const char *path, Status *st) {
    if (size < STORE_HEADER_BYTES)
        return status_set(st, ST_INPUT, "%s: not a frame store (%zu bytes, shorter than the header)", path, size);
    if (memcmp(b, STORE_MAGIC, 8)) return status_set(st, ST_INPUT, "%s: not a frame store (bad magic)", path);
    uint32_t version = le_get_u32(b + 8), hbytes = le_get_u32(b + 12), elem = le_get_u32(b + 16);
    if (version != STORE_VERSION)
        return status_set(st, ST_INPUT, "%s: frame store version %u, this framelaw reads version %d", path, version,
                          STORE_VERSION);
    if (hbytes != STORE_HEADER_BYTES)
        return status_set(st, ST_INPUT, "%s: header size %u, expected %d", path, hbytes, STORE_HEADER_BYTES);
    if (elem < STORE_U8 || elem > STORE_F32) return status_set(st, ST_INPUT, "%s: unknown element type %u", path, elem);
    uint32_t w = le_get_u32(b + 20), h = le_get_u32(b + 24), n_rec = le_get_u32(b + 28);
    uint64_t n_frames = le_get_u64(b + 32), pay_off = le_get_u64(b + 40), pay_bytes = le_get_u64(b + 48);
    uint64_t tab_off = le_get_u64(b + 56), tab_bytes = le_get_u64(b + 64);
    if (w == 0 || h == 0 || w > (1u << 24) || h > (1u << 24) || (uint64_t)w * h > (1u << 28))
        return status_set(st, ST_INPUT, "%s: frame size %ux%u out of range", path, w, h);
    if (n_rec == 0 || n_rec > (1u << 24)) return status_set(st, ST_INPUT, "%s: %u recordings", path, n_rec);
    uint64_t esz = (uint64_t)store_elem_size((StoreElem)elem), fbytes = (uint64_t)w * h * esz;
    if (n_frames == 0 || n_frames > size / fbytes || n_frames * fbytes != pay_bytes)
        return status_set(st, ST_INPUT, "%s: %llu frames of %ux%u do not match %llu payload bytes", path,
                          (unsigned long long)n_frames, w, h, (unsigned long long)pay_bytes);
    if (pay_off < STORE_HEADER_BYTES || pay_off % 64 || pay_off > size || tab_off != pay_off + pay_bytes ||
        tab_bytes != (uint64_t)n_rec * STORE_REC_BYTES || tab_off > size || size - tab_off != tab_bytes)
        return status_set(st, ST_INPUT,
                          "%s: file is %zu bytes; header says payload at %llu (+%llu), table at %llu (+%llu)%s", path,
                          size, (unsigned long long)pay_off, (unsigned long long)pay_bytes,
                          (unsigned long long)tab_off, (unsigned long long)tab_bytes,
                          tab_off + tab_bytes > size ? " (truncated)" : "");
#ifndef FRAMELAW_FUZZ /* the fuzz build skips the CRC so that mutated files reach the checks below */
    uint32_t crc = fs_crc32(0, b, 112);
    crc = fs_crc32(crc, b + tab_off, tab_bytes);
    if (crc != le_get_u32(b + 112)) return status_set(st, ST_INPUT, "%s: header or table CRC mismatch", path);
#endif
    StoreRec *rec = calloc(n_rec, sizeof *rec);
    if (!rec) return status_set(st, ST_RUNTIME, "%s: out of memory", path);
    uint64_t next = 0;
    for (uint32_t r = 0; r < n_rec; r++) {
        const unsigned char *e = b + tab_off + (size_t)r * STORE_REC_BYTES;
        uint64_t first = le_get_u64(e), count = le_get_u64(e + 8), src = le_get_u64(e + 16);
        const char *name = (const char *)e + 24;
        if (first != next || count == 0 || count > n_frames - first || !memchr(name, 0, STORE_NAME_MAX)) {
            free(rec);
            return status_set(st, ST_INPUT, "%s: recording table entry %u is inconsistent", path, r);
        }
        rec[r].first = (long)first, rec[r].count = (long)count, rec[r].source_count = (long)src;
        memcpy(rec[r].name, name, STORE_NAME_MAX);
        next = first + count;
    }
    if (next != n_frames) {
        free(rec);
        return status_set(st, ST_INPUT, "%s: recordings hold %llu frames, header says %llu", path,
                          (unsigned long long)next, (unsigned long long)n_frames);
    }
    fs->elem = (StoreElem)elem;
    fs->width = (int)w, fs->height = (int)h;
    fs->n = (long)w * h;
    fs->n_frames = (long)n_frames;
    fs->n_rec = (int)n_rec;
    fs->rec = rec;
    fs->digest = le_get_u64(b + 72);
    fs->src_width = (int)le_get_u32(b + 80), fs->src_height = (int)le_get_u32(b + 84);
    fs->gray = (int)le_get_u32(b + 88);
    for (int k = 0; k < 4; k++) fs->crop[k] = (int)le_get_u32(b + 92 + 4 * k);
    fs->stride = (int)le_get_u32(b + 108);
    fs->payload = b + pay_off;
    snprintf(fs->path, sizeof fs->path, "%s", path);
    return 0;
}

static int store_map_fd(int fd, const char *path, FrameStore *fs, Status *st) {
    memset(fs, 0, sizeof *fs);
    struct stat sb;
    if (fstat(fd, &sb) != 0) {
        int e = errno;
        close(fd);
        return status_set(st, ST_RUNTIME, "%s: stat: %s", path, strerror(e));
    }
    size_t size = (size_t)sb.st_size;
    if (size < STORE_HEADER_BYTES) {
        close(fd);
        return status_set(st, ST_INPUT, "%s: not a frame store (%zu bytes, shorter than the header)", path, size);
    }
    void *m = mmap(NULL, size, PROT_READ, MAP_SHARED, fd, 0);
    int e = errno;
    close(fd);   /* the mapping keeps the file */
    if (m == MAP_FAILED) return status_set(st, ST_RUNTIME, "%s: mmap: %s", path, strerror(e));
    if (store_parse(fs, m, size, path, st)) {
        munmap(m, size);
        return st->code;
    }
    fs->map = m;
    fs->map_bytes = size;
    return 0;
}

int store_load(const char *path, FrameStore *fs, Status *st) {
    memset(fs, 0, sizeof *fs);
    int fd = open(path, O_RDONLY);
    if (fd < 0) return status_set(st, errno == ENOENT ? ST_INPUT : ST_RUNTIME, "%s: %s", path, strerror(errno));
    return store_map_fd(fd, path, fs, st);
}

/* ---- writing ----------------------------------------------------------------------------- */

struct StoreWriter {
    AtomicFile af;
    StoreLayout lay;
    size_t frame_bytes;
    long n_frames;
    StoreRec *rec;
    int n_rec, cap_rec;
};

int store_writer_open(StoreWriter **out, const char *path, const StoreLayout *lay, Status *st) {
    *out = NULL;
    StoreWriter *w = calloc(1, sizeof *w);
    if (!w) return status_set(st, ST_RUNTIME, "%s: out of memory", path);
    w->lay = *lay;
    w->frame_bytes = (size_t)lay->width * (size_t)lay->height * (size_t)store_elem_size(lay->elem);
    if (atomic_open(&w->af, path, st)) {
        free(w);
        /* bad input: the path cannot be written, a value of the user's (status_set formats into a copy: its
         * message may be an argument) */
        return status_set(st, ST_INPUT, "%s: set data.store (framelaw frames: --store) to a writable place",
                          st->msg);
    }
    static const unsigned char zeros[STORE_PAYLOAD_ALIGN];
    if (fwrite(zeros, 1, sizeof zeros, w->af.f) != sizeof zeros) {
        store_writer_abort(w);
        return status_set(st, ST_RUNTIME, "%s: write failed", path);
    }
    *out = w;
    return 0;
}

int store_writer_recording(StoreWriter *w, const char *name, long source_count, Status *st) {
    if (strlen(name) >= STORE_NAME_MAX)
        return status_set(st, ST_INPUT, "recording name '%.60s...' is longer than %d bytes", name, STORE_NAME_MAX - 1);
    if (w->n_rec == w->cap_rec) {
        int nc = w->cap_rec ? 2 * w->cap_rec : 16;
        StoreRec *nr = realloc(w->rec, sizeof *nr * (size_t)nc);
        if (!nr) return status_set(st, ST_RUNTIME, "%s: out of memory", w->af.path);
        w->rec = nr, w->cap_rec = nc;
    }
    StoreRec *r = &w->rec[w->n_rec++];
    memset(r, 0, sizeof *r);
    snprintf(r->name, sizeof r->name, "%s", name);
    r->first = w->n_frames;
    r->source_count = source_count;
    return 0;
}

int store_writer_frame(StoreWriter *w, const void *frame, Status *st) {
    if (!w->n_rec) return status_set(st, ST_RUNTIME, "%s: frame written before any recording", w->af.path);
    if (fwrite(frame, 1, w->frame_bytes, w->af.f) != w->frame_bytes)
        return status_set(st, ST_RUNTIME, "%s: write failed: %s", w->af.path, strerror(errno));
    w->n_frames++;
    w->rec[w->n_rec - 1].count++;
    return 0;
}

void store_writer_abort(StoreWriter *w) {
    if (!w) return;
    atomic_abort(&w->af);
    free(w->rec);
    free(w);
}

int store_writer_finish(StoreWriter *w, FrameStore *fs, Status *st) {
    char path[4096];
    snprintf(path, sizeof path, "%s", w->af.path);
    if (!w->n_rec || !w->n_frames) {
        store_writer_abort(w);
        return status_set(st, ST_INPUT, "%s: no frames to store", path);
    }
    for (int r = 0; r < w->n_rec; r++)
        if (!w->rec[r].count) {
            status_set(st, ST_INPUT, "%s: recording '%s' has no frames", path, w->rec[r].name);
            store_writer_abort(w);
            return ST_INPUT;
        }
    uint64_t pay_bytes = (uint64_t)w->n_frames * w->frame_bytes, tab_off = STORE_PAYLOAD_ALIGN + pay_bytes;
    size_t tab_bytes = (size_t)(unsigned)w->n_rec * STORE_REC_BYTES;
    unsigned char *tab = calloc(1, tab_bytes), hdr[STORE_HEADER_BYTES];
    if (!tab) {
        store_writer_abort(w);
        return status_set(st, ST_RUNTIME, "%s: out of memory", path);
    }
    for (int r = 0; r < w->n_rec; r++) {
        unsigned char *e = tab + (size_t)r * STORE_REC_BYTES;
        le_put_u64(e, (uint64_t)w->rec[r].first);
        le_put_u64(e + 8, (uint64_t)w->rec[r].count);
        le_put_u64(e + 16, (uint64_t)w->rec[r].source_count);
        memcpy(e + 24, w->rec[r].name, strlen(w->rec[r].name));
    }
    memset(hdr, 0, sizeof hdr);
    memcpy(hdr, STORE_MAGIC, 8);
    le_put_u32(hdr + 8, STORE_VERSION);
    le_put_u32(hdr + 12, STORE_HEADER_BYTES);
    le_put_u32(hdr + 16, (uint32_t)w->lay.elem);
    le_put_u32(hdr + 20, (uint32_t)w->lay.width);
    le_put_u32(hdr + 24, (uint32_t)w->lay.height);
    le_put_u32(hdr + 28, (uint32_t)w->n_rec);
    le_put_u64(hdr + 32, (uint64_t)w->n_frames);
    le_put_u64(hdr + 40, STORE_PAYLOAD_ALIGN);
    le_put_u64(hdr + 48, pay_bytes);
    le_put_u64(hdr + 56, tab_off);
    le_put_u64(hdr + 64, tab_bytes);
    le_put_u64(hdr + 72, w->lay.digest);
    le_put_u32(hdr + 80, (uint32_t)w->lay.src_width);
    le_put_u32(hdr + 84, (uint32_t)w->lay.src_height);
    le_put_u32(hdr + 88, (uint32_t)w->lay.gray);
    for (int k = 0; k < 4; k++) le_put_u32(hdr + 92 + 4 * k, (uint32_t)w->lay.crop[k]);
    le_put_u32(hdr + 108, (uint32_t)w->lay.stride);
    le_put_u32(hdr + 112, fs_crc32(fs_crc32(0, hdr, 112), tab, tab_bytes));
    int ok = fwrite(tab, 1, tab_bytes, w->af.f) == tab_bytes && fflush(w->af.f) == 0 &&
             fseek(w->af.f, 0, SEEK_SET) == 0 && fwrite(hdr, 1, sizeof hdr, w->af.f) == sizeof hdr &&
             fflush(w->af.f) == 0;
    free(tab);
    if (!ok) {
        int e = errno;
        store_writer_abort(w);
        return status_set(st, ST_RUNTIME, "%s: write failed: %s", path, strerror(e));
    }
    /* Open the temporary for reading before the rename: we map the file we wrote. */
    int rfd = fs ? open(w->af.tmp, O_RDONLY) : -1;
    if (fs && rfd < 0) {
        int e = errno;
        store_writer_abort(w);
        return status_set(st, ST_RUNTIME, "%s: reopen: %s", path, strerror(e));
    }
    int rc = atomic_commit(&w->af, st);
    free(w->rec);
    free(w);
    if (rc) {
        if (rfd >= 0) close(rfd);
        return rc;
    }
    return fs ? store_map_fd(rfd, path, fs, st) : 0;
}

/* ---- building ---------------------------------------------------------------------------- */

static const char *fp_of(const ScanRecording *rec) { return rec->files[0].path; }

static int build_images(const FrameScan *scan, const FrameSettings *s, const char *path, FrameStore *fs,
                        Status *st) {
    StoreWriter *w = NULL;
    float *img = NULL, *crop = NULL, *tmp = NULL, *out = NULL;
    void *q = NULL;
    int sw = 0, sh = 0, cw = 0, ch = 0, dw = 0, dh = 0, rc = 0;
    const char *first_path = scan->rec[0].files[0].path;
    for (int r = 0; r < scan->n_rec && !rc; r++) {
        const ScanRecording *rec = &scan->rec[r];
        VideoReader vr = {0};
        long vframe = 0; /* video: source frames read */
        if (rec->video && (rc = video_open(&vr, rec->files[0].path, rec->vinfo.width, rec->vinfo.height, st))) break;
        for (int i = 0; !rc && (rec->video || i < rec->n_files); i += s->stride) {
            const char *fp = rec->files[rec->video ? 0 : i].path;
            int iw, ih;
            if (rec->video) { /* the next kept frame of the video: skip stride - 1 after each */
                iw = rec->vinfo.width, ih = rec->vinfo.height;
                if (!img && !(img = malloc(sizeof(float) * (size_t)iw * ih))) {
                    rc = status_set(st, ST_RUNTIME, "%s: out of memory", fp);
                    break;
                }
                int got = 0;
                while (vframe % s->stride && (got = video_read_gray(&vr, s->gray, img, st)) == 1) vframe++;
                if (got >= 0 && (got = video_read_gray(&vr, s->gray, img, st)) == 1) vframe++;
                if (got < 0) rc = st->code;
                if (got <= 0) break;
            } else if ((rc = image_load_gray(fp, s->gray, &img, &iw, &ih, st))) break;
            if (!w) {   /* first frame: sizes, crop check, buffers, writer */
                sw = iw, sh = ih;
                if (s->crop_w) {
                    if ((long)s->crop_x + s->crop_w > sw || (long)s->crop_y + s->crop_h > sh) {
                        rc = status_set(st, ST_INPUT, "crop %d,%d,%d,%d lies outside the %dx%d frame of %s", s->crop_x,
                                        s->crop_y, s->crop_w, s->crop_h, sw, sh, fp);
                        break;
                    }
                    cw = s->crop_w, ch = s->crop_h;
                } else {
                    cw = sw, ch = sh;
                }
                dw = s->width ? s->width : cw, dh = s->height ? s->height : ch;
                crop = malloc(sizeof(float) * (size_t)cw * (size_t)ch);   /* (ch, cw) */
                tmp = malloc(sizeof(float) * (size_t)ch * (size_t)dw);    /* (ch, dw) */
                out = malloc(sizeof(float) * (size_t)dw * (size_t)dh);    /* (dh, dw) */
                q = malloc((size_t)dw * (size_t)dh * (s->bits == 16 ? 2 : 1));
                if (!crop || !tmp || !out || !q) {
                    rc = status_set(st, ST_RUNTIME, "%s: out of memory", path);
                    break;
                }
                StoreLayout lay = {s->bits == 16 ? STORE_U16 : STORE_U8, dw, dh, frames_digest(scan, s), sw, sh,
                                   s->gray, {s->crop_x, s->crop_y, s->crop_w, s->crop_h}, s->stride};
                if ((rc = store_writer_open(&w, path, &lay, st))) break;
            } else if (iw != sw || ih != sh) {
                rc = status_set(st, ST_INPUT, "%s is %dx%d, but %s is %dx%d: every frame must have one size", fp, iw,
                                ih, first_path, sw, sh);
                break;
            }
            if (i == 0 && (rc = store_writer_recording(w, rec->name, rec->video ? 0 : rec->n_files, st))) break;
            const float *src = img;
            if (s->crop_w) {
                image_crop(img, sw, sh, s->crop_x, s->crop_y, cw, ch, crop);
                src = crop;
            }
            if (dw != cw || dh != ch) {
                image_resize_area(src, cw, ch, out, dw, dh, tmp);
                src = out;
            }
            if (s->bits == 16) image_quantise_u16(src, (long)dw * dh, q);
            else image_quantise_u8(src, (long)dw * dh, q);
            rc = store_writer_frame(w, q, st);
            if (!rec->video) {
                free(img);
                img = NULL;
            }
        }
        if (rec->video) {
            Status cs;
            int crc = video_close(&vr, &cs);
            if (!rc && crc) rc = status_set(st, crc, "%s", cs.msg);
            if (!rc && vframe == 0) rc = status_set(st, ST_INPUT, "%s: ffmpeg decoded no frame", fp_of(rec));
            if (!rc) w->rec[w->n_rec - 1].source_count = vframe;
            free(img);
            img = NULL;
        }
    }
    free(img), free(crop), free(tmp), free(out), free(q);
    if (rc) {
        store_writer_abort(w);
        return rc;
    }
    return store_writer_finish(w, fs, st);
}

static int build_numeric(const FrameScan *scan, const FrameSettings *s, const char *path, FrameStore *fs,
                         Status *st) {
    if (s->crop_w || s->width)
        return status_set(st, ST_INPUT, "%s: crop and size apply to images, not to numeric recordings", scan->root);
    StoreWriter *w = NULL;
    float *row = NULL;   /* (cols) */
    int cols = 0, rc = 0;
    const char *first = NULL;
    for (int r = 0; r < scan->n_rec && !rc; r++) {
        Series ser;
        const char *fp = scan->rec[r].files[0].path;
        if ((rc = series_read(fp, &ser, st))) break;
        int tc = series_time_column(&ser); /* the clock, not a channel (frames_source_rate checks it) */
        double dt;
        if (tc >= 0 && (rc = series_time_step(&ser, tc, fp, FRAMES_DT_TOL, &dt, st))) {
            series_free(&ser);
            break;
        }
        int ch = ser.cols - (tc >= 0);
        if (!w) {
            cols = ch;
            first = fp;
            row = malloc(sizeof(float) * (size_t)cols);
            StoreLayout lay = {STORE_F32, cols, 1, frames_digest(scan, s), cols, 1, 0, {0, 0, 0, 0}, s->stride};
            if (!row) rc = status_set(st, ST_RUNTIME, "%s: out of memory", path);
            else rc = store_writer_open(&w, path, &lay, st);
        } else if (ch != cols) {
            rc = status_set(st, ST_INPUT, "%s has %d channels, but %s has %d: every recording needs the same channels",
                            fp, ch, first, cols);
        }
        if (!rc) rc = store_writer_recording(w, scan->rec[r].name, ser.rows, st);
        for (long i = 0; !rc && i < ser.rows; i += s->stride) {
            for (int c = 0, o = 0; c < ser.cols; c++) {
                if (c == tc) continue;
                double v = ser.d[i * ser.cols + c];
                if (v > FLT_MAX || v < -FLT_MAX) {
                    rc = status_set(st, ST_INPUT, "%s: row %ld, column %d: %g is beyond float range", fp, i + 1, c + 1, v);
                    break;
                }
                row[o++] = (float)v;
            }
            if (!rc) rc = store_writer_frame(w, row, st);
        }
        series_free(&ser);
    }
    free(row);
    if (rc) {
        store_writer_abort(w);
        return rc;
    }
    return store_writer_finish(w, fs, st);
}

int store_build(const FrameScan *scan, const FrameSettings *s, const char *path, FrameStore *fs, Status *st) {
    if (frame_settings_check(s, st)) return st->code;
    if (scan->n_rec == 0) return status_set(st, ST_INPUT, "%s: no recordings", scan->root);
    return scan->kind == REC_IMAGES ? build_images(scan, s, path, fs, st) : build_numeric(scan, s, path, fs, st);
}

/* The folder of a file path ("." when it has none), and its last component. */
static void folder_of(const char *path, char *dir, size_t n) {
    snprintf(dir, n, "%s", path);
    char *slash = strrchr(dir, '/');
    if (!slash) snprintf(dir, n, ".");
    else if (slash == dir) dir[1] = 0;
    else *slash = 0;
}

static const char *base_of(const char *path) {
    const char *slash = strrchr(path, '/');
    return slash ? slash + 1 : path;
}

int store_open_for(const FrameScan *scan, const FrameSettings *s, int force_rebuild, FrameStore *fs,
                   StoreOpenInfo *info, Status *st) {
    memset(info, 0, sizeof *info);
    double t0 = clock_seconds();
    frames_store_path(scan, s, info->path, sizeof info->path);
    uint64_t digest = frames_digest(scan, s);
    char dir[sizeof info->path];
    folder_of(info->path, dir, sizeof dir);
    if (!s->store_path[0] && access(dir, W_OK) != 0) {
        /* a read-only folder of frames: a current store beside them serves; else the cache */
        int e = errno;
        Status ls;
        if (!force_rebuild && store_load(info->path, fs, &ls) == 0) {
            if (fs->digest == digest) {
                info->seconds = clock_seconds() - t0;
                return 0;
            }
            store_close(fs);
        }
        if (frames_store_cache_path(scan, s, info->path, sizeof info->path, st)) return st->code;
        info->cached = 1;
        snprintf(info->note, sizeof info->note, "%.300s is not writable (%s): the frame store is %.500s (set data.store, "
                 "framelaw frames: --store, to put it elsewhere)", dir, strerror(e), info->path);
        folder_of(info->path, dir, sizeof dir);
    }
    if (access(dir, F_OK) != 0) { /* a folder given by data.store, or the cache, made on first use */
        Status ms;
        if (fs_make_dirs(dir, &ms))
            return status_set(st, ST_INPUT, "%s: cannot make the frame store's folder (%s): set data.store (framelaw "
                              "frames: --store) to a writable place", info->path, ms.msg);
    }
    atomic_remove_stale(dir, base_of(info->path)); /* the temporaries of builds that were killed */
    if (force_rebuild) {
        snprintf(info->reason, sizeof info->reason, "rebuild requested");
    } else if (access(info->path, F_OK) != 0) {
        snprintf(info->reason, sizeof info->reason, "no store yet");
    } else {
        Status ls;
        if (store_load(info->path, fs, &ls) == 0) {
            if (fs->digest == digest) {
                info->seconds = clock_seconds() - t0;
                return 0;
            }
            store_close(fs);
            snprintf(info->reason, sizeof info->reason, "sources or settings changed");
        } else {
            snprintf(info->reason, sizeof info->reason, "invalid store: %.400s", ls.msg);
        }
    }
    info->built = 1;
    if (access(dir, W_OK) != 0)
        return status_set(st, ST_INPUT, "%s: cannot write the frame store there (%s): set data.store (framelaw frames: "
                          "--store) to a writable place", info->path, strerror(errno));
    int rc = store_build(scan, s, info->path, fs, st);
    info->seconds = clock_seconds() - t0;
    return rc;
}
