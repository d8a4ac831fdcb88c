/* cornerdump: the board corners calib/corners finds in a PNG, one "x y" line
 * each in board order, for tests/ref/test_calib.py to compare with OpenCV.
 * usage: cornerdump IMAGE.png COLS ROWS */
#include <stdio.h>
#include <stdlib.h>

#include "calib/corners.h"
#include "core/pngio.h"

int main(int argc, char **argv)
{
    if (argc != 4) {
        fprintf(stderr, "usage: cornerdump IMAGE.png COLS ROWS\n");
        return 4;
    }
    int cols = atoi(argv[2]), rows = atoi(argv[3]);
    struct err e = {0};
    struct image *img = NULL;
    double *xy = malloc(2 * sizeof(double) * (cols > 0 && rows > 0 ? cols * rows : 1));
    int rc = xy ? pngio_load_rgb(argv[1], &img, &e) : ST_ENOMEM;
    if (!rc)
        rc = corners_find(img, cols, rows, xy, &e);
    if (rc)
        fprintf(stderr, "cornerdump: %s: %s\n", argv[1], e.msg);
    else
        for (int k = 0; k < cols * rows; k++)
            printf("%.4f %.4f\n", xy[2 * k], xy[2 * k + 1]);
    image_free(img);
    free(xy);
    return rc ? 3 : 0;
}
