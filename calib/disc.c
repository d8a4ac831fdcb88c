#include "disc.h"

int disc_measure_scale(const struct image *classes, double diameter_mm, struct disc_scale *out,
                       struct err *e)
{
    if (classes->channels != 1)
        return err_set(e, ST_EINVAL, "class map must have one channel");
    if (!(diameter_mm > 0))
        return err_set(e, ST_ERANGE, "disc diameter %g mm must be positive", diameter_mm);
    int x0 = classes->w, y0 = classes->h, x1 = -1, y1 = -1;
    for (int y = 0; y < classes->h; y++)
        for (int x = 0; x < classes->w; x++)
            if (classes->px[(size_t)y * classes->w + x]) {
                if (x < x0) x0 = x;
                if (x > x1) x1 = x;
                if (y < y0) y0 = y;
                if (y > y1) y1 = y;
            }
    if (x1 < 0)
        return err_set(e, ST_EFORMAT, "no disc in view");
    if (x0 == 0 || y0 == 0 || x1 == classes->w - 1 || y1 == classes->h - 1)
        return err_set(e, ST_EFORMAT, "disc touches the frame border; it may be cut off");
    out->width_px = x1 - x0 + 1;
    out->height_px = y1 - y0 + 1;
    if (out->width_px < 20 || out->height_px < 20)
        return err_set(e, ST_ERANGE, "disc only %.0fx%.0f px; at least 20 px needed",
                       out->width_px, out->height_px);
    out->cx = 0.5 * (x0 + x1);
    out->cy = 0.5 * (y0 + y1);
    out->mm_per_px_x = diameter_mm / out->width_px;
    out->mm_per_px_y = diameter_mm / out->height_px;
    out->aspect = out->width_px / out->height_px;
    return ST_OK;
}
