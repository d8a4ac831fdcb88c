/* station calibrate VERB ...: calibration of the bench (scale; one row per
 * verb in the table below). */
#include <getopt.h>
#include <jansson.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "calib/scale.h"
#include "calibrate_flat.h"
#include "cli.h"
#include "core/calfile.h"
#include "core/pngio.h"

static void scale_usage(FILE *f)
{
    fprintf(f,
            "usage: station calibrate scale --board COLSxROWS --square MM [--out FILE]\n"
            "                               [--max-error PX] [--camera ID] [--valid-days N]\n"
            "                               IMAGE...\n\n"
            "Finds a checkerboard target (COLSxROWS inner corners, squares MM wide) in each\n"
            "PNG and writes the part plane's scale: mm per pixel along x and y at the target's\n"
            "centre, the image-to-plane homography, the camera's tilt and the reprojection\n"
            "error. The first image must show the target lying where the part lies; with 3\n"
            "or more images (the target tilted differently in each) the lens is calibrated\n"
            "too, and the scale then applies to lens-corrected pixels, so measurements near\n"
            "the frame's edges are corrected for the lens's bending. One JSON line on stdout, the results for a person on stderr.\n\n"
            "  --board COLSxROWS  inner corners, e.g. 9x6\n"
            "  --square MM        printed square size, measured with a caliper\n"
            "  --out FILE         calibration file to write (default calibration.json)\n"
            "  --max-error PX     refuse when the worst reprojection error is larger (1.0)\n"
            "  --camera ID        the camera's id stored in the file (default camera)\n"
            "  --valid-days N     days the calibration stays valid (default 90)\n\n"
            "Exit status: 0 written, 3 target not found or error over the limit, 4 usage.\n");
}

static int parse_board(const char *s, int *cols, int *rows)
{
    char tail;
    return sscanf(s, "%dx%d%c", cols, rows, &tail) == 2 && *cols >= 2 && *rows >= 2 &&
                   *cols <= 1024 && *rows <= 1024
               ? 0
               : -1;
}

static int positive(const char *s, double *v)
{
    char *end;
    *v = strtod(s, &end);
    return *end == '\0' && end != s && *v > 0 && *v < 1e6 ? 0 : -1;
}

static void report(const struct calfile *c, const char *out, double ms)
{
    fprintf(stderr,
            "scale %.5f x %.5f mm/px at the target's centre (%dx%d board, %g mm squares, %d "
            "view%s)\n"
            "tilt %.2f deg; reprojection RMS %.3f px (%.4f mm), worst %.3f px (%.4f mm)\n",
            c->mm_per_px_x, c->mm_per_px_y, c->board_cols, c->board_rows, c->square_mm, c->views,
            c->views == 1 ? "" : "s", c->tilt_deg, c->rms_px, c->rms_mm, c->worst_px,
            c->worst_mm);
    if (c->has_lens)
        fprintf(stderr,
                "lens fx %.2f fy %.2f cx %.2f cy %.2f px, k1 %.4f k2 %.4f, RMS %.3f px; the "
                "scale applies to lens-corrected pixels\n",
                c->lens.fx, c->lens.fy, c->lens.cx, c->lens.cy, c->lens.k1, c->lens.k2,
                c->lens_rms_px);
    fprintf(stderr, "written %s, valid %d days (%.0f ms)\n", out, c->valid_days, ms);
    char when[32];
    calfile_format_time(c->created, when, sizeof when);
    json_t *o = json_pack("{s:s,s:s,s:s,s:f,s:f,s:f,s:f,s:f,s:f,s:f,s:i,s:s,s:i,s:f}", "calibrate",
                          "scale", "file", out, "camera", c->camera, "mm_per_px_x", c->mm_per_px_x,
                          "mm_per_px_y", c->mm_per_px_y, "tilt_deg", c->tilt_deg, "rms_px",
                          c->rms_px, "worst_px", c->worst_px, "rms_mm", c->rms_mm, "worst_mm",
                          c->worst_mm, "views", c->views, "created", when, "valid_days",
                          c->valid_days, "time_ms", ms);
    if (o && c->has_lens)
        json_object_set_new(o, "lens", calfile_lens_json(c));
    json_dumpf(o, stdout, JSON_COMPACT | JSON_REAL_PRECISION(8));
    fputc('\n', stdout);
    fflush(stdout);
    json_decref(o);
}

static int calibrate_scale(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        scale_usage(stdout);
        return 0;
    }
    static const struct option opts[] = {
        {"board", required_argument, NULL, 'b'},      {"square", required_argument, NULL, 's'},
        {"out", required_argument, NULL, 'o'},        {"max-error", required_argument, NULL, 'm'},
        {"camera", required_argument, NULL, 'c'},     {"valid-days", required_argument, NULL, 'v'},
        {0, 0, 0, 0}};
    int cols = 0, rows = 0, c, days = 90;
    double square = 0, max_error = 1.0, d;
    const char *out = "calibration.json", *camera = "camera";
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        int bad = 0;
        switch (c) {
        case 'b': bad = parse_board(optarg, &cols, &rows); break;
        case 's': bad = positive(optarg, &square); break;
        case 'o': out = optarg; break;
        case 'm': bad = positive(optarg, &max_error); break;
        case 'c': camera = optarg; break;
        case 'v':
            bad = positive(optarg, &d) || d != (int)d || d > 3650;
            days = bad ? 0 : (int)d;
            break;
        default: bad = 1;
        }
        if (bad) {
            if (c != '?')
                cli_say("bad value '%s'", optarg);
            scale_usage(stderr);
            return EXIT_USAGE;
        }
    }
    if (!cols || !(square > 0) || optind >= argc) {
        cli_say("calibrate scale needs --board, --square and at least one IMAGE");
        scale_usage(stderr);
        return EXIT_USAGE;
    }
    int n = argc - optind, rc = EXIT_ERROR;
    if (n > LENS_MAX_VIEWS) {
        cli_say("at most %d images", LENS_MAX_VIEWS);
        return EXIT_USAGE;
    }
    if (strlen(camera) >= sizeof(((struct calfile *)0)->camera) || !*camera ||
        strspn(camera, "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789._-") !=
            strlen(camera)) {
        cli_say("--camera '%s': 1..63 of A-Z a-z 0-9 . _ -", camera);
        return EXIT_USAGE;
    }
    struct image *frames[LENS_MAX_VIEWS] = {0};
    struct err e = {0};
    struct calfile cal;
    double t0 = cli_now_ms();
    for (int i = 0; i < n; i++)
        if (pngio_load_rgb(argv[optind + i], &frames[i], &e)) {
            cli_say("%s", e.msg);
            goto done;
        }
    if (scale_calibrate((const struct image *const *)frames, (const char *const *)argv + optind,
                        n, cols, rows, square, max_error, &cal, &e)) {
        cli_say("%s", e.msg);
        goto done;
    }
    snprintf(cal.camera, sizeof cal.camera, "%s", camera);
    cal.created = (long long)time(NULL);
    cal.valid_days = days;
    if (calfile_save(out, &cal, &e)) {
        cli_say("%s", e.msg);
        goto done;
    }
    report(&cal, out, cli_now_ms() - t0);
    rc = 0;
done:
    for (int i = 0; i < n; i++)
        image_free(frames[i]);
    return rc;
}

static const struct {
    const char *name;
    int (*run)(int, char **);
    const char *what;
} verbs[] = {
    {"scale", calibrate_scale, "pixel-to-mm scale of the part plane from a checkerboard target"},
    {"flat", calibrate_flat, "flat field from frames of a white target (and dark frames)"},
};

static void usage(FILE *f)
{
    fprintf(f, "usage: station calibrate VERB [OPTIONS]   (station calibrate VERB --help)\n\n");
    for (size_t i = 0; i < sizeof verbs / sizeof verbs[0]; i++)
        fprintf(f, "  %-7s %s\n", verbs[i].name, verbs[i].what);
}

int cmd_calibrate(int argc, char **argv)
{
    if (argc >= 2 && (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h"))) {
        usage(stdout);
        return 0;
    }
    for (size_t i = 0; argc >= 2 && i < sizeof verbs / sizeof verbs[0]; i++)
        if (!strcmp(argv[1], verbs[i].name))
            return verbs[i].run(argc - 1, argv + 1);
    if (argc >= 2)
        cli_say("unknown calibration '%s'", argv[1]);
    usage(stderr);
    return EXIT_USAGE;
}
