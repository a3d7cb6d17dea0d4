/* io/sweep/slurm.c: a sweep on a Slurm cluster: the "slurm" object of the sweep file, and the batch
 * script that runs the members as one job array (io/sweep/sweep.h, docs/sweeps.md). */
#include "io/sweep/sweep.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "io/fs/atomic_file.h"
#include "io/fs/files.h"
#include "io/sweep/common.h"

static const char *const SLURM_KEYS[] = {"partition", "time", "cpus_per_task", "memory", "max_running",
                                         "sbatch", "setup", NULL};

/* A string safe inside a batch script line: printable, no quotes that would end ours. */
static int script_safe(const char *s, int allow_space) {
    for (const unsigned char *p = (const unsigned char *)s; *p; p++)
        if (*p < 32 || *p == 127 || (!allow_space && *p == ' ')) return 0;
    return 1;
}

static int slurm_word(const cJSON *v, const char *key, char *out, size_t n, const char *file, Status *st) {
    if (cJSON_IsNumber(v) && !strcmp(key, "memory") && v->valuedouble >= 1 && v->valuedouble == floor(v->valuedouble)) {
        snprintf(out, n, "%.0f", v->valuedouble);   /* megabytes, as sbatch reads a bare number */
        return 0;
    }
    if (!cJSON_IsString(v) || !v->valuestring[0] || strlen(v->valuestring) >= n)
        return status_set(st, ST_INPUT, "%s: slurm.%s: must be a non-empty string of at most %zu characters", file, key, n - 1);
    for (const char *p = v->valuestring; *p; p++)
        if (!isalnum((unsigned char)*p) && !strchr(":-_.+", *p))
            return status_set(st, ST_INPUT, "%s: slurm.%s: '%s' has a character Slurm does not take here ('%c')", file,
                              key, v->valuestring, *p);
    snprintf(out, n, "%s", v->valuestring);
    return 0;
}

static int string_list(const cJSON *v, const char *key, char ***out, int *n_out, const char *file, Status *st) {
    if (!cJSON_IsArray(v)) return status_set(st, ST_INPUT, "%s: slurm.%s: must be a list of strings", file, key);
    int n = cJSON_GetArraySize(v), i = 0;
    char **list = calloc((size_t)(n ? n : 1), sizeof *list);
    if (!list) return status_set(st, ST_RUNTIME, "out of memory");
    for (const cJSON *e = v->child; e; e = e->next, i++) {
        if (!cJSON_IsString(e) || !script_safe(e->valuestring, 1)) {
            sweep_free_strings(list, i);
            return status_set(st, ST_INPUT, "%s: slurm.%s[%d]: must be a string on one line", file, key, i);
        }
        if (!(list[i] = sweep_strdup(e->valuestring))) {
            sweep_free_strings(list, i);
            return status_set(st, ST_RUNTIME, "out of memory");
        }
    }
    *out = list;
    *n_out = n;
    return 0;
}

int sweep_parse_slurm(Sweep *sw, const cJSON *s, Status *st) {
    const char *file = sw->path;
    if (!cJSON_IsObject(s)) return status_set(st, ST_INPUT, "%s: slurm: must be an object", file);
    const char *dup = sweep_duplicate_name(s);
    if (dup) return status_set(st, ST_INPUT, "%s: slurm.%s: given twice", file, dup);
    for (const cJSON *e = s->child; e; e = e->next) {
        const char *k = e->string;
        int rc = 0;
        if (!sweep_in_list(k, SLURM_KEYS))
            rc = status_set(st, ST_INPUT, "%s: slurm.%s: unknown key (known: partition, time, cpus_per_task, memory, "
                                          "max_running, sbatch, setup)", file, k);
        else if (!strcmp(k, "partition")) rc = slurm_word(e, k, sw->slurm.partition, sizeof sw->slurm.partition, file, st);
        else if (!strcmp(k, "time")) rc = slurm_word(e, k, sw->slurm.time, sizeof sw->slurm.time, file, st);
        else if (!strcmp(k, "memory")) rc = slurm_word(e, k, sw->slurm.memory, sizeof sw->slurm.memory, file, st);
        else if (!strcmp(k, "cpus_per_task") || !strcmp(k, "max_running")) {
            if (!cJSON_IsNumber(e) || e->valuedouble != floor(e->valuedouble) || e->valuedouble < 1 || e->valuedouble > 100000)
                rc = status_set(st, ST_INPUT, "%s: slurm.%s: must be an integer from 1 to 100000", file, k);
            else if (k[0] == 'c') sw->slurm.cpus_per_task = (int)e->valuedouble;
            else sw->slurm.max_running = (int)e->valuedouble;
        } else if (!strcmp(k, "sbatch")) {
            if (sw->slurm.sbatch) sweep_free_strings(sw->slurm.sbatch, sw->slurm.n_sbatch);
            rc = string_list(e, k, &sw->slurm.sbatch, &sw->slurm.n_sbatch, file, st);
        } else {
            rc = string_list(e, k, &sw->slurm.setup, &sw->slurm.n_setup, file, st);
        }
        if (rc) return rc;
    }
    return 0;
}

static void shell_quote(TextBuf *b, const char *s) {
    text_puts(b, "'");
    for (; *s; s++) {
        if (*s == '\'') text_puts(b, "'\\''");
        else text_add(b, s, 1);
    }
    text_puts(b, "'");
}

char *sweep_slurm_script(const Sweep *sw, const char *exe, const char *workdir, Status *st) {
    char out_abs[CFG_PATH_MAX * 2];
    snprintf(out_abs, sizeof out_abs, "%s%s%s", sw->output[0] == '/' ? "" : workdir, sw->output[0] == '/' ? "" : "/",
             sw->output);
    if (!script_safe(out_abs, 0) || !script_safe(workdir, 0) || strchr(out_abs, '%')) {
        status_set(st, ST_INPUT, "%s: the sweep folder %s (or the working folder %s) has a space, a %% or a control "
                                 "character, which #SBATCH lines cannot take", sw->path, out_abs, workdir);
        return NULL;
    }
    if (!script_safe(exe, 1) || !script_safe(sw->abs_path, 1)) {
        status_set(st, ST_INPUT, "%s: a control character in the program's or the sweep file's path", sw->path);
        return NULL;
    }
    TextBuf b = {0};
    text_puts(&b, "#!/bin/bash\n");
    text_printf(&b, "# framelaw sweep %s: %d members as one Slurm job array, one member per array task.\n", sw->stem,
               sw->n_members);
    text_printf(&b, "# Written by `framelaw sweep %s --slurm`; submit with: sbatch %s/sweep.sbatch\n", sw->path, out_abs);
    text_puts(&b, "# Task I runs member I (grid order, docs/sweeps.md); a finished member is skipped, an interrupted one\n"
                 "# resumes from its checkpoint, so the same script can be submitted again.\n");
    text_printf(&b, "#SBATCH --job-name=framelaw-%s\n", script_safe(sw->stem, 0) && !strchr(sw->stem, '%') ? sw->stem : "sweep");
    if (sw->slurm.max_running) text_printf(&b, "#SBATCH --array=0-%d%%%d\n", sw->n_members - 1, sw->slurm.max_running);
    else text_printf(&b, "#SBATCH --array=0-%d\n", sw->n_members - 1);
    if (sw->slurm.partition[0]) text_printf(&b, "#SBATCH --partition=%s\n", sw->slurm.partition);
    if (sw->slurm.time[0]) text_printf(&b, "#SBATCH --time=%s\n", sw->slurm.time);
    if (sw->slurm.cpus_per_task) text_printf(&b, "#SBATCH --cpus-per-task=%d\n", sw->slurm.cpus_per_task);
    if (sw->slurm.memory[0]) text_printf(&b, "#SBATCH --mem=%s\n", sw->slurm.memory);
    text_printf(&b, "#SBATCH --output=%s/slurm/%%A_%%a.out\n", out_abs);
    text_printf(&b, "#SBATCH --chdir=%s\n", workdir);
    for (int k = 0; k < sw->slurm.n_sbatch; k++) text_printf(&b, "#SBATCH %s\n", sw->slurm.sbatch[k]);
    text_puts(&b, "set -u\n");
    for (int k = 0; k < sw->slurm.n_setup; k++) text_printf(&b, "%s\n", sw->slurm.setup[k]);
    text_puts(&b, "exec ");
    shell_quote(&b, exe);
    text_puts(&b, " sweep ");
    shell_quote(&b, sw->abs_path);
    text_puts(&b, " --member \"$SLURM_ARRAY_TASK_ID\"\n");
    char *s = text_take(&b);
    if (!s) status_set(st, ST_RUNTIME, "out of memory");
    return s;
}

int sweep_write_slurm(const Sweep *sw, const char *exe, const char *workdir, char *path_out, size_t n, Status *st) {
    char *s = sweep_slurm_script(sw, exe, workdir, st);
    if (!s) return st->code;
    char logs[CFG_PATH_MAX + 16];
    snprintf(logs, sizeof logs, "%s/slurm", sw->output);
    snprintf(path_out, n, "%s/sweep.sbatch", sw->output);
    int rc = fs_make_dirs(logs, st);
    if (!rc) rc = atomic_write_bytes(path_out, s, strlen(s), st);
    if (!rc && chmod(path_out, 0755) != 0) rc = status_set(st, ST_RUNTIME, "%s: chmod: %s", path_out, strerror(errno));
    free(s);
    return rc;
}
