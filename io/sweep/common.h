/* io/sweep/common.h: what the sweep's files (sweep.c, members.c, slurm.c, summary.c) share; not part
 * of the sweep's interface (io/sweep/sweep.h), and included by nothing outside io/sweep/. */
#ifndef IO_SWEEP_COMMON_H
#define IO_SWEEP_COMMON_H

#include <stddef.h>

#include <cjson/cJSON.h>

#include "io/sweep/sweep.h"
#include "nn/core.h"

/* A growing text buffer; on allocation failure it stops growing and marks itself failed. */
typedef struct {
    char *b;
    size_t n, cap;
    int failed;
} TextBuf;

void text_add(TextBuf *b, const char *s, size_t len);
void text_puts(TextBuf *b, const char *s);
void text_printf(TextBuf *b, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
/* Take the text (NULL when memory ran out). */
char *text_take(TextBuf *b);

/* The summary page's table of each term across members (io/sweep/inclusion.c). */
void sweep_inclusion_html(TextBuf *b, const SweepInclusion *inc);

/* strdup (NULL when memory ran out). */
char *sweep_strdup(const char *s);
/* Whole file as text; NULL when it cannot be read, with the reason (naming the file) in why. */
char *sweep_read_text(const char *path, size_t max, char *why, size_t n_why);
/* Exclusive lock on <dir>/<name> (created if needed), held until sweep_unlock. Waits for it. */
int sweep_lock(const char *dir, const char *name, int *fd_out, Status *st);
void sweep_unlock(int fd);

/* 1 when s is in the NULL-terminated list. */
int sweep_in_list(const char *s, const char *const *list);
/* Free n strings and the array (NULL is fine). */
void sweep_free_strings(char **v, int n);
/* Duplicate member names in an object (cJSON keeps them): the first repeated name, or NULL. */
const char *sweep_duplicate_name(const cJSON *obj);

/* The "slurm" object of a sweep file into sw->slurm (slurm.c). */
int sweep_parse_slurm(Sweep *sw, const cJSON *s, Status *st);
/* The last row of a member's log.csv (members.c); see sweep_read_log. A missing log gives epoch 0
 * and no error; a malformed one gives the same with the reason in st. */
int sweep_log_read(const char *run_dir, SweepLog *log, Status *st);

#endif
