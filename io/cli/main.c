/* io/cli/main.c: the command-line front end. Dispatches to the commands of io/cli/cli.h; only the front end
 * decides the exit status. */
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/cli/cli.h"
#include "io/fs/atomic_file.h"
#include "sparse/library.h"

static int cmd_help(int argc, char **argv);

/* One row per command; add a command here and declare it in io/cli/cli.h. */
static const Command commands[] = {
    {"train", "train the autoencoder and the sparse latent model from a config file", cmd_train},
    {"resume", "continue a stopped run from its newest valid checkpoint", cmd_resume},
    {"export", "write equations, latent trajectories and reconstructions of a trained run", cmd_export},
    {"forecast", "forecast the held-out recordings with the learned model and measure the error", cmd_forecast},
    {"verify", "check a run on a demo scenario against its physics (periods, Lyapunov exponent)", cmd_verify},
    {"ensemble", "how sure is each term: refit the law on resampled data, inclusion probabilities, bands", cmd_ensemble},
    {"canonical", "the sparsest form of a run's law under a change of latent coordinates, and the map", cmd_canonical},
    {"help", "show this overview", cmd_help},
    {"fit", "fit a sparse ODE to a time series of state coordinates (CSV or .npy)", cmd_fit},
    {"frames", "inspect a frames folder: recordings, sizes, frame store, contact sheet", cmd_frames},
    {"demo", "render the recordings of a demo scenario (lantern, convection) as PNG frames", cmd_demo},
    {"sweep", "train every member of a parameter sweep, locally or as a Slurm job array", cmd_sweep},
    {"report", "write a run's HTML report: settings, losses, equations, forecasts, reconstructions", cmd_report},
};
enum { N_COMMANDS = sizeof commands / sizeof commands[0] };

/* Bytes of a message that a terminal must not interpret (control characters, bytes that are not
 * UTF-8: they come from bad input, a file name or a field) are written as \xNN, so that the
 * message stays one printable line. */
static void put_escaped(FILE *f, const unsigned char *s) {
    while (*s) {
        unsigned c = *s;
        int len = c < 0x80 ? 1 : c >= 0xC2 && c <= 0xDF ? 2 : c >= 0xE0 && c <= 0xEF ? 3 : c >= 0xF0 && c <= 0xF4 ? 4 : 0;
        int ok = len > 0;
        for (int k = 1; ok && k < len; k++) ok = (s[k] & 0xC0) == 0x80;
        if (ok && len == 3 && ((c == 0xE0 && s[1] < 0xA0) || (c == 0xED && s[1] > 0x9F))) ok = 0; /* overlong, surrogate */
        if (ok && len == 4 && ((c == 0xF0 && s[1] < 0x90) || (c == 0xF4 && s[1] > 0x8F))) ok = 0;
        if (ok && len == 1 && (c < 0x20 || c == 0x7F)) ok = 0;
        if (!ok) {
            fprintf(f, "\\x%02x", c);
            s++;
        } else {
            fwrite(s, 1, (size_t)len, f);
            s += len;
        }
    }
}

int cli_error(int code, const char *fmt, ...) {
    char msg[8192];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    fputs("framelaw: ", stderr);
    put_escaped(stderr, (const unsigned char *)msg);
    fputc('\n', stderr);
    return code;
}

void cli_note_old_term(const char *key, const char *name) {
    char fixed[256];
    library_name_old_form(name, fixed, sizeof fixed);
    fprintf(stderr, "framelaw: note: %s \"%s\": a space for a product is deprecated (read until the next release); "
                    "write \"%s\"\n", key, name, fixed);
}

void cli_note_old_terms(const Config *c) {
    const char *key, *name = config_old_term(c, &key);
    if (name) cli_note_old_term(key, name);
}

int cli_wants_help(int argc, char **argv) {
    for (int i = 1; i < argc && strcmp(argv[i], "--"); i++)
        if (!strcmp(argv[i], "--help") || !strcmp(argv[i], "-h")) return 1;
    return 0;
}

static void usage(FILE *f) {
    fprintf(f,
            "usage: framelaw COMMAND [ARGS...]\n"
            "       framelaw COMMAND --help\n"
            "       framelaw --version\n\n"
            "Learns a few ordinary differential equations, and the coordinates they live in, from video\n"
            "frames of a moving system.\n\ncommands:\n");
    for (int i = 0; i < N_COMMANDS; i++) fprintf(f, "  %-10s %s\n", commands[i].name, commands[i].summary);
    fprintf(f, "\nexit status: 0 success, 1 runtime failure, 2 bad usage or bad input, 130 stopped by Ctrl-C\n"
               "(143 by SIGTERM) with its checkpoints written. --opt=value is --opt value everywhere; --\n"
               "ends the options (what follows is a file or folder even if it starts with -);\n"
               "framelaw help COMMAND shows that command's options.\n");
}

static int cmd_help(int argc, char **argv) {
    (void)argc;
    (void)argv;
    usage(stdout);
    return 0;
}

int main(int argc, char **argv) {
    if (argc < 2) {
        usage(stderr);
        return 2;
    }
    if (!strcmp(argv[1], "help") && argc > 2) { /* framelaw help COMMAND: that command's --help */
        for (int i = 0; i < N_COMMANDS; i++)
            if (!strcmp(argv[2], commands[i].name)) {
                char *a[3] = {argv[2], "--help", NULL};
                return commands[i].run(2, a);
            }
        return cli_error(2, "unknown command '%s' (framelaw --help lists the commands)", argv[2]);
    }
    if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h") || !strcmp(argv[1], "help")) {
        usage(stdout);
        return 0;
    }
    if (!strcmp(argv[1], "--version")) {
        printf("framelaw %s\n", FRAMELAW_VERSION);
        return 0;
    }
    /* an interrupted command leaves no temporary file behind (io/fs/atomic_file.h) */
    atomic_cleanup_on_signals();
    for (int i = 0; i < N_COMMANDS; i++)
        if (!strcmp(argv[1], commands[i].name)) {
            /* --opt=value is --opt value for every command: split at the first '=' (not after "--",
             * which ends the options: what follows are operands, whatever they start with) */
            char **av = malloc(sizeof *av * (size_t)(2 * argc + 1));
            if (!av) return cli_error(1, "out of memory");
            int n = 0, operands = 0;
            for (int k = 1; k < argc; k++) {
                if (!strcmp(argv[k], "--")) operands = 1;
                char *eq = !operands && argv[k][0] == '-' && argv[k][1] == '-' ? strchr(argv[k], '=') : NULL;
                if (eq && eq > argv[k] + 2) {
                    *eq = 0;
                    av[n++] = argv[k];
                    av[n++] = eq + 1;
                } else av[n++] = argv[k];
            }
            av[n] = NULL;
            int rc = commands[i].run(n, av);
            free(av);
            return rc;
        }
    return cli_error(2, "unknown command '%s' (framelaw --help lists the commands)", argv[1]);
}
