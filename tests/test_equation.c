/* tests/test_equation.c: equations as text, LaTeX and JSON. The expected strings are the
 * notation of docs/sparse.md (our own format, ordinary mathematical notation with '*' for a product
 * as in every programming language: common practice). */
#include "sparse/equation.h"
#include "tests/testutil.h"

static Library make(int k, int order, int degree, int trig) {
    LibrarySpec sp = library_spec_default(k, order);
    sp.degree = degree;
    sp.trig = trig;
    Library lib;
    Status st;
    if (library_init(&lib, &sp, &st)) fail_msg("%s", st.msg);
    return lib;
}

/* Lorenz's system ("Deterministic Nonperiodic Flow", J. Atmos. Sci. 1963) as a model of ours. */
static void lorenz_xi(const Library *lib, double *xi) {
    memset(xi, 0, sizeof(double) * lib->n_terms * 3);
    xi[library_find(lib, "z1") * 3 + 0] = -10, xi[library_find(lib, "z2") * 3 + 0] = 10;
    xi[library_find(lib, "z1") * 3 + 1] = 28, xi[library_find(lib, "z2") * 3 + 1] = -1;
    xi[library_find(lib, "z1*z3") * 3 + 1] = -1;
    xi[library_find(lib, "z3") * 3 + 2] = -8.0 / 3, xi[library_find(lib, "z1*z2") * 3 + 2] = 1;
}

static void test_text_lorenz(void **state) {
    (void)state;
    Library lib = make(3, 1, 2, 0);
    double xi[30];
    lorenz_xi(&lib, xi);
    char buf[512];
    size_t n = equation_format(buf, sizeof buf, EQ_TEXT, &lib, xi, NULL, 4);
    const char *want = "dz1/dt = -10*z1 + 10*z2\n"
                       "dz2/dt = 28*z1 - z2 - z1*z3\n"
                       "dz3/dt = -2.667*z3 + z1*z2\n";
    assert_string_equal(buf, want);
    assert_int_equal(n, strlen(want));
    equation_format(buf, sizeof buf, EQ_TEXT, &lib, xi, NULL, 2);
    assert_non_null(strstr(buf, "dz3/dt = -2.7*z3 + z1*z2\n"));
    /* snprintf semantics: a short buffer is cut and terminated, the needed length returned */
    char small[10];
    assert_int_equal(equation_format(small, sizeof small, EQ_TEXT, &lib, xi, NULL, 4), strlen(want));
    assert_string_equal(small, "dz1/dt = ");
    /* a masked-out coefficient is left out even when nonzero */
    uint8_t mask[30];
    memset(mask, 1, sizeof mask);
    mask[library_find(&lib, "z2") * 3 + 0] = 0;
    equation_line(buf, sizeof buf, EQ_TEXT, &lib, xi, mask, 0, 4);
    assert_string_equal(buf, "dz1/dt = -10*z1");
    library_free(&lib);
}

/* The example of docs/sparse.md, second order. */
static void test_text_pendulum(void **state) {
    (void)state;
    Library lib = make(1, 2, 1, 1);
    double *xi = calloc((size_t)lib.n_terms, sizeof *xi);
    xi[library_find(&lib, "sin(z1)")] = -0.98;
    xi[library_find(&lib, "dz1/dt")] = -0.05;
    char buf[256];
    equation_format(buf, sizeof buf, EQ_TEXT, &lib, xi, NULL, 4);
    assert_string_equal(buf, "d2z1/dt2 = -0.05*dz1/dt - 0.98*sin(z1)\n");   /* library order */
    equation_format(buf, sizeof buf, EQ_LATEX, &lib, xi, NULL, 4);
    assert_string_equal(buf, "\\begin{aligned}\n"
                             "\\ddot{z}_{1} &= -0.05 \\dot{z}_{1} - 0.98 \\sin(z_{1})\n"
                             "\\end{aligned}\n");
    /* constant, all-zero, unit and tiny coefficients */
    memset(xi, 0, sizeof(double) * lib.n_terms);
    equation_line(buf, sizeof buf, EQ_TEXT, &lib, xi, NULL, 0, 4);
    assert_string_equal(buf, "d2z1/dt2 = 0");
    xi[0] = 1.0;
    xi[library_find(&lib, "z1")] = -1.0;
    xi[library_find(&lib, "cos(z1)")] = 1.5e-5;
    equation_line(buf, sizeof buf, EQ_TEXT, &lib, xi, NULL, 0, 3);
    assert_string_equal(buf, "d2z1/dt2 = 1 - z1 + 1.5e-05*cos(z1)");
    equation_line(buf, sizeof buf, EQ_LATEX, &lib, xi, NULL, 0, 3);
    assert_string_equal(buf, "\\ddot{z}_{1} &= 1 - z_{1} + 1.5 \\times 10^{-5} \\cos(z_{1})");
    xi[0] = -2;
    xi[library_find(&lib, "z1")] = 0;
    equation_line(buf, sizeof buf, EQ_TEXT, &lib, xi, NULL, 0, 3);
    assert_string_equal(buf, "d2z1/dt2 = -2 + 1.5e-05*cos(z1)");
    free(xi);
    library_free(&lib);
}

static void test_latex_lorenz(void **state) {
    (void)state;
    Library lib = make(3, 1, 2, 0);
    double xi[30];
    lorenz_xi(&lib, xi);
    char buf[512];
    equation_format(buf, sizeof buf, EQ_LATEX, &lib, xi, NULL, 4);
    assert_string_equal(buf, "\\begin{aligned}\n"
                             "\\dot{z}_{1} &= -10 z_{1} + 10 z_{2} \\\\\n"
                             "\\dot{z}_{2} &= 28 z_{1} - z_{2} - z_{1} z_{3} \\\\\n"
                             "\\dot{z}_{3} &= -2.667 z_{3} + z_{1} z_{2}\n"
                             "\\end{aligned}\n");
    FILE *f = tmpfile();
    assert_non_null(f);
    assert_int_equal(equation_fprint(f, EQ_TEXT, &lib, xi, NULL, 4), 0);
    rewind(f);
    char line[128];
    assert_non_null(fgets(line, sizeof line, f));
    assert_string_equal(line, "dz1/dt = -10*z1 + 10*z2\n");
    fclose(f);
    library_free(&lib);
}

/* JSON round trip: the library settings, names, coefficients (bit for bit) and mask come back. */
static void test_json_roundtrip(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(2, 2);
    sp.trig = 1;
    sp.n_freq = 2;
    sp.freq[1] = 3;
    sp.trig_velocity = 0;
    sp.n_include = 1;
    strcpy(sp.include[0], "z1^3");
    sp.n_exclude = 1;
    strcpy(sp.exclude[0], "z2 z1");   /* the old form, written back as "z1*z2" */
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), 0);
    int T = lib.n_terms;
    double *xi = malloc(sizeof(double) * T * 2);
    uint8_t *mask = malloc((size_t)T * 2);
    for (int i = 0; i < T * 2; i++) xi[i] = (i % 3) ? 0.1 * i - 1.0 / 3 : 0, mask[i] = (uint8_t)(i % 5 != 1);
    for (int i = 0; i < T * 2; i++)
        if (!mask[i]) xi[i] = 0;
    char *js = equation_json_string(&lib, xi, mask, 4);
    assert_non_null(js);
    assert_non_null(strstr(js, "\"format\":\t\"framelaw-equations\""));
    assert_non_null(strstr(js, "\"lhs\":\t\"d2z1/dt2\""));
    assert_non_null(strstr(js, "\"version\":\t2,"));
    assert_non_null(strstr(js, "\"n_latent\":\t2,"));
    assert_non_null(strstr(js, "\"digits\":\t4,"));
    assert_non_null(strstr(js, "\"multipliers\":\t[1, 3]"));
    assert_non_null(strstr(js, "\"exclude\":\t[\"z1*z2\"]"));
    assert_null(strstr(js, "frequencies"));
    Library l2;
    Coef c;
    if (equation_from_json(js, &l2, &c, &st)) fail_msg("%s", st.msg);
    assert_int_equal(l2.n_terms, T);
    assert_int_equal(l2.spec.order, 2);
    assert_int_equal(l2.spec.n_freq, 2);
    for (int t = 0; t < T; t++) assert_string_equal(l2.names[t], lib.names[t]);
    for (int i = 0; i < T * 2; i++) {
        if (c.xi[i] != xi[i]) fail_msg("xi[%d] %.17g read back as %.17g", i, xi[i], c.xi[i]);
        assert_int_equal(c.mask[i], mask[i]);
    }
    library_free(&l2);
    coef_free(&c);

    /* damaged files: one-line errors naming the member */
    const char *bad[][2] = {
        {"{", "not valid JSON"},
        {"{\"format\": \"other\"}", "\"format\""},
        {"{\"format\": \"framelaw-equations\", \"version\": 3}", "version 3 is newer"},
        {"{\"format\": \"framelaw-equations\", \"version\": 2, \"order\": 1, \"n_latent\": 1, \"n_variables\": 1}",
         "expected one"},
    };
    for (int i = 0; i < 4; i++) {
        assert_int_equal(equation_from_json(bad[i][0], &l2, &c, &st), ST_INPUT);
        if (!strstr(st.msg, bad[i][1])) fail_msg("'%s' lacks '%s'", st.msg, bad[i][1]);
    }
    /* a renamed term and a short coefficient vector */
    char *js2 = strdup(js);
    char *at = strstr(strstr(js2, "\"terms\""), "\"z1^3\"");
    assert_non_null(at);
    memcpy(at, "\"z2^3\"", 6);
    assert_int_equal(equation_from_json(js2, &l2, &c, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "is not \"z1^3\""));
    free(js2);
    cJSON *root = cJSON_Parse(js);
    cJSON *e0 = cJSON_GetArrayItem(cJSON_GetObjectItem(root, "equations"), 0);
    cJSON_DeleteItemFromArray(cJSON_GetObjectItem(e0, "coefficients"), 0);
    char *js3 = cJSON_Print(root);
    assert_int_equal(equation_from_json(js3, &l2, &c, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "equation 1 needs"));
    free(js3);
    cJSON_Delete(root);
    free(js);
    free(xi), free(mask);
    library_free(&lib);
}

/* A version-1 file as the program before version 2 wrote it: "frequencies" for the multipliers and a
 * space for a product in the term, include and exclude names. It reads, with today's names. */
static const char V1_JSON[] =
    "{\"format\": \"framelaw-equations\", \"version\": 1, \"order\": 2, \"n_latent\": 1, \"digits\": 6,\n"
    " \"library\": {\"constant\": true, \"degree\": 2, \"trig\": true, \"trig_velocity\": false,\n"
    "             \"frequencies\": [1, 2], \"include\": [\"z1^2 dz1/dt\"], \"exclude\": [\"z1 dz1/dt\"]},\n"
    " \"variables\": [\"z1\", \"dz1/dt\"],\n"
    " \"terms\": [\"1\", \"z1\", \"dz1/dt\", \"z1^2\", \"(dz1/dt)^2\", \"sin(z1)\", \"cos(z1)\", \"sin(2 z1)\",\n"
    "           \"cos(2 z1)\", \"z1^2 dz1/dt\"],\n"
    " \"equations\": [{\"lhs\": \"d2z1/dt2\", \"coefficients\": [0, 0, -0.05, 0, 0, -0.98, 0, 0.25, 0, 0.5],\n"
    "                \"mask\": [0, 0, 1, 0, 0, 1, 0, 1, 0, 1], \"active\": 4,\n"
    "                \"text\": \"d2z1/dt2 = -0.05 dz1/dt - 0.98 sin(z1) + 0.25 sin(2 z1) + 0.5 z1^2 dz1/dt\",\n"
    "                \"latex\": \"\\\\ddot{z}_{1} = -0.05 \\\\dot{z}_{1}\"}]}\n";

static void test_json_version1(void **state) {
    (void)state;
    Library lib;
    Coef c;
    Status st;
    if (equation_from_json(V1_JSON, &lib, &c, &st)) fail_msg("%s", st.msg);
    static const char *const names[] = {"1",         "z1",        "dz1/dt",   "z1^2",      "(dz1/dt)^2",
                                        "sin(z1)",   "cos(z1)",   "sin(2*z1)", "cos(2*z1)", "z1^2*dz1/dt"};
    assert_int_equal(lib.n_terms, 10);
    for (int t = 0; t < 10; t++) assert_string_equal(lib.names[t], names[t]);
    assert_int_equal(lib.spec.n_freq, 2);
    assert_int_equal(lib.spec.freq[1], 2);
    assert_int_equal(lib.spec.trig_velocity, 0);
    static const double want[] = {0, 0, -0.05, 0, 0, -0.98, 0, 0.25, 0, 0.5};
    for (int t = 0; t < 10; t++) {
        assert_true(c.xi[t] == want[t]);   /* the file's numbers, exactly */
        assert_int_equal(c.mask[t], want[t] != 0);
    }
    /* written again: version 2, today's names and text */
    char *js = equation_json_string(&lib, c.xi, c.mask, 4);
    assert_non_null(js);
    assert_non_null(strstr(js, "\"version\":\t2,"));
    assert_non_null(strstr(js, "\"multipliers\":\t[1, 2]"));
    assert_non_null(strstr(js, "\"include\":\t[\"z1^2*dz1/dt\"]"));
    assert_non_null(strstr(js, "\"exclude\":\t[\"z1*dz1/dt\"]"));
    assert_non_null(strstr(js, "\"text\":\t\"d2z1/dt2 = -0.05*dz1/dt - 0.98*sin(z1) + 0.25*sin(2*z1) + 0.5*z1^2*dz1/dt\""));
    free(js);
    library_free(&lib);
    coef_free(&c);

    /* each version with its own key for the multipliers, and a wrong version-1 term is still wrong */
    char *v = strdup(V1_JSON);
    memcpy(strstr(v, "\"version\": 1"), "\"version\": 2", 12);
    assert_int_equal(equation_from_json(v, &lib, &c, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "\"library.multipliers\""));
    free(v);
    v = strdup(V1_JSON);
    char *at = strstr(strstr(v, "\"terms\""), "sin(2 z1)");
    at[4] = '3';
    assert_int_equal(equation_from_json(v, &lib, &c, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "term 8 is not \"sin(2*z1)\""));
    free(v);
}

/* fit's JSON names the count n_variables (plain state variables, not a latent space); it reads. */
static void test_json_variables(void **state) {
    (void)state;
    Library lib = make(3, 1, 2, 0);
    double xi[30];
    lorenz_xi(&lib, xi);
    cJSON *root = equation_json_as(&lib, xi, NULL, 4, EQ_COUNT_VARIABLES);
    assert_null(cJSON_GetObjectItem(root, "n_latent"));
    assert_int_equal(cJSON_GetObjectItem(root, "n_variables")->valueint, 3);
    char *js = cJSON_Print(root);
    Library l2;
    Coef c;
    Status st;
    if (equation_from_json(js, &l2, &c, &st)) fail_msg("%s", st.msg);
    assert_int_equal(c.n_out, 3);
    for (int i = 0; i < 30; i++) assert_true(c.xi[i] == xi[i]);
    library_free(&l2);
    coef_free(&c);
    free(js);
    cJSON_Delete(root);
    library_free(&lib);
}

/* Variables named x, y, z (Lorenz's own letters, J. Atmos. Sci. 1963): the shown equations use them
 * in text and LaTeX; the JSON keeps the z names as its keys (terms, variables, include / exclude),
 * records the names in "variable_names" and reads back with them. */
static void test_named_variables(void **state) {
    (void)state;
    static const char *const xyz[] = {"x", "y", "z"};
    LibrarySpec sp = library_spec_default(3, 1);
    sp.n_exclude = 1;
    strcpy(sp.exclude[0], "y^2");   /* by its shown name */
    Library lib;
    Status st;
    if (library_init_named(&lib, &sp, xyz, &st)) fail_msg("%s", st.msg);
    assert_int_equal(lib.n_terms, 9);
    assert_int_equal(library_find(&lib, "z2^2"), -1);
    assert_string_equal(lib.names[6], "z1*z3");   /* the key names do not change */
    double xi[27];
    memset(xi, 0, sizeof xi);
    xi[library_find(&lib, "x") * 3 + 0] = -10, xi[library_find(&lib, "y") * 3 + 0] = 10;
    xi[library_find(&lib, "x") * 3 + 1] = 28, xi[library_find(&lib, "y") * 3 + 1] = -1;
    xi[library_find(&lib, "z*x") * 3 + 1] = -1;
    xi[library_find(&lib, "z3") * 3 + 2] = -8.0 / 3, xi[library_find(&lib, "x*y") * 3 + 2] = 1;
    char buf[512];
    equation_format(buf, sizeof buf, EQ_TEXT, &lib, xi, NULL, 4);
    assert_string_equal(buf, "dx/dt = -10*x + 10*y\n"
                             "dy/dt = 28*x - y - x*z\n"
                             "dz/dt = -2.667*z + x*y\n");
    equation_format(buf, sizeof buf, EQ_LATEX, &lib, xi, NULL, 4);
    assert_non_null(strstr(buf, "\\dot{y} &= 28 x - y - x z \\\\\n"));
    char *js = equation_json_string(&lib, xi, NULL, 4);
    assert_non_null(strstr(js, "\"variable_names\":\t[\"x\", \"y\", \"z\"]"));
    assert_non_null(strstr(js, "\"variables\":\t[\"z1\", \"z2\", \"z3\"]"));
    assert_non_null(strstr(js, "\"exclude\":\t[\"z2^2\"]"));
    assert_non_null(strstr(js, "\"lhs\":\t\"dz/dt\""));
    assert_non_null(strstr(js, "\"text\":\t\"dz/dt = -2.667*z + x*y\""));
    Library l2;
    Coef c;
    if (equation_from_json(js, &l2, &c, &st)) fail_msg("%s", st.msg);
    assert_int_equal(l2.has_var_names, 1);
    assert_string_equal(l2.var_names[1], "y");
    for (int i = 0; i < 27; i++) assert_true(c.xi[i] == xi[i]);
    char b2[512];
    equation_format(b2, sizeof b2, EQ_TEXT, &l2, c.xi, c.mask, 4);
    assert_string_equal(b2, "dx/dt = -10*x + 10*y\n"
                            "dy/dt = 28*x - y - x*z\n"
                            "dz/dt = -2.667*z + x*y\n");
    library_free(&l2);
    coef_free(&c);
    /* bad names in the file: one line naming the member */
    static const char *const bad[][2] = {
        {"[\"x\", \"y\"]", "\"variable_names\" must hold 3 names"},
        {"[\"x\", \"y\", 3]", "\"variable_names\" entry 3 is not a string"},
        {"[\"x\", \"x\", \"z\"]", "\"variable_names\": 'x' names two variables"},
        {"[\"x\", \"y\", \"cos\"]", "'cos' is a word of the term names"},
    };
    for (size_t i = 0; i < sizeof bad / sizeof *bad; i++) {
        cJSON *root = cJSON_Parse(js);
        cJSON_ReplaceItemInObject(root, "variable_names", cJSON_Parse(bad[i][0]));
        char *t = cJSON_Print(root);
        assert_int_equal(equation_from_json(t, &l2, &c, &st), ST_INPUT);
        if (!strstr(st.msg, bad[i][1])) fail_msg("'%s' lacks '%s'", st.msg, bad[i][1]);
        free(t);
        cJSON_Delete(root);
    }
    free(js);
    library_free(&lib);
}

/* Second order with a Greek name and a subscripted one: d2theta/dt2, dtheta/dt, (dtheta/dt)^2; LaTeX
 * \ddot{\theta}, \dot{x}_{1}, \mathit{vel} (the usual notation: the dot over the variable, the
 * subscript after it; common practice). */
static void test_named_second_order(void **state) {
    (void)state;
    static const char *const names[] = {"theta", "x_1"};
    LibrarySpec sp = library_spec_default(2, 2);
    sp.trig = 1;
    Library lib;
    Status st;
    if (library_init_named(&lib, &sp, names, &st)) fail_msg("%s", st.msg);
    int T = lib.n_terms;
    double *xi = calloc((size_t)T * 2, sizeof(double));
    xi[library_find(&lib, "dtheta/dt") * 2 + 0] = -0.2;
    xi[library_find(&lib, "sin(theta)") * 2 + 0] = -4.903;
    xi[library_find(&lib, "(dtheta/dt)^2") * 2 + 0] = 0.5;
    xi[library_find(&lib, "x_1*dx_1/dt") * 2 + 1] = 2;
    assert_int_equal(library_find(&lib, "x_1*dx_1/dt"), library_find(&lib, "z2*dz2/dt"));
    char buf[512];
    equation_format(buf, sizeof buf, EQ_TEXT, &lib, xi, NULL, 4);
    assert_string_equal(buf, "d2theta/dt2 = -0.2*dtheta/dt + 0.5*(dtheta/dt)^2 - 4.903*sin(theta)\n"
                             "d2x_1/dt2 = 2*x_1*dx_1/dt\n");
    equation_format(buf, sizeof buf, EQ_LATEX, &lib, xi, NULL, 4);
    assert_string_equal(buf, "\\begin{aligned}\n"
                             "\\ddot{\\theta} &= -0.2 \\dot{\\theta} + 0.5 \\dot{\\theta}^{2} - 4.903 \\sin(\\theta) \\\\\n"
                             "\\ddot{x}_{1} &= 2 x_{1} \\dot{x}_{1}\n"
                             "\\end{aligned}\n");
    char v[64];
    static const char *const vel[] = {"vel"};
    Library l3;
    LibrarySpec s1 = library_spec_default(1, 1);
    if (library_init_named(&l3, &s1, vel, &st)) fail_msg("%s", st.msg);
    library_var_name(&l3, 0, NAME_LATEX, v, sizeof v);
    assert_string_equal(v, "\\mathit{vel}");
    library_var_name(&l3, 0, NAME_KEY, v, sizeof v);
    assert_string_equal(v, "z1");
    /* a velocity in a first-order library is refused, named as the user wrote it */
    strcpy(s1.include[0], "dvel/dt");
    s1.n_include = 1;
    library_free(&l3);
    assert_int_equal(library_init_named(&l3, &s1, vel, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "velocities (dvel/dt) exist only in a second-order library"));
    free(xi);
    library_free(&lib);
}

/* Which strings can name variables (library.h): each refusal says why and which. */
static void test_var_names_check(void **state) {
    (void)state;
    static const struct {
        const char *names[3];
        int k, bad;
        const char *why;
    } cases[] = {
        {{"x", "v", "angle_2"}, 3, -1, NULL},
        {{"z1", "v"}, 2, -1, NULL},   /* its own z name is harmless */
        {{"x pos", "v"}, 2, 0, "'x pos' is not a plain name"},
        {{"x", ""}, 2, 1, "'' is not a plain name"},
        {{"_x"}, 1, 0, "'_x' is not a plain name"},
        {{"x", "dt"}, 2, 1, "'dt' is a word of the term names"},
        {{"t"}, 1, 0, "'t' is a word of the term names"},
        {{"z2", "z1"}, 2, 0, "'z2' reads as another variable's z name (it names variable 1, z1)"},
        {{"dz1"}, 1, 0, "'dz1' reads as another variable's z name"},
        {{"v", "dv"}, 2, 1, "'dv' reads as the derivative of 'v'"},
        {{"dv", "v"}, 2, 0, "'dv' reads as the derivative of 'v'"},
        {{"a", "b", "a"}, 3, 2, "'a' names two variables"},
        {{"abcdefghijklmnopqrstuvwxy"}, 1, 0, "is not a plain name"},   /* 25 characters */
        {{"abcdefghijklmnopqrstuvwx"}, 1, -1, NULL},                    /* 24 */
    };
    for (size_t i = 0; i < sizeof cases / sizeof *cases; i++) {
        Status st;
        int bad = 99;
        int rc = library_var_names_check(cases[i].names, cases[i].k, &bad, &st);
        assert_int_equal(bad, cases[i].bad);
        assert_int_equal(rc, cases[i].why ? ST_INPUT : 0);
        if (cases[i].why && !strstr(st.msg, cases[i].why)) fail_msg("case %zu: '%s' lacks '%s'", i, st.msg, cases[i].why);
    }
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_text_lorenz),
        cmocka_unit_test(test_text_pendulum),
        cmocka_unit_test(test_latex_lorenz),
        cmocka_unit_test(test_json_roundtrip),
        cmocka_unit_test(test_json_version1),
        cmocka_unit_test(test_json_variables),
        cmocka_unit_test(test_named_variables),
        cmocka_unit_test(test_named_second_order),
        cmocka_unit_test(test_var_names_check),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
