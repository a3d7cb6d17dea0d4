/* io/fs/term.h: the one progress line a long command redraws on a terminal.
 *
 *     char line[256];
 *     snprintf(line, sizeof line, "epoch %ld/%ld  ETA %s  loss %.3e ...", ...);
 *     term_progress(stderr, tty, line);   // tty: "\r", erase, the line cut to the width; else line + "\n"
 *
 * A line wider than the terminal wraps, and "\r" then redraws only its last row: the rows above it
 * pile up. So on a terminal the line is cut to one column less than its width (a character in the
 * last column leaves some terminals at the start of the next row). Write the line's fields most
 * important first, separated by two spaces: it is cut at the last such separator that fits. */
#ifndef IO_FS_TERM_H
#define IO_FS_TERM_H

#include <stdio.h>

/* Columns of the terminal on fd: its size (TIOCGWINSZ) when fd is a terminal that reports one, else
 * $COLUMNS when it is a number from 1 to 10000, else 80. */
int term_columns(int fd);

/* Cut line in place to at most width - 1 bytes (width >= 2; ASCII): at the last "  " that leaves it
 * short enough, else at the last space, else hard. Trailing spaces are dropped. */
void term_fit(char *line, int width);

/* On a terminal (tty != 0): carriage return, erase the row, the line cut to term_columns(f's fd),
 * no newline, flushed. Otherwise the whole line and a newline (a log file has no width). */
void term_progress(FILE *f, int tty, const char *line);

#endif
