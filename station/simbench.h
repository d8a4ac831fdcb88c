/* simbench: the simulated bench, which renders the demo product with full
 * per-pixel ground truth.
 *
 * The demo product is the Ostrel cap 38, an invented 38 mm bead-blasted
 * aluminium cover cap with a centre bore, lying on a dark matte bench mat
 * under a ring light.  Each rendered part has its own pose (position,
 * rotation, slight scale change), surface texture, lighting falloff, sensor
 * noise and blur, and zero to several defects of three classes (scratch,
 * pit, stain), from a few pixels to large.  The truth map holds the class
 * index of the demo recipe (0 background, 1 surface, 2 scratch, 3 pit,
 * 4 stain) for every pixel.  Rendering is a pure function of (seed, index,
 * conditions, size): the same arguments give the same bytes on any machine.
 * It is also the frame source the live station uses with no camera. */
#ifndef ST_SIMBENCH_H
#define ST_SIMBENCH_H

#include <stdint.h>

#include "core/image.h"

enum simbench_class {
    SIM_BACKGROUND = 0,
    SIM_SURFACE = 1,
    SIM_SCRATCH = 2,
    SIM_PIT = 3,
    SIM_STAIN = 4,
    SIM_NCLASSES = 5
};

/* Bench conditions.  Nominal: light 1, noise 2.5, blur 0.7, defect rate
 * 0.7; simbench_render refuses light outside 0.01..4, noise outside 0..64,
 * blur outside 0..8 and a rate outside 0..1 with ST_ERANGE. */
struct simbench_conditions {
    double light;       /* light intensity factor, 1 = nominal */
    double noise;       /* sensor noise std in grey levels at mid-grey (128); it
                           grows with the signal like shot noise: x sqrt(0.6 + 0.4 v/128) */
    double blur;        /* optical blur sigma in pixels */
    double defect_rate; /* probability that a part has at least one defect */
};

/* The usual bench. */
void simbench_conditions_nominal(struct simbench_conditions *c);
/* The "next shift" batch: dimmer light (0.8), more noise (4), softer focus
 * (1); same defect rate, so the same (seed, index) gives the same part. */
void simbench_conditions_shifted(struct simbench_conditions *c);

#define SIMBENCH_MAX_DEFECTS 8

/* Coordinates are in pixels with pixel (x, y) centred at (x, y). */
struct simbench_defect {
    int cls;            /* SIM_SCRATCH, SIM_PIT or SIM_STAIN */
    int pixels;         /* truth pixels of this defect (after occlusion by later ones) */
    double x, y;        /* centre (scratch: of its chord) */
    double size;        /* scratch chord length, pit or stain radius (stains are
                           irregular: their edge wanders by up to +-45%) */
};

/* What was drawn.  Defects are listed in drawing order (stains, then pits,
 * then scratches: later ones cover earlier ones in the truth); one that
 * ended up with no truth pixel of its own is not listed. */
struct simbench_truth {
    int ndefects;
    struct simbench_defect defects[SIMBENCH_MAX_DEFECTS];
    double cx, cy;      /* part centre */
    double radius;      /* outer radius; surface pixels have bore_radius <= r < radius */
    double bore_radius;
    double angle;       /* rotation, radians from +x towards +y: the direction of
                           the orientation notch cut into the rim */
};

/* Renders part `index` of the series `seed` at w x h (w, h >= 64).  The cap
 * spans 0.62 x min(w, h) (+-4%); defect sizes are given for a 360-pixel
 * short side (scratches 15-120 px long, 2-5 px wide, narrower at the ends;
 * pits of radius 1.5-9 px; stains of radius 12-45 px), and scratch lengths and stain radii
 * scale with min(w, h) / 360.  *img (RGB) and *truth (1 channel, class
 * indices) are new images the caller frees; info (may be NULL) describes
 * the part and the defects drawn.  Single-threaded, no global state. */
int simbench_render(uint64_t seed, int index, const struct simbench_conditions *cond, int w,
                    int h, struct image **img, struct image **truth, struct simbench_truth *info,
                    struct err *e);

/* The bench of part `index` with the part lifted off: the same mat, grain,
 * vignetting, light and sensor noise, no part and no shadow.  Where
 * simbench_render of the same arguments differs from it is the part's
 * footprint (the live bench source slides it in and out over this). */
int simbench_render_empty(uint64_t seed, int index, const struct simbench_conditions *cond, int w,
                          int h, struct image **img, struct err *e);

#endif
