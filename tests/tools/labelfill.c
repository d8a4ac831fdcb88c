/* labelfill: the labelling tool's fill (station/label_doc.h) on a picture.
 *
 *   labelfill IMAGE.png X Y TOL OUT.raw
 *
 * fills from pixel (X, Y) of the RGB picture with tolerance TOL and writes
 * the region as W*H bytes (1 filled, 0 not) to OUT.raw; prints the count.
 * Exit status: 0 ok, 2 usage, 3 error. */
#include <stdio.h>

#include "core/pngio.h"
#include "station/label_doc.h"
#include "toolarg.h"

int main(int argc, char **argv)
{
    int x, y, tol;
    if (argc != 6 || parse_int(argv[2], &x) || parse_int(argv[3], &y) || parse_int(argv[4], &tol)) {
        fprintf(stderr, "usage: labelfill IMAGE.png X Y TOL OUT.raw\n");
        return 2;
    }
    struct err e;
    err_clear(&e);
    struct image *img = NULL;
    struct label_doc *d = NULL;
    size_t n = 0;
    int rc = pngio_load_rgb(argv[1], &img, &e);
    if (!rc && !(d = label_doc_new(img->w, img->h, LABEL_UNDO_CAP, &e)))
        rc = e.code;
    if (!rc) {
        label_doc_begin(d);
        rc = label_doc_fill(d, img, x, y, tol, 1, &n, &e);
        if (!rc)
            rc = label_doc_end(d, &e);
    }
    if (!rc) {
        FILE *f = fopen(argv[5], "wb");
        const uint8_t *m = label_doc_mask(d);
        size_t all = (size_t)img->w * img->h;
        for (size_t i = 0; f && i < all; i++)
            fputc(m[i] == 1, f);
        if (!f || fclose(f) != 0)
            rc = err_set(&e, ST_EIO, "%s: cannot write", argv[5]);
    }
    if (rc)
        fprintf(stderr, "labelfill: %s\n", e.msg);
    else
        printf("%zu\n", n);
    label_doc_free(d);
    image_free(img);
    return rc ? 3 : 0;
}
