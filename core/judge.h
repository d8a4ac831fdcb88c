/* judge: turns measured regions and image quality into a verdict.
 *
 * Fail closed: the image-quality gates run first, and any gate that fails
 * (too dark, saturated, blurred, no part in view) gives NO VERDICT with its
 * reason, whatever the regions say — an image that cannot be trusted never
 * passes.  Otherwise each defect class's tolerance is applied to the regions
 * that count (area >= min_area_mm2; smaller ones are below the limit of
 * discrimination in the sense of ISO 8785 and are reported but not counted):
 * largest single area, total area, number of regions.  Any rule broken gives
 * FAIL with every broken rule listed; none gives PASS.  The verdict aids,
 * and does not replace, qualified inspection and the site's own quality
 * procedures. */
#ifndef ST_JUDGE_H
#define ST_JUDGE_H

#include "image.h"
#include "recipe.h"
#include "regions.h"

enum verdict { VERDICT_PASS = 0, VERDICT_FAIL = 1, VERDICT_NONE = 2 };

_Static_assert(RECIPE_MAX_CLASSES <= REGIONS_MAX_CLASSES, "regions must hold every class");

#define JUDGE_MAX_REASONS 32

struct reason {
    char rule[24];       /* "max_area", "max_total", "max_count", "too_dark", ... */
    int cls;             /* class index, or -1 for image gates */
    int zone;            /* zone index, or -1: outside every zone / not about a zone */
    int region;          /* region id (struct region.id), or 0: not about one region */
    double measured;
    double limit;
    char unit[12];       /* "mm2", "count", "level", "fraction", "sharpness" */
};

/* Measured over the part (pixels the classifier did not call background). */
struct quality {
    double level;          /* median grey of the part, 0..255 */
    double saturated;      /* fraction of part pixels with a channel at 255 */
    double part_fraction;  /* part pixels / frame pixels */
    double sharpness;      /* 100 * mean |4-neighbour Laplacian| / level over the part */
};

struct judgement {
    int verdict;
    int nreasons;
    struct reason reasons[JUDGE_MAX_REASONS];
    int count[RECIPE_MAX_CLASSES];          /* counted regions per class */
    double total_mm2[RECIPE_MAX_CLASSES];   /* their total area */
};

const char *judge_verdict_name(int verdict);  /* "PASS", "FAIL", "NO_VERDICT" */

/* One reason in words for a person, e.g. "scratch in seal-face: region 3
 * length 4.1 mm > 3 mm" or "too dark: part level 31 < 40". */
void judge_describe_reason(const struct recipe *r, const struct reason *x, char *buf,
                           size_t len);

/* img is the RGB (or grey) frame, classes the class map of the same size. */
int judge_measure_quality(const struct image *img, const struct image *classes,
                          struct quality *q, struct err *e);

/* The regions options a recipe implies (connectivity, scale, defect
 * classes, merge gaps); zones may be NULL. */
void judge_regions_opts(const struct recipe *r, const struct image *zones,
                        struct regions_opts *o);

/* Whether a region counts under its class's tolerance. */
int judge_region_counts(const struct recipe *r, const struct region *g);

void judge_part(const struct recipe *r, const struct quality *q, const struct region_set *rs,
                struct judgement *j);

#endif
