#include "label_view.h"

#include <SDL.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/pngio.h"
#include "label_app.h"
#include "screen_paint.h"
#include "screen_text.h"

/* blend shares, in 1/256: labels over the picture, the prediction under them */
#define LABEL_ALPHA 141
#define PRED_ALPHA 90
#define LIST_ROWS 7

void label_zoom_fit(struct label_zoom *z, struct screen_rect area, int img_w, int img_h)
{
    z->area = area;
    double sx = (double)area.w / img_w, sy = (double)area.h / img_h;
    z->scale = sx < sy ? sx : sy;
    z->ox = area.x + (area.w - img_w * z->scale) / 2;
    z->oy = area.y + (area.h - img_h * z->scale) / 2;
}

void label_zoom_at(struct label_zoom *z, double wx, double wy, double factor)
{
    double s = z->scale * factor;
    s = s < LABEL_ZOOM_MIN ? LABEL_ZOOM_MIN : s > LABEL_ZOOM_MAX ? LABEL_ZOOM_MAX : s;
    /* the image point under (wx, wy) stays there */
    double ix = (wx - z->ox) / z->scale, iy = (wy - z->oy) / z->scale;
    z->ox = wx - ix * s;
    z->oy = wy - iy * s;
    z->scale = s;
}

void label_zoom_pan(struct label_zoom *z, double dx, double dy)
{
    z->ox += dx;
    z->oy += dy;
}

void label_zoom_to_image(const struct label_zoom *z, int wx, int wy, int *ix, int *iy)
{
    /* the epsilon keeps a window pixel placed exactly on a pixel's edge in it */
    *ix = (int)floor((wx - z->ox) / z->scale + 1e-9);
    *iy = (int)floor((wy - z->oy) / z->scale + 1e-9);
}

void label_view_options_init(struct label_view_options *o)
{
    o->width = 1280;
    o->height = 800;
    o->font = NULL;
    o->allow_offscreen = 0;
}

struct label_view {
    SDL_Window *win;
    SDL_Renderer *ren;
    SDL_Texture *target, *pic;
    int pic_w, pic_h;
    struct screen_text *text;
    struct image *comp;
    int w, h, pad;
    struct screen_rect picture, panel, status;
};

static int sdl_fail(struct err *e, const char *what)
{
    return err_set(e, ST_ELIB, "label: %s: %s", what, SDL_GetError());
}

static int draws_nowhere(const char *driver)
{
    return driver && (!strcmp(driver, "offscreen") || !strcmp(driver, "dummy"));
}

static struct screen_rect rect(int x, int y, int w, int h)
{
    return (struct screen_rect){x, y, w, h};
}

int label_view_new(const struct label_view_options *o, struct label_view **out, struct err *e)
{
    *out = NULL;
    if (o->width < 640 || o->height < 480 || o->width > 8192 || o->height > 8192)
        return err_set(e, ST_EINVAL, "label: window %d x %d is outside 640 x 480 .. 8192 x 8192",
                       o->width, o->height);
    if (SDL_InitSubSystem(SDL_INIT_VIDEO))
        return err_set(e, ST_ELIB, "label: no display (%s); DISPLAY or WAYLAND_DISPLAY must name "
                                   "one", SDL_GetError());
    const char *driver = SDL_GetCurrentVideoDriver();
    if (draws_nowhere(driver) && !o->allow_offscreen) {
        SDL_QuitSubSystem(SDL_INIT_VIDEO);
        return err_set(e, ST_ELIB, "label: SDL's '%s' video driver shows nothing; name a display "
                                   "(DISPLAY or WAYLAND_DISPLAY)", driver);
    }
    struct label_view *v = calloc(1, sizeof *v);
    if (!v) {
        SDL_QuitSubSystem(SDL_INIT_VIDEO);
        return err_set(e, ST_ENOMEM, "label: out of memory");
    }
    int rc = ST_OK;
    v->w = o->width;
    v->h = o->height;
    v->win = SDL_CreateWindow("station label", SDL_WINDOWPOS_CENTERED, SDL_WINDOWPOS_CENTERED,
                              o->width, o->height, SDL_WINDOW_RESIZABLE);
    if (draws_nowhere(driver))
        SDL_SetHintWithPriority(SDL_HINT_FRAMEBUFFER_ACCELERATION, "0", SDL_HINT_DEFAULT);
    /* nearest neighbour: a zoomed image pixel is a square, never a blur */
    SDL_SetHint(SDL_HINT_RENDER_SCALE_QUALITY, "0");
    if (v->win)
        v->ren = SDL_CreateRenderer(v->win, -1, draws_nowhere(driver) ? SDL_RENDERER_SOFTWARE : 0);
    if (!v->ren) {
        rc = sdl_fail(e, "opening the window");
        goto fail;
    }
    SDL_RenderSetLogicalSize(v->ren, o->width, o->height);
    v->target = SDL_CreateTexture(v->ren, SDL_PIXELFORMAT_ARGB8888, SDL_TEXTUREACCESS_TARGET,
                                  o->width, o->height);
    if (!v->target) {
        rc = sdl_fail(e, "the renderer cannot draw into a texture");
        goto fail;
    }
    if ((rc = screen_text_new(v->ren, o->height, o->font, &v->text, e)) != ST_OK)
        goto fail;
    v->pad = screen_layout_text_px(o->height, SCREEN_PX_SMALL) / 2;
    int status_h = screen_text_line(v->text, SCREEN_PX_BODY) + 2 * v->pad;
    int panel_w = o->width * 3 / 10 < 360 ? 360 : o->width * 3 / 10;
    v->picture = rect(0, 0, o->width - panel_w, o->height - status_h);
    v->panel = rect(o->width - panel_w, 0, panel_w, o->height - status_h);
    v->status = rect(0, o->height - status_h, o->width, status_h);
    *out = v;
    return ST_OK;
fail:
    label_view_free(v);
    return rc;
}

void label_view_free(struct label_view *v)
{
    if (!v)
        return;
    screen_text_free(v->text);
    image_free(v->comp);
    if (v->pic)
        SDL_DestroyTexture(v->pic);
    if (v->target)
        SDL_DestroyTexture(v->target);
    if (v->ren)
        SDL_DestroyRenderer(v->ren);
    if (v->win)
        SDL_DestroyWindow(v->win);
    free(v);
    SDL_QuitSubSystem(SDL_INIT_VIDEO);
}

struct screen_rect label_view_picture_area(const struct label_view *v)
{
    return v->picture;
}

static void blend(uint8_t *p, const uint8_t rgb[3], int alpha)
{
    for (int c = 0; c < 3; c++)
        p[c] = (uint8_t)((p[c] * (256 - alpha) + rgb[c] * alpha + 128) >> 8);
}

/* The picture with the prediction and the labels blended over it. */
static int compose(struct label_view *v, const struct label_app *a, struct err *e)
{
    const struct image *img = a->img;
    if (!v->comp || v->comp->w != img->w || v->comp->h != img->h) {
        image_free(v->comp);
        if (!(v->comp = image_new(img->w, img->h, 3, e)))
            return e->code;
    }
    size_t n = (size_t)img->w * img->h;
    memcpy(v->comp->px, img->px, n * 3);
    const uint8_t *mask = label_doc_mask(a->doc);
    const uint8_t *pred = a->show_pred && a->pred ? a->pred->px : NULL;
    for (size_t i = 0; i < n; i++) {
        uint8_t *p = &v->comp->px[i * 3];
        if (pred && pred[i] < a->nclasses)
            blend(p, a->rgb[pred[i]], PRED_ALPHA);
        if (mask[i] != LABEL_UNLABELLED)
            blend(p, a->rgb[mask[i]], LABEL_ALPHA);
    }
    /* A class colour close to the picture's (the near-black background
     * class over a dark bench mat) would hide its strokes: each painted
     * region gets a one-pixel rim on the unlabelled pixels around it (its
     * own pixels keep their colour, so a thin scratch stroke stays
     * yellow), light for a dark class, dark for a light one. */
    for (int y = 0; y < img->h; y++)
        for (int x = 0; x < img->w; x++) {
            size_t i = (size_t)y * img->w + x;
            if (mask[i] != LABEL_UNLABELLED)
                continue;
            uint8_t m = x > 0 && mask[i - 1] != LABEL_UNLABELLED               ? mask[i - 1]
                        : x + 1 < img->w && mask[i + 1] != LABEL_UNLABELLED     ? mask[i + 1]
                        : y > 0 && mask[i - img->w] != LABEL_UNLABELLED         ? mask[i - img->w]
                        : y + 1 < img->h && mask[i + img->w] != LABEL_UNLABELLED ? mask[i + img->w]
                                                                                 : LABEL_UNLABELLED;
            if (m == LABEL_UNLABELLED)
                continue;
            const uint8_t *c = a->rgb[m];
            uint8_t ink = 0.299 * c[0] + 0.587 * c[1] + 0.114 * c[2] < 128 ? 235 : 20;
            memset(&v->comp->px[i * 3], ink, 3);
        }
    return ST_OK;
}

static void circle(SDL_Renderer *ren, double cx, double cy, double r, const uint8_t rgb[3])
{
    enum { N = 64 };
    SDL_FPoint pt[N + 1];
    for (int i = 0; i <= N; i++) {
        double t = 6.283185307179586 * i / N;
        pt[i] = (SDL_FPoint){(float)(cx + r * cos(t)), (float)(cy + r * sin(t))};
    }
    SDL_SetRenderDrawColor(ren, rgb[0], rgb[1], rgb[2], 255);
    SDL_RenderDrawLinesF(ren, pt, N + 1);
}

static void cursor(struct label_view *v, const struct label_app *a)
{
    static const uint8_t white[3] = {255, 255, 255}, black[3] = SCREEN_RGB_BLACK;
    const struct label_zoom *z = &a->zoom;
    const struct screen_rect *r = &v->picture;
    if (a->mouse_x < r->x || a->mouse_y < r->y || a->mouse_x >= r->x + r->w ||
        a->mouse_y >= r->y + r->h)
        return;
    int ix, iy;
    label_zoom_to_image(z, a->mouse_x, a->mouse_y, &ix, &iy);
    double cx = z->ox + (ix + 0.5) * z->scale, cy = z->oy + (iy + 0.5) * z->scale;
    if (a->tool == LABEL_FILL) {
        screen_paint_line(v->ren, (float)cx - 12, (float)cy, (float)cx + 12, (float)cy, 3, black);
        screen_paint_line(v->ren, (float)cx, (float)cy - 12, (float)cx, (float)cy + 12, 3, black);
        screen_paint_line(v->ren, (float)cx - 11, (float)cy, (float)cx + 11, (float)cy, 1, white);
        screen_paint_line(v->ren, (float)cx, (float)cy - 11, (float)cx, (float)cy + 11, 1, white);
        return;
    }
    /* the disc's edge: pixel centres within r, so half a pixel beyond */
    double rad = (a->radius + 0.5) * z->scale;
    circle(v->ren, cx, cy, rad + 1, black);
    circle(v->ren, cx, cy, rad, white);
}

static int picture(struct label_view *v, const struct label_app *a, struct err *e)
{
    static const uint8_t black[3] = SCREEN_RGB_BLACK;
    screen_paint_rect(v->ren, v->picture, black);
    int rc = compose(v, a, e);
    if (rc)
        return rc;
    const struct image *c = v->comp;
    if (!v->pic || v->pic_w != c->w || v->pic_h != c->h) {
        if (v->pic)
            SDL_DestroyTexture(v->pic);
        v->pic = SDL_CreateTexture(v->ren, SDL_PIXELFORMAT_RGB24, SDL_TEXTUREACCESS_STREAMING,
                                   c->w, c->h);
        v->pic_w = v->pic ? c->w : 0;
        v->pic_h = v->pic ? c->h : 0;
        if (!v->pic)
            return sdl_fail(e, "a texture for the picture");
    }
    if (SDL_UpdateTexture(v->pic, NULL, c->px, c->w * 3))
        return sdl_fail(e, "updating the picture");
    /* only the visible image pixels are copied, so any zoom costs the same */
    const struct label_zoom *z = &a->zoom;
    const struct screen_rect *r = &v->picture;
    int x0 = (int)floor((r->x - z->ox) / z->scale), x1 = (int)ceil((r->x + r->w - z->ox) / z->scale);
    int y0 = (int)floor((r->y - z->oy) / z->scale), y1 = (int)ceil((r->y + r->h - z->oy) / z->scale);
    x0 = x0 < 0 ? 0 : x0;
    y0 = y0 < 0 ? 0 : y0;
    x1 = x1 > c->w ? c->w : x1;
    y1 = y1 > c->h ? c->h : y1;
    SDL_Rect clip = {r->x, r->y, r->w, r->h};
    SDL_RenderSetClipRect(v->ren, &clip);
    if (x1 > x0 && y1 > y0) {
        SDL_Rect src = {x0, y0, x1 - x0, y1 - y0};
        SDL_FRect dst = {(float)(z->ox + x0 * z->scale), (float)(z->oy + y0 * z->scale),
                         (float)((x1 - x0) * z->scale), (float)((y1 - y0) * z->scale)};
        if (SDL_RenderCopyF(v->ren, v->pic, &src, &dst))
            rc = sdl_fail(e, "drawing the picture");
    }
    cursor(v, a);
    SDL_RenderSetClipRect(v->ren, NULL);
    return rc;
}

static const char *mark_word(enum label_mark m)
{
    return m == LABEL_MARK_SAVED ? "saved" : m == LABEL_MARK_UNSAVED ? "not saved" : "no labels";
}

/* A square told by shape, not colour alone: empty, half, full. */
static void mark_box(SDL_Renderer *ren, struct screen_rect b, enum label_mark m)
{
    static const uint8_t ink[3] = SCREEN_RGB_TEXT, yellow[3] = SCREEN_RGB_YELLOW,
                         green[3] = SCREEN_RGB_GREEN;
    screen_paint_frame(ren, b, 2, ink);
    if (m == LABEL_MARK_SAVED)
        screen_paint_rect(ren, rect(b.x + 3, b.y + 3, b.w - 6, b.h - 6), green);
    else if (m == LABEL_MARK_UNSAVED)
        screen_paint_rect(ren, rect(b.x + 3, b.y + b.h / 2, b.w - 6, b.h - b.h / 2 - 3), yellow);
}

static int image_list(struct label_view *v, const struct label_app *a, int x, int y, int w)
{
    static const uint8_t text[3] = SCREEN_RGB_TEXT, dim[3] = SCREEN_RGB_DIM, hi[3] = {70, 70, 70};
    int line = screen_text_line(v->text, SCREEN_PX_SMALL) + 4;
    int first = a->cur - LIST_ROWS / 2;
    first = first + LIST_ROWS > a->ds.n ? a->ds.n - LIST_ROWS : first;
    first = first < 0 ? 0 : first;
    for (int i = first; i < a->ds.n && i < first + LIST_ROWS; i++) {
        if (i == a->cur)
            screen_paint_rect(v->ren, rect(x - 4, y, w + 8, line), hi);
        enum label_mark m = label_app_mark(a, i);
        int box = line - 8;
        mark_box(v->ren, rect(x, y + 4, box, box), m);
        char s[96];
        snprintf(s, sizeof s, "%d  %s", i + 1, a->ds.stems[i]);
        struct screen_rect wr = screen_text_draw(v->text, SCREEN_PX_SMALL, mark_word(m), dim,
                                                 x + w, y + 2, SCREEN_RIGHT, 0, 0);
        screen_text_draw(v->text, SCREEN_PX_SMALL, s, i == a->cur ? text : dim, x + box + 8,
                         y + 2, SCREEN_LEFT, w - box - 16 - wr.w, 0);
        y += line;
    }
    return y;
}

/* The classes with their keys and colours, then the eraser; more than six
 * classes go in two columns of smaller text, so the keys below still fit. */
static int legend(struct label_view *v, const struct label_app *a, int x, int y, int w)
{
    static const uint8_t text[3] = SCREEN_RGB_TEXT, dim[3] = SCREEN_RGB_DIM, sky[3] = SCREEN_RGB_SKY;
    int shown = a->nclasses < 10 ? a->nclasses : 10;
    int cols = shown > 6 ? 2 : 1, rows = (shown + cols - 1) / cols;
    enum screen_text_size size = cols > 1 ? SCREEN_PX_SMALL : SCREEN_PX_BODY;
    int line = screen_text_line(v->text, size) + 4, cw = w / cols;
    for (int c = 0; c <= shown; c++) {
        int eraser = c == shown;
        int cx = eraser ? x : x + c / rows * cw, cy = eraser ? y + rows * line : y + c % rows * line;
        int colw = eraser ? w : cw;
        int selected = eraser ? a->tool == LABEL_ERASER : a->tool != LABEL_ERASER && c == a->cls;
        if (selected)
            screen_paint_frame(v->ren, rect(cx - 4, cy, colw + (eraser || cols == 1 ? 8 : 0), line), 2,
                               sky);
        char k[8], name[48];
        snprintf(k, sizeof k, "%s", eraser ? "E" : (char[]){(char)('0' + c), 0});
        screen_text_draw(v->text, size, k, text, cx + 6, cy + 2, SCREEN_LEFT, 0, 0);
        struct screen_rect sw = rect(cx + 28, cy + 5, (cols > 1 ? 1 : 2) * line - 6, line - 10);
        if (eraser)
            screen_paint_frame(v->ren, sw, 2, dim);
        else
            screen_paint_rect(v->ren, sw, a->rgb[c]);
        snprintf(name, sizeof name, "%s", eraser ? "eraser (unlabelled)" : a->names[c]);
        screen_text_draw(v->text, size, name, selected ? text : dim, sw.x + sw.w + 8, cy + 2,
                         SCREEN_LEFT, colw - (sw.x + sw.w + 12 - cx), 0);
    }
    return y + (rows + 1) * line;
}

static void panel(struct label_view *v, const struct label_app *a)
{
    static const uint8_t back[3] = SCREEN_RGB_PANEL, text[3] = SCREEN_RGB_TEXT,
                         dim[3] = SCREEN_RGB_DIM;
    const struct screen_rect *p = &v->panel;
    screen_paint_rect(v->ren, *p, back);
    int pad = v->pad, x = p->x + 2 * pad, w = p->w - 4 * pad, y = p->y + pad;
    int small = screen_text_line(v->text, SCREEN_PX_SMALL);
    char s[PATH_MAX + 64];
    screen_text_draw(v->text, SCREEN_PX_TITLE, "Labelling", text, x, y, SCREEN_LEFT, w, 0);
    y += screen_text_line(v->text, SCREEN_PX_TITLE);
    screen_text_draw(v->text, SCREEN_PX_SMALL, a->ds.dir, dim, x, y, SCREEN_LEFT, w, 0);
    y += small + pad;
    size_t all = (size_t)label_doc_w(a->doc) * label_doc_h(a->doc);
    snprintf(s, sizeof s, "image %d of %d, %.1f %% labelled", a->cur + 1, a->ds.n,
             100.0 * label_doc_labelled(a->doc) / (double)all);
    screen_text_draw(v->text, SCREEN_PX_SMALL, s, text, x, y, SCREEN_LEFT, w, 0);
    y = image_list(v, a, x, y + small + pad / 2, w) + pad;
    y = legend(v, a, x, y, w) + pad / 2;
    if (a->tool == LABEL_FILL)
        snprintf(s, sizeof s, "fill: %s, tolerance %d", a->names[a->cls], a->tol);
    else
        snprintf(s, sizeof s, "%s: radius %d px", a->tool == LABEL_ERASER ? "eraser" : "brush",
                 a->radius);
    screen_text_draw(v->text, SCREEN_PX_BODY, s, text, x, y, SCREEN_LEFT, w, 0);
    y += screen_text_line(v->text, SCREEN_PX_BODY);
    snprintf(s, sizeof s, "%s",
             !a->has_recipe ? "quick model: needs --recipe"
             : !a->model    ? "quick model: not trained (T)"
             : a->show_pred ? "prediction shown (O hides it)"
                            : "prediction hidden (O shows)");
    screen_text_draw(v->text, SCREEN_PX_SMALL, s, dim, x, y, SCREEN_LEFT, w, 0);
    y += small + pad;
    int col = w * 2 / 5;
    for (int i = 0; i < label_nkeys && y + small <= p->y + p->h; i++, y += small) {
        screen_text_draw(v->text, SCREEN_PX_SMALL, label_keys[i].keys, text, x, y, SCREEN_LEFT,
                         col - pad, 0);
        screen_text_draw(v->text, SCREEN_PX_SMALL, label_keys[i].what, dim, x + col, y,
                         SCREEN_LEFT, w - col, 0);
    }
}

static void status(struct label_view *v, const struct label_app *a)
{
    static const uint8_t back[3] = SCREEN_RGB_BACK, text[3] = SCREEN_RGB_TEXT,
                         bad[3] = SCREEN_RGB_VERMILION, dim[3] = SCREEN_RGB_DIM;
    const struct screen_rect *r = &v->status;
    screen_paint_rect(v->ren, *r, back);
    if (a->status_error)
        screen_paint_rect(v->ren, rect(r->x, r->y, v->pad, r->h), bad);
    char s[96];
    int ix, iy;
    label_zoom_to_image(&a->zoom, a->mouse_x, a->mouse_y, &ix, &iy);
    int inside = ix >= 0 && iy >= 0 && ix < a->img->w && iy < a->img->h;
    int lab = inside ? label_doc_mask(a->doc)[(size_t)iy * a->img->w + ix] : 0;
    if (inside)
        snprintf(s, sizeof s, "(%d, %d) %s   zoom %.0f %%", ix, iy,
                 lab == LABEL_UNLABELLED ? "unlabelled" : a->names[lab], a->zoom.scale * 100);
    else
        snprintf(s, sizeof s, "zoom %.0f %%", a->zoom.scale * 100);
    struct screen_rect sr = screen_text_draw(v->text, SCREEN_PX_BODY, s, dim, r->x + r->w - 2 * v->pad,
                                             r->y + v->pad, SCREEN_RIGHT, 0, 0);
    screen_text_draw(v->text, SCREEN_PX_BODY, a->status, text, r->x + 2 * v->pad, r->y + v->pad,
                     SCREEN_LEFT, r->w - sr.w - 6 * v->pad, 0);
}

static void banner(struct label_view *v, const char *msg)
{
    static const uint8_t back[3] = SCREEN_RGB_SKY, ink[3] = SCREEN_RGB_BLACK;
    int line = screen_text_line(v->text, SCREEN_PX_TITLE);
    const struct screen_rect *p = &v->picture;
    screen_paint_rect(v->ren, rect(p->x, p->y + p->h / 2 - line, p->w, 2 * line), back);
    screen_text_draw(v->text, SCREEN_PX_TITLE, msg, ink, p->x + p->w / 2, p->y + p->h / 2 - line / 2,
                     SCREEN_CENTRE, p->w - 4 * v->pad, 0);
}

int label_view_draw(struct label_view *v, const struct label_app *a, const char *msg,
                    struct err *e)
{
    if (SDL_SetRenderTarget(v->ren, v->target))
        return sdl_fail(e, "drawing into the window's texture");
    int rc = picture(v, a, e);
    panel(v, a);
    status(v, a);
    if (msg)
        banner(v, msg);
    screen_text_end_frame(v->text);
    if (SDL_SetRenderTarget(v->ren, NULL) || SDL_RenderClear(v->ren) ||
        SDL_RenderCopy(v->ren, v->target, NULL, NULL))
        return rc ? rc : sdl_fail(e, "showing the window");
    SDL_RenderPresent(v->ren);
    return rc;
}

int label_view_snapshot(struct label_view *v, const char *path, struct err *e)
{
    struct image *shot = image_new(v->w, v->h, 3, e);
    if (!shot)
        return e->code;
    int rc = ST_OK;
    if (SDL_SetRenderTarget(v->ren, v->target) ||
        SDL_RenderReadPixels(v->ren, NULL, SDL_PIXELFORMAT_RGB24, shot->px, shot->w * 3))
        rc = sdl_fail(e, "reading the window back");
    SDL_SetRenderTarget(v->ren, NULL);
    if (rc == ST_OK)
        rc = pngio_save(path, shot, 6, e);
    image_free(shot);
    return rc;
}
