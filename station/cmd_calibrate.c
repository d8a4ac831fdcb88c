/* station calibrate VERB ...: dispatches to one function per calibration. */
#include <stdio.h>
#include <string.h>

#include "calibrate_flat.h"
#include "cli.h"

static const struct {
    const char *verb;
    int (*run)(int, char **);
    const char *what;
} verbs[] = {
    {"flat", calibrate_flat, "flat field from frames of a white target (and dark frames)"},
};

static void usage(FILE *f)
{
    fprintf(f, "usage: station calibrate VERB [OPTIONS]   (station calibrate VERB --help)\n\n");
    for (size_t i = 0; i < sizeof verbs / sizeof verbs[0]; i++)
        fprintf(f, "  %-6s %s\n", verbs[i].verb, verbs[i].what);
}

int cmd_calibrate(int argc, char **argv)
{
    if (argc >= 2)
        for (size_t i = 0; i < sizeof verbs / sizeof verbs[0]; i++)
            if (strcmp(argv[1], verbs[i].verb) == 0)
                return verbs[i].run(argc - 1, argv + 1);
    if (argc == 2 && (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h"))) {
        usage(stdout);
        return 0;
    }
    usage(stderr);
    return EXIT_USAGE;
}
