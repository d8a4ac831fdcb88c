/* screen_panels: the operator screen's parts other than the picture, each
 * drawn into its rectangle of the layout from a struct screen_state.
 * Nothing here keeps state; text goes through the screen_text cache. */
#ifndef ST_SCREEN_PANELS_H
#define ST_SCREEN_PANELS_H

#include <SDL.h>

#include "screen.h"
#include "screen_layout.h"
#include "screen_paint.h"
#include "screen_text.h"

struct screen_canvas {
    SDL_Renderer *ren;
    struct screen_text *text;
    const struct screen_layout *L;
};

/* What the verdict panel shows: a halt outranks any verdict (a verdict
 * that is not durable is not shown), then the verdict, else "waiting". */
struct screen_look {
    uint8_t rgb[3];
    const char *word;
    enum screen_symbol sym;
};
struct screen_look screen_panels_look(const struct screen_state *st);

void screen_panels_header(const struct screen_canvas *c, const struct screen_state *st);
void screen_panels_verdict(const struct screen_canvas *c, const struct screen_state *st);
void screen_panels_reasons(const struct screen_canvas *c, const struct screen_state *st);
void screen_panels_bars(const struct screen_canvas *c, const struct screen_state *st);
void screen_panels_counters(const struct screen_canvas *c, const struct screen_state *st);
void screen_panels_input(const struct screen_canvas *c, const struct screen_state *st);
void screen_panels_caution(const struct screen_canvas *c);
/* Over the picture: the halt banner, the camera-lost notice, the help. */
void screen_panels_halted(const struct screen_canvas *c, const struct screen_state *st);
void screen_panels_camera_lost(const struct screen_canvas *c, const struct screen_state *st);
void screen_panels_help(const struct screen_canvas *c);

#endif
