/* station audit show SEQ [--json] */
#include <getopt.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "audit.h"
#include "audit_view.h"
#include "cli.h"
#include "core/judge.h"
#include "viewer.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station audit show SEQ [--log DB] [--station ID] [--evidence DIR] [--json]\n"
               "                              [--view]\n\n"
               "Shows one record of the inspection log: when and where it was inspected, the\n"
               "recipe and model it was judged with, the verdict and its reasons, the measured\n"
               "regions, the evidence files and every disposition.  Text on stderr, or with\n"
               "--json one JSON object on stdout.  --view then opens the evidence in a window\n"
               "when a display is present (as `station audit view SEQ` does).\n\n"
               "On the central database (--log postgresql://... or service=NAME) sequence\n"
               "numbers are per station: --station names it when several are held, and\n"
               "--evidence DIR finds the files station sync --evidence-to copied.\n\n"
               "%s\n",
            CLI_CAUTION);
}

static void print_json_list(const char *title, const char *text)
{
    json_t *a = text ? json_loads(text, 0, NULL) : NULL;
    size_t i;
    json_t *x;
    fprintf(stderr, "%s (%zu):\n", title, json_array_size(a));
    json_array_foreach(a, i, x) {
        char *line = json_dumps(x, JSON_COMPACT | JSON_REAL_PRECISION(6));
        fprintf(stderr, "  %s\n", line ? line : "?");
        free(line);
    }
    json_decref(a);
}

static void print_record(struct log_db *db, const struct log_record *r,
                         const struct log_disposition *d, int nd)
{
    if (strcmp(r->chain_station, r->station))
        fprintf(stderr, "log of station %s%s%s\n", r->chain_station, r->line[0] ? ", line " : "",
                r->line);
    fprintf(stderr,
            "record %lld  %s  station %s  operator %s  serial %s\n"
            "recipe %s version %d  sha256 %s\nmodel sha256 %s  scale %s\n"
            "verdict %s\n",
            (long long)r->seq, r->utc, r->station, r->operator_id[0] ? r->operator_id : "-",
            r->serial[0] ? r->serial : "-", r->recipe_id, r->recipe_version, r->recipe_sha256,
            r->model_sha256, r->scale_id, judge_verdict_name(r->verdict));
    print_json_list("reasons", r->reasons_json);
    print_json_list("regions", r->regions_json);
    fprintf(stderr, "evidence (%d):\n", r->nevidence);
    for (int i = 0; i < r->nevidence; i++) {
        char path[PATH_MAX];
        if (log_record_evidence_path(db, r, r->ev[i].name, path, sizeof path, NULL))
            path[0] = '\0';
        fprintf(stderr, "  %-8s %s%s\n", r->ev[i].kind, path[0] ? path : r->ev[i].name,
                r->ev[i].purged ? "  (deleted by the evidence budget)"
                : path[0]       ? ""
                                : "  (not available here: --evidence DIR)");
    }
    fprintf(stderr, "dispositions (%d):\n", nd);
    for (int i = 0; i < nd; i++)
        fprintf(stderr, "  %s  %s by %s: %s\n", d[i].utc, log_disp_name(d[i].disp), d[i].auditor,
                d[i].comment);
    fprintf(stderr, "hash %s\n%s\n", r->hash, CLI_CAUTION);
}

int audit_show(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {{"log", required_argument, NULL, 'l'},
                                         {"station", required_argument, NULL, 's'},
                                         {"json", no_argument, NULL, 'j'},
                                         {"view", no_argument, NULL, 'v'},
                                         {"evidence", required_argument, NULL, 'e'},
                                         {0, 0, 0, 0}};
    struct audit_source src = {.scope = 1};
    int json = 0, view = 0, c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 'l': src.log = optarg; break;
        case 's': src.station = optarg; break;
        case 'e': src.evidence = optarg; break;
        case 'j': json = 1; break;
        case 'v': view = 1; break;
        default: usage(stderr); return EXIT_USAGE;
        }
    }
    long long seq = optind + 1 == argc ? audit_parse_seq(argv[optind]) : -1;
    if (seq < 0) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct log_db *db = NULL;
    if (audit_open_source(&src, LOG_OPEN_READ, &db))
        return EXIT_ERROR;
    struct err e;
    err_clear(&e);
    struct log_record r;
    log_record_init(&r);
    struct log_disposition *d = NULL;
    int nd = 0;
    int rc = log_get(db, seq, &r, &e);
    if (!rc)
        rc = log_dispositions_get(db, seq, &d, &nd, &e);
    if (rc) {
        cli_say("%s", e.msg);
    } else if (json) {
        json_t *o = audit_record_json(db, &r), *all = json_array();
        for (int i = 0; i < nd; i++)
            json_array_append_new(all, audit_disposition_json(&d[i]));
        json_object_set_new(o, "dispositions", all);
        cli_emit(o);
    } else {
        print_record(db, &r, d, nd);
    }
    if (!rc && view) {
        if (getenv("DISPLAY") || getenv("WAYLAND_DISPLAY"))
            rc = audit_view_record(db, &r, VIEWER_SIDE, NULL);
        else
            cli_say("no display: the evidence files are listed above");
    }
    log_dispositions_free(d, nd);
    log_record_clear(&r);
    log_close(db);
    return rc ? EXIT_ERROR : 0;
}
