/* station audit verify */
#include <getopt.h>
#include <stdio.h>

#include "audit.h"
#include "cli.h"
#include "core/logverify.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station audit verify [--log DB] [--station ID] [--public-key HEX|FILE]\n\n"
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
               "Exit status: 0 everything verifies, 1 a link is broken, 3 the log cannot be read.\n"
               "%s\n",
            CLI_CAUTION);
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
                                         {0, 0, 0, 0}};
    const char *db_path = NULL, *station = NULL, *key_arg = NULL;
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 'l': db_path = optarg; break;
        case 's': station = optarg; break;
        case 'k': key_arg = optarg; break;
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
    if (audit_open_log(db_path, station, LOG_OPEN_READ, &db))
        return EXIT_ERROR;
    struct log_verify_result v;
    double t0 = cli_now_ms();
    int rc = log_verify_key(db, key_arg ? key : NULL, &v, &e);
    double ms = cli_now_ms() - t0;
    if (rc) {
        cli_say("%s", e.msg);
        log_close(db);
        return EXIT_ERROR;
    }
    cli_emit(json_pack("{s:b,s:s?,s:b,s:I,s:I,s:I,s:I,s:I,s:I,s:f,s:s?,s:I,s:b,s:s?}", "ok",
                         v.ok, "public_key", v.public_key[0] ? v.public_key : NULL, "key_given",
                         v.key_given, "signed", (json_int_t)v.signed_links, "unsigned",
                         (json_int_t)v.unsigned_links, "records",
                         (json_int_t)v.records, "dispositions", (json_int_t)v.dispositions,
                         "verifications", (json_int_t)v.verifications,
                         "evidence_files", (json_int_t)v.evidence_files, "ms", ms, "chain",
                         v.ok ? NULL : v.chain, "seq", (json_int_t)v.seq, "torn", v.torn, "what",
                         v.ok ? NULL : v.what));
    if (v.public_key[0])
        fprintf(stderr, "%s: signatures checked against public key %s (%s)\n", log_path(db),
                v.public_key, v.key_given ? "given" : "as stored in the log");
    if (v.unsigned_links)
        fprintf(stderr, "%s: %lld links unsigned (before schema %d)\n", log_path(db),
                (long long)v.unsigned_links, LOG_SIGNED_SINCE);
    if (v.ok)
        fprintf(stderr, "%s: verified %lld records, %lld evidence files, %lld dispositions, "
                        "%lld master-part verifications, %lld signatures.\n",
                log_path(db), (long long)v.records, (long long)v.evidence_files,
                (long long)v.dispositions, (long long)v.verifications,
                (long long)v.signed_links);
    else
        fprintf(stderr, "%s: BROKEN at %s %lld: %s\n  %s\n", log_path(db), v.chain,
                (long long)v.seq, v.what,
                v.torn ? "the break is at the last link only: an interrupted last write (or a "
                         "change to that last entry)"
                       : "intact links follow the break: damage or tampering in the middle");
    log_close(db);
    return v.ok ? 0 : EXIT_ANY_FAIL;
}
