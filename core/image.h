/* image: the 8-bit frame every stage hands along, and the float feature stack.
 *
 * An image owns its pixels (interleaved, row-major, no padding; 1 channel for
 * grey and label maps, 3 for RGB in R,G,B order).  A feature stack owns its
 * floats in pixel-major order: the n features of one pixel are contiguous,
 * because the tree evaluator reads several features of the same pixel per
 * tree and XGBoost's dense input is row-major too.  Sizes are checked for
 * overflow before allocation; the limits below bound what any file may ask. */
#ifndef ST_IMAGE_H
#define ST_IMAGE_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"

#define IMAGE_MAX_SIDE 16384
#define IMAGE_MAX_PIXELS (64u * 1024u * 1024u)

struct image {
    int w, h, channels;
    uint8_t *px;
};

struct fstack {
    int w, h, n;   /* n features per pixel */
    float *v;      /* v[((size_t)y * w + x) * n + k] */
};

/* New zero-filled image; NULL with e set when the size is invalid or too big. */
struct image *image_new(int w, int h, int channels, struct err *e);
void image_free(struct image *img);
/* Deep copy. */
struct image *image_clone(const struct image *img, struct err *e);

/* Checks w, h, channels against the limits and computes the byte size. */
int image_check_size(int w, int h, int channels, size_t *bytes, struct err *e);

struct fstack *fstack_new(int w, int h, int n, struct err *e);
void fstack_free(struct fstack *fs);

#endif
