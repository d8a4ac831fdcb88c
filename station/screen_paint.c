#include "screen_paint.h"

#include <math.h>

static void colour(SDL_Renderer *ren, const uint8_t rgb[3])
{
    SDL_SetRenderDrawColor(ren, rgb[0], rgb[1], rgb[2], 255);
}

void screen_paint_rect(SDL_Renderer *ren, struct screen_rect r, const uint8_t rgb[3])
{
    SDL_Rect q = {r.x, r.y, r.w, r.h};
    colour(ren, rgb);
    SDL_RenderFillRect(ren, &q);
}

void screen_paint_frame(SDL_Renderer *ren, struct screen_rect r, int thick, const uint8_t rgb[3])
{
    screen_paint_rect(ren, (struct screen_rect){r.x, r.y, r.w, thick}, rgb);
    screen_paint_rect(ren, (struct screen_rect){r.x, r.y + r.h - thick, r.w, thick}, rgb);
    screen_paint_rect(ren, (struct screen_rect){r.x, r.y, thick, r.h}, rgb);
    screen_paint_rect(ren, (struct screen_rect){r.x + r.w - thick, r.y, thick, r.h}, rgb);
}

static SDL_Vertex vertex(float x, float y, const uint8_t rgb[3])
{
    return (SDL_Vertex){{x, y}, {rgb[0], rgb[1], rgb[2], 255}, {0, 0}};
}

void screen_paint_disc(SDL_Renderer *ren, float cx, float cy, float radius, const uint8_t rgb[3])
{
    enum { SEG = 32 };
    SDL_Vertex v[SEG + 1];
    int idx[SEG * 3];
    v[0] = vertex(cx, cy, rgb);
    for (int i = 0; i < SEG; i++) {
        double a = 6.283185307179586 * i / SEG;   /* 2 pi */
        v[i + 1] = vertex(cx + radius * (float)cos(a), cy + radius * (float)sin(a), rgb);
        idx[3 * i] = 0;
        idx[3 * i + 1] = i + 1;
        idx[3 * i + 2] = i + 1 < SEG ? i + 2 : 1;
    }
    SDL_RenderGeometry(ren, NULL, v, SEG + 1, idx, SEG * 3);
}

void screen_paint_line(SDL_Renderer *ren, float x0, float y0, float x1, float y1, float thick,
                       const uint8_t rgb[3])
{
    float dx = x1 - x0, dy = y1 - y0, len = sqrtf(dx * dx + dy * dy);
    if (len > 0) {
        float nx = -dy / len * thick / 2, ny = dx / len * thick / 2;
        SDL_Vertex v[4] = {vertex(x0 + nx, y0 + ny, rgb), vertex(x1 + nx, y1 + ny, rgb),
                           vertex(x1 - nx, y1 - ny, rgb), vertex(x0 - nx, y0 - ny, rgb)};
        int idx[6] = {0, 1, 2, 0, 2, 3};
        SDL_RenderGeometry(ren, NULL, v, 4, idx, 6);
    }
    screen_paint_disc(ren, x0, y0, thick / 2, rgb);
    screen_paint_disc(ren, x1, y1, thick / 2, rgb);
}

void screen_paint_hatch(SDL_Renderer *ren, struct screen_rect r, int stripe, const uint8_t rgb[3])
{
    SDL_Rect clip = {r.x, r.y, r.w, r.h};
    SDL_RenderSetClipRect(ren, &clip);
    /* each stripe a parallelogram from the bottom edge up and to the right */
    for (int x = r.x - r.h; x < r.x + r.w; x += 2 * stripe) {
        float b = (float)(r.y + r.h), t = (float)r.y;
        SDL_Vertex v[4] = {vertex((float)x, b, rgb), vertex((float)(x + stripe), b, rgb),
                           vertex((float)(x + stripe + r.h), t, rgb),
                           vertex((float)(x + r.h), t, rgb)};
        int idx[6] = {0, 1, 2, 0, 2, 3};
        SDL_RenderGeometry(ren, NULL, v, 4, idx, 6);
    }
    SDL_RenderSetClipRect(ren, NULL);
}

void screen_paint_symbol(SDL_Renderer *ren, struct screen_rect r, enum screen_symbol sym,
                         const uint8_t ink[3], const uint8_t back[3])
{
    float s = (float)r.w, x = (float)r.x, y = (float)r.y, th = s / 8;
    switch (sym) {
    case SCREEN_SYM_TICK:
        screen_paint_line(ren, x + 0.18f * s, y + 0.55f * s, x + 0.40f * s, y + 0.78f * s, th, ink);
        screen_paint_line(ren, x + 0.40f * s, y + 0.78f * s, x + 0.84f * s, y + 0.22f * s, th, ink);
        break;
    case SCREEN_SYM_CROSS:
        screen_paint_line(ren, x + 0.2f * s, y + 0.2f * s, x + 0.8f * s, y + 0.8f * s, th, ink);
        screen_paint_line(ren, x + 0.8f * s, y + 0.2f * s, x + 0.2f * s, y + 0.8f * s, th, ink);
        break;
    case SCREEN_SYM_QUESTION: {
        /* a hatched square; its middle is left clear for the glyph */
        int t = r.w / 16 > 2 ? r.w / 16 : 2;
        screen_paint_hatch(ren, r, r.w / 12 > 2 ? r.w / 12 : 2, ink);
        screen_paint_frame(ren, r, t, ink);
        screen_paint_rect(ren, (struct screen_rect){r.x + r.w / 4, r.y + r.h / 6, r.w / 2,
                                                    r.h * 2 / 3}, back);
        break;
    }
    case SCREEN_SYM_HALT:
        screen_paint_disc(ren, x + s / 2, y + s / 2, s * 0.42f, ink);
        screen_paint_rect(ren, (struct screen_rect){r.x + r.w / 5, r.y + r.h * 2 / 5, r.w * 3 / 5,
                                                    r.h / 5}, back);
        break;
    case SCREEN_SYM_NONE:
        break;
    }
}
