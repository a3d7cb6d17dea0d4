/* tests/fuzz/fuzz_config.c: a run config (JSON) with --set overrides, then the checks across keys.
 * Input: override lines "KEY.PATH=VALUE" up to a line "----", then the JSON text; or JSON alone. */
#include "io/run/config.h"
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    char *text = fuzz_text(data, size);
    char *json = text, *sep = strstr(text, "\n----\n");
    if (sep) {
        *sep = 0;
        json = sep + 6;
    }
    static Config c;
    Status st;
    config_defaults(&c);
    if (config_parse(&c, json, "fuzz.json", fuzz_dir(), &st) == 0) {
        if (sep) {
            for (char *line = text, *next; line && *line; line = next) {
                next = strchr(line, '\n');
                if (next) *next++ = 0;
                if (config_set(&c, line, &st)) break;
            }
        }
        (void)config_validate(&c, &st);
        char *out = config_to_json(&c); /* and what a run folder would store */
        free(out);
    }
    free(text);
    return 0;
}
