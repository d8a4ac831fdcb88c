/* regions: connected defect regions of a class map, measured in mm.
 *
 * One labelling pass (union-find over 8- or 4-connected neighbours of the
 * same class) finds the regions of every class flagged as a defect and
 * gathers, per provisional label, everything measured below; labels are
 * then folded into their regions.  Per region:
 *   - pixels, and area in mm^2 = pixels x mm_per_px_x x mm_per_px_y
 *     (through a calibration's homography: see regions_opts).
 *     Contour-polygon areas are smaller for small regions (a 16x16 square
 *     is 256 px by count, 225 by its contour); the count is what the
 *     classifier actually marked.
 *   - bounding box, centroid (pixels), mean and minimum confidence.
 *   - length_mm, width_mm: maximum and minimum Feret diameters of the
 *     pixels as squares scaled to mm (x by mm_per_px_x, y by mm_per_px_y),
 *     with scikit-image's point convention (core/hull.h): a 16x16 square at
 *     1 mm per pixel is sqrt(16^2 + 15^2) long and 16 wide.
 *   - orientation: the major axis of the pixels' second central moments in
 *     mm, radians from the image's +x axis turning towards +y (down the
 *     image, so clockwise on screen), in (-pi/2, pi/2]; 0 for regions
 *     without a major axis (a square, a disc).  scikit-image's regionprops
 *     orientation is measured from the row axis: with square pixels ours is
 *     pi/2 minus it (mod pi).
 *   - zone: the lowest zone index among its pixels in opts->zones, -1 when
 *     the map is NULL or every pixel is outside (255).
 * Gap merging: the gap between two pixels is that between their squares,
 * hypot(max(0, |dx| - 1) sx, max(0, |dy| - 1) sy) mm for centres dx, dy
 * pixels apart (0 for neighbours); between two regions, the smallest over
 * their pixels (attained at boundary pixels).  Regions of one class with a
 * gap <= merge_gap_mm[cls] (1e-9 relative slack, so a gap equal to the limit
 * merges despite rounding) are one defect, transitively: counts, sums and
 * boxes added, centroid, confidence, orientation and Feret diameters
 * measured on the union of the pixels, fragments = how many merged.  Cost:
 * pairs are swept by class and first row (at worst every pair of a class's
 * regions, when all start within the gap's reach of each other's last
 * row), boxes compared first; only pairs whose boxes are within the gap
 * compare boundary pixels, at worst boundary(a) x boundary(b) pairs each.
 * A region_set owns its label buffer, region array and all scratch, and
 * reuses them frame after frame: no allocation once the largest frame and
 * region count have been seen.  Never prints, keeps no global state. */
#ifndef ST_REGIONS_H
#define ST_REGIONS_H

#include <stdint.h>

#include "image.h"
#include "lensmodel.h"

struct region {
    int id;                  /* 1-based, its place in region_set.r plus one */
    int cls;
    int zone;                /* see regions_opts.zones; -1 outside every zone */
    int pixels;
    double area_mm2;
    int x0, y0, x1, y1;      /* inclusive bounding box */
    double cx, cy;           /* centroid in pixels */
    double length_mm;        /* maximum Feret diameter */
    double width_mm;         /* minimum Feret diameter (narrowest caliper) */
    double orientation;      /* radians, of the major axis (convention above) */
    float mean_conf, min_conf;
    int fragments;           /* connected fragments merged into this defect (1 = none) */
};

#define REGIONS_MAX_CLASSES 16

struct regions_opts {
    int connectivity;                 /* 4 or 8 */
    double mm_per_px_x, mm_per_px_y;
    int nclasses;
    int is_defect[REGIONS_MAX_CLASSES];
    /* fragments of a class this close or closer (mm, edge to edge, gap as
     * above) are one defect; <= 0 merges nothing */
    double merge_gap_mm[REGIONS_MAX_CLASSES];
    /* NULL, or a 1-channel map of the frame's size: zone index per pixel,
     * 255 outside every zone.  A region takes the lowest index it touches
     * (zones are listed in priority order). */
    const struct image *zones;
    /* NULL, or the image-to-plane homography of a calibration (3x3
     * row-major, pixel centres at integers, plane in mm): then a region's
     * area is the sum over its pixels of |det J| of that map at the pixel
     * (exact for the map's local area change; with an affine map it is
     * pixels x mm_per_px_x x mm_per_px_y), and Feret diameters and
     * orientation use the map's local scale at the region's centroid (mm
     * per pixel along image x and y: the lengths of J's columns; the skew
     * of J, which a tilt about an axis oblique to the image axes brings,
     * is left out, as is the scale's change across one region).  Gap
     * merging keeps mm_per_px_x/y. */
    const double *image_to_plane;
    /* NULL, or the lens whose corrected pixels image_to_plane takes: each
     * pixel is corrected first (lensmodel_correct) and the map's Jacobian
     * includes the correction's. */
    const struct lens_model *lens;
};

struct region_set {
    int n;
    struct region *r;
    /* owned scratch */
    int cap;
    int32_t *labels;
    int32_t *parent;
    size_t label_cap, parent_cap;
    struct regions_work *work;   /* the rest of the scratch, private to regions.c */
};

void regions_init(struct region_set *rs);
void regions_clear(struct region_set *rs);

/* Finds the regions of classes with is_defect[cls] set in the 1-channel
 * class map (conf may be NULL: confidence reported as 1).  Regions (merged
 * defects) come out ordered by class, then by first pixel in raster order;
 * id = index + 1.  Afterwards rs->labels[y * w + x] holds the index into
 * rs->r of the defect owning the pixel, or -1 (the overlay draws outlines
 * from it).  ST_EINVAL for a class count, connectivity or pixel size out of
 * range or a zone map not of the class map's size; ST_ENOMEM. */
int regions_find(struct region_set *rs, const struct image *classes, const float *conf,
                 const struct regions_opts *o, struct err *e);

#endif
