/* nn/arena.c: the per-step arena (bump allocation in chained blocks, merged on reset). */
#include "nn/arena.h"

#include <string.h>

#include "nn/core.h"

struct ArenaBlock {
    ArenaBlock *next;   /* older block */
    size_t cap, used;   /* bytes in data[] */
    unsigned char *data;
};

static ArenaBlock *block_new(Arena *a, size_t cap) {
    ArenaBlock *b = nn_alloc(sizeof *b);
    b->next = NULL;
    b->cap = cap;
    b->used = 0;
    b->data = nn_alloc(cap);
    a->sys_allocs += 2;
    return b;
}

void arena_init(Arena *a, size_t initial_bytes) {
    memset(a, 0, sizeof *a);
    a->head = block_new(a, initial_bytes < 4096 ? 4096 : initial_bytes);
}

void *arena_alloc(Arena *a, size_t bytes) {
    size_t need = (bytes + 63) & ~(size_t)63;
    ArenaBlock *b = a->head;
    if (b->used + need > b->cap) {
        size_t cap = b->cap * 2 > need ? b->cap * 2 : need;
        ArenaBlock *nb = block_new(a, cap);
        nb->next = b;
        a->head = b = nb;
    }
    void *p = b->data + b->used;
    b->used += need;
    a->used += need;
    if (a->used > a->high) a->high = a->used;
    return p;
}

float *arena_floats(Arena *a, long n) { return arena_alloc(a, (size_t)n * sizeof(float)); }

float *arena_zeros(Arena *a, long n) {
    float *p = arena_floats(a, n);
    memset(p, 0, (size_t)n * sizeof(float));
    return p;
}

static void free_blocks(ArenaBlock *b) {
    while (b) {
        ArenaBlock *next = b->next;
        nn_free(b->data);
        nn_free(b);
        b = next;
    }
}

void arena_reset(Arena *a) {
    if (a->head->next) { /* grew during this step: replace every block by one of the high-water size */
        size_t cap = a->high + 4096;
        free_blocks(a->head);
        a->head = block_new(a, cap);
    }
    a->head->used = 0;
    a->used = 0;
}

void arena_free(Arena *a) {
    free_blocks(a->head);
    a->head = NULL;
}
