/* station evaluate RECIPE --data DIR [--split F] [--json] [--sheets DIR] [--per-image] */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "evaluate.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station evaluate RECIPE --data DIR [--split F] [--json] [--sheets DIR]\n"
               "                        [--worst N] [--per-image]\n\n"
               "Classifies every labelled image of DIR with the recipe's model and compares\n"
               "with the labels: pixel accuracy, IoU per class, mean IoU (over classes\n"
               "present), the confusion matrix (counts and row shares) and a table per image.\n"
               "Unlabelled pixels (255) are not counted.\n\n"
               "  --data DIR     the dataset folder (DIR/images, DIR/labels)\n"
               "  --split F      measure only the images held out at share F, the ones\n"
               "                 station train --split F never read; refused unless the\n"
               "                 model was trained with that split\n"
               "  --json         print one JSON object on stdout (pixel_accuracy, mean_iou,\n"
               "                 defect_mean_iou, iou, confusion, images)\n"
               "  --sheets DIR   write frame | truth | prediction PNGs of the worst images\n"
               "                 (default DIR/evaluation; 'none' to skip)\n"
               "  --worst N      how many sheets (default 5)\n"
               "  --per-image    list every image, not only the worst ten\n");
}

int cmd_evaluate(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {{"data", required_argument, NULL, 'd'},
                                         {"json", no_argument, NULL, 'j'},
                                         {"sheets", required_argument, NULL, 's'},
                                         {"worst", required_argument, NULL, 'w'},
                                         {"per-image", no_argument, NULL, 'p'},
                                         {"split", required_argument, NULL, 'S'},
                                         {0, 0, 0, 0}};
    const char *data = NULL, *sheets = NULL;
    int json = 0, per_image = 0, worst = 5, c;
    double split = 0;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        switch (c) {
        case 'd': data = optarg; break;
        case 'j': json = 1; break;
        case 's': sheets = optarg; break;
        case 'w': worst = atoi(optarg); break;
        case 'p': per_image = 1; break;
        case 'S':
            if (cli_split("--split", optarg, &split))
                return EXIT_USAGE;
            break;
        default: usage(stderr); return EXIT_USAGE;
        }
    }
    if (!data || optind != argc - 1 || worst < 0) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct recipe r;
    if (cli_load_recipe(argv[optind], &r))
        return EXIT_ERROR;
    char sheet_dir[PATH_MAX];
    if (!sheets)
        snprintf(sheet_dir, sizeof sheet_dir, "%s/evaluation", data);
    else
        snprintf(sheet_dir, sizeof sheet_dir, "%s", sheets);
    int no_sheets = sheets && strcmp(sheets, "none") == 0;
    struct err e;
    err_clear(&e);
    struct inspector *in = NULL;
    struct eval_result res = {0};
    int status = 0;
    if (inspector_new(&r, &in, &e)) {
        cli_say("%s", e.msg);
        status = EXIT_ERROR;
    } else if (split > 0 && fabs(inspector_model(in)->holdout - split) > 1e-12) {
        /* any other share would count images the model was trained on as unseen */
        cli_say("%s: the model was trained with %s, not --split %g; train with --split %g "
                "first", r.model_path, inspector_model(in)->holdout > 0 ? "another split"
                                                                       : "no images held out",
                split, split);
        status = EXIT_ERROR;
    } else if (evaluate_dataset(in, data, split, no_sheets ? NULL : sheet_dir, worst, &res, &e)) {
        cli_say("%s", e.msg);
        status = EXIT_ERROR;
    } else {
        if (split > 0)
            fprintf(stderr, "held-out images only (share %g, never read in training):\n", split);
        evaluate_print(&r, &res, per_image, stderr);
        if (!no_sheets && worst > 0)
            fprintf(stderr, "sheets of the worst images (frame | truth | prediction): %s\n",
                    sheet_dir);
        if (json) {
            cli_emit(evaluate_json(&r, &res));
        }
    }
    evaluate_clear(&res);
    inspector_free(in);
    return status;
}
