/* nn/arena.h: the per-step arena. Bump allocation, reset after each batch.
 *
 * The first steps may grow the arena by chaining blocks; a reset that finds more than one block
 * replaces them by one block of the high-water size, so from the second step on a training step
 * allocates nothing from the system. `arena_sys_allocs` counts system allocations so a test can
 * check exactly that. */
#ifndef NN_ARENA_H
#define NN_ARENA_H

#include <stddef.h>

typedef struct ArenaBlock ArenaBlock;

typedef struct {
    ArenaBlock *head;   /* current block (newest first) */
    size_t used;        /* bytes in use across blocks since the last reset */
    size_t high;        /* high-water mark of `used` */
    long sys_allocs;    /* system allocations so far */
} Arena;

void arena_init(Arena *a, size_t initial_bytes);
void *arena_alloc(Arena *a, size_t bytes);          /* 64-byte aligned, uninitialised */
float *arena_floats(Arena *a, long n);              /* uninitialised */
float *arena_zeros(Arena *a, long n);               /* zeroed */
void arena_reset(Arena *a);
void arena_free(Arena *a);

#endif
