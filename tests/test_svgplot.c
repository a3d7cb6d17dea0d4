/* tests/test_svgplot.c: the SVG line plots of the report (io/report/svgplot.h): nice tick numbers, tick
 * labels, log axes, gaps, thinning that keeps a spike, marker positions, escaping. */
#include "tests/testutil.h"

#include "io/report/svgplot.h"

/* What svg_plot writes for p, from a temporary file; malloc'ed. */
static char *render(const Plot *p) {
    FILE *f = tmpfile();
    assert_non_null(f);
    assert_int_equal(svg_plot(f, p), 0);
    long n = ftell(f);
    rewind(f);
    char *s = malloc((size_t)n + 1);
    assert_int_equal(fread(s, 1, (size_t)n, f), (size_t)n);
    s[n] = 0;
    fclose(f);
    return s;
}

static int count(const char *hay, const char *needle) {
    int n = 0;
    for (const char *p = strstr(hay, needle); p; p = strstr(p + 1, needle)) n++;
    return n;
}

/* The d attribute of the k-th <path> (0-based); static buffer. */
static const char *path_d(const char *svg, int k) {
    static char d[1 << 20];
    const char *p = svg;
    for (int i = 0; i <= k; i++) {
        p = strstr(p, "<path ");
        assert_non_null(p);
        p++;
    }
    p = strstr(p, " d=\"");
    assert_non_null(p);
    p += 4;
    size_t n = strcspn(p, "\"");
    assert_true(n < sizeof d);
    memcpy(d, p, n);
    d[n] = 0;
    return d;
}

/* Nice numbers as "Nice numbers for graph labels" (Graphics Gems, Academic Press, 1990) defines
 * them: rounding picks 1, 2, 5, 10 at the thresholds 1.5, 3, 7; the ceiling picks the smallest. */
static void test_nice_numbers(void **state) {
    (void)state;
    assert_close(nice_number(0.8, 1), 1.0, 1e-12, 1e-12);
    assert_close(nice_number(0.7, 0), 1.0, 1e-12, 1e-12);
    assert_close(nice_number(12, 1), 10, 1e-12, 1e-12);
    assert_close(nice_number(12, 0), 20, 1e-12, 1e-12);
    assert_close(nice_number(3.2, 1), 5, 1e-12, 1e-12);
    assert_close(nice_number(2.9, 1), 2, 1e-12, 1e-12);
    assert_close(nice_number(1.4, 1), 1, 1e-12, 1e-12);
    assert_close(nice_number(0.0021, 0), 0.005, 1e-15, 1e-12);
    assert_close(nice_number(6.9e5, 1), 5e5, 1e-6, 1e-12);

    double first, step;
    assert_int_equal(nice_ticks(0, 3000, 6, &first, &step), 7);        /* 0, 500, ..., 3000 */
    assert_close(first, 0, 1e-12, 0);
    assert_close(step, 500, 1e-9, 0);
    assert_int_equal(nice_ticks(1, 60, 6, &first, &step), 7);          /* 0, 10, ..., 60 */
    assert_close(step, 10, 1e-9, 0);
    assert_int_equal(nice_ticks(-0.97, 1.03, 5, &first, &step), 6);    /* -1, -0.5, ..., 1.5 */
    assert_close(first, -1, 1e-12, 0);
    assert_close(step, 0.5, 1e-12, 0);
    assert_int_equal(nice_ticks(4, 4, 5, &first, &step), 5);           /* a single value: widened */
    assert_true(first <= 4 && first + 4 * step >= 4 && step > 0);
}

static void test_tick_labels(void **state) {
    (void)state;
    char b[64];
    tick_label(b, sizeof b, 1500, 500);
    assert_string_equal(b, "1500");
    tick_label(b, sizeof b, -0.5, 0.5);
    assert_string_equal(b, "-0.5");
    tick_label(b, sizeof b, 0.05, 0.05);
    assert_string_equal(b, "0.05");
    tick_label(b, sizeof b, -1.0 + 2 * 0.5 - 1e-17, 0.5);   /* accumulated rounding: not "-0.0" */
    assert_string_equal(b, "0.0");
    tick_label(b, sizeof b, 3e-6, 1e-6);
    assert_string_equal(b, "3e-06");
    tick_label(b, sizeof b, 2.5e7, 5e6);
    assert_string_equal(b, "2.5e+07");
}

/* A log axis from 1e-3 to 2: decades 0.001 .. 10 labelled, no decade label missing. */
static void test_log_axis(void **state) {
    (void)state;
    double x[4] = {0, 1, 2, 3}, y[4] = {2, 0.3, 0.01, 1e-3};
    PlotSeries s = {.name = "loss", .x = x, .y = y, .n = 4};
    Plot p = {.title = "t", .xlabel = "epoch", .ylabel = "loss", .ylog = 1, .series = &s, .n_series = 1};
    char *svg = render(&p);
    static const char *const labels[] = {">0.001<", ">0.01<", ">0.1<", ">1<", ">10<"};
    for (int i = 0; i < 5; i++)
        if (!strstr(svg, labels[i])) fail_msg("log axis lacks the label %s", labels[i]);
    assert_null(strstr(svg, ">100<"));
    free(svg);

    /* a y <= 0 on a log axis breaks the line instead of drawing it */
    double y2[4] = {1, 0, 0.1, 0.01};
    s.y = y2;
    svg = render(&p);
    const char *d = path_d(svg, 0);
    assert_int_equal(count(d, "M"), 2);
    assert_int_equal(count(d, " l0 0"), 1);   /* the lone first point drawn as a dot */
    free(svg);

    /* exponents outside -3..4 are written as 10 with a superscript */
    double y3[2] = {1e-7, 1e-5};
    s.y = y3;
    s.n = 2;
    svg = render(&p);
    assert_non_null(strstr(svg, "10<tspan dy=\"-6\" font-size=\"9\">-7</tspan>"));
    free(svg);
}

/* Marker lines sit where the axis maps them; the legend lists only markers that exist; text is
 * escaped; no data says so. */
static void test_markers_legend_escape(void **state) {
    (void)state;
    double x[3] = {0, 5, 10}, y[3] = {0, 1, 0.5}, at = 5, none = 0;
    PlotSeries s = {.name = "a<b & c", .x = x, .y = y, .n = 3};
    PlotVLines v[2] = {{"pass", &at, 1, NULL, DASH_DASHED}, {"never shown", &none, 0, NULL, DASH_SOLID}};
    PlotHLine h = {"bound", 0.75, NULL, DASH_DOTTED};
    Plot p = {.title = "x \"quoted\"", .width = 960, .series = &s, .n_series = 1, .vlines = v, .n_vlines = 2,
              .hlines = &h, .n_hlines = 1};
    char *svg = render(&p);
    /* plot area from x = 78 to 960 - 18 = 942; x axis 0..10: x = 5 at 78 + 0.5 * 864 = 510 */
    assert_non_null(strstr(svg, "<line x1=\"510.0\""));
    assert_non_null(strstr(svg, ">pass<"));
    assert_non_null(strstr(svg, ">bound<"));
    assert_null(strstr(svg, "never shown"));
    assert_non_null(strstr(svg, "a&lt;b &amp; c"));
    assert_non_null(strstr(svg, "x &quot;quoted&quot;"));
    assert_null(strstr(svg, "no data"));
    free(svg);

    double nan[2] = {NAN, NAN};
    PlotSeries e = {.name = "empty", .x = x, .y = nan, .n = 2};
    Plot q = {.series = &e, .n_series = 1};
    svg = render(&q);
    assert_non_null(strstr(svg, ">no data<"));
    free(svg);
}

/* 200000 points are thinned to at most 4 per pixel column, and a one-sample spike survives: some
 * point lies on the top edge of the plot area (the spike is the maximum). Strided input reads
 * every stride-th element. */
static void test_thinning(void **state) {
    (void)state;
    enum { N = 200000 };
    double *xy = malloc(sizeof(double) * 2 * N);
    for (long i = 0; i < N; i++) {
        xy[2 * i] = (double)i;
        xy[2 * i + 1] = sin(i * 1e-4);
    }
    xy[2 * 123457 + 1] = 10;   /* the spike */
    PlotSeries s = {.x = xy, .y = xy + 1, .n = N, .stride = 2};
    Plot p = {.width = 960, .height = 320, .series = &s, .n_series = 1};
    char *svg = render(&p);
    const char *d = path_d(svg, 0);
    int pts = count(d, "L") + count(d, "M");
    assert_true(pts <= 4 * (960 - 78 - 18));
    assert_true(pts >= 960 - 78 - 18);
    /* the y axis ends at 10 exactly (ticks -2, 0, ..., 10), so the spike is drawn on the top edge of
     * the plot area, y = 12 px (no title, no legend: an 8 px margin and 4 px of space) */
    assert_non_null(strstr(d, " 12.0"));
    assert_non_null(strstr(svg, ">10<"));
    free(svg);
    free(xy);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_nice_numbers),
        cmocka_unit_test(test_tick_labels),
        cmocka_unit_test(test_log_axis),
        cmocka_unit_test(test_markers_legend_escape),
        cmocka_unit_test(test_thinning),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
