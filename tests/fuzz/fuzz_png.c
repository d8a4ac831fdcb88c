/* Fuzzes core/pngio.c: the same bytes as a frame (pngio_load_rgb) and as a
 * label mask of 5 classes (pngio_load_label).  Checks what pngio.h
 * promises of a success: an image of the stated channels within the size
 * bounds, and labels that are classes or 255. */
#include <stdint.h>
#include <stdlib.h>

#include "core/pngio.h"
#include "fuzzkit.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzzkit_write(data, size, "in.png");
    struct err e = {0};
    struct image *img = NULL;
    if (pngio_load_rgb(path, &img, &e) == ST_OK) {
        if (!img || img->channels != 3 || img->w < 1 || img->h < 1 || img->w > IMAGE_MAX_SIDE ||
            img->h > IMAGE_MAX_SIDE)
            abort();
        image_free(img);
    } else if (img || !e.msg[0]) {
        abort();
    }
    img = NULL;
    if (pngio_load_label(path, 5, &img, &e) == ST_OK) {
        if (!img || img->channels != 1)
            abort();
        for (size_t i = 0; i < (size_t)img->w * (size_t)img->h; i++)
            if (img->px[i] >= 5 && img->px[i] != 255)
                abort();
        image_free(img);
    } else if (img || !e.msg[0]) {
        abort();
    }
    return 0;
}
