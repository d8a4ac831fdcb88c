/* regionsdump W H NCLASSES DEFECTS CONNECTIVITY RAW: the regions of a raw
 * 8-bit class map as JSON lines (cls pixels x0 y0 x1 y1 cx cy), for the
 * reference check against scipy.ndimage.label and skimage regionprops.
 * DEFECTS is a comma list of defect class indices. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/regions.h"

int main(int argc, char **argv)
{
    if (argc != 7) {
        fprintf(stderr, "usage: regionsdump W H NCLASSES DEFECTS CONNECTIVITY RAW\n");
        return 2;
    }
    int w = atoi(argv[1]), h = atoi(argv[2]), n = atoi(argv[3]), conn = atoi(argv[5]);
    struct regions_opts o = {.connectivity = conn, .mm_per_px_x = 0.1, .mm_per_px_y = 0.2,
                             .nclasses = n};
    for (char *t = strtok(argv[4], ","); t; t = strtok(NULL, ","))
        if (atoi(t) >= 0 && atoi(t) < REGIONS_MAX_CLASSES)
            o.is_defect[atoi(t)] = 1;
    struct err e;
    err_clear(&e);
    struct image *cm = image_new(w, h, 1, &e);
    FILE *f = fopen(argv[6], "rb");
    if (!cm || !f || fread(cm->px, 1, (size_t)w * h, f) != (size_t)w * h) {
        fprintf(stderr, "regionsdump: cannot read %s\n", argv[6]);
        return 3;
    }
    fclose(f);
    struct region_set rs;
    regions_init(&rs);
    if (regions_find(&rs, cm, NULL, &o, &e)) {
        fprintf(stderr, "regionsdump: %s\n", e.msg);
        return 3;
    }
    for (int i = 0; i < rs.n; i++) {
        const struct region *g = &rs.r[i];
        printf("%d %d %d %d %d %d %.9f %.9f %.9f\n", g->cls, g->pixels, g->x0, g->y0, g->x1,
               g->y1, g->cx, g->cy, g->area_mm2);
    }
    regions_clear(&rs);
    image_free(cm);
    return 0;
}
