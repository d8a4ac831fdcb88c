/* corners: the inner corners of a checkerboard target in a frame, to a
 * fraction of a pixel, ordered into the board's grid.
 *
 * Candidates are saddle points of the grey image smoothed with a Gaussian
 * (sigma 1.5 px): strong negative determinant of the Hessian, a local
 * extremum in a 7x7 neighbourhood, and around them a ring of radius 5 px
 * that changes between darker and brighter than its mean exactly four times
 * (an X junction of four squares; the board's outer corners and edges give
 * two changes, texture gives many) and is point-symmetric (a square's
 * corner at the board's edge against a dark surround is not).  Each is refined by the gradient
 * orthogonality condition (what OpenCV's cornerSubPix solves: every
 * gradient in a window is perpendicular to the line from the corner to its
 * pixel), on the unsmoothed grey in an 11x11 Gaussian-weighted window.  The
 * grid is grown from a seed candidate and its nearest neighbours, each
 * step predicted from the last and snapped to a candidate within a third
 * of a step, which tolerates perspective and lens bending; the grown grid
 * must be exactly cols x rows (either way round).  Ordering: row by row,
 * column index along the board's first axis, turned so that the board's
 * axes are right-handed in the image (x right, y down) and corner 0 is the
 * one nearest the frame's top-left of the two remaining choices.
 * Refusals (ST_EFORMAT, naming the count found): no board; a grid smaller
 * than asked (partly out of view, or squares too small); a corner nearer
 * the frame edge than CORNERS_EDGE_PX.  Owns nothing between calls. */
#ifndef ST_CALIB_CORNERS_H
#define ST_CALIB_CORNERS_H

#include "core/image.h"

#define CORNERS_EDGE_PX 10  /* nearer the edge, the refinement window (5 px and the gradient) is cut off */
#define CORNERS_MAX 4096

/* cols x rows inner corners (each >= 2, product <= CORNERS_MAX); xy
 * receives 2 * cols * rows doubles, corner (c, r) at index r * cols + c,
 * in pixel coordinates with the centre of the top-left pixel at (0, 0). */
int corners_find(const struct image *img, int cols, int rows, double *xy, struct err *e);

#endif
