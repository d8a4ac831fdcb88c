/* zones: named areas of the part, each with its own tolerances.
 *
 * A zone is described in part coordinates (mm, origin at the part's
 * centroid, x along its axis; see part.h) as a rectangle, circle, ring,
 * polygon or a mask PNG, so zones move and rotate with the part.  Zones are
 * listed in priority order: where two overlap, the earlier one owns the
 * pixel (list the critical zone first).  A zone_map owns the loaded masks
 * and a per-frame map of zone index per pixel (ZONE_NONE outside every
 * zone), repainted for each frame's pose and reused while the frame size
 * stays. */
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

/* Paints the zone index of every pixel of a w x h frame for the pose. */
int zone_map_paint(struct zone_map *m, const struct part_pose *p, int w, int h,
                   double mm_per_px_x, double mm_per_px_y, struct err *e);

/* The last painted map: 1 channel, w x h, zone index or ZONE_NONE.  Owned by m. */
const struct image *zone_map_image(const struct zone_map *m);

/* Whether the point (u, v), in part mm, lies in zone z (masks included). */
int zone_map_contains(const struct zone_map *m, int z, double u, double v);

#endif
