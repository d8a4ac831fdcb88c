/* convk: the convolution kernels core/cnn.c calls for stride-1,
 * single-group convolutions, on zero-bordered pixel-major input rows.
 *
 * convk_run_direct: float32 on AVX-512F, output channels a multiple of 64;
 * convk_run_amx: bfloat16 on Intel AMX tiles (float32 sums), input and
 * output channels multiples of 32 and a row of at least 32 pixels, with
 * weights from convk_pack_amx and inputs from convk_convert_bf16.  Both
 * compute one output row of w pixels: out = clamp(sum over taps and input
 * channels + bias, op->lo, op->hi), pixel-major, os floats from one output
 * pixel to the next (cout, or a feature stack's pixel stride).  Input:
 * rows[ky] for each kernel row ky, pointing at the input pixel under output
 * pixel 0's first tap, cin floats per pixel, readable (zeros where the
 * padding is) up to pixel w - 1 + dw (kw - 1).  Each output pixel's sum is
 * taken in the same order wherever it lies in the row, so a pixel's value
 * does not depend on the row's extent.  The caller checks the CPU
 * (__builtin_cpu_supports("avx512f"), convk_has_amx) first; an AMX run is
 * bracketed per thread by convk_begin_amx and convk_end_amx.  Nothing here
 * allocates except convk_pack_amx, or keeps state. */
#ifndef ST_CONVK_H
#define ST_CONVK_H

#include <stddef.h>
#include <stdint.h>

#include "onnx.h"

/* input channels per pass over a row: the sums stay in registers over
 * every tap of this many channels (their weights, 147 KB for 3x3 x 64 x 64,
 * come from L2); measured faster than blocks of 16 whose weights stay in L1
 * but whose sums go out to memory and back between blocks */
#define CONVK_CI_BLOCK 64

void convk_run_direct(const float *const *rows, int cin, int cout, const struct onnx_op *op, int w, float *o, int os);

/* 1 when the CPU has AMX-TILE and AMX-BF16 and Linux granted the tile
 * state to this process (it asks: arch_prctl(ARCH_REQ_XCOMP_PERM)). */
int convk_has_amx(void);
uint16_t convk_bf16(float f);  /* round to nearest, ties to even */
void convk_convert_bf16(const float *src, uint16_t *dst, size_t n);
/* The same rounding kept as float32 (dst may be src): the operands of the
 * float32 kernels where bfloat16 is asked for and there is no AMX. */
void convk_round_bf16(const float *src, float *dst, size_t n);
/* op's weights as taps x k channels (zero up to kp, a multiple of 32) in
 * the tiles' order; NULL when out of memory.  Caller frees. */
uint16_t *convk_pack_amx(const struct onnx_op *op, int taps, int k, int kp);
void convk_begin_amx(void);
void convk_end_amx(void);
/* As convk_run_direct on bfloat16 rows (kp = cin channels), weights wq;
 * w >= 32. */
void convk_run_amx(const uint16_t *const *rows, const uint16_t *wq, int cin, int cout, const struct onnx_op *op,
                   int w, float *o, int os);

#endif
