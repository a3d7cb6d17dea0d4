/* io/run/config_keys.h: inside io/run only, what config.c and config_keys.c share: the key table
 * (one row per key: path, type, default as JSON text, range or choices, the Config field, meaning)
 * and its lookups. The public interface is config.h. */
#ifndef IO_RUN_CONFIG_KEYS_H
#define IO_RUN_CONFIG_KEYS_H

#include <math.h>
#include <stddef.h>

#include "io/run/config.h"

typedef enum {
    T_NUM,          /* double */
    T_INT,          /* int */
    T_LONG,         /* long */
    T_U64,          /* uint64_t */
    T_BOOL,         /* int, 0 / 1 */
    T_CHOICE,       /* an enum (int-sized): a string, one of `names`, stored as its value */
    T_PATH,         /* char[CFG_PATH_MAX] */
    T_INTS,         /* int[] with a count field */
    T_INTS_NULL,    /* int[] with a count field; null gives count -1 */
    T_STRS,         /* char[][CFG_NAME_MAX] with a count field */
    T_CROP,         /* int[4] */
    T_SIZE,         /* int[2] */
    T_COUNT
} KeyType;

enum { LO_OPEN = 1, HI_OPEN = 2 };   /* numbers: exclusive bounds */
#define NOMAX INFINITY               /* integers: no bound but the type's */
#define INT_EXACT 9007199254740992.0 /* 2^53: every integer up to here is exact in a double */

typedef struct {
    const char *path;       /* "data.derivative.window" */
    KeyType type;
    const char *def;        /* default as JSON text */
    const char *doc_def;    /* default as shown in the docs when def does not say it (or NULL) */
    double min, max;        /* numbers, integers and list elements */
    int flags;              /* LO_OPEN, HI_OPEN */
    int min_n;              /* lists: fewest entries */
    const char *choices;    /* integers: "8|16" (or NULL) */
    const char *const *names;   /* T_CHOICE: the allowed strings, in the order the docs list them */
    const int *values;      /* T_CHOICE: the enum value of each name, or NULL when it is its index */
    int n_names;
    const char *shape;      /* crop / size: "[x, y, width, height]" */
    size_t off, size;       /* the field in Config */
    size_t off_n;           /* lists: the int count field */
    const char *meaning;
} KeyDef;

extern const char *const config_type_names[];   /* (T_COUNT) "number", "integer", ... for docs */
extern const KeyDef config_keys[];              /* (config_n_keys) */
extern const int config_n_keys;

/* T_CHOICE: the index in k->names of enum value v, or -1. */
int config_choice_index(const KeyDef *k, int v);
/* T_CHOICE: the enum value of names[i]. */
int config_choice_value(const KeyDef *k, int i);

/* The row of a key path, or NULL. */
const KeyDef *config_find_key(const char *path);
/* 1 when path is a section: some key path starts with "path.". */
int config_is_section(const char *path);
/* 1 when the key may change on resume (config_resume_safe_keys). */
int config_is_resume_safe(const char *path);
/* The key's rule as text ("an integer from 1 to 100", "one of a, b or c"); b (n). */
void config_key_rule(char *b, size_t n, const KeyDef *k);
/* The largest value an integer key of type t holds exactly (INT_MAX for an int, 2^53 else). */
double config_int_limit(KeyType t);
/* The rule of an integer in [lo, hi] (or one of choices "a|b"); b (n). */
void config_int_rule(char *b, size_t n, double lo, double hi, const char *choices);

#endif
