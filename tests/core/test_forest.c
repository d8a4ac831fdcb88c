/* core/forest: our evaluator of saved XGBoost models against XGBoost's own
 * C-API predictor (reference: XGBoosterPredictFromDense of libxgboost
 * 1.7.4 through core/booster, missing = NaN), on models trained here on
 * seeded synthetic data with NaN inputs, inputs equal to split conditions
 * and -0.0.  Tolerance 1e-6 in probability, the contract of forest.h.
 * Also: classify is the argmax of predict at any thread count, and broken
 * model files are refused with ST_EFORMAT naming the file.  The
 * comparison with Python's XGBoost is tests/ref/test_xgboost.py. */
#define _DEFAULT_SOURCE /* MAP_ANONYMOUS, MAP_NORESERVE */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

#include "core/booster.h"
#include "core/forest.h"

#define NCLASSES 4
#define NFEAT 7
#define NTRAIN 2000
#define NVAL 500
#define NTEST 1001 /* not a multiple of the 8-row groups or 256-row blocks */
#define TOL 1e-6

static uint64_t rng_next(uint64_t *s)
{
    *s ^= *s << 13;
    *s ^= *s >> 7;
    *s ^= *s << 17;
    return *s;
}

static float rng_unit(uint64_t *s) { return (float)(rng_next(s) >> 40) / (float)(1 << 24); }

/* Rows in [-1, 1) with about 6% NaN; the class depends on features 1, 3
 * and 4 with 10% label noise. */
static void make_set(uint64_t seed, size_t n, float *x, float *y)
{
    uint64_t s = seed;
    for (size_t i = 0; i < n; i++) {
        float *r = x + i * NFEAT;
        for (int k = 0; k < NFEAT; k++)
            r[k] = 2.0f * rng_unit(&s) - 1.0f;
        int c = (r[1] * r[3] > 0.05f) + 2 * (r[4] > 0.3f);
        if (rng_unit(&s) < 0.1f)
            c = (int)(rng_next(&s) % NCLASSES);
        if (y)
            y[i] = (float)c;
        for (int k = 0; k < NFEAT; k++)
            if (rng_unit(&s) < 0.06f)
                r[k] = NAN;
    }
}

#define NMODELS 3
/* A shallow model, one of depth 6 as the demo recipe trains them (the
 * evaluator's widest walk), and a deep one (depth 9) whose trees no fixed
 * small depth would cover. */
static const struct booster_params model_params[NMODELS] = {
    {.rounds = 20, .depth = 4, .eta = 0.3, .seed = 3, .threads = 1, .early_stop = 0},
    {.rounds = 30, .depth = 6, .eta = 0.3, .seed = 5, .threads = 1, .early_stop = 0},
    {.rounds = 5, .depth = 9, .eta = 0.5, .seed = 4, .threads = 1, .early_stop = 0},
};

struct fixture {
    char dir[64];
    char json[NMODELS][128], ubj[128], bad[128];
    float x[NTRAIN * NFEAT], y[NTRAIN], xv[NVAL * NFEAT], yv[NVAL];
    float xt[NTEST * NFEAT];
    float p[NTEST * NCLASSES], q[NTEST * NCLASSES];
};

static int setup(void **state)
{
    struct fixture *fx = calloc(1, sizeof *fx);
    if (!fx)
        return -1;
    snprintf(fx->dir, sizeof fx->dir, "/tmp/test_forest.XXXXXX");
    if (!mkdtemp(fx->dir)) {
        free(fx);
        return -1;
    }
    char dir[sizeof fx->dir]; /* snprintf from one member of fx into another would overlap */
    memcpy(dir, fx->dir, sizeof dir);
    make_set(101, NTRAIN, fx->x, fx->y);
    make_set(102, NVAL, fx->xv, fx->yv);
    struct err e;
    for (int m = 0; m < NMODELS; m++) {
        struct booster *b = NULL;
        snprintf(fx->json[m], sizeof fx->json[m], "%s/m%d.json", dir, m);
        if (booster_train(&model_params[m], NCLASSES, fx->x, fx->y, NTRAIN, fx->xv, fx->yv, NVAL,
                          NFEAT, NULL, NULL, &b, NULL, NULL, &e) != ST_OK ||
            booster_save(b, fx->json[m], &e) != ST_OK) {
            print_error("%s\n", e.msg);
            booster_free(b);
            return -1;
        }
        if (m == 0) {
            snprintf(fx->ubj, sizeof fx->ubj, "%s/m0.ubj", dir);
            if (booster_save(b, fx->ubj, &e) != ST_OK) {
                booster_free(b);
                return -1;
            }
        }
        booster_free(b);
    }
    snprintf(fx->bad, sizeof fx->bad, "%s/bad.json", dir);
    *state = fx;
    return 0;
}

static int teardown(void **state)
{
    struct fixture *fx = *state;
    for (int m = 0; m < NMODELS; m++)
        unlink(fx->json[m]);
    unlink(fx->ubj);
    unlink(fx->bad);
    rmdir(fx->dir);
    free(fx);
    return 0;
}

static json_t *model_trees(json_t *root)
{
    return json_object_get(
        json_object_get(json_object_get(json_object_get(root, "learner"), "gradient_booster"),
                        "model"),
        "trees");
}

static json_int_t get_int(json_t *tree, const char *key, size_t i)
{
    return json_integer_value(json_array_get(json_object_get(tree, key), i));
}

/* Test rows: fresh rows with NaN, then rows where three features are set
 * to split conditions of the model (the x < split boundary) and rows with
 * -0.0 (equal to +0.0 for the compare). */
static void make_test_rows(const char *model, float *xt)
{
    make_set(103, NTEST, xt, NULL);
    json_error_t jerr;
    json_t *root = json_load_file(model, 0, &jerr);
    assert_non_null(root);
    json_t *trees = model_trees(root);
    uint64_t s = 104;
    int placed = 0;
    for (size_t r = 0; r < NTEST / 3; r++) {
        for (int k = 0; k < 3; k++) {
            json_t *t = json_array_get(trees, rng_next(&s) % json_array_size(trees));
            size_t nn = json_array_size(json_object_get(t, "split_indices"));
            size_t i = rng_next(&s) % nn;
            if (get_int(t, "left_children", i) < 0)
                continue;
            int f = (int)get_int(t, "split_indices", i);
            xt[r * NFEAT + (size_t)f] =
                (float)json_number_value(json_array_get(json_object_get(t, "split_conditions"), i));
            placed++;
        }
    }
    for (size_t r = NTEST / 3; r < NTEST / 2; r++)
        xt[r * NFEAT + r % NFEAT] = -0.0f;
    json_decref(root);
    assert_true(placed > NTEST / 3); /* the boundary is really exercised */
}

static double max_abs_diff(const float *a, const float *b, size_t n)
{
    double d = 0.0;
    for (size_t i = 0; i < n; i++) {
        double t = fabs((double)a[i] - (double)b[i]);
        if (!(t <= d))
            d = t; /* NaN counts as a mismatch */
    }
    return d;
}

static void test_agrees_with_xgboost(void **state)
{
    struct fixture *fx = *state;
    struct err e;
    for (int m = 0; m < NMODELS; m++) {
        struct forest *f = NULL;
        struct booster *b = NULL;
        assert_int_equal(forest_load(fx->json[m], &f, &e), ST_OK);
        assert_int_equal(booster_load(fx->json[m], 1, &b, &e), ST_OK);
        assert_int_equal(forest_nclasses(f), NCLASSES);
        assert_int_equal(forest_ntrees(f), model_params[m].rounds * NCLASSES);
        assert_true(forest_max_depth(f) >= 1 && forest_max_depth(f) <= model_params[m].depth);
        assert_true(forest_nfeatures(f) >= 5 && forest_nfeatures(f) <= NFEAT);
        make_test_rows(fx->json[m], fx->xt);
        forest_predict(f, fx->xt, NTEST, NFEAT, fx->p);
        assert_int_equal(booster_predict(b, fx->xt, NTEST, NFEAT, NCLASSES, fx->q, &e), ST_OK);
        /* reference: XGBoosterPredictFromDense, missing NaN; tolerance 1e-6 */
        double d = max_abs_diff(fx->p, fx->q, NTEST * NCLASSES);
        if (!(d <= TOL)) {
            print_error("model %d: max |dp| = %g\n", m, d);
            fail();
        }
        booster_free(b);
        forest_free(f);
    }
}

/* f against XGBoosterPredictFromDense on the same model file, on fx->xt:
 * the reference, tolerance 1e-6. */
static void agrees_with_booster(struct fixture *fx, struct forest *f, const char *path, const char *what)
{
    struct err e;
    struct booster *b = NULL;
    assert_int_equal(booster_load(path, 1, &b, &e), ST_OK);
    forest_predict(f, fx->xt, NTEST, NFEAT, fx->p);
    assert_int_equal(booster_predict(b, fx->xt, NTEST, NFEAT, NCLASSES, fx->q, &e), ST_OK);
    double d = max_abs_diff(fx->p, fx->q, NTEST * NCLASSES);
    if (!(d <= TOL)) {
        print_error("%s: max |dp| = %g\n", what, d);
        fail();
    }
    booster_free(b);
}

/* Splits at exactly 0 on features 0 and 1, inputs +0.0 and -0.0 there:
 * XGBoost's float compare treats -0.0 < 0.0 as false, so -0.0 goes right. */
static void test_signed_zero(void **state)
{
    struct fixture *fx = *state;
    json_error_t jerr;
    json_t *root = json_load_file(fx->json[0], 0, &jerr);
    assert_non_null(root);
    json_t *trees = model_trees(root);
    int zeroed = 0;
    for (size_t t = 0; t < json_array_size(trees); t++) {
        json_t *tr = json_array_get(trees, t);
        json_t *sc = json_object_get(tr, "split_conditions");
        for (size_t i = 0; i < json_array_size(sc); i++) {
            if (get_int(tr, "left_children", i) >= 0 && get_int(tr, "split_indices", i) <= 1) {
                json_array_set_new(sc, i, json_real(0.0));
                zeroed++;
            }
        }
    }
    assert_true(zeroed > 10);
    assert_int_equal(json_dump_file(root, fx->bad, JSON_COMPACT), 0);
    json_decref(root);

    make_set(106, NTEST, fx->xt, NULL);
    for (size_t r = 0; r < NTEST; r++)
        for (int k = 0; k < 2; k++)
            if ((r >> k) & 1)
                fx->xt[r * NFEAT + (size_t)k] = (r >> (k + 2)) & 1 ? -0.0f : 0.0f;
    struct err e;
    struct forest *f = NULL;
    assert_int_equal(forest_load(fx->bad, &f, &e), ST_OK);
    agrees_with_booster(fx, f, fx->bad, "zero splits");
    forest_free(f);
}

/* The depth-6 model with its split values moved by one to seven float
 * steps each, so that its slots hold more distinct values than a byte's
 * rank tells apart: evaluated by the wide walk instead of the rank walk
 * (the assertion on forest_walk checks that it was), still in agreement
 * with XGBoost on the same file.  On a processor with AVX-512 BW and VBMI
 * the model as trained takes the rank walk. */
static void test_rank_walk_limits(void **state)
{
    struct fixture *fx = *state;
    struct err e;
    struct forest *f = NULL;
    assert_int_equal(forest_load(fx->json[1], &f, &e), ST_OK);
    __builtin_cpu_init();
    int bytes = __builtin_cpu_supports("avx512bw") && __builtin_cpu_supports("avx512vbmi");
    assert_string_equal(forest_walk(f), bytes ? "rank" : __builtin_cpu_supports("avx512f") ? "wide" : "scalar");
    forest_free(f);
    json_error_t jerr;
    json_t *root = json_load_file(fx->json[1], 0, &jerr);
    assert_non_null(root);
    json_t *trees = model_trees(root);
    int moved = 0;
    for (size_t t = 0; t < json_array_size(trees); t++) {
        json_t *tr = json_array_get(trees, t);
        json_t *sc = json_object_get(tr, "split_conditions");
        for (size_t i = 0; i < json_array_size(sc); i++) {
            if (get_int(tr, "left_children", i) < 0)
                continue;
            float c = (float)json_number_value(json_array_get(sc, i));
            for (int k = 0; k < moved % 7 + 1; k++)
                c = nextafterf(c, moved % 2 ? INFINITY : -INFINITY);
            json_array_set_new(sc, i, json_real(c));
            moved++;
        }
    }
    assert_true(moved > 2 * 256);
    assert_int_equal(json_dump_file(root, fx->bad, JSON_COMPACT), 0);
    json_decref(root);
    assert_int_equal(forest_load(fx->bad, &f, &e), ST_OK);
    assert_string_equal(forest_walk(f), __builtin_cpu_supports("avx512f") ? "wide" : "scalar");
    make_test_rows(fx->bad, fx->xt);
    agrees_with_booster(fx, f, fx->bad, "distinct splits");
    forest_free(f);
}

/* Every walk this processor has gives the same bits as the scalar one
 * (which the comparisons with XGBoost above cover): probabilities by
 * memcmp, for the shallow and the depth-6 model, on the edge rows. */
static void test_walks_agree_bitwise(void **state)
{
    struct fixture *fx = *state;
    struct err e;
    static const char *walks[] = {"wide", "rank"};
    int compared = 0;
    for (int m = 0; m < 2; m++) {
        struct forest *f = NULL;
        assert_int_equal(forest_load(fx->json[m], &f, &e), ST_OK);
        make_test_rows(fx->json[m], fx->xt);
        assert_int_equal(forest_use_walk(f, "scalar"), ST_OK);
        forest_predict(f, fx->xt, NTEST, NFEAT, fx->q);
        for (int k = 0; k < 2; k++) {
            if (forest_use_walk(f, walks[k]) != ST_OK)
                continue;
            assert_string_equal(forest_walk(f), walks[k]);
            forest_predict(f, fx->xt, NTEST, NFEAT, fx->p);
            if (memcmp(fx->p, fx->q, sizeof fx->p) != 0) {
                print_error("model %d: the %s walk differs from the scalar one\n", m, walks[k]);
                fail();
            }
            compared++;
        }
        assert_int_equal(forest_use_walk(f, "none"), ST_EINVAL);
        forest_free(f);
    }
    __builtin_cpu_init();
    /* each model gets the wide walk on AVX-512, and the rank walk with BW and VBMI */
    int expect = __builtin_cpu_supports("avx512f") ? 2 : 0;
    if (__builtin_cpu_supports("avx512bw") && __builtin_cpu_supports("avx512vbmi"))
        expect += 2;
    assert_int_equal(compared, expect);
}

/* Every label 0: the gradients are the same for all rows, no split gains,
 * and XGBoost grows single-leaf trees; a model of no splits at all. */
static void test_single_leaf_trees(void **state)
{
    struct fixture *fx = *state;
    float y0[NVAL] = {0};
    const struct booster_params p = {
        .rounds = 3, .depth = 3, .eta = 0.3, .seed = 1, .threads = 1, .early_stop = 0};
    struct err e;
    struct booster *b = NULL;
    struct forest *f = NULL;
    assert_int_equal(booster_train(&p, NCLASSES, fx->xv, y0, NVAL, fx->xv, y0, NVAL, NFEAT, NULL,
                                   NULL, &b, NULL, NULL, &e),
                     ST_OK);
    assert_int_equal(booster_save(b, fx->bad, &e), ST_OK);
    assert_int_equal(forest_load(fx->bad, &f, &e), ST_OK);
    assert_int_equal(forest_ntrees(f), 3 * NCLASSES);
    assert_int_equal(forest_max_depth(f), 0);
    assert_int_equal(forest_nfeatures(f), 0);
    make_set(107, NTEST, fx->xt, NULL);
    forest_predict(f, fx->xt, NTEST, NFEAT, fx->p);
    assert_int_equal(booster_predict(b, fx->xt, NTEST, NFEAT, NCLASSES, fx->q, &e), ST_OK);
    /* reference: XGBoosterPredictFromDense; tolerance 1e-6 */
    assert_true(max_abs_diff(fx->p, fx->q, NTEST * NCLASSES) <= TOL);
    uint8_t cls[NTEST];
    float conf[NTEST];
    assert_int_equal(forest_classify(f, fx->xt, NTEST, NFEAT, 2, cls, conf, &e), ST_OK);
    for (int i = 0; i < NTEST; i++)
        assert_true(cls[i] == 0 && conf[i] == fx->p[i * NCLASSES]);
    forest_free(f);
    booster_free(b);
}

static void test_classify_is_argmax(void **state)
{
    struct fixture *fx = *state;
    struct err e;
    struct forest *f = NULL;
    assert_int_equal(forest_load(fx->json[0], &f, &e), ST_OK);
    make_set(105, NTEST, fx->xt, NULL);
    forest_predict(f, fx->xt, NTEST, NFEAT, fx->p);
    static uint8_t cls[3][NTEST];
    static float conf[3][NTEST];
    for (int t = 0; t < 3; t++)
        assert_int_equal(forest_classify(f, fx->xt, NTEST, NFEAT, t + 1, cls[t], conf[t], &e),
                         ST_OK);
    int seen[NCLASSES] = {0};
    for (int i = 0; i < NTEST; i++) {
        const float *p = fx->p + i * NCLASSES;
        int arg = 0;
        for (int k = 1; k < NCLASSES; k++)
            if (p[k] > p[arg])
                arg = k;
        /* reference: argmax (first on ties) of forest_predict, bitwise */
        assert_int_equal(cls[0][i], arg);
        assert_true(conf[0][i] == p[arg]);
        seen[arg]++;
        for (int t = 1; t < 3; t++) {
            assert_int_equal(cls[t][i], cls[0][i]);
            assert_true(conf[t][i] == conf[0][i]);
        }
    }
    for (int k = 0; k < NCLASSES; k++)
        assert_true(seen[k] > 0);
    /* Fewer features than the model splits on: refused, or NaN. */
    int need = forest_nfeatures(f);
    assert_int_equal(forest_classify(f, fx->xt, 10, need - 1, 2, cls[0], conf[0], &e), ST_EINVAL);
    forest_predict(f, fx->xt, 10, need - 1, fx->p);
    assert_true(isnan(fx->p[0]) && isnan(fx->p[10 * NCLASSES - 1]));
    forest_free(f);
}

/* forest_classify_at on rows picked in any order, with repeats: the same
 * bits as forest_classify on those rows (itself the argmax of
 * forest_predict, which agrees with XGBoost above). */
static void test_classify_at_picks_rows(void **state)
{
    struct fixture *fx = *state;
    struct err e;
    enum { NPICK = 1500 };
    static uint8_t cls[NTEST], pcls[NPICK];
    static float conf[NTEST], pconf[NPICK];
    static uint32_t pix[NPICK];
    for (int m = 0; m < NMODELS; m++) {
        struct forest *f = NULL;
        assert_int_equal(forest_load(fx->json[m], &f, &e), ST_OK);
        make_set(109 + (uint64_t)m, NTEST, fx->xt, NULL);
        assert_int_equal(forest_classify(f, fx->xt, NTEST, NFEAT, 1, cls, conf, &e), ST_OK);
        uint64_t s = 77 + (uint64_t)m;
        for (int i = 0; i < NPICK; i++)
            pix[i] = (uint32_t)(rng_next(&s) % NTEST);
        assert_int_equal(forest_classify_at(f, fx->xt, NFEAT, pix, NPICK, pcls, pconf, &e), ST_OK);
        for (int i = 0; i < NPICK; i++) {
            assert_int_equal(pcls[i], cls[pix[i]]);
            assert_true(pconf[i] == conf[pix[i]]);
        }
        /* fewer features than the model splits on: refused */
        assert_int_equal(forest_classify_at(f, fx->xt, forest_nfeatures(f) - 1, pix, 10, pcls,
                                            pconf, &e),
                         ST_EINVAL);
        forest_free(f);
    }
}

/* Rows further apart than a 32-bit gather index reaches (more than 2^31
 * floats) in one block: still the rows' own results.  The rows lie in a
 * sparse mapping of which only their pages are touched. */
static void test_classify_at_far_rows(void **state)
{
    struct fixture *fx = *state;
    struct err e;
    struct forest *f = NULL;
    assert_int_equal(forest_load(fx->json[1], &f, &e), ST_OK);
    const size_t far = ((size_t)1 << 31) / NFEAT + 4096; /* rows */
    const size_t bytes = (far + 64) * NFEAT * sizeof(float);
    float *x = mmap(NULL, bytes, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS | MAP_NORESERVE,
                    -1, 0);
    if (x == MAP_FAILED) {
        print_error("cannot map %zu bytes of address space for the far rows\n", bytes);
        fail();
    }
    make_set(111, 64, fx->xt, NULL);
    uint32_t pix[64];
    for (int i = 0; i < 64; i++) {
        pix[i] = (uint32_t)(i % 2 ? far + (size_t)i : (size_t)i);
        memcpy(x + (size_t)pix[i] * NFEAT, fx->xt + (size_t)i * NFEAT, NFEAT * sizeof(float));
    }
    uint8_t cls[64], pcls[64];
    float conf[64], pconf[64];
    assert_int_equal(forest_classify(f, fx->xt, 64, NFEAT, 1, cls, conf, &e), ST_OK);
    assert_int_equal(forest_classify_at(f, x, NFEAT, pix, 64, pcls, pconf, &e), ST_OK);
    for (int i = 0; i < 64; i++) {
        assert_int_equal(pcls[i], cls[i]);
        assert_true(pconf[i] == conf[i]);
    }
    munmap(x, bytes);
    forest_free(f);
}

enum breakage {
    BREAK_TRUNCATED,
    BREAK_OBJECTIVE,
    BREAK_BOOSTER,
    BREAK_NUM_CLASS,
    BREAK_CHILD_RANGE,
    BREAK_SHARED_CHILD,
    BREAK_CYCLE,
    BREAK_SPLIT_INDEX,
    BREAK_LEAF_VALUE,
    BREAK_TREE_INFO,
    BREAK_CATEGORICAL,
    BREAK_LEAF_SUM,
    BREAK_COUNT
};

static void set_int(json_t *tree, const char *key, size_t i, json_int_t v)
{
    json_t *arr = json_object_get(tree, key);
    assert_true(json_is_array(arr) && i < json_array_size(arr));
    assert_int_equal(json_array_set_new(arr, i, json_integer(v)), 0);
}

/* Writes fx->bad as the shallow model with one defect. */
static void write_broken(struct fixture *fx, enum breakage what)
{
    json_error_t jerr;
    json_t *root = json_load_file(fx->json[0], 0, &jerr);
    assert_non_null(root);
    json_t *learner = json_object_get(root, "learner");
    json_t *t0 = json_array_get(model_trees(root), 0);
    assert_true(get_int(t0, "left_children", 0) == 1 && get_int(t0, "right_children", 0) == 2);
    /* first leaf of tree 0, for the leaf value */
    size_t leaf = 0;
    while (get_int(t0, "left_children", leaf) != -1)
        leaf++;
    switch (what) {
    case BREAK_TRUNCATED: {
        char *text = json_dumps(root, JSON_COMPACT);
        assert_non_null(text);
        FILE *fp = fopen(fx->bad, "w");
        assert_non_null(fp);
        fwrite(text, 1, strlen(text) / 2, fp);
        fclose(fp);
        free(text);
        json_decref(root);
        return;
    }
    case BREAK_OBJECTIVE:
        json_object_set_new(json_object_get(learner, "objective"), "name",
                            json_string("multi:softmax"));
        break;
    case BREAK_BOOSTER:
        json_object_set_new(json_object_get(learner, "gradient_booster"), "name",
                            json_string("dart"));
        break;
    case BREAK_NUM_CLASS:
        json_object_set_new(json_object_get(learner, "learner_model_param"), "num_class",
                            json_string("1"));
        break;
    case BREAK_CHILD_RANGE:
        set_int(t0, "left_children", 0, 999);
        break;
    case BREAK_SHARED_CHILD:
        set_int(t0, "right_children", 0, 1);
        break;
    case BREAK_CYCLE:
        assert_true(get_int(t0, "left_children", 1) != -1);
        set_int(t0, "left_children", 1, 0);
        break;
    case BREAK_SPLIT_INDEX:
        set_int(t0, "split_indices", 0, 5000);
        break;
    case BREAK_LEAF_VALUE: /* beyond float range: infinite as a float */
        json_array_set_new(json_object_get(t0, "split_conditions"), leaf, json_real(1e300));
        break;
    case BREAK_TREE_INFO: {
        json_t *info = json_object_get(
            json_object_get(json_object_get(learner, "gradient_booster"), "model"), "tree_info");
        json_array_remove(info, json_array_size(info) - 1);
        break;
    }
    case BREAK_CATEGORICAL:
        set_int(t0, "split_type", 0, 1);
        break;
    case BREAK_LEAF_SUM: {
        /* every leaf 1e38, finite as a float (FLT_MAX is about 3.4e38, C11
         * 5.2.4.2.2), but a class's trees sum beyond it: the margin would be
         * infinite and softmax NaN */
        json_t *trees = model_trees(root);
        assert_true(json_array_size(trees) >= 6);  /* 2 or more trees per class */
        for (size_t t = 0; t < json_array_size(trees); t++) {
            json_t *tr = json_array_get(trees, t);
            for (size_t i = 0; i < json_array_size(json_object_get(tr, "left_children")); i++)
                if (get_int(tr, "left_children", i) == -1)
                    json_array_set_new(json_object_get(tr, "split_conditions"), i, json_real(1e38));
        }
        break;
    }
    case BREAK_COUNT:
        fail();
    }
    assert_int_equal(json_dump_file(root, fx->bad, JSON_COMPACT), 0);
    json_decref(root);
}

static void test_refuses_bad_files(void **state)
{
    struct fixture *fx = *state;
    struct err e;
    struct forest *f = NULL;
    for (int k = 0; k < BREAK_COUNT; k++) {
        write_broken(fx, (enum breakage)k);
        err_clear(&e);
        int rc = forest_load(fx->bad, &f, &e);
        if (rc != ST_EFORMAT || !strstr(e.msg, fx->bad)) {
            print_error("breakage %d: rc %d, \"%s\"\n", k, rc, e.msg);
            fail();
        }
        assert_null(f);
    }
    /* UBJSON is XGBoost's, not ours. */
    assert_int_equal(forest_load(fx->ubj, &f, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, fx->ubj));
    char absent[160];
    snprintf(absent, sizeof absent, "%s/absent.json", fx->dir);
    assert_int_equal(forest_load(absent, &f, &e), ST_EIO);
    assert_non_null(strstr(e.msg, absent));
    /* The unbroken file still loads: the defects above were the cause. */
    assert_int_equal(forest_load(fx->json[0], &f, &e), ST_OK);
    forest_free(f);
    forest_free(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_agrees_with_xgboost),
        cmocka_unit_test(test_signed_zero),
        cmocka_unit_test(test_single_leaf_trees),
        cmocka_unit_test(test_classify_is_argmax),
        cmocka_unit_test(test_classify_at_picks_rows),
        cmocka_unit_test(test_classify_at_far_rows),
        cmocka_unit_test(test_rank_walk_limits),
        cmocka_unit_test(test_walks_agree_bitwise),
        cmocka_unit_test(test_refuses_bad_files),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
