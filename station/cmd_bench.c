/* station bench: times each inspection stage on simulated-bench frames.
 *
 * Prints one JSON line of figures (median, min, max milliseconds per stage)
 * for `make bench`, which sets them beside XGBoost's own predictor (the
 * --xgboost option here) and an OpenCV filter bank (from Python). */
#include <getopt.h>
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>

#include <immintrin.h>

#include "cli.h"
#include "core/booster.h"
#include "core/features.h"
#include "core/pngio.h"
#include "report.h"
#include "simbench.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station bench RECIPE [--size WxH] [--threads N] [--repeat K] [--xgboost]\n"
               "                    [--frames-only] [--save-frame DIR]\n"
               "\n"
               "Inspects K simulated-bench frames of the given size with N threads and prints\n"
               "one JSON line: median, min and max milliseconds of features, classify,\n"
               "regions, verdict and the whole inspection, and the process's peak resident\n"
               "memory (frames are rendered first; frames_mb of it are those frames), and\n"
               "which tree walk the model got (walk: rank, wide or scalar; core/forest.h).\n"
               "\n"
               "With --xgboost, the same frames are then done again, each measure in a phase\n"
               "of its own: the filter bank alone over each whole frame (filter_bank), our\n"
               "evaluator on every pixel without the locating pass (forest_all_pixels), and\n"
               "XGBoost's XGBoosterPredictFromDense on each frame's features with the same\n"
               "model. max_abs_dp is the largest difference between its probabilities and\n"
               "ours, class_mismatches the pixels whose most likely class differs, both on the\n"
               "first frame; fma_peak the multiply-adds per second of a register-only kernel\n"
               "on N threads, measured just before the bank, and filter_floor the filter\n"
               "passes' own arithmetic (filter_ops_per_px) at that rate.\n"
               "\n"
               "locating_agreement is the share of the warm-up frame's pixels whose class is\n"
               "the same with and without the locating pass (--frames-only skips it); with a\n"
               "recipe's [classifier] coarse on, coarse_agreement the share that is the same\n"
               "with and without it. --save-frame writes the first frame and its true classes\n"
               "as DIR/frame.png and DIR/truth.png.\n");
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Float multiply-adds per second of one thread: 16 independent
 * accumulators, so the loop runs at the units' throughput, not their
 * latency.  AVX-512 or AVX2 as the CPU has them, chosen at run time. */
#define PEAK_ITERS 4000000

__attribute__((target("avx512f"))) static double fma_rate_avx512(void)
{
    __m512 a[16], m = _mm512_set1_ps(0.999999f), c = _mm512_set1_ps(1e-7f);
#pragma GCC unroll 16
    for (int i = 0; i < 16; i++)
        a[i] = _mm512_set1_ps((float)i);
    double t0 = cli_now_ms();
    for (int it = 0; it < PEAK_ITERS; it++)
#pragma GCC unroll 16
        for (int i = 0; i < 16; i++)
            a[i] = _mm512_fmadd_ps(a[i], m, c);
    double ms = cli_now_ms() - t0;
    float sink = 0;
    for (int i = 0; i < 16; i++)
        sink += _mm512_reduce_add_ps(a[i]);
    /* the sum keeps the loop alive; it is never inf for these inputs */
    return isfinite(sink) ? 16.0 * 16.0 * PEAK_ITERS / (ms * 1e-3) : 0;
}

__attribute__((target("avx2,fma"))) static double fma_rate_avx2(void)
{
    __m256 a[16], m = _mm256_set1_ps(0.999999f), c = _mm256_set1_ps(1e-7f);
#pragma GCC unroll 16
    for (int i = 0; i < 16; i++)
        a[i] = _mm256_set1_ps((float)i);
    double t0 = cli_now_ms();
    for (int it = 0; it < PEAK_ITERS; it++)
#pragma GCC unroll 16
        for (int i = 0; i < 16; i++)
            a[i] = _mm256_fmadd_ps(a[i], m, c);
    double ms = cli_now_ms() - t0;
    float lanes[8], sink = 0;
    for (int i = 0; i < 16; i++) {
        _mm256_storeu_ps(lanes, a[i]);
        for (int k = 0; k < 8; k++)
            sink += lanes[k];
    }
    return isfinite(sink) ? 16.0 * 8.0 * PEAK_ITERS / (ms * 1e-3) : 0;
}

static void *fma_thread(void *arg)
{
    double *rate = arg;
    __builtin_cpu_init();
    *rate = __builtin_cpu_supports("avx512f") ? fma_rate_avx512()
            : __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma") ? fma_rate_avx2()
                                                                               : 0;
    return NULL;
}

/* Multiply-adds per second on `threads` threads at once (the best of 3). */
static double fma_peak(int threads)
{
    double best = 0, rate[64];
    pthread_t tid[64];
    threads = threads < 64 ? threads : 64;
    for (int rep = 0; rep < 3; rep++) {
        int started = 0;
        for (; started < threads; started++)
            if (pthread_create(&tid[started], NULL, fma_thread, &rate[started]))
                break;
        double sum = 0;
        for (int t = 0; t < started; t++) {
            pthread_join(tid[t], NULL);
            sum += rate[t];
        }
        best = sum > best ? sum : best;
    }
    return best;
}

static double peak_rss_mb(void)
{
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    return ru.ru_maxrss / 1024.0; /* kilobytes on Linux */
}

/* The frame and its true classes, for the Python peer to run on. */
static int save_frame(const char *dir, const struct image *img, const struct image *truth,
                      struct err *e)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/frame.png", dir);
    int rc = pngio_save(path, img, 1, e);
    snprintf(path, sizeof path, "%s/truth.png", dir);
    return rc ? rc : pngio_save(path, truth, 1, e);
}

static json_t *stat_json(double *v, int n)
{
    qsort(v, (size_t)n, sizeof *v, cmp_double);
    double med = n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
    return json_pack("{s:f,s:f,s:f}", "median", med, "min", v[0], "max", v[n - 1]);
}

/* the figures of a frame, in the order of names[] in cmd_bench */
enum { S_FEATURES, S_CLASSIFY, S_REGIONS, S_VERDICT, S_TOTAL, S_XGBOOST, S_ALL_PIXELS, S_BANK, NSTAGES };

/* The frames and the figures the three timed phases fill. */
struct bench_run {
    struct inspector *in;
    struct booster *b;
    struct image **frames; /* frame, truth of warm-up and every timed frame */
    int repeat, nclasses;
    size_t npix;
    double *v; /* repeat rows of NSTAGES figures */
    uint8_t *located;
    float *prob, *ours;
    double max_dp, agreement, coarse_agreement;
    size_t mismatches;
};

static double bench_same_share(const struct bench_run *br)
{
    size_t same = 0;
    for (size_t i = 0; i < br->npix; i++)
        same += br->located[i] == inspector_classes(br->in)->px[i];
    return (double)same / (double)br->npix;
}

/* The share of img's pixels whose class stays that of br->located with
 * an option of the inspector (set) off for one classification. */
static int bench_share_without(struct bench_run *br, const struct image *img, void (*set)(struct inspector *, int),
                               double *share, struct err *e)
{
    set(br->in, 0);
    int rc = inspector_classify(br->in, img, NULL, e);
    set(br->in, 1);
    if (rc)
        return -1;
    *share = bench_same_share(br);
    return 0;
}

/* Every frame inspected back to back, as at the station.  Frame -1 (the
 * warm-up: first touch of the buffers is not the steady state) also says
 * how far the locating pass and the coarse option move its class map. */
static int bench_inspections(struct bench_run *br, const char *save_dir, int compare_maps, int coarse,
                             struct err *e)
{
    for (int k = -1; k < br->repeat; k++) {
        const struct image *img = br->frames[2 * (k + 1)], *truth = br->frames[2 * (k + 1) + 1];
        struct judgement j;
        struct inspect_times t;
        if (inspector_run(br->in, img, &j, &t, e))
            return -1;
        if (k == 0 && save_dir && save_frame(save_dir, img, truth, e))
            return -1;
        if (k < 0 && compare_maps) {
            memcpy(br->located, inspector_classes(br->in)->px, br->npix);
            if (coarse && bench_share_without(br, img, inspector_set_coarse, &br->coarse_agreement, e))
                return -1;
            if (bench_share_without(br, img, inspector_set_locating, &br->agreement, e))
                return -1;
        }
        if (k < 0)
            continue;
        double *row = br->v + (size_t)k * NSTAGES;
        row[S_FEATURES] = t.features_ms;
        row[S_CLASSIFY] = t.classify_ms;
        row[S_REGIONS] = t.regions_ms;
        row[S_VERDICT] = t.verdict_ms;
        row[S_TOTAL] = t.features_ms + t.classify_ms + t.regions_ms + t.verdict_ms;
    }
    return 0;
}

/* The bank alone over each whole frame, frame after frame, as the OpenCV
 * peer runs it: timed right after the classifier, it started with the
 * caches full of the feature stack the classifier had just read. */
static int bench_bank(struct bench_run *br, struct feat_ctx *fc, struct fstack *fs, struct err *e)
{
    for (int k = -1; k < br->repeat; k++) {
        double t0 = cli_now_ms();
        if (feat_compute(fc, br->frames[2 * (k + 1)], fs, e))
            return -1;
        if (k >= 0)
            br->v[(size_t)k * NSTAGES + S_BANK] = cli_now_ms() - t0;
    }
    return 0;
}

/* The same frames without the locating pass: our evaluator on every pixel;
 * then, in a phase of its own, XGBoost on each frame's features.  Apart
 * because libgomp's threads spin for milliseconds after each of XGBoost's
 * calls, and whatever ran next shared the two cores with them (features of
 * the inspection 15.6 ms against 11.5 alone). */
static int bench_whole_frames(struct bench_run *br, struct err *e)
{
    for (int k = -1; k < br->repeat; k++) {
        struct inspect_times full;
        if (inspector_classify(br->in, br->frames[2 * (k + 1)], &full, e))
            return -1;
        if (k >= 0)
            br->v[(size_t)k * NSTAGES + S_ALL_PIXELS] = full.classify_ms;
    }
    for (int k = -1; k < br->repeat; k++) {
        if (inspector_classify(br->in, br->frames[2 * (k + 1)], NULL, e))
            return -1;
        const struct fstack *fs = inspector_features(br->in);
        double t0 = cli_now_ms();
        if (booster_predict(br->b, fs->v, br->npix, fs->n, br->nclasses, br->prob, e))
            return -1;
        if (k >= 0) {
            br->v[(size_t)k * NSTAGES + S_XGBOOST] = cli_now_ms() - t0;
            continue;
        }
        /* the agreement of our evaluator with XGBoost's on this real model */
        forest_predict(inspector_forest(br->in), fs->v, br->npix, fs->n, br->ours);
        int K = br->nclasses;
        for (size_t i = 0; i < br->npix; i++) {
            int a = 0, bx = 0;
            for (int q = 0; q < K; q++) {
                double d = fabs((double)br->ours[i * K + q] - br->prob[i * K + q]);
                br->max_dp = d > br->max_dp ? d : br->max_dp;
                a = br->ours[i * K + q] > br->ours[i * K + a] ? q : a;
                bx = br->prob[i * K + q] > br->prob[i * K + bx] ? q : bx;
            }
            br->mismatches += a != bx;
        }
    }
    return 0;
}

int cmd_bench(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {{"size", required_argument, NULL, 's'},
                                         {"threads", required_argument, NULL, 't'},
                                         {"repeat", required_argument, NULL, 'r'},
                                         {"xgboost", no_argument, NULL, 'x'},
                                         {"frames-only", no_argument, NULL, 'f'},
                                         {"save-frame", required_argument, NULL, 'S'},
                                         {0, 0, 0, 0}};
    int w = 640, h = 480, threads = 2, repeat = 20, xgb = 0, frames_only = 0, c;
    const char *save_dir = NULL;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 's':
            if (sscanf(optarg, "%dx%d", &w, &h) != 2) {
                usage(stderr);
                return EXIT_USAGE;
            }
            break;
        case 't': threads = atoi(optarg); break;
        case 'r': repeat = atoi(optarg); break;
        case 'x': xgb = 1; break;
        case 'f': frames_only = 1; break;
        case 'S': save_dir = optarg; break;
        default: usage(stderr); return EXIT_USAGE;
        }
    }
    if (optind != argc - 1 || threads < 1 || repeat < 1 || w < 64 || h < 64) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct recipe r;
    if (cli_load_recipe(argv[optind], &r))
        return EXIT_ERROR;
    r.feat.threads = threads;
    r.train.threads = threads;
    struct err e;
    err_clear(&e);
    struct inspector *in = NULL;
    struct booster *b = NULL;
    struct feat_ctx *fc = NULL; /* --xgboost: the bank alone */
    struct fstack *bank = NULL;
    struct image **frames = NULL;  /* frame, truth of warm-up and every timed frame */
    float *prob = NULL, *ours = NULL;
    uint8_t *located = NULL;
    double *v = calloc((size_t)repeat * NSTAGES, sizeof *v);
    int status = EXIT_ERROR;
    struct simbench_conditions cond;
    simbench_conditions_nominal(&cond);
    if (!v) {
        err_set(&e, ST_ENOMEM, "out of memory for %d frames' figures", repeat);
        goto done;
    }
    /* every frame rendered before the inspector touches its buffers, so the
     * peak resident memory is the inspection's, not the renderer's scratch
     * (49 MB at 1280x960) on top of it */
    const int nframes = repeat + 1;
    if (!(frames = calloc(2 * (size_t)nframes, sizeof *frames))) {
        err_set(&e, ST_ENOMEM, "out of memory for %d frames", nframes);
        goto done;
    }
    for (int k = 0; k < nframes; k++)
        if (simbench_render(7, k, &cond, w, h, &frames[2 * k], &frames[2 * k + 1], NULL, &e))
            goto done;
    if (inspector_new(&r, &in, &e) || (xgb && booster_load(r.model_path, threads, &b, &e)))
        goto done;
    size_t npix = (size_t)w * h;
    if (!(located = malloc(npix))) {
        err_set(&e, ST_ENOMEM, "out of memory");
        goto done;
    }
    if (xgb && (!(prob = malloc(npix * r.nclasses * sizeof *prob)) ||
                !(ours = malloc(npix * r.nclasses * sizeof *ours)))) {
        err_set(&e, ST_ENOMEM, "out of memory");
        goto done;
    }
    struct bench_run br = {in, b, frames, repeat, r.nclasses, npix, v, located, prob, ours, 0, -1, -1, 0};
    if (bench_inspections(&br, save_dir, !frames_only, r.coarse_classify, &e))
        goto done;
    double peak = 0;
    if (xgb) {
        /* the peak just before the bank: on a shared machine the floor is
         * then the one of the moment the bank ran in */
        peak = fma_peak(threads);
        if (!(fc = feat_ctx_new(&r.feat, w, h, &e)) || !(bank = fstack_new(w, h, feat_count(&r.feat), &e)) ||
            bench_bank(&br, fc, bank, &e))
            goto done;
        inspector_set_locating(in, 0);
        int rc = bench_whole_frames(&br, &e);
        inspector_set_locating(in, 1);
        if (rc)
            goto done;
    }
    static const char *names[NSTAGES] = {"features", "classify", "regions", "verdict", "total",
                                         "xgboost_predict", "forest_all_pixels", "filter_bank"};
    json_t *o = json_pack("{s:i,s:i,s:i,s:i,s:i,s:i,s:i,s:i,s:s}", "width", w, "height", h,
                          "threads", threads, "repeat", repeat, "feature_count",
                          feat_count(&r.feat), "trees", forest_ntrees(inspector_forest(in)),
                          "depth", forest_max_depth(inspector_forest(in)), "classes",
                          r.nclasses, "walk", forest_walk(inspector_forest(in)));
    if (br.agreement >= 0)
        json_object_set_new(o, "locating_agreement", json_real(br.agreement));
    if (br.coarse_agreement >= 0)
        json_object_set_new(o, "coarse_agreement", json_real(br.coarse_agreement));
    if (xgb) {
        json_object_set_new(o, "max_abs_dp", json_real(br.max_dp));
        json_object_set_new(o, "class_mismatches", json_integer((json_int_t)br.mismatches));
        double ops = feat_pass_ops(fc);
        json_object_set_new(o, "filter_ops_per_px", json_real(ops));
        json_object_set_new(o, "fma_peak", json_real(peak));
        json_object_set_new(o, "filter_floor_ms", json_real(peak > 0 ? ops * (double)npix / peak * 1e3 : 0));
    }
    double *col = malloc((size_t)repeat * sizeof *col);
    for (int s = 0; s < (xgb ? NSTAGES : S_XGBOOST) && col; s++) {
        for (int k = 0; k < repeat; k++)
            col[k] = v[(size_t)k * NSTAGES + s];
        json_object_set_new(o, names[s], stat_json(col, repeat));
    }
    free(col);
    json_object_set_new(o, "peak_rss_mb", json_real(peak_rss_mb()));
    /* the frames held for the run are part of that peak: said beside it */
    json_object_set_new(o, "frames_mb", json_real(nframes * (double)npix * 4 / (1 << 20)));
    json_dumpf(o, stdout, JSON_COMPACT | JSON_REAL_PRECISION(5));
    fputc('\n', stdout);
    json_decref(o);
    status = 0;
done:
    if (status)
        cli_say("%s", e.msg);
    free(v);
    free(prob);
    free(ours);
    free(located);
    for (int k = 0; frames && k < 2 * (repeat + 1); k++)
        image_free(frames[k]);
    free(frames);
    booster_free(b);
    fstack_free(bank);
    feat_ctx_free(fc);
    inspector_free(in);
    return status;
}
