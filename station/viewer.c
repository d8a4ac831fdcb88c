#include "viewer.h"

#include <SDL.h>
#include <string.h>

#include "audit_report.h"
#include "core/overlay.h"
#include "core/pngio.h"

int viewer_key(int mode, int key)
{
    switch (key) {
    case SDLK_q:
    case SDLK_ESCAPE: return -1;
    case SDLK_TAB:
    case SDLK_SPACE: return (mode + 1) % VIEWER_NMODES;
    case SDLK_1: return VIEWER_SIDE;
    case SDLK_2: return VIEWER_FRAME;
    case SDLK_3: return VIEWER_OVERLAY;
    default: return mode;
    }
}

/* img itself when it fits the window limits, else a downscaled copy (img
 * is freed then). */
static struct image *fit(struct image *img, struct err *e)
{
    double f = (double)VIEWER_MAX_W / img->w;
    if ((double)VIEWER_MAX_H / img->h < f)
        f = (double)VIEWER_MAX_H / img->h;
    if (f >= 1)
        return img;
    int side = (int)((img->w > img->h ? img->w : img->h) * f);
    struct image *small = audit_thumb_scale(img, side, e);
    image_free(img);
    return small;
}

struct image *viewer_compose(const struct image *frame, const struct image *overlay, int mode,
                             struct err *e)
{
    if (!frame || frame->channels != 3 || (overlay && (overlay->w != frame->w ||
                                                       overlay->h != frame->h ||
                                                       overlay->channels != 3))) {
        err_set(e, ST_EINVAL, "viewer: frame and overlay must be RGB images of one size");
        return NULL;
    }
    if (!overlay)
        mode = VIEWER_FRAME;
    if (mode != VIEWER_SIDE)
        return fit(image_clone(mode == VIEWER_FRAME ? frame : overlay, e), e);
    const struct image *pair[2] = {frame, overlay};
    struct image *both = overlay_side_by_side(pair, 2, VIEWER_GAP, 96, e);
    return both ? fit(both, e) : NULL;
}

struct view {
    SDL_Window *win;
    SDL_Renderer *ren;
    SDL_Texture *tex;
    struct image *img;
};

static int sdl_fail(struct err *e, const char *what)
{
    return err_set(e, ST_ELIB, "viewer: %s: %s", what, SDL_GetError());
}

/* Composes mode, sizes the window to it and draws it (not yet presented). */
static int draw(struct view *v, const struct image *frame, const struct image *overlay, int mode,
                struct err *e)
{
    image_free(v->img);
    v->img = viewer_compose(frame, overlay, mode, e);
    if (!v->img)
        return e->code;
    if (v->tex)
        SDL_DestroyTexture(v->tex);
    SDL_SetWindowSize(v->win, v->img->w, v->img->h);
    SDL_RenderSetLogicalSize(v->ren, v->img->w, v->img->h);
    v->tex = SDL_CreateTexture(v->ren, SDL_PIXELFORMAT_RGB24, SDL_TEXTUREACCESS_STATIC, v->img->w,
                               v->img->h);
    if (!v->tex || SDL_UpdateTexture(v->tex, NULL, v->img->px, v->img->w * 3) ||
        SDL_RenderClear(v->ren) || SDL_RenderCopy(v->ren, v->tex, NULL, NULL))
        return sdl_fail(e, "drawing");
    return ST_OK;
}

static int screenshot_save(struct view *v, const char *path, struct err *e)
{
    struct image *shot = image_new(v->img->w, v->img->h, 3, e);
    if (!shot)
        return e->code;
    int rc = ST_OK;
    if (SDL_RenderReadPixels(v->ren, NULL, SDL_PIXELFORMAT_RGB24, shot->px, shot->w * 3))
        rc = sdl_fail(e, "reading the window back");
    else
        rc = pngio_save(path, shot, 6, e);
    image_free(shot);
    return rc;
}

int viewer_run(const char *title, const struct image *frame, const struct image *overlay,
               int mode, const char *screenshot, struct err *e)
{
    if (SDL_Init(SDL_INIT_VIDEO))
        return err_set(e, ST_ELIB, "viewer: no display (%s); DISPLAY or WAYLAND_DISPLAY must name one",
                       SDL_GetError());
    /* Without a display SDL may fall back to a driver that draws nowhere; a
     * window nobody sees would wait for keys forever. */
    const char *driver = SDL_GetCurrentVideoDriver();
    if (!screenshot && driver && (!strcmp(driver, "offscreen") || !strcmp(driver, "dummy"))) {
        SDL_Quit();
        return err_set(e, ST_ELIB, "viewer: no display (SDL video driver '%s'); use --screenshot "
                                   "FILE.png to render without one", driver);
    }
    struct view v = {0};
    int rc = ST_OK;
    /* the software renderer reads back what it drew on any video driver */
    v.win = SDL_CreateWindow(title, SDL_WINDOWPOS_UNDEFINED, SDL_WINDOWPOS_UNDEFINED, 64, 64,
                             screenshot ? SDL_WINDOW_HIDDEN : SDL_WINDOW_SHOWN);
    if (v.win)
        v.ren = SDL_CreateRenderer(v.win, -1, screenshot ? SDL_RENDERER_SOFTWARE : 0);
    if (!v.ren) {
        rc = sdl_fail(e, "opening the window");
        goto done;
    }
    if ((rc = draw(&v, frame, overlay, mode, e)) != ST_OK)
        goto done;
    if (screenshot) {
        rc = screenshot_save(&v, screenshot, e);
        goto done;
    }
    SDL_RenderPresent(v.ren);
    SDL_Event ev;
    while (rc == ST_OK && SDL_WaitEvent(&ev)) {
        if (ev.type == SDL_QUIT)
            break;
        int next = mode;
        if (ev.type == SDL_KEYDOWN && (next = viewer_key(mode, ev.key.keysym.sym)) < 0)
            break;
        if (next != mode || (ev.type == SDL_WINDOWEVENT && ev.window.event == SDL_WINDOWEVENT_EXPOSED)) {
            mode = next;
            if ((rc = draw(&v, frame, overlay, mode, e)) == ST_OK)
                SDL_RenderPresent(v.ren);
        }
    }
done:
    image_free(v.img);
    if (v.tex)
        SDL_DestroyTexture(v.tex);
    if (v.ren)
        SDL_DestroyRenderer(v.ren);
    if (v.win)
        SDL_DestroyWindow(v.win);
    SDL_Quit();
    return rc;
}
