/* hull: Feret diameters of a pixel set given by its rows, in mm.
 *
 * A pixel set is described row by row by its leftmost and rightmost pixel
 * (struct hull_row); only those can be on its convex hull.  The measure
 * follows the convention of scikit-image's regionprops feret_diameter_max
 * (0.19) so the two agree to rounding:
 *   1. each pixel (x, y) stands for the midpoints of its four edges,
 *      (x +- 1/2, y) and (x, y +- 1/2); K is the convex hull of these points;
 *   2. the "hull image" is every pixel whose centre lies in K, boundary
 *      included (scikit-image's convex_hull_image);
 *   3. the Feret diameters are those of the convex hull of the hull image's
 *      edge midpoints (the level-1/2 contour scikit-image measures).
 * A 16 x 16 square thus has length sqrt(16^2 + 15^2) (its corners are cut)
 * and width 16; a single pixel is a diamond, 1 long and 1/sqrt(2) wide, and
 * a line one pixel thick is 1 wide when straight, about 1/sqrt(2) when
 * diagonal.  Points are scaled to mm (x by sx, y by sy) before measuring,
 * so anisotropic pixels are handled; steps 1-2 are exact integer arithmetic
 * on doubled coordinates.  Works in the caller's buffers: never allocates,
 * keeps nothing between calls. */
#ifndef ST_HULL_H
#define ST_HULL_H

#include <stddef.h>
#include <stdint.h>

struct hull_row {
    int32_t xl, xr;   /* leftmost and rightmost pixel; xl < 0: empty row */
};

struct hull_pt {
    int32_t x, y;     /* doubled coordinates: pixel centres are even */
};

/* Work space of one measure, owned by the caller: pts, left and right hold
 * HULL_POINTS(nrows) points each, rows holds nrows rows. */
struct hull_buf {
    struct hull_pt *pts, *left, *right;
    struct hull_row *rows;
};

#define HULL_POINTS(nrows) (4 * (size_t)(nrows) + 2)

/* Maximum Feret diameter (length) and minimum Feret diameter (width, the
 * narrowest caliper) in mm of the pixels in rows[0..nrows-1], row t being
 * image row y0 + t; the first and last rows must be non-empty.  Cost
 * O(nrows + h^2) for a hull of h vertices (h grows as the 2/3 power of the
 * size: tens of vertices for a defect hundreds of pixels across). */
void hull_measure_feret(const struct hull_row *rows, int y0, int nrows, double sx, double sy,
                        const struct hull_buf *buf, double *length, double *width);

#endif
