/* evaluate: a trained recipe measured against a labelled dataset.
 *
 * Shared by `station evaluate` and `station demo`.  Every labelled image is
 * classified by the same inspector the station uses; the confusion matrix
 * accumulates over all of them (unlabelled pixels skipped) and each image
 * gets its own row.  The worst images (lowest pixel accuracy) are written
 * as sheets: frame | truth | prediction, in the recipe's class colours.
 * With split > 0 only the images held out at that share (core/dataset.h)
 * are measured: the ones `station train --split` never read. */
#ifndef ST_EVALUATE_H
#define ST_EVALUATE_H

#include <jansson.h>
#include <stdio.h>

#include "core/inspect.h"
#include "core/metrics.h"

struct eval_row {
    char stem[128];
    int index;           /* in the dataset's list of stems */
    size_t labelled;
    double accuracy;
    double defect_iou;   /* mean IoU over defect classes present in this image, -1 if none */
};

struct eval_result {
    struct confusion cm;
    int n;
    struct eval_row *rows;
};

/* sheet_dir may be NULL (no sheets). */
int evaluate_dataset(struct inspector *in, const char *data_dir, double split,
                     const char *sheet_dir, int nworst, struct eval_result *res, struct err *e);
void evaluate_clear(struct eval_result *res);

/* Human report on f: metrics, IoU per class, confusion (counts and row
 * shares), per-image table (all rows when per_image, else the worst 10). */
void evaluate_print(const struct recipe *r, const struct eval_result *res, int per_image, FILE *f);
/* pixel_accuracy, mean_iou, defect_mean_iou, iou {name: value}, confusion, images. */
json_t *evaluate_json(const struct recipe *r, const struct eval_result *res);

#endif
