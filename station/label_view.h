/* label_view: the labelling tool's window (SDL2, text through
 * station/screen_text.h) and its zoom arithmetic.
 *
 * The window is the picture area on the left, a panel on the right (the
 * dataset, the image list with a mark per image, the class legend with
 * its keys, the tool, the quick model, the keys) and a status line along
 * the bottom.  The picture is the image with the labels blended over it
 * (55 % class colour) and, when shown, the quick model's prediction under
 * them (35 %); it is drawn nearest-neighbour at any zoom, so every image
 * pixel is a crisp square.  Drawing goes into a texture so a snapshot can
 * read the window back.  SDL's offscreen and dummy drivers are refused
 * unless allow_offscreen is set (tests and snapshots): an engineer must
 * never paint into a window nobody sees.
 *
 * label_zoom is pure arithmetic: window pixel (wx, wy) shows image pixel
 * (floor((wx - ox) / scale), floor((wy - oy) / scale)). */
#ifndef ST_LABEL_VIEW_H
#define ST_LABEL_VIEW_H

#include "core/err.h"
#include "screen_layout.h"

#define LABEL_ZOOM_MIN 0.1
#define LABEL_ZOOM_MAX 40.0
#define LABEL_ZOOM_STEP 1.25

struct label_zoom {
    double scale, ox, oy;     /* window pixels per image pixel; image origin in the window */
    struct screen_rect area;  /* the picture area */
};

/* The whole image centred in the area. */
void label_zoom_fit(struct label_zoom *z, struct screen_rect area, int img_w, int img_h);
/* Multiplies the scale by factor (clamped to the limits) keeping the image
 * point under window point (wx, wy) where it is. */
void label_zoom_at(struct label_zoom *z, double wx, double wy, double factor);
void label_zoom_pan(struct label_zoom *z, double dx, double dy);
/* The image pixel under a window pixel (may lie outside the image). */
void label_zoom_to_image(const struct label_zoom *z, int wx, int wy, int *ix, int *iy);

struct label_view_options {
    int width, height;        /* default 1280 x 800 */
    const char *font;         /* NULL: DejaVu Sans */
    int allow_offscreen;
};
void label_view_options_init(struct label_view_options *o);

struct label_view;
struct label_app;

int label_view_new(const struct label_view_options *o, struct label_view **out, struct err *e);
void label_view_free(struct label_view *v);
struct screen_rect label_view_picture_area(const struct label_view *v);

/* Draws the session; banner, when not NULL, is shown across the picture
 * (the quick model's "training" while it blocks). */
int label_view_draw(struct label_view *v, const struct label_app *a, const char *banner,
                    struct err *e);
/* The last drawn window as a PNG. */
int label_view_snapshot(struct label_view *v, const char *path, struct err *e);

#endif
