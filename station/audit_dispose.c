/* station audit dispose SEQ --auditor ID --as D [--comment TEXT] */
#include <getopt.h>
#include <stdio.h>

#include "audit.h"
#include "cli.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station audit dispose SEQ --auditor ID --as D [--comment TEXT]\n"
               "                             [--log DB] [--station ID]\n\n"
               "Records an auditor's disposition of record SEQ in the log's disposition chain.\n"
               "The inspection record itself never changes; a later disposition of the same\n"
               "record supersedes an earlier one, and both stay in the log.  Dispositions are\n"
               "made in the station's own log, signed with its key; the central database\n"
               "receives them through station sync and refuses them here.\n\n"
               "  --auditor ID    who audited (required)\n"
               "  --as D          confirmed (the reject was right), false-reject (the part was\n"
               "                  good), rework, or other (say why in the comment)\n"
               "  --comment TEXT  free text\n\n"
               "One JSON line on stdout: {\"dseq\":N,\"seq\":SEQ,\"disposition\":D}.\n"
               "%s\n",
            CLI_CAUTION);
}

int audit_dispose(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {
        {"log", required_argument, NULL, 'l'},     {"station", required_argument, NULL, 's'},
        {"auditor", required_argument, NULL, 'a'}, {"as", required_argument, NULL, 'd'},
        {"comment", required_argument, NULL, 'c'}, {0, 0, 0, 0}};
    struct audit_source src = {0};
    const char *auditor = NULL, *comment = NULL;
    int disp = -1, c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 'l': src.log = optarg; break;
        case 's': src.station = optarg; break;
        case 'a': auditor = optarg; break;
        case 'c': comment = optarg; break;
        case 'd':
            disp = log_disp_parse(optarg);
            if (disp <= LOG_DISP_NONE) {
                cli_say("--as: '%s' is not confirmed, false-reject, rework or other", optarg);
                return EXIT_USAGE;
            }
            break;
        default: usage(stderr); return EXIT_USAGE;
        }
    }
    long long seq = optind + 1 == argc ? audit_parse_seq(argv[optind]) : -1;
    if (seq < 0 || !auditor || !*auditor || disp < 0) {
        if (seq >= 0)
            cli_say("dispose needs --auditor ID and --as D");
        usage(stderr);
        return EXIT_USAGE;
    }
    struct log_db *db = NULL;
    if (audit_open_source(&src, LOG_OPEN_WRITE, &db))
        return EXIT_ERROR;
    struct err e;
    err_clear(&e);
    int64_t dseq = 0;
    int rc = log_dispose(db, seq, auditor, disp, comment, &dseq, &e);
    if (rc) {
        cli_say("%s", e.msg);
    } else {
        cli_emit(json_pack("{s:I,s:I,s:s}", "dseq", (json_int_t)dseq, "seq", (json_int_t)seq,
                             "disposition", log_disp_name(disp)));
        fprintf(stderr, "record %lld: %s by %s (disposition %lld).\n", seq, log_disp_name(disp),
                auditor, (long long)dseq);
    }
    log_close(db);
    return rc ? EXIT_ERROR : 0;
}
