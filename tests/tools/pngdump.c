/* pngdump: exposes core/pngio to the reference tests.
 *
 *   pngdump rgb FILE                  decode with pngio_load_rgb
 *   pngdump label FILE [NCLASSES]     decode with pngio_load_label (0: no class check)
 *   pngdump save rgb|label IN OUT LEVEL   decode IN, write OUT with pngio_save
 *
 * rgb/label write "W H C\n" and then the raw pixel bytes to stdout.  On a
 * pngio error the message goes to stderr and the exit status is 3; a usage
 * error exits 2. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/pngio.h"
#include "tests/tools/toolarg.h"

static int usage(void)
{
    fprintf(stderr, "usage: pngdump rgb FILE | label FILE [NCLASSES] | save rgb|label IN OUT LEVEL\n");
    return 2;
}

static int load(const char *kind, const char *path, int nclasses, struct image **img, struct err *e)
{
    if (strcmp(kind, "rgb") == 0)
        return pngio_load_rgb(path, img, e);
    return pngio_load_label(path, nclasses, img, e);
}

int main(int argc, char **argv)
{
    struct err e;
    err_clear(&e);
    struct image *img = NULL;
    if (argc < 3)
        return usage();
    int save = strcmp(argv[1], "save") == 0;
    const char *kind = save ? argv[2] : argv[1];
    if (strcmp(kind, "rgb") != 0 && strcmp(kind, "label") != 0)
        return usage();
    int nclasses = 0, level = 0;
    if (save) {
        if (argc != 6 || parse_int(argv[5], &level))
            return usage();
    } else if (argc < 3 || argc > 4 || (argc == 4 && parse_int(argv[3], &nclasses))) {
        return usage();
    }
    int rc = load(kind, argv[save ? 3 : 2], nclasses, &img, &e);
    if (rc == ST_OK && save)
        rc = pngio_save(argv[4], img, level, &e);
    if (rc != ST_OK) {
        fprintf(stderr, "%s\n", e.msg);
        image_free(img);
        return 3;
    }
    int status = 0;
    if (!save) {
        size_t n = (size_t)img->w * (size_t)img->h * (size_t)img->channels;
        printf("%d %d %d\n", img->w, img->h, img->channels);
        if (fwrite(img->px, 1, n, stdout) != n || fflush(stdout) != 0) {
            perror("pngdump: stdout");
            status = 1;
        }
    }
    image_free(img);
    return status;
}
