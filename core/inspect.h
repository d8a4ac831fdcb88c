/* inspect: the per-frame pipeline, frame in, verdict out.
 *
 * An inspector owns everything one frame needs: the recipe (a copy), the
 * loaded tree model, the feature context and every per-frame buffer, sized
 * for the last frame size and reused while the size stays (first touch of
 * fresh memory costs more than the work on small frames).  inspector_new
 * refuses a model that does not belong to the recipe (model_check).
 * When the recipe names a flat field (core/flatfield.h) the inspector loads
 * it and evens out every frame's lighting into a buffer of its own before
 * features and quality read it; a frame of another size is an error.
 * inspector_run computes features, classifies every pixel (class and
 * confidence), locates the part and paints its zones, finds the defect
 * regions, measures image quality (against the last frame too, for a frozen
 * camera) and judges;
 * any failure inside leaves the caller with an error and no verdict, and
 * the caller reports NO_VERDICT — never PASS.  One inspector serves one
 * thread at a time; the stages themselves use recipe.feat.threads and
 * recipe.train.threads worker threads. */
#ifndef ST_INSPECT_H
#define ST_INSPECT_H

#include "features.h"
#include "forest.h"
#include "image.h"
#include "judge.h"
#include "model.h"
#include "recipe.h"
#include "regions.h"
#include "zones.h"

/* Wall-clock milliseconds per stage.  With two threads or more the gates'
 * measures run beside the regions stage (part, zones, regions): verdict_ms
 * is then what is left of them once the regions are done, plus the
 * verdict itself, so the four always add up to the inspection's time. */
struct inspect_times {
    double features_ms, classify_ms, regions_ms, verdict_ms;
};

struct inspector;

int inspector_new(const struct recipe *r, struct inspector **out, struct err *e);
void inspector_free(struct inspector *in);

/* Features and per-pixel classes only (what evaluation needs). */
int inspector_classify(struct inspector *in, const struct image *img, struct inspect_times *t,
                       struct err *e);
/* Classify, locate the part, paint its zones, find the regions and
 * measure quality (what training measures its references with); no verdict. */
int inspector_measure(struct inspector *in, const struct image *img, struct inspect_times *t,
                      struct err *e);
/* inspector_measure, then the verdict. */
int inspector_run(struct inspector *in, const struct image *img, struct judgement *j,
                  struct inspect_times *t, struct err *e);

/* Results of the last call; owned by the inspector, valid until the next call. */
const struct image *inspector_classes(const struct inspector *in);
/* With the locating pass on, only the box it computed features for holds
 * this frame's features (core/inspect.c); with it off, the whole stack. */
const struct fstack *inspector_features(const struct inspector *in);
const struct forest *inspector_forest(const struct inspector *in);
const struct region_set *inspector_regions(const struct inspector *in);
const struct quality *inspector_quality(const struct inspector *in);
const struct recipe *inspector_recipe(const struct inspector *in);
const struct part_pose *inspector_pose(const struct inspector *in);
/* Zone index per pixel for the last frame's pose; NULL without zones. */
const struct image *inspector_zone_map(const struct inspector *in);
const struct model_meta *inspector_model(const struct inspector *in);
/* Hours since the last passing master-part verification (from the log; -1:
 * not checked, the default), for the verification_due gate (core/judge.h). */
void inspector_set_verified(struct inspector *in, double hours_ago);
/* The locating pass (on by default; see inspect.c): the part's box from
 * the grey, features in that box only, a sampling pass, then the pixels near
 * the part.  Off computes features over the whole frame and classifies
 * every pixel in full, which the tests use to show the two agree. */
void inspector_set_locating(struct inspector *in, int on);
/* The coarse approximation of the locating pass's pixel pass (the recipe's
 * [classifier] coarse, off by default; see inspect.c): every other pixel of
 * the part's cells classified, the rest copied where their neighbours
 * agree.  No effect with the locating pass off. */
void inspector_set_coarse(struct inspector *in, int on);
/* The next frame is not compared with this one (the frozen-camera gate):
 * for frames that are not a camera's consecutive ones. */
void inspector_forget_last_frame(struct inspector *in);

#endif
