/* source: where the live station's frames come from, behind one small table
 * of function pointers.
 *
 * A source is opened from a spec string:
 *   camera:/dev/videoN   a V4L2 camera through libv4l2 (station/source_camera.h)
 *   replay:DIR           the PNG files of DIR in name order, paced at a rate
 *   bench[:KEY=VALUE,...] the simulated bench (station/simbench.h) with parts
 *                        placed on and taken off the bench (station/source_bench.h)
 * source_next waits at most timeout_ms for the next frame and says what
 * happened in *status: a frame, nothing yet (SOURCE_WAIT), the device lost
 * (SOURCE_LOST: later calls try to reconnect, with back-off, and give
 * SOURCE_LOST until it is back) or the end of a replay that does not loop
 * (SOURCE_END).  Only a failure the source cannot recover from (bad spec,
 * unreadable folder, a camera that refuses a required setting) is an error
 * return.  The frame is an RGB image owned by the source and valid until
 * the next call or source_free; a caller that keeps it copies it.  A source
 * serves one thread at a time. */
#ifndef ST_SOURCE_H
#define ST_SOURCE_H

#include <stdint.h>

#include "core/image.h"
#include "core/recipe.h"

/* SOURCE_BAD: a frame that could not be read (a replay file, a corrupt
 * buffer): f->name names it, e says why, and the next call goes on. */
enum source_status { SOURCE_FRAME = 0, SOURCE_WAIT, SOURCE_LOST, SOURCE_END, SOURCE_BAD };

struct source_options {
    double fps;            /* replay and bench pacing, frames per second; 0: as fast as asked */
    int loop;              /* replay: start again after the last file */
    int width, height;     /* bench size, camera request; 0: the recipe's [camera] or default */
    uint64_t seed;         /* bench series */
    const struct recipe *r;/* the recipe whose [camera] settings a camera locks; may be NULL */
};
void source_options_init(struct source_options *o);

struct source_frame {
    const struct image *img;  /* RGB, owned by the source */
    uint64_t index;           /* counts delivered frames from 0 */
    double t_ms;              /* CLOCK_MONOTONIC milliseconds when it was captured */
    char name[256];           /* replay: the file's path; bench: "bench:SEED:N"; camera: "" */
};

struct source_ops {
    int (*next)(void *impl, int timeout_ms, struct source_frame *f, int *status, struct err *e);
    /* One line for the screen and the log: "camera /dev/video0 640x480 YUYV 30 fps". */
    const char *(*describe)(void *impl);
    /* The camera settings as applied and read back, a JSON object text; NULL when none. */
    const char *(*settings_json)(void *impl);
    void (*free)(void *impl);
};

struct source {
    const struct source_ops *ops;
    void *impl;
};

int source_open(const char *spec, const struct source_options *o, struct source **out,
                struct err *e);
int source_next(struct source *s, int timeout_ms, struct source_frame *f, int *status,
                struct err *e);
const char *source_describe(const struct source *s);
const char *source_settings_json(const struct source *s);
void source_free(struct source *s);

/* For implementations: wraps impl in a new source (ops->free(impl) on
 * failure); pacing at fps frames per second:
 * source_pace sleeps until the next frame is due and returns 1, or returns
 * 0 after timeout_ms when it is not due yet (fps <= 0: always due).  A
 * caller late by more than a frame period drops frames rather than
 * catching up, as a camera does.  Times are cli_now_ms (station/cli.h). */
int source_wrap(const struct source_ops *ops, void *impl, struct source **out, struct err *e);
struct source_pace {
    double due_ms;
};
int source_pace(struct source_pace *p, double fps, int timeout_ms);

#endif
