/* emucam: the emulated camera's file, shared by the libv4l2 plugin
 * (tests/emucam/emucam.c) and the tests that drive it.
 *
 * A regular file that starts with struct emucam_state is a camera to the
 * plugin: the header says which native formats, sizes and controls the
 * camera has and what it does next (deliver frames, stall, give a buffer
 * index it never handed out, or be unplugged); the plugin keeps the
 * current format, control values and counters there too, so a test reads
 * what the camera was told.  Frame buffers follow the header, page-aligned:
 * libv4l2 mmaps the file at each buffer's m.offset, and the plugin writes
 * every frame into the file at that offset when it is dequeued.  The test
 * pattern (emucam_render) carries the frame number in its first row. */
#ifndef ST_EMUCAM_H
#define ST_EMUCAM_H

#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <linux/videodev2.h>

#define EMUCAM_MAGIC "EMUCAM01"
#define EMUCAM_PAGE 4096u        /* buffers start past the header's page */
#define EMUCAM_NCTRL 9
#define EMUCAM_MAXBUF 8
#define EMUCAM_NUMBER_BITS 16     /* frame number bits in the first row */

enum emucam_formats { EMUCAM_YUYV = 1u << 0, EMUCAM_RGB24 = 1u << 1 };

struct emucam_ctrl {
    uint32_t id;                  /* V4L2_CID_* */
    uint32_t type;                /* V4L2_CTRL_TYPE_INTEGER, _BOOLEAN or _MENU */
    int32_t min, max, step, def, value;
    uint32_t present;             /* 0: this camera lacks the control */
    uint32_t auto_id;             /* the control that makes this one inactive while on, or 0 */
    int32_t manual_value;         /* ... the value of auto_id at which this one is active */
};

struct emucam_state {
    char magic[8];
    uint32_t formats;             /* enum emucam_formats offered */
    uint32_t width, height, pixfmt; /* current format */
    uint32_t fps;                 /* current rate: 30 or 15 */
    /* scripted by the test */
    uint32_t unplugged;           /* every call fails with ENODEV */
    uint32_t stall;               /* DQBUF gives EAGAIN, no frame */
    uint32_t bad_index;           /* DQBUF gives an index past those REQBUFS made */
    uint32_t open_delay_ms;       /* opening takes this long, as a real camera's can */
    uint32_t short_frames;        /* DQBUF reports half a frame in bytesused */
    uint32_t garbage;             /* DQBUF fills the frame with pseudo-random bytes */
    /* counted by the plugin */
    uint32_t streamons;
    uint32_t frames;
    uint32_t refused_sets;        /* S_CTRL refused because the control was inactive */
    struct emucam_ctrl ctrl[EMUCAM_NCTRL];
};

/* The camera a test starts from: YUYV and/or RGB24, 640x480, 30 fps, every
 * control present with the automatic ones on, as a typical USB camera
 * comes up (ranges modelled on one, from memory). */
static inline void emucam_default(struct emucam_state *s, uint32_t formats)
{
    static const struct emucam_ctrl c[EMUCAM_NCTRL] = {
        {V4L2_CID_EXPOSURE_AUTO, V4L2_CTRL_TYPE_MENU, 0, 3, 1, 3, 3, 1, 0, 0},
        {V4L2_CID_EXPOSURE_ABSOLUTE, V4L2_CTRL_TYPE_INTEGER, 3, 2047, 1, 156, 156, 1,
         V4L2_CID_EXPOSURE_AUTO, V4L2_EXPOSURE_MANUAL},
        {V4L2_CID_AUTOGAIN, V4L2_CTRL_TYPE_BOOLEAN, 0, 1, 1, 1, 1, 1, 0, 0},
        {V4L2_CID_GAIN, V4L2_CTRL_TYPE_INTEGER, 0, 100, 1, 32, 32, 1, V4L2_CID_AUTOGAIN, 0},
        {V4L2_CID_AUTO_WHITE_BALANCE, V4L2_CTRL_TYPE_BOOLEAN, 0, 1, 1, 1, 1, 1, 0, 0},
        {V4L2_CID_WHITE_BALANCE_TEMPERATURE, V4L2_CTRL_TYPE_INTEGER, 2800, 6500, 10, 4600, 4600,
         1, V4L2_CID_AUTO_WHITE_BALANCE, 0},
        {V4L2_CID_FOCUS_AUTO, V4L2_CTRL_TYPE_BOOLEAN, 0, 1, 1, 1, 1, 1, 0, 0},
        {V4L2_CID_FOCUS_ABSOLUTE, V4L2_CTRL_TYPE_INTEGER, 0, 250, 5, 0, 0, 1, V4L2_CID_FOCUS_AUTO,
         0},
        {V4L2_CID_POWER_LINE_FREQUENCY, V4L2_CTRL_TYPE_MENU, 0, 2, 1, 1, 1, 1, 0, 0},
    };
    memset(s, 0, sizeof *s);
    memcpy(s->magic, EMUCAM_MAGIC, sizeof s->magic);
    s->formats = formats;
    s->width = 640;
    s->height = 480;
    s->pixfmt = (formats & EMUCAM_YUYV) ? V4L2_PIX_FMT_YUYV : V4L2_PIX_FMT_RGB24;
    s->fps = 30;
    memcpy(s->ctrl, c, sizeof c);
}

static inline struct emucam_ctrl *emucam_find(struct emucam_state *s, uint32_t id)
{
    for (int i = 0; i < EMUCAM_NCTRL; i++)
        if (s->ctrl[i].id == id)
            return &s->ctrl[i];
    return NULL;
}

static inline size_t emucam_frame_bytes(uint32_t pixfmt, uint32_t w, uint32_t h)
{
    return (size_t)w * h * (pixfmt == V4L2_PIX_FMT_YUYV ? 2 : 3);
}

/* Frame n in the native format: a pattern that moves with n, its first
 * row opening with n's low EMUCAM_NUMBER_BITS bits, each two pixels wide,
 * white for 1 and black for 0 (in YUYV with neutral chroma, so the bits
 * read the same after conversion to RGB).  YUYV keeps Y in 16..235 and the
 * chroma within 20 of 128, the studio range of ITU-R BT.601. */
static inline void emucam_render(uint8_t *dst, uint32_t pixfmt, uint32_t w, uint32_t h,
                                 uint32_t n)
{
    for (uint32_t y = 0; y < h; y++)
        for (uint32_t x = 0; x < w; x += 2) {
            int bit = y == 0 && x / 2 < EMUCAM_NUMBER_BITS;
            int one = bit && ((n >> (x / 2)) & 1);
            if (pixfmt == V4L2_PIX_FMT_YUYV) {
                uint8_t *p = dst + ((size_t)y * w + x) * 2;
                p[0] = (uint8_t)(bit ? (one ? 235 : 16) : 16 + (x * 3 + y + n * 5) % 220);
                p[1] = (uint8_t)(bit ? 128 : 108 + (y * 2 + n) % 41);
                p[2] = (uint8_t)(bit ? (one ? 235 : 16) : 16 + ((x + 1) * 3 + y + n * 5) % 220);
                p[3] = (uint8_t)(bit ? 128 : 108 + (x / 2 + n * 3) % 41);
            } else {
                for (uint32_t k = 0; k < 2 && x + k < w; k++) {
                    uint8_t *p = dst + ((size_t)y * w + x + k) * 3;
                    uint32_t xx = x + k;
                    p[0] = (uint8_t)(bit ? (one ? 255 : 0) : (xx + n) & 255);
                    p[1] = (uint8_t)(bit ? (one ? 255 : 0) : (y * 2 + n) & 255);
                    p[2] = (uint8_t)(bit ? (one ? 255 : 0) : (xx ^ y) & 255);
                }
            }
        }
}

/* The frame number a delivered RGB frame carries (see emucam_render). */
static inline uint32_t emucam_number(const uint8_t *rgb)
{
    uint32_t n = 0;
    for (int b = 0; b < EMUCAM_NUMBER_BITS; b++)
        n |= (uint32_t)(rgb[(size_t)b * 2 * 3] > 128) << b;
    return n;
}

#endif
