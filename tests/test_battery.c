/* tests/test_battery.c: the battery scenarios of demo/battery.h: their physics against closed forms
 * and an outside integration, their cameras, and `framelaw demo` on them.
 *
 * Sources: the damped linear oscillator's solution (Thornton and Marion, Classical Dynamics of
 * Particles and Systems, 5th ed., 2004, sec. 3.5); the logistic law's solution
 * A(t) = K / (1 + (K / A0 - 1) exp(-r t)) (Verhulst's equation, common practice); the van der Pol
 * oscillator integrated by SciPy (tests/reference/make_battery_truth.py). RK4 with 20 steps per
 * frame interval: its global error over these spans is below 1e-7 of the amplitude (error of order
 * (w h)^4 w t / 120 per unit amplitude; common practice), so 1e-6 is the tolerance. */
#include <cjson/cJSON.h>

#include "demo/battery.h"
#include "demo/lantern.h"
#include "tests/testutil.h"

static double *simulate(const BatteryScenario *b, const BatteryPhysics *p, const double *y0, int nf) {
    double *out = malloc(sizeof(double) * (size_t)nf * (b->n_state + 1));
    Status st;
    assert_int_equal(battery_simulate(b, p, y0, nf, DEMO_SUBSTEPS, out, &st), 0);
    return out;
}

static void test_spring_and_puck_closed_form(void **state) {
    (void)state;
    BatteryPhysics p = battery_physics_default();
    const BatteryScenario *b = battery_find("spring");
    assert_non_null(b);
    double y0[2] = {3.0, -5.0};
    int nf = 200;
    double *out = simulate(b, &p, y0, nf);
    double w0 = p.w0, s = p.zeta * w0, wd = w0 * sqrt(1 - p.zeta * p.zeta);
    double A = y0[0], B = (y0[1] + s * y0[0]) / wd;
    for (int k = 0; k < nf; k++) {
        double t = out[k * 3], y = exp(-s * t) * (A * cos(wd * t) + B * sin(wd * t));
        assert_close(t, k / 25.0, 1e-12, 0);
        assert_close(out[k * 3 + 1], y, 1e-6, 0);
    }
    free(out);
    const BatteryScenario *q = battery_find("puck");
    double u0[4] = {2.0, 1.0, -1.5, 4.0};
    out = simulate(q, &p, u0, 192);
    for (int ax = 0; ax < 2; ax++) {
        double wn = 2 * M_PI * (ax ? p.f2 : p.f1), zt = ax ? p.z2 : p.z1, sg = zt * wn, wdd = wn * sqrt(1 - zt * zt);
        double a = u0[2 * ax], bb = (u0[2 * ax + 1] + sg * a) / wdd;
        for (int k = 0; k < 192; k++) {
            double t = out[k * 5];
            assert_close(out[k * 5 + 1 + 2 * ax], exp(-sg * t) * (a * cos(wdd * t) + bb * sin(wdd * t)), 1e-6, 0);
        }
    }
    free(out);
}

static void test_colony_closed_form(void **state) {
    (void)state;
    BatteryPhysics p = battery_physics_default();
    const BatteryScenario *b = battery_find("colony");
    for (int i = 0; i < 2; i++) {
        double a0 = i ? 1.8 : 0.05;
        double *out = simulate(b, &p, &a0, 80);
        for (int k = 0; k < 80; k++) {
            double t = out[k * 2];
            assert_close(out[k * 2 + 1], p.K / (1 + (p.K / a0 - 1) * exp(-p.r * t)), 1e-9, 0);
        }
        free(out);
    }
}

static void test_pulse_against_scipy(void **state) {
    (void)state;
    char *txt = test_slurp("tests/reference/battery_pulse_truth.txt");
    if (!txt) fail_msg("tests/reference/battery_pulse_truth.txt not found (run from the project root)");
    BatteryPhysics p = battery_physics_default();
    const BatteryScenario *b = battery_find("pulse");
    double y0[2] = {2.5, 0};
    double *out = simulate(b, &p, y0, 120);
    char *line = strchr(txt, '\n') + 1;
    for (int k = 0; k < 120; k++) {
        double t, x, v;
        assert_int_equal(sscanf(line, "%lf %lf %lf", &t, &x, &v), 3);
        assert_close(out[k * 3], t, 1e-12, 0);
        assert_close(out[k * 3 + 1], x, 1e-6, 0);
        assert_close(out[k * 3 + 2], v, 1e-5, 0); /* x' is w times larger */
        line = strchr(line, '\n') + 1;
    }
    free(out);
    free(txt);
}

/* Cameras: the same state and noise seed give the same frame, another seed another one; frames
 * without noise have a background that is not flat (the corner block, away from every object,
 * holds several grey levels) and change with the state. */
static void test_cameras(void **state) {
    (void)state;
    BatteryPhysics p = battery_physics_default();
    for (int i = 0; i < battery_count; i++) {
        const BatteryScenario *b = &battery_scenarios[i];
        int W = b->def_size;
        uint8_t *a = malloc((size_t)W * W), *c = malloc((size_t)W * W), *d = malloc((size_t)W * W);
        double y0[2 * BATTERY_MAX_STATE], y1[BATTERY_MAX_STATE]; /* two initial states */
        Rng r;
        rng_seed(&r, 3);
        battery_initial_states(b, &p, 2, &r, y0);
        memcpy(y1, y0 + b->n_state, sizeof(double) * (size_t)b->n_state);
        Rng n1, n2, n3;
        rng_seed(&n1, 7), rng_seed(&n2, 7), rng_seed(&n3, 8);
        battery_render(b, W, 0.02, y0, &n1, a);
        battery_render(b, W, 0.02, y0, &n2, c);
        assert_memory_equal(a, c, (size_t)W * W);
        battery_render(b, W, 0.02, y0, &n3, c);
        assert_true(memcmp(a, c, (size_t)W * W) != 0);
        battery_render(b, W, 0.0, y0, NULL, a);
        battery_render(b, W, 0.0, y1, NULL, d);
        assert_true(memcmp(a, d, (size_t)W * W) != 0);
        int seen[256] = {0}, levels = 0;
        for (int y = 0; y < W / 5; y++)
            for (int x = 0; x < W / 5; x++) levels += !seen[a[y * W + x]]++;
        if (levels < 3) fail_msg("%s: the background's corner holds %d grey levels", b->name, levels);
        free(a), free(c), free(d);
    }
}

static void test_demo_command(void **state) {
    (void)state;
    char tmp[256], args[600], out[8192];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(args, sizeof args, "demo spring '%s/s' --recordings 2 --frames 30", tmp);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    char path[512];
    snprintf(path, sizeof path, "%s/s/demo.json", tmp);
    char *j = test_slurp(path);
    assert_non_null(j);
    assert_non_null(strstr(j, "\"scenario\": \"spring\""));
    assert_non_null(strstr(j, "\"model\": {\"order\": 2, \"latent\": 1}"));
    free(j);
    snprintf(path, sizeof path, "%s/s/rec01/frame000029.png", tmp);
    j = test_slurp(path);
    assert_non_null(j);
    free(j);
    snprintf(args, sizeof args, "demo puck '%s/p' --recordings 2000", tmp);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "at most"));
    snprintf(args, sizeof args, "demo spinner '%s/q'", tmp);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "colony"));
    test_rmtree(tmp);
}

/* Coefficient of the term named `name` in equation 0 of a law object of equations.json (its "terms"
 * and "equations"), 0 when inactive. */
static double law_coef(const cJSON *law, const char *name) {
    const cJSON *terms = cJSON_GetObjectItem(law, "terms"), *eq = cJSON_GetArrayItem(cJSON_GetObjectItem(law, "equations"), 0);
    const cJSON *coef = cJSON_GetObjectItem(eq, "coefficients"), *mask = cJSON_GetObjectItem(eq, "mask");
    for (int t = 0; t < cJSON_GetArraySize(terms); t++)
        if (!strcmp(cJSON_GetStringValue(cJSON_GetArrayItem(terms, t)), name))
            return cJSON_GetArrayItem(mask, t)->valueint ? cJSON_GetArrayItem(coef, t)->valuedouble : 0.0;
    fail_msg("no term %s", name);
    return 0;
}

/* `framelaw verify --law canonical` checks the law equations.txt prints first: the canonical law
 * when a sparser one was found (status "found"), else the learned one. A short spring run (seed 5
 * of this 12-epoch config learns z'' = c0 + k z + c z', whose constant the canonical form removes by
 * an offset) must report, for the law it names, the frequency and decay rate of that law's own
 * coefficients: a linear law z'' = k z + c z' (+ a constant) has the eigenvalues -c/2 +- i
 * sqrt(-k - c^2/4) (the damped linear oscillator, Thornton and Marion, Classical Dynamics of Particles
 * and Systems, 5th ed., 2004, sec. 3.5). A law with other terms is not linear and the check is
 * skipped with a message. */
static void test_verify_law(void **state) {
    (void)state;
    char tmp[256], args[1200], out[8192], path[600];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(args, sizeof args, "demo spring '%s/s' --recordings 3 --frames 60", tmp);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    snprintf(args, sizeof args, "train configs/battery/spring.json --quiet --set data.frames='%s/s' --set train.epochs=12 "
             "--set train.threads=1 --set train.seed=5 --set output='%s/run'", tmp, tmp);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    snprintf(args, sizeof args, "verify --law modal '%s/run'", tmp);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "--law: 'modal' is not one of learned, canonical"));
    snprintf(args, sizeof args, "verify --law=canonical '%s/run'", tmp);
    int rc = test_run_capture(args, out, sizeof out);
    assert_true(rc == 0 || rc == 1);
    snprintf(path, sizeof path, "%s/run/equations.json", tmp);
    char *txt = test_slurp(path);
    cJSON *eq = cJSON_Parse(txt);
    free(txt);
    snprintf(path, sizeof path, "%s/run/verify-canonical.json", tmp);
    txt = test_slurp(path);
    cJSON *ver = cJSON_Parse(txt);
    free(txt);
    assert_non_null(eq);
    assert_non_null(ver);
    const cJSON *canon = cJSON_GetObjectItem(eq, "canonical");
    int found = !strcmp(cJSON_GetStringValue(cJSON_GetObjectItem(canon, "status")), "found");
    const char *law = cJSON_GetStringValue(cJSON_GetObjectItem(ver, "law"));
    print_message("canonical form %s; verify checked: %s\n", found ? "found" : "not found", law);
    assert_true(found ? !strcmp(law, "canonical") : !strncmp(law, "learned (", 9));
    const cJSON *L = found ? canon : eq;
    const char *zn = found ? "u1" : "z1", *vn = found ? "du1/dt" : "dz1/dt";
    double k = law_coef(L, zn), c = law_coef(L, vn);
    int others = 0;
    const cJSON *terms = cJSON_GetObjectItem(L, "terms");
    const cJSON *mask = cJSON_GetObjectItem(cJSON_GetArrayItem(cJSON_GetObjectItem(L, "equations"), 0), "mask");
    for (int t = 0; t < cJSON_GetArraySize(terms); t++) {
        const char *nm = cJSON_GetStringValue(cJSON_GetArrayItem(terms, t));
        if (cJSON_GetArrayItem(mask, t)->valueint && strcmp(nm, "1") && strcmp(nm, zn) && strcmp(nm, vn)) others++;
    }
    const cJSON *res = cJSON_GetObjectItem(ver, "results");
    assert_int_equal(cJSON_GetArraySize(res), 2);
    if (others || k >= 0 || -k - c * c / 4 <= 0) {
        print_message("the law is not a damped linear oscillator (k %g, c %g, %d other terms): closed form skipped\n", k, c,
                      others);
    } else {
        double wd = sqrt(-k - c * c / 4), sigma = -c / 2;
        double v0 = cJSON_GetObjectItem(cJSON_GetArrayItem(res, 0), "value")->valuedouble;
        double v1 = cJSON_GetObjectItem(cJSON_GetArrayItem(res, 1), "value")->valuedouble;
        print_message("verify: w_d %.8g (closed form %.8g), decay rate %.8g (%.8g)\n", v0, wd, v1, sigma);
        assert_close(v0, wd, 0, 1e-4);
        assert_close(v1, sigma, 0, 1e-4);
    }
    cJSON_Delete(eq);
    cJSON_Delete(ver);
    test_rmtree(tmp);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_spring_and_puck_closed_form),
        cmocka_unit_test(test_colony_closed_form),
        cmocka_unit_test(test_pulse_against_scipy),
        cmocka_unit_test(test_cameras),
        cmocka_unit_test(test_demo_command),
        cmocka_unit_test(test_verify_law),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
