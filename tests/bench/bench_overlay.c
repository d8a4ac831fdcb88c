/* bench_overlay [REPEAT]: time of locating the part, painting its zones and
 * drawing the inspection picture on a simulated demo part (its truth as the
 * class map) at 640x480 and 1280x960.  Prints one line per size: median
 * (min-max) ms over REPEAT runs (default 40).  Figures, not a test. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "core/judge.h"
#include "core/overlay.h"
#include "core/part.h"
#include "core/zones.h"
#include "station/simbench.h"
#include "tests/bench/benchkit.h"

#define MAX_REPEAT 1000

/* The demo recipe's classes, enough for the picture. */
static void demo_recipe(struct recipe *r, double mm)
{
    static const char *names[] = {"background", "surface", "scratch", "pit", "stain"};
    static const uint8_t rgb[5][3] = {
        {26, 26, 26}, {60, 140, 80}, {224, 192, 32}, {208, 48, 48}, {48, 112, 224}};
    memset(r, 0, sizeof *r);
    r->nclasses = 5;
    for (int c = 0; c < 5; c++) {
        snprintf(r->cls[c].name, sizeof r->cls[c].name, "%s", names[c]);
        r->cls[c].is_defect = c >= 2;
        memcpy(r->cls[c].rgb, rgb[c], 3);
        r->tol[c] = (struct recipe_tolerance){0.05, 0.5, 1.0, 2, -1, -1, -1};
    }
    r->mm_per_px_x = r->mm_per_px_y = mm;
}

static int bench(int w, int h, int repeat, struct err *e)
{
    struct simbench_conditions cond;
    simbench_conditions_nominal(&cond);
    struct image *img = NULL, *cls = NULL, *out = NULL;
    struct zone_map *zm = NULL;
    struct region_set rs;
    regions_init(&rs);
    int rc = simbench_render(5, 0, &cond, w, h, &img, &cls, NULL, e);
    const double mm = 0.17 * 360 / h;   /* the cap spans 38 mm at every size */
    struct recipe r;
    demo_recipe(&r, mm);
    const struct zone zones[5] = {
        {.name = "bore-rim", .shape = ZONE_RING, .r_in = 4, .r_out = 6.5},
        {.name = "tab", .shape = ZONE_RECT, .cx = 10, .w = 6, .h = 3, .angle_deg = 20},
        {.name = "sector", .shape = ZONE_POLYGON, .npoints = 6,
         .pts = {{-2, -8}, {8, -14}, {14, -6}, {9, -4}, {6, -9}, {1, -6}}},
        {.name = "mark", .shape = ZONE_CIRCLE, .cx = -9, .cy = 9, .r_out = 3},
        {.name = "seal-face", .shape = ZONE_RING, .r_in = 14.5, .r_out = 18}};
    if (!rc)
        rc = zone_map_new(zones, 5, &zm, e);
    struct regions_opts o;
    judge_regions_opts(&r, NULL, &o);
    if (!rc)
        rc = regions_find(&rs, cls, NULL, &o, e);
    struct judgement j = {.verdict = VERDICT_FAIL, .nreasons = 1,
                          .reasons = {{"max_area", 4, -1, 1, 1.27, 0.8, 0, "mm2"}}};
    double t_locate[MAX_REPEAT], t_paint[MAX_REPEAT], t_overlay[MAX_REPEAT];
    for (int i = 0; i < repeat && !rc; i++) {
        struct part_pose p;
        double t0 = bench_ms(CLOCK_MONOTONIC);
        rc = part_locate(cls, mm, mm, PART_ORIENT_MOMENTS, &p, e);
        double t1 = bench_ms(CLOCK_MONOTONIC);
        if (!rc)
            rc = zone_map_paint(zm, &p, w, h, mm, mm, e);
        double t2 = bench_ms(CLOCK_MONOTONIC);
        image_free(out);
        out = rc ? NULL : overlay_inspection(img, cls, &rs, zone_map_image(zm), &r, &j, e);
        double t3 = bench_ms(CLOCK_MONOTONIC);
        if (!rc && !out)
            rc = e->code;
        t_locate[i] = t1 - t0;
        t_paint[i] = t2 - t1;
        t_overlay[i] = t3 - t2;
    }
    if (!rc) {
        printf("%4dx%-4d", w, h);
        bench_figures("part_locate", 28, t_locate, repeat);
        bench_figures("zone_map_paint (5 zones)", 28, t_paint, repeat);
        bench_figures("overlay_inspection", 28, t_overlay, repeat);
        printf("\n");
    }
    image_free(out);
    image_free(img);
    image_free(cls);
    zone_map_free(zm);
    regions_clear(&rs);
    return rc;
}

int main(int argc, char **argv)
{
    int repeat = argc > 1 ? atoi(argv[1]) : 40;
    if (repeat < 1 || repeat > MAX_REPEAT) {
        fprintf(stderr, "usage: bench_overlay [REPEAT 1..%d]\n", MAX_REPEAT);
        return 2;
    }
    printf("part, zones and picture: median (min-max) ms per frame, %d runs\n", repeat);
    struct err e;
    err_clear(&e);
    if (bench(640, 480, repeat, &e) || bench(1280, 960, repeat, &e)) {
        fprintf(stderr, "bench_overlay: %s\n", e.msg);
        return 3;
    }
    return 0;
}
