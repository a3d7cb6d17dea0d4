/* io/cli/cmd_frames.c: `framelaw frames DIR`: inspect a frames folder (or numeric recordings), build or
 * reuse its frame store, print what a training run would see, write a contact sheet. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "io/cli/cli.h"
#include "io/run/config.h"
#include "io/run/rundata.h"
#include "io/data/frames.h"
#include "io/data/gather.h"
#include "io/data/glyphs.h"
#include "io/data/images.h"
#include "io/data/store.h"

#define SHEET_DEFAULT "contact-sheet.png"
#define SHEET_SOFTWARE "framelaw contact sheet" /* the PNG's Software text: how a sheet of ours is known */

/* The contact sheet replaces only a file that is one: a PNG whose Software text says framelaw wrote
 * it as a contact sheet (an earlier `framelaw frames`). Anything else at that path (a frame, another
 * file, a folder, a link) is refused before any work, so that --sheet never silently destroys a
 * file. 0 when the path is free or holds a sheet of ours; ST_INPUT naming it otherwise. */
static int sheet_place_free(const char *path, Status *st) {
    struct stat sb;
    if (lstat(path, &sb) != 0) {
        if (errno == ENOENT) return 0;
        return status_set(st, ST_INPUT, "%s: cannot write the contact sheet there: %s (--sheet FILE, or --sheet none)",
                          path, strerror(errno));
    }
    char sw[64];
    if (S_ISREG(sb.st_mode) && image_png_text(path, "Software", sw, sizeof sw) && !strcmp(sw, SHEET_SOFTWARE))
        return 0;
    return status_set(st, ST_INPUT, "%s: exists and is not a contact sheet framelaw wrote, so it is left as it is; "
                      "remove it, or name another file with --sheet FILE (or --sheet none)", path);
}

/* The defaults are train's: those of a config that sets nothing (io/run/config.c). */
static void frames_usage(FILE *f) {
    static Config c;
    FrameSettings d;
    Status st;
    config_defaults(&c);
    if (frame_settings_from_config(&c, &d, &st)) d = frame_settings_default(); /* cannot happen: the defaults are valid */
    fprintf(f,
            "usage: framelaw frames DIR [--config FILE] [options]\n\n"
            "Inspects a frames folder: one recording (image files directly inside) or several (one\n"
            "sub-folder per recording; .csv and .npy files are numeric recordings). Builds the frame\n"
            "store, or reuses it when it is current, prints the recordings, frame counts, frame size,\n"
            "durations, store size and training-set size, and writes a contact sheet PNG (first, middle\n"
            "and last frame of each recording, after preprocessing, under the recording's name). The\n"
            "defaults are train's (those of a config that sets nothing); --config reads a run config's\n"
            "data.* keys and model.order instead, and flags override them.\n\n"
            "options (default in brackets):\n"
            "  --config FILE          run config whose data.* keys set everything below    [none]\n"
            "  --gray bt601|bt709     luma weights for colour frames                       [%s]\n"
            "  --crop X,Y,W,H         crop rectangle in source pixels                      [none]\n"
            "  --size WxH             frame size after the crop, by area averaging         [keep]\n"
            "  --bits 8|16            bits per pixel in the frame store                    [%d]\n"
            "  --stride N             keep every N-th frame                                [%d]\n"
            "  --fps F                frames per second of the source; dt = stride / fps   [%g]\n"
            "  --scale unit|standardize  intensities in [0,1], or per-pixel mean 0, sd 1   [%s]\n"
            "  --derivative central|savgol|auto  derivative stencil; auto: Savitzky-Golay\n"
            "                         chosen for how fast the frames move (as train)       [%s]\n"
            "  --window N             Savitzky-Golay window (odd; for savgol)              [%d]\n"
            "  --degree N             Savitzky-Golay polynomial degree (for savgol)        [%d]\n"
            "  --val NAME[,NAME...]   validation recordings by name                        [none]\n"
            "  --val-last N           else hold out the last N recordings                  [%d]\n"
            "  --store FILE           frame store file  [DIR/.framelaw-store; a read-only DIR: the cache]\n"
            "  --sheet FILE           contact sheet PNG; 'none' skips it   [" SHEET_DEFAULT "]\n"
            "                         (replaces a file only if it is a contact sheet framelaw wrote)\n"
            "  --rebuild              rebuild the frame store even when it is current      [off]\n"
            "  --help                 this text\n\n"
            "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input\n",
            gray_std_names[d.gray], d.bits, d.stride, d.fps, scale_mode_names[d.scale],
            deriv_method_names[c.derivative], d.sg_window, d.sg_degree, d.val_last);
}

static int parse_int(const char *opt, const char *v, int lo, int *out) {
    char *e;
    errno = 0;
    long x = strtol(v, &e, 10);
    if (e == v || *e || errno || x < lo || x > 1000000000)
        return cli_error(2, "%s '%s': expected an integer >= %d", opt, v, lo);
    *out = (int)x;
    return 0;
}

/* Apply one option to s. *i points at the option; its value is argv[*i + 1] or after '='. */
static int apply_option(FrameSettings *s, int argc, char **argv, int *i, const char **sheet, int *rebuild,
                        int *autod) {
    char name[64];
    const char *arg = argv[*i], *val = NULL, *eq = strchr(arg, '=');
    if (eq) {
        snprintf(name, sizeof name, "%.*s", (int)(eq - arg), arg);
        val = eq + 1;
    } else {
        snprintf(name, sizeof name, "%s", arg);
    }
    if (!strcmp(name, "--rebuild")) {
        *rebuild = 1;
        return 0;
    }
    if (!val) {
        if (*i + 1 >= argc) return cli_error(2, "%s needs a value (framelaw frames --help)", name);
        val = argv[++*i];
    }
    if (!strcmp(name, "--gray")) {
        s->gray = gray_std_from_name(val);
        if (s->gray == GRAY_COUNT) return cli_error(2, "--gray '%s': expected bt601 or bt709", val);
    } else if (!strcmp(name, "--crop")) {
        char tail;
        if (sscanf(val, "%d,%d,%d,%d%c", &s->crop_x, &s->crop_y, &s->crop_w, &s->crop_h, &tail) != 4 ||
            s->crop_x < 0 || s->crop_y < 0 || s->crop_w <= 0 || s->crop_h <= 0)
            return cli_error(2, "--crop '%s': expected X,Y,W,H with X, Y >= 0 and W, H > 0", val);
    } else if (!strcmp(name, "--size")) {
        char tail;
        if (sscanf(val, "%dx%d%c", &s->width, &s->height, &tail) != 2 || s->width <= 0 || s->height <= 0)
            return cli_error(2, "--size '%s': expected WxH, e.g. 64x48", val);
    } else if (!strcmp(name, "--bits")) {
        if (parse_int(name, val, 8, &s->bits)) return 2;
        if (s->bits != 8 && s->bits != 16) return cli_error(2, "--bits %d: expected 8 or 16", s->bits);
    } else if (!strcmp(name, "--stride")) {
        if (parse_int(name, val, 1, &s->stride)) return 2;
    } else if (!strcmp(name, "--fps")) {
        char *e;
        s->fps = strtod(val, &e);
        if (e == val || *e || !(s->fps > 0) || s->fps > 1e12)
            return cli_error(2, "--fps '%s': the frame rate must be a positive number", val);
    } else if (!strcmp(name, "--scale")) {
        s->scale = scale_mode_from_name(val);
        if (s->scale == SCALE_COUNT) return cli_error(2, "--scale '%s': expected unit or standardize", val);
    } else if (!strcmp(name, "--derivative")) {
        *autod = !strcmp(val, "auto");
        if (!*autod) s->stencil = stencil_kind_from_name(val);
        if (s->stencil == STENCIL_KIND_COUNT)
            return cli_error(2, "--derivative '%s': expected central, savgol or auto", val);
    } else if (!strcmp(name, "--window")) {
        if (parse_int(name, val, 1, &s->sg_window)) return 2;
    } else if (!strcmp(name, "--degree")) {
        if (parse_int(name, val, 0, &s->sg_degree)) return 2;
    } else if (!strcmp(name, "--val")) {
        if (strlen(val) >= sizeof s->val_names) return cli_error(2, "--val: list too long");
        snprintf(s->val_names, sizeof s->val_names, "%s", val);
    } else if (!strcmp(name, "--val-last")) {
        if (parse_int(name, val, 0, &s->val_last)) return 2;
    } else if (!strcmp(name, "--store")) {
        if (strlen(val) >= sizeof s->store_path) return cli_error(2, "--store: path too long");
        snprintf(s->store_path, sizeof s->store_path, "%s", val);
    } else if (!strcmp(name, "--sheet")) {
        *sheet = val;
    } else {
        return cli_error(2, "unknown option '%s' (framelaw frames --help lists the options)", name);
    }
    return 0;
}

/* Contact sheet: one row per recording, its name above its first, middle and last stored frame,
 * each frame enlarged by an integer factor to at least 96 pixels on its longer side; 4-pixel white
 * gaps. The name is drawn in the built-in font at twice its size (io/data/glyphs.h), shortened in the
 * middle when it is wider than the row. */
static int write_sheet(const FrameStore *fs, const char *path, Status *st) {
    int w = fs->width, h = fs->height, longer = w > h ? w : h;
    int z = longer >= 96 ? 1 : (96 + longer - 1) / longer, gap = 4, ls = 2;
    long tw = (long)w * z, th = (long)h * z, lh = (long)GLYPH_H * ls + gap;   /* label band above a row */
    long W = 3 * tw + 4L * gap, H = (long)fs->n_rec * (lh + th) + (fs->n_rec + 1L) * gap;
    if (W * H > 400L * 1000 * 1000) return status_set(st, ST_RUNTIME, "%s: contact sheet would be too large", path);
    uint8_t *px = malloc((size_t)(W * H));   /* (H, W) */
    if (!px) return status_set(st, ST_RUNTIME, "%s: out of memory", path);
    memset(px, 255, (size_t)(W * H));
    long max_chars = (W - 2L * gap + (GLYPH_ADVANCE - GLYPH_W) * ls) / ((long)GLYPH_ADVANCE * ls);
    for (int r = 0; r < fs->n_rec; r++) {
        long pick[3] = {0, fs->rec[r].count / 2, fs->rec[r].count - 1};
        long top = gap + r * (lh + th + gap);
        char label[4 * STORE_NAME_MAX];
        glyph_fit(label, sizeof label, fs->rec[r].name, max_chars);
        glyph_draw(px, W, H, gap, top, label, ls, 0);
        for (int c = 0; c < 3; c++) {
            const void *fr = store_frame(fs, fs->rec[r].first + pick[c]);
            long x0 = gap + c * (tw + gap), y0 = top + lh;
            for (long y = 0; y < th; y++)
                for (long x = 0; x < tw; x++) {
                    long p = (y / z) * w + x / z;
                    px[(y0 + y) * W + x0 + x] = fs->elem == STORE_U16 ? (uint8_t)((((const uint16_t *)fr)[p] + 128) / 257)
                                                                      : ((const uint8_t *)fr)[p];
                }
        }
    }
    int rc = image_write_png_gray_text(path, px, (int)W, (int)H, "Software", SHEET_SOFTWARE, st);
    free(px);
    return rc;
}

static void print_bytes(double b) {
    if (b >= 1e9) printf("%.2f GB", b / 1e9);
    else if (b >= 1e6) printf("%.1f MB", b / 1e6);
    else printf("%.1f kB", b / 1e3);
}

int cmd_frames(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        frames_usage(stdout);
        return 0;
    }
    FrameSettings s;
    const char *dir = NULL, *config = NULL, *sheet = SHEET_DEFAULT;
    int rebuild = 0, autod = 0, order = 1;
    Status st;
    status_ok(&st);
    /* "--" ends the options: what follows is DIR even when it starts with '-' */
    int end = 1;
    while (end < argc && strcmp(argv[end], "--")) end++;
    /* The config first, so that flags override it wherever they stand. */
    for (int i = 1; i < end; i++) {
        if (!strcmp(argv[i], "--config") || !strncmp(argv[i], "--config=", 9)) {
            config = argv[i][8] == '=' ? argv[i] + 9 : (i + 1 < end ? argv[i + 1] : NULL);
            if (!config) return cli_error(2, "--config needs a value (framelaw frames --help)");
        }
    }
    char cfg_frames[CFG_PATH_MAX] = "";
    { /* without --config, train's defaults: those of a config that sets nothing */
        Config *cfg = malloc(sizeof *cfg);
        if (!cfg) return cli_error(1, "out of memory");
        config_defaults(cfg);
        int rc = (config && config_load(cfg, config, &st)) || frame_settings_from_config(cfg, &s, &st);
        snprintf(cfg_frames, sizeof cfg_frames, "%s", cfg->frames);
        autod = cfg->derivative == DERIV_AUTO, order = cfg->order;
        free(cfg);
        if (rc) return cli_error(st.code, "%s", st.msg);
    }
    for (int i = 1; i < argc; i++) {
        if (i == end) {
        } else if (i < end && !strcmp(argv[i], "--config")) {
            i++;
        } else if (i < end && !strncmp(argv[i], "--config=", 9)) {
        } else if (i < end && !strncmp(argv[i], "--", 2)) {
            int rc = apply_option(&s, end, argv, &i, &sheet, &rebuild, &autod);
            if (rc) return rc;
        } else if (!dir) {
            dir = argv[i];
        } else {
            return cli_error(2, "unexpected argument '%s' (one DIR only)", argv[i]);
        }
    }
    if (!dir && cfg_frames[0]) dir = cfg_frames;
    if (!dir) return cli_error(2, "frames: which folder? usage: framelaw frames DIR [options]");
    if (frame_settings_check(&s, &st)) return cli_error(st.code, "%s", st.msg);

    FrameScan scan;
    if (frames_scan(dir, &scan, &st)) return cli_error(st.code, "%s", st.msg);
    frames_warn_gaps(&scan, stderr);
    if (scan.kind != REC_NUMERIC && strcmp(sheet, "none") && sheet_place_free(sheet, &st)) {
        frames_scan_free(&scan);
        return cli_error(st.code, "%s", st.msg);
    }
    int fps_given = config != NULL;
    for (int i = 1; i < end; i++) fps_given |= !strcmp(argv[i], "--fps");
    if (!fps_given) { /* videos and CSV time columns carry their rate */
        double rate;
        char from[4096];
        if (frames_source_rate(&scan, &rate, from, sizeof from, &st)) {
            frames_scan_free(&scan);
            return cli_error(st.code, "%s", st.msg);
        }
        if (rate > 0) s.fps = rate;
    }
    FrameStore fs;
    StoreOpenInfo info;
    if (store_open_for(&scan, &s, rebuild, &fs, &info, &st)) {
        frames_scan_free(&scan);
        return cli_error(st.code, "%s", st.msg);
    }
    if (info.note[0]) fprintf(stderr, "framelaw: note: %s\n", info.note);
    Dataset ds;
    double theta = 0;
    int drc = dataset_init(&ds, &fs, &s, &st);
    if (!drc && autod) { /* auto: the stencil from the frames, as train does, then the samples again */
        drc = rundata_auto_stencil(&ds, &fs, order, &s, &theta, &st);
        dataset_free(&ds);
        if (!drc) drc = dataset_init(&ds, &fs, &s, &st);
    }
    if (drc) {
        store_close(&fs);
        frames_scan_free(&scan);
        return cli_error(st.code, "%s", st.msg);
    }
    int numeric = scan.kind == REC_NUMERIC;
    double dt = frame_settings_dt(&s);
    printf("source: %s (%d %s recording%s, %s", dir, scan.n_rec, numeric ? "numeric" : "image",
           scan.n_rec == 1 ? "" : "s", scan.single ? "the source itself" : "one per sub-folder or file");
    if (scan.ignored_files || scan.ignored_dirs)
        printf("; ignored %d non-image file%s, %d folder%s", scan.ignored_files, scan.ignored_files == 1 ? "" : "s",
               scan.ignored_dirs, scan.ignored_dirs == 1 ? "" : "s");
    printf(")\n");
    printf("  %-24s %8s %8s %10s  %s\n", "recording", "source", "stored", "duration", "split");
    for (int r = 0; r < fs.n_rec; r++) {
        const StoreRec *rec = &fs.rec[r];
        printf("  %-24s %8ld %8ld %9.2fs  %s\n", rec->name, rec->source_count, rec->count, (double)(rec->count - 1) * dt,
               ds.rec_split[r] == SPLIT_VAL ? "validation" : "training");
    }
    if (numeric) {
        printf("channels: %d (float32 in the store)\n", fs.width);
    } else {
        printf("frame size: %dx%d (source %dx%d", fs.width, fs.height, fs.src_width, fs.src_height);
        if (s.crop_w) printf(", crop %d,%d,%d,%d", s.crop_x, s.crop_y, s.crop_w, s.crop_h);
        if (s.width) printf(", area-averaged to %dx%d", s.width, s.height);
        printf("), grayscale %s, %d-bit, scale %s\n", s.gray == GRAY_BT709 ? "BT.709" : "BT.601", s.bits,
               scale_mode_names[s.scale]);
    }
    printf("time step: %g s (fps %g, stride %d)\n", dt, s.fps, s.stride);
    printf("frame store: %s, ", info.path);
    print_bytes((double)fs.map_bytes);
    printf(" (%s in %.2f s%s%s)\n", info.built ? "built" : "reused", info.seconds, info.built ? ": " : "",
           info.built ? info.reason : "");
    printf("derivatives: %s stencil over %d frames", stencil_kind_names[ds.sten.kind], 2 * ds.sten.m + 1);
    if (ds.sten.kind == STENCIL_SAVGOL) printf(" (degree %d)", ds.sten.degree);
    if (autod) printf(", chosen for frames that move at %.3g rad per frame (auto)", theta);
    printf("; %d frame%s lost at each end of a recording\n", ds.sten.m, ds.sten.m == 1 ? "" : "s");
    printf("training set: %ld samples from %d recording%s; validation: %ld samples from %d recording%s\n",
           ds.count[SPLIT_TRAIN], ds.n_rec_split[SPLIT_TRAIN], ds.n_rec_split[SPLIT_TRAIN] == 1 ? "" : "s",
           ds.count[SPLIT_VAL], ds.n_rec_split[SPLIT_VAL], ds.n_rec_split[SPLIT_VAL] == 1 ? "" : "s");
    printf("sample width: %ld values (x, x' and x'' are formed at gather time: %ld bytes per sample as float32)\n",
           fs.n, 3 * fs.n * 4);
    if (fs.n > 16384) /* the encoder's first layer grows with it: n x its width parameters */
        printf("warning: samples of %ld values make a large model (the first layer alone has %ld x its width "
               "parameters) and slow training; most motions show at 64x64 or less: set --size (data.size)\n",
               fs.n, fs.n);
    int rc = 0;
    if (numeric) {
        printf("contact sheet: none for numeric recordings\n");
    } else if (strcmp(sheet, "none")) {
        if (write_sheet(&fs, sheet, &st)) rc = cli_error(st.code, "%s", st.msg);
        else printf("contact sheet: %s\n", sheet);
    }
    dataset_free(&ds);
    store_close(&fs);
    frames_scan_free(&scan);
    return rc;
}
