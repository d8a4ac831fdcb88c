/* train: trains a recipe's model on a dataset folder, with a progress line.
 *
 * Shared by `station train` and `station demo`.  Computes the recipe's
 * features for every labelled image, draws the class-balanced sample,
 * trains with early stopping on the held-out share, saves the model where
 * the recipe says and its metadata (hash, classes, features, sample counts,
 * and the image references the gates use, measured by the new model on up
 * to 24 training frames) beside it.  With a holdout share F > 0 the images
 * core/dataset.h's split holds out at F are never read: no pixel of theirs
 * is sampled, and they do not set the references; `station evaluate
 * --split F` measures the model on exactly them. */
#ifndef ST_TRAIN_H
#define ST_TRAIN_H

#include <stddef.h>

#include "core/recipe.h"

struct train_report {
    int images;                              /* labelled images used */
    int held_out;                            /* labelled images held out (--split) */
    double holdout;
    size_t labelled[RECIPE_MAX_CLASSES];     /* labelled pixels per class, before sampling */
    size_t rows_train, rows_val;
    size_t per_class[RECIPE_MAX_CLASSES];
    int images_with[RECIPE_MAX_CLASSES];
    int best_round;
    double best_loss;
    double seconds;
    double ref_sharpness, ref_part_area_mm2;  /* image references (model_meta) */
    int ref_frames;
};

int train_recipe(const struct recipe *r, const char *data_dir, double holdout,
                 struct train_report *rep, struct err *e);

/* Below these a defect class is too thin to trust: a warning, not an error
 * (common practice, no source: a handful of parts and a few hundred
 * pixels; with fewer than 3 images the model knows the defect from one or
 * two parts' light and surface, and with 300 labelled pixels the 20%
 * held out for early stopping is about 60 pixels, too few for its loss to
 * notice the class). */
#define TRAIN_THIN_PIXELS 300
#define TRAIN_THIN_IMAGES 3

/* Prints the per-class table (labelled pixels, sampled pixels, images) and
 * a warning for each thin defect class to stderr. */
void train_print_report(const struct recipe *r, const struct train_report *rep);

#endif
