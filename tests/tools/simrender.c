/* simrender: renders a series of simulated bench parts as a dataset.
 *
 *   simrender SEED COUNT W H OUTDIR [nominal|shifted] [VIEWDIR]
 *
 * writes OUTDIR/images/part_NNNNN.png (RGB) and OUTDIR/labels/part_NNNNN.png
 * (grey class indices) for parts 0..COUNT-1, and prints one line per part
 * with its defects ("part_00003 2: stain 1234 px at 200.1,150.7 r 30.2; ...").
 * With VIEWDIR it also writes VIEWDIR/part_NNNNN_truth.png, the truth in
 * colour for looking at.  The last line gives the mean render time.  Exit
 * status: 0 ok, 2 usage, 3 render or write error. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>

#include "core/pngio.h"
#include "station/simbench.h"

static int usage(void)
{
    fprintf(stderr, "usage: simrender SEED COUNT W H OUTDIR [nominal|shifted] [VIEWDIR]\n");
    return 2;
}

static int parse_long(const char *s, long lo, long hi, long *v)
{
    char *end;
    errno = 0;
    long x = strtol(s, &end, 10);
    if (*s == '\0' || *end != '\0' || errno || x < lo || x > hi)
        return -1;
    *v = x;
    return 0;
}

static int make_dir(const char *path)
{
    if (mkdir(path, 0777) == 0 || errno == EEXIST)
        return 0;
    fprintf(stderr, "simrender: cannot create %s: %s\n", path, strerror(errno));
    return -1;
}

static const char *class_name(int cls)
{
    static const char *names[SIM_NCLASSES] = {"background", "surface", "scratch", "pit", "stain"};
    return cls >= 0 && cls < SIM_NCLASSES ? names[cls] : "?";
}

static int save_view(const char *path, const struct image *truth, struct err *e)
{
    static const uint8_t colour[SIM_NCLASSES][3] = {
        {20, 20, 30}, {150, 150, 150}, {230, 40, 40}, {250, 220, 0}, {0, 200, 230}};
    struct image *v = image_new(truth->w, truth->h, 3, e);
    if (!v)
        return e->code;
    for (size_t i = 0; i < (size_t)truth->w * truth->h; i++)
        memcpy(v->px + 3 * i, colour[truth->px[i] % SIM_NCLASSES], 3);
    int rc = pngio_save(path, v, 6, e);
    image_free(v);
    return rc;
}

int main(int argc, char **argv)
{
    long seed, count, w, h;
    if (argc < 6 || argc > 8 || parse_long(argv[1], 0, 0x7fffffffL, &seed) ||
        parse_long(argv[2], 1, 100000, &count) || parse_long(argv[3], 64, 16384, &w) ||
        parse_long(argv[4], 64, 16384, &h))
        return usage();
    struct simbench_conditions cond;
    if (argc < 7 || strcmp(argv[6], "nominal") == 0)
        simbench_conditions_nominal(&cond);
    else if (strcmp(argv[6], "shifted") == 0)
        simbench_conditions_shifted(&cond);
    else
        return usage();
    const char *out = argv[5], *view = argc == 8 ? argv[7] : NULL;
    char path[4096];
    snprintf(path, sizeof path, "%s/images", out);
    if (make_dir(out) || make_dir(path))
        return 3;
    snprintf(path, sizeof path, "%s/labels", out);
    if (make_dir(path) || (view && make_dir(view)))
        return 3;

    double total_ms = 0.0;
    for (long k = 0; k < count; k++) {
        struct image *img = NULL, *truth = NULL;
        struct simbench_truth info;
        struct err e = {0};
        struct timespec t0, t1;
        clock_gettime(CLOCK_MONOTONIC, &t0);
        int rc = simbench_render((uint64_t)seed, (int)k, &cond, (int)w, (int)h, &img, &truth,
                                 &info, &e);
        clock_gettime(CLOCK_MONOTONIC, &t1);
        total_ms += (t1.tv_sec - t0.tv_sec) * 1e3 + (t1.tv_nsec - t0.tv_nsec) * 1e-6;
        char stem[32];
        snprintf(stem, sizeof stem, "part_%05ld", k);
        if (!rc) {
            snprintf(path, sizeof path, "%s/images/%s.png", out, stem);
            rc = pngio_save(path, img, 6, &e);
        }
        if (!rc) {
            snprintf(path, sizeof path, "%s/labels/%s.png", out, stem);
            rc = pngio_save(path, truth, 6, &e);
        }
        if (!rc && view) {
            snprintf(path, sizeof path, "%s/%s_truth.png", view, stem);
            rc = save_view(path, truth, &e);
        }
        if (rc) {
            fprintf(stderr, "simrender: %s\n", e.msg);
            image_free(img);
            image_free(truth);
            return 3;
        }
        printf("%s %d:", stem, info.ndefects);
        for (int d = 0; d < info.ndefects; d++) {
            const struct simbench_defect *df = &info.defects[d];
            printf("%s %s %d px at %.1f,%.1f %s %.1f", d ? ";" : "", class_name(df->cls),
                   df->pixels, df->x, df->y, df->cls == SIM_SCRATCH ? "len" : "r", df->size);
        }
        printf("\n");
        image_free(img);
        image_free(truth);
    }
    printf("mean render time %.2f ms per %ldx%ld part\n", total_ms / count, w, h);
    return 0;
}
