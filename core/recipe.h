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
 * resolve against the recipe's folder.  `[scale] calibration = FILE` loads
 * the calibration file (core/calfile.h) into r->cal and fills mm_per_px_x/y
 * from it.  On failure *r is left untouched.
 * A recipe is a plain value: no heap, copy it freely. */
#ifndef ST_RECIPE_H
#define ST_RECIPE_H

#include <limits.h>
#include <stdint.h>

#include "booster.h"
#include "calfile.h"
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

/* Per defect class, and per class inside a zone; a negative value means
 * "no limit". */
struct recipe_tolerance {
    double min_area_mm2;       /* regions smaller than this are not counted */
    double max_area_mm2;       /* largest single region allowed */
    double max_total_mm2;      /* sum over counted regions */
    int max_count;             /* number of counted regions */
    double max_length_mm;      /* longest single region (maximum Feret diameter) */
    int grade_n;               /* ISO 10110-7 "N x A": N imperfections ... */
    double grade_a_mm;         /* ... of grade A (square root of the area, mm) */
};

/* Where and how big the part must be. */
struct recipe_part {
    int orient;                /* enum part_orient */
    double area_mm2;           /* expected area; -1: the trained model's reference */
    double area_tolerance;     /* allowed relative deviation from it */
    int border_margin_px;      /* part closer to the frame edge than this = at border */
    int field[4];              /* x0 y0 x1 y1 the part must lie within; x0 = -1: whole frame */
};

/* When an image cannot be trusted it gets NO VERDICT; these bound that. */
struct recipe_gates {
    double min_level;          /* mean grey of the part (0..255) below = too dark */
    double max_level;          /* ... above = too bright */
    double max_saturated;      /* fraction of part pixels with a channel at 255 */
    double black_level;        /* grey at or below which a part pixel is black */
    double max_black;          /* fraction of black part pixels */
    double min_part_fraction;  /* fraction of the frame the part covers below = no part */
    double max_part_fraction;  /* ... above = no part either: nothing to find it against */
    double sharpness_reference;/* sharpness of a good frame; -1: the model's reference */
    double min_sharpness_ratio;/* sharpness below this share of the reference = blurred */
    double low_confidence;     /* classifier confidence below which a pixel is unsure */
    double max_low_confidence; /* fraction of unsure part pixels */
    double min_frame_change;   /* mean |grey change| from the last frame at or below = frozen; -1 off */
};

/* [master NAME]: a part of known verdict that `station verify` runs. */
#define RECIPE_MAX_MASTERS 8
struct recipe_master {
    char name[32];
    char image[PATH_MAX];      /* resolved against dir */
    int expect;                /* enum verdict: VERDICT_PASS or VERDICT_FAIL */
};
/* [trigger]: when the live station (station/trigger.h) inspects.  The
 * measures are taken on a grey thumbnail of 8x8-pixel block means. */
enum recipe_trigger_mode { RECIPE_TRIGGER_KEY = 0, RECIPE_TRIGGER_AUTO, RECIPE_TRIGGER_CONTINUOUS };
struct recipe_trigger {
    int mode;                  /* enum recipe_trigger_mode, default key */
    int still_frames;          /* auto: consecutive still frames before inspecting */
    double still_level;        /* still: mean |grey change| between frames at or below */
    double presence_level;     /* a block differs from the empty bench by more than this */
    double enter_share;        /* part present: share of such blocks above this ... */
    double leave_share;        /* ... and gone again below this (hysteresis) ... */
    int leave_frames;          /* ... for this many frames: the trigger re-arms */
    int frozen_frames;         /* this many identical frames in a row: camera frozen */
};

/* Which PASS inspections keep evidence ([evidence] pass); rejects always do. */
enum recipe_pass_evidence { RECIPE_PASS_NONE = 0, RECIPE_PASS_ALL, RECIPE_PASS_EVERY };

/* [camera]: what a V4L2 camera is asked for and locked to
 * (station/source_camera.h).  Every key is optional: a setting the recipe
 * leaves out is left as the camera has it.  Bits of set and required, in
 * the order the camera locks them. */
enum recipe_cam_setting {
    RCAM_EXPOSURE = 1u << 0,      /* auto exposure off, then exposure */
    RCAM_GAIN = 1u << 1,          /* auto gain off, then gain */
    RCAM_WHITE_BALANCE = 1u << 2, /* auto white balance off, then temperature */
    RCAM_FOCUS = 1u << 3,         /* autofocus off, then focus */
    RCAM_POWER_LINE = 1u << 4     /* anti-flicker filter */
};
#define RECIPE_CAM_STALL_MS 2000 /* default stall_ms: a few dozen frame periods, common practice */
enum recipe_power_line { RCAM_PL_OFF = 0, RCAM_PL_50HZ, RCAM_PL_60HZ }; /* V4L2's own values */
struct recipe_camera {
    int width, height;         /* asked size; 0: the camera's current one */
    double fps;                /* asked rate; 0: the camera's current one */
    int stall_ms;              /* no frame for this long restarts the stream */
    int exposure;              /* V4L2_CID_EXPOSURE_ABSOLUTE units: 100 microseconds */
    int gain;                  /* the camera's own units */
    int white_balance_k;       /* colour temperature, kelvin */
    int focus;                 /* the camera's own units (V4L2_CID_FOCUS_ABSOLUTE) */
    int power_line;            /* enum recipe_power_line */
    unsigned set;              /* enum recipe_cam_setting bits the recipe gives */
    unsigned required;         /* ... that the camera must have, else it is refused */
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
    int coarse_classify;       /* [classifier] coarse: 1 = the approximation in core/inspect.c */
    char model_path[PATH_MAX]; /* resolved against dir */
    double mm_per_px_x, mm_per_px_y; /* [scale], or the calibration's at its target's centre */
    char calibration_path[PATH_MAX]; /* [scale] calibration, resolved against dir; "" = none */
    int has_calibration;
    struct calfile cal;        /* when has_calibration: areas follow its homography */
    struct recipe_tolerance tol[RECIPE_MAX_CLASSES];
    struct recipe_gates gates;
    double merge_gap_mm[RECIPE_MAX_CLASSES]; /* [tolerance NAME] merge_gap_mm */
    struct recipe_part part;
    int nzones;                /* [zone NAME] sections, in priority order */
    struct zone zones[ZONE_MAX];
    /* [tolerance CLASS in ZONE]: ztol_set[z][c] says whether zone z has its
     * own tolerance for class c (keys it leaves out keep the class's) */
    int ztol_set[ZONE_MAX][RECIPE_MAX_CLASSES];
    struct recipe_tolerance ztol[ZONE_MAX][RECIPE_MAX_CLASSES];
    char flat_field[PATH_MAX]; /* [lighting] flat_field, resolved; "" = none */
    /* [verification] interval_hours (-1: no masters) and the [master NAME]
     * sections; when there are any, at least one expects PASS and one FAIL */
    double verify_interval_hours;
    int nmasters;
    struct recipe_master masters[RECIPE_MAX_MASTERS];
    int evidence_pass;         /* enum recipe_pass_evidence, default none */
    int evidence_every;        /* N of "every N" */
    struct recipe_camera camera;
    struct recipe_trigger trigger;
};

int recipe_load(const char *path, struct recipe *r, struct err *e);

/* The [features] families word of bit `bit` of enum feat_family, or NULL. */
const char *recipe_family_name(int bit);

/* Index of the class with this name, or -1. */
int recipe_find_class(const struct recipe *r, const char *name);

/* The tolerance judging class cls in zone (-1: outside every zone): the
 * zone's own where it has one, else the class's. */
const struct recipe_tolerance *recipe_tolerance_for(const struct recipe *r, int cls, int zone);
/* The zone whose own tolerance judges class cls in zone, or -1: the class's. */
int recipe_tolerance_zone(const struct recipe *r, int cls, int zone);

#endif
