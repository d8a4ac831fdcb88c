/* station train RECIPE --data DIR [--split F] */
#include <getopt.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "core/recipe.h"
#include "train.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station train RECIPE --data DIR [--split F]\n\n"
               "Trains the recipe's pixel classifier on the labelled images in DIR\n"
               "(DIR/images/<stem>.png with DIR/labels/<stem>.png; label 255 = unlabelled)\n"
               "and saves the model where the recipe's [classifier] model says, with its\n"
               "metadata beside it (MODEL.meta.json).\n\n"
               "  --data DIR   the dataset folder\n"
               "  --split F    hold out a share F (0..0.9) of the images, whole and chosen by\n"
               "               name (SHA-256 of the name), for station evaluate --split F;\n"
               "               they are never read while training\n"
               "  -h, --help   this text\n");
}

int cmd_train(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {{"data", required_argument, NULL, 'd'},
                                         {"split", required_argument, NULL, 's'},
                                         {0, 0, 0, 0}};
    const char *data = NULL;
    double split = 0;
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        if (c == 'd') {
            data = optarg;
        } else if (c == 's') {
            if (cli_split("--split", optarg, &split))
                return EXIT_USAGE;
        } else {
            usage(stderr);
            return EXIT_USAGE;
        }
    }
    if (!data || optind != argc - 1) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct recipe r;
    if (cli_load_recipe(argv[optind], &r))
        return EXIT_ERROR;
    struct train_report rep;
    struct err e;
    err_clear(&e);
    if (train_recipe(&r, data, split, &rep, &e)) {
        cli_say("%s", e.msg);
        return EXIT_ERROR;
    }
    train_print_report(&r, &rep);
    return 0;
}
