/* io/cli/cmd_demo.c: `framelaw demo SCENARIO OUT_DIR`: render the recordings of a demo scenario of our
 * own (demo/lantern.h, demo/convection.h) as PNG frames, one sub-folder per recording, with the
 * ground-truth state beside the frames. docs/lantern.md and docs/convection.md are the user's pages.
 *
 * OUT_DIR/
 *   demo.json                  scenario, settings, physical constants, camera, initial states
 *   rec00/frame000000.png ...  the frames (8-bit gray PNG), natural order = time order
 *   rec00/truth.csv            t,theta,theta_dot (lantern) or t,X,Y,Z (convection), one row a frame
 *   rec01/ ...
 * Each recording is rendered into a hidden folder OUT_DIR/.demo-tmp-recNN (the frames reader skips
 * names starting with '.') and renamed into place when complete; every file is written atomically. */
#include <dirent.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "demo/battery.h"
#include "demo/convection.h"
#include "demo/lantern.h"
#include "io/fs/atomic_file.h"
#include "io/fs/clock.h"
#include "io/fs/files.h"
#include "io/fs/term.h"
#include "io/cli/cli.h"
#include "io/data/images.h"

typedef enum { SC_LANTERN, SC_CONVECTION, SC_COUNT } Scenario;
static const char *const scenario_names[] = {"lantern", "convection"};
static const char *const scenario_about[] = {
    "a lantern swinging on a rigid rod, side-on, 30 fps (docs/lantern.md)",
    "a convection cell: temperature | vertical velocity panels, 100 fps (docs/convection.md)",
};
/* Defaults per scenario. */
static const int def_size[] = {48, 32};
static const int def_recordings[] = {16, 8};
static const int def_frames[] = {300, 1000};
_Static_assert(sizeof scenario_names / sizeof *scenario_names == SC_COUNT && sizeof scenario_about / sizeof *scenario_about == SC_COUNT &&
                   sizeof def_size / sizeof *def_size == SC_COUNT && sizeof def_recordings / sizeof *def_recordings == SC_COUNT &&
                   sizeof def_frames / sizeof *def_frames == SC_COUNT,
               "one entry per scenario");
#define DEF_NOISE 0.02
#define DEF_SEED 1ULL

typedef struct {
    Scenario sc;                    /* SC_COUNT for a battery scenario */
    const BatteryScenario *bat;     /* the battery scenario (docs/battery.md), or NULL */
    const char *out_dir;
    int size, recordings, frames;
    double noise;
    unsigned long long seed;
    int overwrite;
} DemoSettings;

static void demo_usage(FILE *f) {
    fprintf(f,
            "usage: framelaw demo SCENARIO OUT_DIR [options]\n\n"
            "Renders the recordings of a demo scenario as PNG frames, from physics integrated by RK4\n"
            "with %d steps per frame interval: OUT_DIR/rec00/frame000000.png ..., one sub-folder per\n"
            "recording, with the true state of every frame in truth.csv beside the frames and the\n"
            "settings in OUT_DIR/demo.json. The data is invented, for the demo only.\n\n"
            "scenarios:\n",
            DEMO_SUBSTEPS);
    for (int s = 0; s < SC_COUNT; s++) fprintf(f, "  %-12s %s\n", scenario_names[s], scenario_about[s]);
    for (int b = 0; b < battery_count; b++)
        fprintf(f, "  %-12s %s\n               (%d px, %d recordings of %d frames)\n", battery_scenarios[b].name,
                battery_scenarios[b].about, battery_scenarios[b].def_size, battery_scenarios[b].def_recordings,
                battery_scenarios[b].def_frames);
    fprintf(f,
            "\noptions (default in brackets, lantern | convection; the battery's are listed above):\n"
            "  --size N          lantern and the battery: frame side in pixels; convection: frame\n"
            "                    height, each panel round(1.414 N) wide               [%d | %d]\n"
            "  --recordings N    number of recordings                                 [%d | %d]\n"
            "  --frames N        frames per recording                                 [%d | %d]\n"
            "  --noise SIGMA     Gaussian sensor noise, standard deviation as a\n"
            "                    fraction of full scale (0: none)                     [%g]\n"
            "  --seed S          seed of the initial states and the noise             [%llu]\n"
            "  --overwrite       allow a non-empty OUT_DIR: an earlier demo's\n"
            "                    recordings there are replaced                        [off]\n"
            "  --help            this text\n\n"
            "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input\n",
            def_size[0], def_size[1], def_recordings[0], def_recordings[1], def_frames[0], def_frames[1],
            DEF_NOISE, DEF_SEED);
}

static int parse_int(const char *opt, const char *v, long lo, long hi, int *out) {
    char *e;
    errno = 0;
    long x = strtol(v, &e, 10);
    if (e == v || *e || errno || x < lo || x > hi)
        return cli_error(2, "demo: %s '%s': expected an integer in %ld..%ld", opt, v, lo, hi);
    *out = (int)x;
    return 0;
}

/* Parse the command line into s. Returns 0, or the exit status (2) after printing the message. */
static int parse_args(int argc, char **argv, DemoSettings *s) {
    const char *pos[2] = {NULL, NULL};
    int n_pos = 0, size = -1, recs = -1, frames = -1;
    s->noise = DEF_NOISE;
    s->seed = DEF_SEED;
    s->overwrite = 0;
    int operands = 0; /* after "--": SCENARIO and OUT_DIR even when they start with '-' */
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (!operands && !strcmp(a, "--")) {
            operands = 1;
            continue;
        }
        if (operands || strncmp(a, "--", 2)) {
            if (n_pos == 2) return cli_error(2, "demo: unexpected argument '%s' (framelaw demo --help)", a);
            pos[n_pos++] = a;
            continue;
        }
        if (!strcmp(a, "--overwrite")) {
            s->overwrite = 1;
            continue;
        }
        char name[32];
        const char *eq = strchr(a, '='), *v;
        size_t len = eq ? (size_t)(eq - a) : strlen(a);
        snprintf(name, sizeof name, "%.*s", (int)(len < sizeof name ? len : sizeof name - 1), a);
        int known = !strcmp(name, "--size") || !strcmp(name, "--recordings") || !strcmp(name, "--frames") ||
                    !strcmp(name, "--noise") || !strcmp(name, "--seed");
        if (!known) return cli_error(2, "demo: unknown option '%s' (framelaw demo --help lists them)", a);
        if (eq) v = eq + 1;
        else if (i + 1 < argc) v = argv[++i];
        else return cli_error(2, "demo: %s needs a value", name);
        if (!strcmp(name, "--size")) {
            if (parse_int(name, v, 8, 1024, &size)) return 2;
        } else if (!strcmp(name, "--recordings")) {
            if (parse_int(name, v, 1, 10000, &recs)) return 2;
        } else if (!strcmp(name, "--frames")) {
            if (parse_int(name, v, 1, 1000000, &frames)) return 2;
        } else if (!strcmp(name, "--noise")) {
            char *e;
            errno = 0;
            double x = strtod(v, &e);
            if (e == v || *e || errno || !(x >= 0 && x <= 1))
                return cli_error(2, "demo: --noise '%s': expected a number in 0..1", v);
            s->noise = x;
        } else {
            char *e;
            errno = 0;
            unsigned long long x = strtoull(v, &e, 10);
            if (e == v || *e || errno || v[0] == '-')
                return cli_error(2, "demo: --seed '%s': expected a non-negative integer", v);
            s->seed = x;
        }
    }
    if (n_pos < 2) {
        demo_usage(stderr);
        return cli_error(2, "demo: needs SCENARIO and OUT_DIR");
    }
    s->sc = SC_COUNT;
    s->bat = battery_find(pos[0]);
    for (int k = 0; k < SC_COUNT; k++)
        if (!strcmp(pos[0], scenario_names[k])) s->sc = (Scenario)k;
    if (s->sc == SC_COUNT && !s->bat) {
        char known[256] = "lantern, convection";
        for (int b = 0; b < battery_count; b++)
            snprintf(known + strlen(known), sizeof known - strlen(known), ", %s", battery_scenarios[b].name);
        return cli_error(2, "demo: unknown scenario '%s' (known: %s)", pos[0], known);
    }
    s->out_dir = pos[1];
    if (!*s->out_dir) return cli_error(2, "demo: OUT_DIR is empty");
    if (strlen(s->out_dir) > 4000) return cli_error(2, "demo: OUT_DIR '%.60s...' is too long", s->out_dir);
    if (s->bat) {
        s->size = size > 0 ? size : s->bat->def_size;
        s->recordings = recs > 0 ? recs : s->bat->def_recordings;
        s->frames = frames > 0 ? frames : s->bat->def_frames;
        if (s->recordings > BATTERY_MAX_RECORDINGS)
            return cli_error(2, "demo: --recordings %d: the %s scenario renders at most %d", s->recordings, s->bat->name,
                             BATTERY_MAX_RECORDINGS);
        return 0;
    }
    s->size = size > 0 ? size : def_size[s->sc];
    s->recordings = recs > 0 ? recs : def_recordings[s->sc];
    s->frames = frames > 0 ? frames : def_frames[s->sc];
    return 0;
}

/* ---- the output folder ------------------------------------------------------------------------ */

/* -1: does not exist, 0: empty folder, 1: non-empty folder, 2: exists and is not a folder. */
static int dir_state(const char *path) {
    struct stat sb;
    if (stat(path, &sb)) return -1;
    if (!S_ISDIR(sb.st_mode)) return 2;
    DIR *d = opendir(path);
    if (!d) return 1;
    struct dirent *e;
    int any = 0;
    while (!any && (e = readdir(d)))
        if (strcmp(e->d_name, ".") && strcmp(e->d_name, "..")) any = 1;
    closedir(d);
    return any;
}

/* A file that the demo writes into a recording folder (or a temporary left by an atomic write). */
static int demo_file_name(const char *n) {
    return (!strncmp(n, "frame", 5) && strstr(n, ".png")) || !strncmp(n, "truth.csv", 9);
}

/* Remove the demo's files from folder dir, then the folder. ST_INPUT when other files remain. */
static int remove_demo_folder(const char *dir, Status *st) {
    DIR *d = opendir(dir);
    if (!d) return status_set(st, ST_RUNTIME, "%s: cannot open: %s", dir, strerror(errno));
    struct dirent *e;
    char p[4400];
    int rc = 0;
    while (!rc && (e = readdir(d))) {
        if (!demo_file_name(e->d_name)) continue;
        snprintf(p, sizeof p, "%s/%s", dir, e->d_name);
        if (unlink(p)) rc = status_set(st, ST_RUNTIME, "%s: cannot remove: %s", p, strerror(errno));
    }
    closedir(d);
    if (rc) return rc;
    if (rmdir(dir))
        return status_set(st, errno == ENOTEMPTY || errno == EEXIST ? ST_INPUT : ST_RUNTIME,
                          "%s: cannot replace this folder: it holds files that framelaw demo did not write (%s)", dir,
                          strerror(errno));
    return 0;
}

/* --overwrite: remove the recordings of an earlier demo (sub-folders holding a truth.csv, and the
 * hidden folders of an interrupted one) and its demo.json. Other files stay. */
static int remove_old_demo(const char *out_dir, Status *st) {
    DIR *d = opendir(out_dir);
    if (!d) return status_set(st, ST_RUNTIME, "%s: cannot open: %s", out_dir, strerror(errno));
    struct dirent *e;
    char p[4400], t[4500];
    int rc = 0;
    while (!rc && (e = readdir(d))) {
        if (!strcmp(e->d_name, ".") || !strcmp(e->d_name, "..")) continue;
        snprintf(p, sizeof p, "%s/%s", out_dir, e->d_name);
        struct stat sb;
        if (stat(p, &sb) || !S_ISDIR(sb.st_mode)) continue;
        snprintf(t, sizeof t, "%s/truth.csv", p);
        if (!strncmp(e->d_name, ".demo-tmp-", 10) || access(t, F_OK) == 0) rc = remove_demo_folder(p, st);
    }
    closedir(d);
    if (rc) return rc;
    snprintf(p, sizeof p, "%s/demo.json", out_dir);
    if (unlink(p) && errno != ENOENT) return status_set(st, ST_RUNTIME, "%s: cannot remove: %s", p, strerror(errno));
    return 0;
}

/* ---- progress --------------------------------------------------------------------------------- */

typedef struct {
    int tty;
    double start, last;
    long done, total;
} Progress;

/* At most every 0.2 s on a terminal (one line, redrawn), every 10 s otherwise. */
static void progress(Progress *p, const char *what, int rec, int n_rec, int force) {
    double t = clock_seconds();
    if (!force && t - p->last < (p->tty ? 0.2 : 10)) return;
    p->last = t;
    double frac = p->total ? (double)p->done / p->total : 1;
    double eta = frac > 0 ? (t - p->start) * (1 - frac) / frac : 0;
    char line[200]; /* the fields most wanted first: a narrow terminal cuts the line from the end */
    snprintf(line, sizeof line, "demo %s: recording %d/%d  %ld/%ld frames (%.0f%%)  about %.0f s left  %.0f s elapsed",
             what, rec, n_rec, p->done, p->total, 100 * frac, eta, t - p->start);
    term_progress(stderr, p->tty, line);
}

/* "rec" and k zero-padded to w digits (w <= 8). */
static void rec_name(char *buf, int k, int w) {
    char d[16];
    int n = snprintf(d, sizeof d, "%d", k);
    int pad = w > n ? w - n : 0;
    memcpy(buf, "rec", 3);
    memset(buf + 3, '0', (size_t)pad);
    memcpy(buf + 3 + pad, d, (size_t)n + 1);
}

/* ---- writing ---------------------------------------------------------------------------------- */

/* truth.csv: header, then one row per frame: the time, and the state at full precision. */
static int write_truth(const char *path, const char *header, const double *rows, int n, int cols, Status *st) {
    AtomicFile af;
    if (atomic_open(&af, path, st)) return st->code;
    fprintf(af.f, "%s\n", header);
    for (int k = 0; k < n; k++) {
        for (int c = 0; c < cols; c++)   /* t = k / fps at 15 digits (0.49, not 0.48999999999999999) */
            fprintf(af.f, c ? ",%.17g" : "%.15g", rows[(long)k * cols + c]);
        fputc('\n', af.f);
    }
    return atomic_commit(&af, st); /* names a write error with its cause */
}

/* demo.json: what was rendered and how, for people and for the discovery checks. */
static int write_info(const DemoSettings *s, int width, int height, double fps, const double *init, int init_cols,
                      const double *amp, int name_w, Status *st) {
    char path[4400];
    snprintf(path, sizeof path, "%s/demo.json", s->out_dir);
    AtomicFile af;
    if (atomic_open(&af, path, st)) return st->code;
    FILE *f = af.f;
    fprintf(f, "{\n  \"scenario\": \"%s\",\n  \"written_by\": \"framelaw %s demo\",\n", scenario_names[s->sc],
            FRAMELAW_VERSION);
    fprintf(f, "  \"seed\": %llu,\n  \"recordings\": %d,\n  \"frames\": %d,\n  \"fps\": %.15g,\n", s->seed,
            s->recordings, s->frames, fps);
    fprintf(f, "  \"frame_width\": %d,\n  \"frame_height\": %d,\n  \"noise\": %.15g,\n", width, height, s->noise);
    fprintf(f, "  \"integrator\": {\"method\": \"rk4\", \"steps_per_frame\": %d},\n", DEMO_SUBSTEPS);
    if (s->sc == SC_LANTERN) {
        LanternPhysics p = lantern_physics_default();
        LanternCamera c = lantern_camera(s->size, s->noise);
        fprintf(f,
                "  \"physics\": {\"equation\": \"theta'' = -(g/L) sin(theta) - c theta'\", \"g\": %.15g, \"L\": %.15g, "
                "\"c\": %.15g},\n",
                p.g, p.L, p.c);
        fprintf(f,
                "  \"camera\": {\"pivot_x\": %.15g, \"pivot_y\": %.15g, \"rod_px\": %.15g, \"lantern_radius_px\": "
                "%.15g},\n",
                c.pivot_x, c.pivot_y, c.rod_px, c.bob_r);
    } else {
        LorenzParams p = lorenz_params_default();
        ConvectionCamera c = convection_camera(s->size, s->noise);
        fprintf(f,
                "  \"physics\": {\"equation\": \"X' = sigma (Y - X), Y' = X (rho - Z) - Y, Z' = X Y - beta Z\", "
                "\"sigma\": %.15g, \"rho\": %.15g, \"beta\": %.17g, \"dt\": %.15g},\n",
                p.sigma, p.rho, p.beta, 1 / CONVECTION_FPS);
        fprintf(f, "  \"camera\": {\"panel_width\": %d, \"gap\": %d, \"temperature_gain\": %g, \"velocity_scale\": %g},\n",
                c.panel_w, c.gap, c.temp_gain, c.vel_scale);
    }
    fprintf(f, "  \"initial_states\": [\n");
    for (int k = 0; k < s->recordings; k++) {
        const double *y = init + (long)k * init_cols;
        char name[32];
        rec_name(name, k, name_w);
        if (s->sc == SC_LANTERN)
            fprintf(f, "    {\"name\": \"%s\", \"theta\": %.17g, \"theta_dot\": %.17g, \"amplitude_deg\": %.15g}",
                    name, y[0], y[1], amp[k] * 180 / M_PI);
        else
            fprintf(f, "    {\"name\": \"%s\", \"X\": %.17g, \"Y\": %.17g, \"Z\": %.17g}", name, y[0], y[1],
                    y[2]);
        fprintf(f, "%s\n", k + 1 < s->recordings ? "," : "");
    }
    fprintf(f, "  ]\n}\n");
    return atomic_commit(&af, st); /* names a write error with its cause */
}

/* demo.json of a battery scenario. */
static int write_battery_info(const DemoSettings *s, const BatteryPhysics *p, const double *init, int name_w,
                              Status *st) {
    char path[4400], phys[1024];
    snprintf(path, sizeof path, "%s/demo.json", s->out_dir);
    battery_physics_json(s->bat, p, phys, sizeof phys);
    AtomicFile af;
    if (atomic_open(&af, path, st)) return st->code;
    FILE *f = af.f;
    fprintf(f, "{\n  \"scenario\": \"%s\",\n  \"written_by\": \"framelaw %s demo\",\n", s->bat->name, FRAMELAW_VERSION);
    fprintf(f, "  \"seed\": %llu,\n  \"recordings\": %d,\n  \"frames\": %d,\n  \"fps\": %.15g,\n", s->seed,
            s->recordings, s->frames, s->bat->fps);
    fprintf(f, "  \"frame_width\": %d,\n  \"frame_height\": %d,\n  \"noise\": %.15g,\n", s->size, s->size, s->noise);
    fprintf(f, "  \"integrator\": {\"method\": \"rk4\", \"steps_per_frame\": %d},\n", DEMO_SUBSTEPS);
    fprintf(f, "  \"model\": {\"order\": %d, \"latent\": %d},\n", s->bat->order, s->bat->latent);
    fprintf(f, "  \"physics\": {%s},\n  \"initial_states\": [\n", phys);
    for (int k = 0; k < s->recordings; k++) {
        char name[32];
        rec_name(name, k, name_w);
        fprintf(f, "    {\"name\": \"%s\", \"state\": [", name);
        for (int i = 0; i < s->bat->n_state; i++) fprintf(f, "%s%.17g", i ? ", " : "", init[(long)k * s->bat->n_state + i]);
        fprintf(f, "]}%s\n", k + 1 < s->recordings ? "," : "");
    }
    fprintf(f, "  ]\n}\n");
    return atomic_commit(&af, st); /* names a write error with its cause */
}

/* Render every recording of a battery scenario (demo/battery.h). */
static int render_battery(const DemoSettings *s, Status *st) {
    const BatteryScenario *b = s->bat;
    int n = s->recordings, nf = s->frames, ns = b->n_state, cols = ns + 1;
    int name_w = 2;
    for (int m = n - 1; m >= 100; m /= 10) name_w++;
    BatteryPhysics p = battery_physics_default();
    Rng init_rng;
    rng_seed(&init_rng, s->seed);
    double *init = nn_alloc(sizeof(double) * (size_t)n * ns);
    battery_initial_states(b, &p, n, &init_rng, init);
    printf("demo %s: %d recordings x %d frames, %dx%d pixels, %g fps, noise %g, seed %llu -> %s\n", b->name, n, nf,
           s->size, s->size, b->fps, s->noise, s->seed, s->out_dir);
    fflush(stdout);
    double *truth = nn_alloc(sizeof(double) * (size_t)nf * cols);
    uint8_t *px = nn_alloc((size_t)s->size * s->size);
    char tmp_dir[4400], final_dir[4400], path[4600];
    Progress pr = {isatty(fileno(stderr)), clock_seconds(), 0, 0, (long)n * nf};
    pr.last = pr.start;
    int rc = 0;
    for (int k = 0; k < n && !rc; k++) {
        char name[32];
        rec_name(name, k, name_w);
        snprintf(tmp_dir, sizeof tmp_dir, "%s/.demo-tmp-%s", s->out_dir, name);
        snprintf(final_dir, sizeof final_dir, "%s/%s", s->out_dir, name);
        if ((rc = battery_simulate(b, &p, init + (long)k * ns, nf, DEMO_SUBSTEPS, truth, st))) {
            char why[sizeof st->msg];
            snprintf(why, sizeof why, "%s", st->msg);
            status_set(st, rc, "%s: %s", final_dir, why);
            break;
        }
        if (access(tmp_dir, F_OK) == 0 && (rc = remove_demo_folder(tmp_dir, st))) break;
        if (mkdir(tmp_dir, 0755)) {
            rc = status_set(st, ST_RUNTIME, "%s: cannot create: %s", tmp_dir, strerror(errno));
            break;
        }
        Rng noise;
        rng_seed(&noise, s->seed + 0x9E3779B97F4A7C15ULL * (uint64_t)(k + 1));
        for (int f = 0; f < nf && !rc; f++) {
            battery_render(b, s->size, s->noise, truth + (long)f * cols + 1, &noise, px);
            snprintf(path, sizeof path, "%s/frame%06d.png", tmp_dir, f);
            rc = image_write_png_gray(path, px, s->size, s->size, st);
            pr.done++;
            progress(&pr, b->name, k + 1, n, 0);
        }
        if (rc) break;
        snprintf(path, sizeof path, "%s/truth.csv", tmp_dir);
        if ((rc = write_truth(path, b->truth_header, truth, nf, cols, st))) break;
        if (rename(tmp_dir, final_dir)) {
            rc = status_set(st, errno == ENOTEMPTY || errno == EEXIST || errno == ENOTDIR ? ST_INPUT : ST_RUNTIME,
                            "%s: cannot move the recording into place: %s", final_dir, strerror(errno));
            break;
        }
        rc = fsync_parent_dir(final_dir, st);
    }
    if (!rc) rc = write_battery_info(s, &p, init, name_w, st);
    if (pr.tty || !rc) progress(&pr, b->name, n, n, 1);
    if (pr.tty) fputc('\n', stderr);
    if (!rc)
        printf("wrote %d recordings of %d frames to %s (truth.csv in each, settings in demo.json) in %.1f s\n", n, nf,
               s->out_dir, clock_seconds() - pr.start);
    nn_free(truth);
    nn_free(px);
    nn_free(init);
    return rc;
}

/* Render every recording. Returns 0 or a status code (message in st). */
static int render_all(const DemoSettings *s, Status *st) {
    if (s->bat) return render_battery(s, st);
    int lantern = s->sc == SC_LANTERN;
    int n = s->recordings, nf = s->frames;
    int name_w = 2;
    for (int m = n - 1; m >= 100; m /= 10) name_w++;
    LanternPhysics lp = lantern_physics_default();
    LorenzParams cp = lorenz_params_default();
    LanternCamera lc = lantern_camera(s->size, s->noise);
    ConvectionCamera cc = convection_camera(s->size, s->noise);
    int width = lantern ? lc.size : cc.width, height = lantern ? lc.size : cc.height;
    double fps = lantern ? LANTERN_FPS : CONVECTION_FPS;
    int cols = lantern ? 3 : 4;   /* truth columns */
    int init_cols = lantern ? 2 : 3;

    Rng init_rng;
    rng_seed(&init_rng, s->seed);
    double *init = nn_alloc(sizeof(double) * (size_t)n * 3);   /* (n, init_cols) */
    double *amp = nn_alloc(sizeof(double) * (size_t)n);        /* (n) lantern amplitudes */
    if (lantern) {
        double *th = nn_alloc(sizeof(double) * (size_t)n), *om = nn_alloc(sizeof(double) * (size_t)n);
        lantern_initial_states(&lp, n, &init_rng, th, om, amp);
        for (int k = 0; k < n; k++) init[2 * k] = th[k], init[2 * k + 1] = om[k];
        nn_free(th);
        nn_free(om);
    } else {
        convection_initial_states(n, &init_rng, init);
    }

    printf("demo %s: %d recordings x %d frames, %dx%d pixels, %g fps, noise %g, seed %llu -> %s\n",
           scenario_names[s->sc], n, nf, width, height, fps, s->noise, s->seed, s->out_dir);
    fflush(stdout);

    double *truth = nn_alloc(sizeof(double) * (size_t)nf * cols);   /* (nf, cols) */
    uint8_t *px = nn_alloc((size_t)width * height);                 /* (height, width) */
    char tmp_dir[4400], final_dir[4400], path[4600];
    Progress pr = {isatty(fileno(stderr)), clock_seconds(), 0, 0, (long)n * nf};
    pr.last = pr.start;
    int rc = 0;
    for (int k = 0; k < n && !rc; k++) {
        char name[32];
        rec_name(name, k, name_w);
        snprintf(tmp_dir, sizeof tmp_dir, "%s/.demo-tmp-%s", s->out_dir, name);
        snprintf(final_dir, sizeof final_dir, "%s/%s", s->out_dir, name);
        if (lantern)
            rc = lantern_simulate(&lp, init[2 * k], init[2 * k + 1], fps, nf, DEMO_SUBSTEPS, truth, st);
        else
            rc = convection_simulate(&cp, init + 3 * k, CONVECTION_FPS, nf, DEMO_SUBSTEPS, truth, st);
        if (rc) {
            char why[sizeof st->msg];
            snprintf(why, sizeof why, "%s", st->msg);
            status_set(st, rc, "%s: %s", final_dir, why);
            break;
        }
        if (access(tmp_dir, F_OK) == 0 && (rc = remove_demo_folder(tmp_dir, st))) break;   /* left by a crash */
        if (mkdir(tmp_dir, 0755)) {
            rc = status_set(st, ST_RUNTIME, "%s: cannot create: %s", tmp_dir, strerror(errno));
            break;
        }
        Rng noise;
        rng_seed(&noise, s->seed + 0x9E3779B97F4A7C15ULL * (uint64_t)(k + 1));
        for (int f = 0; f < nf && !rc; f++) {
            if (lantern) lantern_render(&lc, truth[3 * f + 1], &noise, px);
            else convection_render(&cc, &cp, truth + 4 * f + 1, &noise, px);
            snprintf(path, sizeof path, "%s/frame%06d.png", tmp_dir, f);
            rc = image_write_png_gray(path, px, width, height, st);
            pr.done++;
            progress(&pr, scenario_names[s->sc], k + 1, n, 0);
        }
        if (rc) break;
        snprintf(path, sizeof path, "%s/truth.csv", tmp_dir);
        rc = write_truth(path, lantern ? "t,theta,theta_dot" : "t,X,Y,Z", truth, nf, cols, st);
        if (rc) break;
        if (rename(tmp_dir, final_dir)) {
            rc = status_set(st, errno == ENOTEMPTY || errno == EEXIST || errno == ENOTDIR ? ST_INPUT : ST_RUNTIME,
                            "%s: cannot move the recording into place: %s", final_dir, strerror(errno));
            break;
        }
        rc = fsync_parent_dir(final_dir, st);
    }
    if (!rc) rc = write_info(s, width, height, fps, init, init_cols, amp, name_w, st);
    if (pr.tty || !rc) progress(&pr, scenario_names[s->sc], n, n, 1);
    if (pr.tty) fputc('\n', stderr);
    if (!rc)
        printf("wrote %d recordings of %d frames to %s (truth.csv in each, settings in demo.json) in %.1f s\n", n, nf,
               s->out_dir, clock_seconds() - pr.start);
    nn_free(truth);
    nn_free(px);
    nn_free(init);
    nn_free(amp);
    return rc;
}

int cmd_demo(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        demo_usage(stdout);
        return 0;
    }
    DemoSettings s;
    int rc = parse_args(argc, argv, &s);
    if (rc) return rc;
    Status st;
    status_ok(&st);
    int state = dir_state(s.out_dir);
    if (state == 2) return cli_error(2, "demo: OUT_DIR '%s' exists and is not a folder", s.out_dir);
    if (state == 1 && !s.overwrite)
        return cli_error(2, "demo: OUT_DIR '%s' exists and is not empty (--overwrite replaces an earlier demo's recordings)",
                         s.out_dir);
    if (state == 1 && remove_old_demo(s.out_dir, &st)) return cli_error(st.code, "demo: %s", st.msg);
    if (state < 0 && fs_make_dirs(s.out_dir, &st)) return cli_error(st.code, "demo: %s", st.msg);
    if (render_all(&s, &st)) return cli_error(st.code, "demo: %s", st.msg);
    return 0;
}
