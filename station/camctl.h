/* camctl: locks a V4L2 camera's settings to a recipe's [camera] values
 * through libv4l2, and reports what the camera actually holds.
 *
 * Order, from the V4L2 control reference (Documentation/userspace-api/
 * media/v4l/ext-ctrls-camera.rst, control.rst): an automatic control is
 * turned off before its manual partner is set, because the manual one is
 * inactive while the automatic one runs (uvcvideo refuses it with EACCES):
 * V4L2_CID_EXPOSURE_AUTO to V4L2_EXPOSURE_MANUAL then
 * V4L2_CID_EXPOSURE_ABSOLUTE, V4L2_CID_AUTOGAIN off then V4L2_CID_GAIN,
 * V4L2_CID_AUTO_WHITE_BALANCE off then V4L2_CID_WHITE_BALANCE_TEMPERATURE,
 * V4L2_CID_FOCUS_AUTO off then V4L2_CID_FOCUS_ABSOLUTE, then
 * V4L2_CID_POWER_LINE_FREQUENCY.  Every value is read back with
 * VIDIOC_G_CTRL: drivers clamp to range and step, and the read-back value
 * is what is reported.  A setting the recipe leaves out is not touched.
 *
 * libv4l2 may add software controls of its own (white balance, auto gain,
 * gamma, flips: libv4lcontrol) that change frames after the camera, and
 * keeps their state in shared memory across programs.  They are told
 * apart from the camera's by asking a second handle opened without
 * conversion (raw_fd), and the white balance and auto gain ones are set
 * off and gamma to its default (no correction) whatever the recipe says.
 *
 * A setting the recipe lists as required that the camera lacks or refuses
 * is ST_EINVAL naming the device and the control; any other is a warning
 * and appears in the report as "absent" or "refused".  A camera that goes
 * away meanwhile (ENODEV, EIO) is ST_EIO: not a refusal. */
#ifndef ST_CAMCTL_H
#define ST_CAMCTL_H

#include <stddef.h>

#include "core/err.h"
#include "core/recipe.h"

struct camctl_report {
    char json[1536];   /* {"exposure_auto":1,"exposure":156,...}: read-back values */
    char warn[256];    /* "" or "focus absent; exposure 5000 clamped to 2047" */
};

/* fd: the libv4l2 handle; raw_fd: one with V4L2_DISABLE_CONVERSION, or -1
 * when none could be had (libv4l's own controls then cannot be told apart
 * and are left alone). */
int camctl_lock(int fd, int raw_fd, const char *device, const struct recipe_camera *rc,
                struct camctl_report *out, struct err *e);

#endif
