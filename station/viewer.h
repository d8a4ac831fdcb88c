/* viewer: one record's evidence in an SDL2 window.
 *
 * Shows the original frame and the overlay side by side with a grey gap, or
 * either alone; a picture larger than VIEWER_MAX_W x VIEWER_MAX_H is
 * area-averaged down to fit.  Keys: Tab or Space cycles side by side ->
 * frame -> overlay; 1, 2, 3 choose one; q or Escape (or closing the window)
 * quits.  With a screenshot path the viewer renders once, reads the
 * renderer's pixels back, saves them as PNG and returns without waiting for
 * keys: that is how the tests run it headless (SDL_VIDEODRIVER=dummy).
 *
 * SDL is initialised and quit inside viewer_run; nothing outlives the call.
 * The viewer only shows: it never changes the log or the evidence files. */
#ifndef ST_VIEWER_H
#define ST_VIEWER_H

#include "core/image.h"

enum viewer_mode { VIEWER_SIDE = 0, VIEWER_FRAME, VIEWER_OVERLAY, VIEWER_NMODES };

#define VIEWER_GAP 8
#define VIEWER_MAX_W 1600
#define VIEWER_MAX_H 1000

/* The mode after a key press (an SDL keycode), or -1 for quit. */
int viewer_key(int mode, int key);

/* The picture of a mode; overlay may be NULL (the frame is shown then).
 * The caller frees it. */
struct image *viewer_compose(const struct image *frame, const struct image *overlay, int mode,
                             struct err *e);

/* Opens the window titled title and runs until quit, or renders once into
 * screenshot (PNG) when it is not NULL.  ST_ELIB with SDL's reason when no
 * window can be opened (no display). */
int viewer_run(const char *title, const struct image *frame, const struct image *overlay,
               int mode, const char *screenshot, struct err *e);

#endif
