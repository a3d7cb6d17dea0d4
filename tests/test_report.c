/* tests/test_report.c: `framelaw report RUN_DIR`, run as a user would (the binary from `make test`),
 * on a run folder built by hand: the page holds the equations, the caution, the plots (every <svg>
 * balanced as XML) and the embedded image; missing optional files become notes; bad input is exit
 * status 2 with a one-line message (DEVELOPERS.md: 2 = bad usage or bad input). Then the page is
 * rendered by a real browser (headless Chromium, Debian package `chromium`) to a PNG that must not
 * be blank, and its rendered DOM must hold the equations. */
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include "io/run/config.h"
#include "io/data/images.h"
#include "io/report/report.h"
#include "sparse/equation.h"
#include "sparse/library.h"
#include "tests/testutil.h"

static char *read_all(const char *path, long *len) {
    FILE *f = fopen(path, "rb");
    if (!f) return NULL;
    fseek(f, 0, SEEK_END);
    long n = ftell(f);
    rewind(f);
    char *s = malloc((size_t)n + 1);
    assert_int_equal(fread(s, 1, (size_t)n, f), (size_t)n);
    s[n] = 0;
    fclose(f);
    if (len) *len = n;
    return s;
}

static int count(const char *hay, const char *needle) {
    int n = 0;
    for (const char *p = strstr(hay, needle); p; p = strstr(p + 1, needle)) n++;
    return n;
}

/* buf (1024 bytes) = dir/name. */
static void path_of(char *buf, const char *dir, const char *name) {
    if (snprintf(buf, 1024, "%s/%s", dir, name) >= 1024) fail_msg("path too long: %s/%s", dir, name);
}

static char tmp[256];

static int setup(void **state) {
    (void)state;
    return test_tmpdir(tmp, sizeof tmp) ? 0 : -1;
}

static int teardown(void **state) {
    (void)state;
    test_rmtree(tmp);
    return 0;
}

/* ---- a run folder by hand ---------------------------------------------------------------------- */

/* The equations of the hand-made model: k = 2, second order, library of degree 1 with sin/cos. */
static char eq_text[1024], eq_tex[2048];

static void write_equations(const char *dir) {
    LibrarySpec sp = library_spec_default(2, 2);
    sp.degree = 1;
    sp.trig = 1;
    Library lib;
    Status st;
    if (library_init(&lib, &sp, &st)) fail_msg("%s", st.msg);
    double *xi = calloc((size_t)lib.n_terms * 2, sizeof(double));
    xi[library_find(&lib, "sin(z1)") * 2 + 0] = -0.98;
    xi[library_find(&lib, "dz1/dt") * 2 + 0] = -0.05;
    xi[library_find(&lib, "z1") * 2 + 1] = 0.5;
    xi[library_find(&lib, "z2") * 2 + 1] = -2.25;
    equation_format(eq_text, sizeof eq_text, EQ_TEXT, &lib, xi, NULL, 4);
    equation_format(eq_tex, sizeof eq_tex, EQ_LATEX, &lib, xi, NULL, 4);
    /* the ensemble object (docs/formats.md): in equation 1, sin(z1) kept by 97% of the members,
     * z1 by 31% (not in the ensemble law); the other terms never */
    cJSON *tree = equation_json(&lib, xi, NULL, 4), *ens = cJSON_AddObjectToObject(tree, "ensemble");
    cJSON_AddNumberToObject(ens, "members", 100);
    cJSON_AddNumberToObject(ens, "block", 18);
    cJSON_AddNumberToObject(ens, "block_seconds", 0.6);
    cJSON_AddNumberToObject(ens, "threshold", 0.1);
    cJSON_AddNumberToObject(ens, "inclusion_threshold", 0.5);
    cJSON *eqs = cJSON_AddArrayToObject(ens, "equations");
    for (int j = 0; j < 2; j++) {
        int T = lib.n_terms;
        double pr[64] = {0}, md[64] = {0}, lo[64] = {0}, hi[64] = {0}, mk[64] = {0};
        if (j == 0) {
            int a = library_find(&lib, "sin(z1)"), b = library_find(&lib, "z1");
            pr[a] = 0.97, md[a] = -0.981, lo[a] = -1.02, hi[a] = -0.9437, mk[a] = 1;
            pr[b] = 0.31, md[b] = 0, lo[b] = -0.0125, hi[b] = 0.0375;
        }
        cJSON *q = cJSON_CreateObject();
        cJSON_AddStringToObject(q, "lhs", j ? "d2z2/dt2" : "d2z1/dt2");
        cJSON_AddItemToObject(q, "inclusion", cJSON_CreateDoubleArray(pr, T));
        cJSON_AddItemToObject(q, "median", cJSON_CreateDoubleArray(md, T));
        cJSON_AddItemToObject(q, "low", cJSON_CreateDoubleArray(lo, T));
        cJSON_AddItemToObject(q, "high", cJSON_CreateDoubleArray(hi, T));
        cJSON_AddItemToObject(q, "mask", cJSON_CreateDoubleArray(mk, T));
        double co[64] = {0};   /* the ensemble law: sin(z1) refit on all samples */
        if (j == 0) co[library_find(&lib, "sin(z1)")] = -0.9812;
        cJSON_AddItemToObject(q, "coefficients", cJSON_CreateDoubleArray(co, T));
        cJSON_AddStringToObject(q, "text", j ? "d2z2/dt2 = 0" : "d2z1/dt2 = -0.9812*sin(z1)");
        cJSON_AddStringToObject(q, "latex", j ? "\\ddot{z}_{2} = 0" : "\\ddot{z}_{1} = -0.9812 \\sin(z_{1})");
        cJSON_AddItemToArray(eqs, q);
    }
    /* the canonical form (docs/canonical.md): u1 = 2 z1 + 0.5, u2 = z2, w = (0.5, 1); the law
     * d2u1/dt2 = -1.96 sin(0.5 u1), d2u2/dt2 = -2.25 u2 in 2 terms where the learned law has 4 */
    cJSON *can = cJSON_AddObjectToObject(tree, "canonical");
    cJSON_AddStringToObject(can, "status", "found");
    cJSON_AddStringToObject(can, "note", "2 terms instead of 4");
    cJSON *map = cJSON_AddObjectToObject(can, "map"), *A = cJSON_AddArrayToObject(map, "A");
    const double a0[2] = {2, 0}, a1[2] = {0, 1}, b0[2] = {0.5, 0}, w0[2] = {0.5, 1};
    cJSON_AddItemToArray(A, cJSON_CreateDoubleArray(a0, 2));
    cJSON_AddItemToArray(A, cJSON_CreateDoubleArray(a1, 2));
    cJSON_AddItemToObject(map, "b", cJSON_CreateDoubleArray(b0, 2));
    cJSON_AddItemToObject(map, "w", cJSON_CreateDoubleArray(w0, 2));
    cJSON *ceqs = cJSON_AddArrayToObject(can, "equations");
    for (int j = 0; j < 2; j++) {
        double co[64] = {0}, mk[64];
        for (int t = 0; t < lib.n_terms; t++) mk[t] = 1;
        co[library_find(&lib, j ? "z2" : "sin(z1)")] = j ? -2.25 : -1.96;
        cJSON *q = cJSON_CreateObject();
        cJSON_AddItemToObject(q, "coefficients", cJSON_CreateDoubleArray(co, lib.n_terms));
        cJSON_AddItemToObject(q, "mask", cJSON_CreateDoubleArray(mk, lib.n_terms));
        cJSON_AddItemToArray(ceqs, q);
    }
    cJSON *fit = cJSON_AddObjectToObject(can, "fit");
    cJSON_AddNumberToObject(fit, "active", 2);
    cJSON_AddNumberToObject(fit, "active_learned", 4);
    char *json = cJSON_Print(tree);
    cJSON_Delete(tree);
    char p[1024];
    path_of(p, dir, "equations.txt");
    test_write_file(p, eq_text);
    path_of(p, dir, "equations.tex");
    test_write_file(p, eq_tex);
    path_of(p, dir, "equations.json");
    test_write_file(p, json);
    free(json);
    free(xi);
    library_free(&lib);
}

/* config.json and log.csv only (what a run has after its first epochs). */
static void write_minimal_run(const char *dir) {
    mkdir(dir, 0755);
    Config *c = malloc(sizeof *c);
    config_defaults(c);
    snprintf(c->frames, sizeof c->frames, "/data/recordings/pendulum");
    snprintf(c->output, sizeof c->output, "%s", dir);
    c->latent = 2;
    c->order = 2;
    c->epochs = 60;
    c->threshold_every = 20;
    c->refine_epochs = 10;
    char *json = config_to_json(c);
    char p[1024];
    path_of(p, dir, "config.json");
    test_write_file(p, json);
    free(json);
    free(c);

    /* 60 epochs, passes at 20 and 40 that remove terms, refinement from epoch 51, validation every
     * 10 epochs (empty field otherwise), as docs/formats.md describes the log. */
    path_of(p, dir, "log.csv");
    FILE *f = fopen(p, "w");
    assert_non_null(f);
    fprintf(f, "epoch,phase,lr,loss,reconstruction,dx,dz,l1,active,validation,seconds,epoch_seconds\n");
    for (int e = 1; e <= 60; e++) {
        double loss = 2.0 * exp(-e / 12.0) + 1e-3;
        int active = e < 20 ? 14 : e < 40 ? 7 : 4;
        fprintf(f, "%d,%s,0.001,%.6g,%.6g,%.6g,%.6g,%.6g,%d,", e, e > 50 ? "refine" : e <= 5 ? "warmup" : "train", loss, 0.6 * loss,
                0.3 * loss, 0.05 * loss, 3.0 - e / 30.0, active);
        if (e % 10 == 0) fprintf(f, "%.6g", 1.2 * loss);
        fprintf(f, ",%.3f,0.05\n", 0.05 * e);
    }
    fclose(f);
}

/* Everything export and forecast write (docs/formats.md, "Results"). */
static void write_full_run(const char *dir) {
    write_minimal_run(dir);
    write_equations(dir);
    char p[1024], d[1024];
    path_of(d, dir, "trajectories");
    mkdir(d, 0755);
    path_of(p, d, "rec1.csv");
    FILE *f = fopen(p, "w");
    assert_non_null(f);
    fprintf(f, "t,z1,z2,dz1,dz2,d2z1,d2z2,model_d2z1,model_d2z2\n");
    for (int i = 0; i < 300; i++) {
        double t = i / 30.0;
        fprintf(f, "%.6g,%.6g,%.6g,%.6g,%.6g,%.6g,%.6g,%.6g,%.6g\n", t, sin(2 * t), 0.5 * cos(t), 2 * cos(2 * t),
                -0.5 * sin(t), -4 * sin(2 * t), -0.5 * cos(t), -3.9 * sin(2 * t), -0.52 * cos(t));
    }
    fclose(f);
    /* a recording that leaves the training region: z1 = 1.3 sin(t) first exceeds z_max = 1 at the
     * sample t = 0.9 s (asin(1 / 1.3) = 0.878) */
    path_of(p, d, "rec5.csv");
    f = fopen(p, "w");
    assert_non_null(f);
    fprintf(f, "t,z1,z2,dz1,dz2,d2z1,d2z2,model_d2z1,model_d2z2\n");
    for (int i = 0; i < 40; i++) {
        double t = i / 10.0;
        fprintf(f, "%.6g,%.6g,0,%.6g,0,%.6g,0,%.6g,0\n", t, 1.3 * sin(t), 1.3 * cos(t), -1.3 * sin(t), -1.2 * sin(t));
    }
    fclose(f);
    path_of(p, dir, "region.json");
    test_write_file(p, "{\"z_min\": [-1, -0.5], \"z_max\": [1, 0.5], \"dz_min\": [-2, -0.5], \"dz_max\": [2, 0.5]}\n");
    path_of(p, dir, "forecast.json");
    test_write_file(p, "{\"format\": \"framelaw-forecast\", \"version\": 1, \"bound\": 0.1, \"recordings\": [\n"
                  " {\"name\": \"rec4\", \"frames\": 120, \"duration\": 3.97, \"method\": \"dopri5\",\n"
                  "  \"mean_error\": 0.031, \"final_error\": 0.152, \"max_error\": 0.16,\n"
                  "  \"exceeds_bound_at\": 3.1, \"latent_mean_error\": 0.01, \"latent_exceeds_bound_at\": null,\n"
                  "  \"extrapolating_from\": 2.5, \"stopped\": null,\n"
                  "  \"band\": {\"members\": 100, \"stopped\": 0, \"width_exceeds_bound_at\": 1.7, \"final_width\": 0.4}}]}\n");
    path_of(d, dir, "forecast");
    mkdir(d, 0755);
    path_of(p, d, "rec4.csv");
    f = fopen(p, "w");
    assert_non_null(f);
    fprintf(f, "t,error,latent_error,z1,z2,zhat1,zhat2,outside,band_median1,band_low1,band_high1,band_median2,"
               "band_low2,band_high2,band_width\n");
    for (int i = 0; i < 120; i++) {
        double t = i / 30.0;
        fprintf(f, "%.6g,%.6g,%.6g,%.6g,%.6g,%.6g,%.6g,%d", t, 0.01 + 0.035 * t * t / 3.97, 0.002 * t, sin(2 * t),
                0.5 * cos(t), sin(2.05 * t), 0.5 * cos(1.02 * t), t >= 2.5);
        fprintf(f, ",%.6g,%.6g,%.6g,%.6g,%.6g,%.6g,%.6g\n", sin(2.05 * t), sin(2.05 * t) - 0.05 * t,
                sin(2.05 * t) + 0.05 * t, 0.5 * cos(1.02 * t), 0.5 * cos(1.02 * t) - 0.02 * t,
                0.5 * cos(1.02 * t) + 0.02 * t, 0.1 * t);
    }
    fclose(f);
    /* a reconstruction strip: 2 rows of (original | decoded | difference), 16 x 16 frames */
    path_of(d, dir, "reconstructions");
    mkdir(d, 0755);
    enum { FW = 16, W = 3 * FW, H = 2 * FW };
    uint8_t px[W * H];
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++)
            px[y * W + x] = x >= 2 * FW ? (uint8_t)(128 + (x + y) % 5) : (uint8_t)(((x % FW) * 16 + y * 4) & 255);
    path_of(p, d, "rec1.png");
    Status st;
    if (image_write_png_gray(p, px, W, H, &st)) fail_msg("%s", st.msg);
}

/* ---- checks on the page ------------------------------------------------------------------------ */

/* Every <svg>...</svg> is well-formed XML as far as tags go: each element closed by its own end tag
 * or "/>", in order (Extensible Markup Language 1.0, W3C, section 3: elements nest properly). */
static void check_svg_balanced(const char *html) {
    int n_svg = 0;
    for (const char *s = strstr(html, "<svg"); s; s = strstr(s, "<svg")) {
        const char *end = strstr(s, "</svg>");
        if (!end) fail_msg("<svg> number %d is not closed", n_svg + 1);
        end += 6;
        char stack[32][16];
        int depth = 0;
        for (const char *p = s; p < end; p++) {
            if (*p != '<') continue;
            const char *gt = memchr(p, '>', (size_t)(end - p));
            if (!gt) fail_msg("svg %d: unterminated tag", n_svg + 1);
            char name[16];
            int closing = p[1] == '/';
            const char *q = p + 1 + closing;
            size_t l = 0;
            while (q + l < gt && (q[l] >= 'a' && q[l] <= 'z') && l < sizeof name - 1) l++;
            memcpy(name, q, l);
            name[l] = 0;
            if (!l) fail_msg("svg %d: bad tag at offset %ld", n_svg + 1, (long)(p - html));
            if (closing) {
                if (!depth || strcmp(stack[depth - 1], name))
                    fail_msg("svg %d: </%s> closes <%s>", n_svg + 1, name, depth ? stack[depth - 1] : "nothing");
                depth--;
            } else if (gt[-1] != '/') {
                assert_true(depth < 32);
                snprintf(stack[depth++], sizeof stack[0], "%s", name);
            }
            p = gt;
        }
        if (depth) fail_msg("svg %d: <%s> not closed", n_svg + 1, stack[depth - 1]);
        n_svg++;
        s = end;
    }
    assert_int_equal(n_svg, count(html, "</svg>"));
}

/* The laws as MathML (sparse/mathml.h): the canonical law, its map, the learned law and the
 * ensemble law, each a <math display="block">; LaTeX only inside the copy boxes (<textarea>). */
/* needle as a browser serialises it: the character references of the writer as UTF-8 characters
 * (U+2212 minus, U+2062 invisible times, U+2061 function application); a static buffer. */
static const char *as_dom(const char *needle, int dom) {
    static char b[2048];
    if (!dom) return needle;
    static const char *const ref[3] = {"&#x2212;", "&#x2062;", "&#x2061;"};
    static const char *const utf8[3] = {"\xe2\x88\x92", "\xe2\x81\xa2", "\xe2\x81\xa1"};
    size_t o = 0;
    for (const char *p = needle; *p && o < sizeof b - 4;) {
        int hit = -1;
        for (int i = 0; i < 3; i++)
            if (!strncmp(p, ref[i], 8)) hit = i;
        if (hit >= 0) memcpy(b + o, utf8[hit], 3), o += 3, p += 8;
        else b[o++] = *p++;
    }
    b[o] = 0;
    return b;
}

static void check_math(const char *html, int dom) {
    assert_int_equal(count(html, "<math display=\"block\">"), 4);
    assert_int_equal(count(html, "</math>"), 4);
    /* the learned law's first equation, the canonical trig argument 0.5 u1, the map's offset, the
     * ensemble law's coefficient */
    assert_non_null(strstr(html, as_dom("<mo>&#x2212;</mo><mn>0.05</mn><mo>&#x2062;</mo><mfrac><mrow><mi>d</mi><msub><mi>z"
                                 "</mi><mn>1</mn></msub></mrow><mrow><mi>d</mi><mi>t</mi></mrow></mfrac><mo>&#x2212;"
                                 "</mo><mn>0.98</mn><mo>&#x2062;</mo><mi>sin</mi>", dom)));
    assert_non_null(strstr(html, as_dom("<mn>1.96</mn><mo>&#x2062;</mo><mi>sin</mi><mo>&#x2061;</mo><mrow><mo>(</mo><mn>0.5"
                                 "</mn><mo>&#x2062;</mo><msub><mi>u</mi><mn>1</mn></msub>", dom)));
    assert_non_null(strstr(html, "<mo>+</mo><mn>0.5</mn></mrow>"));
    assert_non_null(strstr(html, as_dom("<mn>0.9812</mn><mo>&#x2062;</mo><mi>sin</mi>", dom)));
    /* the LaTeX source is in a copy box, and nowhere else: the page without its textareas has no
     * LaTeX command, no TeX subscript group and no alignment mark */
    assert_non_null(strstr(html, "\\ddot{z}_{1} &amp;= "));
    size_t n = strlen(html);
    char *outside = malloc(n + 1), *o = outside;
    int boxes = 0;
    for (const char *p = html; *p;) {
        const char *t = strstr(p, "<textarea");
        if (!t) t = p + strlen(p);
        memcpy(o, p, (size_t)(t - p));
        o += t - p;
        if (!*t) break;
        const char *e = strstr(t, "</textarea>");
        if (!e) fail_msg("a <textarea> is not closed");
        p = e + 11;
        boxes++;
    }
    *o = 0;
    assert_int_equal(boxes, 4);   /* equations.txt, equations.tex, the ensemble law as text and LaTeX */
    static const char *const tex[] = {"\\", "_{", "^{", "&amp;=", "\\begin", "\\dot", "\\frac", "\\sin"};
    for (size_t i = 0; i < sizeof tex / sizeof tex[0]; i++)
        if (strstr(outside, tex[i])) fail_msg("LaTeX \"%s\" outside the copy boxes: ...%.80s", tex[i], strstr(outside, tex[i]));
    free(outside);
}

/* The page from the full run folder holds all its parts. */
static void test_full_run(void **state) {
    (void)state;
    char dir[1024], cmd[2048], page[1024];
    static char out[16384];
    path_of(dir, tmp, "full");
    write_full_run(dir);
    snprintf(cmd, sizeof cmd, "report '%s'", dir);
    if (test_run_capture(cmd, out, sizeof out) != 0) fail_msg("report failed: %s", out);
    assert_non_null(strstr(out, "report.html"));
    path_of(page, dir, "report.html");
    long len;
    char *html = read_all(page, &len);
    assert_non_null(html);

    /* each equation line as text, and the LaTeX (with & escaped as HTML) */
    char lines[1024];
    snprintf(lines, sizeof lines, "%s", eq_text);
    for (char *l = strtok(lines, "\n"); l; l = strtok(NULL, "\n"))
        if (!strstr(html, l)) fail_msg("the page lacks the equation \"%s\"", l);
    assert_non_null(strstr(html, "d2z1/dt2 = -0.05*dz1/dt - 0.98*sin(z1)"));
    assert_non_null(strstr(html, "\\ddot{z}_{1} &amp;= "));
    assert_non_null(strstr(html, REPORT_CAUTION));
    assert_non_null(strstr(html, "A learned model is a data-driven approximation"));

    /* plots: loss, active, 2 x (trajectory z and its derivative), forecast error and latent = 8 */
    check_svg_balanced(html);
    assert_int_equal(count(html, "<svg"), 8);
    assert_int_equal(count(html, "<figure"), count(html, "</figure>"));
    assert_int_equal(count(html, "<table"), count(html, "</table>"));
    assert_non_null(strstr(html, "Loss over epochs (log scale)"));
    assert_non_null(strstr(html, "thresholding pass (terms removed)"));
    assert_non_null(strstr(html, "refinement phase starts"));
    assert_non_null(strstr(html, "t (s)"));
    assert_non_null(strstr(html, "loss (no unit)"));
    assert_non_null(strstr(html, "extrapolating beyond the training data from t = 2.5 s"));    /* rec4 */
    assert_non_null(strstr(html, "extrapolating beyond the training data from t = 0.9 s"));    /* rec5 */
    assert_int_equal(count(html, "extrapolating beyond the training data"), 2);            /* not rec1 */
    assert_non_null(strstr(html, "bound 0.1"));
    /* the coefficient table: the four nonzero coefficients, and the pruned terms left out */
    assert_non_null(strstr(html, ">-0.98<"));
    assert_non_null(strstr(html, ">-2.25<"));
    assert_non_null(strstr(html, "4 of the library"));
    /* the ensemble: bars, numbers, intervals, the law; the band on the latent plot */
    assert_non_null(strstr(html, "<span style=\"width:97.0%\"></span></span> 0.97"));
    assert_non_null(strstr(html, "<span style=\"width:31.0%\"></span></span> 0.31"));
    assert_non_null(strstr(html, "[-1.02, -0.9437]"));
    assert_non_null(strstr(html, ">-0.981<"));
    assert_int_equal(count(html, "class=\"bar\""), 2); /* terms no member kept are not listed */
    assert_non_null(strstr(html, "d2z1/dt2 = -0.9812*sin(z1)"));
    assert_non_null(strstr(html, "z1 band 5%"));
    assert_non_null(strstr(html, "z2 band 95%"));
    assert_non_null(strstr(html, "band wider than the bound"));
    assert_non_null(strstr(html, ">1.7<"));

    check_math(html, 0);

    /* the PNG embedded whole: its base64 text is in the page */
    char png[1024];
    path_of(png, dir, "reconstructions/rec1.png");
    long plen;
    char *bytes = read_all(png, &plen);
    assert_non_null(bytes);
    char b64cmd[1200];
    snprintf(b64cmd, sizeof b64cmd, "base64 -w0 '%s'", png);   /* coreutils, an outside encoder */
    FILE *p = popen(b64cmd, "r");
    assert_non_null(p);
    static char enc[8192];
    size_t el = fread(enc, 1, sizeof enc - 1, p);
    enc[el] = 0;
    pclose(p);
    assert_true(el > 100);
    char *at = strstr(html, "data:image/png;base64,");
    assert_non_null(at);
    assert_memory_equal(at + 22, enc, el);
    assert_int_equal(at[22 + el], '"');
    free(bytes);

    /* self-contained: no script, nothing fetched */
    assert_null(strstr(html, "<script"));
    assert_null(strstr(html, "src=\"http"));
    assert_null(strstr(html, "href=\"http"));
    assert_null(strstr(html, "url("));
    free(html);
}

/* A run with only config.json and log.csv: every other section is a one-line note. */
static void test_missing_sections(void **state) {
    (void)state;
    char dir[1024], cmd[2048], page[1024];
    static char out[16384];
    path_of(dir, tmp, "young");
    write_minimal_run(dir);
    snprintf(cmd, sizeof cmd, "report '%s'", dir);
    if (test_run_capture(cmd, out, sizeof out) != 0) fail_msg("report failed: %s", out);
    path_of(page, dir, "report.html");
    char *html = read_all(page, NULL);
    assert_non_null(html);
    assert_non_null(strstr(html, "equations.txt: not written yet"));
    assert_non_null(strstr(html, "equations.json: not written yet"));
    assert_non_null(strstr(html, "trajectories/: no trajectories yet"));
    assert_non_null(strstr(html, "forecast.json: no forecast yet"));
    assert_non_null(strstr(html, "reconstructions/: no reconstruction strips yet"));
    assert_non_null(strstr(html, REPORT_CAUTION));
    assert_int_equal(count(html, "<svg"), 2);  /* loss and active terms */
    check_svg_balanced(html);
    /* model.derivatives latent (the default): the x'' term is not used, so it is not in the legend */
    assert_null(strstr(html, "x&#39;&#39; term"));
    assert_non_null(strstr(html, "The x'' term is not shown: with model.derivatives latent"));
    assert_non_null(strstr(html, "z&#39;&#39; term"));
    free(html);
    /* with derivatives from the frames it is */
    Config *c = malloc(sizeof *c);
    char cp[1024];
    path_of(cp, dir, "config.json");
    Status cst;
    config_defaults(c);
    if (config_load_run(c, cp, &cst)) fail_msg("%s", cst.msg);
    c->derivatives = DERIVS_FRAMES;
    char *cj = config_to_json(c);
    test_write_file(cp, cj);
    free(cj);
    free(c);
    if (test_run_capture(cmd, out, sizeof out) != 0) fail_msg("report failed: %s", out);
    html = read_all(page, NULL);
    assert_non_null(strstr(html, "x&#39;&#39; term"));
    assert_null(strstr(html, "is not shown: with model.derivatives latent"));
    free(html);

    /* --output elsewhere */
    char other[1024];
    path_of(other, tmp, "elsewhere.html");
    if (snprintf(cmd, sizeof cmd, "report '%s' --output '%s'", dir, other) >= (int)sizeof cmd) fail_msg("too long");
    if (test_run_capture(cmd, out, sizeof out) != 0) fail_msg("report --output failed: %s", out);
    assert_int_equal(access(other, R_OK), 0);

    /* a write that fails (here past a file size limit of 2 blocks, as a full disk would) names the
     * file and the system's reason, exit 1, and leaves neither the page nor its temporary */
    char full[1024];
    path_of(full, tmp, "limited.html");
    if (snprintf(cmd, sizeof cmd, "ulimit -f 2; trap '' XFSZ; '%s' report '%s' --output '%s' 2>&1", test_framelaw(),
                 dir, full) >= (int)sizeof cmd)
        fail_msg("too long");
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    size_t len = fread(out, 1, sizeof out - 1, p);
    out[len] = 0;
    int ws = pclose(p);
    if (!WIFEXITED(ws) || WEXITSTATUS(ws) != 1 || !strstr(out, full) || !strstr(out, "write failed: File too large"))
        fail_msg("report past a file size limit: status %d, output: %s", ws, out);
    assert_int_not_equal(access(full, F_OK), 0);
    snprintf(cmd, sizeof cmd, "ls '%s' | grep -q 'limited.html.tmp-'", tmp);
    assert_int_not_equal(system(cmd), 0);
}

/* Exit status 2 and a one-line message naming what is missing or wrong; no page left behind. */
static void expect_bad(const char *args, const char *msg) {
    static char out[16384];
    int rc = test_run_capture(args, out, sizeof out);
    if (rc != 2) fail_msg("framelaw %s: exit %d, expected 2: %s", args, rc, out);
    if (!strstr(out, msg)) fail_msg("framelaw %s: message \"%s\" lacks \"%s\"", args, out, msg);
    assert_int_equal(count(out, "\n"), 1);
}

static void test_bad_input(void **state) {
    (void)state;
    char dir[1024], cmd[2048], p[1024];
    path_of(dir, tmp, "bad");

    snprintf(cmd, sizeof cmd, "report '%s'", dir);
    expect_bad(cmd, "no such run folder");
    mkdir(dir, 0755);
    expect_bad(cmd, "config.json: missing");
    write_minimal_run(dir);
    path_of(p, dir, "log.csv");
    char *log = read_all(p, NULL);
    unlink(p);
    expect_bad(cmd, "log.csv: missing");

    /* a malformed row names the file and the line */
    char broken[4096];
    snprintf(broken, sizeof broken, "%.*s", (int)(strchr(strchr(log, '\n') + 1, '\n') - log + 1), log);
    strcat(broken, "2,train,0.001,oops,1,1,1,1,14,,0.1,0.05\n");
    test_write_file(p, broken);
    expect_bad(cmd, "log.csv:3: field 4 (loss) \"oops\" is not a number");
    test_write_file(p, "when,what\n1,2\n");
    expect_bad(cmd, "log.csv: no column \"epoch\"");
    test_write_file(p, log);
    free(log);

    /* files from a newer format version */
    write_equations(dir);
    path_of(p, dir, "equations.json");
    char *eq = read_all(p, NULL);
    char *v = strstr(eq, "\"version\":");
    assert_non_null(v);
    char *digit = v + strcspn(v, "0123456789");
    *digit = '3';
    test_write_file(p, eq);
    expect_bad(cmd, "equations.json: format version 3 is newer than this program reads");
    unlink(p);
    free(eq);
    /* a canonical form whose map is short of a number: named, no page */
    write_equations(dir);
    eq = read_all(p, NULL);
    cJSON *tree = cJSON_Parse(eq);
    free(eq);
    cJSON *map = cJSON_GetObjectItem(cJSON_GetObjectItem(tree, "canonical"), "map");
    assert_non_null(map);
    cJSON_ReplaceItemInObject(map, "w", cJSON_CreateArray());
    eq = cJSON_Print(tree);
    cJSON_Delete(tree);
    test_write_file(p, eq);
    free(eq);
    expect_bad(cmd, "equations.json: \"canonical\" needs \"equations\" (2, each with");
    unlink(p);
    path_of(p, dir, "forecast.json");
    test_write_file(p, "{\"format\": \"framelaw-forecast\", \"version\": 3, \"bound\": 0.1, \"recordings\": []}");
    expect_bad(cmd, "forecast.json: format version 3 is newer");
    test_write_file(p, "{\"format\": \"framelaw-forecast\", \"version\": 1, \"bound\": 0.1, \"recordi");
    expect_bad(cmd, "forecast.json: not a JSON object");
    path_of(p, dir, "report.html");
    assert_int_not_equal(access(p, F_OK), 0);

    expect_bad("report", "missing RUN_DIR");
    expect_bad("report --colour", "unknown option");
}

/* An equations.json of format version 1 (before '*': "frequencies" and a space for a product),
 * written by the earlier program: the report reads it and names its terms as today. */
static void test_version1_equations(void **state) {
    (void)state;
    char dir[1024], cmd[2048], p[1024];
    static char out[16384];
    path_of(dir, tmp, "v1");
    write_full_run(dir);
    LibrarySpec sp = library_spec_default(2, 2);
    sp.trig = 1, sp.n_freq = 2, sp.freq[1] = 2;
    Library lib;
    Status st;
    if (library_init(&lib, &sp, &st)) fail_msg("%s", st.msg);
    double *xi = calloc((size_t)lib.n_terms * 2, sizeof(double));
    xi[library_find(&lib, "sin(2*z1)") * 2 + 0] = -0.75;
    xi[library_find(&lib, "z1*dz2/dt") * 2 + 1] = 0.125;
    char *js = equation_json_string(&lib, xi, NULL, 4);
    assert_non_null(js);
    /* version 2 -> 1: the version, the multipliers' old key, a space where '*' is */
    char *v = strstr(js, "\"version\":\t2");
    assert_non_null(v);
    v[11] = '1';
    char *m = strstr(js, "\"multipliers\"");
    assert_non_null(m);
    memcpy(m, "\"frequencies\"", 13);
    for (char *c = js; *c; c++)
        if (*c == '*') *c = ' ';
    assert_non_null(strstr(js, "\"sin(2 z1)\""));
    path_of(p, dir, "equations.json");
    test_write_file(p, js);
    free(js);
    free(xi);
    library_free(&lib);
    snprintf(cmd, sizeof cmd, "report '%s'", dir);
    if (test_run_capture(cmd, out, sizeof out) != 0) fail_msg("report failed: %s", out);
    path_of(p, dir, "report.html");
    char *html = read_all(p, NULL);
    assert_non_null(html);
    assert_non_null(strstr(html, "<tr><td>sin(2*z1)</td>"));
    assert_non_null(strstr(html, "<tr><td>z1*dz2/dt</td>"));
    assert_non_null(strstr(html, ">-0.75<"));
    assert_non_null(strstr(html, "2 of the library"));
    free(html);
}

/* ---- a real browser ------------------------------------------------------------------------------ */

static int have_chromium(void) { return system("command -v chromium >/dev/null 2>&1") == 0; }

/* Headless Chromium on file://page with the flags a container needs (no sandbox as root, no GPU,
 * no network activity of its own, a fresh profile); extra is --screenshot=... or --dump-dom.
 * stdout goes to out_path, stderr to err_path. Returns the exit status. */
static int chromium(const char *page, const char *extra, const char *out_path, const char *err_path) {
    char prof[1024], cmd[8192];
    snprintf(prof, sizeof prof, "%s/profile-XXXXXX", tmp);
    assert_non_null(mkdtemp(prof));
    snprintf(cmd, sizeof cmd,
             "timeout 90 chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run "
             "--disable-background-networking --disable-component-update --disable-sync --disable-dev-shm-usage "
             "--user-data-dir='%s' --window-size=1200,3000 %s 'file://%s' >'%s' 2>'%s'",
             prof, extra, page, out_path, err_path);
    int s = system(cmd);
    return WIFEXITED(s) ? WEXITSTATUS(s) : -1;
}

static void test_browser(void **state) {
    (void)state;
    if (!have_chromium() && geteuid() == 0) {
        fprintf(stderr, "test_report: chromium is missing; installing it (Debian package chromium)\n");
        if (system("(apt-get update -qq || true) && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "
                   "--no-install-recommends chromium >/dev/null") != 0)
            fprintf(stderr, "test_report: apt-get install chromium failed\n");
    }
    if (!have_chromium())
        fail_msg("headless Chromium is needed to check the report in a real browser, and it is not installed%s: "
                 "run `make deps` as root, or `sudo apt-get install --no-install-recommends chromium`",
                 geteuid() == 0 ? " (installing it failed)" : " (and this test is not root, so it cannot install it)");

    char dir[1024], cmd[2048], page[2048], shot[1024], err[1024], dom[1024];
    static char out[16384];
    path_of(dir, tmp, "browse");
    write_full_run(dir);
    snprintf(cmd, sizeof cmd, "report '%s'", dir);
    if (test_run_capture(cmd, out, sizeof out) != 0) fail_msg("report failed: %s", out);
    char abs[1024];
    if (!realpath(dir, abs)) fail_msg("realpath %s", dir);
    snprintf(page, sizeof page, "%s/report.html", abs);
    path_of(shot, tmp, "shot.png");
    path_of(err, tmp, "chromium.err");
    char flag[1200];
    snprintf(flag, sizeof flag, "--screenshot='%s'", shot);
    int rc = chromium(page, flag, "/dev/null", err);
    if (access(shot, R_OK) != 0) {
        char *e = read_all(err, NULL);
        fail_msg("chromium --screenshot (exit %d) wrote no PNG; its messages: %.1500s", rc, e ? e : "");
    }

    /* the expected size, and not blank: the gray levels vary, and a fair share of pixels is ink */
    float *img;
    int w, h;
    Status st;
    if (image_load_gray(shot, GRAY_BT601, &img, &w, &h, &st)) fail_msg("%s", st.msg);
    assert_int_equal(w, 1200);
    assert_int_equal(h, 3000);
    double sum = 0, sum2 = 0;
    long ink = 0;
    for (long i = 0; i < (long)w * h; i++) {
        sum += img[i];
        sum2 += (double)img[i] * img[i];
        ink += img[i] < 0.75f;
    }
    double mean = sum / ((double)w * h), var = sum2 / ((double)w * h) - mean * mean;
    if (!(var > 1e-4)) fail_msg("the rendered page is blank: gray variance %g", var);
    if (ink < (long)w * h / 200) fail_msg("the rendered page has almost no ink: %ld dark pixels", ink);
    free(img);

    /* the text of the rendered DOM holds the equations and the caution */
    path_of(dom, tmp, "dom.html");
    rc = chromium(page, "--dump-dom", dom, err);
    char *d = read_all(dom, NULL);
    if (rc != 0 || !d || !d[0]) fail_msg("chromium --dump-dom failed (exit %d)", rc);
    char lines[1024];
    snprintf(lines, sizeof lines, "%s", eq_text);
    for (char *l = strtok(lines, "\n"); l; l = strtok(NULL, "\n"))
        if (!strstr(d, l)) fail_msg("the rendered page lacks the equation \"%s\"", l);
    assert_non_null(strstr(d, "validate it independently before it drives a physical system"));
    assert_int_equal(count(d, "<svg"), 8);
    check_math(d, 1);   /* the browser parsed the MathML as such: the same elements come back */
    free(d);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_full_run),
        cmocka_unit_test(test_missing_sections),
        cmocka_unit_test(test_bad_input),
        cmocka_unit_test(test_version1_equations),
        cmocka_unit_test(test_browser),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
