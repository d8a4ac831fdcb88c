/* Fuzzes core/onnx.c: an ONNX file (protobuf-c's generated reader, then our
 * checks of the graph, its tensors and attributes) and, when it loads, the
 * cut at its first output, which walks the nodes and folds the weights.
 * onnx.h promises one line naming the file on any refusal.  External data
 * the file names is absent from the harness's private folder. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "core/onnx.h"
#include "fuzzkit.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = fuzzkit_write(data, size, "m.onnx");
    struct err e = {0};
    struct onnx_model *m = onnx_model_load(path, &e);
    if (!m) {
        if (!strstr(e.msg, path))
            abort();
        return 0;
    }
    struct onnx_graph *g = onnx_graph_cut(m, "", &e);
    if (g) {
        if (g->nops < 0)
            abort();
        onnx_graph_free(g);
    } else if (!strstr(e.msg, path)) {
        abort();
    }
    onnx_model_free(m);
    return 0;
}
