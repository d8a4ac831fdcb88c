/* disc: the pixel scale checked against a round part or gauge disc of known
 * diameter.
 *
 * A quick check a line technician can make without a target: a disc of
 * known diameter (a master part or a gauge disc) is segmented (any class map
 * whose non-background pixels are the disc, bore included or not), and its
 * extent in x and in y, measured from the outermost occupied columns and
 * rows, gives mm per pixel separately in x and y.  The extent of a disc
 * sampled at pixel centres is its diameter within one pixel, so the scale
 * is good to about 1/diameter_px (0.5 % for a 200 px disc) — enough to
 * catch a wrong recipe scale or a moved camera, not a substitute for a
 * target calibration.  Also reports how round the blob is (extent ratio),
 * since a tilted camera makes a circle an ellipse. */
#ifndef ST_CALIB_DISC_H
#define ST_CALIB_DISC_H

#include "core/image.h"

struct disc_scale {
    double width_px, height_px;   /* extents */
    double cx, cy;                /* centre of the extents */
    double mm_per_px_x, mm_per_px_y;
    double aspect;                /* width / height */
};

/* classes: 1-channel map, 0 = background.  The disc must not touch the frame
 * border (it could be cut off) and must be at least 20 px across. */
int disc_measure_scale(const struct image *classes, double diameter_mm, struct disc_scale *out,
                       struct err *e);

#endif
