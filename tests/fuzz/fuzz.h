/* tests/fuzz/fuzz.h: what every fuzz target shares (docs/reliability.md, `make fuzz`).
 *
 * Each tests/fuzz/fuzz_<name>.c defines LLVMFuzzerTestOneInput for one parser and is built with
 * clang's libFuzzer, AddressSanitizer and UBSan against a library compiled with -DFRAMELAW_FUZZ
 * (which skips the checkpoint and frame store CRCs, so mutated files reach the fields behind them).
 * A target must never crash, leak, read out of bounds or hit undefined behaviour, whatever the bytes:
 * bad input is a Status with a message, nothing else. Parsers that read files get the input as a
 * file in a private temporary folder, removed at exit. */
#ifndef FUZZ_H
#define FUZZ_H

#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static char fuzz_dir_[256];

static inline void fuzz_cleanup_(void) {
    if (!fuzz_dir_[0]) return;
    char cmd[300];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", fuzz_dir_);
    if (system(cmd) != 0) fprintf(stderr, "fuzz: could not remove %s\n", fuzz_dir_);
}

/* The target's private folder (made on first use). */
static inline const char *fuzz_dir(void) {
    if (!fuzz_dir_[0]) {
        const char *base = getenv("TMPDIR");
        snprintf(fuzz_dir_, sizeof fuzz_dir_, "%s/framelaw-fuzz-XXXXXX", base && *base ? base : "/tmp");
        if (!mkdtemp(fuzz_dir_)) {
            perror("fuzz: mkdtemp");
            abort();
        }
        atexit(fuzz_cleanup_);
    }
    return fuzz_dir_;
}

/* Write bytes to <private folder>/name; returns the path (a static buffer per name slot). */
static inline const char *fuzz_file(const char *name, const void *data, size_t size) {
    static char path[8][400];
    static int next;
    char *p = path[next++ % 8];
    snprintf(p, 400, "%s/%s", fuzz_dir(), name);
    FILE *f = fopen(p, "wb");
    if (!f || (size && fwrite(data, 1, size, f) != size) || fclose(f) != 0) {
        perror(p);
        abort();
    }
    return p;
}

/* The input as a NUL-terminated string (malloc'ed). */
static inline char *fuzz_text(const uint8_t *data, size_t size) {
    char *t = malloc(size + 1);
    if (!t) abort();
    if (size) memcpy(t, data, size);
    t[size] = 0;
    return t;
}

/* Keep a value the target computed from what it read (so that the reads are not optimised away). */
static volatile double fuzz_sink_;
static inline void fuzz_use(double x) { fuzz_sink_ = x; }

#endif
