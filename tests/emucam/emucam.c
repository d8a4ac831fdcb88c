/* emucam plugin: a libv4l2 plugin (libv4l-plugin.h) that serves a regular
 * file starting with struct emucam_state (tests/emucam/emucam.h) as a V4L2
 * capture device, so the camera source is tested without hardware.
 *
 * init() takes only regular files with the magic header, so installed
 * next to real plugins it never grabs a real device.  Every call re-reads
 * the header (the test may have changed the script) and writes back what
 * changed.  What it answers follows the V4L2 specification (the kernel's
 * Documentation/userspace-api/media/v4l/): QUERYCAP with device_caps,
 * ENUM_FMT/FRAMESIZES/FRAMEINTERVALS, G/S/TRY_FMT to the nearest offered
 * size, G/S_PARM, QUERYCTRL (NEXT_CTRL too), G/S_CTRL clamping integer
 * values to the range and step as the control framework does, EACCES for
 * setting a control made inactive by its automatic partner (the text
 * vidioc-g-ctrl.rst gives for drivers that cannot keep an inactive
 * value, as uvcvideo), REQBUFS/QUERYBUF/QBUF/DQBUF/STREAMON/STREAMOFF with
 * EAGAIN on a non-blocking handle when no frame is due, ENODEV once
 * unplugged.  Frames are paced at the current rate. */
#define _GNU_SOURCE
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include <libv4l-plugin.h>

#include "emucam.h"

struct emucam {
    int fd;
    struct emucam_state st;
    uint32_t nbufs;
    int queued[EMUCAM_MAXBUF];
    uint32_t queue_order[EMUCAM_MAXBUF]; /* FIFO of queued indices */
    uint32_t nqueued;
    int streaming;
    double next_frame_ms;
    uint8_t *frame;
    size_t frame_cap;
};

static const uint32_t sizes[][2] = {{640, 480}, {320, 240}, {160, 120}};
#define NSIZES 3

static double now_ms(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec * 1e3 + (double)t.tv_nsec / 1e6;
}

static int load(struct emucam *c)
{
    return pread(c->fd, &c->st, sizeof c->st, 0) == (ssize_t)sizeof c->st &&
                   !memcmp(c->st.magic, EMUCAM_MAGIC, sizeof c->st.magic)
               ? 0
               : -1;
}

static void store(struct emucam *c)
{
    if (pwrite(c->fd, &c->st, sizeof c->st, 0) != (ssize_t)sizeof c->st)
        abort(); /* a test fixture that cannot write its own file */
}

static void *emucam_init(int fd)
{
    struct stat sb;
    struct emucam probe = {.fd = fd};
    if (fstat(fd, &sb) || !S_ISREG(sb.st_mode) || load(&probe))
        return NULL;
    struct timespec d = {(time_t)(probe.st.open_delay_ms / 1000),
                         (long)(probe.st.open_delay_ms % 1000) * 1000000L};
    nanosleep(&d, NULL);
    struct emucam *c = calloc(1, sizeof *c);
    if (c)
        *c = probe;
    return c;
}

static void emucam_close(void *priv)
{
    struct emucam *c = priv;
    if (c)
        free(c->frame);
    free(c);
}

static int fail(int code)
{
    errno = code;
    return -1;
}

static int offered(const struct emucam *c, uint32_t pixfmt)
{
    return (pixfmt == V4L2_PIX_FMT_YUYV && (c->st.formats & EMUCAM_YUYV)) ||
           (pixfmt == V4L2_PIX_FMT_RGB24 && (c->st.formats & EMUCAM_RGB24));
}

static uint32_t nth_format(const struct emucam *c, uint32_t n)
{
    static const uint32_t all[] = {V4L2_PIX_FMT_YUYV, V4L2_PIX_FMT_RGB24};
    for (uint32_t i = 0; i < 2; i++)
        if (offered(c, all[i]) && n-- == 0)
            return all[i];
    return 0;
}

static void fill_pix(struct v4l2_pix_format *p, uint32_t pixfmt, uint32_t w, uint32_t h)
{
    memset(p, 0, sizeof *p);
    p->pixelformat = pixfmt;
    p->width = w;
    p->height = h;
    p->field = V4L2_FIELD_NONE;
    p->bytesperline = w * (pixfmt == V4L2_PIX_FMT_YUYV ? 2 : 3);
    p->sizeimage = (uint32_t)emucam_frame_bytes(pixfmt, w, h);
    p->colorspace = V4L2_COLORSPACE_SRGB;
}

/* TRY_FMT's rule: an offered format (else the first), the offered size
 * nearest in area. */
static void try_fmt(const struct emucam *c, struct v4l2_pix_format *p)
{
    uint32_t pf = offered(c, p->pixelformat) ? p->pixelformat : nth_format(c, 0);
    long want = (long)p->width * p->height, best = -1;
    int pick = 0;
    for (int i = 0; i < NSIZES; i++) {
        long d = labs((long)sizes[i][0] * sizes[i][1] - want);
        if (best < 0 || d < best) {
            best = d;
            pick = i;
        }
    }
    fill_pix(p, pf, sizes[pick][0], sizes[pick][1]);
}

static struct emucam_ctrl *ctrl_of(struct emucam *c, uint32_t id)
{
    struct emucam_ctrl *k = emucam_find(&c->st, id);
    return k && k->present ? k : NULL;
}

static int inactive(struct emucam *c, const struct emucam_ctrl *k)
{
    const struct emucam_ctrl *a = k->auto_id ? ctrl_of(c, k->auto_id) : NULL;
    return a && a->value != k->manual_value;
}

static int queryctrl(struct emucam *c, struct v4l2_queryctrl *q)
{
    struct emucam_ctrl *k = NULL;
    if (q->id & V4L2_CTRL_FLAG_NEXT_CTRL) {
        uint32_t after = q->id & ~(V4L2_CTRL_FLAG_NEXT_CTRL | V4L2_CTRL_FLAG_NEXT_COMPOUND);
        for (int i = 0; i < EMUCAM_NCTRL; i++) {
            struct emucam_ctrl *x = &c->st.ctrl[i];
            if (x->present && x->id > after && (!k || x->id < k->id))
                k = x;
        }
    } else {
        k = ctrl_of(c, q->id);
    }
    if (!k)
        return fail(EINVAL);
    memset(q, 0, sizeof *q);
    q->id = k->id;
    q->type = k->type;
    snprintf((char *)q->name, sizeof q->name, "emulated 0x%08x", k->id);
    q->minimum = k->min;
    q->maximum = k->max;
    q->step = k->step;
    q->default_value = k->def;
    q->flags = inactive(c, k) ? V4L2_CTRL_FLAG_INACTIVE : 0;
    return 0;
}

static int s_ctrl(struct emucam *c, struct v4l2_control *v)
{
    struct emucam_ctrl *k = ctrl_of(c, v->id);
    if (!k)
        return fail(EINVAL);
    if (inactive(c, k)) {
        c->st.refused_sets++;
        store(c);
        return fail(EACCES);
    }
    int32_t val = v->value;
    if (k->type == V4L2_CTRL_TYPE_MENU && (val < k->min || val > k->max))
        return fail(EINVAL);
    if (val < k->min)
        val = k->min;
    if (val > k->max)
        val = k->max;
    val = k->min + (val - k->min + k->step / 2) / k->step * k->step;
    k->value = val;
    v->value = val;
    store(c);
    return 0;
}

static size_t buf_stride(const struct emucam *c)
{
    size_t n = emucam_frame_bytes(c->st.pixfmt, c->st.width, c->st.height);
    return (n + EMUCAM_PAGE - 1) / EMUCAM_PAGE * EMUCAM_PAGE;
}

static int reqbufs(struct emucam *c, struct v4l2_requestbuffers *r)
{
    if (r->type != V4L2_BUF_TYPE_VIDEO_CAPTURE || r->memory != V4L2_MEMORY_MMAP)
        return fail(EINVAL);
    if (c->streaming)
        return fail(EBUSY);
    if (r->count > EMUCAM_MAXBUF)
        r->count = EMUCAM_MAXBUF;
    c->nbufs = r->count;
    c->nqueued = 0;
    memset(c->queued, 0, sizeof c->queued);
    /* the buffers must exist in the file before anyone maps them */
    if (c->nbufs && ftruncate(c->fd, (off_t)(EMUCAM_PAGE + c->nbufs * buf_stride(c))))
        return -1;
    return 0;
}

static void describe_buf(const struct emucam *c, struct v4l2_buffer *b, uint32_t i)
{
    b->index = i;
    b->type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
    b->memory = V4L2_MEMORY_MMAP;
    b->length = (uint32_t)emucam_frame_bytes(c->st.pixfmt, c->st.width, c->st.height);
    b->m.offset = (uint32_t)(EMUCAM_PAGE + i * buf_stride(c));
    b->field = V4L2_FIELD_NONE;
    b->flags = c->queued[i] ? V4L2_BUF_FLAG_QUEUED : 0;
}

static int dqbuf(struct emucam *c, struct v4l2_buffer *b, int nonblock)
{
    if (!c->streaming || !c->nqueued)
        return fail(EINVAL);
    double t = now_ms();
    if (c->st.stall || t < c->next_frame_ms) {
        if (nonblock || c->st.stall)
            return fail(EAGAIN);
        struct timespec d = {0, (long)((c->next_frame_ms - t) * 1e6)};
        nanosleep(&d, NULL);
    }
    c->next_frame_ms = (t > c->next_frame_ms + 1000.0 / c->st.fps ? t : c->next_frame_ms) +
                       1000.0 / c->st.fps;
    uint32_t i = c->queue_order[0];
    memmove(c->queue_order, c->queue_order + 1, (c->nqueued - 1) * sizeof c->queue_order[0]);
    c->nqueued--;
    c->queued[i] = 0;
    size_t n = emucam_frame_bytes(c->st.pixfmt, c->st.width, c->st.height);
    if (c->frame_cap < n) {
        free(c->frame);
        c->frame = malloc(n);
        c->frame_cap = c->frame ? n : 0;
        if (!c->frame)
            return fail(ENOMEM);
    }
    emucam_render(c->frame, c->st.pixfmt, c->st.width, c->st.height, c->st.frames);
    if (c->st.garbage) {
        uint32_t x = c->st.frames * 2654435761u + 1u;   /* xorshift32, Marsaglia 2003 */
        for (size_t k = 0; k < n; k++) {
            x ^= x << 13;
            x ^= x >> 17;
            x ^= x << 5;
            c->frame[k] = (uint8_t)x;
        }
    }
    describe_buf(c, b, i);
    if (pwrite(c->fd, c->frame, n, (off_t)b->m.offset) != (ssize_t)n)
        return fail(EIO);
    b->bytesused = (uint32_t)(c->st.short_frames ? n / 2 : n);
    b->sequence = c->st.frames++;
    b->flags = V4L2_BUF_FLAG_DONE | V4L2_BUF_FLAG_TIMESTAMP_MONOTONIC;
    b->timestamp.tv_sec = (time_t)(t / 1e3);
    b->timestamp.tv_usec = (long)((t - (double)b->timestamp.tv_sec * 1e3) * 1e3);
    if (c->st.bad_index)
        b->index = c->nbufs + 40;
    store(c);
    return 0;
}

static int emucam_ioctl(void *priv, int fd, unsigned long request, void *arg)
{
    struct emucam *c = priv;
    (void)fd;
    if (load(c))
        return fail(EIO);
    if (c->st.unplugged)
        return fail(ENODEV);
    switch (request) {
    case VIDIOC_QUERYCAP: {
        struct v4l2_capability *cap = arg;
        struct stat sb;
        memset(cap, 0, sizeof *cap);
        fstat(c->fd, &sb);
        snprintf((char *)cap->driver, sizeof cap->driver, "emucam");
        snprintf((char *)cap->card, sizeof cap->card, "emulated camera");
        /* unique per file: libv4l keeps software control state per bus_info */
        snprintf((char *)cap->bus_info, sizeof cap->bus_info, "emucam:%lu",
                 (unsigned long)sb.st_ino);
        cap->version = 0x060100;
        cap->device_caps = V4L2_CAP_VIDEO_CAPTURE | V4L2_CAP_STREAMING;
        cap->capabilities = cap->device_caps | V4L2_CAP_DEVICE_CAPS;
        return 0;
    }
    case VIDIOC_ENUM_FMT: {
        struct v4l2_fmtdesc *f = arg;
        uint32_t pf = f->type == V4L2_BUF_TYPE_VIDEO_CAPTURE ? nth_format(c, f->index) : 0;
        if (!pf)
            return fail(EINVAL);
        uint32_t index = f->index;
        memset(f, 0, sizeof *f);
        f->index = index;
        f->type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
        f->pixelformat = pf;
        snprintf((char *)f->description, sizeof f->description, "%s",
                 pf == V4L2_PIX_FMT_YUYV ? "YUYV 4:2:2" : "RGB24");
        return 0;
    }
    case VIDIOC_ENUM_FRAMESIZES: {
        struct v4l2_frmsizeenum *s = arg;
        if (!offered(c, s->pixel_format) || s->index >= NSIZES)
            return fail(EINVAL);
        s->type = V4L2_FRMSIZE_TYPE_DISCRETE;
        s->discrete.width = sizes[s->index][0];
        s->discrete.height = sizes[s->index][1];
        return 0;
    }
    case VIDIOC_ENUM_FRAMEINTERVALS: {
        struct v4l2_frmivalenum *v = arg;
        if (!offered(c, v->pixel_format) || v->index >= 2)
            return fail(EINVAL);
        v->type = V4L2_FRMIVAL_TYPE_DISCRETE;
        v->discrete.numerator = 1;
        v->discrete.denominator = v->index ? 15 : 30;
        return 0;
    }
    case VIDIOC_G_FMT:
    case VIDIOC_TRY_FMT:
    case VIDIOC_S_FMT: {
        struct v4l2_format *f = arg;
        if (f->type != V4L2_BUF_TYPE_VIDEO_CAPTURE)
            return fail(EINVAL);
        if (request == VIDIOC_G_FMT) {
            fill_pix(&f->fmt.pix, c->st.pixfmt, c->st.width, c->st.height);
            return 0;
        }
        try_fmt(c, &f->fmt.pix);
        if (request == VIDIOC_S_FMT) {
            if (c->nbufs)
                return fail(EBUSY);
            c->st.pixfmt = f->fmt.pix.pixelformat;
            c->st.width = f->fmt.pix.width;
            c->st.height = f->fmt.pix.height;
            store(c);
        }
        return 0;
    }
    case VIDIOC_G_PARM:
    case VIDIOC_S_PARM: {
        struct v4l2_streamparm *p = arg;
        if (p->type != V4L2_BUF_TYPE_VIDEO_CAPTURE)
            return fail(EINVAL);
        struct v4l2_fract *tpf = &p->parm.capture.timeperframe;
        if (request == VIDIOC_S_PARM && tpf->numerator && tpf->denominator) {
            c->st.fps = (double)tpf->denominator / tpf->numerator > 22.5 ? 30 : 15;
            store(c);
        }
        memset(&p->parm, 0, sizeof p->parm);
        p->parm.capture.capability = V4L2_CAP_TIMEPERFRAME;
        tpf->numerator = 1;
        tpf->denominator = c->st.fps;
        return 0;
    }
    case VIDIOC_QUERYCTRL:
        return queryctrl(c, arg);
    case VIDIOC_G_CTRL: {
        struct v4l2_control *v = arg;
        const struct emucam_ctrl *k = ctrl_of(c, v->id);
        if (!k)
            return fail(EINVAL);
        v->value = k->value;
        return 0;
    }
    case VIDIOC_S_CTRL:
        return s_ctrl(c, arg);
    case VIDIOC_REQBUFS:
        return reqbufs(c, arg);
    case VIDIOC_QUERYBUF: {
        struct v4l2_buffer *b = arg;
        if (b->type != V4L2_BUF_TYPE_VIDEO_CAPTURE || b->index >= c->nbufs)
            return fail(EINVAL);
        describe_buf(c, b, b->index);
        return 0;
    }
    case VIDIOC_QBUF: {
        struct v4l2_buffer *b = arg;
        if (b->type != V4L2_BUF_TYPE_VIDEO_CAPTURE || b->index >= c->nbufs ||
            c->queued[b->index])
            return fail(EINVAL);
        c->queued[b->index] = 1;
        c->queue_order[c->nqueued++] = b->index;
        describe_buf(c, b, b->index);
        return 0;
    }
    case VIDIOC_DQBUF:
        return dqbuf(c, arg, (fcntl(c->fd, F_GETFL) & O_NONBLOCK) != 0);
    case VIDIOC_STREAMON:
    case VIDIOC_STREAMOFF:
        if (*(int *)arg != V4L2_BUF_TYPE_VIDEO_CAPTURE)
            return fail(EINVAL);
        if (request == VIDIOC_STREAMOFF) {
            /* the specification: STREAMOFF removes every buffer from both queues */
            c->streaming = 0;
            c->nqueued = 0;
            memset(c->queued, 0, sizeof c->queued);
            return 0;
        }
        if (!c->streaming) {
            c->streaming = 1;
            c->next_frame_ms = now_ms() + 1000.0 / c->st.fps;
            c->st.streamons++;
            store(c);
        }
        return 0;
    default:
        return fail(ENOTTY);
    }
}

static ssize_t emucam_read(void *priv, int fd, void *buf, size_t n)
{
    (void)priv;
    (void)fd;
    (void)buf;
    (void)n;
    errno = EINVAL; /* streaming only, as the capabilities say */
    return -1;
}

static ssize_t emucam_write(void *priv, int fd, const void *buf, size_t n)
{
    (void)priv;
    (void)fd;
    (void)buf;
    (void)n;
    errno = EINVAL;
    return -1;
}

__attribute__((visibility("default"))) const struct libv4l_dev_ops libv4l2_plugin = {
    .init = emucam_init,
    .close = emucam_close,
    .ioctl = emucam_ioctl,
    .read = emucam_read,
    .write = emucam_write,
};
