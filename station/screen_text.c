#include "screen_text.h"

#include <SDL_ttf.h>
#include <stdlib.h>
#include <string.h>

/* More than one screen's distinct strings (about 60 on a busy screen). */
#define CACHE_SLOTS 160
#define CACHE_KEY 320

struct slot {
    SDL_Texture *tex;
    int w, h;
    int size, max_w, wrap;
    uint32_t rgb;
    unsigned frame;   /* the frame it was last drawn in */
    char s[CACHE_KEY];
};

struct screen_text {
    SDL_Renderer *ren;
    TTF_Font *font[SCREEN_NPX];
    unsigned frame;
    int next_victim;
    struct slot slot[CACHE_SLOTS];
};

static int open_fonts(struct screen_text *t, int h, const char *font, struct err *e)
{
    for (int i = 0; i < SCREEN_NPX; i++) {
        const char *path = font ? font
                           : i >= SCREEN_PX_TITLE ? SCREEN_FONT_BOLD
                                                  : SCREEN_FONT_REGULAR;
        t->font[i] = TTF_OpenFont(path, screen_layout_text_px(h, (enum screen_text_size)i));
        if (!t->font[i]) {
            if (font)
                return err_set(e, ST_EIO, "screen: cannot open the font %s (%s)", font,
                               TTF_GetError());
            return err_set(e, ST_EIO,
                           "screen: no font: tried %s and %s (%s); install fonts-dejavu-core "
                           "or name a .ttf file",
                           SCREEN_FONT_REGULAR, SCREEN_FONT_BOLD, TTF_GetError());
        }
    }
    return ST_OK;
}

int screen_text_new(SDL_Renderer *ren, int h, const char *font, struct screen_text **out,
                    struct err *e)
{
    *out = NULL;
    if (TTF_Init())   /* counted: every screen_text_free balances it */
        return err_set(e, ST_ELIB, "screen: SDL2_ttf: %s", TTF_GetError());
    struct screen_text *t = calloc(1, sizeof *t);
    if (!t) {
        TTF_Quit();
        return err_set(e, ST_ENOMEM, "screen: out of memory for text");
    }
    t->ren = ren;
    int rc = open_fonts(t, h, font, e);
    if (rc) {
        screen_text_free(t);
        return rc;
    }
    *out = t;
    return ST_OK;
}

void screen_text_free(struct screen_text *t)
{
    if (!t)
        return;
    for (int i = 0; i < CACHE_SLOTS; i++)
        if (t->slot[i].tex)
            SDL_DestroyTexture(t->slot[i].tex);
    for (int i = 0; i < SCREEN_NPX; i++)
        if (t->font[i])
            TTF_CloseFont(t->font[i]);
    free(t);
    TTF_Quit();
}

int screen_text_line(const struct screen_text *t, enum screen_text_size size)
{
    return TTF_FontLineSkip(t->font[size]);
}

/* s cut at a character boundary, with "…", until it fits max_w. */
static void shorten(TTF_Font *f, const char *s, int max_w, char *out, size_t len)
{
    snprintf(out, len, "%s", s);
    int w;
    if (TTF_SizeUTF8(f, out, &w, NULL) || w <= max_w)
        return;
    size_t n = strlen(out);
    while (n > 0) {
        do
            n--;
        while (n > 0 && ((unsigned char)out[n] & 0xC0) == 0x80);
        if (n + 4 > len)
            continue;
        memcpy(out + n, "…", 4);   /* 3 bytes of UTF-8 and the terminator */
        if (!TTF_SizeUTF8(f, out, &w, NULL) && w <= max_w)
            return;
    }
    out[0] = 0;
}

static struct slot *render(struct screen_text *t, struct slot *sl, const char *s)
{
    TTF_Font *f = t->font[sl->size];
    SDL_Color c = {(uint8_t)(sl->rgb >> 16), (uint8_t)(sl->rgb >> 8), (uint8_t)sl->rgb, 255};
    char text[CACHE_KEY];
    if (sl->wrap > 0)
        snprintf(text, sizeof text, "%s", s);
    else if (sl->max_w > 0)
        shorten(f, s, sl->max_w, text, sizeof text);
    else
        snprintf(text, sizeof text, "%s", s);
    if (!text[0])
        return NULL;
    SDL_Surface *surf = sl->wrap > 0 ? TTF_RenderUTF8_Blended_Wrapped(f, text, c, (Uint32)sl->wrap)
                                     : TTF_RenderUTF8_Blended(f, text, c);
    if (!surf)
        return NULL;
    sl->tex = SDL_CreateTextureFromSurface(t->ren, surf);
    sl->w = surf->w;
    sl->h = surf->h;
    SDL_FreeSurface(surf);
    if (!sl->tex)
        return NULL;
    snprintf(sl->s, sizeof sl->s, "%s", s);
    return sl;
}

static struct slot *lookup(struct screen_text *t, int size, const char *s, uint32_t rgb,
                           int max_w, int wrap)
{
    struct slot *free_slot = NULL;
    for (int i = 0; i < CACHE_SLOTS; i++) {
        struct slot *sl = &t->slot[i];
        if (!sl->tex) {
            if (!free_slot)
                free_slot = sl;
            continue;
        }
        if (sl->size == size && sl->rgb == rgb && sl->max_w == max_w && sl->wrap == wrap &&
            !strcmp(sl->s, s))
            return sl;
    }
    if (!free_slot) {
        /* a busier frame than the cache holds: take slots in turn */
        free_slot = &t->slot[t->next_victim];
        t->next_victim = (t->next_victim + 1) % CACHE_SLOTS;
        SDL_DestroyTexture(free_slot->tex);
        free_slot->tex = NULL;
    }
    free_slot->size = size;
    free_slot->rgb = rgb;
    free_slot->max_w = max_w;
    free_slot->wrap = wrap;
    return render(t, free_slot, s);
}

static struct slot *find(struct screen_text *t, enum screen_text_size size, const char *s,
                         const uint8_t rgb[3], int max_w, int wrap)
{
    if (!s || !s[0])
        return NULL;
    char cut[CACHE_KEY];
    size_t n = strlen(s);
    if (n >= CACHE_KEY) {
        /* longer than any line on screen: cut at a character boundary */
        for (n = CACHE_KEY - 1; n > 0 && ((unsigned char)s[n] & 0xC0) == 0x80; n--)
            ;
        memcpy(cut, s, n);
        cut[n] = 0;
        s = cut;
    }
    uint32_t key = (uint32_t)rgb[0] << 16 | (uint32_t)rgb[1] << 8 | rgb[2];
    struct slot *sl = lookup(t, size, s, key, max_w, wrap);
    if (sl)
        sl->frame = t->frame;
    return sl;
}

struct screen_rect screen_text_measure(struct screen_text *t, enum screen_text_size size,
                                       const char *s, const uint8_t rgb[3], int max_w, int wrap)
{
    struct slot *sl = find(t, size, s, rgb, max_w, wrap);
    return (struct screen_rect){0, 0, sl ? sl->w : 0, sl ? sl->h : 0};
}

struct screen_rect screen_text_draw(struct screen_text *t, enum screen_text_size size,
                                    const char *s, const uint8_t rgb[3], int x, int y,
                                    enum screen_align align, int max_w, int wrap)
{
    struct screen_rect r = {x, y, 0, 0};
    struct slot *sl = find(t, size, s, rgb, max_w, wrap);
    if (!sl)
        return r;
    r.w = sl->w;
    r.h = sl->h;
    if (align == SCREEN_RIGHT)
        r.x = x - sl->w;
    else if (align == SCREEN_CENTRE)
        r.x = x - sl->w / 2;
    SDL_Rect dst = {r.x, r.y, r.w, r.h};
    SDL_RenderCopy(t->ren, sl->tex, NULL, &dst);
    return r;
}

void screen_text_end_frame(struct screen_text *t)
{
    for (int i = 0; i < CACHE_SLOTS; i++) {
        struct slot *sl = &t->slot[i];
        if (sl->tex && sl->frame != t->frame) {
            SDL_DestroyTexture(sl->tex);
            sl->tex = NULL;
        }
    }
    t->frame++;
}
