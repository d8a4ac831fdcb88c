/* regions_bench [REPEAT]: time of regions_find on class maps like the
 * classifier's, at 640x480 and 1280x960.  The maps are the simulated bench's
 * truth (part, defects) with 0.2 % of the part's pixels flipped to a defect
 * class at random, as the classifier's scattered single-pixel mistakes.  One
 * JSON line per size and merge setting: figures, not a test. */
#include <stdio.h>
#include <stdlib.h>

#include "core/regions.h"
#include "core/rng.h"
#include "station/cli.h"
#include "station/simbench.h"

#define PARTS 4

static int bench(int w, int h, int repeat, double gap)
{
    struct simbench_conditions cond;
    simbench_conditions_nominal(&cond);
    cond.defect_rate = 1;
    struct image *maps[PARTS] = {0};
    struct err e;
    uint64_t st = 20261201;
    for (int p = 0; p < PARTS; p++) {
        struct image *img = NULL;
        if (simbench_render(7, p, &cond, w, h, &img, &maps[p], NULL, &e)) {
            fprintf(stderr, "regions_bench: %s\n", e.msg);
            return 1;
        }
        image_free(img);
        for (size_t i = 0; i < (size_t)w * h; i++)
            if (maps[p]->px[i] == SIM_SURFACE && rng_uniform(&st) < 0.002)
                maps[p]->px[i] = (uint8_t)(SIM_SCRATCH + (int)(3 * rng_uniform(&st)));
    }
    /* the demo recipe's scale: 38 mm across 0.62 of the short side */
    double mm = 38.0 / (0.62 * (w < h ? w : h));
    struct regions_opts o = {.connectivity = 8, .mm_per_px_x = mm, .mm_per_px_y = mm,
                             .nclasses = SIM_NCLASSES};
    for (int c = SIM_SCRATCH; c <= SIM_STAIN; c++) {
        o.is_defect[c] = 1;
        o.merge_gap_mm[c] = gap;
    }
    struct region_set rs;
    regions_init(&rs);
    double best = 1e30, sum = 0;
    long nreg = 0;
    int rc = 0;
    for (int r = 0; r < repeat && !rc; r++) {
        for (int p = 0; p < PARTS && !rc; p++) {
            double t0 = cli_now_ms();
            rc = regions_find(&rs, maps[p], NULL, &o, &e);
            double t = cli_now_ms() - t0;
            sum += t;
            best = t < best ? t : best;
            nreg += rs.n;
        }
    }
    if (rc)
        fprintf(stderr, "regions_bench: %s\n", e.msg);
    else
        printf("{\"w\": %d, \"h\": %d, \"merge_gap_mm\": %g, \"regions_per_frame\": %.1f, "
               "\"regions_ms_mean\": %.3f, \"regions_ms_min\": %.3f}\n", w, h, gap,
               (double)nreg / (repeat * PARTS), sum / (repeat * PARTS), best);
    regions_clear(&rs);
    for (int p = 0; p < PARTS; p++)
        image_free(maps[p]);
    return rc ? 1 : 0;
}

int main(int argc, char **argv)
{
    int repeat = argc > 1 ? atoi(argv[1]) : 20;
    if (repeat < 1 || argc > 2) {
        fprintf(stderr, "usage: regions_bench [REPEAT]\n");
        return 2;
    }
    int rc = 0;
    for (int s = 1; s <= 2; s++)
        for (int g = 0; g < 2; g++)
            rc |= bench(640 * s, 480 * s, repeat, g ? 0.5 : 0);
    return rc;
}
