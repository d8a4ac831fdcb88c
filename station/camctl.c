#include "camctl.h"

#include <errno.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>
#include <libv4l2.h>
#include <linux/videodev2.h>

/* One recipe setting: the automatic control turned off first (0: none),
 * then the value control. */
static const struct lock_step {
    unsigned bit;
    const char *key;       /* recipe key and report name */
    uint32_t auto_id;
    int32_t auto_off;
    const char *auto_key;
    uint32_t id;
    const char *cid;       /* for messages */
    size_t off;            /* the value in struct recipe_camera */
} steps[] = {
    {RCAM_EXPOSURE, "exposure", V4L2_CID_EXPOSURE_AUTO, V4L2_EXPOSURE_MANUAL, "exposure_auto",
     V4L2_CID_EXPOSURE_ABSOLUTE, "V4L2_CID_EXPOSURE_ABSOLUTE",
     offsetof(struct recipe_camera, exposure)},
    {RCAM_GAIN, "gain", V4L2_CID_AUTOGAIN, 0, "autogain", V4L2_CID_GAIN, "V4L2_CID_GAIN",
     offsetof(struct recipe_camera, gain)},
    {RCAM_WHITE_BALANCE, "white_balance_k", V4L2_CID_AUTO_WHITE_BALANCE, 0,
     "auto_white_balance", V4L2_CID_WHITE_BALANCE_TEMPERATURE,
     "V4L2_CID_WHITE_BALANCE_TEMPERATURE", offsetof(struct recipe_camera, white_balance_k)},
    {RCAM_FOCUS, "focus", V4L2_CID_FOCUS_AUTO, 0, "focus_auto", V4L2_CID_FOCUS_ABSOLUTE,
     "V4L2_CID_FOCUS_ABSOLUTE", offsetof(struct recipe_camera, focus)},
    {RCAM_POWER_LINE, "power_line", 0, 0, NULL, V4L2_CID_POWER_LINE_FREQUENCY,
     "V4L2_CID_POWER_LINE_FREQUENCY", offsetof(struct recipe_camera, power_line)},
};
#define NSTEPS ((int)(sizeof steps / sizeof steps[0]))

/* libv4l's software controls (libv4lcontrol's fake controls) and what
 * "leave the frames alone" means for each; -1: its default value. */
static const struct soft_ctrl {
    uint32_t id;
    const char *key;
    int32_t off;
} soft[] = {
    {V4L2_CID_AUTO_WHITE_BALANCE, "libv4l_white_balance", 0},
    {V4L2_CID_AUTOGAIN, "libv4l_autogain", 0},
    {V4L2_CID_GAMMA, "libv4l_gamma", -1},
};
#define NSOFT ((int)(sizeof soft / sizeof soft[0]))

struct lock {
    int fd, raw_fd;
    const char *device;
    json_t *o;
    struct camctl_report *out;
    struct err *e;
};

static int xioctl(int fd, unsigned long req, void *arg)
{
    int r;
    do
        r = v4l2_ioctl(fd, req, arg);
    while (r < 0 && errno == EINTR);
    return r;
}

/* A camera unplugged halfway through is gone, not refusing. */
static int gone(int err)
{
    return err == ENODEV || err == EIO;
}

/* 1 when fd has the control (and it is not permanently disabled), 0 when
 * not, -1 with errno when the device is gone. */
static int has_ctrl(int fd, uint32_t id, struct v4l2_queryctrl *q)
{
    memset(q, 0, sizeof *q);
    q->id = id;
    if (fd < 0)
        return 0;
    if (xioctl(fd, VIDIOC_QUERYCTRL, q))
        return gone(errno) ? -1 : 0;
    return q->id == id && !(q->flags & V4L2_CTRL_FLAG_DISABLED);
}

static void warn(struct lock *l, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void warn(struct lock *l, const char *fmt, ...)
{
    char *w = l->out->warn;
    size_t n = strlen(w);
    if (n && n + 2 < sizeof l->out->warn) {
        memcpy(w + n, "; ", 3);
        n += 2;
    }
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(w + n, sizeof l->out->warn - n, fmt, ap);
    va_end(ap);
}

/* Sets id to want and reads it back into *got; the errno of a refusal. */
static int set_read(struct lock *l, uint32_t id, int32_t want, int32_t *got)
{
    struct v4l2_control c = {.id = id, .value = want};
    if (xioctl(l->fd, VIDIOC_S_CTRL, &c))
        return errno;
    c.value = 0;
    if (xioctl(l->fd, VIDIOC_G_CTRL, &c))
        return errno;
    *got = c.value;
    return 0;
}

static int lost(struct lock *l, int err)
{
    return err_set(l->e, ST_EIO, "camera %s: setting controls: %s", l->device, strerror(err));
}

static int refuse(struct lock *l, const struct lock_step *s, const char *what)
{
    return err_set(l->e, ST_EINVAL, "camera %s: %s control '%s' (%s) the recipe requires",
                   l->device, what, s->key, s->cid);
}

static int lock_step(struct lock *l, const struct lock_step *s, const struct recipe_camera *rc)
{
    int required = (rc->required & s->bit) != 0;
    int32_t want = *(const int *)((const char *)rc + s->off), got;
    struct v4l2_queryctrl q;
    int has = has_ctrl(l->fd, s->id, &q), has_auto = 0;
    if (s->auto_id && has > 0)
        has_auto = has_ctrl(l->fd, s->auto_id, &q);
    if (has < 0 || has_auto < 0)
        return lost(l, errno);
    if (!has) {
        if (required)
            return refuse(l, s, "lacks");
        warn(l, "%s absent", s->key);
        json_object_set_new(l->o, s->key, json_string("absent"));
        return ST_OK;
    }
    if (has_auto) {
        int rc_auto = set_read(l, s->auto_id, s->auto_off, &got);
        if (gone(rc_auto))
            return lost(l, rc_auto);
        if (rc_auto || got != s->auto_off) {
            if (required)
                return err_set(l->e, ST_EINVAL,
                               "camera %s: cannot turn off '%s' before '%s' the recipe "
                               "requires: %s",
                               l->device, s->auto_key, s->key,
                               rc_auto ? strerror(rc_auto) : "it reads back on");
            warn(l, "%s not turned off", s->auto_key);
        }
        json_object_set_new(l->o, s->auto_key, rc_auto ? json_string("refused") : json_integer(got));
    }
    int r = set_read(l, s->id, want, &got);
    if (gone(r))
        return lost(l, r);
    if (r) {
        if (required)
            return err_set(l->e, ST_EINVAL, "camera %s: refuses control '%s' (%s) = %d the "
                           "recipe requires: %s",
                           l->device, s->key, s->cid, want, strerror(r));
        warn(l, "%s refused (%s)", s->key, strerror(r));
        json_object_set_new(l->o, s->key, json_string("refused"));
        return ST_OK;
    }
    json_object_set_new(l->o, s->key, json_integer(got));
    if (got != want) {
        char asked[48];
        snprintf(asked, sizeof asked, "%s_asked", s->key);
        json_object_set_new(l->o, asked, json_integer(want));
        warn(l, "%s %d clamped to %d", s->key, want, got);
    }
    return ST_OK;
}

/* A control libv4l2 answers for but the camera itself lacks is libv4l's. */
static void lock_soft(struct lock *l)
{
    struct v4l2_queryctrl q, raw;
    for (int i = 0; i < NSOFT; i++) {
        if (l->raw_fd < 0 || has_ctrl(l->fd, soft[i].id, &q) <= 0 ||
            has_ctrl(l->raw_fd, soft[i].id, &raw) != 0)
            continue;
        int32_t got, want = soft[i].off < 0 ? q.default_value : soft[i].off;
        if (set_read(l, soft[i].id, want, &got) || got != want)
            warn(l, "%s could not be set to %d", soft[i].key, want);
        else
            json_object_set_new(l->o, soft[i].key, json_integer(got));
    }
}

int camctl_lock(int fd, int raw_fd, const char *device, const struct recipe_camera *rc,
                struct camctl_report *out, struct err *e)
{
    struct lock l = {fd, raw_fd, device, json_object(), out, e};
    int status = ST_OK;
    memset(out, 0, sizeof *out);
    if (!l.o)
        return err_set(e, ST_ENOMEM, "camera %s: out of memory", device);
    lock_soft(&l);
    for (int i = 0; i < NSTEPS && status == ST_OK; i++)
        if (rc->set & steps[i].bit)
            status = lock_step(&l, &steps[i], rc);
    char *text = status ? NULL : json_dumps(l.o, JSON_COMPACT | JSON_PRESERVE_ORDER);
    if (!status && (!text || strlen(text) >= sizeof out->json))
        status = err_set(e, ST_ENOMEM, "camera %s: settings report does not fit", device);
    if (!status)
        memcpy(out->json, text, strlen(text) + 1);
    free(text);
    json_decref(l.o);
    return status;
}
