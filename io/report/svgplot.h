/* io/report/svgplot.h: line plots as inline SVG, for the HTML report.
 *
 * One call writes one <svg> element: a frame with ticks and grid lines at "nice" numbers, axis
 * labels, a title, several series as polylines, vertical marker lines (epochs, times) and
 * horizontal level lines (a bound), and a legend above the plot area. The y axis may be
 * logarithmic. Everything is plain SVG 1.1 (no script, no external font or style), so it reads in
 * any browser and prints.
 *
 * Points: a series with non-finite y (or y <= 0 on a log axis) is broken there, not joined across
 * the gap. A series with more points than a few per pixel column is thinned to the minimum and the
 * maximum of each column (in their order), which keeps spikes visible at a fraction of the size.
 *
 *     PlotSeries s = {.name = "loss", .x = epoch, .y = loss, .n = n};
 *     Plot p = {.title = "Loss", .xlabel = "epoch", .ylabel = "loss", .ylog = 1,
 *               .series = &s, .n_series = 1};
 *     svg_plot(f, &p);
 */
#ifndef IO_SVGPLOT_H
#define IO_SVGPLOT_H

#include <stdio.h>

typedef enum { DASH_SOLID, DASH_DASHED, DASH_DOTTED } PlotDash;

typedef struct {
    const char *name;       /* legend text; NULL: not in the legend */
    const double *x, *y;    /* element i at x[i * stride], y[i * stride] */
    long n;
    long stride;            /* 0 or 1: contiguous; a table's column count for one of its columns */
    const char *color;      /* CSS colour; NULL: the palette colour of the series' index */
    PlotDash dash;
} PlotSeries;

/* A group of vertical lines at x[0..n) sharing one legend entry. */
typedef struct {
    const char *name;       /* legend text; NULL: none */
    const double *x;
    long n;
    const char *color;      /* NULL: gray */
    PlotDash dash;
} PlotVLines;

/* A horizontal line at y. */
typedef struct {
    const char *name;       /* legend text; NULL: none */
    double y;
    const char *color;      /* NULL: gray */
    PlotDash dash;
} PlotHLine;

typedef struct {
    const char *title;      /* NULL: none */
    const char *xlabel, *ylabel;
    int width, height;      /* whole image in px; 0: 960 x 320 */
    int ylog;               /* 1: logarithmic y axis (decades) */
    int y_zero;             /* linear y axis: include 0 in the range */
    const PlotSeries *series;
    int n_series;
    const PlotVLines *vlines;
    int n_vlines;
    const PlotHLine *hlines;
    int n_hlines;
} Plot;

/* Write the plot as one <svg> element. A plot without any drawable point shows its frame and the
 * words "no data". Returns 0, or -1 when writing failed. */
int svg_plot(FILE *f, const Plot *p);

/* The palette colour of series i (cycles). */
const char *plot_color(int i);

/* Write s with the XML/HTML special characters & < > " ' escaped. Returns 0 or -1. */
int xml_puts(FILE *f, const char *s);

/* A "nice number" for axis labels ("Nice numbers for graph labels", Graphics Gems, Academic Press,
 * 1990): 1, 2, 5 or 10 times a power of ten, the one nearest to x (round = 1) or the smallest one
 * >= x (round = 0); x > 0. */
double nice_number(double x, int round);

/* Linear ticks covering [lo, hi] with about `target` intervals: *first = floor(lo / step) step,
 * *step a nice number; returns the number of ticks (first, first + step, ... >= hi). */
int nice_ticks(double lo, double hi, int target, double *first, double *step);

/* Tick label for value v on a linear axis with tick spacing step: as few decimals as the spacing
 * needs ("0.2", "1500", "-3", "0.05"), exponent notation for very large or small spacings; -0 prints "0". */
void tick_label(char *buf, size_t n, double v, double step);

#endif
