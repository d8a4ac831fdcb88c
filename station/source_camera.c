#include "source_camera.h"

#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <time.h>
#include <unistd.h>

#include <libv4l2.h>
#include <linux/videodev2.h>

#include "camctl.h"
#include "cli.h"

#define CAM_NBUF 4               /* asked of REQBUFS: one being copied, the rest filling */
#define BACKOFF_FIRST_MS 250.0
#define BACKOFF_MAX_MS 4000.0
#define EAGAIN_NAP_MS 2.0        /* a driver that says "ready" then EAGAIN is not spun on */

struct cam_buf {
    void *start;
    size_t len;
};

/* Reconnecting runs the whole open sequence, which a real camera can take
 * half a second over, on a thread of its own, so next() keeps to its
 * timeout; while it runs only that thread touches the device fields (fd
 * to img), and the caller's thread reads them only once it has joined. */
struct cam {
    char device[240];
    struct recipe_camera rc;
    int want_w, want_h;          /* 0: keep the camera's */
    int live;                    /* streaming; 0 while lost (the caller's thread only) */
    int attempting;              /* a reconnect thread runs */
    pthread_t attempt;
    atomic_int attempt_done;
    int attempt_rc;
    struct err attempt_err;
    char settings[sizeof((struct camctl_report *)0)->json]; /* what settings_json shows */
    int fd;                      /* -1 when closed */
    struct cam_buf buf[CAM_NBUF];
    unsigned nbuf;
    int streaming;
    uint32_t w, h, bytesperline, native;
    int asked_other_size;
    double fps;                  /* read back; 0: the driver does not say */
    struct camctl_report ctl;
    struct image *img;
    uint64_t delivered;
    double last_frame_ms;
    unsigned restarts, short_frames;
    double backoff_ms, retry_at_ms;
    char lost[160];              /* why, while lost */
    char desc[512];
};

static int xioctl(int fd, unsigned long req, void *arg)
{
    int r;
    do
        r = v4l2_ioctl(fd, req, arg);
    while (r < 0 && errno == EINTR);
    return r;
}

static void fourcc_text(uint32_t f, char out[5])
{
    for (int i = 0; i < 4; i++) {
        char c = (char)((f >> (8 * i)) & 0xff);
        out[i] = c >= 32 && c < 127 ? c : '?';
    }
    out[4] = '\0';
}

static void stream_off(struct cam *c)
{
    enum v4l2_buf_type t = V4L2_BUF_TYPE_VIDEO_CAPTURE;
    if (c->streaming)
        xioctl(c->fd, VIDIOC_STREAMOFF, &t);
    c->streaming = 0;
}

/* Queues every buffer and starts the stream. */
static int stream_on(struct cam *c)
{
    for (unsigned i = 0; i < c->nbuf; i++) {
        struct v4l2_buffer b = {.type = V4L2_BUF_TYPE_VIDEO_CAPTURE,
                                .memory = V4L2_MEMORY_MMAP, .index = i};
        if (xioctl(c->fd, VIDIOC_QBUF, &b))
            return -1;
    }
    enum v4l2_buf_type t = V4L2_BUF_TYPE_VIDEO_CAPTURE;
    if (xioctl(c->fd, VIDIOC_STREAMON, &t))
        return -1;
    c->streaming = 1;
    return 0;
}

static void disconnect(struct cam *c)
{
    if (c->fd < 0)
        return;
    stream_off(c);
    for (unsigned i = 0; i < c->nbuf; i++)
        if (c->buf[i].start != MAP_FAILED)
            v4l2_munmap(c->buf[i].start, c->buf[i].len);
    struct v4l2_requestbuffers rb = {.count = 0, .type = V4L2_BUF_TYPE_VIDEO_CAPTURE,
                                     .memory = V4L2_MEMORY_MMAP};
    if (c->nbuf)
        xioctl(c->fd, VIDIOC_REQBUFS, &rb);
    c->nbuf = 0;
    v4l2_close(c->fd);
    c->fd = -1;
}

static int sys_fail(struct cam *c, struct err *e, const char *what)
{
    return err_set(e, ST_EIO, "camera %s: %s: %s", c->device, what, strerror(errno));
}

/* Size and format: RGB24 asked of libv4l2, which converts from the
 * camera's own format with libv4lconvert where the camera has no RGB24;
 * what was chosen is read back, the camera's own format from raw_fd. */
static int negotiate(struct cam *c, int raw_fd, struct err *e)
{
    struct v4l2_format f = {.type = V4L2_BUF_TYPE_VIDEO_CAPTURE};
    if (xioctl(c->fd, VIDIOC_G_FMT, &f))
        return sys_fail(c, e, "VIDIOC_G_FMT");
    if (c->want_w > 0) {
        f.fmt.pix.width = (uint32_t)c->want_w;
        f.fmt.pix.height = (uint32_t)c->want_h;
    }
    uint32_t asked_w = f.fmt.pix.width, asked_h = f.fmt.pix.height;
    f.fmt.pix.pixelformat = V4L2_PIX_FMT_RGB24;
    f.fmt.pix.field = V4L2_FIELD_ANY;
    if (xioctl(c->fd, VIDIOC_S_FMT, &f))
        return sys_fail(c, e, "VIDIOC_S_FMT RGB24");
    memset(&f, 0, sizeof f);
    f.type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
    if (xioctl(c->fd, VIDIOC_G_FMT, &f))
        return sys_fail(c, e, "VIDIOC_G_FMT");
    if (f.fmt.pix.pixelformat != V4L2_PIX_FMT_RGB24) {
        char fc[5];
        fourcc_text(f.fmt.pix.pixelformat, fc);
        return err_set(e, ST_EINVAL, "camera %s: libv4l2 gives %s, not RGB24", c->device, fc);
    }
    if (f.fmt.pix.width == 0 || f.fmt.pix.height == 0 ||
        f.fmt.pix.bytesperline < f.fmt.pix.width * 3 ||
        f.fmt.pix.width > IMAGE_MAX_SIDE || f.fmt.pix.height > IMAGE_MAX_SIDE)
        return err_set(e, ST_EINVAL, "camera %s: unusable format %ux%u, %u bytes a line",
                       c->device, f.fmt.pix.width, f.fmt.pix.height, f.fmt.pix.bytesperline);
    c->w = f.fmt.pix.width;
    c->h = f.fmt.pix.height;
    c->bytesperline = f.fmt.pix.bytesperline;
    c->asked_other_size = c->want_w > 0 && (c->w != asked_w || c->h != asked_h);
    c->native = 0;
    struct v4l2_format raw = {.type = V4L2_BUF_TYPE_VIDEO_CAPTURE};
    if (raw_fd >= 0 && xioctl(raw_fd, VIDIOC_G_FMT, &raw) == 0)
        c->native = raw.fmt.pix.pixelformat;

    struct v4l2_streamparm p = {.type = V4L2_BUF_TYPE_VIDEO_CAPTURE};
    c->fps = 0;
    if (xioctl(c->fd, VIDIOC_G_PARM, &p))
        return ST_OK; /* the driver does not say its rate */
    if (c->rc.fps > 0 && (p.parm.capture.capability & V4L2_CAP_TIMEPERFRAME)) {
        p.parm.capture.timeperframe.numerator = 1000;
        p.parm.capture.timeperframe.denominator = (uint32_t)(c->rc.fps * 1000 + 0.5);
        if (xioctl(c->fd, VIDIOC_S_PARM, &p))
            return sys_fail(c, e, "VIDIOC_S_PARM");
    }
    const struct v4l2_fract *t = &p.parm.capture.timeperframe;
    if (t->numerator && t->denominator)
        c->fps = (double)t->denominator / t->numerator;
    return ST_OK;
}

static int map_buffers(struct cam *c, struct err *e)
{
    struct v4l2_requestbuffers rb = {.count = CAM_NBUF, .type = V4L2_BUF_TYPE_VIDEO_CAPTURE,
                                     .memory = V4L2_MEMORY_MMAP};
    if (xioctl(c->fd, VIDIOC_REQBUFS, &rb))
        return sys_fail(c, e, "VIDIOC_REQBUFS (mmap streaming)");
    if (rb.count < 2 || rb.count > CAM_NBUF)
        return err_set(e, ST_EIO, "camera %s: driver gave %u buffers (asked %d)", c->device,
                       rb.count, CAM_NBUF);
    for (unsigned i = 0; i < rb.count; i++)
        c->buf[i].start = MAP_FAILED;
    c->nbuf = rb.count;
    for (unsigned i = 0; i < c->nbuf; i++) {
        struct v4l2_buffer b = {.type = V4L2_BUF_TYPE_VIDEO_CAPTURE,
                                .memory = V4L2_MEMORY_MMAP, .index = i};
        if (xioctl(c->fd, VIDIOC_QUERYBUF, &b))
            return sys_fail(c, e, "VIDIOC_QUERYBUF");
        if ((size_t)b.length < (size_t)c->bytesperline * (c->h - 1) + (size_t)c->w * 3)
            return err_set(e, ST_EIO, "camera %s: buffer %u holds %u bytes, a frame needs more",
                           c->device, i, b.length);
        c->buf[i].len = b.length;
        c->buf[i].start = v4l2_mmap(NULL, b.length, PROT_READ, MAP_SHARED, c->fd, b.m.offset);
        if (c->buf[i].start == MAP_FAILED)
            return sys_fail(c, e, "mmap of a buffer");
    }
    return ST_OK;
}

/* Opens, checks, negotiates, locks and starts streaming; on failure the
 * device is closed again.  ST_EINVAL: the camera can never do (a required
 * setting, no capture); anything else may pass once it is back. */
static int connect_cam(struct cam *c, struct err *e)
{
    c->fd = v4l2_open(c->device, O_RDWR | O_NONBLOCK);
    if (c->fd < 0)
        return sys_fail(c, e, "cannot open");
    struct v4l2_capability cap;
    memset(&cap, 0, sizeof cap);
    int rc = ST_OK, raw_fd = -1;
    if (xioctl(c->fd, VIDIOC_QUERYCAP, &cap)) {
        rc = sys_fail(c, e, "VIDIOC_QUERYCAP");
        goto out;
    }
    uint32_t caps = (cap.capabilities & V4L2_CAP_DEVICE_CAPS) ? cap.device_caps : cap.capabilities;
    if (!(caps & V4L2_CAP_VIDEO_CAPTURE) || !(caps & V4L2_CAP_STREAMING)) {
        rc = err_set(e, ST_EINVAL, "camera %s (%.32s): not a video capture device with "
                     "streaming I/O", c->device, (const char *)cap.card);
        goto out;
    }
    /* a second handle on the same open file, without conversion: the
     * camera's own format and controls, not libv4l2's */
    raw_fd = dup(c->fd);
    if (raw_fd >= 0 && v4l2_fd_open(raw_fd, V4L2_DISABLE_CONVERSION) < 0) {
        close(raw_fd);
        raw_fd = -1;
    }
    if ((rc = negotiate(c, raw_fd, e)) || (rc = camctl_lock(c->fd, raw_fd, c->device, &c->rc,
                                                            &c->ctl, e)))
        goto out;
    if (raw_fd >= 0) {
        v4l2_close(raw_fd);
        raw_fd = -1;
    }
    if ((rc = map_buffers(c, e)))
        goto out;
    if (stream_on(c))
        rc = sys_fail(c, e, "VIDIOC_STREAMON");
    if (!rc && (!c->img || c->img->w != (int)c->w || c->img->h != (int)c->h)) {
        image_free(c->img);
        c->img = image_new((int)c->w, (int)c->h, 3, e);
        if (!c->img)
            rc = e ? e->code : ST_ENOMEM;
    }
out:
    if (raw_fd >= 0)
        v4l2_close(raw_fd);
    if (rc)
        disconnect(c);
    c->last_frame_ms = cli_now_ms();
    return rc;
}

static void lose(struct cam *c, const char *why)
{
    snprintf(c->lost, sizeof c->lost, "%s", why);
    c->live = 0;
    disconnect(c);
    c->retry_at_ms = cli_now_ms() + c->backoff_ms;
}

static void lose_errno(struct cam *c, const char *what)
{
    char why[160];
    snprintf(why, sizeof why, "%s: %s", what, strerror(errno));
    lose(c, why);
}

static void *attempt_main(void *arg)
{
    struct cam *c = arg;
    c->attempt_rc = connect_cam(c, &c->attempt_err);
    atomic_store(&c->attempt_done, 1);
    return NULL;
}

static void went_live(struct cam *c)
{
    c->live = 1;
    memcpy(c->settings, c->ctl.json, sizeof c->settings);
}

/* Starts a reconnect attempt when one is due and waits for it until the
 * deadline; ST_OK with c->live set when the camera is back. */
static int reconnect(struct cam *c, double deadline, struct err *e)
{
    if (!c->attempting) {
        double t = cli_now_ms();
        if (t < c->retry_at_ms)
            cli_sleep_ms((c->retry_at_ms < deadline ? c->retry_at_ms : deadline) - t);
        if (cli_now_ms() < c->retry_at_ms)
            return ST_OK;
        atomic_store(&c->attempt_done, 0);
        err_clear(&c->attempt_err);
        if (pthread_create(&c->attempt, NULL, attempt_main, c)) {
            snprintf(c->lost, sizeof c->lost, "cannot start a thread to reconnect");
            c->retry_at_ms = cli_now_ms() + c->backoff_ms;
            return ST_OK;
        }
        c->attempting = 1;
    }
    while (!atomic_load(&c->attempt_done) && cli_now_ms() < deadline)
        cli_sleep_ms(EAGAIN_NAP_MS);
    if (!atomic_load(&c->attempt_done))
        return ST_OK;
    pthread_join(c->attempt, NULL);
    c->attempting = 0;
    struct err ce = c->attempt_err;
    int rc = c->attempt_rc;
    if (rc == ST_EINVAL)
        return err_set(e, rc, "%s", ce.msg);
    if (!rc)
        went_live(c);
    else {
        /* the message opens "camera DEVICE: ", which describe() says already */
        const char *why = strstr(ce.msg, ": ");
        snprintf(c->lost, sizeof c->lost, "%.150s", why ? why + 2 : ce.msg);
        c->backoff_ms = c->backoff_ms * 2 > BACKOFF_MAX_MS ? BACKOFF_MAX_MS : c->backoff_ms * 2;
        c->retry_at_ms = cli_now_ms() + c->backoff_ms;
    }
    return ST_OK;
}

/* No frame for the stall time: the stream is restarted. */
static void check_stall(struct cam *c)
{
    double t = cli_now_ms();
    if (t - c->last_frame_ms < c->rc.stall_ms)
        return;
    stream_off(c);
    c->restarts++;
    c->last_frame_ms = t;
    if (stream_on(c))
        lose_errno(c, "restarting a stalled stream");
}

/* Takes one filled buffer: 1 a frame, 0 none yet, -1 lost. */
static int take_frame(struct cam *c, struct source_frame *f)
{
    struct v4l2_buffer b = {.type = V4L2_BUF_TYPE_VIDEO_CAPTURE, .memory = V4L2_MEMORY_MMAP};
    if (xioctl(c->fd, VIDIOC_DQBUF, &b)) {
        if (errno == EAGAIN)
            return 0;
        lose_errno(c, "VIDIOC_DQBUF");
        return -1;
    }
    if (b.index >= c->nbuf) {
        char why[96];
        snprintf(why, sizeof why, "driver gave buffer index %u of %u", b.index, c->nbuf);
        lose(c, why);
        return -1;
    }
    size_t need = (size_t)c->bytesperline * (c->h - 1) + (size_t)c->w * 3;
    int ok = !(b.flags & V4L2_BUF_FLAG_ERROR) && b.bytesused >= need && b.bytesused <= c->buf[b.index].len;
    if (ok) {
        const uint8_t *src = c->buf[b.index].start;
        for (uint32_t y = 0; y < c->h; y++)
            memcpy(c->img->px + (size_t)y * c->w * 3, src + (size_t)y * c->bytesperline,
                   (size_t)c->w * 3);
    } else {
        c->short_frames++;
    }
    if (xioctl(c->fd, VIDIOC_QBUF, &b)) {
        lose_errno(c, "VIDIOC_QBUF");
        return -1;
    }
    if (!ok)
        return 0;
    double t = cli_now_ms();
    c->last_frame_ms = t;
    c->backoff_ms = BACKOFF_FIRST_MS;
    f->img = c->img;
    f->index = c->delivered++;
    f->t_ms = t;
    if ((b.flags & V4L2_BUF_FLAG_TIMESTAMP_MASK) == V4L2_BUF_FLAG_TIMESTAMP_MONOTONIC)
        f->t_ms = (double)b.timestamp.tv_sec * 1e3 + (double)b.timestamp.tv_usec / 1e3;
    f->name[0] = '\0';
    return 1;
}

static int cam_next(void *impl, int timeout_ms, struct source_frame *f, int *status, struct err *e)
{
    struct cam *c = impl;
    double deadline = cli_now_ms() + (timeout_ms > 0 ? timeout_ms : 0);
    *status = SOURCE_LOST;
    if (!c->live) {
        int rc = reconnect(c, deadline, e);
        if (rc || !c->live)
            return rc;
    }
    for (;;) {
        double left = deadline - cli_now_ms();
        struct pollfd p = {.fd = c->fd, .events = POLLIN};
        int r = poll(&p, 1, left > 0 ? (int)(left + 0.999) : 0);
        if (r < 0 && errno == EINTR)
            continue;
        if (r < 0) {
            lose_errno(c, "poll");
            return ST_OK;
        }
        if (p.revents & (POLLERR | POLLHUP | POLLNVAL)) {
            lose(c, p.revents & POLLNVAL ? "poll: handle not open" : "poll: device error");
            return ST_OK;
        }
        int got = r > 0 ? take_frame(c, f) : 0;
        if (got < 0)
            return ST_OK;
        if (got > 0) {
            *status = SOURCE_FRAME;
            return ST_OK;
        }
        check_stall(c);
        if (!c->live)
            return ST_OK;
        left = deadline - cli_now_ms();
        if (left <= 0) {
            *status = SOURCE_WAIT;
            return ST_OK;
        }
        if (r > 0)
            cli_sleep_ms(left < EAGAIN_NAP_MS ? left : EAGAIN_NAP_MS);
    }
}

static const char *cam_describe(void *impl)
{
    struct cam *c = impl;
    if (!c->live) {
        if (c->attempting) {
            snprintf(c->desc, sizeof c->desc, "camera %s lost (%s), reconnecting", c->device,
                     c->lost);
            return c->desc;
        }
        double wait = (c->retry_at_ms - cli_now_ms()) / 1e3;
        snprintf(c->desc, sizeof c->desc, "camera %s lost (%s), retrying in %.2g s", c->device,
                 c->lost, wait > 0 ? wait : 0);
        return c->desc;
    }
    char fc[5], nat[24] = "";
    fourcc_text(V4L2_PIX_FMT_RGB24, fc);
    if (c->native == V4L2_PIX_FMT_RGB24)
        snprintf(nat, sizeof nat, " (native)");
    else if (c->native) {
        char n[5];
        fourcc_text(c->native, n);
        snprintf(nat, sizeof nat, " (from %s)", n);
    }
    int n = snprintf(c->desc, sizeof c->desc, "camera %s %ux%u%s %s%s", c->device, c->w, c->h,
                     c->asked_other_size ? " (not the size asked)" : "", fc, nat);
    if (c->fps > 0)
        n += snprintf(c->desc + n, sizeof c->desc - (size_t)n, " %.1f fps", c->fps);
    if (c->restarts)
        n += snprintf(c->desc + n, sizeof c->desc - (size_t)n, "; stream restarted %u times",
                      c->restarts);
    if (c->short_frames)
        n += snprintf(c->desc + n, sizeof c->desc - (size_t)n, "; %u short frames skipped",
                      c->short_frames);
    if (c->ctl.warn[0])
        snprintf(c->desc + n, sizeof c->desc - (size_t)n, "; %s", c->ctl.warn);
    return c->desc;
}

static const char *cam_settings_json(void *impl)
{
    struct cam *c = impl;
    return c->settings[0] ? c->settings : NULL;
}

static void cam_free(void *impl)
{
    struct cam *c = impl;
    if (!c)
        return;
    if (c->attempting)
        pthread_join(c->attempt, NULL);
    disconnect(c);
    image_free(c->img);
    free(c);
}

static const struct source_ops cam_ops = {cam_next, cam_describe, cam_settings_json, cam_free};

int source_camera_open(const char *device, const struct source_options *o, struct source **out,
                       struct err *e)
{
    *out = NULL;
    if (!device || !*device || strlen(device) >= sizeof((struct cam *)0)->device)
        return err_set(e, ST_EINVAL, "camera: device path empty or too long");
    struct cam *c = calloc(1, sizeof *c);
    struct source *s = calloc(1, sizeof *s);
    if (!c || !s) {
        free(c);
        free(s);
        return err_set(e, ST_ENOMEM, "camera %s: out of memory", device);
    }
    snprintf(c->device, sizeof c->device, "%s", device);
    c->fd = -1;
    c->backoff_ms = BACKOFF_FIRST_MS;
    c->rc.stall_ms = RECIPE_CAM_STALL_MS;
    if (o && o->r)
        c->rc = o->r->camera;
    int own = o && o->width > 0 && o->height > 0;
    c->want_w = own ? o->width : c->rc.width;
    c->want_h = own ? o->height : c->rc.height;
    int rc = connect_cam(c, e);
    if (rc) {
        cam_free(c);
        free(s);
        return rc;
    }
    went_live(c);
    s->ops = &cam_ops;
    s->impl = c;
    *out = s;
    return ST_OK;
}
