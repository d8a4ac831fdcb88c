/* Fuzzes core/flatfield.c's reader (a JSON header line, then float32
 * maps, hashed).  flatfield.h promises finite gains in (0, 16] and offsets
 * in [0, 255] on success; what loads is applied to a frame of its size, so
 * a map that loads but does not fit is caught. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "core/flatfield.h"
#include "fuzzkit.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzzkit_write(data, size, "f.flat");
    struct flat_field *f = NULL;
    struct err e = {0};
    if (flatfield_load(path, &f, &e) != ST_OK) {
        if (f || !strstr(e.msg, path))
            abort();
        return 0;
    }
    size_t n = (size_t)f->w * (size_t)f->h * 3;
    for (size_t i = 0; i < n; i++)
        if (!(f->gain[i] > 0 && f->gain[i] <= FLATFIELD_MAX_GAIN) ||
            (f->offset && !(f->offset[i] >= 0 && f->offset[i] <= 255)))
            abort();
    struct image *in = image_new(f->w, f->h, 3, &e), *out = image_new(f->w, f->h, 3, &e);
    if (!in || !out)
        abort();
    memset(in->px, 200, n);
    if (flatfield_apply(f, in, out, &e) != ST_OK)
        abort();
    image_free(in);
    image_free(out);
    flatfield_free(f);
    return 0;
}
