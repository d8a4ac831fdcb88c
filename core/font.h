/* font: a small bitmap font of our own for the pictures people read.
 *
 * Glyphs are 5 x 8 cells (7 rows above the baseline, one for descenders),
 * drawn from the pattern table in font.c, advancing 6 cells per character,
 * at any integer scale (each cell a scale x scale block).  It covers space,
 * digits, A-Z, a-z and . , - : ; # > < % / ( ) + = ! ? ' _ ; text is UTF-8:
 * "²" has its own glyph, the dashes "–" and "—" draw as '-', and anything
 * else as '?'.  Drawing clips to the image, so text may run off any edge.
 * No heap, no state. */
#ifndef ST_FONT_H
#define ST_FONT_H

#include <stdint.h>

#include "image.h"

#define FONT_CELL_W 5
#define FONT_CELL_H 8
#define FONT_ADVANCE 6

/* Width in pixels of s drawn at scale: advance per glyph less the last gap. */
int font_text_width(const char *s, int scale);

/* Draws s with its top-left cell at (x, y) into a 3-channel image. */
void font_draw_text(struct image *img, int x, int y, const char *s, int scale,
                    const uint8_t rgb[3]);

#endif
