/* regionsdump W H NCLASSES DEFECTS CONNECTIVITY SX SY GAP RAW [LABELS]: the
 * regions of a raw 8-bit class map, one line each (id cls zone pixels x0 y0
 * x1 y1 cx cy area_mm2 length_mm width_mm orientation fragments), for the
 * reference checks against scipy, OpenCV and scikit-image.  DEFECTS is a
 * comma list of defect class indices, SX SY the pixel size in mm, GAP the
 * merge gap in mm of every defect class.  LABELS, when given, receives the
 * region index of every pixel (int32, -1 outside every region).  A last
 * argument H=h0,...,h8 sets regions_opts.image_to_plane, and with it
 * L=fx,fy,cx,cy,k1,k2 regions_opts.lens. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/regions.h"
#include "toolarg.h"

static int parse_mm(const char *s, double *v)
{
    char *end;
    *v = strtod(s, &end);
    return *s && !*end ? 0 : -1;
}

/* "NAME=v0,v1,...": exactly n comma-separated numbers after the '='. */
static int parse_list(const char *arg, int n, double *v)
{
    const char *q = arg + 2;
    for (int i = 0; i < n; i++) {
        char *end;
        v[i] = strtod(q, &end);
        if (end == q || (i < n - 1 && *end != ',') || (i == n - 1 && *end))
            return -1;
        q = end + 1;
    }
    return 0;
}

int main(int argc, char **argv)
{
    int w, h, n, conn;
    double sx, sy, gap, hom[9], lv[6] = {0};
    int use_h = 0, use_l = 0;
    while (argc > 1 && (!strncmp(argv[argc - 1], "H=", 2) || !strncmp(argv[argc - 1], "L=", 2))) {
        const char *a = argv[--argc];
        int is_h = a[0] == 'H';
        if (parse_list(a, is_h ? 9 : 6, is_h ? hom : lv)) {
            fprintf(stderr, "regionsdump: %s needs %d comma-separated numbers\n", is_h ? "H=" : "L=",
                    is_h ? 9 : 6);
            return 2;
        }
        *(is_h ? &use_h : &use_l) = 1;
    }
    struct lens_model lens = {lv[0], lv[1], lv[2], lv[3], lv[4], lv[5]};
    if ((argc != 10 && argc != 11) || parse_int(argv[1], &w) || parse_int(argv[2], &h) ||
        parse_int(argv[3], &n) || parse_int(argv[5], &conn) || parse_mm(argv[6], &sx) ||
        parse_mm(argv[7], &sy) || parse_mm(argv[8], &gap)) {
        fprintf(stderr, "usage: regionsdump W H NCLASSES DEFECTS CONNECTIVITY SX SY GAP RAW [LABELS]\n");
        return 2;
    }
    struct regions_opts o = {.connectivity = conn, .mm_per_px_x = sx, .mm_per_px_y = sy,
                             .nclasses = n, .image_to_plane = use_h ? hom : NULL,
                             .lens = use_h && use_l ? &lens : NULL};
    for (char *t = strtok(argv[4], ","); t; t = strtok(NULL, ",")) {
        int c;
        if (parse_int(t, &c) || c < 0 || c >= REGIONS_MAX_CLASSES) {
            fprintf(stderr, "regionsdump: bad defect class '%s'\n", t);
            return 2;
        }
        o.is_defect[c] = 1;
        o.merge_gap_mm[c] = gap;
    }
    struct err e;
    err_clear(&e);
    struct image *cm = image_new(w, h, 1, &e);
    FILE *f = fopen(argv[9], "rb");
    int ok = cm && f && fread(cm->px, 1, (size_t)w * h, f) == (size_t)w * h;
    if (f)
        fclose(f);
    if (!ok) {
        fprintf(stderr, "regionsdump: cannot read %dx%d bytes from %s\n", w, h, argv[9]);
        image_free(cm);
        return 3;
    }
    struct region_set rs;
    regions_init(&rs);
    int rc = regions_find(&rs, cm, NULL, &o, &e);
    if (rc)
        fprintf(stderr, "regionsdump: %s\n", e.msg);
    for (int i = 0; !rc && i < rs.n; i++) {
        const struct region *g = &rs.r[i];
        printf("%d %d %d %d %d %d %d %d %.17g %.17g %.17g %.17g %.17g %.17g %d\n", g->id, g->cls,
               g->zone, g->pixels, g->x0, g->y0, g->x1, g->y1, g->cx, g->cy, g->area_mm2,
               g->length_mm, g->width_mm, g->orientation, g->fragments);
    }
    if (!rc && argc == 11) {
        FILE *out = fopen(argv[10], "wb");
        if (!out || fwrite(rs.labels, sizeof *rs.labels, (size_t)w * h, out) != (size_t)w * h) {
            fprintf(stderr, "regionsdump: cannot write %s\n", argv[10]);
            rc = 3;
        }
        if (out && fclose(out))
            rc = 3;
    }
    regions_clear(&rs);
    image_free(cm);
    return rc ? 3 : 0;
}
