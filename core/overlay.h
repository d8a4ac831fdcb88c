/* overlay: pictures of a class map for people — the operator's overlay,
 * evaluation sheets and (later) evidence images.
 *
 * Class colours come from the recipe; unlabelled truth (255) shows as mid
 * grey.  Every function returns a new image the caller frees; none keeps
 * state or touches its inputs. */
#ifndef ST_OVERLAY_H
#define ST_OVERLAY_H

#include "image.h"
#include "judge.h"
#include "palette.h"
#include "recipe.h"
#include "regions.h"

/* Each pixel painted in its class colour. */
struct image *overlay_colourise(const struct image *classes, const struct recipe *r,
                                struct err *e);

/* Images of equal height (grey or RGB) side by side as one RGB image, gap
 * pixels of grey level `grey` between them. */
struct image *overlay_side_by_side(const struct image *const *imgs, int n, int gap, uint8_t grey,
                                   struct err *e);

/* The inspection picture: a verdict banner above the frame, so the banner
 * never hides the part.  The banner's colour tells the verdict in the
 * screen's colours (core/palette.h: PASS bluish green, FAIL vermilion, NO
 * VERDICT yellow); its lines are the verdict word, the first reason in
 * words (judge_describe_reason, "+N more" when there are more) and a short
 * caution; text is black (OVERLAY_TEXT_RGB), at a
 * scale that grows with the frame width (overlay_text_scale).  Below it
 * the frame: defect classes tinted at OVERLAY_TINT, then the outline of
 * every zone in zones (1 px, OVERLAY_ZONE_RGB: zone pixels with a
 * 4-neighbour in another zone or none), then every region's outline in its
 * class colour (region pixels with a 4-neighbour outside the region, from
 * rs->labels — find_boundaries(mode="inner") in scikit-image's terms), and
 * the id of every region that counts under its tolerance, in its class
 * colour on a dark box beside its bounding box.  zones may be NULL (no
 * zone outlines); j NULL draws no banner.  A region's outline is looked
 * for inside its bounding box; labels outside 0..rs->n-1 are taken as no
 * region.  The reason and the caution wrap at spaces onto more lines
 * rather than shrink below the scale. */
#define OVERLAY_TINT 0.35
#define OVERLAY_PASS_RGB PALETTE_GREEN
#define OVERLAY_FAIL_RGB PALETTE_VERMILION
#define OVERLAY_NONE_RGB PALETTE_YELLOW
#define OVERLAY_TEXT_RGB PALETTE_INK
#define OVERLAY_ZONE_RGB {0, 220, 220}
#define OVERLAY_CAUTION "aid only – not a substitute for qualified inspection"

struct image *overlay_inspection(const struct image *frame, const struct image *classes,
                                 const struct region_set *rs, const struct image *zones,
                                 const struct recipe *r, const struct judgement *j,
                                 struct err *e);

/* Font scale of the inspection picture's text for a frame w pixels wide:
 * 1 below 240 px, else w / 400 but at least 2 (12 px glyph advance at
 * 480 px wide, 18 px at 1280). */
int overlay_text_scale(int w);

#endif
