/* tests/fuzz/fuzz_runlog.c: a run's log.csv read back (io/run/runlog.h). */
#include "io/run/runlog.h"
#include "tests/fuzz/fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    fuzz_file("log.csv", data, size);
    RunLog log;
    Status st;
    if (runlog_read(fuzz_dir(), &log, &st) == 0) runlog_free(&log);
    return 0;
}
