/* zones: named areas of the part, each with its own tolerances.
 *
 * A zone is described in part coordinates (mm, origin at the part's
 * centroid, u along its axis; see part.h) as a rectangle, circle, ring,
 * polygon or a mask PNG, so zones move and rotate with the part.  Zones are
 * listed in priority order: where two overlap, the earlier one owns the
 * pixel (list the critical zone first).  A zone_map owns the loaded masks
 * and a per-frame map of zone index per pixel (ZONE_NONE outside every
 * zone), repainted for each frame's pose and reused while the frame size
 * stays.  A pixel belongs to a zone when its centre does.
 *
 * Geometry.  rect: centre (cx, cy), full sides w along u and h along v,
 * turned by angle_deg (from +u towards +v), edges inside.  circle: centre
 * and r_out, edge inside.  ring: r_in <= distance <= r_out.  polygon:
 * vertices in part mm (cx, cy unused); a self-intersecting outline is read
 * with the even-odd rule (as scikit-image's draw.polygon), a point on a
 * left or lower edge counts as inside.  mask: the PNG's centre sits at (cx,
 * cy), its columns along u and rows along +v, turned by angle_deg, each
 * pixel mask_mm_per_px wide; a point takes the mask pixel it falls in.
 *
 * Refused by zone_map_new (ST_ERANGE, "zone 'NAME': ..."): a rectangle
 * without area, a radius <= 0, a ring without r_in < r_out, a polygon with
 * fewer than 3 or more than ZONE_MAX_POINTS points or all on one line, a
 * value that is not finite, a mask pixel size <= 0; a mask file that
 * cannot be read or is not an 8-bit-or-less grey/palette PNG (pngio's
 * error, naming the file) or has no pixel inside ("PATH: mask of zone ...").
 *
 * Painting visits only the pixels of each zone's bounding box in the frame,
 * stepping the pixel-to-zone transform by constants along a row, so a
 * 1280x960 frame with five zones on the demo cap paints in 2-3 ms
 * (tests/bench/bench_overlay). */
#ifndef ST_ZONES_H
#define ST_ZONES_H

#include <limits.h>

#include "image.h"
#include "part.h"

#define ZONE_MAX 8
#define ZONE_MAX_POINTS 16
#define ZONE_NONE 255

enum zone_shape { ZONE_RECT, ZONE_CIRCLE, ZONE_RING, ZONE_POLYGON, ZONE_MASK };

/* A plain value, filled by the recipe parser ([zone NAME] sections). */
struct zone {
    char name[32];
    enum zone_shape shape;
    double cx, cy;                  /* centre, mm (rect, circle, ring, mask) */
    double w, h;                    /* rect: full width (along u) and height, mm */
    double angle_deg;               /* rect, mask: turn against the part's axis */
    double r_in, r_out;             /* circle: r_out; ring: r_in < r_out, mm */
    int npoints;                    /* polygon: 3..ZONE_MAX_POINTS vertices, mm */
    double pts[ZONE_MAX_POINTS][2];
    char mask_path[PATH_MAX];       /* mask: 8-bit PNG, non-zero = inside */
    double mask_mm_per_px;          /* mask: its pixel size on the part */
};

struct zone_map;

/* Copies the zone list and loads the masks (errors name the mask file). */
int zone_map_new(const struct zone *zones, int n, struct zone_map **out, struct err *e);
void zone_map_free(struct zone_map *m);

/* Paints the zone index of every pixel of a w x h frame for the pose; a
 * pose with found = 0 paints every pixel ZONE_NONE. */
int zone_map_paint(struct zone_map *m, const struct part_pose *p, int w, int h,
                   double mm_per_px_x, double mm_per_px_y, struct err *e);

/* The last painted map: 1 channel, w x h, zone index or ZONE_NONE; NULL
 * before the first paint.  Owned by m. */
const struct image *zone_map_image(const struct zone_map *m);

/* Whether the point (u, v), in part mm, lies in zone z (masks included);
 * 0 for a z that is not a zone of m. */
int zone_map_contains(const struct zone_map *m, int z, double u, double v);

#endif
