/* onnx: reads an ONNX model and cuts its graph at a named tensor, giving the
 * plain list of operations core/cnn.c runs.
 *
 * The file is parsed by protobuf-c code generated at build time from
 * Debian's onnx.proto (no parser of our own).  Weights are read from
 * raw_data (little-endian, whatever the host) or float_data; external data
 * files must lie in the model's folder: a relative location without "..",
 * opened component by component with O_NOFOLLOW (no symlinks), its offset
 * and length checked against the file's size.  Only FLOAT tensors are
 * accepted.
 *
 * onnx_graph_cut keeps only the nodes the named tensor depends on, in
 * topological order.  Operators: Conv, Relu, Clip, MaxPool, AveragePool,
 * BatchNormalization (inference form), Add, Concat, Identity, each with
 * ONNX's defaults for absent attributes (operators.md of opset 1..17);
 * any other: "FILE: node NAME: operator OP is not supported".  A
 * BatchNormalization whose input is a Conv used by nothing else is folded
 * into that Conv's weights and bias; a Relu or Clip after such a Conv is
 * fused into it (as an output clamp); Identity is an alias.  The cut
 * graph has exactly one variable input (the image): every other graph input
 * must be an initializer or given with onnx_model_bind (the conformance
 * tool feeds weights that way).  Tensors are seen with batch 1 as (C, H, W):
 * rank 4 drops N, rank 3 is taken as is.
 *
 * Every error is one line naming the file.  Nothing here keeps global
 * state; a model and a graph are read-only once built. */
#ifndef ST_ONNX_H
#define ST_ONNX_H

#include <limits.h>
#include <stddef.h>
#include <stdint.h>

#include "err.h"

#define ONNX_MAX_RANK 8
#define ONNX_MAX_FILE_BYTES (2048ull * 1024 * 1024) /* protobuf's own limit */

struct onnx_tensor {
    char name[128];
    int rank;
    int64_t dims[ONNX_MAX_RANK];
    size_t n;  /* product of dims */
    float *v;  /* row-major, as ONNX stores it */
};

/* Reads a serialised TensorProto (a test's input_0.pb) into t; free with
 * onnx_tensor_clear. */
int onnx_tensor_load(const char *path, struct onnx_tensor *t, struct err *e);
void onnx_tensor_clear(struct onnx_tensor *t);

struct onnx_model;
struct onnx_model *onnx_model_load(const char *path, struct err *e);
void onnx_model_free(struct onnx_model *m);
/* Names of the graph's inputs that are not initializers, in file order. */
int onnx_model_ninputs(const struct onnx_model *m);
const char *onnx_model_input(const struct onnx_model *m, int i);
/* The graph's outputs (NULL past the last). */
const char *onnx_model_output(const struct onnx_model *m, int i);
/* Gives graph input NAME a constant value (copied), as if an initializer. */
int onnx_model_bind(struct onnx_model *m, const char *name, const struct onnx_tensor *t, struct err *e);

enum onnx_kind { ONNX_CONV, ONNX_CLAMP, ONNX_MAXPOOL, ONNX_AVGPOOL, ONNX_ADD, ONNX_CONCAT, ONNX_AFFINE };
enum onnx_pad { ONNX_PAD_NOTSET, ONNX_PAD_SAME_UPPER, ONNX_PAD_SAME_LOWER, ONNX_PAD_VALID };

/* One operation.  Values are numbered: 0 is the graph's input, op i writes
 * value i + 1.  An operand < 0 is the op's constant (Add only). */
struct onnx_op {
    enum onnx_kind kind;
    char name[96];
    int nin;
    int *in;                 /* nin value numbers */
    /* Conv and pools: kernel, strides, dilations, pads top left bottom right */
    int kh, kw, sh, sw, dh, dw;
    int pads[4];
    enum onnx_pad auto_pad;
    int ceil_mode, count_include_pad;
    /* Conv: out = clamp(W * in + b, lo, hi); ONNX_CLAMP: clamp(in, lo, hi) */
    int group, cin, cout;
    float lo, hi;            /* -inf, +inf without a fused activation */
    float *w;                /* per group g: [kh][kw][cin / group] x [cout / group], row-major */
    float *b;                /* cout */
    /* ONNX_AFFINE (an unfolded BatchNormalization): out = in * scale[c] + b[c] */
    float *scale;
    /* ONNX_ADD with a constant: its (C, H, W) shape, 1 where it broadcasts */
    int kdims[3];
    float *konst;
};

struct onnx_graph {
    char path[PATH_MAX];      /* the model file, for messages */
    char input[128], output[128];
    int in_channels;         /* declared C of the input, -1 when not stated */
    int nops;
    struct onnx_op *ops;
    long long params;        /* weights and biases the cut uses, before folding */
};

/* Cuts m at tensor `output` ("" = the graph's first output). */
struct onnx_graph *onnx_graph_cut(const struct onnx_model *m, const char *output, struct err *e);
void onnx_graph_free(struct onnx_graph *g);

#endif
