/* judge: turns measured regions and image quality into a verdict.
 *
 * Fail closed: the image-quality gates run first, and any gate that fails
 * gives NO VERDICT with its reason, whatever the regions say — an image that
 * cannot be trusted never passes.  The gates: no part in view (too little
 * of the frame is part, or nearly all of it); the same
 * frame as the last one (frozen camera); the part's mean grey outside the
 * recipe's bounds; too many saturated or black part pixels; sharpness below
 * a share of the reference; part area off the expected one; part at the
 * frame border or outside the recipe's field; too many part pixels the
 * classifier is unsure of; the recipe's calibration past its validity.
 * Before all of them, and whatever the frame: verification due, when the
 * recipe lists master parts and the hours since the last passing
 * verification (refs, from the log) exceed its interval.
 *
 * Otherwise each defect region is judged by the tolerance of its class in
 * its zone (recipe_tolerance_for: the zone's own, else the class's).  A
 * region counts when its area reaches min_area_mm2 (smaller ones are below
 * the limit of discrimination in the sense of ISO 8785: reported, not
 * counted).  Per counted region: largest area, longest length (maximum
 * Feret diameter), and the ISO 10110-7 grade (square root of the area, mm)
 * against A.  Per class and tolerance (the zone's, or the class's pooled
 * over everything it judges): total area, number of regions, and the ISO
 * 10110-7 total N x A^2.  Any rule broken gives FAIL with every broken rule
 * listed (region, zone, measured value, limit, unit); none gives PASS.  The
 * verdict aids, and does not replace, qualified inspection and the site's
 * own quality procedures.  No heap, no state. */
#ifndef ST_JUDGE_H
#define ST_JUDGE_H

#include <stdint.h>

#include "image.h"
#include "part.h"
#include "recipe.h"
#include "regions.h"

_Static_assert(RECIPE_MAX_CLASSES <= REGIONS_MAX_CLASSES, "regions must hold every class");

enum verdict { VERDICT_PASS = 0, VERDICT_FAIL = 1, VERDICT_NONE = 2 };

#define JUDGE_MAX_REASONS 32

struct reason {
    char rule[24];       /* "max_area", "max_total", "grade_size", "too_dark", ... */
    int cls;             /* class index, or -1 for image gates */
    int zone;            /* zone whose tolerance judged, or -1: the class's own / a gate */
    int region;          /* region id (struct region.id), or 0: not about one region */
    double measured;
    double limit;
    int below;           /* the measured value fell below a lower limit (else above an upper) */
    char unit[12];       /* "mm2", "mm", "count", "level", "fraction", "px", "sharpness" */
};

/* Measured over the part (pixels the classifier did not call background). */
struct quality {
    double level;          /* mean grey of the part, 0..255 */
    double saturated;      /* fraction of part pixels with a channel at 255 */
    double black;          /* fraction of part pixels at or below gates.black_level */
    double part_fraction;  /* part pixels / frame pixels */
    /* variance of the 4-neighbour Laplacian of grey over the part's interior
     * (pixels whose 4 neighbours are part too, so the part's outline does not
     * count), scaled by (128 / level)^2 so that dimmer light alone does not
     * read as blur */
    double sharpness;
    double unsure;         /* fraction of part pixels with confidence < gates.low_confidence */
    double frame_change;   /* mean |grey - last frame's grey| over the frame; -1: no last frame */
};

/* What a good frame of this product looks like, resolved by the caller
 * (the inspector: the recipe's value, else the training images' in the model
 * metadata), and the state of the station's calibration and verification. */
struct judge_refs {
    double sharpness;
    double part_area_mm2;
    /* days since the recipe's calibration was made, at this frame (the
     * caller reads the clock); past its valid_days every frame is NO VERDICT */
    double calibration_age_days;
    /* hours since the last passing master-part verification, capped at
     * JUDGE_NEVER_VERIFIED_H (which is also what none on record reads as);
     * -1: not checked (inspection without a log) */
    double since_verified_h;
};
#define JUDGE_NEVER_VERIFIED_H 1e6

struct judgement {
    int verdict;
    int nreasons;
    int omitted;                            /* reasons beyond JUDGE_MAX_REASONS */
    struct reason reasons[JUDGE_MAX_REASONS];
    int count[RECIPE_MAX_CLASSES];          /* counted regions per class, all zones */
    double total_mm2[RECIPE_MAX_CLASSES];   /* their total area */
};

const char *judge_verdict_name(int verdict);  /* "PASS", "FAIL", "NO_VERDICT" */

/* One reason in words for a person, e.g. "scratch in rim: region 3 length
 * 4.1 mm > 3 mm" or "too dark: part level 31 < 40". */
void judge_describe_reason(const struct recipe *r, const struct reason *x, char *buf,
                           size_t len);

/* The regions options a recipe implies (connectivity, scale, defect
 * classes, merge gaps); zones may be NULL. */
void judge_regions_opts(const struct recipe *r, const struct image *zones,
                        struct regions_opts *o);

/* img is the RGB (or grey) frame, classes the class map of the same size,
 * conf the classifier's confidence per pixel (NULL: all sure).  grey
 * (w x h bytes, caller-owned) receives the frame's grey; last (NULL on a
 * first frame) is the previous frame's, for frame_change. */
int judge_measure_quality(const struct recipe *r, const struct image *img,
                          const struct image *classes, const float *conf, uint8_t *grey,
                          const uint8_t *last, struct quality *q, struct err *e);

/* Whether a region counts under the tolerance that judges it. */
int judge_region_counts(const struct recipe *r, const struct region *g);

/* The gates, then the tolerances. */
void judge_part(const struct recipe *r, const struct judge_refs *refs, const struct quality *q,
                const struct part_pose *pose, const struct region_set *rs, struct judgement *j);

/* The tolerances alone (PASS or FAIL): how a known truth map is judged. */
void judge_tolerances(const struct recipe *r, const struct region_set *rs, struct judgement *j);

#endif
