/* station run RECIPE [--source SPEC] [--headless] ... : the live station. */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "forwarder.h"
#include "live.h"
#include "logbook.h"
#include "trigger.h"

static void usage(FILE *f)
{
    fprintf(f,
            "usage: station run RECIPE [--source camera:/dev/videoN | replay:DIR | bench]\n"
            "                  [--headless] [--trigger key|auto|continuous] [--fps F]\n"
            "                  [--size WxH] [--seed N] [--loop] [--inspections N] [--frames N]\n"
            "                  [--log DB] [--station ID] [--operator ID] [--serial S]\n"
            "                  [--evidence-budget MB] [--snapshot FILE]\n"
            "                  [--sync-to CONNINFO [--sync-every S] [--sync-line LINE]]\n\n"
            "The live station: a live picture, an inspection per part, every verdict\n"
            "recorded in the log before it is shown.\n\n"
            "  --source SPEC   camera:/dev/videoN (V4L2 through libv4l2), replay:DIR (its PNG\n"
            "                  files in name order), bench (the simulated bench; default);\n"
            "                  bench:seed=N,parts=N,lost=START+COUNT,frozen=START+COUNT\n"
            "  --headless      no window: one JSON line per inspection on stdout (the report\n"
            "                  with log_seq and latency_ms) and event lines; commands on\n"
            "                  stdin lines: \"\" or inspect, serial S, operator ID, relearn, quit\n"
            "  --trigger MODE  key: on request (Enter, F5); auto: once per part lying still;\n"
            "                  continuous: every frame the station keeps up with\n"
            "                  (default: the recipe's [trigger] mode)\n"
            "  --fps F         replay and bench pace (default 30; 0: as fast as inspected)\n"
            "  --size WxH      bench frame size (default 480x360), camera request\n"
            "  --seed N        bench series (default 1)\n"
            "  --loop          replay: start again after the last file\n"
            "  --inspections N stop after N inspections (a replay stops at its end)\n"
            "  --frames N      stop after N frames from the source\n"
            "  --log DB        the inspection log (default $XDG_DATA_HOME/station/STATION/log.db)\n"
            "  --station ID    station id (default %s)\n"
            "  --operator ID   operator id recorded with each inspection (or typed: F2)\n"
            "  --serial S      serial of the first part (or typed / scanned; cleared after\n"
            "                  the inspection it was recorded with)\n"
            "  --evidence-budget MB  disk budget for evidence; oldest PASS evidence goes first\n"
            "  --snapshot FILE write the screen as PNG after each shown verdict (F12 too)\n"
            "  --allow-offscreen  accept SDL's offscreen and dummy video drivers (tests)\n"
            "  --sync-to CONNINFO forward the log to the central PostgreSQL database in the\n"
            "                  background (as station sync; no password in CONNINFO: use\n"
            "                  PGPASSFILE, a service file or PGPASSWORD); failures are retried\n"
            "                  and never stop inspection\n"
            "  --sync-every S  seconds between forwards (default %.0f)\n"
            "  --sync-line LINE the production line the station belongs to\n\n"
            "A verdict the log cannot record halts inspection until the log works again.\n"
            "Exit status: 0 all PASS, 1 any FAIL, 2 any NO_VERDICT, 3 error, 4 usage.\n"
            "%s\n",
            LOGBOOK_DEFAULT_STATION, FORWARDER_EVERY_DEFAULT, CLI_CAUTION);
}

int cmd_run(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {
        {"source", required_argument, NULL, 'S'},   {"headless", no_argument, NULL, 'H'},
        {"trigger", required_argument, NULL, 't'},  {"fps", required_argument, NULL, 'f'},
        {"size", required_argument, NULL, 'z'},     {"seed", required_argument, NULL, 'd'},
        {"loop", no_argument, NULL, 'L'},           {"inspections", required_argument, NULL, 'i'},
        {"frames", required_argument, NULL, 'F'},
        {"log", required_argument, NULL, 'l'},      {"station", required_argument, NULL, 's'},
        {"operator", required_argument, NULL, 'p'}, {"serial", required_argument, NULL, 'n'},
        {"evidence-budget", required_argument, NULL, 'b'},
        {"snapshot", required_argument, NULL, 'o'},
        {"allow-offscreen", no_argument, NULL, 'A'},
        {"sync-to", required_argument, NULL, 'T'},
        {"sync-every", required_argument, NULL, 'E'},
        {"sync-line", required_argument, NULL, 'N'},
        {0, 0, 0, 0}};
    struct live_options o;
    live_options_init(&o);
    int c;
    double v;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 't':
            if ((o.trigger = trigger_mode_parse(optarg)) < 0) {
                cli_say("--trigger: '%s' is not key, auto or continuous", optarg);
                return EXIT_USAGE;
            }
            break;
        case 'L': o.src.loop = 1; break;
        case 'i':
            if (cli_number("--inspections", optarg, &v, 0))
                return EXIT_USAGE;
            o.inspections = (long)v;
            break;
        case 'l': o.db_path = optarg; break;
        case 's': o.station = optarg; break;
        case 'p': o.operator_id = optarg; break;
        case 'n': o.serial = optarg; break;
        case 'b':
            if (cli_number("--evidence-budget", optarg, &o.budget_mb, 0))
                return EXIT_USAGE;
            break;
        case 'T': o.sync_to = optarg; break;
        case 'E':
            if (cli_number("--sync-every", optarg, &o.sync_every, 0))
                return EXIT_USAGE;
            break;
        case 'N': o.sync_line = optarg; break;
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
    if (!o.sync_to && (o.sync_line || o.sync_every > 0)) {
        cli_say("--sync-every and --sync-line set how the log is forwarded: they need --sync-to");
        return EXIT_USAGE;
    }
    if (argc - optind != 1) {
        usage(stderr);
        return EXIT_USAGE;
    }
    if (live_options_check(&o))
        return EXIT_USAGE;
    o.recipe_path = argv[optind];
    return live_run(&o);
}
