/* trainset: the class-balanced sample of labelled pixels a model trains on.
 *
 * From each labelled image at most `cap` pixels per class are drawn
 * uniformly (reservoir sampling with the seeded generator of core/rng.h, so a seed
 * gives the same sample everywhere); unlabelled pixels (255) are never
 * drawn, which is why a few painted strokes train as well as full masks.
 * Rows are feature vectors copied out of the image's feature stack.  The
 * split into training and validation rows is random by pixel with a seed.
 * A trainset owns its rows. */
#ifndef ST_TRAINSET_H
#define ST_TRAINSET_H

#include <stddef.h>
#include <stdint.h>

#include "image.h"

#define TRAINSET_MAX_CLASSES 16

struct trainset {
    int nfeat, nclasses;
    size_t n, cap;
    float *x;        /* n * nfeat */
    float *y;        /* class index as float, as XGBoost takes labels */
    size_t per_class[TRAINSET_MAX_CLASSES];
    int images_with[TRAINSET_MAX_CLASSES];  /* images contributing to each class */
    size_t labelled[TRAINSET_MAX_CLASSES];  /* labelled pixels seen, before the cap */
};

void trainset_init(struct trainset *ts, int nfeat, int nclasses);
void trainset_clear(struct trainset *ts);

/* Samples from one image; labels is the 1-channel mask of the same size as fs.
 * rng is the caller's generator state, advanced by the call. */
int trainset_add_image(struct trainset *ts, const struct fstack *fs, const struct image *labels,
                       int cap, uint64_t *rng, struct err *e);

/* Splits all into train and val (both initialised here) with val_fraction of
 * the rows of each class in val (at least one row of a class with >= 2). */
int trainset_split(const struct trainset *all, double val_fraction, uint64_t seed,
                   struct trainset *train, struct trainset *val, struct err *e);

#endif
