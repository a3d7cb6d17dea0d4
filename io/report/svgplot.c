/* io/report/svgplot.c: see svgplot.h. */
#include "io/report/svgplot.h"

#include <math.h>
#include <string.h>

/* Colours that stay apart for the usual colour-vision deficiencies and in gray print. */
static const char *const palette[] = {"#1f5fa8", "#d9620b", "#2b8a3e", "#a61e4d", "#6741d9",
                                      "#7a5c00", "#0b7285", "#495057"};
enum { N_PALETTE = sizeof palette / sizeof palette[0] };

const char *plot_color(int i) { return palette[((i % N_PALETTE) + N_PALETTE) % N_PALETTE]; }

int xml_puts(FILE *f, const char *s) {
    for (; s && *s; s++) {
        const char *e = NULL;
        switch (*s) {
        case '&': e = "&amp;"; break;
        case '<': e = "&lt;"; break;
        case '>': e = "&gt;"; break;
        case '"': e = "&quot;"; break;
        case '\'': e = "&#39;"; break;
        default: break;
        }
        if (e ? fputs(e, f) < 0 : fputc(*s, f) == EOF) return -1;
    }
    return 0;
}

double nice_number(double x, int round) {
    double e = floor(log10(x));
    double p = pow(10.0, e);
    double m = x / p;   /* in [1, 10) */
    double n;
    if (round) n = m < 1.5 ? 1 : m < 3 ? 2 : m < 7 ? 5 : 10;
    else n = m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10;
    return n * p;
}

int nice_ticks(double lo, double hi, int target, double *first, double *step) {
    if (!(hi > lo)) {
        double d = lo != 0 ? fabs(lo) * 0.1 : 1.0;
        lo -= d, hi += d;
    }
    if (target < 1) target = 1;
    double s = nice_number((hi - lo) / target, 1);
    double a = floor(lo / s + 1e-9) * s, b = ceil(hi / s - 1e-9) * s;
    *first = a;
    *step = s;
    return (int)floor((b - a) / s + 0.5) + 1;
}

void tick_label(char *buf, size_t n, double v, double step) {
    if (fabs(v) < step * 1e-9) v = 0;   /* no "-0" or 1e-17 from accumulated steps */
    double big = fabs(v);
    if (step >= 1e-4 && big < 1e6) {
        int dec = (int)-floor(log10(step) + 1e-9);
        snprintf(buf, n, "%.*f", dec > 0 ? dec : 0, v);
    } else {
        int sig = big > 0 ? (int)(floor(log10(big)) - floor(log10(step) + 1e-9)) + 1 : 1;
        snprintf(buf, n, "%.*g", sig < 1 ? 1 : sig > 15 ? 15 : sig, v);
    }
}

static const char *dash_attr(PlotDash d) {
    return d == DASH_DASHED ? " stroke-dasharray=\"7 4\"" : d == DASH_DOTTED ? " stroke-dasharray=\"2 3\"" : "";
}

/* The geometry of one plot: data ranges (y in log10 units on a log axis) and the plot area. */
typedef struct {
    double xa, xb, ya, yb;      /* axis ranges */
    double px0, px1, py0, py1;  /* plot area in px */
    int ylog;
} Frame;

static double sx(const Frame *g, double x) { return g->px0 + (x - g->xa) / (g->xb - g->xa) * (g->px1 - g->px0); }
static double sy(const Frame *g, double y) {
    double v = g->ylog ? log10(y) : y;
    return g->py1 - (v - g->ya) / (g->yb - g->ya) * (g->py1 - g->py0);
}

static int drawable_y(double y, int ylog) { return isfinite(y) && (!ylog || y > 0); }

/* Path of one series; thinned to the minimum and maximum of each of `cols` index buckets when it has
 * more than 4 cols points. */
static void series_path(FILE *f, const Frame *g, const PlotSeries *s, int cols) {
    long st = s->stride > 1 ? s->stride : 1;
    int pen = 0;    /* points in the current sub-path */
#define PT(i)                                                                                        \
    do {                                                                                             \
        fprintf(f, pen ? " L%.1f %.1f" : " M%.1f %.1f", sx(g, s->x[(i) * st]), sy(g, s->y[(i) * st])); \
        pen++;                                                                                       \
    } while (0)
#define BREAK()                                 \
    do {                                        \
        if (pen == 1) fputs(" l0 0", f);        \
        pen = 0;                                \
    } while (0)
    if (s->n <= 4L * cols) {
        for (long i = 0; i < s->n; i++) {
            if (drawable_y(s->y[i * st], g->ylog) && isfinite(s->x[i * st])) PT(i);
            else BREAK();
        }
    } else {
        long nb = 2L * cols;
        for (long b = 0; b < nb; b++) {
            long i0 = b * s->n / nb, i1 = (b + 1) * s->n / nb;
            long imin = -1, imax = -1;
            for (long i = i0; i < i1; i++) {
                double y = s->y[i * st];
                if (!drawable_y(y, g->ylog) || !isfinite(s->x[i * st])) continue;
                if (imin < 0 || y < s->y[imin * st]) imin = i;
                if (imax < 0 || y > s->y[imax * st]) imax = i;
            }
            if (imin < 0) {
                BREAK();
                continue;
            }
            long a = imin < imax ? imin : imax, c = imin < imax ? imax : imin;
            PT(a);
            if (c != a) PT(c);
        }
    }
    BREAK();
#undef PT
#undef BREAK
}

/* Legend entries: name, colour and dash of every named series, vline group and hline. */
typedef struct {
    const char *name, *color;
    PlotDash dash;
} Entry;

static int legend_entries(const Plot *p, Entry *e, int max) {
    int n = 0;
    for (int i = 0; i < p->n_series && n < max; i++)
        if (p->series[i].name)
            e[n++] = (Entry){p->series[i].name, p->series[i].color ? p->series[i].color : plot_color(i),
                             p->series[i].dash};
    for (int i = 0; i < p->n_vlines && n < max; i++)
        if (p->vlines[i].name && p->vlines[i].n > 0)
            e[n++] = (Entry){p->vlines[i].name, p->vlines[i].color ? p->vlines[i].color : "#777", p->vlines[i].dash};
    for (int i = 0; i < p->n_hlines && n < max; i++)
        if (p->hlines[i].name)
            e[n++] = (Entry){p->hlines[i].name, p->hlines[i].color ? p->hlines[i].color : "#777", p->hlines[i].dash};
    return n;
}

static double entry_width(const Entry *e) { return 34 + 6.8 * (double)strlen(e->name); }

/* Lay out the legend in rows from x0 to x1; the row of entry i in row[i], its x in at[i]. Returns
 * the number of rows. */
static int legend_layout(const Entry *e, int n, double x0, double x1, int *row, double *at) {
    int r = 0;
    double x = x0;
    for (int i = 0; i < n; i++) {
        double w = entry_width(&e[i]);
        if (x > x0 && x + w > x1) r++, x = x0;
        row[i] = r;
        at[i] = x;
        x += w;
    }
    return n ? r + 1 : 0;
}

int svg_plot(FILE *f, const Plot *p) {
    int W = p->width > 0 ? p->width : 960, H = p->height > 0 ? p->height : 320;
    Frame g = {.ylog = p->ylog};

    /* data ranges */
    double xlo = INFINITY, xhi = -INFINITY, ylo = INFINITY, yhi = -INFINITY;
    long points = 0;
    for (int k = 0; k < p->n_series; k++) {
        const PlotSeries *s = &p->series[k];
        long st = s->stride > 1 ? s->stride : 1;
        for (long i = 0; i < s->n; i++) {
            double x = s->x[i * st], y = s->y[i * st];
            if (!isfinite(x) || !drawable_y(y, p->ylog)) continue;
            points++;
            if (x < xlo) xlo = x;
            if (x > xhi) xhi = x;
            if (y < ylo) ylo = y;
            if (y > yhi) yhi = y;
        }
    }
    for (int k = 0; k < p->n_vlines; k++)
        for (long i = 0; i < p->vlines[k].n; i++) {
            double x = p->vlines[k].x[i];
            if (!isfinite(x)) continue;
            if (x < xlo) xlo = x;
            if (x > xhi) xhi = x;
        }
    for (int k = 0; k < p->n_hlines; k++) {
        double y = p->hlines[k].y;
        if (!drawable_y(y, p->ylog)) continue;
        if (y < ylo) ylo = y;
        if (y > yhi) yhi = y;
    }
    if (!(xlo <= xhi)) xlo = 0, xhi = 1;
    if (!(ylo <= yhi)) ylo = p->ylog ? 0.1 : 0, yhi = p->ylog ? 10 : 1;
    if (p->y_zero && !p->ylog) {
        if (ylo > 0) ylo = 0;
        if (yhi < 0) yhi = 0;
    }

    /* ticks */
    double xt0, xstep;
    int nxt = nice_ticks(xlo, xhi, 6, &xt0, &xstep);
    g.xa = xt0;
    g.xb = xt0 + (nxt - 1) * xstep;
    double yt0 = 0, ystep = 1;
    int nyt;
    if (p->ylog) {
        double e0 = floor(log10(ylo) + 1e-9), e1 = ceil(log10(yhi) - 1e-9);
        if (e1 <= e0) e1 = e0 + 1;
        ystep = ceil((e1 - e0) / 8);
        e0 = floor(e0 / ystep) * ystep;
        e1 = ceil(e1 / ystep) * ystep;
        g.ya = e0, g.yb = e1;
        yt0 = e0;
        nyt = (int)((e1 - e0) / ystep + 0.5) + 1;
    } else {
        nyt = nice_ticks(ylo, yhi, 5, &yt0, &ystep);
        g.ya = yt0;
        g.yb = yt0 + (nyt - 1) * ystep;
    }

    /* layout */
    Entry ent[64];
    int row[64];
    double at[64];
    int n_ent = legend_entries(p, ent, 64);
    double ml = 78, mr = 18, mb = 46;
    int rows = legend_layout(ent, n_ent, ml, W - mr, row, at);
    double top = (p->title ? 26 : 8);
    double mt = top + rows * 18 + (rows ? 8 : 4);
    g.px0 = ml, g.px1 = W - mr, g.py0 = mt, g.py1 = H - mb;
    if (g.py1 - g.py0 < 40) g.py1 = g.py0 + 40, H = (int)(g.py1 + mb);

    fprintf(f, "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"%d\" height=\"%d\" viewBox=\"0 0 %d %d\" "
               "font-family=\"sans-serif\" font-size=\"12\" role=\"img\">\n", W, H, W, H);
    if (p->title) {
        fputs("<title>", f);
        xml_puts(f, p->title);
        fputs("</title>\n", f);
    }
    fprintf(f, "<rect width=\"%d\" height=\"%d\" fill=\"#fff\"/>\n", W, H);
    if (p->title) {
        fprintf(f, "<text x=\"%.1f\" y=\"18\" text-anchor=\"middle\" font-size=\"14\" font-weight=\"bold\">", W / 2.0);
        xml_puts(f, p->title);
        fputs("</text>\n", f);
    }

    /* grid, ticks and tick labels */
    char lab[64];
    fputs("<g stroke=\"#e3e3e3\" stroke-width=\"1\">\n", f);
    for (int i = 0; i < nxt; i++) {
        double x = sx(&g, xt0 + i * xstep);
        fprintf(f, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>\n", x, g.py0, x, g.py1);
    }
    for (int i = 0; i < nyt; i++) {
        double y = g.py1 - (yt0 + i * ystep - g.ya) / (g.yb - g.ya) * (g.py1 - g.py0);
        fprintf(f, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>\n", g.px0, y, g.px1, y);
    }
    fputs("</g>\n<g stroke=\"#444\" stroke-width=\"1\">\n", f);
    for (int i = 0; i < nxt; i++) {
        double x = sx(&g, xt0 + i * xstep);
        fprintf(f, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>\n", x, g.py1, x, g.py1 + 5);
    }
    for (int i = 0; i < nyt; i++) {
        double y = g.py1 - (yt0 + i * ystep - g.ya) / (g.yb - g.ya) * (g.py1 - g.py0);
        fprintf(f, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>\n", g.px0 - 5, y, g.px0, y);
    }
    if (p->ylog && ystep == 1 && g.yb - g.ya <= 6) {   /* minor ticks at 2..9 times each decade */
        for (double e = g.ya; e < g.yb; e++)
            for (int m = 2; m <= 9; m++) {
                double y = sy(&g, m * pow(10.0, e));
                fprintf(f, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\"/>\n", g.px0 - 3, y, g.px0, y);
            }
    }
    fputs("</g>\n<g fill=\"#222\">\n", f);
    for (int i = 0; i < nxt; i++) {
        tick_label(lab, sizeof lab, xt0 + i * xstep, xstep);
        fprintf(f, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">%s</text>\n", sx(&g, xt0 + i * xstep),
                g.py1 + 18, lab);
    }
    for (int i = 0; i < nyt; i++) {
        double v = yt0 + i * ystep;
        double y = g.py1 - (v - g.ya) / (g.yb - g.ya) * (g.py1 - g.py0) + 4;
        if (p->ylog) {
            int e = (int)floor(v + 0.5);
            if (e >= -3 && e <= 4)
                fprintf(f, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%.*f</text>\n", g.px0 - 8, y,
                        e < 0 ? -e : 0, pow(10.0, e));
            else
                fprintf(f, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">10<tspan dy=\"-6\" font-size=\"9\">%d</tspan>"
                           "</text>\n", g.px0 - 8 - 3.0 * (e < 0 ? 2 : 1), y, e);
        } else {
            tick_label(lab, sizeof lab, v, ystep);
            fprintf(f, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%s</text>\n", g.px0 - 8, y, lab);
        }
    }
    fputs("</g>\n", f);
    fprintf(f, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"none\" stroke=\"#444\"/>\n", g.px0,
            g.py0, g.px1 - g.px0, g.py1 - g.py0);

    /* axis labels */
    if (p->xlabel) {
        fprintf(f, "<text x=\"%.1f\" y=\"%d\" text-anchor=\"middle\">", (g.px0 + g.px1) / 2, H - 8);
        xml_puts(f, p->xlabel);
        fputs("</text>\n", f);
    }
    if (p->ylabel) {
        double cy = (g.py0 + g.py1) / 2;
        fprintf(f, "<text x=\"16\" y=\"%.1f\" text-anchor=\"middle\" transform=\"rotate(-90 16 %.1f)\">", cy, cy);
        xml_puts(f, p->ylabel);
        fputs("</text>\n", f);
    }

    /* level lines, marker lines, then the series on top */
    for (int k = 0; k < p->n_hlines; k++) {
        const PlotHLine *h = &p->hlines[k];
        if (!drawable_y(h->y, p->ylog)) continue;
        fprintf(f, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" stroke-width=\"1.5\"%s/>\n",
                g.px0, sy(&g, h->y), g.px1, sy(&g, h->y), h->color ? h->color : "#777", dash_attr(h->dash));
    }
    for (int k = 0; k < p->n_vlines; k++) {
        const PlotVLines *v = &p->vlines[k];
        for (long i = 0; i < v->n; i++) {
            if (!isfinite(v->x[i])) continue;
            double x = sx(&g, v->x[i]);
            fprintf(f, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" stroke-width=\"1.2\"%s/>\n",
                    x, g.py0, x, g.py1, v->color ? v->color : "#777", dash_attr(v->dash));
        }
    }
    int cols = (int)(g.px1 - g.px0);
    for (int k = 0; k < p->n_series; k++) {
        const PlotSeries *s = &p->series[k];
        fprintf(f, "<path fill=\"none\" stroke=\"%s\" stroke-width=\"1.6\" stroke-linejoin=\"round\" "
                   "stroke-linecap=\"round\"%s d=\"", s->color ? s->color : plot_color(k), dash_attr(s->dash));
        series_path(f, &g, s, cols);
        fputs("\"/>\n", f);
    }
    if (!points)
        fprintf(f, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\" fill=\"#777\">no data</text>\n",
                (g.px0 + g.px1) / 2, (g.py0 + g.py1) / 2);

    /* legend */
    for (int i = 0; i < n_ent; i++) {
        double y = top + row[i] * 18 + 8;
        fprintf(f, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" stroke-width=\"2\"%s/>\n",
                at[i], y, at[i] + 24, y, ent[i].color, dash_attr(ent[i].dash));
        fprintf(f, "<text x=\"%.1f\" y=\"%.1f\">", at[i] + 29, y + 4);
        xml_puts(f, ent[i].name);
        fputs("</text>\n", f);
    }
    fputs("</svg>\n", f);
    return ferror(f) ? -1 : 0;
}
