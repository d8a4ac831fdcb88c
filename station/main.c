/* station: the program's entry point; dispatches to one file per subcommand. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cli.h"

static const struct {
    const char *name;
    int (*run)(int, char **);
    const char *what;
    int boosts; /* trains through XGBoost (see passive_waits) */
} commands[] = {
    {"demo", cmd_demo, "render the demo product, train, evaluate and inspect it end to end", 1},
    {"train", cmd_train, "train a recipe's pixel classifier on a labelled dataset", 1},
    {"evaluate", cmd_evaluate, "measure a trained recipe against a labelled dataset", 0},
    {"inspect", cmd_inspect, "judge image files against a recipe (PASS / FAIL / NO_VERDICT)", 0},
    {"recipe", cmd_recipe, "check, save (version) or show a recipe file", 0},
    {"calibrate", cmd_calibrate, "measure the bench: pixel scale from a checkerboard target, flat field", 0},
    {"capture", cmd_capture, "save frames from the live picture into a dataset folder for labelling", 0},
    {"run", cmd_run, "the live station: camera, replay or simulated bench; trigger, screen, log", 0},
    {"label", cmd_label, "paint class labels over a dataset's images; quick model preview", 1},
    {"verify", cmd_verify, "run the recipe's master parts: does each get its verdict?", 0},
    {"bench", cmd_bench, "time each inspection stage (used by make bench)", 0},
    {"audit", cmd_audit, "audit the inspection log: list, show, dispose, verify, stats, report, export, view", 0},
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

/* XGBoost's OpenMP threads spin between its parallel regions unless
 * OMP_WAIT_POLICY says otherwise, and libgomp reads that once, as it loads,
 * before main.  On two cores shared with anything else the spinning thread
 * takes the core the working one needs: training the demo took 76 s of wall
 * clock (55 s of CPU) so and 26 s (19 s) with passive waits, the same model.
 * So a command that trains runs itself again, once, with the policy set,
 * unless the caller chose one (the memcheck run does, so valgrind keeps
 * the process it watches).  Should the exec fail, it goes on spinning. */
static void passive_waits(char **argv)
{
    if (getenv("OMP_WAIT_POLICY"))
        return;
    if (setenv("OMP_WAIT_POLICY", "PASSIVE", 1) == 0)
        execv("/proc/self/exe", argv);
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
        if (strcmp(argv[1], commands[i].name) == 0) {
            if (commands[i].boosts)
                passive_waits(argv);
            return commands[i].run(argc - 1, argv + 1);
        }
    cli_say("unknown command '%s' (station --help lists them)", argv[1]);
    return EXIT_USAGE;
}
