/* screen: the live station's operator screen (SDL2, text through SDL2_ttf).
 *
 * The screen only shows what it is handed in a struct screen_state and
 * turns key presses into actions; it never inspects, never touches the log.
 * All calls come from the one thread that opened it (SDL's rule for video
 * and events).  Text uses DejaVu Sans from Debian's fonts-dejavu-core
 * (screen_options.font overrides); no font found is an error that names
 * the paths tried.  screen_new refuses SDL's offscreen and dummy video
 * drivers unless options.allow_offscreen is set (tests and snapshots): an
 * operator must never stare at a station that draws nowhere.
 *
 * Keys are chosen so that a keyboard-style barcode scanner (printable
 * characters, then Enter) can never quit or trigger by accident: printable
 * characters always go to the input line; Enter commits a non-empty input
 * line to the field being edited (serial by default) and, on an empty
 * line, asks for an inspection (the key trigger); every command is on a
 * function key or Escape, and Escape quits only from an empty input line
 * with the help closed (station/screen_keys.c holds the key table the help
 * overlay prints). */
#ifndef ST_SCREEN_H
#define ST_SCREEN_H

#include <jansson.h>
#include <limits.h>
#include <stdint.h>

#include "core/image.h"
#include "core/recipe.h"

#define SCREEN_MAX_REASONS 6
#define SCREEN_MAX_BARS 8
#define SCREEN_TEXT 160

/* One class's measure against its limit, e.g. scratch total 0.42 of 0.60 mm². */
struct screen_bar {
    char name[32];
    double value, limit;   /* limit < 0: no limit (bar drawn without a scale) */
    char unit[12];
};

enum screen_field { SCREEN_FIELD_SERIAL = 0, SCREEN_FIELD_OPERATOR };

struct screen_state {
    const struct image *frame;   /* the live picture, RGB; NULL: none yet */
    const struct image *overlay; /* the last inspection's overlay, same size as its frame; may be NULL */
    int show_overlay;
    int verdict;                 /* enum verdict (core/judge.h), or -1: nothing shown yet */
    int64_t log_seq;             /* the shown verdict's durable record */
    int nreasons, more_reasons;  /* reasons shown, and how many more there were */
    char reasons[SCREEN_MAX_REASONS][SCREEN_TEXT]; /* measured vs limit, with units */
    int nbars;
    struct screen_bar bars[SCREEN_MAX_BARS];
    long inspected, passed, failed, no_verdict;    /* this shift */
    char recipe[96];             /* "ostrel-cap38 version 3" */
    char calibration[SCREEN_TEXT];/* "0.0921 mm/px, made 2026-11-20, valid 23 more days" or why not */
    char camera[SCREEN_TEXT];    /* source_describe */
    int camera_lost;
    double fps;                  /* preview frames per second */
    char trigger[32];            /* "key", "auto", "continuous" */
    char status[SCREEN_TEXT];    /* "waiting for a part", "inspecting", ... */
    char halted[SCREEN_TEXT];    /* non-empty: inspection halted, and why (the log failed) */
    char operator_id[32];
    char serial[64];
    int field;                   /* enum screen_field being typed into */
    char input[64];              /* the line being typed */
    int show_help;
    /* station capture: frames are saved, not judged; the verdict panel
     * shows CAPTURE, the count (inspected) and the last file saved */
    int capture;
    char saved[PATH_MAX + 8];    /* "saved DIR/images/NAME.png"; "" before the first */
};
void screen_state_init(struct screen_state *s);

/* Fills verdict, log_seq, reasons and bars from one report
 * (station/report.h, REPORT_SCHEMA 1) judged against recipe r: the reasons'
 * own words ("text", or report_json_error's "message"), and per defect
 * class its counted total area against the class's max_total_mm2 (count
 * against max_count when it has no area limit).  A NO_VERDICT report gets
 * no bars: what was not judged is not shown as measured.  An unknown
 * verdict word is NO_VERDICT; log_seq is -1 when the report has none. */
void screen_state_set_report(struct screen_state *s, const struct recipe *r, const json_t *report);

enum screen_action {
    SCREEN_NONE = 0,
    SCREEN_QUIT,
    SCREEN_TRIGGER,        /* Enter on an empty line, or F5 */
    SCREEN_COMMITTED,      /* the input line went into operator_id or serial */
    SCREEN_SNAPSHOT,       /* F12 */
    SCREEN_RELEARN         /* F6: learn the empty bench again (auto trigger) */
};

struct screen_options {
    int width, height;     /* window size, default 1280 x 800 */
    const char *font;      /* a .ttf path; NULL: DejaVu Sans */
    int allow_offscreen;
};
void screen_options_init(struct screen_options *o);

struct screen;
int screen_new(const struct screen_options *o, struct screen **out, struct err *e);
void screen_free(struct screen *s);

int screen_draw(struct screen *s, const struct screen_state *st, struct err *e);
/* Waits at most timeout_ms for one event and handles it: text editing and
 * the overlay and help toggles change st; everything else is returned. */
enum screen_action screen_poll(struct screen *s, struct screen_state *st, int timeout_ms);
/* The last drawn screen as a PNG. */
int screen_snapshot(struct screen *s, const char *path, struct err *e);

#endif
