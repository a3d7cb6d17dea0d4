/* tests/test_cli.c: the manners every command shares, run as a user would (the binary from `make
 * test`): "--" ends the options, --help has the same blocks everywhere, a run's output that is a
 * file is bad input, results go to stdout. Exit status 2 for bad usage or bad input (common practice
 * for command-line tools; POSIX.1-2017, Base Definitions 12.2, Utility Syntax Guidelines, guideline
 * 10: "The first -- argument that is not an option-argument should be accepted as a delimiter
 * indicating the end of options. Any following arguments should be treated as operands, even if they
 * begin with the '-' character."). */
#include <sys/stat.h>
#include <unistd.h>

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

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_end_of_options),
        cmocka_unit_test(test_help_blocks),
    };
    return cmocka_run_group_tests_name("command-line manners", tests, setup, teardown);
}
