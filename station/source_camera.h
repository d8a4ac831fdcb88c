/* source_camera: the V4L2 camera source through libv4l2 (station/source.h).
 *
 * Opens the device, checks it can capture and stream, negotiates the size
 * and pixel format (re-reading what the driver chose), locks the recipe's
 * [camera] settings (each read back), streams with mmap buffers, and turns
 * an unplugged or stalled camera into SOURCE_LOST with reconnection. */
#ifndef ST_SOURCE_CAMERA_H
#define ST_SOURCE_CAMERA_H

#include "source.h"

/* device: "/dev/videoN" (the part of the spec after "camera:"). */
int source_camera_open(const char *device, const struct source_options *o, struct source **out,
                       struct err *e);

#endif
