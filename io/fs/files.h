/* io/fs/files.h: folders and whole files, the one place the program creates folders and reads a file
 * into memory.
 *
 *     if (fs_make_dirs("runs/pendulum/checkpoints", st)) return st->code;   // like mkdir -p
 *     char *text; size_t n;
 *     if (fs_read_file(path, 16u << 20, &text, &n, st)) return st->code;    // at most 16 MiB
 *     ... text[n] == 0 ...
 *     free(text);
 *
 * Messages start with the path at fault ("runs/x/log.csv: cannot open: No such file or directory"),
 * so a caller can hand them on as they are. */
#ifndef IO_FS_FILES_H
#define IO_FS_FILES_H

#include <stddef.h>

#include "nn/core.h"

/* Create the folder path and every missing folder above it (mode 0777 before the umask). A folder
 * that exists already is fine. Returns 0, ST_INPUT for a path longer than 4095 bytes or when a
 * file (not a folder) of the name of the path or of one of its folders is in the way, naming it, or
 * ST_RUNTIME naming the folder that could not be made. */
int fs_make_dirs(const char *path, Status *st);

/* Read the whole of a regular file into a malloc'ed buffer with a NUL after its last byte (*out,
 * *len bytes without the NUL; len may be NULL). Refused with ST_INPUT naming the file: a file that
 * cannot be opened ("cannot open: <why>"), one that is not a regular file (a folder, a device, a
 * pipe: never waited on), one larger than max bytes, a read error. Out of memory is ST_RUNTIME.
 * On failure *out is NULL. */
int fs_read_file(const char *path, size_t max, char **out, size_t *len, Status *st);
/* The same with messages that start with name instead of the path, or (name NULL) with the reason
 * alone ("cannot open: No such file or directory"), for a caller that says what the file was. */
int fs_read_file_as(const char *path, const char *name, size_t max, char **out, size_t *len, Status *st);

/* 1 when something (file, folder, ...) exists at path. */
int fs_exists(const char *path);
/* 1 when path is a folder (or a link to one). */
int fs_is_dir(const char *path);

/* Remove a folder framelaw made and everything in it (links are removed, not followed); a path
 * that does not exist is fine. ST_RUNTIME naming what could not be removed. */
int fs_remove_tree(const char *path, Status *st);

#endif
