/* benchkit: what the C benchmarks share — a clock and the "median
 * (min-max)" figure of a series of timings.  Header only: each benchmark is
 * one program. */
#ifndef ST_BENCHKIT_H
#define ST_BENCHKIT_H

#include <stdio.h>
#include <stdlib.h>
#include <time.h>

/* Milliseconds of clock c (CLOCK_MONOTONIC for wall time,
 * CLOCK_PROCESS_CPUTIME_ID for the CPU this process used). */
static inline double bench_ms(clockid_t c)
{
    struct timespec t;
    clock_gettime(c, &t);
    return t.tv_sec * 1e3 + t.tv_nsec / 1e6;
}

static inline int bench_cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Sorts ms[0..n) and prints "  WHAT  median (min-max)" with what padded to
 * width, without a line end. */
static inline void bench_figures(const char *what, int width, double *ms, int n)
{
    qsort(ms, (size_t)n, sizeof *ms, bench_cmp_double);
    printf("  %-*s %7.2f (%.2f-%.2f)", width, what, ms[n / 2], ms[0], ms[n - 1]);
}

#endif
