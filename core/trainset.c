#include "trainset.h"

#include "rng.h"

#include <stdlib.h>
#include <string.h>

static size_t rng_below(uint64_t *state, size_t n)
{
    return (size_t)(rng_splitmix64(state) % n);
}

void trainset_init(struct trainset *ts, int nfeat, int nclasses)
{
    memset(ts, 0, sizeof *ts);
    ts->nfeat = nfeat;
    ts->nclasses = nclasses;
}

void trainset_clear(struct trainset *ts)
{
    free(ts->x);
    free(ts->y);
    trainset_init(ts, ts->nfeat, ts->nclasses);
}

static int reserve(struct trainset *ts, size_t more, struct err *e)
{
    if (ts->n + more <= ts->cap)
        return ST_OK;
    size_t cap = ts->cap ? ts->cap : 4096;
    while (cap < ts->n + more)
        cap *= 2;
    if (cap > SIZE_MAX / sizeof(float) / (size_t)ts->nfeat)
        return err_set(e, ST_ENOMEM, "training sample of %zu rows is too large", cap);
    float *x = realloc(ts->x, cap * (size_t)ts->nfeat * sizeof *x);
    if (!x)
        return err_set(e, ST_ENOMEM, "out of memory for %zu training rows", cap);
    ts->x = x;
    float *y = realloc(ts->y, cap * sizeof *y);
    if (!y)
        return err_set(e, ST_ENOMEM, "out of memory for %zu training rows", cap);
    ts->y = y;
    ts->cap = cap;
    return ST_OK;
}

static void push_row(struct trainset *ts, const float *row, int cls)
{
    memcpy(ts->x + ts->n * (size_t)ts->nfeat, row, (size_t)ts->nfeat * sizeof *row);
    ts->y[ts->n] = (float)cls;
    ts->per_class[cls]++;
    ts->n++;
}

int trainset_add_image(struct trainset *ts, const struct fstack *fs, const struct image *labels,
                       int cap, uint64_t *rng, struct err *e)
{
    if (labels->w != fs->w || labels->h != fs->h || labels->channels != 1)
        return err_set(e, ST_EINVAL, "label mask %dx%d does not match image %dx%d", labels->w,
                       labels->h, fs->w, fs->h);
    if (fs->n != ts->nfeat)
        return err_set(e, ST_EINVAL, "feature stack has %d features, sample expects %d", fs->n,
                       ts->nfeat);
    const size_t npix = (size_t)fs->w * fs->h;
    size_t *pick = malloc((size_t)ts->nclasses * (size_t)cap * sizeof *pick);
    if (!pick)
        return err_set(e, ST_ENOMEM, "out of memory sampling pixels");
    size_t seen[TRAINSET_MAX_CLASSES] = {0};
    for (size_t i = 0; i < npix; i++) {
        int c = labels->px[i];
        if (c == 255)
            continue;
        if (c >= ts->nclasses) {
            free(pick);
            return err_set(e, ST_ERANGE, "label value %d at pixel %zu is not a class", c, i);
        }
        size_t *slot = pick + (size_t)c * cap;
        size_t k = seen[c]++;
        if (k < (size_t)cap) {
            slot[k] = i;
        } else {
            size_t j = rng_below(rng, k + 1);
            if (j < (size_t)cap)
                slot[j] = i;
        }
    }
    size_t total = 0;
    for (int c = 0; c < ts->nclasses; c++)
        total += seen[c] < (size_t)cap ? seen[c] : (size_t)cap;
    int rc = reserve(ts, total, e);
    if (rc == ST_OK) {
        for (int c = 0; c < ts->nclasses; c++) {
            size_t take = seen[c] < (size_t)cap ? seen[c] : (size_t)cap;
            ts->labelled[c] += seen[c];
            if (take)
                ts->images_with[c]++;
            for (size_t k = 0; k < take; k++)
                push_row(ts, fs->v + pick[(size_t)c * cap + k] * (size_t)fs->n, c);
        }
    }
    free(pick);
    return rc;
}

int trainset_split(const struct trainset *all, double val_fraction, uint64_t seed,
                   struct trainset *train, struct trainset *val, struct err *e)
{
    trainset_init(train, all->nfeat, all->nclasses);
    trainset_init(val, all->nfeat, all->nclasses);
    uint64_t rng = seed;
    size_t seen[TRAINSET_MAX_CLASSES] = {0};
    int rc = ST_OK;
    if ((rc = reserve(train, all->n, e)))
        goto fail;
    for (size_t i = 0; i < all->n; i++) {
        int c = (int)all->y[i];
        size_t k = seen[c]++;
        /* Deterministic share: every class gets its fraction in val, and a
         * class with two rows or more gets at least one. */
        int to_val = (k == 1 && val->per_class[c] == 0) ||
                     rng_uniform(&rng) < val_fraction;
        struct trainset *dst = to_val ? val : train;
        if ((rc = reserve(dst, 1, e)))
            goto fail;
        push_row(dst, all->x + i * (size_t)all->nfeat, c);
    }
    for (int c = 0; c < all->nclasses; c++) {
        train->images_with[c] = all->images_with[c];
        val->images_with[c] = all->images_with[c];
    }
    return ST_OK;
fail:
    trainset_clear(train);
    trainset_clear(val);
    return rc;
}
