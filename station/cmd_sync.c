/* station sync: forwards the station's local log to the central database
 * (core/logsync.h). */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>

#include "audit.h"
#include "cli.h"
#include "core/logsync.h"

static void usage(FILE *f)
{
    fprintf(f,
            "usage: station sync --to CONNINFO [--log DB] [--station ID] [--line LINE]\n"
            "                    [--evidence-to DIR] [--batch N] [--quick] [--json]\n\n"
            "Forwards what the central PostgreSQL database does not hold yet of this station's\n"
            "log: records with their evidence rows, evidence purges, dispositions and\n"
            "master-part verifications, in order, %d records per transaction.  Safe to repeat\n"
            "and to cut: a retry continues from what the server holds, never doubling or\n"
            "skipping a record.  First every link the server holds is compared with the local\n"
            "log, so a record altered anywhere after it was forwarded is found; the server\n"
            "refuses a record whose chain link or hash differs from its copy, and says which.\n\n"
            "  --to CONNINFO     a libpq URI (postgresql://HOST/DB) or keyword=value string\n"
            "                    (service=NAME); never with a password in it: use PGPASSFILE\n"
            "                    or ~/.pgpass, a service file (PGSERVICEFILE) or PGPASSWORD\n"
            "  --log DB          the local log, a file (default: the station's, see --station)\n"
            "  --station ID      the id the station is held under centrally (default: the\n"
            "                    station of the log's latest record); without --log it also\n"
            "                    names the station's default log\n"
            "  --line LINE       the production line the station belongs to\n"
            "  --evidence-to DIR also copy evidence files to DIR/STATION/NAME (a shared folder)\n"
            "  --batch N         records per transaction, 1..%d (default %d)\n"
            "  --quick           skip the comparison of the held links (only the last one\n"
            "                    of each chain is checked): for very large logs\n"
            "  --json            one JSON line on stdout\n\n"
            "Exit status: 0 forwarded (or nothing to do), 3 unreachable or the local log\n"
            "unreadable, 4 usage, 5 refused: a link differs from the central copy or from its\n"
            "own hash (the message names station and number).\n",
            LOGSYNC_BATCH_DEFAULT, LOGSYNC_BATCH_MAX, LOGSYNC_BATCH_DEFAULT);
}

static json_t *chain_json(int64_t local, int64_t held, int64_t sent)
{
    return json_pack("{s:I,s:I,s:I,s:I}", "local", (json_int_t)local, "held_before",
                     (json_int_t)held, "forwarded", (json_int_t)sent, "behind",
                     (json_int_t)(local - held));
}

static void say_chain(const char *station, const char *what, int64_t local, int64_t held,
                      int64_t sent)
{
    fprintf(stderr, "%s: %-13s forwarded %lld; the central copy was %lld behind (held %lld of %lld)\n",
            station, what, (long long)sent, (long long)(local - held), (long long)held,
            (long long)local);
}

int cmd_sync(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {{"to", required_argument, NULL, 't'},
                                         {"log", required_argument, NULL, 'l'},
                                         {"station", required_argument, NULL, 's'},
                                         {"line", required_argument, NULL, 'L'},
                                         {"evidence-to", required_argument, NULL, 'E'},
                                         {"batch", required_argument, NULL, 'b'},
                                         {"quick", no_argument, NULL, 'q'},
                                         {"json", no_argument, NULL, 'j'},
                                         {0, 0, 0, 0}};
    struct logsync_options o;
    logsync_options_init(&o);
    const char *to = NULL, *db_path = NULL;
    int json = 0, c;
    double batch;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 't': to = optarg; break;
        case 'l': db_path = optarg; break;
        case 's': o.station = optarg; break;
        case 'L': o.line = optarg; break;
        case 'E': o.evidence_to = optarg; break;
        case 'b':
            if (cli_number("--batch", optarg, &batch, 0) || batch != (int)batch ||
                batch > LOGSYNC_BATCH_MAX) {
                cli_say("--batch takes a whole number of records, 1..%d", LOGSYNC_BATCH_MAX);
                return EXIT_USAGE;
            }
            o.batch = (int)batch;
            break;
        case 'q': o.recheck = 0; break;
        case 'j': json = 1; break;
        default: usage(stderr); return EXIT_USAGE;
        }
    }
    if (optind != argc || !to) {
        if (!to)
            cli_say("sync needs --to CONNINFO, the central database");
        usage(stderr);
        return EXIT_USAGE;
    }
    struct err e;
    err_clear(&e);
    if (logpg_conninfo_check(to, &e)) {
        cli_say("--to: %s", e.msg);
        return EXIT_USAGE;
    }
    if (db_path && logpg_is_conninfo(db_path)) {
        cli_say("--log %s: sync reads the station's own log, a file; the central database is"
                " --to", db_path);
        return EXIT_USAGE;
    }
    if (o.station && !log_station_id_ok(o.station)) {
        cli_say("--station '%s': a station id is 1..%d of letters, digits, . _ -", o.station,
                LOG_ID_MAX - 1);
        return EXIT_USAGE;
    }
    struct log_db *db = NULL;
    if (audit_open_log(db_path, o.station, LOG_OPEN_READ, &db))
        return EXIT_ERROR;
    struct logpg *pg = NULL;
    struct logsync_result r = {0};
    double t0 = cli_now_ms();
    int rc = logpg_connect(to, &pg, &e) || logsync_run(db, pg, &o, &r, &e);
    double s = (cli_now_ms() - t0) / 1000.0;
    if (rc) {
        cli_say("%s", e.msg);
        if (pg && r.sent_records)
            cli_say("%lld records were forwarded before that; the next sync continues after them",
                    (long long)r.sent_records);
    } else if (!r.station[0]) {
        fprintf(stderr, "%s: no records yet, nothing to forward\n", log_path(db));
    } else {
        const char *st = r.station;
        fprintf(stderr, "%s: forwarding to %s\n", st, logpg_name(pg));
        say_chain(st, "records", r.local_seq, r.held_seq, r.sent_records);
        say_chain(st, "purges", r.local_purges, r.held_purges, r.sent_purges);
        say_chain(st, "dispositions", r.local_dseq, r.held_dseq, r.sent_dispositions);
        say_chain(st, "verifications", r.local_vseq, r.held_vseq, r.sent_verifications);
        if (o.recheck)
            fprintf(stderr, "%s: recheck: %lld held links match the local log\n", st,
                    (long long)r.rechecked);
        if (o.evidence_to)
            fprintf(stderr, "%s: evidence files copied to %s/%s: %lld, not copied: %lld%s%s%s\n",
                    st, o.evidence_to, st, (long long)r.copied, (long long)r.copy_failed,
                    r.copy_failed ? " (first: " : "", r.copy_failed ? r.copy_problem : "",
                    r.copy_failed ? ")" : "");
        fprintf(stderr, "%s: %d transactions in %.2f s (%.0f records/s)\n", st, r.batches, s,
                s > 0 ? (double)r.sent_records / s : 0.0);
        if (r.copy_failed)
            fprintf(stderr, "%s: evidence not copied: the records are forwarded all the same\n",
                    st);
        if (json)
            cli_emit(json_pack("{s:s,s:s,s:o,s:o,s:o,s:o,s:I,s:I,s:I,s:I,s:i,s:f,s:f}", "station",
                               st, "to", logpg_name(pg),
                               "records", chain_json(r.local_seq, r.held_seq, r.sent_records),
                               "purges", chain_json(r.local_purges, r.held_purges, r.sent_purges),
                               "dispositions",
                               chain_json(r.local_dseq, r.held_dseq, r.sent_dispositions),
                               "verifications",
                               chain_json(r.local_vseq, r.held_vseq, r.sent_verifications),
                               "evidence_rows", (json_int_t)r.sent_evidence, "evidence_copied",
                               (json_int_t)r.copied, "evidence_not_copied",
                               (json_int_t)r.copy_failed, "rechecked", (json_int_t)r.rechecked,
                               "batches", r.batches, "seconds", s, "records_per_s",
                               s > 0 ? (double)r.sent_records / s : 0.0));
    }
    logpg_close(pg);
    log_close(db);
    return !rc ? 0 : e.code == ST_EFORMAT ? EXIT_REFUSED : EXIT_ERROR;
}
