/* station inspect RECIPE IMAGE... [--overlay DIR] */
#include <errno.h>
#include <getopt.h>
#include <libgen.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "cli.h"
#include "core/pngio.h"
#include "report.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station inspect RECIPE IMAGE... [--overlay DIR]\n\n"
               "Judges each image against the recipe's tolerances. One JSON line per image on\n"
               "stdout (image, verdict, reasons, regions with area_mm2, quality), a line per\n"
               "image for a person on stderr. An image that cannot be read or trusted is\n"
               "NO_VERDICT, never PASS.\n\n"
               "  --overlay DIR   write IMAGE-overlay.png with the defects marked\n\n"
               "Exit status: 0 all PASS, 1 any FAIL, 2 any NO_VERDICT, 3 error, 4 usage.\n"
               "%s\n",
            CLI_CAUTION);
}

static int write_overlay(const char *dir, const char *image, const struct image *img,
                         const struct inspector *in, const struct judgement *j, struct err *e)
{
    char copy[PATH_MAX], path[PATH_MAX];
    snprintf(copy, sizeof copy, "%s", image);
    char *base = basename(copy);
    char *dot = strrchr(base, '.');
    if (dot)
        *dot = '\0';
    snprintf(path, sizeof path, "%s/%s-overlay.png", dir, base);
    struct image *o = report_overlay(in, img, j, e);
    int rc = o ? pngio_save(path, o, 3, e) : e->code;
    image_free(o);
    return rc;
}

static void emit(json_t *o)
{
    json_dumpf(o, stdout, JSON_COMPACT | JSON_REAL_PRECISION(6));
    fputc('\n', stdout);
    fflush(stdout);
    json_decref(o);
}

int cmd_inspect(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {{"overlay", required_argument, NULL, 'o'},
                                         {0, 0, 0, 0}};
    const char *overlay = NULL;
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        if (c != 'o') {
            usage(stderr);
            return EXIT_USAGE;
        }
        overlay = optarg;
    }
    if (argc - optind < 2) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct recipe r;
    if (cli_load_recipe(argv[optind], &r))
        return EXIT_ERROR;
    struct err e;
    err_clear(&e);
    if (overlay && mkdir(overlay, 0777) != 0 && errno != EEXIST) {
        cli_say("%s: cannot create folder: %s", overlay, strerror(errno));
        return EXIT_ERROR;
    }
    struct inspector *in = NULL;
    if (inspector_new(&r, &in, &e)) {
        cli_say("%s", e.msg);
        return EXIT_ERROR;
    }
    int counts[3] = {0};
    for (int i = optind + 1; i < argc; i++) {
        const char *path = argv[i];
        struct image *img = NULL;
        struct judgement j;
        struct inspect_times t = {0};
        err_clear(&e);
        if (pngio_load_rgb(path, &img, &e) || inspector_run(in, img, &j, &t, &e)) {
            /* fail closed: anything that stops the pipeline is NO VERDICT */
            emit(report_json_error(path, &e));
            fprintf(stderr, "%s: NO VERDICT — %s\n", path, e.msg);
            counts[VERDICT_NONE]++;
            image_free(img);
            continue;
        }
        emit(report_json(path, in, &j, &t));
        report_print(stderr, path, &r, &j);
        counts[j.verdict]++;
        if (overlay && write_overlay(overlay, path, img, in, &j, &e))
            fprintf(stderr, "station: %s\n", e.msg);
        image_free(img);
    }
    inspector_free(in);
    fprintf(stderr, "%d PASS, %d FAIL, %d NO VERDICT.  %s\n", counts[VERDICT_PASS],
            counts[VERDICT_FAIL], counts[VERDICT_NONE], CLI_CAUTION);
    return counts[VERDICT_NONE] ? EXIT_ANY_NONE : counts[VERDICT_FAIL] ? EXIT_ANY_FAIL : 0;
}
