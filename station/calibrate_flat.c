/* station calibrate flat --white IMAGE... [--dark IMAGE...] --out FILE [--sigma PX] */
#include "calibrate_flat.h"

#include <getopt.h>
#include <jansson.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "calib/flat.h"
#include "cli.h"
#include "core/pngio.h"

#define MOST_FRAMES 64

static void usage(FILE *f)
{
    fprintf(f, "usage: station calibrate flat --white IMAGE... [--dark IMAGE...] --out FILE\n"
               "                              [--sigma PX]\n\n"
               "Builds the flat field that evens out the lighting before features: from\n"
               "frames of a uniform white target filling the view (and optionally frames\n"
               "with the light off), a smoothed gain (and offset) per pixel, saved to FILE.\n"
               "Point the recipe's [lighting] flat_field at it and train again.\n"
               "Prints the non-uniformity ((max - min) / mean of the smoothed grey over the\n"
               "central 90%% of the frame) before and after correction.\n\n"
               "  --white IMAGE...  1..%d frames of the white target\n"
               "  --dark IMAGE...   0..%d frames with the light off\n"
               "  --out FILE        the flat-field file to write\n"
               "  --sigma PX        smoothing of the maps (default %g)\n\n"
               "Exit status: 0 written, 3 bad input, 4 usage.\n",
            MOST_FRAMES, MOST_FRAMES, FLAT_DEFAULT_SIGMA);
}

struct frames {
    int n;
    const char *name[MOST_FRAMES];
    struct image *img[MOST_FRAMES];
};

static void frames_clear(struct frames *f)
{
    for (int i = 0; i < f->n; i++)
        image_free(f->img[i]);
}

static int frames_load(struct frames *f, struct err *e)
{
    for (int i = 0; i < f->n; i++)
        if (pngio_load_rgb(f->name[i], &f->img[i], e))
            return e->code;
    return ST_OK;
}

static int parse(int argc, char **argv, struct frames *white, struct frames *dark,
                 const char **out, double *sigma)
{
    static const struct option opts[] = {{"white", required_argument, NULL, 'w'},
                                         {"dark", required_argument, NULL, 'd'},
                                         {"out", required_argument, NULL, 'o'},
                                         {"sigma", required_argument, NULL, 's'},
                                         {0, 0, 0, 0}};
    struct frames *list = NULL;
    char *end;
    int c;
    optind = 1;
    /* "-": file names after --white / --dark come back as option 1 */
    while ((c = getopt_long(argc, argv, "-", opts, NULL)) != -1) {
        if (c == 'w' || c == 'd')
            list = c == 'w' ? white : dark;
        else
            list = c == 1 ? list : NULL;
        if (c == 'o') {
            *out = optarg;
        } else if (c == 's') {
            *sigma = strtod(optarg, &end);
            if (end == optarg || *end)
                return -1;
        } else if (c == 'w' || c == 'd' || c == 1) {
            if (!list || list->n == MOST_FRAMES)
                return -1;
            list->name[list->n++] = optarg;
        } else {
            return -1;
        }
    }
    return white->n && *out ? 0 : -1;
}

int calibrate_flat(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    struct frames white = {0}, dark = {0};
    const char *out = NULL;
    double sigma = FLAT_DEFAULT_SIGMA;
    if (parse(argc, argv, &white, &dark, &out, &sigma)) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct err e;
    err_clear(&e);
    struct flat_field *f = NULL;
    double t0 = cli_now_ms();
    int rc = frames_load(&white, &e) || frames_load(&dark, &e) ||
             flat_compute(white.img, white.name, white.n, dark.img, dark.name, dark.n, sigma,
                          &f, &e) ||
             flatfield_save(out, f, &e);
    if (rc) {
        cli_say("%s", e.msg);
    } else {
        json_t *o = json_pack("{s:s, s:i, s:i, s:i, s:i, s:f, s:f, s:f, s:f}", "flat_field", out,
                              "width", f->w, "height", f->h, "white_frames", f->white_frames,
                              "dark_frames", f->dark_frames, "sigma", f->sigma,
                              "nonuniformity_before", f->nonuniformity_before,
                              "nonuniformity_after", f->nonuniformity_after, "ms",
                              cli_now_ms() - t0);
        cli_emit(o);
        fprintf(stderr, "%s: %dx%d flat field from %d white and %d dark frames; "
                        "non-uniformity %.1f%% before, %.1f%% after\n",
                out, f->w, f->h, f->white_frames, f->dark_frames,
                100 * f->nonuniformity_before, 100 * f->nonuniformity_after);
    }
    flatfield_free(f);
    frames_clear(&white);
    frames_clear(&dark);
    return rc ? EXIT_ERROR : 0;
}
