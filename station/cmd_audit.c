/* station audit VERB ...: dispatches to one function per verb (station/audit.h). */
#include <stdio.h>
#include <string.h>

#include "audit.h"
#include "audit_verbs.h"
#include "audit_view.h"
#include "cli.h"

static const struct {
    const char *name;
    int (*run)(int, char **);
    const char *what;
} verbs[] = {
    {"list", audit_list, "list records (filters; a table, or --json lines)"},
    {"show", audit_show, "one record: reasons, measurements, evidence, dispositions"},
    {"dispose", audit_dispose, "record an auditor's disposition of a record"},
    {"verify", audit_verify, "check both hash chains and every evidence file"},
    {"stats", audit_cmd_stats, "counts, reject-rate p-chart, Pareto, false rejects, kappa"},
    {"report", audit_cmd_report, "the figures and the rejects as one self-contained HTML page"},
    {"export", audit_cmd_export, "the records as CSV (RFC 4180)"},
    {"view", audit_cmd_view, "one record's frame and overlay in a window (SDL2)"},
};

static void usage(FILE *f)
{
    fprintf(f, "usage: station audit VERB [OPTIONS]   (station audit VERB --help for details)\n\n");
    for (size_t i = 0; i < sizeof verbs / sizeof verbs[0]; i++)
        fprintf(f, "  %-8s %s\n", verbs[i].name, verbs[i].what);
    fprintf(f, "\nEvery verb takes --log DB (default: the station's log, chosen with --station);\n"
               "the verbs that read also take the central database (postgresql://... or\n"
               "service=NAME), filtered by --station, --line and --recipe.\n"
               "%s\n",
            CLI_CAUTION);
}

int cmd_audit(int argc, char **argv)
{
    if (argc < 2) {
        usage(stderr);
        return EXIT_USAGE;
    }
    if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h")) {
        usage(stdout);
        return 0;
    }
    for (size_t i = 0; i < sizeof verbs / sizeof verbs[0]; i++)
        if (!strcmp(argv[1], verbs[i].name))
            return verbs[i].run(argc - 1, argv + 1);
    cli_say("unknown audit verb '%s' (station audit --help lists them)", argv[1]);
    return EXIT_USAGE;
}
