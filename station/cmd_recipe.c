/* station recipe check FILE */
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "core/features.h"
#include "core/recipe.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station recipe check FILE\n\n"
               "Validates a recipe: every section and key known, every value in range,\n"
               "nothing missing. Problems are reported as FILE:LINE: what is wrong, with\n"
               "exit status 3. The format is described in recipes/README.md.\n");
}

int cmd_recipe(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    if (argc != 3 || strcmp(argv[1], "check") != 0) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct recipe r;
    if (cli_load_recipe(argv[2], &r))
        return EXIT_ERROR;
    int defects = 0;
    for (int c = 0; c < r.nclasses; c++)
        defects += r.cls[c].is_defect;
    fprintf(stderr, "%s: ok — product %s version %d, %d classes (%d defect), %d zones, %d features, "
                    "model %s\n",
            argv[2], r.product, r.version, r.nclasses, defects, r.nzones, feat_count(&r.feat),
            r.model_path);
    if (r.feat.cnn.on) {
        const struct cnnfeat_spec *c = &r.feat.cnn;
        int oc, oh, ow;
        struct err e = {0};
        if (cnnfeat_shape(c, 640, 480, &oc, &oh, &ow, &e)) {
            fprintf(stderr, "%s\n", e.msg);
            return EXIT_ERROR;
        }
        fprintf(stderr, "%s: network %s cut at %s: %lld parameters, output %d x %d x %d (C x H x W) for a "
                        "640x480 frame%s; %d of its channels used\n",
                argv[2], c->model, c->output[0] ? c->output : "(graph output)", c->params, oc, oh, ow,
                oh != 480 || ow != 640 ? ", brought back to full size bilinearly" : "", c->nch);
    }
    return 0;
}
