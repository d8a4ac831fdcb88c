/* cnn_bench: times core/cnn on a cut ONNX graph, and measures the machine's
 * FP32 FMA peak with a small kernel of independent fused multiply-adds.
 *
 *   cnn_bench MODEL.onnx TENSOR WIDTH HEIGHT THREADS REPS [bf16]
 *   cnn_bench --peak THREADS
 *
 * The first prints one line "cnn w=.. h=.. threads=.. gflop=.. ms_median=..
 * ms_min=.. cpu_ms_median=.. cpu_ms_min=..": the whole feature path from a
 * prepared float frame to a pixel-major stack of every channel of TENSOR at
 * full resolution, in wall-clock time and in CPU time of all its threads.
 * The second prints "peak threads=.. gflops=.. gflops_per_cpu_s=..": the
 * rate over the wall clock, and per second of CPU time the threads got
 * (what one core does while it runs, whatever else shares the machine).
 * tests/bench/cnn_bench.py runs both beside torch. */
#include <immintrin.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "core/cnn.h"
#include "core/onnx.h"
#include "../tools/toolarg.h"

static double clock_ms(clockid_t id)
{
    struct timespec ts;
    clock_gettime(id, &ts);
    return ts.tv_sec * 1e3 + ts.tv_nsec / 1e6;
}

static double now_ms(void)
{
    return clock_ms(CLOCK_MONOTONIC);
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

#define PEAK_ITERS 50000000L
#define PEAK_ACC 12

/* Twelve named accumulators, so they stay in registers: enough independent
 * chains to cover the FMA latency on both ports. */
#define FMA12(f)                                                                                                   \
    do {                                                                                                           \
        a0 = f(a0, m, c); a1 = f(a1, m, c); a2 = f(a2, m, c); a3 = f(a3, m, c); a4 = f(a4, m, c);                  \
        a5 = f(a5, m, c); a6 = f(a6, m, c); a7 = f(a7, m, c); a8 = f(a8, m, c); a9 = f(a9, m, c);                  \
        a10 = f(a10, m, c); a11 = f(a11, m, c);                                                                    \
    } while (0)

__attribute__((target("avx512f"))) static float fma_loop512(void)
{
    __m512 m = _mm512_set1_ps(0.999999f), c = _mm512_set1_ps(1e-7f);
    /* distinct starts, or the compiler merges equal chains */
    __m512 a0 = _mm512_set1_ps(1), a1 = _mm512_set1_ps(2), a2 = _mm512_set1_ps(3), a3 = _mm512_set1_ps(4);
    __m512 a4 = _mm512_set1_ps(5), a5 = _mm512_set1_ps(6), a6 = _mm512_set1_ps(7), a7 = _mm512_set1_ps(8);
    __m512 a8 = _mm512_set1_ps(9), a9 = _mm512_set1_ps(10), a10 = _mm512_set1_ps(11), a11 = _mm512_set1_ps(12);
    for (long it = 0; it < PEAK_ITERS; it++)
        FMA12(_mm512_fmadd_ps);
    __m512 s = _mm512_add_ps(_mm512_add_ps(_mm512_add_ps(a0, a1), _mm512_add_ps(a2, a3)),
                             _mm512_add_ps(_mm512_add_ps(a4, a5), _mm512_add_ps(a6, a7)));
    s = _mm512_add_ps(s, _mm512_add_ps(_mm512_add_ps(a8, a9), _mm512_add_ps(a10, a11)));
    return _mm512_reduce_add_ps(s);
}

__attribute__((target("avx2,fma"))) static float fma_loop256(void)
{
    __m256 m = _mm256_set1_ps(0.999999f), c = _mm256_set1_ps(1e-7f);
    __m256 a0 = _mm256_set1_ps(1), a1 = _mm256_set1_ps(2), a2 = _mm256_set1_ps(3), a3 = _mm256_set1_ps(4);
    __m256 a4 = _mm256_set1_ps(5), a5 = _mm256_set1_ps(6), a6 = _mm256_set1_ps(7), a7 = _mm256_set1_ps(8);
    __m256 a8 = _mm256_set1_ps(9), a9 = _mm256_set1_ps(10), a10 = _mm256_set1_ps(11), a11 = _mm256_set1_ps(12);
    for (long it = 0; it < PEAK_ITERS; it++)
        FMA12(_mm256_fmadd_ps);
    __m256 s = _mm256_add_ps(_mm256_add_ps(_mm256_add_ps(a0, a1), _mm256_add_ps(a2, a3)),
                             _mm256_add_ps(_mm256_add_ps(a4, a5), _mm256_add_ps(a6, a7)));
    s = _mm256_add_ps(s, _mm256_add_ps(_mm256_add_ps(a8, a9), _mm256_add_ps(a10, a11)));
    float t[8], r = 0;
    _mm256_storeu_ps(t, s);
    for (int k = 0; k < 8; k++)
        r += t[k];
    return r;
}

static int lanes(void)
{
    return __builtin_cpu_supports("avx512f") ? 16 : 8;
}

struct peak_run {
    float sink;
    double cpu_ms;
};

static void *peak_thread(void *arg)
{
    struct peak_run *r = arg;
    double c0 = clock_ms(CLOCK_THREAD_CPUTIME_ID);
    r->sink = lanes() == 16 ? fma_loop512() : fma_loop256();
    r->cpu_ms = clock_ms(CLOCK_THREAD_CPUTIME_ID) - c0;
    return NULL;
}

static int peak(int threads)
{
    pthread_t t[64];
    struct peak_run r[64];
    double t0 = now_ms(), cpu = 0;
    for (int i = 0; i < threads; i++)
        pthread_create(&t[i], NULL, peak_thread, &r[i]);
    for (int i = 0; i < threads; i++) {
        pthread_join(t[i], NULL);
        cpu += r[i].cpu_ms;
    }
    double ms = now_ms() - t0;
    double flop = 2.0 * PEAK_ITERS * PEAK_ACC * lanes() * threads;
    printf("peak threads=%d lanes=%d gflops=%.1f gflops_per_cpu_s=%.1f (sink %g)\n", threads, lanes(),
           flop / ms / 1e6, flop / cpu / 1e6, r[0].sink);
    return 0;
}

int main(int argc, char **argv)
{
    int w, h, threads, reps;
    if (argc == 3 && strcmp(argv[1], "--peak") == 0 && !parse_int(argv[2], &threads) && threads >= 1 &&
        threads <= 64)
        return peak(threads);
    int bf16 = argc == 8 && strcmp(argv[7], "bf16") == 0;
    if ((argc != 7 && !bf16) || parse_int(argv[3], &w) || parse_int(argv[4], &h) || parse_int(argv[5], &threads) ||
        parse_int(argv[6], &reps) || reps < 1 || reps > 1000) {
        fprintf(stderr, "usage: cnn_bench MODEL.onnx TENSOR WIDTH HEIGHT THREADS REPS [bf16] | --peak THREADS\n");
        return 4;
    }
    struct err e = {0};
    struct onnx_model *m = onnx_model_load(argv[1], &e);
    struct onnx_graph *g = m ? onnx_graph_cut(m, argv[2], &e) : NULL;
    int oc, oh, ow;
    if (!g || cnn_shape(g, 3, h, w, &oc, &oh, &ow, &e)) {
        fprintf(stderr, "cnn_bench: %s\n", e.msg);
        return 3;
    }
    struct cnn_dest d = {.w = w, .h = h, .bf16 = bf16};
    struct cnn_net *net = cnn_net_new(g, 3, h, w, &d, threads, &e);
    float *in = malloc((size_t)w * h * 3 * sizeof *in), *out = malloc((size_t)w * h * oc * sizeof *out);
    double *ms = malloc((size_t)reps * 2 * sizeof *ms), *cpu = ms + reps;
    if (!net || !in || !out || !ms) {
        fprintf(stderr, "cnn_bench: %s\n", net ? "out of memory" : e.msg);
        return 3;
    }
    srand(7);
    for (size_t i = 0; i < (size_t)w * h * 3; i++)
        in[i] = (float)rand() / RAND_MAX - 0.5f;
    cnn_net_run(net, in, out, &e); /* warm: pages touched, code paged in */
    for (int r = 0; r < reps; r++) {
        double t0 = now_ms(), c0 = clock_ms(CLOCK_PROCESS_CPUTIME_ID);
        cnn_net_run(net, in, out, &e);
        ms[r] = now_ms() - t0;
        cpu[r] = clock_ms(CLOCK_PROCESS_CPUTIME_ID) - c0;
    }
    qsort(ms, (size_t)reps, sizeof *ms, cmp_double);
    qsort(cpu, (size_t)reps, sizeof *cpu, cmp_double);
    printf("cnn w=%d h=%d threads=%d gflop=%.2f ms_median=%.1f ms_min=%.1f cpu_ms_median=%.1f cpu_ms_min=%.1f "
           "checksum=%g\n", w, h, threads, 2 * cnn_macs(g, 3, h, w) / 1e9, ms[reps / 2], ms[0], cpu[reps / 2],
           cpu[0], out[(size_t)w * h * oc / 2]);
    cnn_net_free(net);
    onnx_graph_free(g);
    onnx_model_free(m);
    free(in);
    free(out);
    free(ms);
    return 0;
}
