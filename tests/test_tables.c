/* tests/test_tables.c: every name table indexed by an enum has an entry for every value. Tables
 * written with designated initializers ([OP_ADD] = "add") keep their size when an entry in the
 * middle is left out (it compiles as NULL), so a size check alone cannot catch it: this walks each
 * table and asks for a non-empty, distinct name (and a function where one is needed). */
#include "tests/testutil.h"

#include "io/data/frames.h"
#include "io/data/images.h"
#include "io/run/config.h"
#include "nn/act.h"
#include "nn/tape.h"
#include "sparse/integrate.h"
#include "sparse/stencil.h"

static void check_names(const char *table, const char *const *names, int n) {
    for (int i = 0; i < n; i++) {
        if (!names[i] || !names[i][0]) fail_msg("%s: entry %d has no name", table, i);
        for (int j = 0; j < i; j++)
            if (!strcmp(names[i], names[j])) fail_msg("%s: entries %d and %d are both '%s'", table, j, i, names[i]);
    }
}

static void test_every_entry_named(void **state) {
    (void)state;
    check_names("op_names", op_names, OP_COUNT);
    check_names("ode_method_names", ode_method_names, ODE_METHOD_COUNT);
    check_names("ode_stop_names", ode_stop_names, ODE_STOP_COUNT);
    check_names("stencil_kind_names", stencil_kind_names, STENCIL_KIND_COUNT);
    check_names("gray_std_names", gray_std_names, GRAY_COUNT);
    check_names("scale_mode_names", scale_mode_names, SCALE_COUNT);
    check_names("deriv_method_names", deriv_method_names, DERIV_METHOD_COUNT);
    check_names("model_init_names", model_init_names, INIT_COUNT);
    check_names("latent_derivs_names", latent_derivs_names, DERIVS_COUNT);
    check_names("frames_map_names", frames_map_names, MAP_COUNT);
    check_names("lr_schedule_names", lr_schedule_names, SCHED_COUNT);
    check_names("thresh_measure_names", thresh_measure_names, MEASURE_COUNT);
    check_names("thresh_select_names", thresh_select_names, SELECT_COUNT);
    const char *act[ACT_COUNT];
    for (int i = 0; i < ACT_COUNT; i++) {
        act[i] = act_table[i].name;
        if (!act_table[i].fn) fail_msg("act_table: %s has no function", act[i] ? act[i] : "(unnamed)");
    }
    check_names("act_table", act, ACT_COUNT);
    /* names map back to their values */
    for (int i = 0; i < ACT_COUNT; i++) assert_int_equal(act_from_name(act[i]), i);
    for (int i = 0; i < STENCIL_KIND_COUNT; i++) assert_int_equal(stencil_kind_from_name(stencil_kind_names[i]), i);
    for (int i = 0; i < ODE_METHOD_COUNT; i++) assert_int_equal(ode_method_from_name(ode_method_names[i]), i);
    for (int i = 0; i < GRAY_COUNT; i++) assert_int_equal(gray_std_from_name(gray_std_names[i]), i);
    for (int i = 0; i < SCALE_COUNT; i++) assert_int_equal(scale_mode_from_name(scale_mode_names[i]), i);
}

int main(void) {
    const struct CMUnitTest tests[] = {cmocka_unit_test(test_every_entry_named)};
    return cmocka_run_group_tests(tests, NULL, NULL);
}
