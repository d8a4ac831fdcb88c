#include "image.h"

#include <stdlib.h>
#include <string.h>

int image_check_size(int w, int h, int channels, size_t *bytes, struct err *e)
{
    if (w <= 0 || h <= 0 || w > IMAGE_MAX_SIDE || h > IMAGE_MAX_SIDE)
        return err_set(e, ST_ERANGE, "image size %dx%d outside 1..%d", w, h, IMAGE_MAX_SIDE);
    if ((size_t)w * (size_t)h > IMAGE_MAX_PIXELS)
        return err_set(e, ST_ERANGE, "image %dx%d has more than %u pixels", w, h, IMAGE_MAX_PIXELS);
    if (channels != 1 && channels != 3)
        return err_set(e, ST_EINVAL, "image with %d channels (1 or 3 expected)", channels);
    if (bytes)
        *bytes = (size_t)w * (size_t)h * (size_t)channels;
    return ST_OK;
}

struct image *image_new(int w, int h, int channels, struct err *e)
{
    size_t bytes = 0;
    if (image_check_size(w, h, channels, &bytes, e))
        return NULL;
    struct image *img = malloc(sizeof *img);
    uint8_t *px = calloc(bytes, 1);
    if (!img || !px) {
        free(img);
        free(px);
        err_set(e, ST_ENOMEM, "out of memory for a %dx%d image", w, h);
        return NULL;
    }
    img->w = w;
    img->h = h;
    img->channels = channels;
    img->px = px;
    return img;
}

void image_free(struct image *img)
{
    if (!img)
        return;
    free(img->px);
    free(img);
}

struct image *image_clone(const struct image *img, struct err *e)
{
    struct image *c = image_new(img->w, img->h, img->channels, e);
    if (c)
        memcpy(c->px, img->px, (size_t)img->w * img->h * img->channels);
    return c;
}

struct fstack *fstack_new(int w, int h, int n, struct err *e)
{
    if (image_check_size(w, h, 1, NULL, e))
        return NULL;
    if (n <= 0 || n > 4096) {
        err_set(e, ST_ERANGE, "feature count %d outside 1..4096", n);
        return NULL;
    }
    size_t count = (size_t)w * (size_t)h * (size_t)n;
    struct fstack *fs = malloc(sizeof *fs);
    float *v = malloc(count * sizeof *v);
    if (!fs || !v) {
        free(fs);
        free(v);
        err_set(e, ST_ENOMEM, "out of memory for %dx%dx%d features", w, h, n);
        return NULL;
    }
    fs->w = w;
    fs->h = h;
    fs->n = n;
    fs->v = v;
    return fs;
}

void fstack_free(struct fstack *fs)
{
    if (!fs)
        return;
    free(fs->v);
    free(fs);
}
