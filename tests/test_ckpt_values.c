/* tests/test_ckpt_values.c: checkpoints whose CRC is valid but whose values lie. A CRC guards against
 * accidents, not against a file from another build, a writer's bug or a hand edit: every value read
 * must be one the writer can have written for the run (docs/formats.md, "What a checkpoint must
 * satisfy"), else the file is refused with one line naming the file and the section, exit status 2,
 * never a crash (run this suite under `make sanitize` too: it is part of it).
 *
 * The files are made by patching a good checkpoint at the offsets docs/formats.md gives and
 * recomputing the CRC-32 (ISO-HDLC, its check value is tested in tests/test_fs.c and
 * tests/test_train.c), so each one passes every check but the value under test. Common practice
 * for input validation tests: one fault per file, each at the boundary (one past the end, -1, the
 * largest and smallest 64-bit values). */
#include <sys/stat.h>
#include <unistd.h>

#include "io/fs/hash.h"
#include "io/run/checkpoint.h"
#include "nn/params.h"
#include "nn/rng.h"
#include "tests/testutil.h"

/* ---- patching a checkpoint (layout of docs/formats.md) ---------------------------------------- */

/* META field offsets in its payload, in the order docs/formats.md lists them. */
enum {
    M_DIGEST = 0, M_EPOCH = 8, M_BATCH = 16, M_RNG = 24, M_ACC = 56, M_ACC_N = 96, M_BEST_VAL = 104,
    M_BEST_EPOCH = 112, M_THRESH = 120, M_SECONDS = 128, M_STEP = 136
};

typedef struct {
    unsigned char *d;
    long n;
} File;

static File load(const char *path) {
    File f = {0};
    FILE *fp = fopen(path, "rb");
    assert_non_null(fp);
    fseek(fp, 0, SEEK_END);
    f.n = ftell(fp);
    fseek(fp, 0, SEEK_SET);
    f.d = malloc((size_t)f.n);
    assert_non_null(f.d);
    assert_int_equal(fread(f.d, 1, (size_t)f.n, fp), (size_t)f.n);
    fclose(fp);
    return f;
}

/* Write f back with its CRC recomputed over every byte before it. */
static void save(const char *path, const File *f) {
    uint32_t crc = fs_crc32(0, f->d, (size_t)f->n - 4);
    for (int i = 0; i < 4; i++) f->d[f->n - 4 + i] = (unsigned char)(crc >> (8 * i));
    FILE *fp = fopen(path, "wb");
    assert_non_null(fp);
    assert_int_equal(fwrite(f->d, 1, (size_t)f->n, fp), (size_t)f->n);
    fclose(fp);
}

static uint64_t get64(const unsigned char *p) {
    uint64_t v = 0;
    for (int i = 7; i >= 0; i--) v = v << 8 | p[i];
    return v;
}

static void put64(unsigned char *p, uint64_t v) {
    for (int i = 0; i < 8; i++) p[i] = (unsigned char)(v >> (8 * i));
}

/* Offset of the header (tag) of section `tag`, and its payload length. */
static long section(const File *f, const char *tag, uint64_t *len) {
    long off = 16;
    while (off + 16 <= f->n - 4) {
        uint64_t n = get64(f->d + off + 8);
        if (!memcmp(f->d + off, tag, 4)) {
            if (len) *len = n;
            return off;
        }
        off += 16 + (long)n;
    }
    fail_msg("no section %s", tag);
    return -1;
}

/* Copy good to path with n bytes at offset `at` of section tag's payload replaced by p. */
static void patch(const char *good, const char *path, const char *tag, long at, const void *p, size_t n) {
    File f = load(good);
    uint64_t len;
    long off = section(&f, tag, &len) + 16;
    assert_true(at >= 0 && (uint64_t)at + n <= len);
    memcpy(f.d + off + at, p, n);
    save(path, &f);
    free(f.d);
}

static void patch_i64(const char *good, const char *path, const char *tag, long at, int64_t v) {
    unsigned char b[8];
    put64(b, (uint64_t)v);
    patch(good, path, tag, at, b, 8);
}

static void patch_f64(const char *good, const char *path, const char *tag, long at, double v) {
    patch(good, path, tag, at, &v, 8);
}

static void patch_f32(const char *good, const char *path, const char *tag, long at, float v) {
    patch(good, path, tag, at, &v, 4);
}

/* ---- a small checkpoint written by ckpt_write -------------------------------------------------- */

enum { N_MASK = 4, N_ORDER = 10, BATCH = 4 }; /* 3 batches an epoch: 4, 4, 2 samples */

typedef struct {
    char dir[256], good[320], bad[320];
    ParamSet ps;
    uint8_t mask[N_MASK];
    long order[N_ORDER];
} Fx;

static void make_params(ParamSet *ps) {
    params_init(ps);
    params_add(ps, "enc.W0", 3, 4);
    params_add(ps, "xi", 2, 2);
    params_alloc(ps);
}

static int setup(void **state) {
    Fx *fx = calloc(1, sizeof *fx);
    assert_non_null(test_tmpdir(fx->dir, sizeof fx->dir));
    snprintf(fx->good, sizeof fx->good, "%s/good.ckpt", fx->dir);
    snprintf(fx->bad, sizeof fx->bad, "%s/bad.ckpt", fx->dir);
    ParamSet ps;
    make_params(&ps);
    for (size_t i = 0; i < ps.n; i++) ps.val[i] = 0.1f * (float)i - 0.5f, ps.m[i] = 0.01f, ps.v[i] = 1e-4f;
    uint8_t mask[N_MASK] = {1, 0, 1, 1};
    long order[N_ORDER] = {3, 7, 0, 9, 1, 2, 8, 4, 6, 5};
    /* after 5 epochs and 1 batch of the sixth: 16 Adam steps, 4 samples in the partial sums */
    CkptMeta meta = {0};
    meta.config_digest = 0x1234;
    meta.epoch = 5;
    meta.batch = 1;
    rng_seed(&meta.rng, 7);
    for (int i = 0; i < 5; i++) meta.acc[i] = 0.25 * (i + 1);
    meta.acc_n = 4;
    meta.best_val = 0.5;
    meta.best_epoch = 5;
    meta.n_thresholds = 1;
    meta.seconds = 1.5;
    ps.step = 5 * 3 + 1;
    Status st;
    assert_int_equal(ckpt_write(fx->good, &meta, &ps, mask, N_MASK, order, N_ORDER, &st), 0);
    params_free(&ps);
    make_params(&fx->ps);
    *state = fx;
    return 0;
}

static int teardown(void **state) {
    Fx *fx = *state;
    params_free(&fx->ps);
    test_rmtree(fx->dir);
    free(fx);
    return 0;
}

/* Read path; the model's buffers hold a sentinel before, which a refused read must leave. */
static int read_ckpt(Fx *fx, const char *path, CkptMeta *meta, Status *st) {
    for (size_t i = 0; i < fx->ps.n; i++) fx->ps.val[i] = fx->ps.m[i] = fx->ps.v[i] = 7.0f;
    fx->ps.step = 99;
    memset(fx->mask, 9, sizeof fx->mask);
    for (int i = 0; i < N_ORDER; i++) fx->order[i] = 99;
    return ckpt_read(path, meta, &fx->ps, fx->mask, N_MASK, fx->order, N_ORDER, BATCH, st);
}

/* bad.ckpt is refused: ST_INPUT, one line naming the file, `section` and `what`; nothing modified. */
static void refused(Fx *fx, const char *section, const char *what) {
    CkptMeta meta;
    Status st;
    int rc = read_ckpt(fx, fx->bad, &meta, &st);
    if (rc != ST_INPUT) fail_msg("%s / %s: accepted (rc %d)", section, what, rc);
    if (!strstr(st.msg, fx->bad) || !strstr(st.msg, section) || !strstr(st.msg, what))
        fail_msg("message \"%s\" should name the file, %s and \"%s\"", st.msg, section, what);
    assert_null(strchr(st.msg, '\n'));
    for (size_t i = 0; i < fx->ps.n; i++) assert_true(fx->ps.val[i] == 7.0f && fx->ps.v[i] == 7.0f);
    assert_int_equal(fx->ps.step, 99);
    assert_int_equal(fx->mask[0], 9);
    assert_int_equal(fx->order[0], 99);
}

/* The good file reads back whole: the checks refuse nothing a writer writes. */
static void test_good_checkpoint_reads(void **state) {
    Fx *fx = *state;
    CkptMeta meta;
    Status st;
    assert_int_equal(read_ckpt(fx, fx->good, &meta, &st), 0);
    assert_int_equal(meta.epoch, 5);
    assert_int_equal(meta.batch, 1);
    assert_int_equal(fx->ps.step, 16);
    assert_int_equal(fx->order[3], 9);
    assert_int_equal(fx->mask[1], 0);
    assert_true(fx->ps.val[1] == 0.1f * 1.0f - 0.5f);
    /* the boundaries that are legal: last batch of the epoch, no best yet */
    patch_i64(fx->good, fx->bad, "META", M_BATCH, 2);
    File f = load(fx->bad);
    long meta_off = section(&f, "META", NULL) + 16;
    put64(f.d + meta_off + M_ACC_N, 8);                 /* two batches of 4 done */
    double inf = INFINITY;
    memcpy(f.d + meta_off + M_BEST_VAL, &inf, 8);
    put64(f.d + meta_off + M_BEST_EPOCH, (uint64_t)-1);
    put64(f.d + meta_off + M_STEP, 5 * 3 + 2);
    save(fx->bad, &f);
    free(f.d);
    assert_int_equal(read_ckpt(fx, fx->bad, &meta, &st), 0);
    assert_int_equal(meta.batch, 2);
    assert_true(isinf(meta.best_val));
    /* the epoch's steps all done, its end-of-epoch passes pending (a stop request during them) */
    f = load(fx->bad);
    put64(f.d + meta_off + M_BATCH, 3);
    put64(f.d + meta_off + M_ACC_N, N_ORDER);
    put64(f.d + meta_off + M_STEP, 5 * 3 + 3);
    save(fx->bad, &f);
    free(f.d);
    assert_int_equal(read_ckpt(fx, fx->bad, &meta, &st), 0);
    assert_int_equal(meta.batch, 3);
}

/* ORDR, the sample order: one past the end, -1, 2^63 (as i64 the smallest value), 2^63 - 1, and a
 * repeated sample (every entry in range, but not a permutation). These reached the batch gather
 * unchecked: a heap-buffer-overflow read. */
static void test_order_out_of_range(void **state) {
    Fx *fx = *state;
    patch_i64(fx->good, fx->bad, "ORDR", 8 * 3, N_ORDER);
    refused(fx, "section ORDR", "entry 3 is 10, not a training sample (0..9)");
    patch_i64(fx->good, fx->bad, "ORDR", 8 * 9, -1);
    refused(fx, "section ORDR", "entry 9 is -1");
    patch_i64(fx->good, fx->bad, "ORDR", 0, INT64_MIN); /* 2^63 */
    refused(fx, "section ORDR", "entry 0 is -9223372036854775808");
    patch_i64(fx->good, fx->bad, "ORDR", 0, INT64_MAX);
    refused(fx, "section ORDR", "entry 0 is 9223372036854775807");
    patch_i64(fx->good, fx->bad, "ORDR", 8 * 1, 3); /* entry 0 is 3 already */
    refused(fx, "section ORDR", "sample 3 appears twice (entry 1)");
}

/* META: the batch position within the epoch (3 batches), the epoch and the counters against it. */
static void test_meta_out_of_range(void **state) {
    Fx *fx = *state;
    patch_i64(fx->good, fx->bad, "META", M_BATCH, -1000000);
    refused(fx, "section META", "batch position -1000000 is outside the epoch's 3 batches (0..3");
    patch_i64(fx->good, fx->bad, "META", M_BATCH, 4); /* 3: the end-of-epoch passes pending (legal) */
    refused(fx, "section META", "batch position 4 is outside the epoch's 3 batches (0..3");
    patch_i64(fx->good, fx->bad, "META", M_EPOCH, -1);
    refused(fx, "section META", "epoch -1");
    patch_i64(fx->good, fx->bad, "META", M_EPOCH, INT64_MAX); /* epoch x batches would overflow */
    refused(fx, "section META", "epoch 9223372036854775807");
    patch_i64(fx->good, fx->bad, "META", M_STEP, 0);
    refused(fx, "section META", "Adam step count 0 is outside 1..16");
    patch_i64(fx->good, fx->bad, "META", M_STEP, 17);
    refused(fx, "section META", "Adam step count 17");
    patch_i64(fx->good, fx->bad, "META", M_ACC_N, 5);
    refused(fx, "section META", "5 samples in the partial sums after 1 batches of 4, expected 4");
    patch_i64(fx->good, fx->bad, "META", M_ACC_N, -1);
    refused(fx, "section META", "-1 samples in the partial sums");
    patch_f64(fx->good, fx->bad, "META", M_ACC + 8 * 2, NAN);
    refused(fx, "section META", "partial loss sum 2 is nan");
    patch_f64(fx->good, fx->bad, "META", M_BEST_VAL, NAN);
    refused(fx, "section META", "best validation loss nan");
    patch_f64(fx->good, fx->bad, "META", M_BEST_VAL, -INFINITY);
    refused(fx, "section META", "best validation loss -inf");
    patch_i64(fx->good, fx->bad, "META", M_BEST_EPOCH, 6);
    refused(fx, "section META", "best epoch 6 is outside 1..5");
    patch_f64(fx->good, fx->bad, "META", M_BEST_VAL, INFINITY); /* no best, yet a best epoch */
    refused(fx, "section META", "best epoch 5 without a best validation loss");
    patch_i64(fx->good, fx->bad, "META", M_THRESH, 6);
    refused(fx, "section META", "6 thresholding passes");
    patch_f64(fx->good, fx->bad, "META", M_SECONDS, -1.0);
    refused(fx, "section META", "training time -1 s");
    unsigned char zero[32] = {0};
    patch(fx->good, fx->bad, "META", M_RNG, zero, sizeof zero);
    refused(fx, "section META", "random generator's state is all zero");
}

/* MASK bytes 0 or 1; PVAL, ADM1 finite; ADM2 finite and >= 0 (Adam takes its square root). */
static void test_values_out_of_range(void **state) {
    Fx *fx = *state;
    unsigned char two = 2;
    patch(fx->good, fx->bad, "MASK", 1, &two, 1);
    refused(fx, "section MASK", "byte 1 is 2, not 0 or 1");
    patch_f32(fx->good, fx->bad, "PVAL", 4 * 5, NAN);
    refused(fx, "section PVAL", "parameter value 5 is nan");
    patch_f32(fx->good, fx->bad, "PVAL", 4 * 15, INFINITY);
    refused(fx, "section PVAL", "parameter value 15 is inf");
    patch_f32(fx->good, fx->bad, "ADM1", 0, -INFINITY);
    refused(fx, "section ADM1", "Adam first moment 0 is -inf");
    patch_f32(fx->good, fx->bad, "ADM2", 4 * 2, -1e-3f);
    refused(fx, "section ADM2", "Adam second moment 2 is -0.001, not finite and >= 0");
}

/* The frame of sections: their count, order, reserved words and tiling; tags from the file are
 * shown escaped. */
static void test_section_layout(void **state) {
    Fx *fx = *state;
    File f = load(fx->good);
    f.d[12] = 8; /* number of sections */
    save(fx->bad, &f);
    refused(fx, "8 sections", "version 1 has 7");
    f.d[12] = 7;
    long o = section(&f, "ORDR", NULL);
    f.d[o + 2] = 0x01; /* "OR\x01R" */
    save(fx->bad, &f);
    refused(fx, "section 7 is 'OR\\x01R'", "expected ORDR");
    f.d[o + 2] = 'D';
    f.d[o + 4] = 1; /* reserved word */
    save(fx->bad, &f);
    refused(fx, "section ORDR", "reserved word 1");
    f.d[o + 4] = 0;
    long v = section(&f, "VIEW", NULL);
    f.d[v + 16] = 'X'; /* the first tensor's name */
    save(fx->bad, &f);
    refused(fx, "section VIEW", "tensor 0 is Xnc.W0 (3,4), the model has enc.W0 (3,4)");
    free(f.d);
    /* a byte more or less than this model's checkpoints: truncated or another model's */
    f = load(fx->good);
    FILE *fp = fopen(fx->bad, "wb");
    assert_non_null(fp);
    assert_int_equal(fwrite(f.d, 1, (size_t)f.n - 1, fp), (size_t)f.n - 1);
    fclose(fp);
    refused(fx, "checkpoint of", "truncated, or written for another model or data");
    fp = fopen(fx->bad, "wb");
    assert_int_equal(fwrite(f.d, 1, (size_t)f.n, fp), (size_t)f.n);
    fputc(0, fp);
    fclose(fp);
    refused(fx, "checkpoint of", "written for another model or data");
    free(f.d);
    /* the same file read for a run with another number of training samples */
    CkptMeta meta;
    Status st;
    assert_int_equal(ckpt_read(fx->good, &meta, &fx->ps, fx->mask, N_MASK, fx->order, N_ORDER - 1, BATCH, &st),
                     ST_INPUT);
    assert_non_null(strstr(st.msg, "another model or data"));
}

/* ---- through the program: `framelaw resume` on a run whose checkpoint lies -------------------- */

enum { NCH = 8, NREC = 3, NT = 60 };

static void write_run(const char *dir, char *cfg, size_t n) {
    char data[400];
    snprintf(data, sizeof data, "%s/data", dir);
    assert_int_equal(mkdir(data, 0777), 0);
    Rng r;
    rng_seed(&r, 5);
    double P[NCH][2];
    for (int c = 0; c < NCH; c++) P[c][0] = rng_normal(&r), P[c][1] = rng_normal(&r);
    for (int k = 0; k < NREC; k++) { /* a linear oscillator seen through NCH fixed channels */
        char path[512];
        snprintf(path, sizeof path, "%s/rec%d.csv", data, k);
        FILE *f = fopen(path, "w");
        assert_non_null(f);
        for (int i = 0; i < NT; i++) {
            double t = i / 30.0, z0 = sin(2 * t + k), z1 = cos(2 * t + k);
            for (int c = 0; c < NCH; c++) fprintf(f, "%s%.9g", c ? "," : "", P[c][0] * z0 + P[c][1] * z1);
            fputc('\n', f);
        }
        fclose(f);
    }
    snprintf(cfg, n, "%s/config.json", dir);
    FILE *f = fopen(cfg, "w");
    assert_non_null(f);
    fprintf(f,
            "{\"data\": {\"frames\": \"%s\", \"fps\": 30, \"derivative\": {\"method\": \"central\"}},\n"
            " \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [8], \"activation\": \"tanh\", \"init\": \"glorot\", "
            "\"derivatives\": \"frames\"},\n"
            " \"library\": {\"degree\": 1, \"trig\": false},\n"
            " \"train\": {\"batch\": 16, \"epochs\": 20, \"threads\": 1, \"validate_every\": 5},\n"
            " \"threshold\": {\"select\": \"none\", \"every\": 5, \"refine_epochs\": 5},\n"
            " \"checkpoint\": {\"every\": 20, \"keep\": 1},\n"
            " \"output\": \"%s/run\"}\n",
            data, dir);
    fclose(f);
}

/* The reproduction: a finished 20-epoch run, ORDR[k] = n_train (and the batch position
 * moved into the epoch so the entry is gathered), CRC recomputed; `resume --set train.epochs=27`
 * crashed in the batch gather. Now it, and export, exit 2 naming the file and the section. */
static void test_resume_refuses_lying_checkpoint(void **state) {
    Fx *fx = *state;
    char cfg[400], run[400], good[600], ckpt[600], args[1400], out[8192];
    write_run(fx->dir, cfg, sizeof cfg);
    snprintf(run, sizeof run, "%s/run", fx->dir);
    snprintf(args, sizeof args, "train '%s' --quiet", cfg);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    snprintf(ckpt, sizeof ckpt, "%s/checkpoints/ckpt-00000020-000000.ckpt", run);
    snprintf(good, sizeof good, "%s/good-copy.ckpt", fx->dir);
    File f = load(ckpt);
    save(good, &f);
    uint64_t len;
    section(&f, "ORDR", &len);
    int64_t n_train = (int64_t)(len / 8);
    assert_true(n_train > 16);
    free(f.d);
    struct {
        const char *tag;
        long at;
        int64_t v;
        const char *what;
    } cases[] = {
        {"ORDR", 8 * 5, n_train, "not a training sample (0.."},  /* with the batch moved to 1 below */
        {"ORDR", 8 * 5, -1, "entry 5 is -1"},
        {"ORDR", 8 * 5, INT64_MIN, "entry 5 is -9223372036854775808"},
        {"META", M_BATCH, -1000000, "batch position -1000000"},
        {"META", M_EPOCH, 21, "epoch 21 batch 0, but its name says epoch 20 batch 0"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        patch_i64(good, ckpt, cases[i].tag, cases[i].at, cases[i].v);
        if (!strcmp(cases[i].tag, "ORDR")) { /* as in the report: position 1 of the epoch */
            File g = load(ckpt);
            long o = section(&g, "META", NULL) + 16;
            put64(g.d + o + M_BATCH, 1);
            put64(g.d + o + M_ACC_N, 16);
            save(ckpt, &g);
            free(g.d);
        }
        for (int cmd = 0; cmd < 2; cmd++) {
            if (cmd == 0) snprintf(args, sizeof args, "resume '%s' --set train.epochs=27 --quiet", run);
            else snprintf(args, sizeof args, "export '%s'", run);
            int rc = test_run_capture(args, out, sizeof out);
            /* the last line is the whole error: the file, the section, the value */
            size_t n = strlen(out);
            while (n && out[n - 1] == '\n') out[--n] = 0;
            char *last = strrchr(out, '\n');
            last = last ? last + 1 : out;
            char want[700];
            snprintf(want, sizeof want, "framelaw: %s: checkpoint section %s: ", ckpt, cases[i].tag);
            if (rc != 2 || strncmp(last, want, strlen(want)) || !strstr(last, cases[i].what) ||
                strstr(out, "Sanitizer"))
                fail_msg("case %zu (%s): exit %d, output:\n%s", i, cases[i].tag, rc, out);
        }
    }
    /* the good file, put back, resumes to epoch 27 */
    File g = load(good);
    save(ckpt, &g);
    free(g.d);
    snprintf(args, sizeof args, "resume '%s' --set train.epochs=27 --quiet", run);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    snprintf(ckpt, sizeof ckpt, "%s/checkpoints/ckpt-00000027-000000.ckpt", run);
    assert_int_equal(access(ckpt, F_OK), 0);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_good_checkpoint_reads, setup, teardown),
        cmocka_unit_test_setup_teardown(test_order_out_of_range, setup, teardown),
        cmocka_unit_test_setup_teardown(test_meta_out_of_range, setup, teardown),
        cmocka_unit_test_setup_teardown(test_values_out_of_range, setup, teardown),
        cmocka_unit_test_setup_teardown(test_section_layout, setup, teardown),
        cmocka_unit_test_setup_teardown(test_resume_refuses_lying_checkpoint, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
