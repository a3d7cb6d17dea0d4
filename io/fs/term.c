/* io/fs/term.c: see term.h. */
#include "io/fs/term.h"

#include <stdlib.h>
#include <string.h>
#include <sys/ioctl.h>
#include <unistd.h>

int term_columns(int fd) {
    struct winsize ws;
    if (isatty(fd) && ioctl(fd, TIOCGWINSZ, &ws) == 0 && ws.ws_col > 0) return ws.ws_col;
    const char *c = getenv("COLUMNS");
    if (c && *c) {
        char *e;
        long v = strtol(c, &e, 10);
        if (!*e && v >= 1 && v <= 10000) return (int)v;
    }
    return 80;
}

void term_fit(char *line, int width) {
    size_t max = width > 1 ? (size_t)width - 1 : 1, n = strlen(line);
    if (n > max) {
        size_t cut = 0;
        for (size_t i = 1; i + 1 < n && i <= max; i++) /* the last "  " whose text before it fits */
            if (line[i] == ' ' && line[i + 1] == ' ') cut = i;
        if (!cut)
            for (size_t i = 1; i < n && i <= max; i++)
                if (line[i] == ' ') cut = i;
        line[cut ? cut : max] = 0;
        n = strlen(line);
    }
    while (n > 0 && line[n - 1] == ' ') line[--n] = 0;
}

void term_progress(FILE *f, int tty, const char *line) {
    if (!tty) {
        fprintf(f, "%s\n", line);
        return;
    }
    char buf[1024];
    snprintf(buf, sizeof buf, "%s", line);
    term_fit(buf, term_columns(fileno(f)));
    fprintf(f, "\r\033[K%s", buf);
    fflush(f);
}
