/* screen_layout: where everything on the operator screen goes — pure
 * geometry, no SDL, so the tests can check it and find the panels in a
 * snapshot.
 *
 * The screen is cut into a header (recipe, status, camera, calibration),
 * the live picture on the left (about 60 % of the width, the largest thing
 * on screen because the operator looks at the part), a column on the right
 * (verdict panel, reasons, per-class bars, shift counters, top to bottom),
 * the input line and, along the whole bottom edge, the caution.  Sizes
 * follow the window; text sizes follow its height (screen_layout_text_px),
 * never below what is readable at arm's length. */
#ifndef ST_SCREEN_LAYOUT_H
#define ST_SCREEN_LAYOUT_H

struct screen_rect {
    int x, y, w, h;
};

struct screen_layout {
    int w, h;
    struct screen_rect header, picture, verdict, symbol, word, reasons, bars, counters, input,
        caution, help;
    int pad;
};

enum screen_text_size { SCREEN_PX_SMALL = 0, SCREEN_PX_BODY, SCREEN_PX_TITLE, SCREEN_PX_HUGE,
                        SCREEN_NPX };

void screen_layout_compute(int w, int h, struct screen_layout *L);

/* Font pixel size for the window height h: 18, 22, 26 and 64 px at 800. */
int screen_layout_text_px(int h, enum screen_text_size size);

/* The largest rectangle of an img_w x img_h picture's aspect inside area,
 * centred (letterboxed); rounded down so it never spills out of area. */
struct screen_rect screen_layout_fit(int img_w, int img_h, struct screen_rect area);

#endif
