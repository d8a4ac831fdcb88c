/* station verify RECIPE [--log DB] [--station ID]: the recipe's master parts, judged and logged. */
#include <getopt.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "core/judge.h"
#include "verify.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station verify RECIPE [--log DB] [--station ID]\n\n"
               "Inspects the recipe's master parts ([master NAME]: an image and the verdict it\n"
               "must get) exactly as station inspect would, and says for each whether it got\n"
               "its verdict. The verification passes only when every master does. One JSON\n"
               "line per master and a closing summary line on stdout, text on stderr.\n\n"
               "  --log DB       the station's log the outcome is recorded in (default: the\n"
               "                 station's, as for station inspect); inspection with that log\n"
               "                 refuses parts (NO_VERDICT, verification_due) once the last\n"
               "                 passing verification is older than [verification] interval_hours\n"
               "  --station ID   station id (default %s)\n\n"
               "Exit status: 0 every master matched, 1 any did not, 3 error, 4 usage.\n%s\n",
            LOGBOOK_DEFAULT_STATION, CLI_CAUTION);
}

int cmd_verify(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {{"log", required_argument, NULL, 'l'},
                                         {"station", required_argument, NULL, 's'},
                                         {0, 0, 0, 0}};
    const char *log_path = NULL, *station = NULL;
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        if (c == 'l') {
            log_path = optarg;
        } else if (c == 's') {
            station = optarg;
        } else {
            usage(stderr);
            return EXIT_USAGE;
        }
    }
    if (argc - optind != 1) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct recipe r;
    if (cli_load_recipe(argv[optind], &r))
        return EXIT_ERROR;
    struct err e;
    err_clear(&e);
    struct verify_outcome v;
    struct logbook lb;
    if (logbook_open(&lb, log_path, station, 0, &r, &e)) {
        cli_say("%s", e.msg);
        return EXIT_ERROR;
    }
    if (verify_run(&r, &v, &e)) {
        cli_say("%s", e.msg);
        logbook_close(&lb);
        return EXIT_ERROR;
    }
    for (int i = 0; i < v.n; i++) {
        const struct recipe_master *m = &r.masters[i];
        json_t *o = json_pack("{s:s, s:s, s:s, s:s, s:b, s:O}", "master", m->name, "image",
                              m->image, "expect", judge_verdict_name(m->expect), "verdict",
                              judge_verdict_name(v.m[i].verdict), "match", v.m[i].match,
                              "inspection", v.m[i].report);
        cli_emit(o);
        fprintf(stderr, "master %s: %s, expected %s — %s\n", m->name,
                judge_verdict_name(v.m[i].verdict), judge_verdict_name(m->expect),
                v.m[i].match ? "matches" : "DOES NOT MATCH");
    }
    int passed = v.matched == v.n;
    int64_t vseq = 0;
    /* an outcome the log cannot keep is no verification: inspection stays refused */
    int rc = verify_record(&lb, &r, &v, &vseq, &e);
    logbook_close(&lb);
    if (rc) {
        cli_say("verification not recorded: %s", e.msg);
        verify_clear(&v);
        return EXIT_ERROR;
    }
    json_t *s = json_pack("{s:s, s:s, s:i, s:i, s:i, s:I}", "verification",
                          passed ? "passed" : "failed", "recipe", r.product, "recipe_version",
                          r.version, "masters", v.n, "matched", v.matched, "log_vseq",
                          (json_int_t)vseq);
    cli_emit(s);
    fprintf(stderr, "verification %s: %d of %d masters got their verdict.%s  %s\n",
            passed ? "passed" : "FAILED", v.matched, v.n,
            passed ? "" : " Do not inspect until the station is put right and verified again.",
            CLI_CAUTION);
    verify_clear(&v);
    return passed ? 0 : EXIT_ANY_FAIL;
}
