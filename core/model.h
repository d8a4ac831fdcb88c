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
 * reason naming the file.
 *
 * Format 3 adds the recipe's training basis: the part of the recipe the
 * trees depend on, as short "key: value" lines (product; class names in
 * order; feature names (their SHA-256) and normalisation; the classifier's
 * rounds, depth, learning rate, seed, early stop, samples per class and
 * validation share) and the SHA-256 of those lines.  Zones, tolerances,
 * gates, scale, flat field, part, trigger, camera, masters and evidence are
 * not in it: editing them changes the recipe's version (core/recipever.h)
 * but not what the trees mean (a recalibrated scale or flat field of the
 * same bench is what keeps frames looking as they did in training).  model_check
 * refuses a format-3 model whose basis differs, naming the first line that
 * differs; formats 1 and 2 are checked as before (product, classes,
 * features, model file hash).  Also stored: the whole recipe file's SHA-256
 * and version at training, and the share of images held out (train
 * --split). */
#ifndef ST_MODEL_H
#define ST_MODEL_H

#include <stddef.h>

#include "recipe.h"
#include "sha256.h"

#define MODEL_META_FORMAT 3  /* 2 added the references, 3 the basis; 1 and 2 still load */
#define MODEL_BASIS_MAX 1024

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
    size_t labelled[RECIPE_MAX_CLASSES];    /* labelled pixels per class (format 3) */
    int best_round;
    int depth;
    double val_mlogloss;
    char trained_utc[32];
    /* medians over training frames (what a good frame of the product looks
     * like, for the gates); -1 when unknown */
    double ref_sharpness;
    double ref_part_area_mm2;
    int ref_frames;
    char recipe_sha256[SHA256_HEX_LEN];  /* the recipe file at training; "" before format 3 */
    char basis[MODEL_BASIS_MAX];         /* the training basis lines; "" before format 3 */
    char basis_sha256[SHA256_HEX_LEN];
    double holdout;                      /* share of images held out of training, 0: none */
};

/* The training basis text of r ("key: value\n" lines) into buf, and its SHA-256. */
int model_basis(const struct recipe *r, char buf[MODEL_BASIS_MAX], char hex[SHA256_HEX_LEN],
                struct err *e);

/* MODEL_PATH.meta.json into buf. */
int model_meta_path(const char *model_path, char *buf, size_t len, struct err *e);

/* Fills the recipe-derived fields (product, version, classes, features) of m. */
int model_meta_from_recipe(const struct recipe *r, struct model_meta *m, struct err *e);

int model_meta_save(const char *model_path, const struct model_meta *m, struct err *e);
int model_meta_load(const char *model_path, struct model_meta *m, struct err *e);

/* Loads the metadata of r's model and checks it against r and the model file. */
int model_check(const struct recipe *r, struct model_meta *m, struct err *e);

#endif
