/* io/report/report.h: the HTML report of a run (`framelaw report RUN_DIR`).
 *
 * One self-contained HTML page: inline SVG plots (io/report/svgplot.h), PNG images embedded as base64
 * data: URIs (io/report/base64.h), a style sheet in the page, no script and nothing fetched from a
 * network. It reads the run folder's files (docs/formats.md):
 *
 *   config.json, log.csv                      required: the run's settings and training history
 *   equations.json / .txt / .tex              the laws as MathML (sparse/mathml.h), their sources in
 *                                             copy boxes, the coefficient table, the ensemble
 *   trajectories/<rec>.csv, region.json       latent trajectories and the training region
 *   forecast.json, forecast/<rec>.csv         forecast errors, encoded against integrated latents
 *   reconstructions/<rec>.png                 reconstruction strips
 *
 * A missing optional file turns its section into a one-line note. A missing run folder, config.json
 * or log.csv, a malformed file, or a file of a newer format version is ST_INPUT naming the file.
 * The page is written atomically (io/fs/atomic_file.h): on any error no page is left behind.
 * docs/report.md is the reader's guide to the page. */
#ifndef IO_REPORT_H
#define IO_REPORT_H

#include "nn/core.h"

/* The caution that the page (and the README) carries, in plain words. */
#define REPORT_CAUTION                                                                               \
    "A learned model is a data-driven approximation, valid in the range of states it was trained on; " \
    "validate it independently before it drives a physical system or a safety decision."

typedef struct {
    int plots;      /* SVG plots written */
    int images;     /* PNG images embedded */
    int notes;      /* sections or parts shown as a note because a file is missing */
} ReportSummary;

/* Write the report of run_dir to out_path (NULL: run_dir/report.html). sum may be NULL. Returns 0,
 * ST_INPUT (bad or missing input, message names the file) or ST_RUNTIME (writing failed). */
int report_write(const char *run_dir, const char *out_path, ReportSummary *sum, Status *st);

#endif
