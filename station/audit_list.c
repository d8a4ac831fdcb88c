/* station audit list [filters] [--json] */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "audit.h"
#include "cli.h"
#include "core/judge.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station audit list [--log DB] [--station ID] [--from UTC] [--to UTC]\n"
               "                          [--verdict V] [--rejects] [--class NAME] [--zone NAME]\n"
               "                          [--recipe ID] [--disposition D] [--line L]\n"
               "                          [--evidence DIR] [--json]\n\n"
               "Lists the records of the inspection log that match every filter given, oldest\n"
               "first: a table on stderr, or with --json one JSON object per record on stdout.\n\n"
               "  --log DB          the log (default: the station's, see station inspect --help),\n"
               "                    or the central database (postgresql://... or service=NAME)\n"
               "  --station ID      records of this station (and its default log)\n"
               "  --line L          records of the stations on this production line (central)\n"
               "  --evidence DIR    evidence folder (central: where station sync --evidence-to\n"
               "                    copied it, DIR/STATION/...)\n"
               "  --from UTC        from this time on, ISO 8601 UTC (2026-12-01 or 2026-12-01T08:00)\n"
               "  --to UTC          before this time\n"
               "  --verdict V       PASS, FAIL or NO_VERDICT\n"
               "  --rejects         FAIL and NO_VERDICT only\n"
               "  --class NAME      a reason or region of this class\n"
               "  --zone NAME       a reason or region in this zone\n"
               "  --recipe ID       records of this recipe (product id)\n"
               "  --disposition D   latest disposition: none (not yet audited), confirmed,\n"
               "                    false-reject, rework, other\n"
               "  --json            JSON lines instead of the table\n\n"
               "%s\n",
            CLI_CAUTION);
}

/* "scratch max_area, pit max_count" from the reasons array. */
static void reasons_text(const char *json, char *buf, size_t len)
{
    buf[0] = '\0';
    json_t *a = json ? json_loads(json, 0, NULL) : NULL;
    size_t i, n = 0;
    json_t *x;
    json_array_foreach(a, i, x) {
        const char *cls = json_string_value(json_object_get(x, "class"));
        const char *rule = json_string_value(json_object_get(x, "rule"));
        const char *zone = json_string_value(json_object_get(x, "zone"));
        n += (size_t)snprintf(buf + n, n < len ? len - n : 0, "%s%s%s%s %s", i ? ", " : "",
                              cls ? cls : "?", zone ? "@" : "", zone ? zone : "",
                              rule ? rule : "?");
        if (n >= len)
            break;
    }
    json_decref(a);
}

static void print_row(const struct log_record *r)
{
    char why[80];
    reasons_text(r->reasons_json, why, sizeof why);
    fprintf(stderr, "%8lld  %-24s %-12s %-10s %-12s %-12s %s\n", (long long)r->seq, r->utc,
            r->chain_station, judge_verdict_name(r->verdict),
            r->has_disposition ? log_disp_name(r->disp.disp) : "-", r->serial[0] ? r->serial : "-",
            why);
}

int audit_list(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {
        {"log", required_argument, NULL, 'l'},     {"station", required_argument, NULL, 's'},
        {"from", required_argument, NULL, 'f'},    {"to", required_argument, NULL, 't'},
        {"verdict", required_argument, NULL, 'v'}, {"rejects", no_argument, NULL, 'r'},
        {"class", required_argument, NULL, 'c'},   {"zone", required_argument, NULL, 'z'},
        {"recipe", required_argument, NULL, 'R'},  {"disposition", required_argument, NULL, 'd'},
        {"json", no_argument, NULL, 'j'},          {"line", required_argument, NULL, 'L'},
        {"evidence", required_argument, NULL, 'e'}, {0, 0, 0, 0}};
    struct log_filter f;
    log_filter_init(&f);
    struct audit_source src = {0};
    int json = 0, c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 'l': src.log = optarg; break;
        case 's': f.station = src.station = optarg; break;
        case 'L': f.line = optarg; break;
        case 'e': src.evidence = optarg; break;
        case 'f': f.from_utc = optarg; break;
        case 't': f.to_utc = optarg; break;
        case 'r': f.rejects = 1; break;
        case 'c': f.cls = optarg; break;
        case 'z': f.zone = optarg; break;
        case 'R': f.recipe_id = optarg; break;
        case 'j': json = 1; break;
        case 'v':
            if ((f.verdict = log_verdict_parse(optarg)) < 0) {
                cli_say("--verdict: '%s' is not PASS, FAIL or NO_VERDICT", optarg);
                return EXIT_USAGE;
            }
            break;
        case 'd':
            if ((f.disp = log_disp_parse(optarg)) < 0) {
                cli_say("--disposition: '%s' is not none, confirmed, false-reject, rework or other",
                        optarg);
                return EXIT_USAGE;
            }
            break;
        default: usage(stderr); return EXIT_USAGE;
        }
    }
    if (optind != argc) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct log_db *db = NULL;
    if (audit_open_source(&src, LOG_OPEN_READ, &db))
        return EXIT_ERROR;
    struct err e;
    err_clear(&e);
    struct log_iter *it = NULL;
    struct log_record r;
    log_record_init(&r);
    int have = 0, rc = log_iter_new(db, &f, &it, &e);
    long n = 0;
    if (!rc && !json)
        fprintf(stderr, "%8s  %-24s %-12s %-10s %-12s %-12s %s\n", "SEQ", "UTC", "STATION",
                "VERDICT", "DISPOSITION", "SERIAL", "REASONS");
    while (!rc && !(rc = log_iter_next(it, &r, &have, &e)) && have) {
        n++;
        if (json)
            cli_emit(audit_record_json(db, &r));
        else
            print_row(&r);
    }
    if (rc)
        cli_say("%s", e.msg);
    else if (!json)
        fprintf(stderr, "%ld records.\n", n);
    log_record_clear(&r);
    log_iter_free(it);
    log_close(db);
    return rc ? EXIT_ERROR : 0;
}
