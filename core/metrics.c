#include "metrics.h"

#include <string.h>

/* The class count as far as the matrix can hold it, so a bad n never indexes
 * outside c. */
static int classes(const struct confusion *cm)
{
    return cm->n < 0 ? 0 : cm->n > METRICS_MAX_CLASSES ? METRICS_MAX_CLASSES : cm->n;
}

void metrics_init(struct confusion *cm, int nclasses)
{
    memset(cm, 0, sizeof *cm);
    cm->n = nclasses;
}

int metrics_add(struct confusion *cm, const uint8_t *truth, const uint8_t *pred, size_t npix,
                struct err *e)
{
    if (cm->n < 1 || cm->n > METRICS_MAX_CLASSES)
        return err_set(e, ST_EINVAL, "metrics: %d classes, allowed 1..%d", cm->n,
                       METRICS_MAX_CLASSES);
    /* Counted apart and merged at the end, so a bad pixel leaves cm as it was. */
    uint64_t add[METRICS_MAX_CLASSES][METRICS_MAX_CLASSES] = {{0}};
    for (size_t i = 0; i < npix; i++) {
        if (truth[i] == 255)
            continue;
        if (truth[i] >= cm->n || pred[i] >= cm->n)
            return err_set(e, ST_ERANGE,
                           "metrics: pixel %zu: truth %u, prediction %u; classes are 0..%d", i,
                           truth[i], pred[i], cm->n - 1);
        add[truth[i]][pred[i]]++;
    }
    for (int t = 0; t < cm->n; t++)
        for (int p = 0; p < cm->n; p++)
            cm->c[t][p] += add[t][p];
    return ST_OK;
}

double metrics_accuracy(const struct confusion *cm)
{
    int n = classes(cm);
    uint64_t total = 0, hit = 0;
    for (int t = 0; t < n; t++)
        for (int p = 0; p < n; p++) {
            total += cm->c[t][p];
            hit += t == p ? cm->c[t][p] : 0;
        }
    return total ? (double)hit / (double)total : -1;
}

double metrics_iou(const struct confusion *cm, int k)
{
    int n = classes(cm);
    if (k < 0 || k >= n)
        return -1;
    uint64_t row = 0, col = 0;
    for (int j = 0; j < n; j++) {
        row += cm->c[k][j];
        col += cm->c[j][k];
    }
    uint64_t uni = row + col - cm->c[k][k];
    return uni ? (double)cm->c[k][k] / (double)uni : -1;
}

double metrics_mean_iou(const struct confusion *cm, const int *is_defect)
{
    int n = classes(cm);
    double sum = 0;
    int used = 0;
    for (int k = 0; k < n; k++) {
        double iou = metrics_iou(cm, k);
        if (iou < 0 || (is_defect && !is_defect[k]))
            continue;
        sum += iou;
        used++;
    }
    return used ? sum / used : -1;
}

double metrics_row_share(const struct confusion *cm, int truth, int pred)
{
    int n = classes(cm);
    if (truth < 0 || truth >= n || pred < 0 || pred >= n)
        return 0;
    uint64_t row = 0;
    for (int j = 0; j < n; j++)
        row += cm->c[truth][j];
    return row ? (double)cm->c[truth][pred] / (double)row : 0;
}
