/* booster: training and reference prediction through XGBoost's C API.
 *
 * Trains a multi:softprob model with tree_method hist on dense float rows
 * (NaN is the missing value, in training and prediction alike), with a
 * held-out validation set for early stopping: training stops when the
 * validation mlogloss has not improved for early_stop rounds, and the model
 * is cut back to the best round (XGBoosterSlice).  Models are saved as JSON
 * or UBJSON by file extension (.json / .ubj), never the deprecated binary
 * format.  A booster owns its XGBoost handle; it is not thread-safe. */
#ifndef ST_BOOSTER_H
#define ST_BOOSTER_H

#include <stddef.h>

#include "err.h"

struct booster_params {
    int rounds;            /* maximum boosting rounds, 1..5000 */
    int depth;             /* max_depth, 1..16 */
    double eta;            /* learning rate, (0, 1] */
    int seed;
    int threads;           /* nthread, >= 1 */
    int early_stop;        /* rounds without improvement before stopping; 0 = off */
};

/* Called after every round; val_loss is the validation mlogloss. */
typedef void (*booster_progress_fn)(void *user, int round, int rounds, double elapsed_s,
                                    double val_loss);

struct booster;

/* Trains on n rows of nfeat floats (row-major) with labels y (class index
 * stored as float), validating on nval rows.  best_round receives the
 * round kept (1-based); best_loss its validation loss (either may be
 * NULL).  With early_stop 0 every round is kept and the last is "best".
 * Labels that are not a class 0..nclasses-1 are refused (ST_ERANGE) before
 * XGBoost sees them; 2..16 classes, 1..4096 features. */
int booster_train(const struct booster_params *p, int nclasses, const float *x, const float *y,
                  size_t n, const float *xval, const float *yval, size_t nval, int nfeat,
                  booster_progress_fn progress, void *user, struct booster **out,
                  int *best_round, double *best_loss, struct err *e);

int booster_save(const struct booster *b, const char *path, struct err *e);
int booster_load(const char *path, int threads, struct booster **out, struct err *e);

/* Class probabilities for n rows via XGBoosterPredictFromDense:
 * prob[i * nclasses + k]. */
int booster_predict(struct booster *b, const float *x, size_t n, int nfeat, int nclasses,
                    float *prob, struct err *e);

void booster_free(struct booster *b);

#endif
