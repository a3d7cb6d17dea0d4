/* io/cli/cmd_report.c: `framelaw report RUN_DIR`: the run's HTML report (io/report/report.h, docs/report.md). */
#include <stdio.h>
#include <string.h>

#include "io/cli/cli.h"
#include "io/report/report.h"

static void report_usage(FILE *f) {
    fprintf(f,
            "usage: framelaw report RUN_DIR [--output FILE]\n\n"
            "Writes one self-contained HTML page about a run: its settings, the loss curves with the\n"
            "thresholding passes, the active terms, the equations and their coefficients, the latent\n"
            "trajectories, the forecast errors of the held-out recordings and the reconstruction strips.\n"
            "Plots are inline SVG and images are embedded, so the page needs no network and no script.\n"
            "Sections whose files are not written yet (framelaw export, framelaw forecast) show a note.\n\n"
            "options (default in brackets):\n"
            "  --output FILE   where to write the page                     [RUN_DIR/report.html]\n"
            "  --help          this text\n\n"
            "docs/report.md explains how to read the page.\n\n"
            "exit status: 0 success, 1 runtime failure, 2 bad usage or bad input (a missing run folder,\n"
            "config.json or log.csv, a malformed file, or a file from a newer framelaw)\n");
}

int cmd_report(int argc, char **argv) {
    if (cli_wants_help(argc, argv)) {
        report_usage(stdout);
        return 0;
    }
    const char *dir = NULL, *out = NULL;
    int operands = 0; /* after "--": RUN_DIR even when it starts with '-' */
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (!operands && !strcmp(a, "--")) {
            operands = 1;
        } else if (operands) {
            if (dir) return cli_error(2, "report: one RUN_DIR only ('%s' and '%s')", dir, a);
            dir = a;
        } else if (!strcmp(a, "--output") || !strncmp(a, "--output=", 9)) {
            if (a[8] == '=') out = a + 9;
            else if (i + 1 < argc) out = argv[++i];
            else return cli_error(2, "report: --output needs a file name");
            if (!*out) return cli_error(2, "report: --output needs a file name");
        } else if (a[0] == '-' && a[1]) {
            return cli_error(2, "report: unknown option '%s' (framelaw report --help)", a);
        } else if (dir) {
            return cli_error(2, "report: one RUN_DIR only ('%s' and '%s')", dir, a);
        } else {
            dir = a;
        }
    }
    if (!dir) return cli_error(2, "report: missing RUN_DIR (framelaw report --help)");
    Status st;
    ReportSummary sum;
    if (report_write(dir, out, &sum, &st)) return cli_error(st.code, "%s", st.msg);
    char def[4200];
    snprintf(def, sizeof def, "%s/report.html", dir);
    printf("framelaw: wrote %s (%d plots, %d images%s)\n", out ? out : def, sum.plots, sum.images,
           sum.notes ? "; some sections are notes: their files are not written yet" : "");
    return 0;
}
