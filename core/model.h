/* model: the metadata file saved beside a trained model, and the check that
 * a model belongs to a recipe.
 *
 * XGBoost's own file holds only trees; MODEL.meta.json (format 1, JSON)
 * records what the trees mean: the product, the class names in order, the
 * feature names in order, the model file's SHA-256, the training sample
 * counts, the validation result, the image references the gates use
 * and, with a network as feature extractor, its ONNX file's SHA-256
 * (sharpness and part area over the training frames).  model_check refuses a model whose file
 * changed since training (hash), whose classes or features differ from the
 * recipe's, or that was trained for another product — each with a one-line
 * reason naming the file. */
#ifndef ST_MODEL_H
#define ST_MODEL_H

#include <stddef.h>

#include "recipe.h"
#include "sha256.h"

#define MODEL_META_FORMAT 2  /* 2 added the references; 1 still loads, without them */

struct model_meta {
    int format;
    char product[64];
    int recipe_version;
    char model_sha256[SHA256_HEX_LEN];
    char features_sha256[SHA256_HEX_LEN];   /* over the feature names joined by '\n' */
    char cnn_sha256[SHA256_HEX_LEN];        /* of the recipe's ONNX network, "" without one */
    int nfeatures;
    int nclasses;
    char classes[RECIPE_MAX_CLASSES][32];
    size_t samples[RECIPE_MAX_CLASSES];     /* training rows per class */
    int images[RECIPE_MAX_CLASSES];         /* images contributing per class */
    int best_round;
    int depth;
    double val_mlogloss;
    char trained_utc[32];
    /* medians over training frames (what a good frame of the product looks
     * like, for the gates); -1 when unknown */
    double ref_sharpness;
    double ref_part_area_mm2;
    int ref_frames;
};

/* MODEL_PATH.meta.json into buf. */
int model_meta_path(const char *model_path, char *buf, size_t len, struct err *e);

/* Fills the recipe-derived fields (product, version, classes, features) of m. */
int model_meta_from_recipe(const struct recipe *r, struct model_meta *m, struct err *e);

int model_meta_save(const char *model_path, const struct model_meta *m, struct err *e);
int model_meta_load(const char *model_path, struct model_meta *m, struct err *e);

/* Loads the metadata of r's model and checks it against r and the model file. */
int model_check(const struct recipe *r, struct model_meta *m, struct err *e);

#endif
