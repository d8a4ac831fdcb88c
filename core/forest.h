/* forest: our own evaluator of a saved XGBoost multi:softprob tree model.
 *
 * Loads the JSON model that booster_save writes (learner.gradient_booster
 * .model.trees, tree_info, base_score, num_class) into flat node arrays and
 * evaluates it exactly as XGBoost does: go left when x < split (float
 * compare), missing (NaN) follows default_left, leaf values summed per class
 * in tree order in float starting from base_score, then softmax.  It agrees
 * with XGBoosterPredictFromDense to 1e-6 in probability (tests prove it).
 * A loaded forest is read-only and may be shared by threads.
 *
 * forest_load refuses (ST_EFORMAT, naming the file) anything but a gbtree
 * multi:softprob model with 2..16 classes, the same tree count per class,
 * numeric splits on feature indices below 4096 (at most 2048 distinct
 * (feature, default direction) pairs), finite split and leaf values, and
 * trees (every node reached once from the root) at most 64 deep.  Nodes
 * not reachable from the root (XGBoost's deleted nodes) are ignored.
 * Evaluation allocates nothing: its scratch lives on the stack (about
 * 120 KiB per calling or worker thread). */
#ifndef ST_FOREST_H
#define ST_FOREST_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"

struct forest;

int forest_load(const char *json_path, struct forest **out, struct err *e);
void forest_free(struct forest *f);

int forest_nclasses(const struct forest *f);
int forest_nfeatures(const struct forest *f);  /* largest split index + 1 */
int forest_ntrees(const struct forest *f);
int forest_max_depth(const struct forest *f);
/* Which tree walk evaluation takes on this processor: "rank" (AVX-512 BW
 * and VBMI, trees at most 6 deep, at most 255 distinct split values per
 * (feature, default direction) and at most 256 such pairs), "wide"
 * (AVX-512, trees at most 6 deep) or "scalar".  All three give the same
 * bits; forest_load picks the fastest that applies. */
const char *forest_walk(const struct forest *f);
/* Makes evaluation take the named walk instead (for tests and benchmarks
 * comparing them); ST_EINVAL, nothing changed, when it does not apply to
 * this model or processor.  Not while other threads evaluate f. */
int forest_use_walk(struct forest *f, const char *walk);

/* Probabilities for n rows of nfeat floats: prob[i * nclasses + k].
 * nfeat must be at least forest_nfeatures(f); if it is not, every
 * probability is NaN. */
void forest_predict(const struct forest *f, const float *x, size_t n, int nfeat, float *prob);

/* Per row: class = argmax probability, conf = that probability.  Rows are
 * split over `threads` threads (at most 64; 1 or less runs on the calling
 * thread), each taking whole blocks of rows.  Returns ST_OK, ST_EINVAL when
 * nfeat is smaller than the model needs, or ST_ELIB when a thread cannot
 * start (cls and conf are then incomplete). */
int forest_classify(const struct forest *f, const float *x, size_t n, int nfeat, int threads,
                    uint8_t *cls, float *conf, struct err *e);

/* forest_classify on the calling thread for n rows picked by index: row i
 * is the nfeat floats at x + pix[i] * nfeat; its class and confidence go
 * to cls[i] and conf[i].  Rows in any order, repeats allowed; blocks of
 * rows are walked together whether or not they are adjacent in x, so a
 * caller with many short runs of rows loses nothing by handing them over
 * in one call.  ST_EINVAL when nfeat is smaller than the model needs. */
int forest_classify_at(const struct forest *f, const float *x, int nfeat, const uint32_t *pix,
                       size_t n, uint8_t *cls, float *conf, struct err *e);

#endif
