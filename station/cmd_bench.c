/* station bench: times each inspection stage on simulated-bench frames.
 *
 * Prints one JSON line of figures (median, min, max milliseconds per stage)
 * for `make bench`, which sets them beside XGBoost's own predictor (the
 * --xgboost option here) and an OpenCV filter bank (from Python). */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "core/booster.h"
#include "core/features.h"
#include "report.h"
#include "simbench.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station bench RECIPE [--size WxH] [--threads N] [--repeat K] [--xgboost]\n\n"
               "Inspects K simulated-bench frames of the given size with N threads and prints\n"
               "one JSON line: median, min and max milliseconds of features, classify,\n"
               "regions, verdict and the whole inspection. With --xgboost, also times\n"
               "XGBoost's XGBoosterPredictFromDense on the same features and model, and our\n"
               "evaluator on every pixel the same way (forest_all_pixels), and\n"
               "reports max_abs_dp, the largest difference between its probabilities and\n"
               "the station's evaluator on the first frame. locating_agreement is the share\n"
               "of that frame's pixels whose class is the same with and without the\n"
               "locating pass.\n");
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static json_t *stat_json(double *v, int n)
{
    qsort(v, (size_t)n, sizeof *v, cmp_double);
    double med = n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
    return json_pack("{s:f,s:f,s:f}", "median", med, "min", v[0], "max", v[n - 1]);
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
                                         {0, 0, 0, 0}};
    int w = 640, h = 480, threads = 2, repeat = 15, xgb = 0, c;
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
    struct image *img = NULL, *truth = NULL;
    float *prob = NULL, *ours = NULL, *every_conf = NULL;
    uint8_t *every_cls = NULL;
    double max_dp = 0, agreement = 0;
    double *v = calloc((size_t)repeat * 7, sizeof *v);
    int status = EXIT_ERROR;
    struct simbench_conditions cond;
    simbench_conditions_nominal(&cond);
    if (!v || inspector_new(&r, &in, &e) || (xgb && booster_load(r.model_path, threads, &b, &e)))
        goto done;
    size_t npix = (size_t)w * h;
    if (xgb && (!(prob = malloc(npix * r.nclasses * sizeof *prob)) ||
                !(ours = malloc(npix * r.nclasses * sizeof *ours)) ||
                !(every_cls = malloc(npix)) || !(every_conf = malloc(npix * sizeof *every_conf)))) {
        err_set(&e, ST_ENOMEM, "out of memory");
        goto done;
    }
    /* one warm-up frame: first touch of the buffers is not the steady state */
    for (int k = -1; k < repeat; k++) {
        image_free(img);
        image_free(truth);
        img = truth = NULL;
        struct judgement j;
        struct inspect_times t;
        if (simbench_render(7, k + 1, &cond, w, h, &img, &truth, NULL, &e) ||
            inspector_run(in, img, &j, &t, &e))
            goto done;
        double x = 0, all = 0;
        if (xgb) {
            const struct fstack *fs = inspector_features(in);
            double t1 = cli_now_ms();
            if (forest_classify(inspector_forest(in), fs->v, npix, fs->n, threads, every_cls,
                                every_conf, &e))
                goto done;
            all = cli_now_ms() - t1;
        }
        if (xgb) {
            double t0 = cli_now_ms();
            if (booster_predict(b, inspector_features(in)->v, npix, inspector_features(in)->n,
                                r.nclasses, prob, &e))
                goto done;
            x = cli_now_ms() - t0;
            if (k < 0) {
                /* the agreement of our evaluator with XGBoost's on this real model */
                const struct fstack *fs = inspector_features(in);
                forest_predict(inspector_forest(in), fs->v, npix, fs->n, ours);
                for (size_t i = 0; i < npix * r.nclasses; i++) {
                    double d = fabs((double)ours[i] - prob[i]);
                    if (d > max_dp)
                        max_dp = d;
                }
            }
        }
        if (k < 0) {
            /* how far the locating pass changes the class map of this frame */
            uint8_t *located = malloc(npix);
            if (!located) {
                err_set(&e, ST_ENOMEM, "out of memory");
                goto done;
            }
            memcpy(located, inspector_classes(in)->px, npix);
            inspector_set_locating(in, 0);
            int rc = inspector_classify(in, img, NULL, &e);
            inspector_set_locating(in, 1);
            size_t same = 0;
            for (size_t i = 0; i < npix; i++)
                same += located[i] == inspector_classes(in)->px[i];
            free(located);
            if (rc)
                goto done;
            agreement = (double)same / (double)npix;
            continue;
        }
        double *row = v + (size_t)k * 7;
        row[0] = t.features_ms;
        row[1] = t.classify_ms;
        row[2] = t.regions_ms;
        row[3] = t.verdict_ms;
        row[4] = t.features_ms + t.classify_ms + t.regions_ms + t.verdict_ms;
        row[5] = x;
        row[6] = all;
    }
    static const char *names[] = {"features", "classify", "regions", "verdict", "total",
                                  "xgboost_predict", "forest_all_pixels"};
    json_t *o = json_pack("{s:i,s:i,s:i,s:i,s:i,s:i,s:i,s:i}", "width", w, "height", h,
                          "threads", threads, "repeat", repeat, "feature_count",
                          feat_count(&r.feat), "trees", forest_ntrees(inspector_forest(in)),
                          "depth", forest_max_depth(inspector_forest(in)), "classes",
                          r.nclasses);
    json_object_set_new(o, "locating_agreement", json_real(agreement));
    if (xgb)
        json_object_set_new(o, "max_abs_dp", json_real(max_dp));
    double *col = malloc((size_t)repeat * sizeof *col);
    for (int s = 0; s < (xgb ? 7 : 5) && col; s++) {
        for (int k = 0; k < repeat; k++)
            col[k] = v[(size_t)k * 7 + s];
        json_object_set_new(o, names[s], stat_json(col, repeat));
    }
    free(col);
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
    free(every_cls);
    free(every_conf);
    image_free(img);
    image_free(truth);
    booster_free(b);
    inspector_free(in);
    return status;
}
