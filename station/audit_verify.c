/* station audit verify */
#include <getopt.h>
#include <stdio.h>
#include <string.h>

#include "audit.h"
#include "cli.h"
#include "core/logverify.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station audit verify [--log DB] [--station ID] [--public-key HEX|FILE]\n"
               "                            [--evidence DIR]\n\n"
               "Checks the whole log: SQLite's integrity check, the record hash chain, every\n"
               "evidence file (present, same size and SHA-256), the disposition chain, and the\n"
               "Ed25519 signature of every link.  The public key the signatures are checked\n"
               "against is printed; give --public-key (64 hex characters, or a file holding\n"
               "them) obtained separately to check a copy of the log as a third party: a log\n"
               "rewritten without the station's private key then fails at its first record.\n"
               "Records from before schema 4 are reported as unsigned.\n"
               "Prints the first broken link (chain, sequence number, what differs) and tells\n"
               "a break at the last link (an interrupted last write) from damage in the middle.\n"
               "One JSON line on stdout, a sentence on stderr.\n\n"
               "On the central database (--log postgresql://... or service=NAME) every\n"
               "station's chains are verified, each against that station's own public key, one\n"
               "JSON line and one sentence per station (--station ID: that one only);\n"
               "--evidence DIR checks the files station sync --evidence-to copied there, and\n"
               "without it they are reported as not available, not as broken.\n\n"
               "Exit status: 0 everything verifies, 1 a link is broken, 3 the log cannot be read.\n"
               "%s\n",
            CLI_CAUTION);
}

/* The result as one JSON line and a sentence for a person; 1 when broken. */
static int report(const char *name, const char *station, const struct log_verify_result *v,
                  double ms)
{
    cli_emit(json_pack("{s:b,s:s?,s:s?,s:b,s:I,s:I,s:I,s:I,s:I,s:I,s:I,s:f,s:s?,s:I,s:b,s:s?}",
                       "ok", v->ok, "station", station,
                       "public_key", v->public_key[0] ? v->public_key : NULL, "key_given",
                       v->key_given, "signed", (json_int_t)v->signed_links, "unsigned",
                       (json_int_t)v->unsigned_links, "records", (json_int_t)v->records,
                       "dispositions", (json_int_t)v->dispositions, "verifications",
                       (json_int_t)v->verifications, "evidence_files",
                       (json_int_t)v->evidence_files, "evidence_unavailable",
                       (json_int_t)v->evidence_unavailable, "ms", ms, "chain",
                       v->ok ? NULL : v->chain, "seq", (json_int_t)v->seq, "torn", v->torn,
                       "what", v->ok ? NULL : v->what));
    char who[LOG_ID_MAX + 16] = "";
    if (station)
        snprintf(who, sizeof who, " station %s", station);
    if (v->public_key[0])
        fprintf(stderr, "%s%s: signatures checked against public key %s (%s)\n", name, who,
                v->public_key, v->key_given ? "given" : "as stored in the log");
    if (v->unsigned_links)
        fprintf(stderr, "%s%s: %lld links unsigned (before schema %d)\n", name, who,
                (long long)v->unsigned_links, LOG_SIGNED_SINCE);
    if (v->evidence_unavailable)
        fprintf(stderr, "%s%s: %lld evidence files not available here, not checked (--evidence"
                        " DIR names where station sync --evidence-to copied them)\n",
                name, who, (long long)v->evidence_unavailable);
    if (v->ok)
        fprintf(stderr, "%s%s: verified %lld records, %lld evidence files, %lld dispositions, "
                        "%lld master-part verifications, %lld signatures.\n",
                name, who, (long long)v->records, (long long)v->evidence_files,
                (long long)v->dispositions, (long long)v->verifications,
                (long long)v->signed_links);
    else
        fprintf(stderr, "%s%s: BROKEN at %s %lld: %s\n  %s\n", name, who, v->chain,
                (long long)v->seq, v->what,
                v->torn ? "the break is at the last link only: an interrupted last write (or a "
                          "change to that last entry)"
                        : "intact links follow the break: damage or tampering in the middle");
    return !v->ok;
}

/* Verifies the handle's scope (station NULL: the whole log); 0, 1 broken,
 * or EXIT_ERROR. */
static int verify_one(struct log_db *db, const char *station, const char *key)
{
    struct err e;
    err_clear(&e);
    struct log_verify_result v;
    double t0 = cli_now_ms();
    if (log_verify_key(db, key, &v, &e)) {
        cli_say("%s", e.msg);
        return EXIT_ERROR;
    }
    return report(log_path(db), station, &v, cli_now_ms() - t0);
}

int audit_verify(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {{"log", required_argument, NULL, 'l'},
                                         {"station", required_argument, NULL, 's'},
                                         {"public-key", required_argument, NULL, 'k'},
                                         {"evidence", required_argument, NULL, 'e'},
                                         {0, 0, 0, 0}};
    struct audit_source src = {.scope = 1};
    const char *key_arg = NULL;
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 'l': src.log = optarg; break;
        case 's': src.station = optarg; break;
        case 'k': key_arg = optarg; break;
        case 'e': src.evidence = optarg; break;
        default: usage(stderr); return EXIT_USAGE;
        }
    }
    if (optind != argc) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct err e;
    err_clear(&e);
    char key[LOGSIGN_PK_HEX];
    if (key_arg && logsign_public_parse(key_arg, key, &e)) {
        cli_say("--public-key %s", e.msg);
        return EXIT_USAGE;
    }
    struct log_db *db = NULL;
    if (audit_open_source(&src, LOG_OPEN_READ, &db))
        return EXIT_ERROR;
    struct log_station *st = NULL;
    int n = 0, rc = 0;
    /* a log that cannot list its stations is verified whole: a damaged
     * local file is then reported as broken, not as unreadable */
    if (!src.station && log_stations_get(db, &st, &n, &e))
        n = 0;
    if (n > 1 && key_arg) {
        cli_say("%s holds %d stations, each signed with its own key: --public-key needs"
                " --station ID", log_path(db), n);
        rc = EXIT_USAGE;
    } else if (n > 1) {
        /* every station's chains, each against its own public key */
        for (int i = 0; i < n && rc != EXIT_ERROR; i++) {
            int one = log_scope(db, st[i].station, &e) ? (cli_say("%s", e.msg), EXIT_ERROR)
                                                       : verify_one(db, st[i].station, NULL);
            rc = one > rc ? one : rc;
        }
        if (rc != EXIT_ERROR)
            fprintf(stderr, "%s: %d stations %s.\n", log_path(db), n,
                    rc ? "checked, not all verified" : "verified");
    } else {
        /* scoped, so the central back-end reads the one station's chains directly */
        const char *who = src.station ? src.station : n == 1 ? st[0].station : NULL;
        if (!src.station && who && log_scope(db, who, &e)) {
            cli_say("%s", e.msg);
            rc = EXIT_ERROR;
        } else {
            rc = verify_one(db, strcmp(log_kind(db), "sqlite") ? who : NULL,
                            key_arg ? key : NULL);
        }
    }
    log_stations_free(st);
    log_close(db);
    return rc;
}
