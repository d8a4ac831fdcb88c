/* overlay: pictures of a class map for people — the operator's overlay,
 * evaluation sheets and (later) evidence images.
 *
 * Class colours come from the recipe; unlabelled truth (255) shows as mid
 * grey.  Every function returns a new image the caller frees. */
#ifndef ST_OVERLAY_H
#define ST_OVERLAY_H

#include "image.h"
#include "recipe.h"

/* Each pixel painted in its class colour. */
struct image *overlay_colourise(const struct image *classes, const struct recipe *r,
                                struct err *e);

/* The frame with defect classes blended in their colour (alpha in 0..1) and
 * non-defect classes left as they are, so the part stays recognisable. */
struct image *overlay_blend(const struct image *frame, const struct image *classes,
                            const struct recipe *r, double alpha, struct err *e);

/* Images of equal height side by side, with a 4-pixel white gap. */
struct image *overlay_side_by_side(const struct image *const *imgs, int n, struct err *e);

#endif
