/* recipe: a product's inspection recipe, read from our INI-style file.
 *
 * The format is documented in recipes/README.md.  recipe_load parses with
 * inih, counts lines itself so every complaint reads `FILE:LINE: what is
 * wrong` (unknown section or key, duplicate key, class or section, bad
 * value: ST_EFORMAT; value out of range: ST_ERANGE), and checks the whole
 * after parsing: a missing key names its section's header line
 * (`FILE:LINE: [classifier] lacks key 'rounds'`), a missing section has no
 * line (`FILE: missing section [scale]`), a defect class without its
 * [tolerance NAME] names the class's header line.  A file that cannot be
 * opened is ST_EIO.  The first error stops the parse.  Relative paths
 * resolve against the recipe's folder.  On failure *r is left untouched.
 * A recipe is a plain value: no heap, copy it freely. */
#ifndef ST_RECIPE_H
#define ST_RECIPE_H

#include <limits.h>
#include <stdint.h>

#include "booster.h"
#include "err.h"
#include "features.h"
#include "zones.h"

#define RECIPE_MAX_CLASSES 16
#define RECIPE_FORMAT 1        /* the `format` key in [product]; newer is refused */

struct recipe_class {
    char name[32];             /* [a-z0-9_-], unique */
    int is_defect;
    uint8_t rgb[3];            /* display colour, "#rrggbb" in the file */
};

/* Per defect class; a negative value means "no limit". */
struct recipe_tolerance {
    double min_area_mm2;       /* regions smaller than this are not counted */
    double max_area_mm2;       /* largest single region allowed */
    double max_total_mm2;      /* sum over counted regions */
    int max_count;             /* number of counted regions */
};

/* When an image cannot be trusted it gets NO VERDICT; these bound that. */
struct recipe_gates {
    double min_level;          /* part brightness level (0..255) below = too dark */
    double max_saturated;      /* fraction of part pixels at 255 above = saturated */
    double min_part_fraction;  /* fraction of the frame the part covers below = no part */
    double min_sharpness;      /* mean |Laplacian| over the part below = blurred */
};

struct recipe {
    char path[PATH_MAX];
    char dir[PATH_MAX];
    int format;
    char product[64];
    int version;
    char description[160];
    int nclasses;              /* 2..RECIPE_MAX_CLASSES; class 0 is the background */
    struct recipe_class cls[RECIPE_MAX_CLASSES];
    struct feat_spec feat;
    struct booster_params train;
    int samples_per_class;     /* cap of training pixels per class per image */
    double validation_fraction;/* share of sampled pixels held out, (0, 0.5] */
    char model_path[PATH_MAX]; /* resolved against dir */
    double mm_per_px_x, mm_per_px_y;
    struct recipe_tolerance tol[RECIPE_MAX_CLASSES];
    struct recipe_gates gates;
    int nzones;                /* [zone NAME] sections, in priority order */
    struct zone zones[ZONE_MAX];
};

int recipe_load(const char *path, struct recipe *r, struct err *e);

/* Index of the class with this name, or -1. */
int recipe_find_class(const struct recipe *r, const char *name);

#endif
