/* regions: connected defect regions of a class map, measured in mm.
 *
 * One labelling pass (union-find over 8- or 4-connected neighbours of the
 * same class) finds the regions of every class flagged as a defect; each is
 * measured in pixels, area in mm^2 (pixel count x pixel area, the pixel area
 * being mm_per_px_x * mm_per_px_y: contour-polygon areas are smaller for
 * small regions — a 16x16 square is 256 px by count, 225 by its contour —
 * and the count is what the classifier actually marked), bounding box,
 * centroid and classifier confidence.  A region_set owns its label buffer
 * and region array and reuses them frame after frame. */
#ifndef ST_REGIONS_H
#define ST_REGIONS_H

#include <stdint.h>

#include "image.h"

struct region {
    int cls;
    int pixels;
    double area_mm2;
    int x0, y0, x1, y1;      /* inclusive bounding box */
    double cx, cy;           /* centroid in pixels */
    float mean_conf, min_conf;
};

struct region_set {
    int n;
    struct region *r;
    /* owned scratch */
    int cap;
    int32_t *labels;
    int32_t *parent;
    size_t label_cap, parent_cap;
};

void regions_init(struct region_set *rs);
void regions_clear(struct region_set *rs);

/* Finds the regions of classes with is_defect[cls] set in the 1-channel
 * class map (conf may be NULL: confidence reported as 1).  connectivity is
 * 4 or 8.  Regions come out ordered by class, then by first pixel in raster
 * order. */
int regions_find(struct region_set *rs, const struct image *classes, const float *conf,
                 const int *is_defect, int nclasses, int connectivity, double mm_per_px_x,
                 double mm_per_px_y, struct err *e);

#endif
