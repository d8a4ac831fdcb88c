/* label_quick: the labelling tool's quick model — trained in seconds on what
 * is painted so far, held in memory only, shown as a prediction overlay so
 * the engineer paints where it is wrong.
 *
 * The sample is the recipe's features (lighting evened out by the recipe's
 * flat field, as `station train` does) at painted pixels: at most
 * LABEL_QUICK_CAP per class per image, drawn by core/trainset.h's reservoir
 * from the saved masks of the dataset's other images and from the mask
 * being edited for the current one.  Training is the recipe's booster
 * (core/booster.h) cut down: at most LABEL_QUICK_ROUNDS rounds of depth at
 * most LABEL_QUICK_DEPTH on one thread, no early stopping, a tenth of the sample held out
 * only because XGBoost's training wants a validation set.  Classes nobody
 * has painted yet are simply never predicted.  The recipe's model file is
 * never read or written. */
#ifndef ST_LABEL_QUICK_H
#define ST_LABEL_QUICK_H

#include <stddef.h>

#include "core/booster.h"
#include "core/dataset.h"
#include "core/image.h"
#include "core/recipe.h"

#define LABEL_QUICK_CAP 1500
#define LABEL_QUICK_ROUNDS 20
#define LABEL_QUICK_DEPTH 5

struct label_quick_report {
    int images;                       /* images with painted pixels */
    size_t rows;                      /* sampled pixels */
    size_t per_class[RECIPE_MAX_CLASSES];
    int rounds;
    double seconds;
};

/* Trains on the dataset's painted pixels, image cur's taken from cur_mask
 * (1 channel, the picture's size) instead of its file.  ST_EFORMAT when
 * fewer than two classes are painted. */
int label_quick_train(const struct recipe *r, const struct dataset *ds, int cur,
                      const struct image *cur_mask, struct booster **out,
                      struct label_quick_report *rep, struct err *e);

/* The most probable class of every pixel of img as a 1-channel map. */
int label_quick_predict(const struct recipe *r, struct booster *b, const struct image *img,
                        struct image **pred, struct err *e);

#endif
