/* Fuzzes core/recipe.c (inih underneath, then every key's parser and the
 * whole-recipe checks).  The recipe lies alone in the harness's private
 * folder, so a model, calibration, mask or master it names is absent (a
 * calibration is then "cannot open") or, outside the folder, refused.
 * Checks recipe.h's promises: a loaded recipe has 2..16 classes, every path
 * inside its folder; a refusal has a message naming the file. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "core/recipe.h"
#include "fuzzkit.h"

static int inside(const struct recipe *r, const char *p)
{
    size_t n = strlen(r->dir);
    return !p[0] || (!strncmp(p, r->dir, n) && p[n] == '/' && !strstr(p + n, "/../"));
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzzkit_write(data, size, "r.ini");
    static struct recipe r;
    struct err e = {0};
    if (recipe_load(path, &r, &e) == ST_OK) {
        if (r.nclasses < 2 || r.nclasses > RECIPE_MAX_CLASSES || !inside(&r, r.model_path) ||
            !inside(&r, r.calibration_path) || !inside(&r, r.flat_field))
            abort();
        for (int i = 0; i < r.nmasters; i++)
            if (!inside(&r, r.masters[i].image))
                abort();
        for (int i = 0; i < r.nzones; i++)
            if (!inside(&r, r.zones[i].mask_path))
                abort();
    } else if (!strstr(e.msg, path)) {
        abort();
    }
    return 0;
}
