/* recipe_show: a recipe in plain words, for `station recipe show`.
 *
 * recipe_show_json gathers everything a person needs to know about a
 * recipe into one JSON object: product, version, the file's SHA-256 and its
 * content hash against the last `station recipe save` (core/recipever.h),
 * the model (its SHA-256, whether model_check accepts it for this recipe and
 * why not, the training data summary stored with it: pixels and images per
 * class, date, rounds, depth, held-out share, references), classes with
 * colours, features, classifier, scale and calibration state, part, zones
 * with their shapes in mm, the tolerance of every class and of every zone
 * that has its own, each with a "text" sentence saying what it allows,
 * gates, trigger, camera, verification and evidence.  recipe_show_print
 * writes that object as text, so the two forms never disagree.  A missing or
 * foreign model is not an error: the object says so. */
#ifndef ST_RECIPE_SHOW_H
#define ST_RECIPE_SHOW_H

#include <jansson.h>
#include <stdio.h>

#include "core/recipe.h"

json_t *recipe_show_json(const struct recipe *r, struct err *e);
void recipe_show_print(const json_t *o, FILE *f);

#endif
