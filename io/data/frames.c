/* io/data/frames.c: settings, folder scan, natural sort, digest (see frames.h). */
#include "io/data/frames.h"

#include <ctype.h>
#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <math.h>
#include <string.h>
#include <sys/stat.h>

#include "io/data/series.h"
#include "io/fs/hash.h"
#include "io/data/store.h"

const char *const scale_mode_names[] = {"unit", "standardize"};
_Static_assert(sizeof scale_mode_names / sizeof scale_mode_names[0] == SCALE_COUNT, "one name per scaling");

ScaleMode scale_mode_from_name(const char *name) {
    for (int k = 0; k < SCALE_COUNT; k++)
        if (!strcmp(name, scale_mode_names[k])) return (ScaleMode)k;
    return SCALE_COUNT;
}

FrameSettings frame_settings_default(void) {
    FrameSettings s;
    memset(&s, 0, sizeof s);
    s.gray = GRAY_BT601;
    s.bits = 8;
    s.stride = 1;
    s.fps = 30.0;
    s.scale = SCALE_UNIT;
    s.stencil = STENCIL_CENTRAL;
    s.sg_window = 7;
    s.sg_degree = 3;
    s.val_last = 1;
    return s;
}

int frame_settings_check(const FrameSettings *s, Status *st) {
    if (!(s->fps > 0) || s->fps > 1e12)
        return status_set(st, ST_INPUT, "fps %g must be a positive number", s->fps);
    if (s->stride < 1) return status_set(st, ST_INPUT, "stride %d must be at least 1", s->stride);
    if (s->bits != 8 && s->bits != 16) return status_set(st, ST_INPUT, "bits %d must be 8 or 16", s->bits);
    if (s->gray < 0 || s->gray >= GRAY_COUNT) return status_set(st, ST_INPUT, "unknown grayscale standard");
    if (s->scale < 0 || s->scale >= SCALE_COUNT) return status_set(st, ST_INPUT, "unknown intensity scaling");
    if (s->crop_x < 0 || s->crop_y < 0 || s->crop_w < 0 || s->crop_h < 0 || (!s->crop_w != !s->crop_h))
        return status_set(st, ST_INPUT, "crop %d,%d,%d,%d must have a non-negative corner and a positive size",
                          s->crop_x, s->crop_y, s->crop_w, s->crop_h);
    if (s->width < 0 || s->height < 0 || (!s->width != !s->height) || s->width > 65535 || s->height > 65535)
        return status_set(st, ST_INPUT, "size %dx%d must be two positive numbers (or 0x0 to keep the size)",
                          s->width, s->height);
    if (s->val_last < 0) return status_set(st, ST_INPUT, "val-last %d must be >= 0", s->val_last);
    Stencil tmp;
    return frame_settings_stencil(s, &tmp, st);
}

int frame_settings_stencil(const FrameSettings *s, Stencil *out, Status *st) {
    if (s->stencil < 0 || s->stencil >= STENCIL_KIND_COUNT)
        return status_set(st, ST_INPUT, "unknown stencil");
    return stencil_make(out, s->stencil, s->sg_window, s->sg_degree, st);
}

/* ---- natural sort ------------------------------------------------------------------------ */

int frames_natural_cmp(const char *a, const char *b) {
    const char *p = a, *q = b;
    while (*p && *q) {
        if (isdigit((unsigned char)*p) && isdigit((unsigned char)*q)) {
            while (*p == '0' && isdigit((unsigned char)p[1])) p++;
            while (*q == '0' && isdigit((unsigned char)q[1])) q++;
            size_t lp = 0, lq = 0;
            while (isdigit((unsigned char)p[lp])) lp++;
            while (isdigit((unsigned char)q[lq])) lq++;
            if (lp != lq) return lp < lq ? -1 : 1;
            int c = memcmp(p, q, lp);
            if (c) return c < 0 ? -1 : 1;
            p += lp, q += lq;
        } else {
            if (*p != *q) return (unsigned char)*p < (unsigned char)*q ? -1 : 1;
            p++, q++;
        }
    }
    if (*p || *q) return *p ? 1 : -1;
    int c = strcmp(a, b);
    return c < 0 ? -1 : c > 0;
}

/* ---- gaps in the numbering --------------------------------------------------------------- */

#define GAP_MAX_RUNS 16 /* digit runs per file name considered */

/* The digit runs of a name: their values (a run of more than 18 digits fails), and the name with
 * each run replaced by '#' as its shape. Returns the number of runs, -1 when not usable. */
static int name_numbers(const char *s, long long *v, char *shape, size_t n) {
    int k = 0;
    size_t o = 0;
    while (*s) {
        if (isdigit((unsigned char)*s)) {
            if (k == GAP_MAX_RUNS) return -1;
            long long x = 0;
            int len = 0;
            for (; isdigit((unsigned char)*s); s++, len++) x = x * 10 + (*s - '0');
            if (len > 18) return -1;
            v[k++] = x;
            if (o + 1 < n) shape[o++] = '#';
        } else if (o + 1 < n) {
            shape[o++] = *s++;
        } else {
            return -1;
        }
    }
    shape[o] = 0;
    return k;
}

static int cmp_ll(const void *a, const void *b) {
    long long x = *(const long long *)a, y = *(const long long *)b;
    return x < y ? -1 : x > y;
}

int frames_find_gaps(const char *const *names, int n, long long *vals, int *cut, int max_cut, long long *step) {
    *step = 0;
    if (n < 3) return 0; /* one step: nothing to compare it with */
    long long v0[GAP_MAX_RUNS], v[GAP_MAX_RUNS];
    char shape0[256], shape[256];
    int k0 = name_numbers(names[0], v0, shape0, sizeof shape0), at = -1;
    if (k0 <= 0) return 0;
    /* exactly one run may differ in value between the names */
    for (int i = 1; i < n; i++) {
        int k = name_numbers(names[i], v, shape, sizeof shape);
        if (k != k0 || strcmp(shape, shape0)) return 0;
        for (int j = 0; j < k; j++)
            if (v[j] != v0[j]) {
                if (at >= 0 && at != j) return 0;
                at = j;
            }
    }
    if (at < 0) return 0;
    long long *num = malloc(2 * (size_t)n * sizeof *num), *d = num + n;
    if (!num) return -1;
    for (int i = 0; i < n; i++) {
        name_numbers(names[i], v, shape, sizeof shape);
        num[i] = v[at];
    }
    for (int i = 0; i + 1 < n; i++) d[i] = num[i + 1] - num[i];
    qsort(d, (size_t)(n - 1), sizeof *d, cmp_ll);
    long long s = d[(n - 2) / 2]; /* the lower median of the n - 1 steps */
    int gaps = 0;
    if (s > 0) {
        for (int i = 0; i + 1 < n; i++) {
            long long di = num[i + 1] - num[i];
            if (2 * di >= 3 * s) { /* round(di / s) - 1 >= 1 frames missing */
                if (cut && gaps < max_cut) cut[gaps] = i + 1;
                gaps++;
            } else if (!(di >= s - s / 4 && di <= s + s / 4)) { /* neither a gap nor a step: no frame count */
                gaps = 0;
                break;
            }
        }
    }
    if (gaps > 0) *step = s;
    if (vals) memcpy(vals, num, (size_t)n * sizeof *num);
    free(num);
    return gaps;
}

static int cmp_files(const void *x, const void *y) {
    const SourceFile *a = x, *b = y;
    const char *na = strrchr(a->path, '/'), *nb = strrchr(b->path, '/');
    return frames_natural_cmp(na ? na + 1 : a->path, nb ? nb + 1 : b->path);
}

static int cmp_recs(const void *x, const void *y) {
    const ScanRecording *a = x, *b = y;
    return frames_natural_cmp(a->name, b->name);
}

/* ---- scan -------------------------------------------------------------------------------- */

void frames_scan_free(FrameScan *fs) {
    for (int r = 0; r < fs->n_rec; r++) {
        for (int i = 0; i < fs->rec[r].n_files; i++) free(fs->rec[r].files[i].path);
        free(fs->rec[r].files);
    }
    free(fs->rec);
    free(fs->gap_notes);
    fs->rec = NULL;
    fs->gap_notes = NULL;
    fs->n_rec = 0;
}

void frames_warn_gaps(const FrameScan *fs, FILE *f) {
    for (const char *p = fs->gap_notes, *e; p && (e = strchr(p, '\n')); p = e + 1)
        fprintf(f, "framelaw: warning: %.*s\n", (int)(e - p), p);
}

static char *join(const char *dir, const char *name) {
    size_t a = strlen(dir), b = strlen(name);
    char *p = malloc(a + b + 2);
    if (!p) return NULL;
    memcpy(p, dir, a);
    size_t k = a;
    if (a && dir[a - 1] != '/') p[k++] = '/';
    memcpy(p + k, name, b + 1);
    return p;
}

static void fill_stat(SourceFile *f, const struct stat *sb) {
    f->size = (int64_t)sb->st_size;
    f->mtime_ns = (int64_t)sb->st_mtim.tv_sec * 1000000000LL + sb->st_mtim.tv_nsec;
}

static int add_rec(FrameScan *fs, int *cap, Status *st) {
    if (fs->n_rec == *cap) {
        int nc = *cap ? 2 * *cap : 8;
        ScanRecording *nr = realloc(fs->rec, sizeof *nr * (size_t)nc);
        if (!nr) return status_set(st, ST_RUNTIME, "%s: out of memory", fs->root);
        fs->rec = nr, *cap = nc;
    }
    memset(&fs->rec[fs->n_rec], 0, sizeof fs->rec[0]);
    fs->n_rec++;
    return 0;
}

/* The missing numbers between a and b (step s) as text: "41", "41-44", "40-60 (every 10)", or
 * "about 3 between 1033 and 1167" when the gap is not a whole number of steps. */
static int missing_text(char *out, size_t n, long long a, long long b, long long s) {
    long long d = b - a;
    if (d % s) return snprintf(out, n, "about %lld between %lld and %lld", (d + s / 2) / s - 1, a, b);
    if (d == 2 * s) return snprintf(out, n, "%lld", a + s);
    if (s == 1) return snprintf(out, n, "%lld-%lld", a + 1, b - 1);
    return snprintf(out, n, "%lld-%lld (every %lld)", a + s, b - s, s);
}

#define GAP_NOTE_MAX 8 /* gaps listed per recording; the rest counted */

/* Split recording r at the gaps of its numbering into pieces "<name>-part<k>", recordings of their
 * own placed where r was, and add a line to fs->gap_notes. */
static int split_gaps(FrameScan *fs, int *cap, int r, Status *st) {
    ScanRecording *rec = &fs->rec[r];
    if (rec->kind != REC_IMAGES || rec->video || rec->n_files < 3) return 0;
    int n = rec->n_files, rc = 0;
    const char **names = malloc((size_t)n * sizeof *names);
    long long *vals = malloc((size_t)n * sizeof *vals), step;
    int *cut = malloc((size_t)n * sizeof *cut);
    char *line = NULL;
    if (!names || !vals || !cut) {
        rc = status_set(st, ST_RUNTIME, "%s: out of memory", fs->root);
        goto done;
    }
    for (int i = 0; i < n; i++) {
        const char *b = strrchr(rec->files[i].path, '/');
        names[i] = b ? b + 1 : rec->files[i].path;
    }
    int gaps = frames_find_gaps(names, n, vals, cut, n, &step);
    if (gaps < 0) rc = status_set(st, ST_RUNTIME, "%s: out of memory", fs->root);
    if (gaps <= 0) goto done;
    /* the note: "DIR: frame numbers 41-44, 90 missing: split into 3 recordings, NAME-part1 to NAME-part3 (...)" */
    size_t ln = 4096 + strlen(rec->files[0].path), k = 0;
    if (!(line = malloc(ln))) {
        rc = status_set(st, ST_RUNTIME, "%s: out of memory", fs->root);
        goto done;
    }
    const char *p0 = rec->files[0].path, *slash = strrchr(p0, '/');
    k += (size_t)snprintf(line + k, ln - k, "%.*s: frame number%s ", slash ? (int)(slash - p0) : 1, slash ? p0 : ".",
                          gaps == 1 && cut[0] > 0 && vals[cut[0]] - vals[cut[0] - 1] == 2 * step ? "" : "s");
    for (int g = 0; g < gaps && g < GAP_NOTE_MAX; g++) {
        if (g) k += (size_t)snprintf(line + k, ln - k, ", ");
        k += (size_t)missing_text(line + k, ln - k, vals[cut[g] - 1], vals[cut[g]], step);
    }
    if (gaps > GAP_NOTE_MAX) k += (size_t)snprintf(line + k, ln - k, " and %d more gaps", gaps - GAP_NOTE_MAX);
    k += (size_t)snprintf(line + k, ln - k, " missing: split into %d recordings, %s-part1 to %s-part%d (a derivative "
                          "never spans a gap; restore the missing frames to keep one recording)\n", gaps + 1, rec->name, rec->name, gaps + 1);
    /* the pieces */
    for (int g = 0; g < gaps; g++)
        if (add_rec(fs, cap, st)) {
            rc = st->code;
            goto done;
        }
    rec = &fs->rec[r]; /* add_rec may have moved the array */
    int tail = fs->n_rec - gaps - (r + 1); /* recordings after r, before the new ones */
    memmove(&fs->rec[r + 1 + gaps], &fs->rec[r + 1], (size_t)tail * sizeof *fs->rec);
    ScanRecording whole = *rec;
    for (int g = 0; g <= gaps; g++) {
        int a = g ? cut[g - 1] : 0, b = g < gaps ? cut[g] : n;
        ScanRecording *pc = &fs->rec[r + g];
        memset(pc, 0, sizeof *pc);
        pc->kind = REC_IMAGES;
        pc->piece = g + 1;
        snprintf(pc->name, sizeof pc->name, "%.*s-part%d", (int)sizeof pc->name - 20, whole.name, g + 1);
        pc->files = malloc((size_t)(b - a) * sizeof *pc->files);
        if (!pc->files) { /* the files not yet moved stay with whole: free them there */
            for (int i = a; i < n; i++) free(whole.files[i].path);
            for (int h = g + 1; h <= gaps; h++) memset(&fs->rec[r + h], 0, sizeof *fs->rec);
            free(whole.files);
            rc = status_set(st, ST_RUNTIME, "%s: out of memory", fs->root);
            goto done;
        }
        memcpy(pc->files, whole.files + a, (size_t)(b - a) * sizeof *pc->files);
        pc->n_files = b - a;
    }
    free(whole.files);
    size_t old = fs->gap_notes ? strlen(fs->gap_notes) : 0;
    char *nn = realloc(fs->gap_notes, old + k + 1);
    if (!nn) {
        rc = status_set(st, ST_RUNTIME, "%s: out of memory", fs->root);
        goto done;
    }
    memcpy(nn + old, line, k + 1);
    fs->gap_notes = nn;
    fs->n_split++;
done:
    free(names), free(vals), free(cut), free(line);
    return rc;
}

static void set_name(ScanRecording *r, const char *path, int strip_ext) {
    const char *base = path + strlen(path);
    while (base > path && base[-1] == '/') base--;   /* trailing slashes */
    const char *end = base;
    while (base > path && base[-1] != '/') base--;
    size_t n = (size_t)(end - base);
    if (n == 0) base = ".", n = 1;
    if (n >= sizeof r->name) n = sizeof r->name - 1;
    memcpy(r->name, base, n);
    r->name[n] = 0;
    if (strip_ext) {
        char *dot = strrchr(r->name, '.');
        if (dot && dot != r->name) *dot = 0;
    }
}

/* Image files directly inside dir, naturally sorted. *n_img = 0 when none. Counts other entries in
 * *other_files, *dirs when not NULL. */
static int list_images(const char *dir, SourceFile **out, int *n_img, int *other_files, int *dirs, Status *st) {
    *out = NULL;
    *n_img = 0;
    DIR *d = opendir(dir);
    if (!d) return status_set(st, ST_INPUT, "%s: cannot open folder: %s", dir, strerror(errno));
    int cap = 0, rc = 0;
    SourceFile *v = NULL;
    struct dirent *e;
    while ((e = readdir(d))) {
        if (e->d_name[0] == '.') continue;
        char *p = join(dir, e->d_name);
        struct stat sb;
        if (!p) {
            rc = status_set(st, ST_RUNTIME, "%s: out of memory", dir);
            break;
        }
        int named = image_is_image_name(e->d_name);
        if (stat(p, &sb) != 0) {
            if (named) { /* a frame that cannot be read would leave a gap in the recording */
                rc = status_set(st, ST_INPUT, "%s: cannot read: %s", p, strerror(errno));
                free(p);
                break;
            }
            free(p);
            if (other_files) (*other_files)++;
            continue;
        }
        if (S_ISDIR(sb.st_mode)) {
            if (dirs) (*dirs)++;
            free(p);
            continue;
        }
        if (named && !S_ISREG(sb.st_mode)) {
            rc = status_set(st, ST_INPUT, "%s: named like a frame but not a regular file (a device, pipe or socket, or "
                            "a link to one): move it out of the folder", p);
            free(p);
            break;
        }
        if (!S_ISREG(sb.st_mode) || !named) {
            if (other_files) (*other_files)++;
            free(p);
            continue;
        }
        if (*n_img == cap) {
            cap = cap ? 2 * cap : 64;
            SourceFile *nv = realloc(v, sizeof *nv * (size_t)cap);
            if (!nv) {
                free(p);
                rc = status_set(st, ST_RUNTIME, "%s: out of memory", dir);
                break;
            }
            v = nv;
        }
        v[*n_img].path = p;
        fill_stat(&v[*n_img], &sb);
        (*n_img)++;
    }
    closedir(d);
    if (rc) {
        for (int i = 0; i < *n_img; i++) free(v[i].path);
        free(v);
        *n_img = 0;
        return rc;
    }
    if (*n_img) qsort(v, (size_t)*n_img, sizeof *v, cmp_files);
    *out = v;
    return 0;
}

static int add_numeric(FrameScan *fs, int *cap, const char *path, const struct stat *sb, Status *st) {
    if (add_rec(fs, cap, st)) return st->code;
    ScanRecording *r = &fs->rec[fs->n_rec - 1];
    r->kind = REC_NUMERIC;
    set_name(r, path, 1);
    r->files = calloc(1, sizeof *r->files);
    if (r->files) r->files[0].path = strdup(path);
    if (!r->files || !r->files[0].path) return status_set(st, ST_RUNTIME, "%s: out of memory", path);
    r->n_files = 1;
    fill_stat(&r->files[0], sb);
    return 0;
}

static int add_video(FrameScan *fs, int *cap, const char *path, const struct stat *sb, Status *st) {
    if (add_numeric(fs, cap, path, sb, st)) return st->code; /* one file, as a numeric recording */
    ScanRecording *r = &fs->rec[fs->n_rec - 1];
    r->kind = REC_IMAGES;
    r->video = 1;
    return video_probe(path, &r->vinfo, st);
}

int frames_source_rate(const FrameScan *fs, double *fps, char *from, size_t n, Status *st) {
    *fps = 0;
    if (n) from[0] = 0;
    for (int r = 0; r < fs->n_rec; r++) {
        const ScanRecording *rec = &fs->rec[r];
        const char *p = rec->files[0].path;
        double f = 0;
        if (rec->video) f = rec->vinfo.fps;
        else if (rec->kind == REC_NUMERIC && series_is_numeric_path(p)) {
            Series ser;
            if (series_read(p, &ser, st)) return st->code;
            int tc = series_time_column(&ser), rc = 0;
            double dt = 0;
            if (tc >= 0 && !(rc = series_time_step(&ser, tc, p, FRAMES_DT_TOL, &dt, st))) f = 1.0 / dt;
            series_free(&ser);
            if (rc) return rc;
        }
        if (f <= 0) continue;
        if (*fps > 0 && fabs(f - *fps) > 1e-3 * *fps)
            return status_set(st, ST_INPUT, "%s: %g samples per second, but %s has %g: recordings of one run share "
                              "their rate", p, f, from, *fps);
        if (*fps <= 0) {
            *fps = f;
            if (n) snprintf(from, n, "%s", p);
        }
    }
    return 0;
}

int frames_scan(const char *path, FrameScan *fs, Status *st) {
    memset(fs, 0, sizeof *fs);
    snprintf(fs->root, sizeof fs->root, "%s", path);
    int cap = 0;
    struct stat sb;
    if (stat(path, &sb) != 0) return status_set(st, ST_INPUT, "%s: %s", path, strerror(errno));
    if (S_ISREG(sb.st_mode) && video_is_video_name(path)) {
        fs->single = 1;
        fs->kind = REC_IMAGES;
        if (add_video(fs, &cap, path, &sb, st)) goto fail;
        return 0;
    }
    if (S_ISREG(sb.st_mode)) {
        if (!series_is_numeric_path(path))
            return status_set(st, ST_INPUT, "%s: not a folder, a video, nor a .csv or .npy recording", path);
        fs->single = 1;
        fs->kind = REC_NUMERIC;
        if (add_numeric(fs, &cap, path, &sb, st)) goto fail;
        return 0;
    }
    if (!S_ISDIR(sb.st_mode))
        return status_set(st, ST_INPUT, "%s: not a folder, nor a regular file (a device, pipe or socket, or a link to one)",
                          path);
    SourceFile *imgs;
    int n_img, other = 0, dirs = 0;
    if (list_images(path, &imgs, &n_img, &other, &dirs, st)) return st->code;
    if (n_img) {
        fs->single = 1;
        fs->kind = REC_IMAGES;
        fs->ignored_files = other;
        fs->ignored_dirs = dirs;
        if (add_rec(fs, &cap, st)) {
            for (int i = 0; i < n_img; i++) free(imgs[i].path);
            free(imgs);
            goto fail;
        }
        set_name(&fs->rec[0], path, 0);
        fs->rec[0].kind = REC_IMAGES;
        fs->rec[0].files = imgs;
        fs->rec[0].n_files = n_img;
        if (split_gaps(fs, &cap, 0, st)) goto fail;
        return 0;
    }
    free(imgs);
    /* Several recordings: sub-folders with images, and numeric files. */
    DIR *d = opendir(path);
    if (!d) return status_set(st, ST_INPUT, "%s: cannot open folder: %s", path, strerror(errno));
    struct dirent *e;
    int n_img_rec = 0, n_num_rec = 0, rc = 0;
    char first_img[256] = "", first_num[256] = "";
    while (!rc && (e = readdir(d))) {
        if (e->d_name[0] == '.') continue;
        char *p = join(path, e->d_name);
        if (!p) {
            rc = status_set(st, ST_RUNTIME, "%s: out of memory", path);
            break;
        }
        if (stat(p, &sb) != 0) {
            if (series_is_numeric_path(e->d_name)) rc = status_set(st, ST_INPUT, "%s: cannot read: %s", p, strerror(errno));
            else fs->ignored_files++;
        } else if (S_ISDIR(sb.st_mode)) {
            int sub_other = 0, sub_dirs = 0;
            if (list_images(p, &imgs, &n_img, &sub_other, &sub_dirs, st)) rc = st->code;
            else if (!n_img) {
                fs->ignored_dirs++;
                free(imgs);
            } else if (add_rec(fs, &cap, st)) {
                for (int i = 0; i < n_img; i++) free(imgs[i].path);
                free(imgs);
                rc = st->code;
            } else {
                ScanRecording *r = &fs->rec[fs->n_rec - 1];
                set_name(r, p, 0);
                r->kind = REC_IMAGES;
                r->files = imgs;
                r->n_files = n_img;
                fs->ignored_files += sub_other;
                fs->ignored_dirs += sub_dirs;
                if (!n_img_rec++) snprintf(first_img, sizeof first_img, "%s", e->d_name);
            }
        } else if (S_ISREG(sb.st_mode) && video_is_video_name(e->d_name)) {
            if (add_video(fs, &cap, p, &sb, st)) rc = st->code;
            else if (!n_img_rec++) snprintf(first_img, sizeof first_img, "%s", e->d_name);
        } else if (series_is_numeric_path(e->d_name) && !S_ISREG(sb.st_mode)) {
            rc = status_set(st, ST_INPUT, "%s: named like a recording but not a regular file (a device, pipe or "
                            "socket, or a link to one): move it out of the folder", p);
        } else if (S_ISREG(sb.st_mode) && series_is_numeric_path(e->d_name)) {
            if (add_numeric(fs, &cap, p, &sb, st)) rc = st->code;
            else if (!n_num_rec++) snprintf(first_num, sizeof first_num, "%s", e->d_name);
        } else {
            fs->ignored_files++;
        }
        free(p);
    }
    closedir(d);
    if (rc) goto fail;
    if (fs->n_rec == 0) {
        status_set(st, ST_INPUT, "%s: no image files or recordings found (%d other files, %d empty sub-folders)",
                   path, fs->ignored_files, fs->ignored_dirs);
        goto fail;
    }
    if (n_img_rec && n_num_rec) {
        status_set(st, ST_INPUT, "%s: mixes image recordings (sub-folder %s) and numeric recordings (%s); use one kind",
                   path, first_img, first_num);
        goto fail;
    }
    fs->kind = n_img_rec ? REC_IMAGES : REC_NUMERIC;
    qsort(fs->rec, (size_t)fs->n_rec, sizeof fs->rec[0], cmp_recs);
    int n_whole = fs->n_rec;
    for (int r = 0; r < fs->n_rec; r++) { /* in name order, so that the notes are */
        int before = fs->n_rec;
        if (split_gaps(fs, &cap, r, st)) goto fail;
        r += fs->n_rec - before;
    }
    if (fs->n_rec != n_whole) qsort(fs->rec, (size_t)fs->n_rec, sizeof fs->rec[0], cmp_recs);
    for (int r = 1; r < fs->n_rec; r++)
        if (!strcmp(fs->rec[r].name, fs->rec[r - 1].name)) {
            status_set(st, ST_INPUT, "%s: two recordings are named '%s' (a sub-folder and a file, or a.csv and a.npy)",
                       path, fs->rec[r].name);
            goto fail;
        }
    return 0;
fail:
    frames_scan_free(fs);
    return st->code;
}

/* ---- digest ------------------------------------------------------------------------------ */

/* A string as its length, then its bytes (so that "ab" + "c" and "a" + "bc" differ). */
static uint64_t fnv_str(uint64_t h, const char *s) { return fnv1a64_str(fnv1a64_u64(h, strlen(s)), s); }

/* The [store] settings, each as a u64. */
static uint64_t fnv_settings(uint64_t h, const FrameScan *fs, const FrameSettings *s) {
    int64_t v[] = {s->gray, s->crop_x, s->crop_y, s->crop_w, s->crop_h, s->width, s->height,
                   fs->kind == REC_NUMERIC ? 32 : s->bits, s->stride};
    for (size_t i = 0; i < sizeof v / sizeof v[0]; i++) h = fnv1a64_u64(h, (uint64_t)v[i]);
    return h;
}

uint64_t frames_digest(const FrameScan *fs, const FrameSettings *s) {
    uint64_t h = FNV1A64_INIT;
    h = fnv1a64_u64(h, STORE_VERSION);
    h = fnv1a64_u64(h, (uint64_t)fs->n_rec);
    size_t root_len = strlen(fs->root);
    for (int r = 0; r < fs->n_rec; r++) {
        const ScanRecording *rec = &fs->rec[r];
        h = fnv_str(h, rec->name);
        h = fnv1a64_u64(h, rec->kind);
        h = fnv1a64_u64(h, (uint64_t)rec->n_files);
        for (int i = 0; i < rec->n_files; i++) {
            const char *p = rec->files[i].path;
            /* Relative to the root, so that moving the whole folder keeps the store valid. */
            if (!fs->single && !strncmp(p, fs->root, root_len)) {
                p += root_len;
                while (*p == '/') p++;
            } else if (fs->single) {
                const char *b = strrchr(p, '/');
                p = b ? b + 1 : p;
            }
            h = fnv_str(h, p);
            h = fnv1a64_u64(h, (uint64_t)rec->files[i].size);
            h = fnv1a64_u64(h, (uint64_t)rec->files[i].mtime_ns);
        }
    }
    if (fs->kind == REC_NUMERIC) h = fnv_str(h, "time column t|time is the clock"); /* since stores dropped it */
    return fnv_settings(h, fs, s);
}

void frames_store_path(const FrameScan *fs, const FrameSettings *s, char *out, size_t n) {
    if (s->store_path[0]) {
        snprintf(out, n, "%s", s->store_path);
        return;
    }
    size_t len = strlen(fs->root);
    while (len > 1 && fs->root[len - 1] == '/') len--;
    if (fs->single && (fs->kind == REC_NUMERIC || fs->rec[0].video)) { /* a file: beside it */
        const char *slash = memchr(fs->root, '/', len) ? strrchr(fs->root, '/') : NULL;
        if (slash) snprintf(out, n, "%.*s/.%s.framelaw-store", (int)(slash - fs->root), fs->root, slash + 1);
        else snprintf(out, n, ".%s.framelaw-store", fs->root);
        return;
    }
    snprintf(out, n, "%.*s/.framelaw-store", (int)len, fs->root);
}

int frames_store_cache_path(const FrameScan *fs, const FrameSettings *s, char *out, size_t n, Status *st) {
    const char *xdg = getenv("XDG_CACHE_HOME"), *home = getenv("HOME");
    char base[4096];
    if (xdg && xdg[0] == '/') /* a relative value is to be ignored (XDG Base Directory Specification) */
        snprintf(base, sizeof base, "%.4000s/framelaw", xdg);
    else if (home && home[0] == '/')
        snprintf(base, sizeof base, "%.4000s/.cache/framelaw", home);
    else
        return status_set(st, ST_INPUT, "%s: the folder is not writable and there is no cache folder ($XDG_CACHE_HOME "
                          "and $HOME unset): set data.store (framelaw frames: --store) to a writable place", fs->root);
    char *abs = realpath(fs->root, NULL);
    uint64_t h = fnv_str(FNV1A64_INIT, abs ? abs : fs->root);
    free(abs);
    h = fnv_settings(h, fs, s);
    ScanRecording tmp; /* the source's name, as a recording of it would be named */
    memset(&tmp, 0, sizeof tmp);
    set_name(&tmp, fs->root, fs->single && (fs->kind == REC_NUMERIC || fs->rec[0].video));
    char stem[65];
    size_t k = 0;
    for (const char *p = tmp.name; *p && k + 1 < sizeof stem; p++)
        stem[k++] = isalnum((unsigned char)*p) || *p == '-' || *p == '_' || *p == '.' ? *p : '_';
    stem[k] = 0;
    if (stem[0] == '.') stem[0] = '_'; /* not a hidden file in the cache */
    if (snprintf(out, n, "%s/%s-%016llx.framelaw-store", base, stem, (unsigned long long)h) >= (int)n)
        return status_set(st, ST_INPUT, "%s: the cache path is too long: set data.store (framelaw frames: --store)", base);
    return 0;
}
