/* Fuzzes core/model.c's reader of MODEL.meta.json, the metadata beside a
 * trained model.  model.h promises 2..16 classes and sample counts per
 * class on success; a refusal names the file. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "core/model.h"
#include "fuzzkit.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *meta = fuzzkit_write(data, size, "m.json.meta.json");
    char model[512];
    snprintf(model, sizeof model, "%.*s", (int)(strlen(meta) - strlen(".meta.json")), meta);
    static struct model_meta m;
    struct err e = {0};
    if (model_meta_load(model, &m, &e) == ST_OK) {
        if (m.nclasses < 2 || m.nclasses > RECIPE_MAX_CLASSES || m.format < 1 ||
            m.format > MODEL_META_FORMAT || strlen(m.model_sha256) >= SHA256_HEX_LEN)
            abort();
    } else if (!strstr(e.msg, meta)) {
        abort();
    }
    return 0;
}
