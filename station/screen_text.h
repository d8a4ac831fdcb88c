/* screen_text: the operator screen's text through SDL2_ttf, with a cache
 * of rendered strings.
 *
 * Two faces at the layout's four sizes (station/screen_layout.h): regular
 * for small and body text, bold for titles and the verdict word; DejaVu
 * Sans from fonts-dejavu-core unless a path is given (then that one file
 * serves both).  A string once rendered keeps its texture while it is drawn
 * in every frame, so an unchanged screen costs no glyph rendering; strings
 * not drawn in a frame are dropped at screen_text_end_frame.  Text that
 * does not fit its width is cut with "…" (or wrapped when asked). */
#ifndef ST_SCREEN_TEXT_H
#define ST_SCREEN_TEXT_H

#include <SDL.h>
#include <stdint.h>

#include "core/err.h"
#include "screen_layout.h"

#define SCREEN_FONT_REGULAR "/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf"
#define SCREEN_FONT_BOLD "/usr/share/fonts/truetype/dejavu/DejaVuSans-Bold.ttf"

enum screen_align { SCREEN_LEFT = 0, SCREEN_RIGHT, SCREEN_CENTRE };

struct screen_text;

/* Opens the fonts sized for a window h pixels high; the error names every
 * path tried. */
int screen_text_new(SDL_Renderer *ren, int h, const char *font, struct screen_text **out,
                    struct err *e);
void screen_text_free(struct screen_text *t);

/* Draws s with its top at y; x is its left edge, right edge or centre by
 * align.  max_w > 0 cuts a longer single line with "…"; wrap > 0 instead
 * wraps at that width.  Returns the rectangle drawn (empty for an empty
 * string or when rendering failed: text is best effort, the screen goes
 * on). */
struct screen_rect screen_text_draw(struct screen_text *t, enum screen_text_size size,
                                    const char *s, const uint8_t rgb[3], int x, int y,
                                    enum screen_align align, int max_w, int wrap);

/* The size screen_text_draw would give, without drawing (the rendering is
 * kept for the draw that follows). */
struct screen_rect screen_text_measure(struct screen_text *t, enum screen_text_size size,
                                       const char *s, const uint8_t rgb[3], int max_w, int wrap);

/* Line height of a size in pixels. */
int screen_text_line(const struct screen_text *t, enum screen_text_size size);

/* Forgets the strings not drawn since the last call. */
void screen_text_end_frame(struct screen_text *t);

#endif
