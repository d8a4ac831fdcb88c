/* flatapply: exposes core/flatfield to the reference tests.
 *
 *   flatapply FLAT IN.png OUT.png   load FLAT, correct IN, write OUT
 *
 * On an error the message goes to stderr and the exit status is 3; a usage
 * error exits 2. */
#include <stdio.h>

#include "core/flatfield.h"
#include "core/pngio.h"

int main(int argc, char **argv)
{
    if (argc != 4) {
        fprintf(stderr, "usage: flatapply FLAT IN.png OUT.png\n");
        return 2;
    }
    struct err e;
    err_clear(&e);
    struct flat_field *f = NULL;
    struct image *in = NULL, *out = NULL;
    int rc = flatfield_load(argv[1], &f, &e) || pngio_load_rgb(argv[2], &in, &e) ||
             !(out = image_new(in->w, in->h, 3, &e)) || flatfield_apply(f, in, out, &e) ||
             pngio_save(argv[3], out, 1, &e);
    if (rc)
        fprintf(stderr, "flatapply: %s\n", e.msg);
    flatfield_free(f);
    image_free(in);
    image_free(out);
    return rc ? 3 : 0;
}
