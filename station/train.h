/* train: trains a recipe's model on a dataset folder, with a progress line.
 *
 * Shared by `station train` and `station demo`.  Computes the recipe's
 * features for every labelled image, draws the class-balanced sample,
 * trains with early stopping on the held-out share, saves the model where
 * the recipe says and its metadata (hash, classes, features, sample counts,
 * and the image references the gates use, measured by the new model on up
 * to 24 training frames) beside it. */
#ifndef ST_TRAIN_H
#define ST_TRAIN_H

#include <stddef.h>

#include "core/recipe.h"

struct train_report {
    int images;                              /* labelled images used */
    size_t rows_train, rows_val;
    size_t per_class[RECIPE_MAX_CLASSES];
    int images_with[RECIPE_MAX_CLASSES];
    int best_round;
    double best_loss;
    double seconds;
    double ref_sharpness, ref_part_area_mm2;  /* image references (model_meta) */
    int ref_frames;
};

int train_recipe(const struct recipe *r, const char *data_dir, struct train_report *rep,
                 struct err *e);

/* Prints the per-class sample table and warnings for thin classes to stderr. */
void train_print_report(const struct recipe *r, const struct train_report *rep);

#endif
