/* The operator screen (station/screen.h): the window, the picture and the
 * order things are drawn in; the parts live in screen_panels.c, the keys
 * in screen_keys.c, the geometry in screen_layout.c. */
#include "screen.h"

#include <SDL.h>
#include <stdlib.h>
#include <string.h>

#include "core/pngio.h"
#include "screen_keys.h"
#include "screen_panels.h"
#include "screen_text.h"

struct screen {
    SDL_Window *win;
    SDL_Renderer *ren;
    SDL_Texture *target;   /* the screen is drawn here, so a snapshot can read it back */
    SDL_Texture *pic;      /* one streaming texture for the picture, kept while its size holds */
    int pic_w, pic_h;
    struct screen_text *text;
    struct screen_layout L;
};

void screen_options_init(struct screen_options *o)
{
    o->width = 1280;
    o->height = 800;
    o->font = NULL;
    o->allow_offscreen = 0;
}

static int sdl_fail(struct err *e, const char *what)
{
    return err_set(e, ST_ELIB, "screen: %s: %s", what, SDL_GetError());
}

static int draws_nowhere(const char *driver)
{
    return driver && (!strcmp(driver, "offscreen") || !strcmp(driver, "dummy"));
}

int screen_new(const struct screen_options *o, struct screen **out, struct err *e)
{
    *out = NULL;
    if (o->width < 320 || o->height < 240 || o->width > 8192 || o->height > 8192)
        return err_set(e, ST_EINVAL, "screen: window %d x %d is outside 320 x 240 .. 8192 x 8192",
                       o->width, o->height);
    if (SDL_InitSubSystem(SDL_INIT_VIDEO))
        return err_set(e, ST_ELIB, "screen: no display (%s); DISPLAY or WAYLAND_DISPLAY must name "
                                   "one, or run with --headless", SDL_GetError());
    const char *driver = SDL_GetCurrentVideoDriver();
    if (draws_nowhere(driver) && !o->allow_offscreen) {
        SDL_QuitSubSystem(SDL_INIT_VIDEO);
        return err_set(e, ST_ELIB, "screen: SDL's '%s' video driver shows nothing to an operator; "
                                   "name a display (DISPLAY or WAYLAND_DISPLAY) or run with "
                                   "--headless", driver);
    }
    struct screen *s = calloc(1, sizeof *s);
    if (!s) {
        SDL_QuitSubSystem(SDL_INIT_VIDEO);
        return err_set(e, ST_ENOMEM, "screen: out of memory");
    }
    int rc = ST_OK;
    s->win = SDL_CreateWindow("station", SDL_WINDOWPOS_CENTERED, SDL_WINDOWPOS_CENTERED, o->width,
                              o->height, SDL_WINDOW_RESIZABLE);
    /* a driver that draws nowhere gets the software renderer, which can
     * always read back what it drew; its window surface then needs no GL
     * (probing EGL for one loads and unloads Mesa for nothing) */
    if (draws_nowhere(driver))
        SDL_SetHintWithPriority(SDL_HINT_FRAMEBUFFER_ACCELERATION, "0", SDL_HINT_DEFAULT);
    if (s->win)
        s->ren = SDL_CreateRenderer(s->win, -1, draws_nowhere(driver) ? SDL_RENDERER_SOFTWARE : 0);
    if (!s->ren) {
        rc = sdl_fail(e, "opening the window");
        goto fail;
    }
    /* a resized or full-screen window scales the whole screen with its aspect */
    SDL_RenderSetLogicalSize(s->ren, o->width, o->height);
    s->target = SDL_CreateTexture(s->ren, SDL_PIXELFORMAT_ARGB8888, SDL_TEXTUREACCESS_TARGET,
                                  o->width, o->height);
    if (!s->target) {
        rc = sdl_fail(e, "the renderer cannot draw into a texture");
        goto fail;
    }
    if ((rc = screen_text_new(s->ren, o->height, o->font, &s->text, e)) != ST_OK)
        goto fail;
    screen_layout_compute(o->width, o->height, &s->L);
    SDL_StartTextInput();
    *out = s;
    return ST_OK;
fail:
    screen_free(s);
    return rc;
}

void screen_free(struct screen *s)
{
    if (!s)
        return;
    screen_text_free(s->text);
    if (s->pic)
        SDL_DestroyTexture(s->pic);
    if (s->target)
        SDL_DestroyTexture(s->target);
    if (s->ren)
        SDL_DestroyRenderer(s->ren);
    if (s->win)
        SDL_DestroyWindow(s->win);
    free(s);
    SDL_QuitSubSystem(SDL_INIT_VIDEO);
}

/* The overlay replaces the live picture while asked for and a verdict it
 * belongs to is shown. */
static const struct image *picture_of(const struct screen_state *st, int *is_overlay)
{
    *is_overlay = st->show_overlay && st->overlay && st->verdict >= 0 && !st->halted[0];
    return *is_overlay ? st->overlay : st->frame;
}

static int picture(struct screen *s, const struct screen_canvas *c, const struct screen_state *st,
                   struct err *e)
{
    static const uint8_t black[3] = SCREEN_RGB_BLACK, dim[3] = SCREEN_RGB_DIM;
    const struct screen_rect *area = &s->L.picture;
    screen_paint_rect(s->ren, *area, black);
    int is_overlay;
    const struct image *img = picture_of(st, &is_overlay);
    if (!img || img->channels != 3 || img->w <= 0 || img->h <= 0) {
        screen_text_draw(c->text, SCREEN_PX_BODY, img ? "the picture is not RGB" : "no picture yet",
                         dim, area->x + area->w / 2, area->y + area->h / 2, SCREEN_CENTRE, 0, 0);
        return ST_OK;
    }
    if (!s->pic || s->pic_w != img->w || s->pic_h != img->h) {
        if (s->pic)
            SDL_DestroyTexture(s->pic);
        s->pic = SDL_CreateTexture(s->ren, SDL_PIXELFORMAT_RGB24, SDL_TEXTUREACCESS_STREAMING,
                                   img->w, img->h);
        s->pic_w = s->pic ? img->w : 0;
        s->pic_h = s->pic ? img->h : 0;
        if (!s->pic)
            return sdl_fail(e, "a texture for the picture");
    }
    struct screen_rect fit = screen_layout_fit(img->w, img->h, *area);
    SDL_Rect dst = {fit.x, fit.y, fit.w, fit.h};
    if (SDL_UpdateTexture(s->pic, NULL, img->px, img->w * 3) ||
        SDL_RenderCopy(s->ren, s->pic, NULL, &dst))
        return sdl_fail(e, "drawing the picture");
    if (is_overlay) {
        char cap[64];
        snprintf(cap, sizeof cap, "overlay of the last inspection (F3: live)");
        struct screen_rect r = screen_text_measure(c->text, SCREEN_PX_SMALL, cap, dim, 0, 0);
        screen_paint_rect(s->ren, (struct screen_rect){fit.x, fit.y + fit.h - r.h - s->L.pad,
                                                       r.w + 2 * s->L.pad, r.h + s->L.pad},
                          black);
        screen_text_draw(c->text, SCREEN_PX_SMALL, cap, dim, fit.x + s->L.pad,
                         fit.y + fit.h - r.h - s->L.pad / 2, SCREEN_LEFT, 0, 0);
    }
    return ST_OK;
}

int screen_draw(struct screen *s, const struct screen_state *st, struct err *e)
{
    static const uint8_t back[3] = SCREEN_RGB_BACK;
    struct screen_canvas c = {s->ren, s->text, &s->L};
    if (SDL_SetRenderTarget(s->ren, s->target))
        return sdl_fail(e, "drawing into the screen's texture");
    screen_paint_rect(s->ren, (struct screen_rect){0, 0, s->L.w, s->L.h}, back);
    int rc = ST_OK;
    if (st->camera_lost)
        screen_panels_camera_lost(&c, st);
    else
        rc = picture(s, &c, st, e);
    if (st->halted[0])
        screen_panels_halted(&c, st);
    screen_panels_header(&c, st);
    screen_panels_verdict(&c, st);
    screen_panels_reasons(&c, st);
    screen_panels_bars(&c, st);
    screen_panels_counters(&c, st);
    screen_panels_input(&c, st);
    screen_panels_caution(&c);
    if (st->show_help)
        screen_panels_help(&c);
    screen_text_end_frame(s->text);
    if (SDL_SetRenderTarget(s->ren, NULL) || SDL_RenderClear(s->ren) ||
        SDL_RenderCopy(s->ren, s->target, NULL, NULL))
        return rc ? rc : sdl_fail(e, "showing the screen");
    SDL_RenderPresent(s->ren);
    return rc;
}

enum screen_action screen_poll(struct screen *s, struct screen_state *st, int timeout_ms)
{
    (void)s;
    SDL_Event ev;
    if (!SDL_WaitEventTimeout(&ev, timeout_ms))
        return SCREEN_NONE;
    return screen_keys_handle(st, &ev);
}

int screen_snapshot(struct screen *s, const char *path, struct err *e)
{
    struct image *shot = image_new(s->L.w, s->L.h, 3, e);
    if (!shot)
        return e->code;
    int rc = ST_OK;
    if (SDL_SetRenderTarget(s->ren, s->target) ||
        SDL_RenderReadPixels(s->ren, NULL, SDL_PIXELFORMAT_RGB24, shot->px, shot->w * 3))
        rc = sdl_fail(e, "reading the screen back");
    SDL_SetRenderTarget(s->ren, NULL);
    if (rc == ST_OK)
        rc = pngio_save(path, shot, 6, e);
    image_free(shot);
    return rc;
}
