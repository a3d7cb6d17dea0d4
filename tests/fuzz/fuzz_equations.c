/* tests/fuzz/fuzz_equations.c: equations.json read back into a library and its coefficients
 * (sparse/equation.h); what reads back is printed again in every style. */
#include "sparse/equation.h"
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    char *text = fuzz_text(data, size);
    Library lib;
    Coef coef;
    Status st;
    if (equation_from_json(text, &lib, &coef, &st) == 0) {
        FILE *null = fopen("/dev/null", "w");
        if (null) {
            (void)equation_fprint(null, EQ_TEXT, &lib, coef.xi, coef.mask, 4);
            (void)equation_fprint(null, EQ_LATEX, &lib, coef.xi, coef.mask, 4);
            fclose(null);
        }
        coef_free(&coef);
        library_free(&lib);
    }
    free(text);
    return 0;
}
