/* screen_bench [REPEAT]: time of one screen_draw of the operator screen
 * (1280 x 800) with SDL's software renderer under the offscreen driver, a
 * simulated bench frame of 640x480 and of 1280x960 in the picture: an
 * unchanged screen (every string cached, the idle station's cost per
 * preview frame) and one whose frame-rate figure changes every frame (one
 * string rendered anew, the live station's usual case).  Prints median
 * (min-max) wall ms and CPU ms per draw over REPEAT draws (default 60).
 * The software renderer is the worst case: on a display SDL's GPU renderer
 * scales the picture and composes the screen.  Figures, not a test. */
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include <SDL.h>

#include "station/screen.h"
#include "station/simbench.h"
#include "tests/bench/benchkit.h"

#define MAX_REPEAT 1000

static int run(struct screen *scr, struct screen_state *st, int repeat, int changing)
{
    double wall[MAX_REPEAT], cpu[MAX_REPEAT];
    struct err e;
    for (int i = -3; i < repeat; i++) {   /* three draws to warm the cache */
        if (changing)
            st->fps = 25 + (i % 50) * 0.1;
        double w0 = bench_ms(CLOCK_MONOTONIC), c0 = bench_ms(CLOCK_PROCESS_CPUTIME_ID);
        if (screen_draw(scr, st, &e)) {
            fprintf(stderr, "screen_bench: %s\n", e.msg);
            return 1;
        }
        if (i >= 0) {
            wall[i] = bench_ms(CLOCK_MONOTONIC) - w0;
            cpu[i] = bench_ms(CLOCK_PROCESS_CPUTIME_ID) - c0;
        }
    }
    printf("  %-10s", changing ? "changing" : "unchanged");
    bench_figures("wall ms/draw", 18, wall, repeat);
    bench_figures("cpu ms/draw", 18, cpu, repeat);
    printf("\n");
    return 0;
}

int main(int argc, char **argv)
{
    int repeat = argc > 1 ? atoi(argv[1]) : 60;
    if (repeat < 1 || repeat > MAX_REPEAT)
        repeat = 60;
    setenv("SDL_VIDEODRIVER", "offscreen", 1);
    SDL_SetHint(SDL_HINT_RENDER_DRIVER, "software");
    struct screen_options o;
    screen_options_init(&o);
    o.allow_offscreen = 1;
    struct screen *scr;
    struct err e;
    if (screen_new(&o, &scr, &e)) {
        fprintf(stderr, "screen_bench: %s\n", e.msg);
        return 1;
    }
    printf("operator screen 1280x800, software renderer, median (min-max) over %d draws\n",
           repeat);
    struct simbench_conditions c;
    simbench_conditions_nominal(&c);
    static const int sizes[2][2] = {{640, 480}, {1280, 960}};
    int rc = 0;
    for (int k = 0; k < 2 && !rc; k++) {
        struct image *img, *truth;
        if (simbench_render(3, 1, &c, sizes[k][0], sizes[k][1], &img, &truth, NULL, &e)) {
            fprintf(stderr, "screen_bench: %s\n", e.msg);
            rc = 1;
            break;
        }
        struct screen_state st;
        screen_state_init(&st);
        st.frame = img;
        snprintf(st.recipe, sizeof st.recipe, "ostrel-cap38 version 1");
        snprintf(st.camera, sizeof st.camera, "simulated bench %d x %d", img->w, img->h);
        snprintf(st.status, sizeof st.status, "waiting for a part");
        st.fps = 30;
        printf("frame %dx%d\n", img->w, img->h);
        rc = run(scr, &st, repeat, 0) || run(scr, &st, repeat, 1);
        image_free(img);
        image_free(truth);
    }
    screen_free(scr);
    return rc;
}
