/* Fuzzes core/forest.c's reader of XGBoost's JSON trees, and evaluates what
 * loads on a few rows (all zeros, NaN, and large values), so a tree that
 * loads but walks out of its arrays is caught.  forest.h promises finite
 * probabilities summing to 1 for finite input. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "core/forest.h"
#include "fuzzkit.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzzkit_write(data, size, "m.json");
    struct forest *f = NULL;
    struct err e = {0};
    if (forest_load(path, &f, &e) != ST_OK) {
        if (f || !strstr(e.msg, path))
            abort();
        return 0;
    }
    int nf = forest_nfeatures(f), nc = forest_nclasses(f);
    if (nc < 2 || nc > 16 || nf < 0 || nf > 4096)
        abort();
    enum { ROWS = 3 };
    size_t cols = nf > 0 ? (size_t)nf : 1;
    float *x = calloc(ROWS * cols, sizeof *x);
    float *p = calloc(ROWS * (size_t)nc, sizeof *p);
    if (!x || !p)
        abort();
    for (size_t k = 0; k < cols; k++) {
        x[cols + k] = NAN;
        x[2 * cols + k] = (k & 1) ? 1e30f : -1e30f;
    }
    forest_predict(f, x, ROWS, (int)cols, p);
    float sum = 0;
    for (int k = 0; k < nc; k++)
        sum += p[k];
    if (!(fabsf(sum - 1.0f) < 1e-3f))
        abort();
    uint8_t cls[ROWS];
    float conf[ROWS];
    if (forest_classify(f, x, ROWS, (int)cols, 1, cls, conf, &e) != ST_OK)
        abort();
    for (int i = 0; i < ROWS; i++)
        if (cls[i] >= nc)
            abort();
    free(x);
    free(p);
    forest_free(f);
    return 0;
}
