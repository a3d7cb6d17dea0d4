/* tests/fuzz/fuzz_sweep.c: a sweep file (io/sweep/sweep.h), expanded into its members; every member's
 * config is resolved and labelled. Its base config, base.json, is a fixed small config beside it. */
#include "io/sweep/sweep.h"
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    static int ready;
    if (!ready) {
        static const char base[] = "{\"data\": {\"frames\": \"frames\"}, \"model\": {\"latent\": 1}}\n";
        fuzz_file("base.json", base, sizeof base - 1);
        ready = 1;
    }
    const char *path = fuzz_file("grid.json", data, size);
    static Sweep sw;
    static Config c;
    Status st;
    if (sweep_load(&sw, path, &st) == 0) {
        char label[512];
        for (int i = 0; i < sw.n_members && i < 64; i++) {
            (void)sweep_member_label(&sw, i, label, sizeof label);
            (void)sweep_member_config(&sw, i, &c, &st);
        }
    }
    sweep_free(&sw);
    return 0;
}
