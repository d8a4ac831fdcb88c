#include "overlay.h"

#include <string.h>

static const uint8_t unlabelled_rgb[3] = {128, 128, 128};

static const uint8_t *class_rgb(const struct recipe *r, int c)
{
    return c < r->nclasses ? r->cls[c].rgb : unlabelled_rgb;
}

struct image *overlay_colourise(const struct image *classes, const struct recipe *r,
                                struct err *e)
{
    struct image *out = image_new(classes->w, classes->h, 3, e);
    if (!out)
        return NULL;
    size_t n = (size_t)classes->w * classes->h;
    for (size_t i = 0; i < n; i++)
        memcpy(out->px + 3 * i, class_rgb(r, classes->px[i]), 3);
    return out;
}

struct image *overlay_blend(const struct image *frame, const struct image *classes,
                            const struct recipe *r, double alpha, struct err *e)
{
    if (frame->w != classes->w || frame->h != classes->h) {
        err_set(e, ST_EINVAL, "class map %dx%d does not match frame %dx%d", classes->w,
                classes->h, frame->w, frame->h);
        return NULL;
    }
    struct image *out = image_new(frame->w, frame->h, 3, e);
    if (!out)
        return NULL;
    size_t n = (size_t)frame->w * frame->h;
    int a = (int)(alpha * 256 + 0.5);
    for (size_t i = 0; i < n; i++) {
        uint8_t *o = out->px + 3 * i;
        for (int k = 0; k < 3; k++)
            o[k] = frame->px[i * frame->channels + (frame->channels == 3 ? k : 0)];
        int c = classes->px[i];
        if (c < r->nclasses && r->cls[c].is_defect)
            for (int k = 0; k < 3; k++)
                o[k] = (uint8_t)((o[k] * (256 - a) + r->cls[c].rgb[k] * a) >> 8);
    }
    return out;
}

struct image *overlay_side_by_side(const struct image *const *imgs, int n, struct err *e)
{
    const int gap = 4;
    int w = 0, h = imgs[0]->h;
    for (int i = 0; i < n; i++) {
        if (imgs[i]->h != h) {
            err_set(e, ST_EINVAL, "side-by-side images differ in height");
            return NULL;
        }
        w += imgs[i]->w + (i ? gap : 0);
    }
    struct image *out = image_new(w, h, 3, e);
    if (!out)
        return NULL;
    memset(out->px, 255, (size_t)w * h * 3);
    int x0 = 0;
    for (int i = 0; i < n; i++) {
        const struct image *s = imgs[i];
        for (int y = 0; y < h; y++)
            for (int x = 0; x < s->w; x++) {
                uint8_t *o = out->px + ((size_t)y * w + x0 + x) * 3;
                const uint8_t *p = s->px + ((size_t)y * s->w + x) * s->channels;
                for (int k = 0; k < 3; k++)
                    o[k] = p[s->channels == 3 ? k : 0];
            }
        x0 += s->w + gap;
    }
    return out;
}
