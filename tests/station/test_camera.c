/* station/source_camera through libv4l2 against the emulated camera
 * (tests/emucam/emucam.h), a libv4l2 plugin serving a regular file as a
 * V4L2 device.  The program re-runs itself in a private mount namespace
 * (unshare -m) with the plugin folder bind-mounted over libv4l2's plugin
 * folder and a private /dev/shm (libv4l keeps software control state
 * there); it needs root for that, and otherwise prints SKIP and exits 77.
 *
 * Outside references: the YUYV layout (Y0 U Y1 V) and the capture
 * ioctls' behaviour are the V4L2 specification's; the expected RGB of a
 * YUYV frame is ITU-R BT.601's YCbCr to RGB (the full-range form JPEG/JFIF
 * uses, which libv4lconvert approximates with shifts); the control order
 * is the one ext-ctrls-camera.rst implies (manual controls are inactive
 * while their automatic partner is on, and the plugin refuses them then
 * with EACCES as vidioc-g-ctrl.rst allows, so a wrong order fails here). */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include <libv4l2.h>

#include "station/source_camera.h"
#include "tests/emucam/emucam.h"
#include "tests/testkit.h"

static char cam_path[128];

static double now_ms(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec * 1e3 + (double)t.tv_nsec / 1e6;
}

static void cam_write(const struct emucam_state *s)
{
    int fd = open(cam_path, O_RDWR | O_CREAT, 0600);
    assert_true(fd >= 0);
    assert_int_equal(pwrite(fd, s, sizeof *s, 0), (ssize_t)sizeof *s);
    assert_int_equal(close(fd), 0);
}

static void cam_read(struct emucam_state *s)
{
    int fd = open(cam_path, O_RDONLY);
    assert_true(fd >= 0);
    assert_int_equal(pread(fd, s, sizeof *s, 0), (ssize_t)sizeof *s);
    assert_int_equal(close(fd), 0);
}

static int setup(void **state)
{
    (void)state;
    snprintf(cam_path, sizeof cam_path, "%s", testkit_path("video0"));
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    return 0;
}

/* Opens the camera with the recipe's [camera] settings rc. */
static int open_cam(const struct recipe_camera *rc, int w, int h, struct source **s, struct err *e)
{
    static struct recipe r;
    memset(&r, 0, sizeof r);
    r.camera.stall_ms = RECIPE_CAM_STALL_MS;
    if (rc)
        r.camera = *rc;
    struct source_options o;
    memset(&o, 0, sizeof o);
    o.width = w;
    o.height = h;
    o.r = &r;
    err_clear(e);
    return source_camera_open(cam_path, &o, s, e);
}

static void close_cam(struct source *s)
{
    s->ops->free(s->impl);
    free(s);
}

/* Calls next (100 ms a call) until status want or limit_ms passes. */
static int wait_for(struct source *s, int want, double limit_ms, struct source_frame *f)
{
    double end = now_ms() + limit_ms;
    struct err e = {0};
    int st = -1;
    while (now_ms() < end) {
        double t0 = now_ms();
        assert_int_equal(s->ops->next(s->impl, 100, f, &st, &e), ST_OK);
        /* next never waits for a reconnect: the emulated camera takes
         * 400 ms to open, so a next() that blocked on it would take longer
         * than this bound, which leaves a loaded machine 250 ms of slack */
        assert_true(now_ms() - t0 < 100 + 250);
        if (st == want)
            return 1;
    }
    return 0;
}

static int clamp255(double v)
{
    return v < 0 ? 0 : v > 255 ? 255 : (int)lround(v);
}

/* A YUYV camera: libv4l2 converts to RGB24; every pixel matches BT.601
 * applied to the frame the plugin rendered, within what libv4lconvert's
 * shift approximations of the coefficients (1.5, 0.375, 0.75, 2.016 for
 * 1.402, 0.344, 0.714, 1.772) can give for chroma within 20 of 128:
 * at most 0.244 * 20 = 4.9, plus one for rounding. */
static void test_yuyv_through_libv4lconvert(void **state)
{
    (void)state;
    struct emucam_state st;
    emucam_default(&st, EMUCAM_YUYV);
    cam_write(&st);
    struct source *s;
    struct err e;
    assert_int_equal(open_cam(NULL, 320, 240, &s, &e), ST_OK);
    const char *d = s->ops->describe(s->impl);
    print_message("describe: %s\n", d);
    assert_non_null(strstr(d, "camera "));
    assert_non_null(strstr(d, " 320x240 RGB3 (from YUYV) 30.0 fps"));
    struct source_frame f;
    uint8_t *yuyv = malloc(320 * 240 * 2);
    assert_non_null(yuyv);
    for (int k = 0; k < 3; k++) {
        assert_true(wait_for(s, SOURCE_FRAME, 2000, &f));
        assert_int_equal(f.index, (uint64_t)k);
        assert_int_equal(f.img->w, 320);
        assert_int_equal(f.img->h, 240);
        uint32_t n = emucam_number(f.img->px);
        emucam_render(yuyv, V4L2_PIX_FMT_YUYV, 320, 240, n);
        int worst = 0;
        for (int i = 0; i < 320 * 240; i++) {
            const uint8_t *q = yuyv + (i / 2) * 4;
            double y = q[(i % 2) * 2], u = q[1] - 128.0, v = q[3] - 128.0;
            int want[3] = {clamp255(y + 1.402 * v), clamp255(y - 0.344136 * u - 0.714136 * v),
                           clamp255(y + 1.772 * u)};
            for (int ch = 0; ch < 3; ch++) {
                int dlt = abs(f.img->px[i * 3 + ch] - want[ch]);
                worst = dlt > worst ? dlt : worst;
            }
        }
        if (worst > 6)
            fail_msg("frame %u: a pixel is %d off BT.601", n, worst);
    }
    free(yuyv);
    close_cam(s);
    cam_read(&st);
    assert_int_equal(st.pixfmt, V4L2_PIX_FMT_YUYV);
    assert_int_equal(st.width, 320);
}

/* A camera with RGB24 of its own: frames arrive byte for byte. */
static void test_native_rgb(void **state)
{
    (void)state;
    struct emucam_state st;
    emucam_default(&st, EMUCAM_RGB24);
    cam_write(&st);
    struct source *s;
    struct err e;
    assert_int_equal(open_cam(NULL, 160, 120, &s, &e), ST_OK);
    assert_non_null(strstr(s->ops->describe(s->impl), " 160x120 RGB3 (native) 30.0 fps"));
    struct source_frame f;
    assert_true(wait_for(s, SOURCE_FRAME, 2000, &f));
    uint8_t want[160 * 120 * 3];
    emucam_render(want, V4L2_PIX_FMT_RGB24, 160, 120, emucam_number(f.img->px));
    assert_memory_equal(f.img->px, want, sizeof want);
    close_cam(s);
}

/* The recipe's settings: automatic controls off before their manual
 * partners (the plugin refuses the reverse and counts it), every value
 * read back, a clamped value reported as clamped, the rate set. */
static void test_lock_order_and_clamp(void **state)
{
    (void)state;
    struct emucam_state st;
    emucam_default(&st, EMUCAM_YUYV);
    st.fps = 15;
    cam_write(&st);
    struct recipe_camera rc = {0};
    rc.stall_ms = RECIPE_CAM_STALL_MS;
    rc.fps = 30;
    rc.exposure = 5000; /* the camera's range ends at 2047 */
    rc.gain = 40;
    rc.white_balance_k = 5003; /* step 10 */
    rc.focus = 120;
    rc.power_line = RCAM_PL_50HZ;
    rc.set = RCAM_EXPOSURE | RCAM_GAIN | RCAM_WHITE_BALANCE | RCAM_FOCUS | RCAM_POWER_LINE;
    rc.required = RCAM_EXPOSURE | RCAM_GAIN;
    struct source *s;
    struct err e;
    if (open_cam(&rc, 0, 0, &s, &e))
        fail_msg("%s", e.msg);
    const char *j = s->ops->settings_json(s->impl);
    print_message("settings: %s\ndescribe: %s\n", j, s->ops->describe(s->impl));
    assert_non_null(strstr(j, "\"exposure_auto\":1,\"exposure\":2047,\"exposure_asked\":5000"));
    assert_non_null(strstr(j, "\"autogain\":0,\"gain\":40"));
    assert_non_null(strstr(j, "\"auto_white_balance\":0,\"white_balance_k\":5000,"
                              "\"white_balance_k_asked\":5003"));
    assert_non_null(strstr(j, "\"focus_auto\":0,\"focus\":120"));
    assert_non_null(strstr(j, "\"power_line\":1"));
    const char *d = s->ops->describe(s->impl);
    assert_non_null(strstr(d, "exposure 5000 clamped to 2047"));
    assert_non_null(strstr(d, "30.0 fps"));
    close_cam(s);
    cam_read(&st);
    assert_int_equal(st.refused_sets, 0);
    assert_int_equal(emucam_find(&st, V4L2_CID_EXPOSURE_AUTO)->value, V4L2_EXPOSURE_MANUAL);
    assert_int_equal(emucam_find(&st, V4L2_CID_EXPOSURE_ABSOLUTE)->value, 2047);
    assert_int_equal(emucam_find(&st, V4L2_CID_FOCUS_ABSOLUTE)->value, 120);
    assert_int_equal(st.fps, 30);
    /* the plugin does refuse the wrong order: the check above can fail */
    emucam_default(&st, EMUCAM_YUYV);
    cam_write(&st);
    int fd = v4l2_open(cam_path, O_RDWR);
    assert_true(fd >= 0);
    struct v4l2_control c = {.id = V4L2_CID_EXPOSURE_ABSOLUTE, .value = 100};
    assert_int_equal(v4l2_ioctl(fd, VIDIOC_S_CTRL, &c), -1);
    assert_int_equal(errno, EACCES);
    v4l2_close(fd);
}

/* A required setting the camera lacks: refused, naming device and control;
 * one not required: reported absent. */
static void test_lacking_control(void **state)
{
    (void)state;
    struct emucam_state st;
    emucam_default(&st, EMUCAM_YUYV);
    emucam_find(&st, V4L2_CID_FOCUS_ABSOLUTE)->present = 0;
    emucam_find(&st, V4L2_CID_FOCUS_AUTO)->present = 0;
    cam_write(&st);
    struct recipe_camera rc = {0};
    rc.stall_ms = RECIPE_CAM_STALL_MS;
    rc.focus = 40;
    rc.gain = 10;
    rc.set = RCAM_FOCUS | RCAM_GAIN;
    rc.required = RCAM_FOCUS;
    struct source *s = NULL;
    struct err e;
    assert_int_equal(open_cam(&rc, 0, 0, &s, &e), ST_EINVAL);
    assert_null(s);
    print_message("refused: %s\n", e.msg);
    char want[256];
    snprintf(want, sizeof want, "camera %s: lacks control 'focus' (V4L2_CID_FOCUS_ABSOLUTE) the "
             "recipe requires", cam_path);
    assert_string_equal(e.msg, want);
    rc.required = 0;
    assert_int_equal(open_cam(&rc, 0, 0, &s, &e), ST_OK);
    assert_non_null(strstr(s->ops->settings_json(s->impl), "\"focus\":\"absent\""));
    assert_non_null(strstr(s->ops->describe(s->impl), "focus absent"));
    close_cam(s);
}

/* No frame for stall_ms: SOURCE_WAIT meanwhile, then a STREAMOFF/ON
 * restart; frames again when the camera delivers. */
static void test_stall_restart(void **state)
{
    (void)state;
    struct emucam_state st;
    emucam_default(&st, EMUCAM_YUYV);
    cam_write(&st);
    struct recipe_camera rc = {0};
    rc.stall_ms = 300;
    struct source *s;
    struct err e;
    assert_int_equal(open_cam(&rc, 160, 120, &s, &e), ST_OK);
    struct source_frame f;
    assert_true(wait_for(s, SOURCE_FRAME, 2000, &f));
    cam_read(&st);
    uint32_t ons = st.streamons;
    st.stall = 1;
    cam_write(&st);
    int st_code;
    double end = now_ms() + 1000;
    while (now_ms() < end) {
        assert_int_equal(s->ops->next(s->impl, 100, &f, &st_code, &e), ST_OK);
        assert_int_equal(st_code, SOURCE_WAIT);
    }
    cam_read(&st);
    assert_true(st.streamons >= ons + 2); /* restarted after 300 ms and again after 600 */
    assert_non_null(strstr(s->ops->describe(s->impl), "stream restarted"));
    st.stall = 0;
    cam_write(&st);
    assert_true(wait_for(s, SOURCE_FRAME, 2000, &f));
    close_cam(s);
}

/* Unplugged: SOURCE_LOST, describe says so, next keeps to its timeout
 * while retrying; plugged back (controls at their power-on values): the
 * source reopens, re-locks and delivers again. */
static void test_unplug_replug(void **state)
{
    (void)state;
    struct emucam_state st;
    emucam_default(&st, EMUCAM_YUYV);
    cam_write(&st);
    struct recipe_camera rc = {0};
    rc.stall_ms = RECIPE_CAM_STALL_MS;
    rc.exposure = 300;
    rc.set = RCAM_EXPOSURE;
    rc.required = RCAM_EXPOSURE;
    struct source *s;
    struct err e;
    assert_int_equal(open_cam(&rc, 160, 120, &s, &e), ST_OK);
    struct source_frame f;
    assert_true(wait_for(s, SOURCE_FRAME, 2000, &f));
    cam_read(&st);
    st.unplugged = 1;
    cam_write(&st);
    assert_true(wait_for(s, SOURCE_LOST, 1000, &f));
    const char *d = s->ops->describe(s->impl);
    print_message("lost: %s\n", d);
    assert_non_null(strstr(d, " lost ("));
    assert_non_null(strstr(d, "retrying in"));
    /* still lost a second later, through several back-off retries */
    double end = now_ms() + 1000;
    int st_code;
    while (now_ms() < end) {
        assert_int_equal(s->ops->next(s->impl, 100, &f, &st_code, &e), ST_OK);
        assert_int_equal(st_code, SOURCE_LOST);
    }
    /* plugged back, slow to open: next still keeps to its timeout
     * (wait_for checks every call) while a thread reopens */
    emucam_default(&st, EMUCAM_YUYV);
    st.open_delay_ms = 400;
    cam_write(&st);
    assert_true(wait_for(s, SOURCE_FRAME, 8000, &f));
    assert_non_null(strstr(s->ops->describe(s->impl), " 160x120 RGB3"));
    cam_read(&st);
    assert_int_equal(emucam_find(&st, V4L2_CID_EXPOSURE_AUTO)->value, V4L2_EXPOSURE_MANUAL);
    assert_int_equal(emucam_find(&st, V4L2_CID_EXPOSURE_ABSOLUTE)->value, 300);
    close_cam(s);
}

/* A driver that hands back a buffer index it never made: refused (lost,
 * with the reason), not a read outside the mapped buffers. */
static void test_bad_buffer_index(void **state)
{
    (void)state;
    struct emucam_state st;
    emucam_default(&st, EMUCAM_RGB24);
    st.bad_index = 1;
    cam_write(&st);
    struct source *s;
    struct err e;
    assert_int_equal(open_cam(NULL, 160, 120, &s, &e), ST_OK);
    struct source_frame f;
    assert_true(wait_for(s, SOURCE_LOST, 2000, &f));
    const char *d = s->ops->describe(s->impl);
    print_message("lost: %s\n", d);
    assert_non_null(strstr(d, "buffer index 44 of 4"));
    close_cam(s);
}

/* Buffers whose bytesused is short of a frame are requeued and skipped,
 * never copied as if whole; frames flow again once they are whole. */
static void test_short_frames(void **state)
{
    (void)state;
    struct emucam_state st;
    emucam_default(&st, EMUCAM_RGB24);
    st.short_frames = 1;
    cam_write(&st);
    struct source *s;
    struct err e;
    assert_int_equal(open_cam(NULL, 160, 120, &s, &e), ST_OK);
    struct source_frame f;
    int code;
    double end = now_ms() + 300;
    while (now_ms() < end) {
        assert_int_equal(s->ops->next(s->impl, 100, &f, &code, &e), ST_OK);
        assert_int_equal(code, SOURCE_WAIT);
    }
    assert_non_null(strstr(s->ops->describe(s->impl), "short frames skipped"));
    cam_read(&st);
    assert_true(st.frames >= 5); /* the camera did deliver, at 30 fps */
    st.short_frames = 0;
    cam_write(&st);
    assert_true(wait_for(s, SOURCE_FRAME, 2000, &f));
    uint8_t want[160 * 120 * 3];
    emucam_render(want, V4L2_PIX_FMT_RGB24, 160, 120, emucam_number(f.img->px));
    assert_memory_equal(f.img->px, want, sizeof want);
    close_cam(s);
}

/* Not a camera: a regular file without the magic is left to libv4l2,
 * which refuses it; the message names the device. */
static void test_not_a_camera(void **state)
{
    (void)state;
    FILE *fp = fopen(cam_path, "w");
    assert_non_null(fp);
    fputs("just a file\n", fp);
    fclose(fp);
    struct source *s = NULL;
    struct err e;
    assert_int_not_equal(open_cam(NULL, 0, 0, &s, &e), ST_OK);
    assert_null(s);
    char want[200];
    snprintf(want, sizeof want, "camera %s: cannot open: ", cam_path);
    assert_memory_equal(e.msg, want, strlen(want));
}

/* libv4l's own software controls (LIBV4LCONTROL_CONTROLS turns them on
 * for any camera: white balance 1, gamma 8, auto gain 32 are libv4lcontrol's
 * bits in libv4l 1.22, found by listing the controls each value adds) on a camera without those controls of its own: left on by an
 * earlier program (libv4l keeps them in shared memory), the source turns
 * them off and gamma to its default, and reports them. */
static void test_libv4l_software_controls(void **state)
{
    (void)state;
    struct emucam_state st;
    emucam_default(&st, EMUCAM_YUYV);
    emucam_find(&st, V4L2_CID_AUTO_WHITE_BALANCE)->present = 0;
    emucam_find(&st, V4L2_CID_AUTOGAIN)->present = 0;
    cam_write(&st);
    setenv("LIBV4LCONTROL_CONTROLS", "41", 1);
    int fd = v4l2_open(cam_path, O_RDWR);
    assert_true(fd >= 0);
    struct v4l2_control c = {.id = V4L2_CID_AUTO_WHITE_BALANCE, .value = 1};
    assert_int_equal(v4l2_ioctl(fd, VIDIOC_S_CTRL, &c), 0);
    c = (struct v4l2_control){.id = V4L2_CID_GAMMA, .value = 1500};
    assert_int_equal(v4l2_ioctl(fd, VIDIOC_S_CTRL, &c), 0);
    v4l2_close(fd);
    struct source *s;
    struct err e;
    int rc = open_cam(NULL, 160, 120, &s, &e);
    /* libv4l reads it at open; later tests must not inherit it */
    unsetenv("LIBV4LCONTROL_CONTROLS");
    assert_int_equal(rc, ST_OK);
    const char *j = s->ops->settings_json(s->impl);
    print_message("settings: %s\n", j);
    assert_non_null(j);
    assert_non_null(strstr(j, "\"libv4l_white_balance\":0"));
    assert_non_null(strstr(j, "\"libv4l_autogain\":0"));
    assert_non_null(strstr(j, "\"libv4l_gamma\":1000"));
    close_cam(s);
    setenv("LIBV4LCONTROL_CONTROLS", "41", 1);
    fd = v4l2_open(cam_path, O_RDWR);
    unsetenv("LIBV4LCONTROL_CONTROLS");
    assert_true(fd >= 0);
    c = (struct v4l2_control){.id = V4L2_CID_AUTO_WHITE_BALANCE};
    assert_int_equal(v4l2_ioctl(fd, VIDIOC_G_CTRL, &c), 0);
    assert_int_equal(c.value, 0); /* kept in libv4l's shared memory */
    v4l2_close(fd);
}

/* Root in a private mount namespace, or SKIP. */
static int enter_namespace(const char *self)
{
    if (getenv("EMUCAM_INSIDE"))
        return 0;
    if (geteuid() != 0) {
        printf("SKIP: the emulated camera needs root for unshare -m and a bind mount\n");
        return 77;
    }
    if (system("unshare -m true 2>/dev/null") != 0) {
        printf("SKIP: unshare -m does not work here (no CAP_SYS_ADMIN?)\n");
        return 77;
    }
    char libdir[256] = "";
    FILE *p = popen("pkg-config --variable=libdir libv4l2", "r");
    if (!p || !fgets(libdir, sizeof libdir, p)) {
        printf("SKIP: pkg-config does not know libv4l2's folder\n");
        return 77;
    }
    pclose(p);
    libdir[strcspn(libdir, "\n")] = '\0';
    char plugins[300], cmd[1200];
    snprintf(plugins, sizeof plugins, "%s/libv4l/plugins", libdir);
    if (access(plugins, F_OK)) {
        printf("SKIP: libv4l2's plugin folder %s is missing (package libv4l-0)\n", plugins);
        return 77;
    }
    const char *build = getenv("STATION_BUILD") ? getenv("STATION_BUILD") : "build";
    snprintf(cmd, sizeof cmd,
             "unshare -m sh -c 'mount --bind \"$1\" \"$2\" && mount -t tmpfs tmpfs /dev/shm && "
             "EMUCAM_INSIDE=1 exec \"$3\"' sh '%s/tests/emucam' '%s' '%s'",
             build, plugins, self);
    int rc = system(cmd);
    return WIFEXITED(rc) ? WEXITSTATUS(rc) : 1;
}

int main(int argc, char **argv)
{
    (void)argc;
    char self[512];
    ssize_t n = readlink("/proc/self/exe", self, sizeof self - 1);
    if (n <= 0)
        return 1;
    self[n] = '\0';
    if (!getenv("EMUCAM_INSIDE"))
        return enter_namespace(argv[0][0] == '/' ? argv[0] : self);
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_yuyv_through_libv4lconvert),
        cmocka_unit_test(test_native_rgb),
        cmocka_unit_test(test_lock_order_and_clamp),
        cmocka_unit_test(test_lacking_control),
        cmocka_unit_test(test_libv4l_software_controls),
        cmocka_unit_test(test_stall_restart),
        cmocka_unit_test(test_unplug_replug),
        cmocka_unit_test(test_bad_buffer_index),
        cmocka_unit_test(test_short_frames),
        cmocka_unit_test(test_not_a_camera),
    };
    if (testkit_scratch_setup("test_camera"))
        return 1;
    /* poll on a regular file is always ready, so the source meets DQBUF's
     * EAGAIN far more often than with a real camera, and libv4l2 reports
     * each on stderr unless it has a log file */
    v4l2_log_file = fopen("/dev/null", "w");
    int failed = cmocka_run_group_tests(tests, setup, teardown);
    testkit_scratch_teardown();
    return failed;
}
