/* emucamctl: makes and scripts the emulated camera's file
 * (tests/emucam/emucam.h) for the end-to-end tests of station run.
 *
 *   emucamctl init FILE          a YUYV + RGB24 camera, 640x480, 30 fps, every control present
 *   emucamctl unplug FILE 1|0    unplug it (every call ENODEV) or plug it back
 *
 * Exit status: 0 ok, 2 usage, 3 the file cannot be read or written. */
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "tests/emucam/emucam.h"

static int usage(void)
{
    fprintf(stderr, "usage: emucamctl init FILE | emucamctl unplug FILE 1|0\n");
    return 2;
}

int main(int argc, char **argv)
{
    if (argc < 3)
        return usage();
    struct emucam_state s;
    int init = !strcmp(argv[1], "init");
    if (!init && (strcmp(argv[1], "unplug") || argc != 4 ||
                  (strcmp(argv[3], "0") && strcmp(argv[3], "1"))))
        return usage();
    int fd = open(argv[2], O_RDWR | (init ? O_CREAT : 0), 0600);
    if (fd < 0) {
        perror(argv[2]);
        return 3;
    }
    if (init) {
        emucam_default(&s, EMUCAM_YUYV | EMUCAM_RGB24);
    } else if (pread(fd, &s, sizeof s, 0) != (ssize_t)sizeof s ||
               memcmp(s.magic, EMUCAM_MAGIC, sizeof s.magic)) {
        fprintf(stderr, "%s: not an emulated camera's file\n", argv[2]);
        close(fd);
        return 3;
    } else {
        s.unplugged = argv[3][0] == '1';
    }
    int ok = pwrite(fd, &s, sizeof s, 0) == (ssize_t)sizeof s;
    if (close(fd) != 0 || !ok) {
        perror(argv[2]);
        return 3;
    }
    return 0;
}
