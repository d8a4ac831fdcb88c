/* zonetool: drives part, zones and overlay from the reference checks.
 *
 *   zonetool part W H SX SY ORIENT CLASSES.raw
 *       prints the pose: found pixels area_mm2 cx cy angle isotropic
 *       major_mm minor_mm x0 y0 x1 y1 border_gap
 *   zonetool zones SPEC.json W H CLASSES.raw OUTDIR
 *       locates the part (moments), paints the zones of SPEC into
 *       OUTDIR/paint.raw and, pixel by pixel through zone_map_contains,
 *       OUTDIR/contains.raw; prints the pose line as above
 *   zonetool overlay SPEC.json FRAME.png CLASSES.raw LABELS.raw ZONES.raw|- OUT.png
 *       draws overlay_inspection from a recipe, regions and judgement
 *       described in SPEC; LABELS.raw holds int32 region indices (-1 none);
 *       prints the banner height
 * Raw files are 8-bit, row-major, W x H.  Exit 3 with the error on stderr. */
#include <jansson.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/overlay.h"
#include "core/part.h"
#include "core/pngio.h"
#include "core/zones.h"
#include "toolarg.h"

static int read_raw(const char *path, void *buf, size_t n)
{
    FILE *f = fopen(path, "rb");
    size_t got = f ? fread(buf, 1, n, f) : 0;
    if (f)
        fclose(f);
    return got == n ? 0 : -1;
}

static int write_raw(const char *path, const void *buf, size_t n)
{
    FILE *f = fopen(path, "wb");
    size_t put = f ? fwrite(buf, 1, n, f) : 0;
    if (f && fclose(f))
        return -1;
    return put == n ? 0 : -1;
}

static void print_pose(const struct part_pose *p)
{
    printf("%d %ld %.17g %.17g %.17g %.17g %d %.17g %.17g %d %d %d %d %d\n", p->found, p->pixels,
           p->area_mm2, p->cx, p->cy, p->angle, p->isotropic, p->major_mm, p->minor_mm, p->x0,
           p->y0, p->x1, p->y1, p->border_gap);
}

static double num(json_t *o, const char *key)
{
    return json_number_value(json_object_get(o, key));
}

static void parse_zone(json_t *o, struct zone *z)
{
    static const char *shapes[] = {"rect", "circle", "ring", "polygon", "mask"};
    memset(z, 0, sizeof *z);
    snprintf(z->name, sizeof z->name, "%s", json_string_value(json_object_get(o, "name")));
    const char *shape = json_string_value(json_object_get(o, "shape"));
    for (int k = 0; k < 5; k++)
        if (shape && strcmp(shape, shapes[k]) == 0)
            z->shape = (enum zone_shape)k;
    z->cx = num(o, "cx");
    z->cy = num(o, "cy");
    z->w = num(o, "w");
    z->h = num(o, "h");
    z->angle_deg = num(o, "angle_deg");
    z->r_in = num(o, "r_in");
    z->r_out = num(o, "r_out");
    json_t *pts = json_object_get(o, "pts");
    z->npoints = (int)json_array_size(pts);
    for (int i = 0; i < z->npoints && i < ZONE_MAX_POINTS; i++) {
        z->pts[i][0] = json_number_value(json_array_get(json_array_get(pts, i), 0));
        z->pts[i][1] = json_number_value(json_array_get(json_array_get(pts, i), 1));
    }
    const char *mask = json_string_value(json_object_get(o, "mask_path"));
    snprintf(z->mask_path, sizeof z->mask_path, "%s", mask ? mask : "");
    z->mask_mm_per_px = num(o, "mask_mm_per_px");
}

static int cmd_part(char **argv, struct err *e)
{
    int w, h, orient;
    if (parse_int(argv[0], &w) || parse_int(argv[1], &h) || parse_int(argv[4], &orient))
        return err_set(e, ST_EINVAL, "bad W, H or ORIENT");
    struct image *cm = image_new(w, h, 1, e);
    if (!cm)
        return e->code;
    int rc = read_raw(argv[5], cm->px, (size_t)w * h)
                 ? err_set(e, ST_EIO, "%s: cannot read %dx%d bytes", argv[5], w, h)
                 : ST_OK;
    struct part_pose p;
    if (!rc)
        rc = part_locate(cm, atof(argv[2]), atof(argv[3]), (enum part_orient)orient, &p, e);
    if (!rc)
        print_pose(&p);
    image_free(cm);
    return rc;
}

static int cmd_zones(char **argv, struct err *e)
{
    int w, h;
    if (parse_int(argv[1], &w) || parse_int(argv[2], &h))
        return err_set(e, ST_EINVAL, "bad W or H");
    json_error_t je;
    json_t *spec = json_load_file(argv[0], 0, &je);
    if (!spec)
        return err_set(e, ST_EFORMAT, "%s: %s", argv[0], je.text);
    double sx = num(spec, "sx"), sy = num(spec, "sy");
    struct zone zs[ZONE_MAX];
    json_t *list = json_object_get(spec, "zones");
    int n = (int)json_array_size(list);
    for (int k = 0; k < n && k < ZONE_MAX; k++)
        parse_zone(json_array_get(list, k), &zs[k]);
    json_decref(spec);
    struct zone_map *m = NULL;
    struct image *cm = image_new(w, h, 1, e), *cont = image_new(w, h, 1, e);
    int rc = cm && cont ? ST_OK : e->code;
    if (!rc && read_raw(argv[3], cm->px, (size_t)w * h))
        rc = err_set(e, ST_EIO, "%s: cannot read %dx%d bytes", argv[3], w, h);
    if (!rc)
        rc = zone_map_new(zs, n, &m, e);
    struct part_pose p;
    if (!rc)
        rc = part_locate(cm, sx, sy, PART_ORIENT_MOMENTS, &p, e);
    if (!rc)
        rc = zone_map_paint(m, &p, w, h, sx, sy, e);
    if (!rc) {
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++) {
                double u, v;
                part_to_part_mm(&p, sx, sy, x, y, &u, &v);
                int k = 0;
                while (k < n && !zone_map_contains(m, k, u, v))
                    k++;
                cont->px[(size_t)y * w + x] = p.found && k < n ? (uint8_t)k : ZONE_NONE;
            }
        char path[4200];
        snprintf(path, sizeof path, "%s/paint.raw", argv[4]);
        if (write_raw(path, zone_map_image(m)->px, (size_t)w * h))
            rc = err_set(e, ST_EIO, "%s: cannot write", path);
        snprintf(path, sizeof path, "%s/contains.raw", argv[4]);
        if (!rc && write_raw(path, cont->px, (size_t)w * h))
            rc = err_set(e, ST_EIO, "%s: cannot write", path);
    }
    if (!rc)
        print_pose(&p);
    zone_map_free(m);
    image_free(cm);
    image_free(cont);
    return rc;
}

static void parse_recipe(json_t *spec, struct recipe *r)
{
    memset(r, 0, sizeof *r);
    json_t *cls = json_object_get(spec, "classes");
    r->nclasses = (int)json_array_size(cls);
    for (int c = 0; c < r->nclasses && c < RECIPE_MAX_CLASSES; c++) {
        json_t *o = json_array_get(cls, c);
        snprintf(r->cls[c].name, sizeof r->cls[c].name, "%s",
                 json_string_value(json_object_get(o, "name")));
        r->cls[c].is_defect = json_is_true(json_object_get(o, "defect"));
        for (int k = 0; k < 3; k++)
            r->cls[c].rgb[k] = (uint8_t)json_integer_value(
                json_array_get(json_object_get(o, "rgb"), (size_t)k));
        r->tol[c].min_area_mm2 = num(o, "min_area_mm2");
    }
    r->mm_per_px_x = r->mm_per_px_y = 0.1;
}

static void parse_judgement(json_t *o, struct judgement *j)
{
    memset(j, 0, sizeof *j);
    j->verdict = (int)json_integer_value(json_object_get(o, "verdict"));
    json_t *rs = json_object_get(o, "reasons");
    j->nreasons = (int)json_array_size(rs);
    for (int i = 0; i < j->nreasons && i < JUDGE_MAX_REASONS; i++) {
        json_t *x = json_array_get(rs, i);
        struct reason *q = &j->reasons[i];
        snprintf(q->rule, sizeof q->rule, "%s", json_string_value(json_object_get(x, "rule")));
        q->cls = (int)json_integer_value(json_object_get(x, "cls"));
        q->zone = -1;
        q->measured = num(x, "measured");
        q->limit = num(x, "limit");
        snprintf(q->unit, sizeof q->unit, "%s", json_string_value(json_object_get(x, "unit")));
    }
}

static int cmd_overlay(char **argv, struct err *e)
{
    json_error_t je;
    json_t *spec = json_load_file(argv[0], 0, &je);
    if (!spec)
        return err_set(e, ST_EFORMAT, "%s: %s", argv[0], je.text);
    struct recipe r;
    struct judgement j;
    parse_recipe(spec, &r);
    parse_judgement(json_object_get(spec, "judgement"), &j);
    struct region_set rs;
    regions_init(&rs);
    json_t *regs = json_object_get(spec, "regions");
    rs.n = rs.cap = (int)json_array_size(regs);
    rs.r = calloc((size_t)rs.n + 1, sizeof *rs.r);
    for (int i = 0; rs.r && i < rs.n; i++) {
        json_t *o = json_array_get(regs, i);
        struct region *g = &rs.r[i];
        g->id = i + 1;
        g->cls = (int)num(o, "cls");
        g->area_mm2 = num(o, "area_mm2");
        g->x0 = (int)num(o, "x0");
        g->y0 = (int)num(o, "y0");
        g->x1 = (int)num(o, "x1");
        g->y1 = (int)num(o, "y1");
    }
    json_decref(spec);
    struct image *frame = NULL, *cm = NULL, *zm = NULL, *out = NULL;
    int rc = pngio_load_rgb(argv[1], &frame, e);
    const int w = frame ? frame->w : 0, h = frame ? frame->h : 0;
    const size_t npix = (size_t)w * h;
    if (!rc && !(cm = image_new(w, h, 1, e)))
        rc = e->code;
    if (!rc && !(rs.labels = malloc(npix * sizeof *rs.labels)))
        rc = err_set(e, ST_ENOMEM, "out of memory");
    if (!rc && (read_raw(argv[2], cm->px, npix) ||
                read_raw(argv[3], rs.labels, npix * sizeof *rs.labels)))
        rc = err_set(e, ST_EIO, "cannot read %s or %s", argv[2], argv[3]);
    if (!rc && strcmp(argv[4], "-") != 0) {
        if (!(zm = image_new(w, h, 1, e)))
            rc = e->code;
        else if (read_raw(argv[4], zm->px, npix))
            rc = err_set(e, ST_EIO, "cannot read %s", argv[4]);
    }
    if (!rc && !(out = overlay_inspection(frame, cm, &rs, zm, &r, &j, e)))
        rc = e->code;
    if (!rc)
        rc = pngio_save(argv[5], out, 3, e);
    if (!rc)
        printf("%d\n", out->h - h);
    regions_clear(&rs);
    image_free(frame);
    image_free(cm);
    image_free(zm);
    image_free(out);
    return rc;
}

int main(int argc, char **argv)
{
    struct err e;
    err_clear(&e);
    int rc;
    if (argc == 8 && strcmp(argv[1], "part") == 0)
        rc = cmd_part(argv + 2, &e);
    else if (argc == 7 && strcmp(argv[1], "zones") == 0)
        rc = cmd_zones(argv + 2, &e);
    else if (argc == 8 && strcmp(argv[1], "overlay") == 0)
        rc = cmd_overlay(argv + 2, &e);
    else {
        fprintf(stderr, "usage: zonetool part|zones|overlay ... (see zonetool.c)\n");
        return 2;
    }
    if (rc)
        fprintf(stderr, "zonetool: %s\n", e.msg);
    return rc ? 3 : 0;
}
