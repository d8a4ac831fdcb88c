/* cnnfeat: a cut pretrained network as per-pixel features (the [features]
 * cnn_* keys of a recipe).
 *
 * The spec names an ONNX file and the tensor to cut at; cnnfeat_resolve
 * (run when the recipe loads) opens the file, cuts the graph, checks the
 * channel subset, and records the file's SHA-256, the cut's parameter count
 * and its channel count, so feature counts and names never need the file
 * again.  A context made later refuses a file whose SHA-256 has changed.
 *
 * Input preparation, per channel c of the image (R, G, B, or B, G, R with
 * cnn_input = bgr; a grey frame gives three equal channels; a network with
 * a 1-channel input gets grey = 0.299 R + 0.587 G + 0.114 B):
 *     x = (byte * scale - mean[c]) / std[c]
 * which with scale 1/255, mean 0.485 0.456 0.406, std 0.229 0.224 0.225 is
 * torchvision's ImageNet normalisation.  No brightness normalisation is
 * applied: the network's own input statistics rule.
 *
 * Output: the cut tensor's selected channels, brought back to the frame's
 * size bilinearly when the cut is strided (core/cnn.h), written pixel-major
 * into a feature stack at a channel offset.  Feature k is named
 * "cnn_TENSOR_cC" with C the network's channel number.  With bf16 set
 * (cnn_precision = bf16) the convolutions core/cnn.h names take inputs and
 * weights rounded to bfloat16: a few tenths of a percent off, faster where
 * the CPU has AMX. */
#ifndef ST_CNNFEAT_H
#define ST_CNNFEAT_H

#include <limits.h>

#include "cnn.h"
#include "image.h"
#include "sha256.h"

#define CNNFEAT_MAX_CH 1024

struct cnnfeat_spec {
    int on;                       /* 0: no network in the recipe */
    char model[PATH_MAX];         /* resolved path of the .onnx file */
    char output[128];             /* tensor to cut at */
    char channels[256];           /* "" (all), "A-B" ranges and single numbers, blank separated */
    char mean_text[64], std_text[64];
    int bgr;                      /* 0: R G B order, 1: B G R */
    int bf16;                     /* 1: bfloat16 convolutions (core/cnn.h) */
    double scale;                 /* byte to network input, before mean and std */
    /* filled by cnnfeat_resolve */
    double mean[3], std[3];
    int nch;
    short ch[CNNFEAT_MAX_CH];
    char sha256[SHA256_HEX_LEN];
    long long params;
    int in_channels;              /* the network's input channels: 1 or 3 */
    int out_channels;             /* of the cut tensor */
};

/* Defaults: off, rgb, scale 1/255, mean 0, std 1. */
void cnnfeat_spec_default(struct cnnfeat_spec *s);

/* Reads and cuts the network and fills the resolved fields; errors name
 * where (a recipe path) and the file. */
int cnnfeat_resolve(struct cnnfeat_spec *s, const char *where, struct err *e);

/* Output shape of the cut for a w x h frame before resampling. */
int cnnfeat_shape(const struct cnnfeat_spec *s, int w, int h, int *c, int *oh, int *ow, struct err *e);

int cnnfeat_name(const struct cnnfeat_spec *s, int k, char *buf, size_t len);

struct cnnfeat_ctx;
struct cnnfeat_ctx *cnnfeat_ctx_new(const struct cnnfeat_spec *s, int w, int h, int threads, struct err *e);
void cnnfeat_ctx_free(struct cnnfeat_ctx *ctx);

/* The s->nch features of img at the pixels in box into
 * out->v[p * out->n + offset + k], bit for bit those of a box covering the
 * whole frame there (core/cnn.h); only the frame's pixels the network's
 * receptive field reaches from the box are read, and nothing outside box is
 * written. */
int cnnfeat_compute_box(struct cnnfeat_ctx *ctx, const struct image *img, const struct cnn_box *box,
                        struct fstack *out, int offset, struct err *e);

#endif
