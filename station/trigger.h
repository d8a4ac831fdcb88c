/* trigger: when the live station inspects — pure logic over the frames it
 * is shown, no clock, no I/O, no threads.
 *
 * Every frame is reduced to a thumbnail of 8x8-pixel block sums of
 * R + G + B (the right and bottom remainders left out), from which:
 *   stillness  the mean over blocks of |block mean now - block mean in the
 *              last frame|, in grey levels (-1 on the first frame);
 *   presence   the share of blocks whose mean differs from the learned
 *              empty bench by more than presence_level;
 *   frozen     frozen_frames identical frames in a row (every block sum
 *              unchanged: with sensor noise a live camera never repeats
 *              all of them, a stuck one repeats all).
 * A frame identical to the last one does not count as still (a frozen
 * camera is not a still part).  The empty bench is learned as soon as the
 * view has been still for
 * still_frames frames (the station starts on an empty bench), and again
 * after trigger_relearn.  A part is present once the share exceeds
 * enter_share and has left once it stays below leave_share for
 * leave_frames frames (hysteresis: a part half out of the light does not
 * re-arm).  Modes (enum recipe_trigger_mode): key never fires (the caller
 * handles the key); auto fires once when a part is present and the view has
 * been still for still_frames frames, and is armed again only when that
 * part has left; continuous fires on every frame.  Nothing fires while the
 * camera is frozen.  Recipe keys: [trigger] in recipes/README.md. */
#ifndef ST_TRIGGER_H
#define ST_TRIGGER_H

#include "core/image.h"
#include "core/recipe.h"

#define TRIGGER_BLOCK 8

enum trigger_event {
    TRIGGER_FIRE = 1,     /* inspect this frame */
    TRIGGER_LEARNED = 2,  /* this frame is the new empty bench */
    TRIGGER_FROZEN = 4,   /* the camera just froze */
    TRIGGER_MOVING = 8    /* ... and just moved again */
};

struct trigger_view {
    double stillness;     /* grey levels; -1: no last frame */
    double presence;      /* share of blocks; -1: no empty bench yet */
    int still_count;      /* consecutive still frames */
    int learned, present, armed, frozen;
};

struct trigger;
int trigger_new(const struct recipe_trigger *params, int mode, struct trigger **out,
                struct err *e);
void trigger_free(struct trigger *t);

/* Measures img (RGB) and returns the OR of the events it caused in *events. */
int trigger_feed(struct trigger *t, const struct image *img, unsigned *events, struct err *e);

/* Learn the empty bench again at the next still view (F6). */
void trigger_relearn(struct trigger *t);
/* The part in view has had its record another way (camera lost): no
 * automatic inspection until it has left. */
void trigger_disarm(struct trigger *t);
/* Frames stopped coming (camera lost): the next one starts stillness and
 * the frozen count afresh. */
void trigger_restart(struct trigger *t);

void trigger_view(const struct trigger *t, struct trigger_view *v);

/* "key", "auto", "continuous"; and back (-1: none of them). */
const char *trigger_mode_name(int mode);
int trigger_mode_parse(const char *s);

#endif
