/* station demo: the whole job on the simulated bench, end to end.
 *
 * Renders a training set and two test sets (nominal shift and a shifted
 * batch: dimmer light, more noise, softer focus), trains the demo recipe,
 * evaluates both test sets, inspects every test part and compares each
 * verdict with the verdict its ground truth earns under the same rules. */
#include <errno.h>
#include <getopt.h>
#include <libgen.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "calib/disc.h"
#include "cli.h"
#include "core/pngio.h"
#include "core/rng.h"
#include "evaluate.h"
#include "logbook.h"
#include "report.h"
#include "simbench.h"
#include "train.h"
#include "verify.h"

#define DEMO_RECIPE "ostrel-cap38.ini"
#define CAP_DIAMETER_MM 38.0

static void usage(FILE *f)
{
    fprintf(f, "usage: station demo [--out DIR] [--seed N] [--train N] [--test N] [--shifted N]\n"
               "                    [--recipe FILE] [--log DB] [--station ID]\n\n"
               "Runs the whole job on the simulated bench: renders Ostrel cap 38 parts (an\n"
               "invented product) with ground truth, trains the demo recipe, evaluates it,\n"
               "inspects the test parts and compares every verdict with the truth.\n\n"
               "  --out DIR      where everything goes (default station-demo)\n"
               "  --seed N       series seed (default 1); the same seed gives the same parts\n"
               "  --train N      training parts (default 60)\n"
               "  --test N       nominal test parts (default 30)\n"
               "  --shifted N    test parts under the next shift's conditions (default 20)\n"
               "  --recipe FILE  the demo recipe (default: recipes/%s next to the program)\n"
               "  --log DB       the inspection log the test parts are recorded in\n"
               "                 (default DIR/log/station.db, evidence in DIR/log/evidence/)\n"
               "  --station ID   station id of those records (default demo-bench)\n\n"
               "%s\n",
            DEMO_RECIPE, CLI_CAUTION);
}

static int make_dir(const char *path, struct err *e)
{
    if (mkdir(path, 0777) != 0 && errno != EEXIST)
        return err_set(e, ST_EIO, "%s: cannot create folder: %s", path, strerror(errno));
    return ST_OK;
}

static int make_dataset_dirs(const char *dir, struct err *e)
{
    char p[PATH_MAX];
    int rc = make_dir(dir, e);
    snprintf(p, sizeof p, "%s/images", dir);
    if (!rc)
        rc = make_dir(p, e);
    snprintf(p, sizeof p, "%s/labels", dir);
    if (!rc)
        rc = make_dir(p, e);
    return rc;
}

/* A recipe is trained on samples collected over a few days, not under one
 * fixed light and focus: training parts see the bench's usual spread
 * (light 0.85..1.1, noise x0.8..1.5, blur x0.85..1.3), drawn per part from
 * the series seed.  The next shift's batch lies beyond it in all three
 * (light 0.8, noise x1.6, blur x1.43).  jitter 0 renders every part at
 * exactly cond. */
static void jittered(const struct simbench_conditions *cond, uint64_t seed, int index,
                     int jitter, struct simbench_conditions *out)
{
    *out = *cond;
    if (!jitter)
        return;
    uint64_t s = seed * 0x9e3779b97f4a7c15ull ^ (uint64_t)index;
    double u[3];
    for (int k = 0; k < 3; k++)
        u[k] = 2.0 * rng_uniform(&s) - 1.0;
    out->light *= 0.975 + 0.125 * u[0];
    out->noise *= 1.15 + 0.35 * u[1];
    out->blur *= 1.075 + 0.225 * u[2];
}

static int render_set(const char *dir, uint64_t seed, int first, int n,
                      const struct simbench_conditions *cond, int jitter, int w, int h,
                      struct err *e)
{
    int rc = make_dataset_dirs(dir, e);
    for (int i = 0; i < n && !rc; i++) {
        struct image *img = NULL, *truth = NULL;
        struct simbench_conditions c;
        char p[PATH_MAX];
        jittered(cond, seed, first + i, jitter, &c);
        rc = simbench_render(seed, first + i, &c, w, h, &img, &truth, NULL, e);
        if (!rc) {
            snprintf(p, sizeof p, "%s/images/part-%04d.png", dir, first + i);
            rc = pngio_save(p, img, 3, e);
        }
        if (!rc) {
            snprintf(p, sizeof p, "%s/labels/part-%04d.png", dir, first + i);
            rc = pngio_save(p, truth, 3, e);
        }
        image_free(img);
        image_free(truth);
    }
    return rc;
}

/* The recipe shipped in recipes/: beside the build folder or installed. */
static int find_recipe(char *buf, size_t len)
{
    char exe[PATH_MAX];
    ssize_t n = readlink("/proc/self/exe", exe, sizeof exe - 1);
    if (n <= 0)
        return -1;
    exe[n] = '\0';
    char *dir = dirname(exe);
    const char *tries[] = {"%s/../recipes/%s", "%s/../share/station/recipes/%s"};
    for (size_t i = 0; i < 2; i++) {
        snprintf(buf, len, tries[i], dir, DEMO_RECIPE);
        if (access(buf, R_OK) == 0)
            return 0;
    }
    return -1;
}

static int copy_file(const char *from, const char *to, struct err *e)
{
    FILE *a = fopen(from, "rb");
    if (!a)
        return err_set(e, ST_EIO, "%s: cannot open: %s", from, strerror(errno));
    FILE *b = fopen(to, "wb");
    if (!b) {
        fclose(a);
        return err_set(e, ST_EIO, "%s: cannot create: %s", to, strerror(errno));
    }
    char buf[8192];
    size_t got;
    int rc = ST_OK;
    while ((got = fread(buf, 1, sizeof buf, a)) > 0)
        if (fwrite(buf, 1, got, b) != got)
            rc = err_set(e, ST_EIO, "%s: write failed", to);
    if (fclose(b) != 0 && !rc)
        rc = err_set(e, ST_EIO, "%s: write failed", to);
    fclose(a);
    return rc;
}

/* Verdict comparison of one batch. */
struct batch {
    const char *name;
    int parts;
    int table[2][3];      /* truth PASS/FAIL x station PASS/FAIL/NO_VERDICT */
    int severe_passed;    /* parts with a defect over twice its tolerance that passed */
    int severe;
    struct eval_result eval;
    /* the recipe's scale checked on the station's class map of the first part */
    struct disc_scale scale;
    struct err scale_err;
    /* master-part candidates: a good part the station passes, and the
     * defective part it fails whose worst broken rule is the least over */
    int good_part, over_part;
    double over_ratio;
    struct logbook *lb;        /* every inspection is recorded here */
};

/* How far the truth's worst broken rule is over its limit (measured / limit). */
static double worst_excess(const struct judgement *want)
{
    double worst = 0;
    for (int k = 0; k < want->nreasons; k++) {
        const struct reason *x = &want->reasons[k];
        double q = x->limit > 0 ? x->measured / x->limit : x->measured + 1;
        worst = q > worst ? q : worst;
    }
    return worst;
}

/* A truth region over twice its class's largest-area tolerance. */
static int truth_is_severe(const struct recipe *r, const struct region_set *rs)
{
    for (int i = 0; i < rs->n; i++) {
        double lim = r->tol[rs->r[i].cls].max_area_mm2;
        if (lim >= 0 && rs->r[i].area_mm2 > 2 * lim)
            return 1;
    }
    return 0;
}

static int inspect_batch(struct inspector *in, const char *dir, int first, int n,
                         struct batch *b, struct err *e)
{
    const struct recipe *r = inspector_recipe(in);
    struct regions_opts ro;
    judge_regions_opts(r, NULL, &ro);
    char odir[PATH_MAX];
    snprintf(odir, sizeof odir, "%s/overlays", dir);
    int rc = make_dir(odir, e);
    struct region_set truth_rs;
    regions_init(&truth_rs);
    for (int i = 0; i < n && !rc; i++) {
        char ip[PATH_MAX], lp[PATH_MAX], op[PATH_MAX + 64];
        snprintf(ip, sizeof ip, "%s/images/part-%04d.png", dir, first + i);
        snprintf(lp, sizeof lp, "%s/labels/part-%04d.png", dir, first + i);
        struct image *img = NULL, *lab = NULL, *ov = NULL;
        struct judgement got, want;
        if ((rc = pngio_load_rgb(ip, &img, e)) || (rc = pngio_load_label(lp, r->nclasses, &lab, e)))
            goto next;
        struct inspect_times t = {0};
        if ((rc = inspector_run(in, img, &got, &t, e)))
            goto next;
        json_t *rep = report_json(ip, in, &got, &t);
        int64_t seq;
        rc = logbook_record(b->lb, rep, in, img, &got, NULL, NULL, &seq, &ov, e);
        json_decref(rep);
        if (rc)
            goto next;
        /* the truth is judged by the same tolerances in the zones the
         * station placed: its pose error is far below a zone's width */
        ro.zones = inspector_zone_map(in);
        if ((rc = regions_find(&truth_rs, lab, NULL, &ro, e)))
            goto next;
        judge_tolerances(r, &truth_rs, &want);
        int severe = truth_is_severe(r, &truth_rs);
        if (i == 0)
            disc_measure_scale(inspector_classes(in), CAP_DIAMETER_MM, &b->scale, &b->scale_err);
        b->parts++;
        int tv = want.verdict == VERDICT_PASS ? 0 : 1;
        b->table[tv][got.verdict]++;
        b->severe += severe;
        b->severe_passed += severe && got.verdict == VERDICT_PASS;
        if (b->good_part < 0 && tv == 0 && got.verdict == VERDICT_PASS)
            b->good_part = first + i;
        if (tv == 1 && got.verdict == VERDICT_FAIL && worst_excess(&want) < b->over_ratio) {
            b->over_part = first + i;
            b->over_ratio = worst_excess(&want);
        }
        if (got.verdict != VERDICT_PASS || want.verdict != VERDICT_PASS) {
            if (!ov) /* the log keeps none for a PASS */
                ov = report_overlay(in, img, &got, e);
            snprintf(op, sizeof op, "%s/part-%04d-%s.png", odir, first + i,
                     judge_verdict_name(got.verdict));
            rc = ov ? pngio_save(op, ov, 3, e) : e->code;
        }
    next:
        image_free(img);
        image_free(lab);
        image_free(ov);
    }
    regions_clear(&truth_rs);
    return rc;
}

static json_t *batch_json(const struct recipe *r, const struct batch *b)
{
    json_t *o = json_pack("{s:s,s:i,s:o,s:{s:i,s:i,s:i,s:i,s:i,s:i},s:i,s:i}", "batch", b->name,
                          "parts", b->parts, "evaluation", evaluate_json(r, &b->eval), "verdicts",
                          "good_pass", b->table[0][0], "good_fail", b->table[0][1],
                          "good_no_verdict", b->table[0][2], "defective_pass", b->table[1][0],
                          "defective_fail", b->table[1][1], "defective_no_verdict",
                          b->table[1][2], "severe_parts", b->severe, "severe_passed",
                          b->severe_passed);
    return o;
}

static void print_batch(const struct recipe *r, const struct batch *b)
{
    int def[RECIPE_MAX_CLASSES];
    for (int c = 0; c < r->nclasses; c++)
        def[c] = r->cls[c].is_defect;
    const struct confusion *cm = &b->eval.cm;
    fprintf(stderr, "\n== %s: %d parts ==\n", b->name, b->parts);
    evaluate_print(r, &b->eval, 0, stderr);
    fprintf(stderr, "verdicts against the truth (the truth judged by the same tolerances):\n"
                    "                      station PASS   station FAIL   NO VERDICT\n"
                    "  truly good parts    %12d   %12d   %10d\n"
                    "  truly defective     %12d   %12d   %10d\n",
            b->table[0][0], b->table[0][1], b->table[0][2], b->table[1][0], b->table[1][1],
            b->table[1][2]);
    fprintf(stderr, "  defective parts passed: %d    good parts failed: %d    parts with a defect "
                    "over twice its tolerance passed: %d of %d\n",
            b->table[1][0], b->table[0][1], b->severe_passed, b->severe);
    fprintf(stderr, "  in short: pixel accuracy %.1f%%, mean IoU %.3f (defect classes %.3f)\n",
            100 * metrics_accuracy(cm), metrics_mean_iou(cm, NULL), metrics_mean_iou(cm, def));
}

/* The demo recipe's [master good] and [master over] images, copied from the
 * nominal test parts; a batch without both kinds leaves them out (verify
 * then names the missing file). */
static int save_masters(const char *out, const char *test_dir, const struct batch *b,
                        struct err *e)
{
    char dir[PATH_MAX], from[PATH_MAX + 32], to[PATH_MAX + 16];
    snprintf(dir, sizeof dir, "%s/masters", out);
    int rc = make_dir(dir, e);
    const int part[2] = {b->good_part, b->over_part};
    const char *name[2] = {"good", "over"};
    for (int k = 0; k < 2 && !rc; k++) {
        if (part[k] < 0) {
            fprintf(stderr, "demo: no test part fits master '%s'; station verify will not pass\n",
                    name[k]);
            continue;
        }
        snprintf(from, sizeof from, "%s/images/part-%04d.png", test_dir, part[k]);
        snprintf(to, sizeof to, "%s/%s.png", dir, name[k]);
        rc = copy_file(from, to, e);
    }
    if (!rc && b->over_part >= 0)
        fprintf(stderr, "demo: master parts: good = part-%04d, over = part-%04d (worst rule "
                        "%.2f x its limit)\n", b->good_part, b->over_part, b->over_ratio);
    return rc;
}

static int verify_demo(const struct recipe *r, struct logbook *lb, struct err *e)
{
    struct verify_outcome v;
    int64_t vseq = 0;
    int rc = verify_run(r, &v, e);
    if (!rc)
        rc = verify_record(lb, r, &v, &vseq, e);
    if (!rc)
        fprintf(stderr, "demo: master parts verified: %d of %d got their verdict (log "
                        "verification %lld)\n", v.matched, v.n, (long long)vseq);
    verify_clear(&v);
    return rc;
}

struct demo_opts {
    const char *out, *recipe, *log, *station;
    uint64_t seed;
    int ntrain, ntest, nshifted;
};

static int run_demo(const struct demo_opts *o, struct err *e)
{
    const int w = 480, h = 360;
    char recipe_src[PATH_MAX], recipe_path[PATH_MAX], dir[PATH_MAX];
    if (o->recipe)
        snprintf(recipe_src, sizeof recipe_src, "%s", o->recipe);
    else if (find_recipe(recipe_src, sizeof recipe_src))
        return err_set(e, ST_EIO, "cannot find recipes/%s next to the program; give --recipe",
                       DEMO_RECIPE);
    int rc = make_dir(o->out, e);
    snprintf(recipe_path, sizeof recipe_path, "%s/%s", o->out, DEMO_RECIPE);
    if (rc || (rc = copy_file(recipe_src, recipe_path, e)))
        return rc;
    struct recipe r;
    if ((rc = recipe_load(recipe_path, &r, e)))
        return rc;

    double t0 = cli_now_ms();
    struct simbench_conditions nominal, shifted;
    simbench_conditions_nominal(&nominal);
    simbench_conditions_shifted(&shifted);
    fprintf(stderr, "demo: rendering %d training parts, %d test parts and %d parts of the next "
                    "shift (%dx%d) into %s\n",
            o->ntrain, o->ntest, o->nshifted, w, h, o->out);
    char train_dir[PATH_MAX], test_dir[PATH_MAX], shift_dir[PATH_MAX];
    snprintf(train_dir, sizeof train_dir, "%s/train", o->out);
    snprintf(test_dir, sizeof test_dir, "%s/test", o->out);
    snprintf(shift_dir, sizeof shift_dir, "%s/test-shifted", o->out);
    /* test parts continue the series after the training parts: never the same part */
    if ((rc = render_set(train_dir, o->seed, 0, o->ntrain, &nominal, 1, w, h, e)) ||
        (rc = render_set(test_dir, o->seed, o->ntrain, o->ntest, &nominal, 0, w, h, e)) ||
        (rc = render_set(shift_dir, o->seed, o->ntrain + o->ntest, o->nshifted, &shifted, 0, w,
                         h, e)))
        return rc;
    fprintf(stderr, "demo: rendered in %.1f s\n", (cli_now_ms() - t0) / 1e3);

    struct train_report rep;
    if ((rc = train_recipe(&r, train_dir, 0, &rep, e)))
        return rc;
    train_print_report(&r, &rep);

    struct inspector *in = NULL;
    struct batch b[2] = {{.name = "test parts, nominal conditions", .good_part = -1,
                          .over_part = -1, .over_ratio = HUGE_VAL},
                         {.name = "test parts, next shift (dimmer, noisier, softer focus)",
                          .good_part = -1, .over_part = -1, .over_ratio = HUGE_VAL}};
    const char *dirs[2] = {test_dir, shift_dir};
    const int first[2] = {o->ntrain, o->ntrain + o->ntest};
    const int count[2] = {o->ntest, o->nshifted};
    struct logbook lb;
    char log_path[PATH_MAX];
    snprintf(log_path, sizeof log_path, "%s/log/station.db", o->out);
    if (o->log)
        snprintf(log_path, sizeof log_path, "%s", o->log);
    if ((rc = inspector_new(&r, &in, e)))
        return rc;
    if ((rc = logbook_open(&lb, log_path, o->station, 0, &r, e))) {
        inspector_free(in);
        return rc;
    }
    b[0].lb = b[1].lb = &lb;
    for (int k = 0; k < 2 && !rc; k++) {
        snprintf(dir, sizeof dir, "%s/evaluation", dirs[k]);
        if (count[k] == 0)
            continue;
        if (!(rc = evaluate_dataset(in, dirs[k], 0, dir, 3, &b[k].eval, e)))
            rc = inspect_batch(in, dirs[k], first[k], count[k], &b[k], e);
    }
    inspector_free(in);
    if (!rc && count[0])
        rc = save_masters(o->out, test_dir, &b[0], e);
    /* the shift starts as a real one would: the masters verified, in the log */
    if (!rc && b[0].good_part >= 0 && b[0].over_part >= 0)
        rc = verify_demo(&r, &lb, e);
    logbook_close(&lb);
    if (!rc) {
        for (int k = 0; k < 2; k++)
            if (count[k])
                print_batch(&r, &b[k]);
        const struct disc_scale *ds = &b[0].scale;
        if (count[0] && b[0].scale_err.code == ST_OK)
            fprintf(stderr, "\nscale check from the first test part's outline (%.0f mm cap): "
                            "%.4f x %.4f mm/px, recipe %.4f x %.4f; roundness %.3f\n",
                    CAP_DIAMETER_MM, ds->mm_per_px_x, ds->mm_per_px_y, r.mm_per_px_x,
                    r.mm_per_px_y, ds->aspect);
        else if (count[0])
            fprintf(stderr, "\nscale check not possible: %s\n", b[0].scale_err.msg);
        json_t *s = json_pack("{s:s,s:I,s:f,s:o,s:o}", "recipe", r.product, "seed",
                              (json_int_t)o->seed, "seconds", (cli_now_ms() - t0) / 1e3,
                              "nominal", batch_json(&r, &b[0]), "shifted", batch_json(&r, &b[1]));
        snprintf(dir, sizeof dir, "%s/summary.json", o->out);
        if (json_dump_file(s, dir, JSON_INDENT(2)) != 0)
            rc = err_set(e, ST_EIO, "%s: cannot write", dir);
        json_decref(s);
        fprintf(stderr, "\ndemo: finished in %.0f s. Sheets of the worst images: %s/*/evaluation/;"
                        " overlays of failed parts: %s/*/overlays/; figures: %s\n"
                        "inspection log with evidence: %s (try: station audit list --log %s)\n"
                        "the live station on the simulated bench, on this verified log:\n"
                        "  station run %s --log %s --station %s\n%s\n",
                (cli_now_ms() - t0) / 1e3, o->out, o->out, dir, log_path, log_path, recipe_path,
                log_path, o->station, CLI_CAUTION);
    }
    for (int k = 0; k < 2; k++)
        evaluate_clear(&b[k].eval);
    return rc;
}

int cmd_demo(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {
        {"out", required_argument, NULL, 'o'},    {"seed", required_argument, NULL, 's'},
        {"train", required_argument, NULL, 't'},  {"test", required_argument, NULL, 'T'},
        {"shifted", required_argument, NULL, 'S'}, {"recipe", required_argument, NULL, 'r'},
        {"log", required_argument, NULL, 'l'},    {"station", required_argument, NULL, 'i'},
        {0, 0, 0, 0}};
    struct demo_opts o = {.out = "station-demo", .seed = 1, .ntrain = 60, .ntest = 30,
                          .nshifted = 20, .station = "demo-bench"};
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 'o': o.out = optarg; break;
        case 's': o.seed = strtoull(optarg, NULL, 10); break;
        case 't': o.ntrain = atoi(optarg); break;
        case 'T': o.ntest = atoi(optarg); break;
        case 'S': o.nshifted = atoi(optarg); break;
        case 'r': o.recipe = optarg; break;
        case 'l': o.log = optarg; break;
        case 'i': o.station = optarg; break;
        default: usage(stderr); return EXIT_USAGE;
        }
    }
    if (optind != argc || o.ntrain < 1 || o.ntest < 0 || o.nshifted < 0) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct err e;
    err_clear(&e);
    if (run_demo(&o, &e)) {
        cli_say("%s", e.msg);
        return EXIT_ERROR;
    }
    return 0;
}
