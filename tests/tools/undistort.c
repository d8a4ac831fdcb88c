/* undistort FX FY CX CY K1 K2: reads "u v" lines on stdin and prints each
 * point corrected by lensmodel_correct, for tests/ref/test_calib.py to compare
 * with cv2.undistortPoints. */
#include <stdio.h>
#include <stdlib.h>

#include "core/lensmodel.h"

int main(int argc, char **argv)
{
    if (argc != 7) {
        fprintf(stderr, "usage: undistort FX FY CX CY K1 K2 < points\n");
        return 4;
    }
    struct lens_model l = {atof(argv[1]), atof(argv[2]), atof(argv[3]), atof(argv[4]),
                           atof(argv[5]), atof(argv[6])};
    double u, v, x, y;
    while (scanf("%lf %lf", &u, &v) == 2) {
        lensmodel_correct(&l, u, v, &x, &y);
        printf("%.9f %.9f\n", x, y);
    }
    return 0;
}
