#include "audit_view.h"

#include <getopt.h>
#include <stdio.h>
#include <string.h>

#include "audit.h"
#include "cli.h"
#include "core/judge.h"
#include "core/pngio.h"
#include "viewer.h"

static void view_usage(FILE *f)
{
    fprintf(f, "usage: station audit view SEQ [--log DB] [--station ID] [--mode side|frame|overlay]\n"
               "                         [--evidence DIR] [--screenshot FILE.png]\n\n"
               "Shows record SEQ's evidence in a window: the original frame and the overlay\n"
               "side by side.  Keys: Tab or Space cycles side by side, frame, overlay; 1, 2, 3\n"
               "choose; q or Escape quits.  --screenshot renders once into FILE.png and exits\n"
               "(works without a display under SDL_VIDEODRIVER=dummy).  `audit verify` checks the\n"
               "files against their hashes; the viewer only shows them.  On the central\n"
               "database --station names the station when several are held and --evidence DIR\n"
               "is where station sync --evidence-to copied the files.\n\n%s\n",
            CLI_CAUTION);
}

/* Loads the record's frame and overlay; *overlay stays NULL when the
 * record kept only a frame.  0 or an exit status (the reason printed). */
static int load_evidence(struct log_db *db, const struct log_record *r, struct image **frame,
                         struct image **overlay)
{
    struct err e;
    err_clear(&e);
    for (int i = 0; i < r->nevidence; i++) {
        int is_frame = !strcmp(r->ev[i].kind, "frame");
        struct image **dst = is_frame ? frame : overlay;
        char path[4096];
        if (r->ev[i].purged) {
            cli_say("record %lld: its %s was removed by retention", (long long)r->seq,
                    r->ev[i].kind);
            return EXIT_ERROR;
        }
        if (log_record_evidence_path(db, r, r->ev[i].name, path, sizeof path, &e) ||
            pngio_load_rgb(path, dst, &e)) {
            cli_say("%s", e.msg);
            return EXIT_ERROR;
        }
    }
    if (!*frame) {
        cli_say("record %lld has no evidence to show (a PASS keeps none unless the recipe asks)",
                (long long)r->seq);
        return EXIT_ERROR;
    }
    return 0;
}

int audit_view_record(struct log_db *db, const struct log_record *r, int mode,
                      const char *screenshot)
{
    struct image *frame = NULL, *overlay = NULL;
    struct err e;
    err_clear(&e);
    int rc = load_evidence(db, r, &frame, &overlay);
    if (rc == 0) {
        char title[160];
        snprintf(title, sizeof title, "station: record %lld, %s, %s", (long long)r->seq,
                 judge_verdict_name(r->verdict), r->utc);
        if (viewer_run(title, frame, overlay, mode, screenshot, &e)) {
            cli_say("%s", e.msg);
            rc = EXIT_ERROR;
        }
    }
    image_free(frame);
    image_free(overlay);
    return rc;
}

int audit_cmd_view(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        view_usage(stdout);
        return 0;
    }
    static const struct option opts[] = {{"log", required_argument, NULL, 'l'},
                                         {"station", required_argument, NULL, 's'},
                                         {"mode", required_argument, NULL, 'm'},
                                         {"screenshot", required_argument, NULL, 'p'},
                                         {"evidence", required_argument, NULL, 'e'},
                                         {0, 0, 0, 0}};
    static const char *modes[VIEWER_NMODES] = {"side", "frame", "overlay"};
    struct audit_source src = {.scope = 1};
    const char *shot = NULL;
    int c, mode = -1;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        if (c == 'l')
            src.log = optarg;
        else if (c == 's')
            src.station = optarg;
        else if (c == 'e')
            src.evidence = optarg;
        else if (c == 'p')
            shot = optarg;
        else if (c == 'm')
            for (mode = VIEWER_NMODES - 1; mode >= 0 && strcmp(optarg, modes[mode]); mode--)
                ;
        if (c == '?' || (c == 'm' && mode < 0)) {
            view_usage(stderr);
            return EXIT_USAGE;
        }
    }
    long long seq = optind + 1 == argc ? audit_parse_seq(argv[optind]) : -1;
    if (seq < 1) {
        view_usage(stderr);
        return EXIT_USAGE;
    }
    struct log_db *db = NULL;
    if (audit_open_source(&src, LOG_OPEN_READ, &db))
        return EXIT_ERROR;
    struct log_record r;
    log_record_init(&r);
    struct err e;
    err_clear(&e);
    int rc = 0;
    if (log_get(db, seq, &r, &e)) {
        cli_say("%s", e.msg);
        rc = EXIT_ERROR;
    } else {
        rc = audit_view_record(db, &r, mode < 0 ? VIEWER_SIDE : mode, shot);
    }
    log_record_clear(&r);
    log_close(db);
    return rc;
}
