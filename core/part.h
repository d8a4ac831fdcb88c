/* part: where the part lies in the frame, from the class map.
 *
 * The part is every pixel the classifier did not call background (class 0).
 * part_locate measures it: pixel count and area in mm², centroid, bounding
 * box, the gap to the frame border, and its orientation from the central
 * second moments (the major axis of the equivalent ellipse; major_mm and
 * minor_mm are 4 sqrt of the eigenvalues, as scikit-image's regionprops).
 * Second moments fix the axis only up to a half turn; the sign is taken so
 * that the third moment along the axis is not negative (+u points towards
 * the longer tail of the part, e.g. a keyhole's stem).  A part symmetric
 * under a half turn has no such tail, and its +u may flip between frames:
 * give it zones symmetric under a half turn, or fix the orientation.  A part
 * whose moments are nearly isotropic (smaller eigenvalue >= 0.9 x the
 * larger: an axis ratio above about 0.95, e.g. a round cap) gets the angle
 * 0 with `isotropic` set — its zones must then not depend on rotation, or
 * the recipe fixes the orientation.  PART_ORIENT_FIXED always gives angle
 * 0 (isotropic is still measured).  All arithmetic is in mm (the scale may
 * differ in x and y), so the angle is that of the part, not of its pixel
 * grid.  Pixel (x, y) has its centre at (x, y).  No part pixel gives found
 * = 0 and ST_OK; a class map with more than one channel or a scale that is
 * not positive is ST_EINVAL.  No heap; no state. */
#ifndef ST_PART_H
#define ST_PART_H

#include "image.h"

enum part_orient {
    PART_ORIENT_FIXED = 0,   /* fixtured part: the part's axes are the image's */
    PART_ORIENT_MOMENTS = 1  /* from second moments, as above */
};

struct part_pose {
    int found;               /* at least one part pixel */
    long pixels;
    double area_mm2;         /* pixels x pixel area */
    double cx, cy;           /* centroid, pixels */
    /* radians from the image x axis to the part's x axis, positive turning
     * from +x towards +y (image rows grow downwards) */
    double angle;
    int isotropic;           /* moments too round to give an axis */
    double major_mm, minor_mm; /* full axes of the equivalent ellipse */
    int x0, y0, x1, y1;      /* inclusive bounding box */
    int border_gap;          /* px from the bounding box to the nearest frame edge */
};

int part_locate(const struct image *classes, double mm_per_px_x, double mm_per_px_y,
                enum part_orient orient, struct part_pose *p, struct err *e);

/* Image pixel (x, y) to part coordinates (u, v) in mm (origin at the
 * centroid, u along the part's axis, v a quarter turn from it in the same
 * sense as angle: along +y when angle is 0), and back. */
void part_to_part_mm(const struct part_pose *p, double mm_per_px_x, double mm_per_px_y,
                     double x, double y, double *u, double *v);
void part_to_image_px(const struct part_pose *p, double mm_per_px_x, double mm_per_px_y,
                      double u, double v, double *x, double *y);

#endif
