/* metrics: how a predicted class map compares with ground truth.
 *
 * A confusion matrix accumulates over images (rows = truth, columns =
 * prediction); truth pixels equal to 255 (unlabelled) are skipped.  From it:
 * pixel accuracy = trace / total; IoU of class k = C[k][k] / (row k + column k
 * - C[k][k]); mean IoU over the classes present (row or column sum > 0), as
 * sklearn's jaccard_score(average=None) then averaged over defined classes.
 * Where a quantity is undefined (no pixels, no class present) the functions
 * return a negative value rather than a made-up 0 or 1. */
#ifndef ST_METRICS_H
#define ST_METRICS_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"

#define METRICS_MAX_CLASSES 16

struct confusion {
    int n;
    uint64_t c[METRICS_MAX_CLASSES][METRICS_MAX_CLASSES];
};

/* nclasses must be 1..METRICS_MAX_CLASSES; metrics_add refuses others (ST_EINVAL). */
void metrics_init(struct confusion *cm, int nclasses);
/* Adds npix pixels; a truth or prediction value >= n (other than truth 255) is
 * ST_ERANGE and leaves cm unchanged. */
int metrics_add(struct confusion *cm, const uint8_t *truth, const uint8_t *pred, size_t npix,
                struct err *e);
/* Negative when the matrix is empty. */
double metrics_accuracy(const struct confusion *cm);
/* IoU of class k, or a negative value when class k is absent from truth and
 * prediction (or k is not a class). */
double metrics_iou(const struct confusion *cm, int k);
/* Mean IoU over present classes; with is_defect (n entries) not NULL, only
 * over the present classes whose is_defect[k] is set.  Negative when there
 * is no such class. */
double metrics_mean_iou(const struct confusion *cm, const int *is_defect);
/* Row-normalised entry (recall share), 0 for an empty row or an index that
 * is not a class. */
double metrics_row_share(const struct confusion *cm, int truth, int pred);

#endif
