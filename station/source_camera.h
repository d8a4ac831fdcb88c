/* source_camera: the V4L2 camera source through libv4l2 (station/source.h).
 *
 * Opens the device non-blocking, checks it can capture and stream
 * (VIDIOC_QUERYCAP, device_caps where the driver has them), asks for
 * RGB24 at the requested size (libv4l2 converts with libv4lconvert from the
 * camera's own format where needed), sets the recipe's frame rate where
 * the driver takes one, re-reads what the driver chose, locks the recipe's
 * [camera] settings (station/camctl.h), and streams with 4 mmap buffers.
 * describe() says what was negotiated: "camera /dev/video0 640x480 RGB3
 * (from YUYV) 30.0 fps", plus stream restarts and setting warnings; while
 * lost, "camera /dev/video0 lost (REASON), retrying in 2 s".
 * settings_json() is camctl's report of the values read back.
 *
 * next() waits at most timeout_ms: poll, EINTR retried, EAGAIN waited out,
 * each dequeued buffer's index and bytesused checked, the frame copied
 * into an image the source owns.  No frame for [camera] stall_ms restarts
 * the stream (SOURCE_WAIT meanwhile).  ENODEV, EIO, POLLERR and any other
 * streaming failure close the device and give SOURCE_LOST; later calls
 * retry with back-off (0.25 s doubling to 4 s) on a thread of their own,
 * so no call waits past its timeout even for a slow camera, and give
 * SOURCE_LOST until the reopened camera is locked and streaming again.
 *
 * Errors: opening fails when the device cannot be opened or used, or lacks
 * or refuses a setting the recipe requires (the message names the device
 * and the control); next() fails only when a camera that came back lacks
 * such a setting.  *out is heap-allocated; source_free releases it. */
#ifndef ST_SOURCE_CAMERA_H
#define ST_SOURCE_CAMERA_H

#include "source.h"

/* device: "/dev/videoN" (the part of the spec after "camera:").  The size
 * asked is o->width x o->height when both are set, else the recipe's
 * [camera] width and height, else the camera's current one. */
int source_camera_open(const char *device, const struct source_options *o, struct source **out,
                       struct err *e);

#endif
