/* station capture RECIPE --out DIR [--source SPEC] [--trigger key|auto] ... */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "live.h"
#include "trigger.h"

static void usage(FILE *f)
{
    fprintf(f,
            "usage: station capture RECIPE --out DIR [--source camera:/dev/videoN | replay:DIR |\n"
            "                       bench] [--trigger key|auto] [--headless] [--count N]\n"
            "                       [--fps F] [--size WxH] [--seed N] [--frames N]\n"
            "                       [--snapshot FILE]\n\n"
            "Sample frames for a new product: the live picture with the recipe's locked\n"
            "[camera] settings; each trigger saves the frame as\n"
            "DIR/images/cap_YYYYmmdd-HHMMSS_NNNN.png (names sort in capture order, never\n"
            "overwrite), ready for `station label DIR`.  No model is needed.\n\n"
            "  --out DIR       the dataset folder (created when missing)\n"
            "  --source SPEC   as station run (default bench)\n"
            "  --trigger MODE  key: Enter (or F5, or an empty stdin line headless) saves;\n"
            "                  auto: one frame per part once it lies still (default: key)\n"
            "  --headless      no window: one JSON line {\"event\": \"saved\", \"path\", \"count\"}\n"
            "                  per frame; commands on stdin as station run\n"
            "  --count N       stop after N frames saved\n"
            "  --fps F, --size WxH, --seed N, --frames N, --snapshot FILE, --allow-offscreen\n"
            "                  as station run\n");
}

int cmd_capture(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {
        {"out", required_argument, NULL, 'O'},      {"source", required_argument, NULL, 'S'},
        {"headless", no_argument, NULL, 'H'},       {"trigger", required_argument, NULL, 't'},
        {"count", required_argument, NULL, 'c'},    {"fps", required_argument, NULL, 'f'},
        {"size", required_argument, NULL, 'z'},     {"seed", required_argument, NULL, 'd'},
        {"frames", required_argument, NULL, 'F'},   {"snapshot", required_argument, NULL, 'o'},
        {"allow-offscreen", no_argument, NULL, 'A'}, {0, 0, 0, 0}};
    struct live_options o;
    live_options_init(&o);
    o.trigger = RECIPE_TRIGGER_KEY;
    int c;
    double v;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 'O': o.capture_dir = optarg; break;
        case 't':
            o.trigger = trigger_mode_parse(optarg);
            if (o.trigger != RECIPE_TRIGGER_KEY && o.trigger != RECIPE_TRIGGER_AUTO) {
                cli_say("--trigger: '%s' is not key or auto", optarg);
                return EXIT_USAGE;
            }
            break;
        case 'c':
            if (cli_number("--count", optarg, &v, 0))
                return EXIT_USAGE;
            o.inspections = (long)v;
            break;
        default: {
            int got = live_parse_option(c, optarg, &o);
            if (got != 1) {
                if (got == 0) /* a bad value has said why already */
                    usage(stderr);
                return EXIT_USAGE;
            }
        }
        }
    }
    if (argc - optind != 1 || !o.capture_dir) {
        usage(stderr);
        return EXIT_USAGE;
    }
    if (live_options_check(&o))
        return EXIT_USAGE;
    o.recipe_path = argv[optind];
    int rc = live_run(&o);
    return rc == EXIT_ERROR ? EXIT_ERROR : 0;
}
