/* screen_paint: the operator screen's colours and shapes, drawn with SDL's
 * own primitives (rectangles and SDL_RenderGeometry triangles).
 *
 * Colours come from the Okabe & Ito (2008) colour-universal-design palette,
 * which stays distinguishable under the common colour-vision deficiencies;
 * a verdict is never told by colour alone: each has its own word and its
 * own symbol (a tick for PASS, a cross for FAIL, a hatched square with a
 * question mark for NO VERDICT, a barred disc for an inspection halt).
 * Text on a verdict colour is black: WCAG 2.1's contrast ratio is 5.4:1 or
 * more on all four; text on the grey panels is light (7:1 or more), and the
 * verdict colours appear there only as fills, never as text. */
#ifndef ST_SCREEN_PAINT_H
#define ST_SCREEN_PAINT_H

#include <SDL.h>
#include <stdint.h>

#include "core/palette.h"
#include "screen_layout.h"

/* Okabe & Ito 2008, shared with the overlay (core/palette.h) */
#define SCREEN_RGB_GREEN PALETTE_GREEN
#define SCREEN_RGB_VERMILION PALETTE_VERMILION
#define SCREEN_RGB_YELLOW PALETTE_YELLOW
#define SCREEN_RGB_PURPLE PALETTE_PURPLE
#define SCREEN_RGB_ORANGE PALETTE_ORANGE
#define SCREEN_RGB_SKY PALETTE_SKY
#define SCREEN_RGB_BLACK PALETTE_INK
/* our own greys for the frame around the colours */
#define SCREEN_RGB_WAITING {140, 140, 140}  /* no verdict shown yet (6.2:1 to black) */
#define SCREEN_RGB_BACK {30, 30, 30}
#define SCREEN_RGB_PANEL {48, 48, 48}
#define SCREEN_RGB_TEXT {242, 242, 242}
#define SCREEN_RGB_DIM {190, 190, 190}

enum screen_symbol { SCREEN_SYM_NONE = 0, SCREEN_SYM_TICK, SCREEN_SYM_CROSS, SCREEN_SYM_QUESTION,
                     SCREEN_SYM_HALT };

void screen_paint_rect(SDL_Renderer *ren, struct screen_rect r, const uint8_t rgb[3]);
void screen_paint_frame(SDL_Renderer *ren, struct screen_rect r, int thick, const uint8_t rgb[3]);
/* A line of the given thickness with round ends. */
void screen_paint_line(SDL_Renderer *ren, float x0, float y0, float x1, float y1, float thick,
                       const uint8_t rgb[3]);
void screen_paint_disc(SDL_Renderer *ren, float cx, float cy, float radius, const uint8_t rgb[3]);
/* Diagonal stripes (45°) of width and gap `stripe` inside r. */
void screen_paint_hatch(SDL_Renderer *ren, struct screen_rect r, int stripe, const uint8_t rgb[3]);
/* The verdict symbol inside the square r, in ink on a panel of colour back
 * (the question mark's glyph is text, drawn by the caller in the square's
 * middle when sym is SCREEN_SYM_QUESTION). */
void screen_paint_symbol(SDL_Renderer *ren, struct screen_rect r, enum screen_symbol sym,
                         const uint8_t ink[3], const uint8_t back[3]);

#endif
