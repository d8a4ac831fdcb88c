/* station inspect RECIPE IMAGE... [--overlay DIR] [--log DB] ... */
#include <errno.h>
#include <getopt.h>
#include <libgen.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "cli.h"
#include "core/pngio.h"
#include "logbook.h"
#include "report.h"
#include "verify.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station inspect RECIPE IMAGE... [--overlay DIR] [--log DB] [--station ID]\n"
               "                       [--operator ID] [--serial S] [--evidence-budget MB]\n\n"
               "Judges each image against the recipe's tolerances. One JSON line per image on\n"
               "stdout (image, verdict, reasons, regions with area_mm2, quality), a line per\n"
               "image for a person on stderr. An image that cannot be read or trusted is\n"
               "NO_VERDICT, never PASS.\n\n"
               "  --overlay DIR   write IMAGE-overlay.png with the defects marked\n"
               "  --log DB        the inspection log (default $XDG_DATA_HOME/station/STATION/log.db);\n"
               "                  every verdict is recorded there before it is shown, with the frame\n"
               "                  and overlay as evidence for every FAIL and NO_VERDICT\n"
               "  --station ID    station id (default %s)\n"
               "  --operator ID   operator id recorded with each inspection\n"
               "  --serial S      part serial recorded with each inspection\n"
               "  --evidence-budget MB  disk budget for evidence; oldest PASS evidence goes first\n\n"
               "A verdict the log cannot record durably is NO_VERDICT, and inspection stops.\n"
               "Exit status: 0 all PASS, 1 any FAIL, 2 any NO_VERDICT, 3 error, 4 usage.\n"
               "%s\n",
            LOGBOOK_DEFAULT_STATION, CLI_CAUTION);
}

/* ov is the overlay the log kept as evidence, or NULL: drawn here then. */
static int write_overlay(const char *dir, const char *image, const struct image *img,
                         const struct inspector *in, const struct judgement *j,
                         const struct image *ov, struct err *e)
{
    char copy[PATH_MAX], path[PATH_MAX];
    snprintf(copy, sizeof copy, "%s", image);
    char *base = basename(copy);
    char *dot = strrchr(base, '.');
    if (dot)
        *dot = '\0';
    snprintf(path, sizeof path, "%s/%s-overlay.png", dir, base);
    struct image *drawn = ov ? NULL : report_overlay(in, img, j, e);
    const struct image *o = ov ? ov : drawn;
    int rc = o ? pngio_save(path, o, 3, e) : e->code;
    image_free(drawn);
    return rc;
}

int cmd_inspect(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {
        {"overlay", required_argument, NULL, 'o'}, {"log", required_argument, NULL, 'l'},
        {"station", required_argument, NULL, 's'}, {"operator", required_argument, NULL, 'p'},
        {"serial", required_argument, NULL, 'n'},  {"evidence-budget", required_argument, NULL, 'b'},
        {0, 0, 0, 0}};
    const char *overlay = NULL, *db_path = NULL, *station = NULL, *operator_id = NULL, *serial = NULL;
    double budget_mb = 0;
    int c;
    char *end;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 'o': overlay = optarg; break;
        case 'l': db_path = optarg; break;
        case 's': station = optarg; break;
        case 'p': operator_id = optarg; break;
        case 'n': serial = optarg; break;
        case 'b':
            budget_mb = strtod(optarg, &end);
            if (*end || !(budget_mb > 0)) {
                cli_say("--evidence-budget: '%s' is not a positive number of MB", optarg);
                return EXIT_USAGE;
            }
            break;
        default: usage(stderr); return EXIT_USAGE;
        }
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
    struct logbook lb;
    if (inspector_new(&r, &in, &e) ||
        logbook_open(&lb, db_path, station, (uint64_t)(budget_mb * 1e6), &r, &e)) {
        cli_say("%s", e.msg);
        inspector_free(in);
        return EXIT_ERROR;
    }
    double since = -1;
    if (r.nmasters && verify_hours_since(&lb, &r, &since, &e)) {
        cli_say("%s", e.msg);
        inspector_free(in);
        logbook_close(&lb);
        return EXIT_ERROR;
    }
    inspector_set_verified(in, since);
    if (r.nmasters && since > r.verify_interval_hours)
        cli_say("verification due: no passing verification of %s in the last %g h; run station "
                "verify %s first",
                r.product, r.verify_interval_hours, argv[optind]);
    int counts[3] = {0}, stopped = 0;
    for (int i = optind + 1; i < argc && !stopped; i++) {
        const char *path = argv[i];
        struct image *img = NULL;
        struct judgement j;
        struct inspect_times t = {0};
        err_clear(&e);
        int64_t seq;
        if (pngio_load_rgb(path, &img, &e) || inspector_run(in, img, &j, &t, &e)) {
            /* fail closed: anything that stops the pipeline is NO VERDICT */
            json_t *o = report_json_error(path, &e);
            fprintf(stderr, "%s: NO VERDICT — %s\n", path, e.msg);
            stopped =
                logbook_record(&lb, o, in, NULL, NULL, operator_id, serial, &seq, NULL, &e);
            cli_emit(o);
            counts[VERDICT_NONE]++;
            image_free(img);
            if (stopped)
                cli_say("inspection stopped: %s", e.msg);
            continue;
        }
        /* shown only once recorded: a verdict the log lost is no verdict */
        json_t *o = report_json(path, in, &j, &t);
        struct image *ov = NULL;
        stopped = logbook_record(&lb, o, in, img, &j, operator_id, serial, &seq,
                                 overlay ? &ov : NULL, &e);
        cli_emit(o);
        if (stopped) {
            fprintf(stderr, "%s: NO VERDICT — not recorded: %s\n", path, e.msg);
            cli_say("inspection stopped: %s", e.msg);
            counts[VERDICT_NONE]++;
            image_free(img);
            continue;
        }
        report_print(stderr, path, &r, &j);
        counts[j.verdict]++;
        if (overlay && write_overlay(overlay, path, img, in, &j, ov, &e))
            fprintf(stderr, "station: %s\n", e.msg);
        image_free(ov);
        image_free(img);
    }
    inspector_free(in);
    fprintf(stderr, "Recorded in %s.\n", log_path(lb.db));
    logbook_close(&lb);
    fprintf(stderr, "%d PASS, %d FAIL, %d NO VERDICT.  %s\n", counts[VERDICT_PASS],
            counts[VERDICT_FAIL], counts[VERDICT_NONE], CLI_CAUTION);
    return counts[VERDICT_NONE] ? EXIT_ANY_NONE : counts[VERDICT_FAIL] ? EXIT_ANY_FAIL : 0;
}
