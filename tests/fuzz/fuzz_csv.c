/* tests/fuzz/fuzz_csv.c: CSV, as a recording (io/data/series.h) and as a table in both modes of the
 * one CSV reader (io/data/csv.h: strict, and lenient as log.csv is read). */
#include "io/data/csv.h"
#include "io/data/series.h"
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    const char *path = fuzz_file("rec.csv", data, size);
    Series s;
    Status st;
    if (series_read_csv(path, &s, &st) == 0) series_free(&s);
    char *text = fuzz_text(data, size);
    static const char *const words[] = {"train", "refine", "warmup", NULL};
    for (int lenient = 0; lenient < 2; lenient++) {
        CsvOptions o = {lenient ? CSV_HEADER_REQUIRED : CSV_HEADER_AUTO, lenient, lenient ? words : NULL, lenient,
                        !lenient, 0};
        CsvTable t;
        if (csv_parse_table("fuzz.csv", text, &o, &t, &st) == 0 && t.names) (void)csv_col(&t, "epoch");
        csv_table_free(&t);
    }
    free(text);
    return 0;
}
