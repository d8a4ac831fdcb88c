#include "audit_verbs.h"

#include <errno.h>
#include <getopt.h>
#include <stdlib.h>
#include <string.h>

#include "audit.h"
#include "audit_compare.h"
#include "audit_csv.h"
#include "audit_report.h"
#include "audit_stats.h"
#include "cli.h"
#include "core/judge.h"
#include "core/pngio.h"

#define DEFAULT_SHIFTS "6,14,22"
#define DEFAULT_THUMBS 48

enum { V_STATS = 1, V_REPORT = 2, V_EXPORT = 4 };

struct verb_opts {
    const char *log, *from, *to, *station, *recipe, *line, *evidence, *out;
    struct qstats_shifts shifts;
    int by_shift, json, thumbs;
};

static const char FILTER_HELP[] =
    "  --log DB          the station's log (default: the default station's), or the\n"
    "                    central database (postgresql://..., service=NAME) of many\n"
    "  --from DATE       first UTC time included, an ISO 8601 prefix (2026-12-01)\n"
    "  --to DATE         first UTC time excluded\n"
    "  --station ID      records of this station only (and its default log)\n"
    "  --line L          records of the stations on this production line (central)\n"
    "  --recipe ID       records of this recipe only\n";
static const char EVIDENCE_HELP[] =
    "  --evidence DIR    evidence folder (central: where station sync --evidence-to\n"
    "                    copied it, DIR/STATION/...)\n";
static const char COUNT_HELP[] =
    "  --shifts H,H,...  shift start hours, ascending (default " DEFAULT_SHIFTS "); hours\n"
    "                    before the first belong to the previous day's last shift\n"
    "  --utc-offset MIN  count days and shifts on a clock MIN minutes ahead of UTC\n"
    "  --by day|shift    p-chart subgroups (default day)\n";

static void usage(FILE *f, int verb)
{
    if (verb == V_STATS)
        fprintf(f, "usage: station audit stats [OPTIONS]\n\n"
                   "Counts per verdict, day and shift; the reject rate on a p-chart; the\n"
                   "Pareto of reasons; the false-reject rate among audited rejects with its\n"
                   "exact 95%% interval; Cohen's kappa between station and auditor.  Text on\n"
                   "stderr, or one JSON object on stdout with --json.  A log of several\n"
                   "stations (the central database) also gets each station's counts and reject\n"
                   "rate side by side with the total (JSON \"stations\").\n\n%s%s"
                   "  --json            the figures as one JSON line on stdout\n",
                FILTER_HELP, COUNT_HELP);
    else if (verb == V_REPORT)
        fprintf(f, "usage: station audit report --out FILE.html [OPTIONS]\n\n"
                   "One self-contained HTML page: the figures of `audit stats`, the p-chart\n"
                   "and Pareto charts, the stations side by side when there are several, and\n"
                   "thumbnails of the newest rejects' overlays.\n\n%s%s%s"
                   "  --thumbs N        rejects shown as thumbnails (default %d, 0 none)\n",
                FILTER_HELP, EVIDENCE_HELP, COUNT_HELP, DEFAULT_THUMBS);
    else
        fprintf(f, "usage: station audit export --out FILE.csv [OPTIONS]\n\n"
                   "The selected records as CSV (RFC 4180), one row each: " AUDIT_CSV_COLUMNS
                   ".\n--out - writes to stdout.\n\n%s",
                FILTER_HELP);
    fprintf(f, "\n%s\n", CLI_CAUTION);
}

static int parse_int_arg(const char *s, int lo, int hi, int *v)
{
    char *end;
    long x = strtol(s, &end, 10);
    if (*s == '\0' || *end != '\0' || x < lo || x > hi)
        return -1;
    *v = (int)x;
    return 0;
}

/* 0 on success, else the exit status to return. */
static int parse_opts(int argc, char **argv, int verb, struct verb_opts *o)
{
    static const struct option opts[] = {
        {"log", required_argument, NULL, 'l'},     {"from", required_argument, NULL, 'f'},
        {"to", required_argument, NULL, 't'},      {"station", required_argument, NULL, 's'},
        {"recipe", required_argument, NULL, 'r'},  {"out", required_argument, NULL, 'o'},
        {"shifts", required_argument, NULL, 'S'},  {"utc-offset", required_argument, NULL, 'u'},
        {"by", required_argument, NULL, 'b'},      {"json", no_argument, NULL, 'j'},
        {"thumbs", required_argument, NULL, 'n'},  {"line", required_argument, NULL, 'L'},
        {"evidence", required_argument, NULL, 'e'}, {0, 0, 0, 0}};
    memset(o, 0, sizeof *o);
    o->thumbs = DEFAULT_THUMBS;
    const char *shifts = DEFAULT_SHIFTS;
    int c, offset_min = 0, counting = verb & (V_STATS | V_REPORT);
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        int ok = 1;
        switch (c) {
        case 'l': o->log = optarg; break;
        case 'f': o->from = optarg; break;
        case 't': o->to = optarg; break;
        case 's': o->station = optarg; break;
        case 'r': o->recipe = optarg; break;
        case 'L': o->line = optarg; break;
        case 'e': o->evidence = optarg; ok = verb == V_REPORT; break;
        case 'o': o->out = optarg; ok = verb != V_STATS; break;
        case 'S': shifts = optarg; ok = counting; break;
        case 'u': ok = counting && !parse_int_arg(optarg, -1440, 1440, &offset_min); break;
        case 'b':
            ok = counting && (!strcmp(optarg, "day") || !strcmp(optarg, "shift"));
            o->by_shift = !strcmp(optarg, "shift");
            break;
        case 'j': o->json = 1; ok = verb == V_STATS; break;
        case 'n': ok = verb == V_REPORT && !parse_int_arg(optarg, 0, 10000, &o->thumbs); break;
        default: ok = 0;
        }
        if (!ok) {
            usage(stderr, verb);
            return EXIT_USAGE;
        }
    }
    if (optind != argc || (verb != V_STATS && !o->out)) {
        usage(stderr, verb);
        return EXIT_USAGE;
    }
    struct err e;
    if (qstats_shifts_parse(shifts, &o->shifts, &e)) {
        cli_say("--shifts: %s", e.msg);
        return EXIT_USAGE;
    }
    o->shifts.offset_min = offset_min;
    return 0;
}

/* Opens the log for reading (audit_open_log prints why it cannot) and
 * starts the filtered walk; 0 or an exit status. */
static int open_walk(const struct verb_opts *o, struct log_db **db, struct log_iter **it)
{
    struct audit_source src = {.log = o->log, .station = o->station, .evidence = o->evidence};
    if (audit_open_source(&src, LOG_OPEN_READ, db))
        return EXIT_ERROR;
    struct log_filter f;
    log_filter_init(&f);
    f.from_utc = o->from;
    f.to_utc = o->to;
    f.station = o->station;
    f.recipe_id = o->recipe;
    f.line = o->line;
    struct err e;
    err_clear(&e);
    if (log_iter_new(*db, &f, it, &e)) {
        cli_say("%s", e.msg);
        return EXIT_ERROR;
    }
    return 0;
}

/* The newest rejects seen so far, by time (a walk of the central database
 * goes station by station, not in time order): when full, a newer record
 * takes the place of the oldest kept.  Contents are swapped in from the
 * walk's record (no copies of the heap strings). */
struct ring {
    struct log_record *rec;
    size_t cap, n;
};

/* Time order; records of the same millisecond by sequence number. */
static int newer(const struct log_record *a, const struct log_record *b)
{
    int c = strcmp(a->utc, b->utc);
    return c ? c > 0 : a->seq > b->seq;
}

static void ring_take(struct ring *g, struct log_record *r)
{
    size_t at = g->n, i;
    if (g->n == g->cap) {
        for (at = 0, i = 1; i < g->n; i++)
            if (newer(&g->rec[at], &g->rec[i]))
                at = i;
        if (!newer(r, &g->rec[at]))
            return;
    } else {
        g->n++;
    }
    struct log_record tmp = g->rec[at];
    g->rec[at] = *r;
    *r = tmp;
}

static int by_newest(const void *a, const void *b)
{
    return newer(b, a) - newer(a, b);
}

/* Newest first. */
static void ring_sort(struct ring *g)
{
    qsort(g->rec, g->n, sizeof *g->rec, by_newest);
}

static int walk(struct log_iter *it, struct audit_stats *st, struct audit_compare *cmp,
                struct ring *g, struct err *e)
{
    struct log_record r;
    log_record_init(&r);
    int have = 1, rc = ST_OK;
    while (rc == ST_OK && (rc = log_iter_next(it, &r, &have, e)) == ST_OK && have) {
        rc = audit_stats_add(st, &r, e);
        if (rc == ST_OK)
            rc = audit_compare_add(cmp, &r, e);
        if (rc == ST_OK && g && g->cap && r.verdict != VERDICT_PASS)
            ring_take(g, &r);
    }
    log_record_clear(&r);
    return rc;
}

/* Each station's public key beside its figures, so a reader can check a
 * copy of its log (the report prints them). */
static void add_keys(struct log_db *db, json_t *stations)
{
    struct log_station *st;
    int n;
    struct err e;
    if (log_stations_get(db, &st, &n, &e))
        return;
    size_t i;
    json_t *o;
    json_array_foreach(stations, i, o)
        for (int k = 0; k < n; k++)
            if (st[k].public_key[0] &&
                !strcmp(st[k].station, json_string_value(json_object_get(o, "station"))))
                json_object_set_new(o, "public_key", json_string(st[k].public_key));
    log_stations_free(st);
}

/* Walks the selected records into the figures, the total and each
 * station's ("stations"); 0 or an exit status.  g, when not NULL, keeps the
 * newest rejects. */
static int gather(const struct verb_opts *o, struct log_db **db, struct ring *g, json_t **js)
{
    struct log_iter *it = NULL;
    struct audit_stats st;
    struct audit_compare cmp;
    struct err e;
    err_clear(&e);
    int rc = open_walk(o, db, &it);
    if (rc)
        return rc;
    audit_compare_init(&cmp, &o->shifts);
    json_t *per = NULL;
    if (audit_stats_init(&st, &o->shifts, &e) || walk(it, &st, &cmp, g, &e) ||
        !(*js = audit_stats_json(&st, o->by_shift)) || !(per = audit_compare_json(&cmp)) ||
        json_object_set_new(*js, "stations", per)) {
        cli_say("%s", e.msg[0] ? e.msg : "audit: out of memory");
        rc = EXIT_ERROR;
    } else {
        add_keys(*db, per);
    }
    audit_compare_clear(&cmp);
    audit_stats_clear(&st);
    log_iter_free(it);
    return rc;
}

int audit_cmd_stats(int argc, char **argv)
{
    struct verb_opts o;
    if (cli_wants_help(argc, argv)) {
        usage(stdout, V_STATS);
        return 0;
    }
    int rc = parse_opts(argc, argv, V_STATS, &o);
    if (rc)
        return rc;
    struct log_db *db = NULL;
    json_t *js = NULL;
    rc = gather(&o, &db, NULL, &js);
    log_close(db);
    if (rc)
        return rc;
    if (o.json) {
        cli_emit(js);
    } else {
        audit_compare_print(stderr, json_object_get(js, "stations"), js);
        audit_stats_print(stderr, js);
        json_decref(js);
    }
    return 0;
}

/* Writes through write_fn into a temporary file beside out and renames it
 * into place, so a failed run never leaves half a file under the name. */
static int write_atomic(const char *out, int (*write_fn)(FILE *, void *, struct err *),
                        void *ctx, struct err *e)
{
    if (!strcmp(out, "-"))
        return write_fn(stdout, ctx, e);
    size_t len = strlen(out) + 8;
    char *tmp = malloc(len);
    if (!tmp)
        return err_set(e, ST_ENOMEM, "%s: out of memory", out);
    snprintf(tmp, len, "%s.part", out);
    FILE *f = fopen(tmp, "wb");
    int rc;
    if (!f) {
        rc = err_set(e, ST_EIO, "%s: cannot create: %s", tmp, strerror(errno));
    } else {
        rc = write_fn(f, ctx, e);
        if (fclose(f) != 0 && rc == ST_OK)
            rc = err_set(e, ST_EIO, "%s: cannot write: %s", tmp, strerror(errno));
        if (rc == ST_OK && rename(tmp, out) != 0)
            rc = err_set(e, ST_EIO, "%s: cannot rename into place: %s", out, strerror(errno));
        if (rc)
            remove(tmp);
    }
    free(tmp);
    return rc;
}

static int write_csv(FILE *f, void *ctx, struct err *e)
{
    struct log_iter *it = ctx;
    struct log_record r;
    log_record_init(&r);
    int have = 1, rc;
    audit_csv_header(f);
    while ((rc = log_iter_next(it, &r, &have, e)) == ST_OK && have)
        audit_csv_row(f, &r);
    log_record_clear(&r);
    if (rc == ST_OK && ferror(f))
        rc = err_set(e, ST_EIO, "export: write failed");
    return rc;
}

int audit_cmd_export(int argc, char **argv)
{
    struct verb_opts o;
    if (cli_wants_help(argc, argv)) {
        usage(stdout, V_EXPORT);
        return 0;
    }
    int rc = parse_opts(argc, argv, V_EXPORT, &o);
    if (rc)
        return rc;
    struct log_db *db = NULL;
    struct log_iter *it = NULL;
    rc = open_walk(&o, &db, &it);
    struct err e;
    err_clear(&e);
    if (!rc && write_atomic(o.out, write_csv, it, &e)) {
        cli_say("%s", e.msg);
        rc = EXIT_ERROR;
    }
    log_iter_free(it);
    log_close(db);
    return rc;
}

struct report_ctx {
    const char *source;
    const json_t *stats;
    const struct audit_thumb *thumbs;
    size_t n;
};

static int write_html(FILE *f, void *ctx, struct err *e)
{
    const struct report_ctx *c = ctx;
    return audit_report_html(f, c->source, c->stats, c->thumbs, c->n, e);
}

/* The thumbnail of a reject's overlay; a missing, purged or unreadable file
 * is shown as a note rather than failing the report. */
static void load_thumb(struct log_db *db, const struct log_record *r, struct audit_thumb *t,
                       struct image **owned)
{
    t->rec = r;
    t->img = NULL;
    t->note = "no overlay evidence";
    *owned = NULL;
    for (int i = 0; i < r->nevidence; i++) {
        if (strcmp(r->ev[i].kind, "overlay") != 0)
            continue;
        if (r->ev[i].purged) {
            t->note = "evidence removed by retention";
            return;
        }
        char path[4096];
        struct image *full = NULL;
        struct err e;
        if (!log_evidence_dir(db, r, path, sizeof path)) {
            t->note = "evidence not available here (--evidence DIR)";
            return;
        }
        if (log_record_evidence_path(db, r, r->ev[i].name, path, sizeof path, &e) ||
            pngio_load_rgb(path, &full, &e)) {
            t->note = "overlay file missing or unreadable (run audit verify)";
            return;
        }
        *owned = audit_thumb_scale(full, AUDIT_THUMB_SIDE, &e);
        image_free(full);
        t->img = *owned;
        if (!t->img)
            t->note = "overlay too large to show";
        return;
    }
}

int audit_cmd_report(int argc, char **argv)
{
    struct verb_opts o;
    if (cli_wants_help(argc, argv)) {
        usage(stdout, V_REPORT);
        return 0;
    }
    int rc = parse_opts(argc, argv, V_REPORT, &o);
    if (rc)
        return rc;
    struct err e;
    err_clear(&e);
    struct log_db *db = NULL;
    json_t *js = NULL;
    size_t cap = (size_t)o.thumbs;
    struct ring g = {calloc(cap + 1, sizeof(struct log_record)), cap, 0};
    struct audit_thumb *thumbs = calloc(cap + 1, sizeof *thumbs);
    struct image **imgs = calloc(cap + 1, sizeof *imgs);
    if (!g.rec || !thumbs || !imgs) {
        cli_say("audit report: out of memory");
        rc = EXIT_ERROR;
        goto done;
    }
    for (size_t i = 0; i < cap; i++)
        log_record_init(&g.rec[i]);
    if ((rc = gather(&o, &db, &g, &js)) != 0)
        goto done;
    ring_sort(&g);
    for (size_t i = 0; i < g.n; i++)
        load_thumb(db, &g.rec[i], &thumbs[i], &imgs[i]);
    /* the key the log is signed with, so a reader can check a copy of it */
    struct log_signing sg;
    if (!log_signing_get(db, &sg, &e) && sg.present)
        json_object_set_new(js, "public_key", json_string(sg.public_key));
    /* the page names its selection, so a printed copy says what it covers */
    char source[1024];
    snprintf(source, sizeof source, "%s%s%s%s%s%s%s%s%s%s%s", log_path(db),
             o.from ? ", from " : "", o.from ? o.from : "", o.to ? ", before " : "",
             o.to ? o.to : "", o.station ? ", station " : "", o.station ? o.station : "",
             o.line ? ", line " : "", o.line ? o.line : "", o.recipe ? ", recipe " : "",
             o.recipe ? o.recipe : "");
    struct report_ctx c = {source, js, thumbs, g.n};
    if (write_atomic(o.out, write_html, &c, &e)) {
        cli_say("%s", e.msg);
        rc = EXIT_ERROR;
        goto done;
    }
    cli_say("wrote %s (%zu reject thumbnails)", o.out, g.n);
done:
    for (size_t i = 0; g.rec && imgs && i < cap; i++) {
        log_record_clear(&g.rec[i]);
        image_free(imgs[i]);
    }
    free(g.rec);
    free(thumbs);
    free(imgs);
    json_decref(js);
    log_close(db);
    return rc;
}
