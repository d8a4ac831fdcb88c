/* flat_bench [REPEAT]: time of flatfield_apply per frame at 640x480 and
 * 1280x960 (with a dark offset, the slower case), and of flat_compute from
 * 4 white and 2 dark frames.  The frames are a simulated bench part; the
 * field is built from rendered white frames with a 30% radial falloff.  One
 * JSON line per size: figures, not a test. */
#include <stdio.h>
#include <stdlib.h>

#include "calib/flat.h"
#include "station/cli.h"
#include "station/simbench.h"

static struct image *white(int w, int h, double level, struct err *e)
{
    struct image *img = image_new(w, h, 3, e);
    if (!img)
        return NULL;
    double cx = (w - 1) / 2.0, cy = (h - 1) / 2.0, rr = cx * cx + cy * cy;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double r2 = ((x - cx) * (x - cx) + (y - cy) * (y - cy)) / rr;
            uint8_t v = (uint8_t)(level * (1 - 0.3 * r2) + 0.5);
            for (int c = 0; c < 3; c++)
                img->px[((size_t)y * w + x) * 3 + c] = v;
        }
    return img;
}

static int bench(int w, int h, int repeat)
{
    struct simbench_conditions cond;
    simbench_conditions_nominal(&cond);
    struct err e;
    err_clear(&e);
    struct image *frame = NULL, *truth = NULL, *out = NULL, *wf[4] = {0}, *df[2] = {0};
    struct flat_field *f = NULL;
    const char *names[4] = {"white", "white", "white", "white"};
    int rc = simbench_render(7, 0, &cond, w, h, &frame, &truth, NULL, &e);
    for (int i = 0; i < 4 && !rc; i++)
        rc = !(wf[i] = white(w, h, 200, &e));
    for (int i = 0; i < 2 && !rc; i++)
        rc = !(df[i] = white(w, h, 10, &e));
    double t0 = cli_now_ms();
    if (!rc)
        rc = flat_compute(wf, names, 4, df, names, 2, FLAT_DEFAULT_SIGMA, &f, &e);
    double t1 = cli_now_ms();
    if (!rc)
        rc = !(out = image_new(w, h, 3, &e));
    double best = 1e30;
    for (int k = 0; k < repeat && !rc; k++) {
        double a = cli_now_ms();
        rc = flatfield_apply(f, frame, out, &e);
        double b = cli_now_ms() - a;
        best = b < best ? b : best;
    }
    if (!rc)
        printf("{\"bench\": \"flat\", \"size\": \"%dx%d\", \"apply_ms_best\": %.3f, "
               "\"compute_ms\": %.1f, \"repeat\": %d}\n",
               w, h, best, t1 - t0, repeat);
    else
        fprintf(stderr, "flat_bench: %s\n", e.msg);
    image_free(frame);
    image_free(truth);
    image_free(out);
    for (int i = 0; i < 4; i++)
        image_free(wf[i]);
    for (int i = 0; i < 2; i++)
        image_free(df[i]);
    flatfield_free(f);
    return rc ? 1 : 0;
}

int main(int argc, char **argv)
{
    int repeat = argc > 1 ? atoi(argv[1]) : 15;
    if (repeat < 1)
        repeat = 1;
    return bench(640, 480, repeat) || bench(1280, 960, repeat);
}
