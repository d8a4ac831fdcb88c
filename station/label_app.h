/* label_app: a labelling session over one dataset folder — which image is
 * open, its mask being edited (station/label_doc.h), the tool, the view's
 * zoom and pan, the quick model — and what every input event does.
 *
 * Events come as SDL_Events (from the window, or made from a script), so the
 * tests drive exactly the code an engineer's mouse and keys drive.  The mask
 * is saved (station/label_file.h) on the save key, and before another image
 * is opened or the session ends when it changed; a quit whose save fails
 * keeps the window open once, with the reason.  At start every label file
 * present is checked against its picture and the class count (the recipe's,
 * or LABEL_APP_DEFAULT_CLASSES without one); the first bad one refuses the
 * session, naming the file.  The quick model (station/label_quick.h) is
 * trained on the main thread behind a "training" banner: a few seconds
 * blocked is simpler than a model that arrives while the mask it was
 * trained on is still changing.  All calls come from one thread (SDL's). */
#ifndef ST_LABEL_APP_H
#define ST_LABEL_APP_H

#include <SDL.h>

#include "core/booster.h"
#include "core/dataset.h"
#include "core/recipe.h"
#include "label_doc.h"
#include "label_view.h"

#define LABEL_APP_DEFAULT_CLASSES 10
#define LABEL_APP_MAX_RADIUS 64
#define LABEL_APP_MSG 200

enum label_tool { LABEL_BRUSH = 0, LABEL_ERASER, LABEL_FILL };
enum label_mark { LABEL_MARK_NONE = 0, LABEL_MARK_UNSAVED, LABEL_MARK_SAVED };

struct label_app_options {
    const char *dir;
    const char *recipe;       /* NULL: fixed palette, classes 0..9 */
    struct label_view_options view;
};

struct label_app {
    struct dataset ds;
    int has_recipe;
    struct recipe r;
    int nclasses;
    char names[RECIPE_MAX_CLASSES][32];
    uint8_t rgb[RECIPE_MAX_CLASSES][3];
    int cur;                  /* the open image */
    struct image *img;        /* its picture, RGB */
    struct label_doc *doc;
    int cls, radius, tool, tol;
    struct label_zoom zoom;
    int stroke;               /* mouse button painting (SDL_BUTTON_*), 0: none */
    int panning;
    int last_x, last_y;       /* the stroke's last image pixel */
    int mouse_x, mouse_y;     /* the pointer in window pixels */
    struct booster *model;    /* the quick model, or NULL */
    struct image *pred;       /* its prediction of the open image, or NULL */
    int show_pred;
    char status[LABEL_APP_MSG];
    int status_error;
    int quit;
    int quit_refused;         /* a quit found the mask unsavable once */
    struct label_view *view;
};

/* Opens the dataset and the window, checks the label files, shows the
 * first image.  On failure nothing is left open. */
int label_app_new(const struct label_app_options *o, struct label_app **out, struct err *e);
/* Saves a changed mask, then closes everything. */
int label_app_free(struct label_app *a, struct err *e);

/* Handles one event; errors go to the status line (and the return). */
int label_app_event(struct label_app *a, const SDL_Event *ev, struct err *e);

/* Saves the open mask if it changed. */
int label_app_save(struct label_app *a, struct err *e);
/* Opens image i (saving the open mask first if it changed). */
int label_app_open(struct label_app *a, int i, struct err *e);
/* Trains the quick model (blocking, with a banner) and predicts the open image. */
int label_app_retrain(struct label_app *a, struct err *e);

enum label_mark label_app_mark(const struct label_app *a, int i);

int label_app_draw(struct label_app *a, struct err *e);

/* Runs a script of actions, one per line, through label_app_event:
 *   key NAME [ctrl] [shift]  a key press (SDL_GetKeyFromName's names: "2", "[", "S", "PageDown")
 *   down X Y [right|middle]  a mouse button pressed over image pixel (X, Y)
 *   move X Y                 the pointer moved over image pixel (X, Y)
 *   up X Y                   the button released
 *   wheel X Y N [shift]      N wheel clicks over pixel (X, Y)
 *   snapshot FILE            the window as PNG
 * Blank lines and lines from '#' are skipped.  A pixel the view cannot
 * address exactly (outside the picture area, or zoomed out below 1 window
 * pixel per image pixel) is an error naming the line. */
int label_app_script(struct label_app *a, const char *path, struct err *e);

/* Runs the window until quit. */
int label_app_loop(struct label_app *a, struct err *e);

/* The keys, for the panel and the docs. */
struct label_key {
    const char *keys, *what;
};
extern const struct label_key label_keys[];
extern const int label_nkeys;

#endif
