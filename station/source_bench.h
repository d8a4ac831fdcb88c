/* source_bench: the simulated bench (station/simbench.h) as a live frame
 * source (station/source.h).
 *
 * The bench shows parts one after another, part N of the series being
 * simbench part (seed, N).  Each part's cycle is SOURCE_BENCH_EMPTY frames
 * of the empty bench, SOURCE_BENCH_SLIDE frames of the part sliding in from
 * the left, SOURCE_BENCH_STILL frames of it lying still (exactly
 * simbench_render's picture of that part, plus fresh noise) and
 * SOURCE_BENCH_SLIDE frames sliding out to the right.  The empty bench is
 * simbench_render_empty of the same part; while sliding, the part's
 * footprint (where the two renders differ) is moved over it.  Renders are
 * noise-free and the sensor noise (the conditions' std, growing with the
 * signal as simbench's does) is drawn afresh for every frame: a live camera
 * never sends the same bytes twice, and the frozen-camera checks must not
 * fire on a live bench.  The next part is rendered on a thread of its own
 * while the current one is shown.  Everything is a pure function of the
 * seed and the frame count: the same spec gives the same frames.
 *
 * Spec "bench" or "bench:KEY=VALUE,...": seed=N (default options.seed),
 * parts=N (then the bench stays empty; default no end), and two scripted
 * faults for tests: lost=START+COUNT (frames START..START+COUNT-1 are
 * SOURCE_LOST, the camera unplugged and back) and frozen=START+COUNT (those
 * frames repeat the frame before them byte for byte).  Size from
 * options.width x height, default 480 x 360 (the demo recipe's frames);
 * paced at options.fps. */
#ifndef ST_SOURCE_BENCH_H
#define ST_SOURCE_BENCH_H

#include "source.h"

#define SOURCE_BENCH_EMPTY 24
#define SOURCE_BENCH_SLIDE 12
#define SOURCE_BENCH_STILL 36
#define SOURCE_BENCH_CYCLE (SOURCE_BENCH_EMPTY + 2 * SOURCE_BENCH_SLIDE + SOURCE_BENCH_STILL)

int source_bench_open(const char *params, const struct source_options *o, struct source **out,
                      struct err *e);

#endif
