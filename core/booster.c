#include "booster.h"

#include <errno.h>
#include <inttypes.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <xgboost/c_api.h>

struct booster {
    BoosterHandle h;
};

/* XGBoost keeps its last error per thread, so reading it right after the
 * failing call is safe even with several boosters in flight. */
static int xgb_fail(struct err *e, const char *what)
{
    return err_set(e, ST_ELIB, "XGBoost %s failed: %s", what, XGBGetLastError());
}

static int check_params(const struct booster_params *p, int nclasses, size_t n, size_t nval,
                        int nfeat, struct err *e)
{
    if (p->rounds < 1 || p->rounds > 5000)
        return err_set(e, ST_ERANGE, "booster: rounds %d outside 1..5000", p->rounds);
    if (p->depth < 1 || p->depth > 16)
        return err_set(e, ST_ERANGE, "booster: depth %d outside 1..16", p->depth);
    if (!(p->eta > 0.0 && p->eta <= 1.0))
        return err_set(e, ST_ERANGE, "booster: eta %g outside (0, 1]", p->eta);
    if (p->threads < 1)
        return err_set(e, ST_ERANGE, "booster: threads %d below 1", p->threads);
    if (p->early_stop < 0)
        return err_set(e, ST_ERANGE, "booster: early_stop %d below 0", p->early_stop);
    if (nclasses < 2 || nclasses > 16)
        return err_set(e, ST_ERANGE, "booster: %d classes outside 2..16", nclasses);
    if (nfeat < 1 || nfeat > 4096)
        return err_set(e, ST_ERANGE, "booster: %d features outside 1..4096", nfeat);
    if (n == 0 || nval == 0)
        return err_set(e, ST_EINVAL, "booster: %zu training and %zu validation rows (both needed)",
                       n, nval);
    /* bst_ulong is 64-bit; the product bounds what XGBoost will index. */
    if (n > SIZE_MAX / (size_t)nfeat / sizeof(float) ||
        nval > SIZE_MAX / (size_t)nfeat / sizeof(float))
        return err_set(e, ST_ENOMEM, "booster: %zu rows of %d features overflow",
                       n > nval ? n : nval, nfeat);
    return ST_OK;
}

/* Labels outside 0..nclasses-1 would make XGBoost abort training with a
 * message that names neither the row nor the set. */
static int check_labels(const float *y, size_t n, int nclasses, const char *set, struct err *e)
{
    for (size_t i = 0; i < n; i++) {
        float v = y[i];
        if (!(v >= 0.0f && v < (float)nclasses) || v != floorf(v))
            return err_set(e, ST_ERANGE, "booster: %s label %zu is %g, not a class 0..%d", set, i,
                           (double)v, nclasses - 1);
    }
    return ST_OK;
}

static int make_dmatrix(const float *x, const float *y, size_t n, int nfeat, DMatrixHandle *out,
                        struct err *e)
{
    if (XGDMatrixCreateFromMat(x, (bst_ulong)n, (bst_ulong)nfeat, NAN, out) != 0) {
        *out = NULL;
        return xgb_fail(e, "XGDMatrixCreateFromMat");
    }
    if (XGDMatrixSetFloatInfo(*out, "label", y, (bst_ulong)n) != 0)
        return xgb_fail(e, "XGDMatrixSetFloatInfo(label)");
    return ST_OK;
}

static int set_param(BoosterHandle h, const char *key, const char *val, struct err *e)
{
    if (XGBoosterSetParam(h, key, val) != 0)
        return err_set(e, ST_ELIB, "XGBoost XGBoosterSetParam(%s=%s) failed: %s", key, val,
                       XGBGetLastError());
    return ST_OK;
}

static int set_train_params(BoosterHandle h, const struct booster_params *p, int nclasses,
                            struct err *e)
{
    char num_class[16], depth[16], eta[32], seed[16], nthread[16];
    snprintf(num_class, sizeof num_class, "%d", nclasses);
    snprintf(depth, sizeof depth, "%d", p->depth);
    snprintf(eta, sizeof eta, "%.17g", p->eta);
    snprintf(seed, sizeof seed, "%d", p->seed);
    snprintf(nthread, sizeof nthread, "%d", p->threads);
    const char *kv[][2] = {
        {"verbosity", "0"},        {"objective", "multi:softprob"}, {"num_class", num_class},
        {"tree_method", "hist"},   {"max_depth", depth},           {"eta", eta},
        {"seed", seed},            {"nthread", nthread},           {"eval_metric", "mlogloss"},
    };
    for (size_t i = 0; i < sizeof kv / sizeof kv[0]; i++) {
        int rc = set_param(h, kv[i][0], kv[i][1], e);
        if (rc != ST_OK)
            return rc;
    }
    return ST_OK;
}

/* XGBoost reports "[round]\tval-mlogloss:0.123" and offers no numeric API. */
static int parse_loss(const char *s, double *loss, struct err *e)
{
    static const char key[] = "val-mlogloss:";
    const char *p = strstr(s, key);
    if (!p)
        return err_set(e, ST_ELIB, "XGBoost evaluation \"%s\" lacks %s", s, key);
    char *end;
    errno = 0;
    double v = strtod(p + sizeof key - 1, &end);
    if (end == p + sizeof key - 1 || errno != 0 || !isfinite(v))
        return err_set(e, ST_ELIB, "XGBoost evaluation \"%s\" has no finite loss", s);
    *loss = v;
    return ST_OK;
}

static double seconds_since(const struct timespec *t0)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)(t.tv_sec - t0->tv_sec) + 1e-9 * (double)(t.tv_nsec - t0->tv_nsec);
}

int booster_train(const struct booster_params *p, int nclasses, const float *x, const float *y,
                  size_t n, const float *xval, const float *yval, size_t nval, int nfeat,
                  booster_progress_fn progress, void *user, struct booster **out,
                  int *best_round, double *best_loss, struct err *e)
{
    *out = NULL;
    int rc = check_params(p, nclasses, n, nval, nfeat, e);
    if (rc == ST_OK)
        rc = check_labels(y, n, nclasses, "training", e);
    if (rc == ST_OK)
        rc = check_labels(yval, nval, nclasses, "validation", e);
    if (rc != ST_OK)
        return rc;

    DMatrixHandle dtrain = NULL, dval = NULL;
    BoosterHandle h = NULL;
    struct booster *b = NULL;
    int best = 0, trained = 0;
    double best_l = INFINITY;
    struct timespec t0;
    clock_gettime(CLOCK_MONOTONIC, &t0);

    rc = make_dmatrix(x, y, n, nfeat, &dtrain, e);
    if (rc != ST_OK)
        goto fail;
    rc = make_dmatrix(xval, yval, nval, nfeat, &dval, e);
    if (rc != ST_OK)
        goto fail;
    if (XGBoosterCreate((DMatrixHandle[]){dtrain, dval}, 2, &h) != 0) {
        h = NULL;
        rc = xgb_fail(e, "XGBoosterCreate");
        goto fail;
    }
    rc = set_train_params(h, p, nclasses, e);
    if (rc != ST_OK)
        goto fail;

    for (int r = 0; r < p->rounds; r++) {
        if (XGBoosterUpdateOneIter(h, r, dtrain) != 0) {
            rc = xgb_fail(e, "XGBoosterUpdateOneIter");
            goto fail;
        }
        const char *res;
        if (XGBoosterEvalOneIter(h, r, &dval, (const char *[]){"val"}, 1, &res) != 0) {
            rc = xgb_fail(e, "XGBoosterEvalOneIter");
            goto fail;
        }
        double loss = 0.0;
        rc = parse_loss(res, &loss, e);
        if (rc != ST_OK)
            goto fail;
        trained = r + 1;
        if (progress)
            progress(user, trained, p->rounds, seconds_since(&t0), loss);
        /* Without early stopping the last round is the one kept, so it is
         * "best" by definition; with it, only a strict improvement counts,
         * as in XGBoost's own EarlyStopping callback. */
        if (p->early_stop == 0 || loss < best_l) {
            best_l = loss;
            best = trained;
        } else if (trained - best >= p->early_stop) {
            break;
        }
    }
    if (best < trained) {
        BoosterHandle sliced;
        if (XGBoosterSlice(h, 0, best, 1, &sliced) != 0) {
            rc = xgb_fail(e, "XGBoosterSlice");
            goto fail;
        }
        XGBoosterFree(h);
        h = sliced;
    }

    b = malloc(sizeof *b);
    if (!b) {
        rc = err_set(e, ST_ENOMEM, "booster: out of memory");
        goto fail;
    }
    b->h = h;
    h = NULL;
    *out = b;
    if (best_round)
        *best_round = best;
    if (best_loss)
        *best_loss = best_l;
    rc = ST_OK;
fail:
    if (h)
        XGBoosterFree(h);
    if (dval)
        XGDMatrixFree(dval);
    if (dtrain)
        XGDMatrixFree(dtrain);
    return rc;
}

static int has_suffix(const char *s, const char *suffix)
{
    size_t ls = strlen(s), lx = strlen(suffix);
    return ls > lx && strcmp(s + ls - lx, suffix) == 0;
}

int booster_save(const struct booster *b, const char *path, struct err *e)
{
    /* XGBoost picks the format from the extension and falls back to its
     * deprecated binary format for anything else; we never want that. */
    if (!has_suffix(path, ".json") && !has_suffix(path, ".ubj"))
        return err_set(e, ST_EINVAL, "%s: model file must end in .json or .ubj", path);
    if (XGBoosterSaveModel(b->h, path) != 0)
        return err_set(e, ST_ELIB, "%s: XGBoost cannot save the model: %s", path,
                       XGBGetLastError());
    return ST_OK;
}

int booster_load(const char *path, int threads, struct booster **out, struct err *e)
{
    *out = NULL;
    if (threads < 1)
        return err_set(e, ST_ERANGE, "%s: threads %d below 1", path, threads);
    /* XGBoost's own message for a missing file is a stack trace. */
    FILE *fp = fopen(path, "rb");
    if (!fp) {
        char buf[128];
        if (strerror_r(errno, buf, sizeof buf) != 0)
            snprintf(buf, sizeof buf, "error %d", errno);
        return err_set(e, ST_EIO, "%s: cannot open model: %s", path, buf);
    }
    fclose(fp);

    BoosterHandle h = NULL;
    struct booster *b = NULL;
    int rc;
    if (XGBoosterCreate(NULL, 0, &h) != 0) {
        h = NULL;
        rc = err_set(e, ST_ELIB, "%s: XGBoosterCreate failed: %s", path, XGBGetLastError());
        goto fail;
    }
    if (XGBoosterLoadModel(h, path) != 0) {
        rc = err_set(e, ST_ELIB, "%s: XGBoost cannot load the model: %s", path, XGBGetLastError());
        goto fail;
    }
    char nthread[16];
    snprintf(nthread, sizeof nthread, "%d", threads);
    if (XGBoosterSetParam(h, "nthread", nthread) != 0 ||
        XGBoosterSetParam(h, "verbosity", "0") != 0) {
        rc = err_set(e, ST_ELIB, "%s: XGBoosterSetParam failed: %s", path, XGBGetLastError());
        goto fail;
    }
    b = malloc(sizeof *b);
    if (!b) {
        rc = err_set(e, ST_ENOMEM, "%s: out of memory", path);
        goto fail;
    }
    b->h = h;
    *out = b;
    return ST_OK;
fail:
    if (h)
        XGBoosterFree(h);
    return rc;
}

int booster_predict(struct booster *b, const float *x, size_t n, int nfeat, int nclasses,
                    float *prob, struct err *e)
{
    if (nfeat < 1 || nclasses < 1)
        return err_set(e, ST_EINVAL, "booster_predict: %d features, %d classes", nfeat, nclasses);
    if (n == 0)
        return ST_OK;
    if (n > SIZE_MAX / (size_t)nclasses / sizeof *prob)
        return err_set(e, ST_ENOMEM, "booster_predict: %zu rows overflow", n);
    /* __array_interface__ (version 3) of the caller's row-major floats,
     * marked read-only; XGBoost reads them in place. */
    char values[256];
    snprintf(values, sizeof values,
             "{\"data\": [%" PRIuPTR ", true], \"shape\": [%zu, %d], \"typestr\": \"<f4\", "
             "\"version\": 3}",
             (uintptr_t)x, n, nfeat);
    /* XGBoost's JSON reader accepts the NaN literal, as Python's json.dumps
     * writes it; 1.7's in-place predictor requires cache_id (0: none).  NULL
     * proxy because there is no base margin. */
    static const char config[] =
        "{\"type\": 0, \"training\": false, \"iteration_begin\": 0, \"iteration_end\": 0, "
        "\"strict_shape\": false, \"cache_id\": 0, \"missing\": NaN}";
    const bst_ulong *shape;
    bst_ulong dim;
    const float *res;
    if (XGBoosterPredictFromDense(b->h, values, config, NULL, &shape, &dim, &res) != 0)
        return xgb_fail(e, "XGBoosterPredictFromDense");
    if (dim != 2 || shape[0] != (bst_ulong)n || shape[1] != (bst_ulong)nclasses)
        return err_set(e, ST_EINVAL,
                       "booster_predict: model gives %" PRIu64 "-d output (%" PRIu64
                       " x %" PRIu64 "), expected %zu x %d",
                       (uint64_t)dim, (uint64_t)shape[0], (uint64_t)(dim > 1 ? shape[1] : 1), n,
                       nclasses);
    memcpy(prob, res, n * (size_t)nclasses * sizeof *prob);
    return ST_OK;
}

void booster_free(struct booster *b)
{
    if (!b)
        return;
    XGBoosterFree(b->h);
    free(b);
}
