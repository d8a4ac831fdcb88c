/* emucamctl: makes and scripts the emulated camera's file
 * (tests/emucam/emucam.h) for the end-to-end tests of station run.
 *
 *   emucamctl init FILE          a YUYV + RGB24 camera, 640x480, 30 fps, every control present
 *   emucamctl unplug FILE 1|0    unplug it (every call ENODEV) or plug it back
 *   emucamctl set FILE WHAT 1|0  WHAT: stall (no frames), short (half-frame bytesused),
 *                                garbage (random bytes), unplugged
 *
 * Only the scripted field is written (the plugin updates its counters in
 * the same file meanwhile).  Exit status: 0 ok, 2 usage, 3 the file cannot
 * be read or written. */
#include <fcntl.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "tests/emucam/emucam.h"

static int usage(void)
{
    fprintf(stderr, "usage: emucamctl init FILE | emucamctl unplug FILE 1|0 |"
                    " emucamctl set FILE stall|short|garbage|unplugged 1|0\n");
    return 2;
}

static long field_offset(const char *what)
{
    static const struct { const char *name; size_t off; } f[] = {
        {"unplugged", offsetof(struct emucam_state, unplugged)},
        {"stall", offsetof(struct emucam_state, stall)},
        {"short", offsetof(struct emucam_state, short_frames)},
        {"garbage", offsetof(struct emucam_state, garbage)},
    };
    for (size_t i = 0; i < sizeof f / sizeof f[0]; i++)
        if (!strcmp(what, f[i].name))
            return (long)f[i].off;
    return -1;
}

int main(int argc, char **argv)
{
    if (argc < 3)
        return usage();
    struct emucam_state s;
    int init = !strcmp(argv[1], "init");
    const char *what = !strcmp(argv[1], "unplug") ? "unplugged" : argc == 5 ? argv[3] : "";
    const char *val = argv[argc - 1];
    long off = init ? 0 : field_offset(what);
    if (!init && (off < 0 || (strcmp(argv[1], "unplug") ? strcmp(argv[1], "set") || argc != 5
                                                         : argc != 4) ||
                  (strcmp(val, "0") && strcmp(val, "1"))))
        return usage();
    int fd = open(argv[2], O_RDWR | (init ? O_CREAT : 0), 0600);
    if (fd < 0) {
        perror(argv[2]);
        return 3;
    }
    int ok;
    if (init) {
        emucam_default(&s, EMUCAM_YUYV | EMUCAM_RGB24);
        ok = pwrite(fd, &s, sizeof s, 0) == (ssize_t)sizeof s;
    } else if (pread(fd, &s, sizeof s, 0) != (ssize_t)sizeof s ||
               memcmp(s.magic, EMUCAM_MAGIC, sizeof s.magic)) {
        fprintf(stderr, "%s: not an emulated camera's file\n", argv[2]);
        close(fd);
        return 3;
    } else {
        uint32_t v = val[0] == '1';
        ok = pwrite(fd, &v, sizeof v, off) == (ssize_t)sizeof v;
    }
    if (close(fd) != 0 || !ok) {
        perror(argv[2]);
        return 3;
    }
    return 0;
}
