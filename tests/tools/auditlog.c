/* auditlog: fills an inspection log through core/log's own API, for the
 * audit's tests and benchmark.
 *
 *   auditlog DB N SEED [--evidence] [--station ID] [--recipe ID] [--budget-kib K]
 *            [--verify-every K]
 *
 * Appends N records with seeded verdicts (about 70% PASS, 22% FAIL, 8%
 * NO_VERDICT) and reasons drawn from a small set of (rule, class, zone),
 * then disposes about two thirds of the rejects and a few passes, with
 * comments that hold commas, quotes and line breaks.  With --evidence every
 * reject gets a 401x267 frame and an overlay (a gradient with the record's
 * number in its top row), so the report has thumbnails to show.  --budget-kib
 * K gives the log an evidence budget of K KiB, so retention purges (the sync
 * tests); --verify-every K appends a master-part verification after every K
 * records; --recipe names the records' recipe (default ostrel-cap38).
 * Appending to an existing log continues its chains.  Writes one
 * JSON line per record to stdout: seq, verdict, reasons, disp (a name from
 * log_disp_name, "none" when not disposed), comment.  Errors exit 3. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>

#include "core/judge.h"
#include "core/log.h"
#include "core/rng.h"
#include "toolarg.h"

static const struct {
    const char *rule, *cls, *zone;
} REASONS[] = {{"max_area", "scratch", NULL}, {"max_area", "scratch", "rim"},
               {"max_count", "pit", NULL},    {"max_total", "stain", "face"},
               {"max_area", "pit", "bore"}};
static const char *COMMENTS[] = {"", "looked at under the loupe", "burr, not a scratch, ok",
                                 "said \"fine\" twice", "line one\nline two", "a, b; c"};

static int fail(const struct err *e)
{
    fprintf(stderr, "auditlog: %s\n", e->msg);
    return 3;
}

static json_t *make_reasons(uint64_t *rng, int verdict)
{
    json_t *a = json_array();
    if (verdict == VERDICT_NONE) {
        json_array_append_new(a, json_pack("{s:s,s:s,s:f,s:f,s:s}", "rule", "too_dark", "class",
                                           "image", "measured", 20.0, "limit", 40.0, "unit",
                                           "level"));
        return a;
    }
    if (verdict != VERDICT_FAIL)
        return a;
    int n = 1 + (int)(rng_uniform(rng) * 2);
    for (int i = 0; i < n; i++) {
        /* skewed so the Pareto has a clear head */
        double u = rng_uniform(rng);
        int k = (int)(u * u * (double)(sizeof REASONS / sizeof REASONS[0]));
        json_t *x = json_pack("{s:s,s:s,s:f,s:f,s:s}", "rule", REASONS[k].rule, "class",
                              REASONS[k].cls, "measured", 1.0 + i, "limit", 0.6, "unit", "mm2");
        if (REASONS[k].zone)
            json_object_set_new(x, "zone", json_string(REASONS[k].zone));
        json_array_append_new(a, x);
    }
    return a;
}

static void paint(struct image *img, int64_t seq, int shade)
{
    for (int y = 0; y < img->h; y++)
        for (int x = 0; x < img->w; x++) {
            uint8_t *p = &img->px[((size_t)y * img->w + x) * 3];
            p[0] = (uint8_t)(x * 255 / img->w);
            p[1] = (uint8_t)(y * 255 / img->h);
            p[2] = (uint8_t)shade;
        }
    for (int b = 0; b < 16 && b < img->w; b++)
        img->px[(size_t)b * 3] = (seq >> b) & 1 ? 255 : 0;
}

int main(int argc, char **argv)
{
    int n, seed, evidence = 0, budget = 0, verify_every = 0;
    const char *station = "bench-1", *recipe = "ostrel-cap38";
    if (argc < 4 || parse_int(argv[2], &n) || n < 0 || parse_int(argv[3], &seed)) {
        fprintf(stderr, "usage: auditlog DB N SEED [--evidence] [--station ID] [--recipe ID]"
                        " [--budget-kib K] [--verify-every K]\n");
        return 2;
    }
    for (int i = 4; i < argc; i++) {
        if (!strcmp(argv[i], "--evidence"))
            evidence = 1;
        else if (!strcmp(argv[i], "--station") && i + 1 < argc)
            station = argv[++i];
        else if (!strcmp(argv[i], "--recipe") && i + 1 < argc)
            recipe = argv[++i];
        else if (!strcmp(argv[i], "--budget-kib") && i + 1 < argc && !parse_int(argv[i + 1], &budget))
            i++;
        else if (!strcmp(argv[i], "--verify-every") && i + 1 < argc &&
                 !parse_int(argv[i + 1], &verify_every))
            i++;
        else
            return 2;
    }
    struct err e;
    err_clear(&e);
    struct log_db *db;
    struct log_options opt;
    log_options_init(&opt);
    opt.evidence_budget = budget > 0 ? (uint64_t)budget << 10 : 0;
    if (log_open(argv[1], LOG_OPEN_WRITE, &opt, &db, &e))
        return fail(&e);
    struct image *frame = image_new(401, 267, 3, &e), *overlay = image_new(401, 267, 3, &e);
    if (!frame || !overlay)
        return fail(&e);
    uint64_t rng = (uint64_t)seed;
    int rc = 0;
    for (int i = 0; i < n && !rc; i++) {
        double u = rng_uniform(&rng);
        int verdict = u < 0.70 ? VERDICT_PASS : u < 0.92 ? VERDICT_FAIL : VERDICT_NONE;
        json_t *reasons = make_reasons(&rng, verdict);
        char *rj = json_dumps(reasons, JSON_COMPACT);
        struct log_entry en = {.station = station, .recipe_id = recipe,
                               .recipe_version = 1, .recipe_sha256 = "", .model_sha256 = "",
                               .scale_id = "0.05mm", .verdict = verdict, .reasons_json = rj,
                               .regions_json = "[]"};
        int64_t seq = 0;
        if (evidence && verdict != VERDICT_PASS) {
            paint(frame, i + 1, 60);
            paint(overlay, i + 1, 200);
            en.frame = frame;
            en.overlay = overlay;
        }
        if (log_append(db, &en, &seq, &e)) {
            rc = fail(&e);
        } else {
            /* two thirds of the rejects and one pass in twenty are audited */
            double a = rng_uniform(&rng);
            int disp = LOG_DISP_NONE;
            if ((verdict != VERDICT_PASS && a < 2.0 / 3.0) || (verdict == VERDICT_PASS && a < 0.05)) {
                double b = rng_uniform(&rng);
                disp = b < 0.55 ? LOG_DISP_CONFIRMED
                       : b < 0.80 ? LOG_DISP_FALSE_REJECT
                       : b < 0.92 ? LOG_DISP_REWORK
                                  : LOG_DISP_OTHER;
            }
            const char *comment = COMMENTS[i % (int)(sizeof COMMENTS / sizeof COMMENTS[0])];
            int64_t dseq;
            if (disp && log_dispose(db, seq, "auditor-7", disp, comment, &dseq, &e))
                rc = fail(&e);
            struct log_verification v = {.recipe_version = 1,
                                         .passed = i % 3 != 0,
                                         .masters_json = "[{\"master\":\"m1\",\"expect\":"
                                                         "\"PASS\",\"verdict\":\"PASS\","
                                                         "\"match\":true}]"};
            snprintf(v.station, sizeof v.station, "%s", station);
            snprintf(v.recipe_id, sizeof v.recipe_id, "%s", recipe);
            if (!rc && verify_every > 0 && (i + 1) % verify_every == 0 &&
                log_verification_append(db, &v, &e))
                rc = fail(&e);
            json_t *line = json_pack("{s:I,s:s,s:O,s:s,s:s}", "seq", (json_int_t)seq, "verdict",
                                     judge_verdict_name(verdict), "reasons", reasons, "disp",
                                     log_disp_name(disp), "comment", disp ? comment : "");
            json_dumpf(line, stdout, JSON_COMPACT);
            fputc('\n', stdout);
            json_decref(line);
        }
        free(rj);
        json_decref(reasons);
    }
    image_free(frame);
    image_free(overlay);
    log_close(db);
    return rc;
}
