/* station: the program's entry point; dispatches to one file per subcommand. */
#include <stdio.h>
#include <string.h>

#include "cli.h"

static const struct {
    const char *name;
    int (*run)(int, char **);
    const char *what;
} commands[] = {
    {"demo", cmd_demo, "render the demo product, train, evaluate and inspect it end to end"},
    {"train", cmd_train, "train a recipe's pixel classifier on a labelled dataset"},
    {"evaluate", cmd_evaluate, "measure a trained recipe against a labelled dataset"},
    {"inspect", cmd_inspect, "judge image files against a recipe (PASS / FAIL / NO_VERDICT)"},
    {"recipe", cmd_recipe, "check, save (version) or show a recipe file"},
    {"calibrate", cmd_calibrate, "measure the bench: pixel scale from a checkerboard target, flat field"},
    {"capture", cmd_capture, "save frames from the live picture into a dataset folder for labelling"},
    {"run", cmd_run, "the live station: camera, replay or simulated bench; trigger, screen, log"},
    {"label", cmd_label, "paint class labels over a dataset's images; quick model preview"},
    {"verify", cmd_verify, "run the recipe's master parts: does each get its verdict?"},
    {"bench", cmd_bench, "time each inspection stage (used by make bench)"},
    {"sync", cmd_sync, "forward the log to the site's central PostgreSQL database"},
    {"audit", cmd_audit, "audit the inspection log: list, show, dispose, verify, stats, report, export, view"},
};

static void usage(FILE *f)
{
    fprintf(f, "usage: station COMMAND [OPTIONS]   (station COMMAND --help for details)\n\n");
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        fprintf(f, "  %-10s %s\n", commands[i].name, commands[i].what);
    fprintf(f, "\nExit status of inspect: 0 all PASS, 1 any FAIL, 2 any NO_VERDICT, 3 error, "
               "4 usage.\n%s\n",
            CLI_CAUTION);
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        usage(stderr);
        return EXIT_USAGE;
    }
    if (strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "-h") == 0) {
        usage(stdout);
        return 0;
    }
    if (strcmp(argv[1], "--version") == 0) {
        printf("station %s\n", STATION_VERSION);
        return 0;
    }
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        if (strcmp(argv[1], commands[i].name) == 0)
            return commands[i].run(argc - 1, argv + 1);
    cli_say("unknown command '%s' (station --help lists them)", argv[1]);
    return EXIT_USAGE;
}
