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
    int id;                  /* 1-based, its place in region_set.r plus one */
    int cls;
    int zone;                /* see regions_opts.zones; -1 outside every zone */
    int pixels;
    double area_mm2;
    int x0, y0, x1, y1;      /* inclusive bounding box */
    double cx, cy;           /* centroid in pixels */
    double length_mm;        /* maximum Feret diameter */
    double width_mm;         /* minimum Feret diameter (narrowest caliper) */
    double orientation;      /* radians, of the major axis (convention in regions.c) */
    float mean_conf, min_conf;
    int fragments;           /* connected fragments merged into this defect (1 = none) */
};

#define REGIONS_MAX_CLASSES 16

struct regions_opts {
    int connectivity;                 /* 4 or 8 */
    double mm_per_px_x, mm_per_px_y;
    int nclasses;
    int is_defect[REGIONS_MAX_CLASSES];
    /* fragments of a class closer than this (mm, edge to edge) are one
     * defect; <= 0 merges nothing */
    double merge_gap_mm[REGIONS_MAX_CLASSES];
    /* NULL, or a 1-channel map of the frame's size: zone index per pixel,
     * 255 outside every zone.  A region takes the lowest index it touches
     * (zones are listed in priority order). */
    const struct image *zones;
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
 * class map (conf may be NULL: confidence reported as 1).  Regions come out
 * ordered by class, then by first pixel in raster order.  Afterwards
 * rs->labels[y * w + x] holds the index into rs->r of the region owning the
 * pixel, or -1 (the overlay draws outlines from it). */
int regions_find(struct region_set *rs, const struct image *classes, const float *conf,
                 const struct regions_opts *o, struct err *e);

#endif
