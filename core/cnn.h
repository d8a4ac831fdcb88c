/* cnn: runs a cut ONNX graph (core/onnx.h) on one image on the CPU.
 *
 * A cnn_net is built for one input size (C, H, W) and one destination: it
 * infers every value's shape (ONNX's output-size formulas for Conv and the
 * pools, auto_pad SAME_UPPER / SAME_LOWER / VALID / NOTSET, ceil_mode with
 * PyTorch's and ONNX's rule that the last window must start inside the
 * input or its left padding) and allocates all buffers once.
 *
 * Layout: every tensor is pixel-major (H, W, C with C contiguous), the
 * layout of the feature stack.  The destination's rows are shared out in
 * bands over `threads` workers started per run; a worker makes its band's
 * rows top to bottom, each value keeping only the rows the next ones need
 * in a ring per worker (for a VGG-style stem, three rows of the 64-channel
 * intermediate: it stays in cache and never exists whole), each row made
 * once per band.  Convolutions: our own AVX-512 kernel (core/convk.h) where
 * output channels come in 64s, otherwise GEMM through OpenBLAS (one
 * cblas_sgemm per kernel tap for stride 1 and one group, im2col per output
 * row else), held to one thread per call so the two do not oversubscribe
 * (openblas_set_num_threads(1), the one process-wide setting this module
 * changes).
 *
 * A run can be asked for a box of the destination: only the rows and
 * columns of every value that the box needs are made, and the box's pixels
 * are bit for bit those of a run over the whole destination (each pixel's
 * sums are taken in the same order whatever the box); nothing outside the
 * box is written.
 *
 * Destination: out_w x out_h pixels, `stride` floats per pixel, `nch`
 * channels (a list, or all when ch is NULL) written at dst[p * stride + k].
 * When out_w x out_h differs from the graph's output size (a strided cut),
 * the output is resampled bilinearly with half-pixel centres: source
 * coordinate (x + 0.5) * in / out - 0.5, clamped to the edge, which is
 * torch.nn.functional.interpolate(mode='bilinear', align_corners=False) and
 * OpenCV's INTER_LINEAR resize.
 *
 * With dest->bf16 the stride-1 single-group convolutions with input and
 * output channels in multiples of 32 (and at least 32 output columns), and
 * an RGB stem's patches of up to 32 values, take inputs and weights rounded
 * to bfloat16 (nearest even) and sum in float32; the others stay float32.
 * On a CPU with Intel AMX (AMX-TILE and AMX-BF16, granted to the process by
 * arch_prctl(ARCH_REQ_XCOMP_PERM), a second process-wide setting) the tiles
 * multiply; elsewhere the float32 kernels run on the rounded operands, slower
 * than float32 but the same features up to the order of the sums, so a
 * model trained with them runs on either machine.  Off by default: results
 * move by a few tenths of a percent of the output's scale. */
#ifndef ST_CNN_H
#define ST_CNN_H

#include "onnx.h"

#define CNN_MAX_THREADS 64

struct cnn_dest {
    int w, h;        /* destination pixels (0, 0: the output's own size) */
    int stride;      /* floats per destination pixel (0: nch) */
    int nch;         /* channels written (0: all) */
    const int *ch;   /* nch channel indices, or NULL for 0..nch-1 */
    int bf16;        /* 1: bfloat16 convolutions on AMX tiles where the CPU has them */
};

/* Output shape of g for an input of c x h x w, without allocating. */
int cnn_shape(const struct onnx_graph *g, int c, int h, int w, int *oc, int *oh, int *ow, struct err *e);

/* Multiply-adds of one run (for the benchmark's GFLOP figure). */
double cnn_macs(const struct onnx_graph *g, int c, int h, int w);

struct cnn_net;
struct cnn_net *cnn_net_new(const struct onnx_graph *g, int c, int h, int w, const struct cnn_dest *dest,
                            int threads, struct err *e);
void cnn_net_free(struct cnn_net *net);

/* Destination pixels [x0, x1) x [y0, y1). */
struct cnn_box {
    int x0, y0, x1, y1;
};

/* Runs the net on in (h x w x c floats, pixel-major) into dst. */
int cnn_net_run(struct cnn_net *net, const float *in, float *dst, struct err *e);
/* As cnn_net_run for the destination's pixels in box only; of in, only the
 * pixels cnn_net_input_box names are read. */
int cnn_net_run_box(struct cnn_net *net, const float *in, float *dst, const struct cnn_box *box, struct err *e);
/* The input pixels a run over box reads, into in_box. */
int cnn_net_input_box(const struct cnn_net *net, const struct cnn_box *box, struct cnn_box *in_box, struct err *e);

#endif
