/* core/booster: training, early stopping, saving and loading through
 * XGBoost's C API.  The reference is XGBoost itself: a model saved and
 * loaded back (JSON and UBJSON) must predict what the trained booster
 * predicts (tolerance 0: the same trees are evaluated by the same code),
 * and the saved JSON, read with jansson, must hold the rounds that
 * booster_train reports.  The comparison with Python's XGBoost is
 * tests/ref/test_xgboost.py. */
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
#include <unistd.h>

#include "core/booster.h"

#define NCLASSES 4
#define NFEAT 7
#define NTRAIN 2000
#define NVAL 601
#define NTEST 333

static uint64_t rng_next(uint64_t *s)
{
    *s ^= *s << 13;
    *s ^= *s >> 7;
    *s ^= *s << 17;
    return *s;
}

static float rng_unit(uint64_t *s) { return (float)(rng_next(s) >> 40) / (float)(1 << 24); }

/* Rows of NFEAT features in [-1, 1) with about 4% NaN; with `learnable`
 * the class is a fixed function of features 0, 2 and 5 (so a model can
 * learn it), otherwise it is noise. */
static void make_set(uint64_t seed, size_t n, int learnable, float *x, float *y)
{
    uint64_t s = seed;
    for (size_t i = 0; i < n; i++) {
        float *r = x + i * NFEAT;
        for (int k = 0; k < NFEAT; k++)
            r[k] = 2.0f * rng_unit(&s) - 1.0f;
        int c = (r[0] > 0.1f) + 2 * (r[2] + 0.5f * r[5] > -0.2f);
        y[i] = (float)(learnable ? c : (int)(rng_next(&s) % NCLASSES));
        for (int k = 0; k < NFEAT; k++)
            if (rng_unit(&s) < 0.04f)
                r[k] = NAN;
    }
}

struct fixture {
    char dir[64];
    float x[NTRAIN * NFEAT], y[NTRAIN];
    float xv[NVAL * NFEAT], yv[NVAL];
    float xt[NTEST * NFEAT], yt[NTEST];
};

static int setup(void **state)
{
    struct fixture *fx = calloc(1, sizeof *fx);
    if (!fx)
        return -1;
    snprintf(fx->dir, sizeof fx->dir, "/tmp/test_booster.XXXXXX");
    if (!mkdtemp(fx->dir)) {
        free(fx);
        return -1;
    }
    *state = fx;
    return 0;
}

static int teardown(void **state)
{
    struct fixture *fx = *state;
    static const char *const names[] = {"m.json", "m.ubj", "m.bin", "early.json", "junk.json"};
    char path[128];
    for (size_t i = 0; i < sizeof names / sizeof names[0]; i++) {
        snprintf(path, sizeof path, "%s/%s", fx->dir, names[i]);
        unlink(path);
    }
    rmdir(fx->dir);
    free(fx);
    return 0;
}

struct progress_log {
    int calls, last_round, rounds;
    double loss[64];
};

static void on_progress(void *user, int round, int rounds, double elapsed_s, double val_loss)
{
    struct progress_log *log = user;
    assert_int_equal(round, log->last_round + 1);
    assert_true(elapsed_s >= 0.0);
    assert_true(isfinite(val_loss) && val_loss > 0.0);
    log->rounds = rounds;
    log->last_round = round;
    if (log->calls < 64)
        log->loss[log->calls] = val_loss;
    log->calls++;
}

static const struct booster_params base_params = {
    .rounds = 20, .depth = 4, .eta = 0.3, .seed = 7, .threads = 1, .early_stop = 0};

static double max_abs_diff(const float *a, const float *b, size_t n)
{
    double d = 0.0;
    for (size_t i = 0; i < n; i++) {
        double t = fabs((double)a[i] - (double)b[i]);
        if (!(t <= d))
            d = t; /* NaN propagates as a failure */
    }
    return d;
}

/* Number of trees XGBoost wrote into a JSON model. */
static long saved_trees(const char *path)
{
    json_error_t jerr;
    json_t *root = json_load_file(path, 0, &jerr);
    assert_non_null(root);
    json_t *trees = json_object_get(
        json_object_get(json_object_get(json_object_get(root, "learner"), "gradient_booster"),
                        "model"),
        "trees");
    assert_true(json_is_array(trees));
    long n = (long)json_array_size(trees);
    json_decref(root);
    return n;
}

static void test_train_save_load(void **state)
{
    struct fixture *fx = *state;
    make_set(11, NTRAIN, 1, fx->x, fx->y);
    make_set(12, NVAL, 1, fx->xv, fx->yv);
    make_set(13, NTEST, 1, fx->xt, fx->yt);
    struct err e;
    struct booster *b = NULL;
    struct progress_log log = {0};
    int best = 0;
    double best_loss = 0.0;
    assert_int_equal(booster_train(&base_params, NCLASSES, fx->x, fx->y, NTRAIN, fx->xv, fx->yv,
                                   NVAL, NFEAT, on_progress, &log, &b, &best, &best_loss, &e),
                     ST_OK);
    /* Without early stopping every round is kept and reported. */
    assert_int_equal(log.calls, 20);
    assert_int_equal(log.rounds, 20);
    assert_int_equal(best, 20);
    assert_true(best_loss == log.loss[19]);
    /* A learnable rule: the validation loss must fall well below the
     * loss of a uniform guess, ln 4 = 1.386. */
    assert_true(log.loss[19] < log.loss[0]);
    assert_true(best_loss < 0.7);

    static float p[NTEST * NCLASSES], q[NTEST * NCLASSES];
    assert_int_equal(booster_predict(b, fx->xt, NTEST, NFEAT, NCLASSES, p, &e), ST_OK);
    int correct = 0;
    for (int i = 0; i < NTEST; i++) {
        float sum = 0.0f;
        int arg = 0;
        for (int k = 0; k < NCLASSES; k++) {
            sum += p[i * NCLASSES + k];
            if (p[i * NCLASSES + k] > p[i * NCLASSES + arg])
                arg = k;
        }
        /* softmax output: rows sum to 1 within float rounding (1e-5) */
        assert_true(fabsf(sum - 1.0f) < 1e-5f);
        correct += arg == (int)fx->yt[i];
    }
    assert_true(correct > NTEST * 3 / 4);

    char path[128];
    static const char *const exts[] = {"json", "ubj"};
    for (int k = 0; k < 2; k++) {
        snprintf(path, sizeof path, "%s/m.%s", fx->dir, exts[k]);
        assert_int_equal(booster_save(b, path, &e), ST_OK);
        struct booster *l = NULL;
        assert_int_equal(booster_load(path, 2, &l, &e), ST_OK);
        assert_int_equal(booster_predict(l, fx->xt, NTEST, NFEAT, NCLASSES, q, &e), ST_OK);
        /* reference: the trained booster's own prediction; tolerance 0 */
        assert_true(max_abs_diff(p, q, NTEST * NCLASSES) == 0.0);
        booster_free(l);
    }
    snprintf(path, sizeof path, "%s/m.json", fx->dir);
    assert_int_equal(saved_trees(path), 20 * NCLASSES);
    /* The model knows its class count: asking for another is refused. */
    assert_int_equal(booster_predict(b, fx->xt, NTEST, NFEAT, 3, q, &e), ST_EINVAL);
    booster_free(b);
}

static void test_early_stopping(void **state)
{
    struct fixture *fx = *state;
    make_set(21, NTRAIN, 0, fx->x, fx->y);
    make_set(22, NVAL, 0, fx->xv, fx->yv);
    struct booster_params p = base_params;
    p.rounds = 60;
    p.early_stop = 3;
    struct err e;
    struct booster *b = NULL;
    struct progress_log log = {0};
    int best = 0;
    double best_loss = 0.0;
    assert_int_equal(booster_train(&p, NCLASSES, fx->x, fx->y, NTRAIN, fx->xv, fx->yv, NVAL,
                                   NFEAT, on_progress, &log, &b, &best, &best_loss, &e),
                     ST_OK);
    /* Noise labels: the validation loss stops improving early, training
     * stops early_stop rounds after the best, and the best is the minimum
     * of the losses seen (first one on ties). */
    assert_true(best >= 1 && best < 60);
    assert_int_equal(log.calls, best + 3);
    double min = log.loss[0];
    int argmin = 1;
    for (int i = 1; i < log.calls; i++)
        if (log.loss[i] < min) {
            min = log.loss[i];
            argmin = i + 1;
        }
    assert_int_equal(best, argmin);
    assert_true(best_loss == min);
    char path[128];
    snprintf(path, sizeof path, "%s/early.json", fx->dir);
    assert_int_equal(booster_save(b, path, &e), ST_OK);
    /* reference: the trees XGBoost saves after XGBoosterSlice */
    assert_int_equal(saved_trees(path), (long)best * NCLASSES);
    booster_free(b);
}

static void test_refusals(void **state)
{
    struct fixture *fx = *state;
    make_set(31, NTRAIN, 1, fx->x, fx->y);
    make_set(32, NVAL, 1, fx->xv, fx->yv);
    struct err e;
    struct booster *b = NULL;
    struct booster_params p = base_params;
    p.rounds = 2;
    p.depth = 0;
    assert_int_equal(booster_train(&p, NCLASSES, fx->x, fx->y, NTRAIN, fx->xv, fx->yv, NVAL,
                                   NFEAT, NULL, NULL, &b, NULL, NULL, &e),
                     ST_ERANGE);
    assert_null(b);
    p.depth = 3;
    fx->yv[17] = (float)NCLASSES; /* label outside the classes */
    assert_int_equal(booster_train(&p, NCLASSES, fx->x, fx->y, NTRAIN, fx->xv, fx->yv, NVAL,
                                   NFEAT, NULL, NULL, &b, NULL, NULL, &e),
                     ST_ERANGE);
    assert_non_null(strstr(e.msg, "validation label 17"));
    fx->yv[17] = 1.0f;
    assert_int_equal(booster_train(&p, NCLASSES, fx->x, fx->y, NTRAIN, fx->xv, fx->yv, NVAL,
                                   NFEAT, NULL, NULL, &b, NULL, NULL, &e),
                     ST_OK);

    char path[128];
    snprintf(path, sizeof path, "%s/m.bin", fx->dir);
    assert_int_equal(booster_save(b, path, &e), ST_EINVAL);
    assert_non_null(strstr(e.msg, path));
    assert_int_equal(access(path, F_OK), -1); /* nothing written */
    booster_free(b);

    struct booster *l = NULL;
    snprintf(path, sizeof path, "%s/absent.json", fx->dir);
    assert_int_equal(booster_load(path, 1, &l, &e), ST_EIO);
    assert_non_null(strstr(e.msg, path));
    snprintf(path, sizeof path, "%s/junk.json", fx->dir);
    FILE *fp = fopen(path, "w");
    assert_non_null(fp);
    fputs("{\"learner\": [1, 2", fp);
    fclose(fp);
    assert_int_equal(booster_load(path, 1, &l, &e), ST_ELIB);
    assert_non_null(strstr(e.msg, path));
    assert_null(l);
    booster_free(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_train_save_load, setup, teardown),
        cmocka_unit_test_setup_teardown(test_early_stopping, setup, teardown),
        cmocka_unit_test_setup_teardown(test_refusals, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
