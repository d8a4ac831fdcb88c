/* station label DIR [--recipe RECIPE] */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>

#include "cli.h"
#include "label_app.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station label DIR [--recipe RECIPE] [--size WxH] [--script FILE]\n"
               "                        [--snapshot FILE] [--allow-offscreen]\n\n"
               "Paints class labels over the images in DIR/images and saves them as\n"
               "DIR/labels/<stem>.png (8-bit, the class index per pixel, 255 = unlabelled),\n"
               "so a few strokes per image are enough to train on.  With a recipe the\n"
               "classes, their colours and names come from it, and T trains a quick model\n"
               "on the painted pixels (held in memory only; the recipe's model is not\n"
               "touched) whose prediction is shown under the labels.\n\n"
               "  --recipe RECIPE    classes and features from RECIPE (without: classes 0..9)\n"
               "  --size WxH         window size (default 1280x800)\n"
               "  --script FILE      run the actions in FILE (see station/label_app.h), then quit\n"
               "  --snapshot FILE    draw once and save the window as PNG, then quit\n"
               "  --allow-offscreen  accept SDL's offscreen or dummy driver (tests)\n"
               "  -h, --help         this text\n\nKeys:\n");
    for (int i = 0; i < label_nkeys; i++)
        fprintf(f, "  %-20s %s\n", label_keys[i].keys, label_keys[i].what);
}

int cmd_label(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    static const struct option opts[] = {{"recipe", required_argument, NULL, 'r'},
                                         {"size", required_argument, NULL, 'z'},
                                         {"script", required_argument, NULL, 's'},
                                         {"snapshot", required_argument, NULL, 'p'},
                                         {"allow-offscreen", no_argument, NULL, 'o'},
                                         {0, 0, 0, 0}};
    struct label_app_options o = {0};
    label_view_options_init(&o.view);
    const char *script = NULL, *snapshot = NULL;
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        char tail;
        switch (c) {
        case 'r': o.recipe = optarg; break;
        case 's': script = optarg; break;
        case 'p': snapshot = optarg; break;
        case 'o': o.view.allow_offscreen = 1; break;
        case 'z':
            if (sscanf(optarg, "%dx%d%c", &o.view.width, &o.view.height, &tail) == 2)
                break;
            cli_say("--size '%s' is not WxH", optarg);
            return EXIT_USAGE;
        default: usage(stderr); return EXIT_USAGE;
        }
    }
    if (optind != argc - 1) {
        usage(stderr);
        return EXIT_USAGE;
    }
    o.dir = argv[optind];
    struct err e;
    err_clear(&e);
    struct label_app *a;
    if (label_app_new(&o, &a, &e)) {
        cli_say("%s", e.msg);
        return EXIT_ERROR;
    }
    int rc = ST_OK;
    if (script)
        rc = label_app_script(a, script, &e);
    if (!rc && snapshot && !(rc = label_app_draw(a, &e)))
        rc = label_view_snapshot(a->view, snapshot, &e);
    if (!rc && !script && !snapshot)
        rc = label_app_loop(a, &e);
    struct err fe;
    err_clear(&fe);
    int frc = label_app_free(a, &fe);
    if (rc || frc) {
        cli_say("%s", rc ? e.msg : fe.msg);
        return EXIT_ERROR;
    }
    return 0;
}
