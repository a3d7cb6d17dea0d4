/* tests/test_cli.c: the manners every command shares, run as a user would (the binary from `make
 * test`): "--" ends the options, --help has the same blocks everywhere, a run's output that is a
 * file is bad input, results go to stdout. Exit status 2 for bad usage or bad input (common practice
 * for command-line tools; POSIX.1-2017, Base Definitions 12.2, Utility Syntax Guidelines, guideline
 * 10: "The first -- argument that is not an option-argument should be accepted as a delimiter
 * indicating the end of options. Any following arguments should be treated as operands, even if they
 * begin with the '-' character."). */
#define _XOPEN_SOURCE 700 /* posix_openpt, grantpt, unlockpt, ptsname */
#include <errno.h>
#include <fcntl.h>
#include <sys/ioctl.h>
#include <sys/stat.h>
#include <termios.h>
#include <unistd.h>

#include "io/fs/term.h"
#include "tests/testutil.h"

static char tmp[256];

static int setup(void **state) {
    (void)state;
    if (!test_tmpdir(tmp, sizeof tmp)) return -1;
    return chdir(tmp); /* operands below are relative names that start with '-' */
}

static int teardown(void **state) {
    (void)state;
    if (chdir("/") != 0) return -1;
    test_rmtree(tmp);
    return 0;
}

/* "--" ends the options of every command: a following "-name" (even "--help") is the operand, so
 * the message is about that file or folder, never "unknown option"; before "--" the same word is an
 * option. */
static void test_end_of_options(void **state) {
    (void)state;
    static const struct {
        const char *args, *msg;
    } cases[] = {
        {"train -- -c.json", "-c.json: cannot read the config"},
        {"resume -- -run", "-run: no such run folder"},
        {"export -- -run", "-run: no such run folder"},
        {"forecast -- -run", "-run: no such run folder"},
        {"ensemble -- -run", "-run: no such run folder"},
        {"canonical -- -run", "-run: no such run folder"},
        {"verify -- -run", "-run: no such run folder"},
        {"report -- -run", "-run: no such run folder"},
        {"export -- --help", "--help: no such run folder"},
        {"fit -- --data.csv", "--data.csv: cannot open"},
        {"frames -- -frames", "-frames:"},
        {"sweep -- -s.json", "-s.json: cannot open"},
    };
    static char out[8192];
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        int rc = test_run_capture(cases[i].args, out, sizeof out);
        if (rc != 2 || !strstr(out, cases[i].msg) || strstr(out, "unknown option"))
            fail_msg("%s: exit %d, '%s' (expected 2 and '%s')", cases[i].args, rc, out, cases[i].msg);
    }
    /* without "--" the same words are options */
    assert_int_equal(test_run_capture("train -c.json", out, sizeof out), 2);
    assert_non_null(strstr(out, "-c.json: unknown option"));
    assert_int_equal(test_run_capture("export --help", out, sizeof out), 0);
    assert_non_null(strstr(out, "usage: framelaw export"));
    /* a command that works: options before "--", operands after it, one named like an option */
    assert_int_equal(test_run_capture("demo --recordings 1 --frames 12 --size 16 -- spring --out", out, sizeof out), 0);
    struct stat sb;
    assert_int_equal(stat("--out/demo.json", &sb), 0);
    /* --opt=value is not split after "--": "--x=1" is a file name there */
    assert_int_equal(test_run_capture("fit -- --x=1", out, sizeof out), 2);
    assert_non_null(strstr(out, "--x=1: not a numeric recording"));
}

/* Every command's --help has the same blocks, in this order: "usage: framelaw NAME", a description,
 * "options (default in brackets...)" where each option but --help shows its default in brackets,
 * "--help", and "exit status:". The commands are read from `framelaw --help`, so a new command is
 * checked without editing this test; `framelaw help NAME` prints the same text. */
static void check_help_blocks(const char *name, const char *out) {
    char want[64];
    snprintf(want, sizeof want, "usage: framelaw %s", name);
    if (strncmp(out, want, strlen(want))) fail_msg("%s --help: does not start with '%s'", name, want);
    const char *desc = strstr(out, "\n\n");
    const char *opts = strstr(out, "\noptions (default in brackets");
    const char *exits = strstr(out, "\nexit status: 0 ");
    if (!desc || !opts || !exits) fail_msg("%s --help: a block is missing:\n%s", name, out);
    if (!(desc < opts && opts < exits)) fail_msg("%s --help: blocks out of order:\n%s", name, out);
    if (desc[2] == '\n' || desc + 2 >= opts) fail_msg("%s --help: no description", name);
    /* the entries of the options block: each from a line "  -..." to the next one or the blank line */
    const char *p = strchr(opts + 1, '\n') + 1, *end = strstr(p, "\n\n");
    if (!end || end > exits) fail_msg("%s --help: the options block does not end before exit status", name);
    int have_help = 0, entries = 0;
    while (p < end) {
        const char *e = p;
        do {
            e = strchr(e, '\n');
            if (!e || e >= end) e = end;
            else e++;
        } while (e < end && strncmp(e, "  -", 3)); /* continuation lines belong to the entry */
        if (strncmp(p, "  -", 3)) fail_msg("%s --help: '%.40s' in the options block is not an option", name, p);
        entries++;
        if (!strncmp(p, "  --help ", 9)) {
            have_help = 1;
        } else {
            int shown = 0; /* a line of the entry ends with "]" */
            for (const char *q = p; q < e; q++)
                if (*q == ']' && (q + 1 == e || q[1] == '\n')) shown = 1;
            if (!shown) fail_msg("%s --help: no default in brackets for '%.*s'", name, (int)(strchr(p, '\n') - p), p);
        }
        p = e;
    }
    if (!have_help) fail_msg("%s --help: --help is not listed", name);
    (void)entries;
}

static void test_help_blocks(void **state) {
    (void)state;
    static char list[8192], out[16384], out2[16384];
    assert_int_equal(test_run_capture("--help", list, sizeof list), 0);
    const char *p = strstr(list, "\ncommands:\n");
    assert_non_null(p);
    p += strlen("\ncommands:\n");
    int n = 0;
    while (!strncmp(p, "  ", 2)) {
        char name[32], args[64];
        if (sscanf(p, " %31s", name) != 1) fail_msg("cannot read the command list: %s", p);
        p = strchr(p, '\n') + 1;
        if (!strcmp(name, "help")) continue;
        snprintf(args, sizeof args, "%s --help", name);
        if (test_run_capture(args, out, sizeof out) != 0) fail_msg("%s: exit status not 0", args);
        check_help_blocks(name, out);
        snprintf(args, sizeof args, "help %s", name);
        assert_int_equal(test_run_capture(args, out2, sizeof out2), 0);
        assert_string_equal(out, out2);
        n++;
    }
    assert_true(n >= 12); /* train resume export forecast verify ensemble canonical fit frames demo sweep report */
}

/* No file whose name starts with ".tmp" or holds ".tmp-" in dir (the atomic writer's temporaries). */
static void assert_no_temporaries(const char *dir) {
    char cmd[600], out[4096];
    snprintf(cmd, sizeof cmd, "find '%s' -name '*.tmp-*'", dir);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    size_t n = fread(out, 1, sizeof out - 1, p);
    out[n] = 0;
    pclose(p);
    if (n) fail_msg("temporary files left: %s", out);
}

/* A run's output (the key `output`, or --set output=...) that names a regular file, or a path under
 * one, is bad input: exit 2, a message naming the file and the key, no temporary name in it, the
 * file untouched and no temporary left. */
static void test_output_is_a_file(void **state) {
    (void)state;
    static char out[16384];
    assert_int_equal(test_run_capture("demo --recordings 2 --frames 20 --size 16 spring fr", out, sizeof out), 0);
    test_write_file("c.json", "{\"data\": {\"frames\": \"fr\", \"fps\": 25}, \"train\": {\"epochs\": 1}}");
    test_write_file("afile", "keep me\n");
    static const char *const args[] = {
        "train c.json --set output='\"afile\"'",
        "train c.json --set=output='\"afile\"'",
        "train c.json --set output='\"afile/run\"'",
    };
    for (size_t i = 0; i < sizeof args / sizeof *args; i++) {
        int rc = test_run_capture(args[i], out, sizeof out);
        if (rc != 2 || !strstr(out, "afile: cannot create folder: a file of that name is in the way") ||
            !strstr(out, "output") || strstr(out, ".tmp"))
            fail_msg("%s: exit %d, '%s'", args[i], rc, out);
        /* one line */
        if (strchr(out, '\n') != out + strlen(out) - 1) fail_msg("%s: more than one line: '%s'", args[i], out);
    }
    char *kept = test_slurp("afile");
    assert_string_equal(kept, "keep me\n");
    free(kept);
    assert_no_temporaries(tmp);
}

/* framelaw ARGS with stdout into out and stderr into err (each NUL-terminated); the exit status. */
static int run_split(const char *args, char *out, size_t no, char *err, size_t ne) {
    char cmd[8192], errf[300];
    snprintf(errf, sizeof errf, "%s/stderr.txt", tmp);
    snprintf(cmd, sizeof cmd, "'%s' %s 2>'%s'", test_framelaw(), args, errf);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    size_t len = fread(out, 1, no - 1, p);
    out[len] = 0;
    int status = pclose(p);
    char *e = test_slurp(errf);
    snprintf(err, ne, "%s", e ? e : "");
    free(e);
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

/* export and forecast print their summaries on the same stream, stdout (results on stdout, progress
 * and notes on stderr: common practice), so that `framelaw export RUN > file` keeps them together. */
static void test_summaries_on_stdout(void **state) {
    (void)state;
    static char out[1 << 16], err[1 << 16];
    assert_int_equal(test_run_capture("demo --recordings 3 --frames 40 --size 16 --overwrite spring sfr", out, sizeof out), 0);
    test_write_file("s.json", "{\"data\": {\"frames\": \"sfr\", \"fps\": 25}, \"train\": {\"epochs\": 2}, \"output\": \"srun\"}");
    assert_int_equal(test_run_capture("train s.json", out, sizeof out), 0);
    assert_int_equal(run_split("export srun", out, sizeof out, err, sizeof err), 0);
    if (!strstr(out, "exported 3 recordings to srun") || strstr(err, "exported"))
        fail_msg("export: stdout '%s', stderr '%s'", out, err);
    assert_int_equal(run_split("forecast srun", out, sizeof out, err, sizeof err), 0);
    if (!strstr(out, "forecast rec02: latent error") || strstr(err, "forecast rec"))
        fail_msg("forecast: stdout '%s', stderr '%s'", out, err);
    /* --quiet: no summary on either */
    assert_int_equal(run_split("export srun --quiet", out, sizeof out, err, sizeof err), 0);
    assert_null(strstr(out, "exported"));
    assert_null(strstr(err, "exported"));
}

/* `frames DIR` without a config shows what `train` with a config that sets nothing but data.frames
 * and data.fps would use: the same derivative stencil (data.derivative.method auto, chosen from the
 * frames) and the same split into training and validation samples. */
static void test_frames_defaults_are_trains(void **state) {
    (void)state;
    static char out[1 << 16];
    assert_int_equal(test_run_capture("demo --recordings 3 --frames 40 --size 16 --overwrite spring dfr", out, sizeof out), 0);
    test_write_file("d.json", "{\"data\": {\"frames\": \"dfr\", \"fps\": 25}, \"train\": {\"epochs\": 1}, \"output\": \"drun\"}");
    assert_int_equal(test_run_capture("train d.json", out, sizeof out), 0);
    const char *p = strstr(out, "derivatives: Savitzky-Golay window ");
    const char *q = strstr(out, " training and ");
    assert_non_null(p);
    assert_non_null(q);
    int tw, td;
    long tn, tv;
    assert_int_equal(sscanf(p, "derivatives: Savitzky-Golay window %d, degree %d", &tw, &td), 2);
    while (q > out && q[-1] != ' ') q--;
    assert_int_equal(sscanf(q, "%ld training and %ld validation samples", &tn, &tv), 2);
    static const char *const args[] = {"frames dfr --fps 25 --sheet none", "frames --config d.json --sheet none"};
    for (int k = 0; k < 2; k++) {
        assert_int_equal(test_run_capture(args[k], out, sizeof out), 0);
        int fw, fd;
        long fn, fv;
        p = strstr(out, "derivatives: savgol stencil over ");
        q = strstr(out, "training set: ");
        if (!p || !q) fail_msg("%s: no Savitzky-Golay stencil or no training set:\n%s", args[k], out);
        assert_int_equal(sscanf(p, "derivatives: savgol stencil over %d frames (degree %d)", &fw, &fd), 2);
        assert_int_equal(sscanf(q, "training set: %ld samples from %*d recordings; validation: %ld", &fn, &fv), 2);
        if (fw != tw || fd != td || fn != tn || fv != tv)
            fail_msg("%s: window %d degree %d, %ld + %ld samples; train: window %d degree %d, %ld + %ld", args[k], fw,
                     fd, fn, fv, tw, td, tn, tv);
    }
    /* a flag still overrides the default */
    assert_int_equal(test_run_capture("frames dfr --derivative central --sheet none", out, sizeof out), 0);
    assert_non_null(strstr(out, "derivatives: central stencil over 3 frames"));
    assert_int_equal(test_run_capture("frames dfr --derivative forward --sheet none", out, sizeof out), 2);
    assert_non_null(strstr(out, "--derivative 'forward': expected central, savgol or auto"));
}

/* The bytes of a regular file (malloc'ed, *n of them), or NULL (no file, a folder). */
static uint8_t *slurp_bytes(const char *path, size_t *n) {
    struct stat sb;
    if (stat(path, &sb) || !S_ISREG(sb.st_mode)) return NULL;
    FILE *f = fopen(path, "rb");
    if (!f) return NULL;
    uint8_t *b = malloc((size_t)sb.st_size + 1);
    *n = b ? fread(b, 1, (size_t)sb.st_size, f) : 0;
    fclose(f);
    return b;
}

/* The chunks of a PNG checked by Python's zlib.crc32 (PNG Specification, Second Edition, W3C
 * Recommendation 2003, 5.3 chunk layout: length, type, data, CRC-32 of type and data; 11.3.4.3 tEXt:
 * keyword, NUL, text): prints "ok" and each tEXt chunk as KEY=TEXT, or "bad CRC". */
static void png_chunks(const char *path, char *out, size_t n) {
    char cmd[1200];
    snprintf(cmd, sizeof cmd,
             "/usr/bin/python3 -c \"import sys,struct,zlib\n"
             "b=open(sys.argv[1],'rb').read(); assert b[:8]==b'\\x89PNG\\r\\n\\x1a\\n'; i=8; out=['ok']\n"
             "while i<len(b):\n"
             "  n,=struct.unpack('>I',b[i:i+4]); t=b[i+4:i+8]; d=b[i+8:i+8+n]; c,=struct.unpack('>I',b[i+8+n:i+12+n])\n"
             "  if zlib.crc32(t+d)&0xffffffff!=c: out=['bad CRC']; break\n"
             "  if t==b'tEXt': k,v=d.split(b'\\x00',1); out.append(k.decode()+'='+v.decode())\n"
             "  i+=12+n\n"
             "print(' '.join(out))\" '%s'", path);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    size_t len = fread(out, 1, n - 1, p);
    out[len] = 0;
    pclose(p);
}

/* The contact sheet never silently replaces a file: it replaces only an earlier contact sheet of
 * framelaw (a PNG whose Software text says so); a frame, any other file or a folder at that path is
 * bad input (exit 2, named), left byte for byte as it was. */
static void test_sheet_never_overwrites(void **state) {
    (void)state;
    static char out[1 << 16];
    assert_int_equal(test_run_capture("demo --recordings 2 --frames 20 --size 16 --overwrite spring cfr", out, sizeof out), 0);
    assert_int_equal(test_run_capture("frames cfr --fps 25", out, sizeof out), 0);
    assert_non_null(strstr(out, "contact sheet: contact-sheet.png"));
    png_chunks("contact-sheet.png", out, sizeof out);
    if (strcmp(out, "ok Software=framelaw contact sheet\n")) fail_msg("contact-sheet.png chunks: '%s'", out);
    /* an earlier sheet of ours is replaced */
    assert_int_equal(test_run_capture("frames cfr --fps 25", out, sizeof out), 0);
    assert_non_null(strstr(out, "contact sheet: contact-sheet.png"));
    /* anything else is not */
    test_write_file("notes.png", "my notes\n");
    assert_int_equal(mkdir("afolder.png", 0755), 0);
    static const char *const places[] = {"notes.png", "cfr/rec00/frame000000.png", "afolder.png"};
    for (size_t i = 0; i < sizeof places / sizeof *places; i++) {
        char args[300];
        size_t nb = 0, na = 0;
        uint8_t *before = slurp_bytes(places[i], &nb);
        snprintf(args, sizeof args, "frames cfr --fps 25 --sheet %s", places[i]);
        int rc = test_run_capture(args, out, sizeof out);
        char want[200];
        snprintf(want, sizeof want, "%s: exists and is not a contact sheet framelaw wrote", places[i]);
        if (rc != 2 || !strstr(out, want)) fail_msg("%s: exit %d, '%s'", args, rc, out);
        uint8_t *after = slurp_bytes(places[i], &na);
        if (before && (!after || na != nb || memcmp(before, after, nb))) fail_msg("%s was changed", places[i]);
        free(before), free(after);
    }
    assert_no_temporaries(tmp);
}

/* ---- the progress line -------------------------------------------------------------------------- */

/* term_fit cuts at the last two-space separator that fits in width - 1 columns, else at a space,
 * else hard; a line that fits is kept whole. */
static void test_term_fit(void **state) {
    (void)state;
    char b[128];
    snprintf(b, sizeof b, "epoch 2/9 train  ETA 3s  loss 9.367e-01  active 3");
    term_fit(b, 80);
    assert_string_equal(b, "epoch 2/9 train  ETA 3s  loss 9.367e-01  active 3"); /* 49 columns: kept */
    term_fit(b, 40);
    assert_string_equal(b, "epoch 2/9 train  ETA 3s  loss 9.367e-01"); /* 39 columns: fits 40 - 1 */
    snprintf(b, sizeof b, "epoch 2/9 train  ETA 3s  loss 9.367e-01  active 3");
    term_fit(b, 39);
    assert_string_equal(b, "epoch 2/9 train  ETA 3s"); /* "  loss 9.367e-01" would end in column 39 */
    term_fit(b, 12);
    assert_string_equal(b, "epoch 2/9"); /* no "  " fits: the last space */
    snprintf(b, sizeof b, "abcdefghijklmnop");
    term_fit(b, 6);
    assert_string_equal(b, "abcde"); /* no space at all: cut hard */
}

/* A pseudo-terminal (master, slave) of cols columns; fails the test when none can be made. */
static void open_pty(int cols, int *master, int *slave) {
    int m = posix_openpt(O_RDWR | O_NOCTTY);
    if (m < 0 || grantpt(m) || unlockpt(m)) fail_msg("no pseudo-terminal: %s", strerror(errno));
    int s = open(ptsname(m), O_RDWR | O_NOCTTY);
    if (s < 0) fail_msg("cannot open %s: %s", ptsname(m), strerror(errno));
    struct winsize ws = {.ws_row = 24, .ws_col = (unsigned short)cols};
    if (ioctl(s, TIOCSWINSZ, &ws)) fail_msg("TIOCSWINSZ: %s", strerror(errno));
    *master = m, *slave = s;
}

/* term_columns: the terminal's own width first, then $COLUMNS, then 80. */
static void test_term_columns(void **state) {
    (void)state;
    int m, s;
    open_pty(57, &m, &s);
    setenv("COLUMNS", "63", 1);
    assert_int_equal(term_columns(s), 57);   /* a terminal says its width */
    int fd = open("cols.txt", O_WRONLY | O_CREAT | O_TRUNC, 0644);
    assert_true(fd >= 0);
    assert_int_equal(term_columns(fd), 63);  /* a file: $COLUMNS */
    setenv("COLUMNS", "wide", 1);
    assert_int_equal(term_columns(fd), 80);
    unsetenv("COLUMNS");
    assert_int_equal(term_columns(fd), 80);
    close(fd), close(s), close(m);
}

/* framelaw ARGS with stderr (and stdout) on a pseudo-terminal of cols columns, $COLUMNS unset; what
 * it wrote there, NUL-terminated, in out (n). Returns the exit status. */
static int run_on_pty(const char *args, int cols, char *out, size_t n) {
    int m, s;
    open_pty(cols, &m, &s);
    char cmd[4096];
    snprintf(cmd, sizeof cmd, "'%s' %s", test_framelaw(), args);
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        close(m);
        setsid();
        dup2(s, 1), dup2(s, 2);
        close(s);
        unsetenv("COLUMNS");
        execl("/bin/sh", "sh", "-c", cmd, (char *)NULL);
        _exit(127);
    }
    close(s);
    size_t len = 0;
    for (;;) { /* until the child's end closes the terminal (EIO) */
        ssize_t k = read(m, out + len, n - 1 - len);
        if (k <= 0) break;
        len += (size_t)k;
        if (len == n - 1) break;
    }
    out[len] = 0;
    close(m);
    int status;
    waitpid(pid, &status, 0);
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

/* Longest row drawn by a progress line starting with prefix: the text between "\r\033[K" (or a line
 * start) and the next "\r" or "\n"; -1 when there is none. */
static int widest(const char *out, const char *prefix) {
    int w = -1;
    for (const char *p = out; (p = strstr(p, prefix)); p++) {
        int k = (int)strcspn(p, "\r\n");
        if (k > w) w = k;
    }
    return w;
}

/* On a terminal of 80 columns the progress lines of train (epochs) and demo stay within 79
 * columns, so that "\r" redraws them in place (a wider line wraps and leaves a row per update);
 * on 200 columns the whole line shows; in a log file the line is whole. */
static void test_progress_fits(void **state) {
    (void)state;
    static char out[1 << 17];
    assert_int_equal(run_on_pty("demo --recordings 3 --frames 40 --size 16 --overwrite spring pfr", 80, out, sizeof out), 0);
    int w = widest(out, "demo spring: recording");
    if (w < 0 || w > 79) fail_msg("demo progress %d columns wide:\n%s", w, out);
    test_write_file("p.json", "{\"data\": {\"frames\": \"pfr\", \"fps\": 25}, \"train\": {\"epochs\": 20}, "
                              "\"output\": \"prun\"}");
    assert_int_equal(run_on_pty("train p.json --set output='\"prun80\"'", 80, out, sizeof out), 0);
    w = widest(out, "epoch ");
    if (w < 0 || w > 79) fail_msg("train progress %d columns wide on 80:\n%s", w, out);
    assert_non_null(strstr(out, "epoch 20/20 refine  ETA"));
    w = widest(out, "framelaw: fitting the autoencoder to the embedding: epoch"); /* model.init isomap */
    if (w < 0 || w > 79) fail_msg("isomap fitting progress %d columns wide on 80:\n%s", w, out);
    assert_int_equal(run_on_pty("train p.json --set output='\"prun200\"'", 200, out, sizeof out), 0);
    w = widest(out, "epoch ");
    if (w <= 80 || w > 199) fail_msg("train progress %d columns wide on 200:\n%s", w, out);
    assert_non_null(strstr(out, "  l1 ")); /* the last field */
    /* not a terminal: whole lines, wider than 80 */
    assert_int_equal(test_run_capture("train p.json --set output='\"prunlog\"'", out, sizeof out), 0);
    assert_true(widest(out, "epoch ") > 80);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_end_of_options),
        cmocka_unit_test(test_help_blocks),
        cmocka_unit_test(test_output_is_a_file),
        cmocka_unit_test(test_summaries_on_stdout),
        cmocka_unit_test(test_frames_defaults_are_trains),
        cmocka_unit_test(test_sheet_never_overwrites),
        cmocka_unit_test(test_term_fit),
        cmocka_unit_test(test_term_columns),
        cmocka_unit_test(test_progress_fits),
    };
    return cmocka_run_group_tests_name("command-line manners", tests, setup, teardown);
}
