/* station: the program's entry point; dispatches to one file per subcommand. */
#define _GNU_SOURCE /* sched_setaffinity, cpu_set_t */
#include <sched.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

static const struct {
    const char *name;
    int (*run)(int, char **);
    const char *what;
    int boosts; /* trains through XGBoost (see waits_narrow) */
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
    {"sync", cmd_sync, "forward the log to the site's central PostgreSQL database", 0},
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

/* XGBoost's OpenMP threads spin between its parallel regions, and on two
 * cores shared with anything else the spinning thread takes the core the
 * working one needs: perf put half of `station train`'s samples in
 * libgomp's spin loop, and the demo's training took 76 s of wall clock (55 s
 * of CPU) so against 24 s (21 s) with OMP_WAIT_POLICY=PASSIVE, the same
 * model.  libgomp fixes its policy in its constructor, from the environment
 * and from the CPUs the process may run on: with more of its threads than
 * such CPUs it spins briefly (its GOMP_SPINCOUNT throttling).  The program
 * cannot set the environment that early (glibc resets environ after the
 * executable's .preinit_array, which runs before any library's constructor,
 * per the ELF gABI), but it can narrow the CPUs there: for the commands that
 * train, unless the caller set a policy, the process runs on its first
 * allowed CPU while the libraries start, and main gives the whole set back
 * before any thread exists.  XGBoost names its thread count, so only the
 * spinning changes. */
static cpu_set_t start_cpus;
static int start_narrowed;

/* getenv sees nothing yet in .preinit_array (glibc sets environ later), so
 * the caller's policy is looked for in the environment handed to it. */
static int policy_set(char **envp)
{
    for (char **v = envp; v && *v; v++)
        if (strncmp(*v, "OMP_WAIT_POLICY=", 16) == 0)
            return 1;
    return 0;
}

static void waits_narrow(int argc, char **argv, char **envp)
{
    if (argc < 2 || policy_set(envp) || sched_getaffinity(0, sizeof start_cpus, &start_cpus) != 0 ||
        CPU_COUNT(&start_cpus) < 2)
        return;
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        if (commands[i].boosts && strcmp(argv[1], commands[i].name) == 0) {
            cpu_set_t one;
            CPU_ZERO(&one);
            for (int c = 0; c < CPU_SETSIZE; c++)
                if (CPU_ISSET(c, &start_cpus)) {
                    CPU_SET(c, &one);
                    break;
                }
            start_narrowed = sched_setaffinity(0, sizeof one, &one) == 0;
        }
}

__attribute__((section(".preinit_array"), used)) static void (*const waits_at_start)(int, char **, char **) =
    waits_narrow;

int main(int argc, char **argv)
{
    if (start_narrowed)
        sched_setaffinity(0, sizeof start_cpus, &start_cpus);
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
