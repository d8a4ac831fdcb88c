/* station recipe check|save|show FILE */
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "core/features.h"
#include "core/recipe.h"
#include "core/recipever.h"
#include "recipe_show.h"

static void usage(FILE *f)
{
    fprintf(f, "usage: station recipe check FILE\n"
               "       station recipe save FILE\n"
               "       station recipe show FILE [--json]\n\n"
               "check  validates a recipe: every section and key known, every value in range,\n"
               "       nothing missing. Problems are reported as FILE:LINE: what is wrong, with\n"
               "       exit status 3. The format is described in recipes/README.md.\n"
               "save   records the recipe's content after an edit: when it changed since the\n"
               "       last save, [product] version goes up by one (only that number is\n"
               "       rewritten) and FILE.version.json records the new content hash; unchanged\n"
               "       content keeps its version. The station refuses a recipe edited since\n"
               "       its last save, so every log record names the version it was judged by.\n"
               "show   prints the recipe in plain words: version, hashes, model and its\n"
               "       training data, classes, zones, tolerances, gates, trigger, camera,\n"
               "       calibration (--json: one JSON object on stdout).\n");
}

int cmd_recipe(int argc, char **argv)
{
    if (cli_wants_help(argc, argv)) {
        usage(stdout);
        return 0;
    }
    int json = argc == 4 && !strcmp(argv[3], "--json");
    if ((argc != 3 && !json) || (json && strcmp(argv[1], "show"))) {
        usage(stderr);
        return EXIT_USAGE;
    }
    const char *verb = argv[1], *path = argv[2];
    if (strcmp(verb, "check") && strcmp(verb, "save") && strcmp(verb, "show")) {
        usage(stderr);
        return EXIT_USAGE;
    }
    struct recipe r;
    if (cli_load_recipe(path, &r))
        return EXIT_ERROR;
    struct err e;
    err_clear(&e);
    if (!strcmp(verb, "save")) {
        struct recipever v;
        int changed;
        if (recipever_save(path, &v, &changed, &e)) {
            cli_say("%s", e.msg);
            return EXIT_ERROR;
        }
        fprintf(stderr, "%s: %s version %d (content SHA-256 %.12s..., recorded in %s.version.json)\n",
                path, changed ? "changed: now" : v.first_save ? "first save:" : "unchanged:",
                v.version, v.content_sha256, path);
        cli_emit(json_pack("{s:s,s:i,s:b,s:s}", "recipe", path, "version", v.version, "changed",
                           changed, "content_sha256", v.content_sha256));
        return 0;
    }
    if (!strcmp(verb, "show")) {
        json_t *o = recipe_show_json(&r, &e);
        if (!o) {
            cli_say("%s", e.msg);
            return EXIT_ERROR;
        }
        if (json)
            cli_emit(o);
        else {
            recipe_show_print(o, stdout);
            json_decref(o);
        }
        return 0;
    }
    int defects = 0;
    for (int c = 0; c < r.nclasses; c++)
        defects += r.cls[c].is_defect;
    fprintf(stderr, "%s: ok — product %s version %d, %d classes (%d defect), %d zones, %d features, "
                    "model %s\n",
            path, r.product, r.version, r.nclasses, defects, r.nzones, feat_count(&r.feat),
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
