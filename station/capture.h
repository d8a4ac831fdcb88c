/* capture: saves frames into a dataset folder (core/dataset.h layout) for
 * `station capture`, the live loop's capture mode (station/live.h).
 *
 * Frames go to DIR/images/cap_YYYYmmdd-HHMMSS_NNNN.png (UTC time of the
 * save, then a sequence number that starts after the images already in the
 * folder), so names sort in capture order across sessions.  Each file is
 * written durably and atomically through core/evidence.h (NAME.tmp, fsync,
 * rename, folder fsync); a name that exists already is never overwritten:
 * the sequence number moves on.  Owns nothing but its folder path and
 * counters. */
#ifndef ST_CAPTURE_H
#define ST_CAPTURE_H

#include <limits.h>
#include <stddef.h>

#include "core/image.h"

struct capture {
    char images[PATH_MAX];   /* DIR/images */
    long next;               /* sequence number of the next save */
    long saved;              /* saved by this session */
};

/* Creates DIR and DIR/images when missing. */
int capture_open(struct capture *c, const char *dir, struct err *e);
/* Saves an RGB frame; path (len bytes) receives the file written. */
int capture_save(struct capture *c, const struct image *img, char *path, size_t len,
                 struct err *e);

#endif
