/* io/fs/clock.h: the program's clock for elapsed times (progress, ETA, the seconds in log.csv).
 *
 * Monotonic: it never jumps when the wall clock is set, so differences of two readings are the
 * time that passed. The origin is arbitrary (not the date): use it only for differences. */
#ifndef IO_FS_CLOCK_H
#define IO_FS_CLOCK_H

/* Seconds on the monotonic clock (CLOCK_MONOTONIC), with nanosecond resolution. */
double clock_seconds(void);

#endif
