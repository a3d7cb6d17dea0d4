/* tests/test_config.c: the run config (io/run/config.h): defaults, round trip, --set, digest, bad
 * configs, config_load and the key list in docs/config.md.
 *
 * Sources: JSON per RFC 8259 (IETF, 2017); FNV-1a per its authors' public description (common
 * practice); the rest (defaults, messages, overrides) is our own design, checked against
 * io/run/config.h and docs/config.md. No tolerances: every comparison here is exact. */
#include "tests/testutil.h"

#include <limits.h>
#include <sys/stat.h>
#include <unistd.h>

#include "io/run/config.h"
#include "sparse/integrate.h"
#include "io/data/images.h"
#include "nn/act.h"
#include "sparse/stencil.h"

/* A config that sets every key to a value other than its default. */
static const char *FULL =
    "{\n"
    "  \"data\": {\"frames\": \"/data/pendulum\", \"frames_origin\": \"/lab/pendulum\", \"fps\": 59.94, \"gray\": \"bt709\",\n"
    "            \"crop\": [4, 8, 120, 96], \"size\": [51, 51], \"scale\": \"standardize\",\n"
    "            \"stride\": 2, \"store_bits\": 16, \"store\": \"/cache/pendulum.store\",\n"
    "            \"derivative\": {\"method\": \"savgol\", \"window\": 9, \"degree\": 4},\n"
    "            \"validation\": {\"recordings\": [\"run07\", \"run 08\"], \"last\": 0}},\n"
    "  \"model\": {\"latent\": 2, \"order\": 1, \"encoder\": [256, 64], \"decoder\": [32, 64, 128],\n"
    "            \"activation\": \"tanh\", \"map\": \"linear\", \"init\": \"pca\", \"derivatives\": \"frames\",\n"
    "            \"init_epochs\": 50, \"init_frames\": 500},\n"
    "  \"library\": {\"degree\": 2, \"constant\": false, \"trig\": false, \"trig_velocity\": false,\n"
    "              \"multipliers\": [1, 2, 3], \"include\": [\"z1*z2\"], \"exclude\": [\"z1^2\", \"cos(z2)\"]},\n"
    "  \"loss\": {\"reconstruction\": 0.5, \"dx\": 0.001, \"dz\": 1e-6, \"l1\": 0.1, \"normalize\": false},\n"
    "  \"optimizer\": {\"lr\": 3e-4, \"beta1\": 0.8, \"beta2\": 0.99, \"eps\": 1e-7, \"schedule\": \"cosine\",\n"
    "                \"decay_every\": 50, \"decay_factor\": 0.25, \"lr_min\": 1e-5},\n"
    "  \"train\": {\"batch\": 64, \"run_length\": 8, \"epochs\": 20000, \"seed\": 9007199254740991, \"threads\": 4,\n"
    "            \"validate_every\": 5, \"warmup_epochs\": 50, \"warmup_fit\": false, \"memory_budget\": 2.5},\n"
    "  \"threshold\": {\"value\": 0.05, \"measure\": \"coefficient\", \"select\": \"first\", \"every\": 300, \"refine_epochs\": 5000},\n"
    "  \"checkpoint\": {\"every\": 25, \"keep\": 7},\n"
    "  \"forecast\": {\"bound\": 0.2, \"method\": \"rk4\", \"tolerance\": 1e-6},\n"
    "  \"ensemble\": {\"members\": 40, \"method\": \"thresholding\", \"candidates\": 9, \"block\": 12,\n"
    "               \"block_seconds\": 0.5, \"library_bagging\": true, \"drop_fraction\": 0.3, \"inclusion\": 0.7,\n"
    "               \"band_members\": 20},\n"
    "  \"canonical\": {\"tolerance\": 0.1, \"cond_max\": 500, \"choose\": \"forecast\"},\n"
    "  \"output\": \"runs/full\"\n"
    "}\n";

static void parse_ok(Config *c, const char *json) {
    Status st;
    int rc = config_parse(c, json, "test.json", NULL, &st);
    if (rc) fail_msg("config_parse failed: %s", st.msg);
}

static void set_ok(Config *c, const char *a) {
    Status st;
    if (config_set(c, a, &st)) fail_msg("config_set(%s) failed: %s", a, st.msg);
}

/* The defaults documented in io/run/config.h and docs/config.md. */
static void test_defaults(void **state) {
    (void)state;
    Config c;
    config_defaults(&c);
    assert_string_equal(c.frames, "");
    assert_true(c.fps == 30);
    assert_int_equal(c.gray, GRAY_BT601);
    for (int i = 0; i < 4; i++) assert_int_equal(c.crop[i], 0);
    assert_int_equal(c.size[0], 0);
    assert_int_equal(c.scale, SCALE_UNIT);
    assert_int_equal(c.stride, 1);
    assert_int_equal(c.store_bits, 8);
    assert_int_equal(c.derivative, DERIV_AUTO);
    assert_int_equal(c.sg_window, 7);
    assert_int_equal(c.sg_degree, 3);
    assert_int_equal(c.n_val_names, 0);
    assert_int_equal(c.val_last, 1);
    assert_int_equal(c.latent, 1);
    assert_int_equal(c.order, 2);
    assert_int_equal(c.n_encoder, 2);
    assert_int_equal(c.encoder[0], 64);
    assert_int_equal(c.encoder[1], 32);
    assert_int_equal(c.n_decoder, -1);
    assert_int_equal(c.activation, ACT_SIGMOID);
    assert_int_equal(c.map, MAP_AUTO);
    assert_int_equal(c.init, INIT_ISOMAP);
    assert_int_equal(c.derivatives, DERIVS_LATENT);
    assert_int_equal(c.init_epochs, 200);
    assert_int_equal(c.init_frames, 2000);
    assert_int_equal(c.lib_degree, 3);
    assert_int_equal(c.lib_constant, 1);
    assert_int_equal(c.lib_trig, 1);
    assert_int_equal(c.lib_trig_velocity, 1);
    assert_int_equal(c.n_lib_freq, 1);
    assert_int_equal(c.lib_freq[0], 1);
    assert_int_equal(c.n_lib_include, 0);
    assert_int_equal(c.n_lib_exclude, 0);
    assert_true(c.w_rec == 1 && c.w_dx == 0.1 && c.w_dz == 1 && c.w_l1 == 1e-4);
    assert_int_equal(c.loss_normalize, 1);
    assert_true(c.lr == 1e-3 && c.beta1 == 0.9 && c.beta2 == 0.999 && c.eps == 1e-8);
    assert_int_equal(c.schedule, SCHED_CONSTANT);
    assert_int_equal(c.sched_every, 1000);
    assert_true(c.sched_factor == 0.5 && c.lr_min == 0);
    assert_int_equal(c.batch, 256);
    assert_int_equal(c.epochs, 3000);
    assert_int_equal(c.run_length, 16);
    assert_int_equal(c.seed, 1);
    assert_int_equal(c.threads, 0);
    assert_int_equal(c.validate_every, 10);
    assert_true(c.threshold == 0.02);
    assert_int_equal(c.threshold_measure, MEASURE_CONTRIBUTION);
    assert_int_equal(c.threshold_select, SELECT_EVERY);
    assert_int_equal(c.threshold_every, 500);
    assert_int_equal(c.refine_epochs, 600);
    assert_int_equal(c.ckpt_every, 100);
    assert_int_equal(c.ckpt_keep, 3);
    assert_string_equal(c.output, "");
    assert_string_equal(c.store, ""); /* beside the frames, or the cache when their folder is read-only */

    /* the defaults pass validation once data.frames is given */
    Status st;
    assert_int_equal(config_validate(&c, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "data.frames: required"));
    set_ok(&c, "data.frames=/somewhere");
    assert_int_equal(config_validate(&c, &st), 0);
}

/* Every key set, written, read back: the same struct, byte for byte, and the same text. */
static void test_round_trip(void **state) {
    (void)state;
    Config a, b;
    config_defaults(&a);
    parse_ok(&a, FULL);
    Status st;
    assert_int_equal(config_validate(&a, &st), 0);
    assert_string_equal(a.frames, "/data/pendulum");
    assert_true(a.fps == 59.94);
    assert_int_equal(a.crop[2], 120);
    assert_int_equal(a.n_val_names, 2);
    assert_string_equal(a.val_names[1], "run 08");
    assert_int_equal(a.n_decoder, 3);
    assert_int_equal(a.decoder[2], 128);
    assert_int_equal(a.n_lib_exclude, 2);
    assert_string_equal(a.lib_exclude[1], "cos(z2)");
    const char *key = NULL;
    assert_null(config_old_term(&a, &key));   /* names with '*': nothing deprecated */
    assert_true(a.seed == 9007199254740991ull);
    assert_int_equal(a.epochs, 20000);
    assert_true(a.eps == 1e-7);

    Config d;
    config_defaults(&d);
    char *ja = config_to_json(&a), *jd = config_to_json(&d);
    config_defaults(&b);
    parse_ok(&b, ja);
    assert_memory_equal(&a, &b, sizeof a);
    char *jb = config_to_json(&b);
    assert_string_equal(ja, jb);
    /* and the defaults round-trip too */
    config_defaults(&b);
    parse_ok(&b, jd);
    memset(b.given, 0, sizeof b.given); /* the same values; the file gave every key, the defaults none */
    assert_memory_equal(&d, &b, sizeof d);
    free(ja);
    free(jb);
    free(jd);

    /* numbers that a 15-digit printer gets only nearly right come back bit for bit */
    static const double hard[] = {0.1 + 0.2, 1.0 / 3.0, 2.0 / 3.0 * 1e-7, 5e-324, 1.7976931348623157e308,
                                  123456789.12345678};
    for (size_t i = 0; i < sizeof hard / sizeof hard[0]; i++) {
        char set[96];
        config_defaults(&a);
        snprintf(set, sizeof set, "loss.l1=%.17g", hard[i]);
        set_ok(&a, set);
        assert_true(a.w_l1 == hard[i]);
        char *j = config_to_json(&a);
        config_defaults(&b);
        parse_ok(&b, j);
        memset(a.given, 0, sizeof a.given), memset(b.given, 0, sizeof b.given); /* values, not provenance */
        assert_memory_equal(&a, &b, sizeof a);
        free(j);
    }
}

/* FULL sets every key to a value other than its default (so the round trip covers every key): the
 * written JSON differs from the defaults' on every leaf line. */
static void test_full_sets_every_key(void **state) {
    (void)state;
    Config d, a;
    config_defaults(&d);
    config_defaults(&a);
    parse_ok(&a, FULL);
    char *jd = config_to_json(&d), *ja = config_to_json(&a);
    /* count the "value" lines that differ: one per leaf key (arrays print on one line) */
    int n_keys = 0, n_diff = 0;
    while (config_key_path(n_keys)) n_keys++;
    char *sd = jd, *sa = ja;
    for (;;) {
        char *ed = strchr(sd, '\n'), *ea = strchr(sa, '\n');
        if (!ed || !ea) break;
        int leaf = memchr(sd, ':', (size_t)(ed - sd)) && ed[-1] != '{';
        if (leaf && ((ed - sd) != (ea - sa) || memcmp(sd, sa, (size_t)(ed - sd)))) n_diff++;
        sd = ed + 1, sa = ea + 1;
    }
    assert_int_equal(n_diff, n_keys);
    free(jd);
    free(ja);
}

static void test_set(void **state) {
    (void)state;
    Config c, before;
    config_defaults(&c);
    set_ok(&c, "model.encoder=[64,32]");
    assert_int_equal(c.n_encoder, 2);
    assert_int_equal(c.encoder[0], 64);
    assert_int_equal(c.encoder[1], 32);
    assert_int_equal(c.encoder[2], 0);
    set_ok(&c, "data.gray=bt709");                   /* a bare word is a string */
    assert_int_equal(c.gray, GRAY_BT709);
    set_ok(&c, "data.gray=\"bt601\"");               /* and so is a JSON string */
    assert_int_equal(c.gray, GRAY_BT601);
    set_ok(&c, "train.epochs=10");
    assert_int_equal(c.epochs, 10);
    set_ok(&c, "data.derivative.window=11");         /* nested */
    assert_int_equal(c.sg_window, 11);
    set_ok(&c, "data.validation.recordings=[\"a\",\"b\"]");
    assert_int_equal(c.n_val_names, 2);
    assert_string_equal(c.val_names[1], "b");
    set_ok(&c, "model.decoder=[8]");
    assert_int_equal(c.n_decoder, 1);
    set_ok(&c, "model.decoder=null");
    assert_int_equal(c.n_decoder, -1);
    set_ok(&c, "library.trig=true");
    assert_int_equal(c.lib_trig, 1);
    set_ok(&c, "loss.l1=0");
    assert_true(c.w_l1 == 0);
    set_ok(&c, "data.derivative={\"method\":\"savgol\",\"degree\":4}");   /* a whole section */
    assert_int_equal(c.derivative, DERIV_SAVGOL);
    assert_int_equal(c.sg_degree, 4);
    assert_int_equal(c.sg_window, 11);               /* keys not named keep their value */
    set_ok(&c, "train.seed=12345678901");
    assert_true(c.seed == 12345678901ull);
    set_ok(&c, "data.frames=/abs/frames");
    assert_string_equal(c.frames, "/abs/frames");
    set_ok(&c, "data.frames=rel/frames");            /* relative: against the current directory */
    char cwd[CFG_PATH_MAX], want[CFG_PATH_MAX + 16];
    assert_non_null(getcwd(cwd, sizeof cwd));
    snprintf(want, sizeof want, "%s/rel/frames", cwd);
    assert_string_equal(c.frames, want);
    /* term names: '*' for a product; the old form with a space is read and reported as deprecated */
    const char *key = NULL;
    set_ok(&c, "library.include=[\"z1*dz1/dt\", \"sin(2*z1)\"]");
    set_ok(&c, "library.exclude=[\"z1^2\"]");
    assert_null(config_old_term(&c, &key));
    set_ok(&c, "library.exclude=[\"z1^2\", \"z1 z2\"]");
    assert_string_equal(config_old_term(&c, &key), "z1 z2");
    assert_string_equal(key, "library.exclude");
    set_ok(&c, "library.include=[\"sin(2 z1)\"]");
    assert_string_equal(config_old_term(&c, &key), "sin(2 z1)");
    assert_string_equal(key, "library.include");
    set_ok(&c, "library.include=[]");
    set_ok(&c, "library.exclude=[]");

    /* failures name the key and leave the config as it was */
    static const struct { const char *set, *msg; } bad[] = {
        {"modle.latent=3", "--set: modle.latent: unknown key (did you mean model.latent?)"},
        {"model.encoder=[64,0]", "--set: model.encoder[1]: must be a positive integer"},
        {"data.gray=bt2020", "--set: data.gray: must be one of bt601, bt709"},
        {"train.epochs=ten", "--set: train.epochs: must be a positive integer"},
        {"train.epochs", "expected KEY=VALUE"},
        {"=5", "expected KEY=VALUE"},
        {"model..latent=1", "bad key path 'model..latent'"},
        {"train=5", "--set: train: must be an object"},
        {"data.derivative={\"window\":8,\"x\":1}", "--set: data.derivative.x: unknown key"},
        {"ensemble.members=0", "--set: ensemble.members: must be"},
        {"ensemble.inclusion=0", "--set: ensemble.inclusion: must be"},
        {"ensemble.inclusion=1.5", "--set: ensemble.inclusion: must be"},
        {"ensemble.drop_fraction=1", "--set: ensemble.drop_fraction: must be"},
        {"ensemble.block=-1", "--set: ensemble.block: must be"},
        {"optimizer.lr=5.", "--set optimizer.lr: the value is not JSON (RFC 8259): column 3: a number needs digits"},
        {"model.encoder=[8,01]", "--set model.encoder: the value is not JSON (RFC 8259): column 5: a number may not"},
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        memcpy(&before, &c, sizeof c);
        Status st;
        int rc = config_set(&c, bad[i].set, &st);
        if (rc != ST_INPUT || !strstr(st.msg, bad[i].msg))
            fail_msg("--set %s: got %d '%s', expected '%s'", bad[i].set, rc, st.msg, bad[i].msg);
        assert_memory_equal(&before, &c, sizeof c);
    }
}

/* The threshold schedule follows train.epochs unless given (a sixth between passes, the last fifth
 * refines), in the file or by --set, in either order; given values stay. */
static void test_schedule_follows_epochs(void **state) {
    (void)state;
    Config c;
    config_defaults(&c);
    assert_int_equal(c.threshold_every, 500);
    assert_int_equal(c.refine_epochs, 600);
    set_ok(&c, "train.epochs=50");
    assert_int_equal(c.threshold_every, 8);
    assert_int_equal(c.refine_epochs, 10);
    set_ok(&c, "data.frames=/d");
    Status st;
    assert_int_equal(config_validate(&c, &st), 0);
    set_ok(&c, "train.epochs=3");
    assert_int_equal(c.threshold_every, 1);
    assert_int_equal(c.refine_epochs, 1);
    set_ok(&c, "threshold.every=40");
    set_ok(&c, "train.epochs=600");
    assert_int_equal(c.threshold_every, 40);    /* given: kept */
    assert_int_equal(c.refine_epochs, 120);     /* not given: follows */
    parse_ok(&c, "{\"threshold\": {\"refine_epochs\": 7}, \"train\": {\"epochs\": 900}}");
    assert_int_equal(c.refine_epochs, 7);
    assert_int_equal(c.threshold_every, 40);
}

/* The defaults before the template of round 2 (docs/battery.md), as a run folder of then holds them
 * in its config.json: every key of the first release written out, the keys added later absent. */
static const char *OLD_RUN_CONFIG =
    "{\"data\": {\"derivative\": {\"method\": \"central\"}},\n"
    " \"model\": {\"encoder\": [128, 64, 32], \"init\": \"glorot\"},\n"
    " \"library\": {\"trig\": false}, \"loss\": {\"l1\": 0.001, \"normalize\": false},\n"
    " \"train\": {\"batch\": 1024, \"epochs\": 3000},\n"
    " \"threshold\": {\"value\": 0.1, \"every\": 500, \"refine_epochs\": 1000}}\n";

/* A key that is resume-safe changes nothing in the digest; every other key does. Keys added after
 * the first release count only away from the value that behaves as before they existed, and a run's
 * config.json read by config_load_run takes that value for the keys it lacks, so the digest of a run
 * of the first release's defaults is the one framelaw computed then: 0x0742f5f2c47c9cf7, printed by
 * the build of commit 429953d (run folders made then must still load). */
static void test_digest(void **state) {
    (void)state;
    Config c;
    char tmp[256], path[300];
    assert_non_null(test_tmpdir(tmp, sizeof tmp));
    snprintf(path, sizeof path, "%s/config.json", tmp);
    test_write_file(path, OLD_RUN_CONFIG);
    Status lst;
    assert_int_equal(config_load_run(&c, path, &lst), 0);
    assert_int_equal(c.derivatives, DERIVS_FRAMES);
    assert_int_equal(c.map, MAP_CURVED);
    assert_int_equal(c.threshold_measure, MEASURE_COEFFICIENT);
    assert_int_equal(c.threshold_select, SELECT_NONE);
    assert_int_equal(c.canon_choose, CANON_CHOOSE_FIT); /* resume-safe, so outside the digest */
    assert_true(config_digest(&c) == 0x0742f5f2c47c9cf7ull);
    /* read as a user's config, the keys it lacks take today's defaults: another digest */
    Config u0;
    assert_int_equal(config_load(&u0, path, &lst), 0);
    assert_int_equal(u0.derivatives, DERIVS_LATENT);
    assert_int_equal(u0.canon_choose, CANON_CHOOSE_AUTO);
    assert_true(config_digest(&u0) != 0x0742f5f2c47c9cf7ull);
    test_rmtree(tmp);
    config_defaults(&c);
    set_ok(&c, "data.frames=/d");
    /* as in a run's config.json, which gives every key: the schedule no longer follows train.epochs */
    set_ok(&c, "threshold.every=250");
    set_ok(&c, "threshold.refine_epochs=300");
    uint64_t h0 = config_digest(&c);
    assert_true(config_digest(&c) == h0);   /* deterministic */

    static const char *const safe[] = {"train.epochs=9", "train.threads=3", "train.validate_every=7",
                                       "checkpoint.every=11", "checkpoint.keep=9", "output=elsewhere",
                                       "forecast.bound=0.3", "forecast.method=rk4", "forecast.tolerance=1e-6",
                                       "ensemble.members=7", "ensemble.method=selection", "ensemble.candidates=3",
                                       "ensemble.block=3", "ensemble.block_seconds=2",
                                       "ensemble.library_bagging=true", "ensemble.drop_fraction=0.5",
                                       "ensemble.inclusion=0.9", "ensemble.band_members=5",
                                       "canonical.tolerance=0.1", "canonical.cond_max=50", "canonical.choose=forecast",
                                       "train.memory_budget=3",
                                       "data.store=/elsewhere/s.store"};
    Config s = c;
    for (size_t i = 0; i < sizeof safe / sizeof safe[0]; i++) {
        set_ok(&s, safe[i]);
        assert_true(config_digest(&s) == h0);
    }
    static const char *const unsafe[] = {
        "data.frames=/e", "data.fps=31", "data.crop=[0,0,4,4]", "data.derivative.window=9",
        "data.validation.last=2", "model.encoder=[128,64]", "model.decoder=[32,64,128]",
        "model.latent=2", "library.exclude=[\"1\"]", "loss.l1=0", "optimizer.lr=0.002",
        "train.batch=512", "train.seed=2", "threshold.value=0.2", "threshold.refine_epochs=999",
        "library.constant=false", "data.gray=bt709", "model.init_epochs=5",
        "model.init_frames=100", "model.init=glorot", "model.derivatives=frames", "threshold.select=none",
        "threshold.measure=coefficient", "library.trig=false", "data.derivative.method=central",
        "model.map=linear",
    };
    for (size_t i = 0; i < sizeof unsafe / sizeof unsafe[0]; i++) {
        Config u = c;
        set_ok(&u, unsafe[i]);
        if (config_digest(&u) == h0) fail_msg("%s did not change the digest", unsafe[i]);
    }
    /* frames that moved: with data.frames_origin at the old place, the digest is the old one */
    Config mv = c;
    set_ok(&mv, "data.frames=/mnt/disk/d");
    assert_true(config_digest(&mv) != h0);
    set_ok(&mv, "data.frames_origin=/d");
    assert_true(config_digest(&mv) == h0);

    /* the list names real keys, and is NULL-terminated */
    int n = 0;
    for (; config_resume_safe_keys[n]; n++) {
        int found = 0;
        for (int i = 0; config_key_path(i); i++) found |= !strcmp(config_key_path(i), config_resume_safe_keys[n]);
        if (!found) fail_msg("resume-safe key %s is not in the table", config_resume_safe_keys[n]);
    }
    assert_int_equal(n, 23);
}

/* The bad configs: each with the substring its message must hold. The origin prefixes every one. */
static const struct {
    const char *json, *msg;
} BAD[] = {
    /* unknown keys */
    {"{\"modle\": {}}", "run.json: modle: unknown key (did you mean model?)"},
    {"{\"model\": {\"encodr\": [8]}}", "run.json: model.encodr: unknown key (did you mean model.encoder?)"},
    {"{\"epochs\": 5}", "run.json: epochs: unknown key (did you mean train.epochs?)"},
    {"{\"colour\": 1}", "run.json: colour: unknown key"},
    {"{\"data.fps\": 5}", "run.json: data.fps: unknown key (write nested objects"},
    /* wrong types */
    {"{\"model\": 3}", "run.json: model: must be an object"},
    {"{\"loss\": {\"l1\": \"0.1\"}}", "run.json: loss.l1: must be a number >= 0"},
    {"{\"library\": {\"trig\": 1}}", "run.json: library.trig: must be true or false"},
    {"{\"data\": {\"frames\": 7}}", "run.json: data.frames: must be a path"},
    {"{\"model\": {\"encoder\": 64}}", "run.json: model.encoder: must be a list of up to 16 positive integers"},
    {"{\"model\": {\"decoder\": \"mirror\"}}", "run.json: model.decoder: must be null or a list"},
    /* out of range */
    {"{\"loss\": {\"l1\": -1e-5}}", "run.json: loss.l1: must be a number >= 0"},
    {"{\"train\": {\"batch\": 0}}", "run.json: train.batch: must be an integer from 1 to 1048576"},
    {"{\"train\": {\"batch\": 32.5}}", "run.json: train.batch: must be an integer from 1 to"},
    {"{\"optimizer\": {\"beta2\": 1}}", "run.json: optimizer.beta2: must be a number >= 0 and < 1"},
    {"{\"optimizer\": {\"lr\": 0}}", "run.json: optimizer.lr: must be a number > 0"},
    {"{\"data\": {\"store_bits\": 12}}", "run.json: data.store_bits: must be one of 8, 16"},
    {"{\"train\": {\"epochs\": 1e300}}", "run.json: train.epochs: must be at most"},
    /* bad list elements, with the index */
    {"{\"model\": {\"encoder\": [64, 0, 16]}}", "run.json: model.encoder[1]: must be a positive integer"},
    {"{\"model\": {\"decoder\": [8, -2]}}", "run.json: model.decoder[1]: must be a positive integer"},
    {"{\"data\": {\"crop\": [0, -1, 8, 8]}}", "run.json: data.crop[1]: must be an integer >= 0"},
    {"{\"data\": {\"crop\": [0, 0, 8]}}", "run.json: data.crop: must be [x, y, width, height]"},
    {"{\"library\": {\"exclude\": [\"1\", 2]}}", "run.json: library.exclude[1]: must be a non-empty string"},
    {"{\"library\": {\"multipliers\": []}}", "run.json: library.multipliers: must have at least 1 entry"},
    {"{\"model\": {\"encoder\": [1,1,1,1,1,1,1,1,1,1,1,1,1,1,1,1,1]}}",
     "run.json: model.encoder: must have at most 16 entries (has 17)"},
    /* bad choices */
    {"{\"data\": {\"gray\": \"rec2020\"}}", "run.json: data.gray: must be one of bt601, bt709"},
    {"{\"model\": {\"activation\": \"relu\"}}", "run.json: model.activation: must be one of sigmoid, tanh, softplus, silu"},
    {"{\"data\": {\"derivative\": {\"method\": \"spline\"}}}", "run.json: data.derivative.method: must be one of central, savgol"},
    /* malformed JSON, with the line */
    {"{\n  \"data\": {\n    \"fps\": 30\n    \"gray\": \"bt601\"\n  }\n}", "run.json: line 4"},
    {"{\n  \"train\": {\"epochs\": 10,}\n}", "run.json: line 2"},
    {"{\"a\": 1} extra", "run.json: line 1, column 10: malformed JSON: text after the JSON value, near 'extra'"},
    /* what cJSON accepts but RFC 8259 ("The JavaScript Object Notation (JSON) Data Interchange
     * Format", IETF, 2017) does not: section 6 (numbers), 7 (strings), and the nesting limit */
    {"{\"train\": {\"epochs\": 01}}", "run.json: line 1, column 23: malformed JSON: a number may not have a leading zero"},
    {"{\"optimizer\": {\"lr\": 5.}}", "run.json: line 1, column 24: malformed JSON: a number needs digits after its decimal point"},
    {"{\"optimizer\": {\"lr\": .5}}", "run.json: line 1, column 22: malformed JSON: not a JSON value"},
    {"{\"optimizer\": {\"lr\": 1e}}", "run.json: line 1, column 24: malformed JSON: a number needs digits in its exponent"},
    {"{\"output\": \"a\\u0000b\"}", "run.json: line 1, column 15: malformed JSON: \\u0000 in a string"},
    {"{\"output\": \"a\tb\"}", "run.json: line 1, column 14: malformed JSON: a control character in a string"},
    {"{\"output\": \"a\\x41\"}", "run.json: line 1, column 15: malformed JSON: an escape other than"},
    {"{\"output\": \"\xff\"}", "run.json: line 1, column 13: malformed JSON: a byte that is not UTF-8 in a string"},
    {"{'output': 'x'}", "run.json: line 1, column 2: malformed JSON: a member name (a string in double quotes) expected"},
    {"   \n  ", "run.json: empty"},
    {"[1, 2]", "run.json: the top level must be a JSON object"},
    {"{\"data\": {\"fps\": 30, \"fps\": 25}}", "run.json: data.fps: duplicate key"},
    /* cross-key checks (config_validate) */
    {"{}", "data.frames: required (the folder of frames or recordings)"},
    {"{\"data\": {\"frames\": \"f\"}, \"train\": {\"epochs\": 300}, \"threshold\": {\"refine_epochs\": 300}}",
     "threshold.refine_epochs (300) must be less than train.epochs (300)"},
    {"{\"data\": {\"frames\": \"f\"}, \"train\": {\"epochs\": 800, \"warmup_epochs\": 500}, "
     "\"threshold\": {\"refine_epochs\": 300}}",
     "train.warmup_epochs (500) + threshold.refine_epochs (300) must be less than train.epochs (800)"},
    /* measured: the lantern demo's latent collapsed to a constant (0 active terms) without it */
    {"{\"data\": {\"frames\": \"f\"}, \"model\": {\"derivatives\": \"latent\"}, \"loss\": {\"normalize\": false}}",
     "model.derivatives latent needs loss.normalize true"},
    {"{\"data\": {\"frames\": \"f\", \"derivative\": {\"method\": \"savgol\", \"window\": 8}}}",
     "data.derivative.window: must be odd for savgol (is 8)"},
    {"{\"data\": {\"frames\": \"f\", \"derivative\": {\"method\": \"savgol\", \"window\": 5, \"degree\": 5}}}",
     "data.derivative.window (5) must be greater than data.derivative.degree (5)"},
    {"{\"data\": {\"frames\": \"f\", \"crop\": [0, 0, 16, 0]}}", "data.crop: width and height must both be positive"},
    {"{\"data\": {\"frames\": \"f\", \"size\": [32, 0]}}", "data.size: width and height must both be positive"},
    {"{\"data\": {\"frames\": \"f\"}, \"model\": {\"latent\": 17, \"order\": 2}}", "model.latent: at most 16"},
    {"{\"data\": {\"frames\": \"f\"}, \"library\": {\"degree\": 0, \"constant\": false, \"trig\": false}}", "library: no candidate terms"},
    {"{\"data\": {\"frames\": \"f\", \"validation\": {\"recordings\": [\"a\", \"a\"]}}}",
     "data.validation.recordings[1]: 'a' is listed twice"},
    {"{\"data\": {\"frames\": \"f\"}, \"optimizer\": {\"schedule\": \"cosine\", \"lr_min\": 0.01}}",
     "optimizer.lr_min (0.01) must not exceed optimizer.lr (0.001)"},
};

static void test_bad_configs(void **state) {
    (void)state;
    size_t n = sizeof BAD / sizeof BAD[0];
    assert_true(n >= 20);
    for (size_t i = 0; i < n; i++) {
        Config c, before;
        config_defaults(&c);
        memcpy(&before, &c, sizeof c);
        Status st;
        int rc = config_parse(&c, BAD[i].json, "run.json", NULL, &st);
        if (rc) assert_memory_equal(&before, &c, sizeof c);   /* a failed parse changes nothing */
        else rc = config_validate(&c, &st);
        if (rc != ST_INPUT || !strstr(st.msg, BAD[i].msg))
            fail_msg("bad config %zu %s\n  got %d '%s'\n  expected '%s'", i, BAD[i].json, rc, st.msg, BAD[i].msg);
    }
}

/* Nesting: cJSON stops at 1000 levels and says only "malformed"; the message says why, and where.
 * 1000 levels are JSON all the same (and then not a config). */
static void test_nested_too_deep(void **state) {
    (void)state;
    enum { D = 1001 };
    char *text = malloc(2 * D + 16);
    assert_non_null(text);
    size_t k = 0;
    text[k++] = '{', text[k++] = '"', text[k++] = 'a', text[k++] = '"', text[k++] = ':';
    for (int i = 0; i < D - 1; i++) text[k++] = '[';
    for (int i = 0; i < D - 1; i++) text[k++] = ']';
    text[k++] = '}';
    text[k] = 0;
    Config c;
    config_defaults(&c);
    Status st;
    /* 1001 levels in all: the object and 1000 arrays */
    assert_int_equal(config_parse(&c, text, "run.json", NULL, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "run.json: line 1, column 1005: malformed JSON: nested too deep (more than 1000 levels"));
    /* 1000 levels: parsed, then refused for what it says */
    memmove(text + 6, text + 7, strlen(text + 7) + 1);
    memmove(text + 6 + (D - 2), text + 7 + (D - 2), strlen(text + 7 + (D - 2)) + 1);
    assert_int_equal(config_parse(&c, text, "run.json", NULL, &st), ST_INPUT);
    assert_null(strstr(st.msg, "malformed"));
    free(text);
}

/* The choices the config accepts are the names the modules know. */
static void test_choices_match_modules(void **state) {
    (void)state;
    Config c;
    config_defaults(&c);
    char a[128];
    for (int i = 1; i < ACT_COUNT; i++) {     /* ACT_NONE is the linear output layer, not a choice */
        snprintf(a, sizeof a, "model.activation=%s", act_table[i].name);
        set_ok(&c, a);
        assert_int_equal(c.activation, i);
    }
    for (int i = 0; i < GRAY_COUNT; i++) {
        snprintf(a, sizeof a, "data.gray=%s", gray_std_names[i]);
        set_ok(&c, a);
    }
    for (int i = 0; i < STENCIL_KIND_COUNT; i++) {
        snprintf(a, sizeof a, "data.derivative.method=%s", stencil_kind_names[i]);
        set_ok(&c, a);
    }
}

/* Each key with a fixed set of string values, the field it is parsed into and the table that
 * names the field's values (the module's own where the field holds a module's enum). */
static const char *gray_name(int v) { return gray_std_names[v]; }
static const char *scale_name(int v) { return scale_mode_names[v]; }
static const char *deriv_name(int v) { return deriv_method_names[v]; }
static const char *act_name(int v) { return act_table[v].name; }
static const char *init_name(int v) { return model_init_names[v]; }
static const char *derivs_name(int v) { return latent_derivs_names[v]; }
static const char *map_name(int v) { return frames_map_names[v]; }
static const char *sched_name(int v) { return lr_schedule_names[v]; }
static const char *measure_name(int v) { return thresh_measure_names[v]; }
static const char *select_name(int v) { return thresh_select_names[v]; }
static const char *ensfit_name(int v) { return ensemble_fit_names[v]; }
static const char *canon_choose_name(int v) { return canon_choose_names[v]; }
static const char *ode_name(int v) { return ode_method_names[v]; }

static const struct {
    const char *path;
    size_t off;                 /* the field in Config (int-sized) */
    const char *(*name_of)(int);
    int first, count;           /* the values that are choices: [first, count) */
} CHOICE_KEYS[] = {
    {"data.gray", offsetof(Config, gray), gray_name, 0, GRAY_COUNT},
    {"data.scale", offsetof(Config, scale), scale_name, 0, SCALE_COUNT},
    {"data.derivative.method", offsetof(Config, derivative), deriv_name, 0, DERIV_METHOD_COUNT},
    {"model.activation", offsetof(Config, activation), act_name, ACT_NONE + 1, ACT_COUNT},
    {"model.map", offsetof(Config, map), map_name, 0, MAP_COUNT},
    {"model.init", offsetof(Config, init), init_name, 0, INIT_COUNT},
    {"model.derivatives", offsetof(Config, derivatives), derivs_name, 0, DERIVS_COUNT},
    {"optimizer.schedule", offsetof(Config, schedule), sched_name, 0, SCHED_COUNT},
    {"threshold.measure", offsetof(Config, threshold_measure), measure_name, 0, MEASURE_COUNT},
    {"threshold.select", offsetof(Config, threshold_select), select_name, 0, SELECT_COUNT},
    {"ensemble.method", offsetof(Config, ens_method), ensfit_name, 0, ENSFIT_COUNT},
    {"canonical.choose", offsetof(Config, canon_choose), canon_choose_name, 0, CANON_CHOOSE_COUNT},
    {"forecast.method", offsetof(Config, fc_method), ode_name, 0, ODE_METHOD_COUNT},
};

/* Choices are parsed once into enums: every allowed string of every such key sets its field to the
 * value of that name (in the table that names the enum), every value is the choice of exactly one
 * name, the config file writes the name back and reads it again to the same value, and a string
 * that is none of them is refused. A key given a fixed set of strings without an entry above fails
 * here too. */
static void test_choices_parse_into_enums(void **state) {
    (void)state;
    int n_keys = (int)(sizeof CHOICE_KEYS / sizeof CHOICE_KEYS[0]), seen = 0;
    for (int i = 0; config_key_path(i); i++) {
        const char *path = config_key_path(i);
        if (!config_choice(path, 0, NULL)) continue;
        int j = 0;
        while (j < n_keys && strcmp(CHOICE_KEYS[j].path, path)) j++;
        if (j == n_keys) fail_msg("%s: a key with choices that this test does not know", path);
        seen++;
    }
    assert_int_equal(seen, n_keys);
    for (int j = 0; j < n_keys; j++) {
        const char *path = CHOICE_KEYS[j].path;
        int hit[64] = {0}, n = 0, v = -1;
        assert_true(CHOICE_KEYS[j].count <= 64);
        for (const char *name; (name = config_choice(path, n, &v)); n++) {
            if (v < CHOICE_KEYS[j].first || v >= CHOICE_KEYS[j].count) fail_msg("%s=%s: value %d out of range", path, name, v);
            if (hit[v]++) fail_msg("%s=%s: value %d is the choice of two names", path, name, v);
            if (strcmp(CHOICE_KEYS[j].name_of(v), name))
                fail_msg("%s: '%s' parses to value %d, which its enum names '%s'", path, name, v, CHOICE_KEYS[j].name_of(v));
            Config c, back;
            config_defaults(&c);
            char a[160];
            snprintf(a, sizeof a, "%s=%s", path, name);
            set_ok(&c, a);
            assert_int_equal(*(const int *)((const char *)&c + CHOICE_KEYS[j].off), v);
            assert_true(config_given(&c, path));
            char *json = config_to_json(&c), want[160]; /* cJSON writes "key":<tab>value */
            snprintf(want, sizeof want, "\"%s\":\t\"%s\"", strrchr(path, '.') + 1, name);
            if (!strstr(json, want)) fail_msg("%s: the written config lacks %s", path, want);
            Status st;
            config_defaults(&back);
            if (config_parse(&back, json, "written", NULL, &st)) fail_msg("%s=%s: written config refused: %s", path, name, st.msg);
            free(json);
            assert_int_equal(*(const int *)((const char *)&back + CHOICE_KEYS[j].off), v);
            /* not a choice: a name with one letter more */
            snprintf(a, sizeof a, "%s=%sx", path, name);
            assert_int_equal(config_set(&c, a, &st), ST_INPUT);
            assert_non_null(strstr(st.msg, "must be one of"));
        }
        assert_int_equal(n, CHOICE_KEYS[j].count - CHOICE_KEYS[j].first); /* every value is a choice */
        assert_null(config_choice(path, -1, &v));
    }
    assert_null(config_choice("data.fps", 0, NULL));    /* a number has no choices */
    assert_null(config_choice("model.order", 0, NULL)); /* nor an integer with choices */
}

static void test_load(void **state) {
    (void)state;
    char dir[512], path[700], sub[600];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(sub, sizeof sub, "%s/cfg", dir);
    assert_int_equal(mkdir(sub, 0755), 0);
    char *real = realpath(sub, NULL);
    assert_non_null(real);

    /* relative data.frames and data.store: against the file's folder (made absolute); output: runs/<stem> */
    snprintf(path, sizeof path, "%s/pendulum.json", sub);
    test_write_file(path, "{\"data\": {\"frames\": \"../frames\", \"store\": \"stores/p.store\"}}\n");
    Config c;
    config_defaults(&c);
    Status st;
    assert_int_equal(config_load(&c, path, &st), 0);
    char want[CFG_PATH_MAX + 16];
    snprintf(want, sizeof want, "%s/../frames", real);
    assert_string_equal(c.frames, want);
    snprintf(want, sizeof want, "%s/stores/p.store", real);
    assert_string_equal(c.store, want);
    assert_string_equal(c.output, "runs/pendulum");
    assert_int_equal(config_validate(&c, &st), 0);

    /* an absolute data.frames and an explicit output stay as written */
    test_write_file(path, "{\"data\": {\"frames\": \"/x/y\"}, \"output\": \"out/here\"}");
    config_defaults(&c);
    assert_int_equal(config_load(&c, path, &st), 0);
    assert_string_equal(c.frames, "/x/y");
    assert_string_equal(c.output, "out/here");

    /* errors name the file */
    test_write_file(path, "{\n\"model\": {\"encoder\": [64, -1]}\n}");
    config_defaults(&c);
    assert_int_equal(config_load(&c, path, &st), ST_INPUT);
    snprintf(want, sizeof want, "%s: model.encoder[1]: must be a positive integer", path);
    assert_string_equal(st.msg, want);
    snprintf(path, sizeof path, "%s/missing.json", sub);
    assert_int_equal(config_load(&c, path, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, path));
    assert_non_null(strstr(st.msg, "cannot read"));

    /* the resolved config, written and loaded again, is the same config */
    snprintf(path, sizeof path, "%s/pendulum.json", sub);
    test_write_file(path, FULL);
    Config a, b;
    config_defaults(&a);
    assert_int_equal(config_load(&a, path, &st), 0);
    char *j = config_to_json(&a);
    snprintf(path, sizeof path, "%s/resolved.json", sub);
    test_write_file(path, j);
    config_defaults(&b);
    assert_int_equal(config_load(&b, path, &st), 0);
    assert_memory_equal(&a, &b, sizeof a);
    assert_true(config_digest(&a) == config_digest(&b));
    free(j);

    unlink(path);
    snprintf(path, sizeof path, "%s/pendulum.json", sub);
    unlink(path);
    rmdir(sub);
    rmdir(dir);
    free(real);
}

/* docs/config.md holds every key, and the key table exactly as the code writes it. Set
 * FRAMELAW_WRITE_KEYS=FILE to write the table to FILE (to paste into the page). */
static void test_docs(void **state) {
    (void)state;
    char *md = config_keys_markdown();
    const char *out = getenv("FRAMELAW_WRITE_KEYS");
    if (out && *out) test_write_file(out, md);
    char *doc = test_slurp("docs/config.md");
    if (!doc) fail_msg("docs/config.md not found (run the tests from the project root)");
    for (int i = 0; config_key_path(i); i++) {
        char k[160];
        snprintf(k, sizeof k, "`%s`", config_key_path(i));
        if (!strstr(doc, k)) fail_msg("docs/config.md does not list %s", k);
    }
    for (char *line = md, *end; (end = strchr(line, '\n')); line = end + 1) {
        *end = 0;
        if (!strstr(doc, line)) fail_msg("docs/config.md lacks the table row:\n%s", line);
    }
    for (int i = 0; config_resume_safe_keys[i]; i++) assert_non_null(strstr(doc, config_resume_safe_keys[i]));
    free(md);
    free(doc);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_defaults),
        cmocka_unit_test(test_round_trip),
        cmocka_unit_test(test_full_sets_every_key),
        cmocka_unit_test(test_set),
        cmocka_unit_test(test_digest),
        cmocka_unit_test(test_schedule_follows_epochs),
        cmocka_unit_test(test_bad_configs),
        cmocka_unit_test(test_nested_too_deep),
        cmocka_unit_test(test_choices_match_modules),
        cmocka_unit_test(test_choices_parse_into_enums),
        cmocka_unit_test(test_load),
        cmocka_unit_test(test_docs),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
