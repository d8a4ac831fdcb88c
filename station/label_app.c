#include "label_app.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "core/pngio.h"
#include "label_file.h"
#include "label_quick.h"

const struct label_key label_keys[] = {
    {"0 to 9", "class to paint"},
    {"left button", "use the tool"},
    {"right button", "erase"},
    {"B  E  F", "brush, eraser, fill"},
    {"[  ]", "brush size"},
    {"Shift+wheel", "brush size"},
    {",  .", "fill tolerance"},
    {"wheel  +  -", "zoom at pointer"},
    {"Z", "whole image"},
    {"arrows", "pan (middle drag)"},
    {"Ctrl+Z  Ctrl+Y", "undo, redo"},
    {"S", "save"},
    {"N  P", "next, previous"},
    {"T  O", "train, show prediction"},
    {"Q  Esc", "save and quit"},
};
const int label_nkeys = (int)(sizeof label_keys / sizeof label_keys[0]);

/* Without a recipe: Okabe & Ito (2008) colours first, then our own. */
static const uint8_t palette[LABEL_APP_DEFAULT_CLASSES][3] = {
    {0, 114, 178}, {230, 159, 0}, {0, 158, 115}, {213, 94, 0}, {86, 180, 233},
    {204, 121, 167}, {240, 228, 66}, {120, 80, 40}, {150, 150, 150}, {255, 255, 255}};

static void say(struct label_app *a, int error, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void say(struct label_app *a, int error, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(a->status, sizeof a->status, fmt, ap);
    va_end(ap);
    a->status_error = error;
}

/* An error for the status line, passed on to the caller. */
static int failed(struct label_app *a, int rc, const struct err *e)
{
    say(a, 1, "%s", e->msg);
    return rc;
}

static int check_labels(struct label_app *a, struct err *e)
{
    for (int i = 0; i < a->ds.n; i++) {
        if (!a->ds.labelled[i])
            continue;
        char ip[PATH_MAX], lp[PATH_MAX];
        struct image *img = NULL, *lab = NULL;
        int rc;
        if (!(rc = dataset_image_path(&a->ds, i, ip, sizeof ip, e)) &&
            !(rc = dataset_label_path(&a->ds, i, lp, sizeof lp, e)) &&
            !(rc = pngio_load_rgb(ip, &img, e)))
            rc = label_file_load(lp, img->w, img->h, a->nclasses, &lab, e);
        image_free(img);
        image_free(lab);
        if (rc)
            return rc;
    }
    return ST_OK;
}

static void set_classes(struct label_app *a)
{
    if (a->has_recipe) {
        a->nclasses = a->r.nclasses;
        for (int c = 0; c < a->nclasses; c++) {
            _Static_assert(sizeof a->names[c] == sizeof a->r.cls[c].name, "class name sizes");
            memcpy(a->names[c], a->r.cls[c].name, sizeof a->names[c]);
            memcpy(a->rgb[c], a->r.cls[c].rgb, 3);
        }
        return;
    }
    a->nclasses = LABEL_APP_DEFAULT_CLASSES;
    for (int c = 0; c < a->nclasses; c++) {
        snprintf(a->names[c], sizeof a->names[c], "class %d", c);
        memcpy(a->rgb[c], palette[c], 3);
    }
}

int label_app_new(const struct label_app_options *o, struct label_app **out, struct err *e)
{
    *out = NULL;
    struct label_app *a = calloc(1, sizeof *a);
    if (!a)
        return err_set(e, ST_ENOMEM, "label: out of memory");
    int rc;
    if (o->recipe) {
        if ((rc = recipe_load(o->recipe, &a->r, e))) {
            free(a);
            return rc;
        }
        a->has_recipe = 1;
    }
    set_classes(a);
    if ((rc = dataset_open(o->dir, &a->ds, e))) {
        free(a);
        return rc;
    }
    a->cur = -1;
    a->radius = 4;
    a->tol = 12;
    a->cls = a->nclasses > 1 ? 1 : 0;
    if ((rc = check_labels(a, e)) || (rc = label_view_new(&o->view, &a->view, e)) ||
        (rc = label_app_open(a, 0, e)))
        goto fail;
    say(a, 0, "%d images; %s", a->ds.n,
        a->has_recipe ? "classes from the recipe" : "no recipe: classes 0 to 9");
    *out = a;
    return ST_OK;
fail:
    label_app_free(a, NULL);
    return rc;
}

int label_app_free(struct label_app *a, struct err *e)
{
    if (!a)
        return ST_OK;
    struct err ignored;
    int rc = a->doc ? label_app_save(a, e ? e : &ignored) : ST_OK;
    label_doc_free(a->doc);
    image_free(a->img);
    image_free(a->pred);
    booster_free(a->model);
    label_view_free(a->view);
    dataset_close(&a->ds);
    free(a);
    return rc;
}

int label_app_save(struct label_app *a, struct err *e)
{
    if (!a->doc || !label_doc_dirty(a->doc))
        return ST_OK;
    char lp[PATH_MAX];
    int rc = dataset_label_path(&a->ds, a->cur, lp, sizeof lp, e);
    if (rc)
        return failed(a, rc, e);
    struct image m = {label_doc_w(a->doc), label_doc_h(a->doc), 1,
                      (uint8_t *)label_doc_mask(a->doc)};
    if ((rc = label_file_save(lp, &m, e)))
        return failed(a, rc, e);
    label_doc_mark_saved(a->doc);
    a->ds.labelled[a->cur] = 1;
    say(a, 0, "saved %s (%zu pixels labelled)", lp, label_doc_labelled(a->doc));
    return ST_OK;
}

static int predict(struct label_app *a, struct err *e)
{
    image_free(a->pred);
    a->pred = NULL;
    if (!a->model)
        return ST_OK;
    int rc = label_quick_predict(&a->r, a->model, a->img, &a->pred, e);
    return rc ? failed(a, rc, e) : ST_OK;
}

int label_app_open(struct label_app *a, int i, struct err *e)
{
    if (i < 0 || i >= a->ds.n || i == a->cur)
        return ST_OK;
    int rc = label_app_save(a, e);
    if (rc)
        return rc;
    char ip[PATH_MAX], lp[PATH_MAX];
    struct image *img = NULL, *lab = NULL;
    struct label_doc *doc = NULL;
    if ((rc = dataset_image_path(&a->ds, i, ip, sizeof ip, e)) ||
        (rc = dataset_label_path(&a->ds, i, lp, sizeof lp, e)) ||
        (rc = pngio_load_rgb(ip, &img, e)) ||
        (a->ds.labelled[i] && (rc = label_file_load(lp, img->w, img->h, a->nclasses, &lab, e))))
        goto fail;
    if (!(doc = label_doc_new(img->w, img->h, LABEL_UNDO_CAP, e))) {
        rc = e->code;
        goto fail;
    }
    if (lab)
        label_doc_set_mask(doc, lab->px);
    image_free(lab);
    label_doc_free(a->doc);
    image_free(a->img);
    a->doc = doc;
    a->img = img;
    a->cur = i;
    a->stroke = a->panning = 0;
    label_zoom_fit(&a->zoom, label_view_picture_area(a->view), img->w, img->h);
    say(a, 0, "%s", ip);
    return a->show_pred ? predict(a, e) : ST_OK;
fail:
    image_free(img);
    image_free(lab);
    return failed(a, rc, e);
}

int label_app_retrain(struct label_app *a, struct err *e)
{
    if (!a->has_recipe) {
        say(a, 1, "the quick model needs a recipe (station label DIR --recipe RECIPE)");
        return ST_OK;
    }
    int rc = label_view_draw(a->view, a, "training the quick model on the painted pixels…", e);
    if (rc)
        return failed(a, rc, e);
    struct image m = {label_doc_w(a->doc), label_doc_h(a->doc), 1,
                      (uint8_t *)label_doc_mask(a->doc)};
    struct booster *b = NULL;
    struct label_quick_report rep;
    if ((rc = label_quick_train(&a->r, &a->ds, a->cur, &m, &b, &rep, e)))
        return failed(a, rc, e);
    booster_free(a->model);
    a->model = b;
    a->show_pred = 1;
    if ((rc = predict(a, e)))
        return rc;
    say(a, 0, "quick model: %zu painted pixels from %d images, %d rounds, %.1f s", rep.rows,
        rep.images, rep.rounds, rep.seconds);
    return ST_OK;
}

enum label_mark label_app_mark(const struct label_app *a, int i)
{
    if (i == a->cur && label_doc_dirty(a->doc))
        return LABEL_MARK_UNSAVED;
    return a->ds.labelled[i] ? LABEL_MARK_SAVED : LABEL_MARK_NONE;
}

static void pointer_pixel(const struct label_app *a, int *ix, int *iy)
{
    label_zoom_to_image(&a->zoom, a->mouse_x, a->mouse_y, ix, iy);
}

static int in_picture(const struct label_app *a)
{
    const struct screen_rect *r = &a->zoom.area;
    return a->mouse_x >= r->x && a->mouse_y >= r->y && a->mouse_x < r->x + r->w &&
           a->mouse_y < r->y + r->h;
}

static int stroke_start(struct label_app *a, int button, struct err *e)
{
    if (!in_picture(a))   /* a click on the panel paints nothing hidden under it */
        return ST_OK;
    int x, y;
    pointer_pixel(a, &x, &y);
    int erase = button == SDL_BUTTON_RIGHT || a->tool == LABEL_ERASER;
    uint8_t v = erase ? LABEL_UNLABELLED : (uint8_t)a->cls;
    label_doc_begin(a->doc);
    if (a->tool == LABEL_FILL && button == SDL_BUTTON_LEFT) {
        size_t n;
        int rc = label_doc_fill(a->doc, a->img, x, y, a->tol, v, &n, e);
        int rc2 = label_doc_end(a->doc, e);
        if (rc || rc2)
            return failed(a, rc ? rc : rc2, e);
        say(a, 0, "filled %zu pixels with %s (tolerance %d)", n, a->names[a->cls], a->tol);
        return ST_OK;
    }
    label_doc_dab(a->doc, x, y, a->radius, v);
    a->stroke = button;
    a->last_x = x;
    a->last_y = y;
    return ST_OK;
}

static int stroke_move(struct label_app *a)
{
    int x, y;
    pointer_pixel(a, &x, &y);
    int erase = a->stroke == SDL_BUTTON_RIGHT || a->tool == LABEL_ERASER;
    label_doc_line(a->doc, a->last_x, a->last_y, x, y, a->radius,
                   erase ? LABEL_UNLABELLED : (uint8_t)a->cls);
    a->last_x = x;
    a->last_y = y;
    return ST_OK;
}

static int stroke_end(struct label_app *a, struct err *e)
{
    a->stroke = 0;
    int rc = label_doc_end(a->doc, e);
    return rc ? failed(a, rc, e) : ST_OK;
}

static void zoom_key(struct label_app *a, double factor)
{
    label_zoom_at(&a->zoom, a->mouse_x, a->mouse_y, factor);
}

/* Saves first; a mask that cannot be saved keeps the window open once, with
 * the reason on the status line, so the strokes are not lost unseen. */
static int quit(struct label_app *a, struct err *e)
{
    int rc = label_app_save(a, e);
    if (rc && !a->quit_refused) {
        a->quit_refused = 1;
        say(a, 1, "%s; quit again to leave without saving", e->msg);
        return rc;
    }
    a->quit = 1;
    return ST_OK;
}

static int clampi(int v, int lo, int hi)
{
    return v < lo ? lo : v > hi ? hi : v;
}

static int key(struct label_app *a, const SDL_KeyboardEvent *k, struct err *e)
{
    SDL_Keycode sym = k->keysym.sym;
    int ctrl = (k->keysym.mod & KMOD_CTRL) != 0, shift = (k->keysym.mod & KMOD_SHIFT) != 0;
    if (a->stroke)   /* keys wait until the stroke is finished */
        return ST_OK;
    if (ctrl) {
        if (sym == SDLK_z && !shift)
            say(a, 0, "%s", label_doc_undo(a->doc) ? "undone" : "nothing to undo");
        else if (sym == SDLK_y || (sym == SDLK_z && shift))
            say(a, 0, "%s", label_doc_redo(a->doc) ? "redone" : "nothing to redo");
        else if (sym == SDLK_s)
            return label_app_save(a, e);
        return ST_OK;
    }
    if (sym >= SDLK_0 && sym <= SDLK_9) {
        int c = sym - SDLK_0;
        if (c >= a->nclasses) {
            say(a, 1, "there is no class %d (the recipe has %d)", c, a->nclasses);
            return ST_OK;
        }
        a->cls = c;
        if (a->tool == LABEL_ERASER)
            a->tool = LABEL_BRUSH;
        return ST_OK;
    }
    switch (sym) {
    case SDLK_b: a->tool = LABEL_BRUSH; break;
    case SDLK_e: a->tool = LABEL_ERASER; break;
    case SDLK_f: a->tool = LABEL_FILL; break;
    case SDLK_LEFTBRACKET: a->radius = clampi(a->radius - 1, 0, LABEL_APP_MAX_RADIUS); break;
    case SDLK_RIGHTBRACKET: a->radius = clampi(a->radius + 1, 0, LABEL_APP_MAX_RADIUS); break;
    case SDLK_COMMA: a->tol = clampi(a->tol - 2, 0, 255); break;
    case SDLK_PERIOD: a->tol = clampi(a->tol + 2, 0, 255); break;
    case SDLK_PLUS:
    case SDLK_EQUALS:
    case SDLK_KP_PLUS: zoom_key(a, LABEL_ZOOM_STEP); break;
    case SDLK_MINUS:
    case SDLK_KP_MINUS: zoom_key(a, 1 / LABEL_ZOOM_STEP); break;
    case SDLK_z:
        label_zoom_fit(&a->zoom, label_view_picture_area(a->view), a->img->w, a->img->h);
        break;
    case SDLK_LEFT: label_zoom_pan(&a->zoom, 64, 0); break;
    case SDLK_RIGHT: label_zoom_pan(&a->zoom, -64, 0); break;
    case SDLK_UP: label_zoom_pan(&a->zoom, 0, 64); break;
    case SDLK_DOWN: label_zoom_pan(&a->zoom, 0, -64); break;
    case SDLK_s: return label_app_save(a, e);
    case SDLK_n:
    case SDLK_PAGEDOWN: return label_app_open(a, a->cur + 1, e);
    case SDLK_p:
    case SDLK_PAGEUP: return label_app_open(a, a->cur - 1, e);
    case SDLK_t: return label_app_retrain(a, e);
    case SDLK_o:
        if (!a->model)
            say(a, 0, "no quick model yet: T trains one");
        a->show_pred = !a->show_pred;
        if (a->show_pred && a->model && !a->pred)
            return predict(a, e);
        break;
    case SDLK_q:
    case SDLK_ESCAPE: return quit(a, e);
    default: break;
    }
    return ST_OK;
}

int label_app_event(struct label_app *a, const SDL_Event *ev, struct err *e)
{
    switch (ev->type) {
    case SDL_QUIT: return quit(a, e);
    case SDL_KEYDOWN: return key(a, &ev->key, e);
    case SDL_MOUSEBUTTONDOWN:
        a->mouse_x = ev->button.x;
        a->mouse_y = ev->button.y;
        if (ev->button.button == SDL_BUTTON_MIDDLE)
            a->panning = 1;
        else if (!a->stroke && (ev->button.button == SDL_BUTTON_LEFT ||
                                ev->button.button == SDL_BUTTON_RIGHT))
            return stroke_start(a, ev->button.button, e);
        return ST_OK;
    case SDL_MOUSEMOTION:
        if (a->panning)
            label_zoom_pan(&a->zoom, ev->motion.x - a->mouse_x, ev->motion.y - a->mouse_y);
        a->mouse_x = ev->motion.x;
        a->mouse_y = ev->motion.y;
        return a->stroke ? stroke_move(a) : ST_OK;
    case SDL_MOUSEBUTTONUP:
        a->mouse_x = ev->button.x;
        a->mouse_y = ev->button.y;
        if (ev->button.button == SDL_BUTTON_MIDDLE)
            a->panning = 0;
        else if (a->stroke == (int)ev->button.button) {
            stroke_move(a);
            return stroke_end(a, e);
        }
        return ST_OK;
    case SDL_MOUSEWHEEL:
        if (SDL_GetModState() & KMOD_SHIFT)
            a->radius = clampi(a->radius + ev->wheel.y, 0, LABEL_APP_MAX_RADIUS);
        else if (ev->wheel.y)
            zoom_key(a, pow(LABEL_ZOOM_STEP, ev->wheel.y));   /* a step per click */
        return ST_OK;
    default: return ST_OK;
    }
}

int label_app_draw(struct label_app *a, struct err *e)
{
    return label_view_draw(a->view, a, NULL, e);
}

int label_app_loop(struct label_app *a, struct err *e)
{
    int rc = label_app_draw(a, e);
    SDL_Event ev;
    while (!rc && !a->quit && SDL_WaitEvent(&ev)) {
        struct err ee;
        err_clear(&ee);
        /* a failed edit or save is on the status line; the session goes on */
        label_app_event(a, &ev, &ee);
        while (!a->quit && SDL_PollEvent(&ev))
            label_app_event(a, &ev, &ee);
        rc = label_app_draw(a, e);
    }
    return rc;
}

/* The window pixel that shows image pixel (x, y) exactly. */
static int window_of(const struct label_app *a, int x, int y, int *wx, int *wy)
{
    const struct label_zoom *z = &a->zoom;
    *wx = (int)ceil(z->ox + x * z->scale - 1e-9);
    *wy = (int)ceil(z->oy + y * z->scale - 1e-9);
    int bx, by;
    label_zoom_to_image(z, *wx, *wy, &bx, &by);
    const struct screen_rect *r = &z->area;
    return bx == x && by == y && *wx >= r->x && *wy >= r->y && *wx < r->x + r->w &&
           *wy < r->y + r->h;
}

static int script_line(struct label_app *a, char *line, const char *where, struct err *e)
{
    char *save = NULL, *verb = strtok_r(line, " \t\r\n", &save);
    if (!verb || verb[0] == '#')
        return ST_OK;
    char *arg[4] = {0};
    for (int i = 0; i < 4; i++)
        arg[i] = strtok_r(NULL, " \t\r\n", &save);
    SDL_Event ev;
    memset(&ev, 0, sizeof ev);
    if (!strcmp(verb, "snapshot")) {
        if (!arg[0])
            return err_set(e, ST_EFORMAT, "%s: snapshot needs a file", where);
        int rc = label_app_draw(a, e);
        return rc ? rc : label_view_snapshot(a->view, arg[0], e);
    }
    if (!strcmp(verb, "key")) {
        if (!arg[0] || (ev.key.keysym.sym = SDL_GetKeyFromName(arg[0])) == SDLK_UNKNOWN)
            return err_set(e, ST_EFORMAT, "%s: '%s' is not an SDL key name", where,
                           arg[0] ? arg[0] : "");
        for (int i = 1; i < 4 && arg[i]; i++)
            ev.key.keysym.mod |= !strcmp(arg[i], "ctrl") ? KMOD_LCTRL
                                 : !strcmp(arg[i], "shift") ? KMOD_LSHIFT : 0;
        ev.type = SDL_KEYDOWN;
        ev.key.state = SDL_PRESSED;
        return label_app_event(a, &ev, e);
    }
    char *end1 = NULL, *end2 = NULL;
    long x = arg[0] ? strtol(arg[0], &end1, 10) : 0, y = arg[1] ? strtol(arg[1], &end2, 10) : 0;
    if (!arg[1] || *end1 || *end2)
        return err_set(e, ST_EFORMAT, "%s: '%s' needs an image pixel X Y", where, verb);
    int wx, wy;
    if (!window_of(a, (int)x, (int)y, &wx, &wy))
        return err_set(e, ST_ERANGE, "%s: image pixel (%ld, %ld) is not shown alone by any "
                                     "window pixel at this zoom and pan", where, x, y);
    if (!strcmp(verb, "down") || !strcmp(verb, "up")) {
        ev.type = verb[0] == 'd' ? SDL_MOUSEBUTTONDOWN : SDL_MOUSEBUTTONUP;
        ev.button.button = !arg[2] ? SDL_BUTTON_LEFT
                           : !strcmp(arg[2], "right") ? SDL_BUTTON_RIGHT
                                                       : SDL_BUTTON_MIDDLE;
        ev.button.x = wx;
        ev.button.y = wy;
        return label_app_event(a, &ev, e);
    }
    ev.type = SDL_MOUSEMOTION;
    ev.motion.x = wx;
    ev.motion.y = wy;
    int rc = label_app_event(a, &ev, e);
    if (rc || !strcmp(verb, "move"))
        return rc;
    if (strcmp(verb, "wheel") || !arg[2])
        return err_set(e, ST_EFORMAT, "%s: unknown action '%s'", where, verb);
    memset(&ev, 0, sizeof ev);
    ev.type = SDL_MOUSEWHEEL;
    ev.wheel.y = atoi(arg[2]);
    SDL_SetModState(arg[3] && !strcmp(arg[3], "shift") ? KMOD_LSHIFT : KMOD_NONE);
    rc = label_app_event(a, &ev, e);
    SDL_SetModState(KMOD_NONE);
    return rc;
}

int label_app_script(struct label_app *a, const char *path, struct err *e)
{
    FILE *f = fopen(path, "r");
    if (!f)
        return err_set(e, ST_EIO, "%s: cannot open: %s", path, strerror(errno));
    char line[PATH_MAX + 64], where[PATH_MAX + 32];
    int rc = ST_OK;
    for (int n = 1; !rc && fgets(line, sizeof line, f); n++) {
        snprintf(where, sizeof where, "%s:%d", path, n);
        rc = script_line(a, line, where, e);
    }
    fclose(f);
    return rc;
}
