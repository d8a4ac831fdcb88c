/* featdump: runs the filter bank on a raw 8-bit frame for the reference tests.
 *
 *   featdump FAMILIES SIGMAS ORIENT FREQS NORMALISE THREADS IN_RAW W H C OUT [REPEAT]
 *
 * FAMILIES is "all" or a comma list of colour,gauss,gradient,laplace,hessian,
 * structure,localstd,gabor; SIGMAS and FREQS are comma lists ("-" for none).
 * IN_RAW holds W*H*C bytes, row-major interleaved.  OUT receives the
 * pixel-major float32 stack (native byte order); the feature names go to
 * stdout one per line.  With REPEAT > 0 the frame is computed REPEAT more
 * times and the fastest and mean wall time per frame go to stderr. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "core/features.h"

static const struct {
    const char *name;
    unsigned family;
} families[] = {
    {"colour", FEAT_COLOUR},       {"gauss", FEAT_GAUSS},     {"gradient", FEAT_GRADIENT},
    {"laplace", FEAT_LAPLACE},     {"hessian", FEAT_HESSIAN}, {"structure", FEAT_STRUCTURE},
    {"localstd", FEAT_LOCALSTD},   {"gabor", FEAT_GABOR},
};

static int parse_families(const char *s, unsigned *out)
{
    *out = 0;
    if (strcmp(s, "all") == 0) {
        for (size_t i = 0; i < sizeof families / sizeof families[0]; i++)
            *out |= families[i].family;
        return 0;
    }
    while (*s) {
        size_t len = strcspn(s, ",");
        size_t i = 0;
        while (i < sizeof families / sizeof families[0] &&
               !(strlen(families[i].name) == len && strncmp(families[i].name, s, len) == 0))
            i++;
        if (i == sizeof families / sizeof families[0])
            return -1;
        *out |= families[i].family;
        s += len + (s[len] == ',');
    }
    return 0;
}

static int parse_list(const char *s, double *v, int max)
{
    if (strcmp(s, "-") == 0)
        return 0;
    int n = 0;
    while (*s) {
        char *end;
        if (n == max)
            return -1;
        v[n++] = strtod(s, &end);
        if (end == s || (*end && *end != ','))
            return -1;
        s = end + (*end == ',');
    }
    return n;
}

static double now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec * 1e3 + ts.tv_nsec / 1e6;
}

int main(int argc, char **argv)
{
    struct err e = {0};
    struct feat_spec spec;
    struct feat_ctx *ctx = NULL;
    struct image *img = NULL;
    struct fstack *fs = NULL;
    FILE *f = NULL;
    int rc = 1;
    if (argc != 12 && argc != 13) {
        fprintf(stderr, "usage: featdump FAMILIES SIGMAS ORIENT FREQS NORMALISE THREADS IN_RAW W H C OUT [REPEAT]\n");
        return 2;
    }
    memset(&spec, 0, sizeof spec);
    spec.nsigmas = parse_list(argv[2], spec.sigmas, FEAT_MAX_SIGMAS);
    spec.gabor_orientations = atoi(argv[3]);
    spec.ngabor_freqs = parse_list(argv[4], spec.gabor_freqs, FEAT_MAX_GABOR_FREQS);
    spec.normalise = atoi(argv[5]);
    spec.threads = atoi(argv[6]);
    int w = atoi(argv[8]), h = atoi(argv[9]), c = atoi(argv[10]);
    int repeat = argc == 13 ? atoi(argv[12]) : 0;
    if (parse_families(argv[1], &spec.families) || spec.nsigmas < 0 || spec.ngabor_freqs < 0) {
        fprintf(stderr, "featdump: bad families, sigmas or frequencies\n");
        return 2;
    }
    if (!(img = image_new(w, h, c, &e)) || !(ctx = feat_ctx_new(&spec, w, h, &e)) ||
        !(fs = fstack_new(w, h, feat_count(&spec), &e)))
        goto fail;
    size_t bytes = (size_t)w * h * c;
    if (!(f = fopen(argv[7], "rb")) || fread(img->px, 1, bytes, f) != bytes) {
        fprintf(stderr, "featdump: cannot read %zu bytes from %s\n", bytes, argv[7]);
        goto fail;
    }
    fclose(f);
    f = NULL;
    if (feat_compute(ctx, img, fs, &e))
        goto fail;
    if (repeat > 0) {
        /* the minimum is what the code costs; the mean also shows other load */
        double best = 1e300, total = 0.0;
        for (int i = 0; i < repeat; i++) {
            double t0 = now_ms();
            if (feat_compute(ctx, img, fs, &e))
                goto fail;
            double t = now_ms() - t0;
            best = t < best ? t : best;
            total += t;
        }
        fprintf(stderr, "featdump: %d features, %dx%d, %d threads: %.2f ms per frame (mean %.2f)\n", fs->n, w,
                h, spec.threads, best, total / repeat);
    }
    for (int k = 0; k < fs->n; k++) {
        char name[64];
        if (feat_name(&spec, k, name, sizeof name))
            goto fail;
        printf("%s\n", name);
    }
    size_t count = (size_t)w * h * fs->n;
    f = fopen(argv[11], "wb");
    int written = f && fwrite(fs->v, sizeof(float), count, f) == count;
    if (f && fclose(f))
        written = 0;
    f = NULL;
    if (!written) {
        fprintf(stderr, "featdump: cannot write %s\n", argv[11]);
        goto fail;
    }
    rc = 0;
fail:
    if (e.code)
        fprintf(stderr, "featdump: %s\n", e.msg);
    if (f)
        fclose(f);
    fstack_free(fs);
    feat_ctx_free(ctx);
    image_free(img);
    return rc;
}
