/* io/fs/clock.c: see clock.h. */
#include "io/fs/clock.h"

#include <time.h>

double clock_seconds(void) {
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}
