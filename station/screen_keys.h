/* screen_keys: what each key does on the operator screen, and the help
 * overlay's table of them.
 *
 * A keyboard-style barcode scanner types printable characters and then
 * Enter, so printable characters only ever go into the input line and
 * Enter only commits it; a scanner can never quit, trigger or toggle.
 * Commands sit on function keys, which no scanner sends; Escape first
 * closes the help, then clears a half-typed line, and quits only from an
 * empty one, so one stray press cannot end a shift.  Enter on an empty line is the key trigger
 * (the operator's hands are on the part, the big key is easiest to hit). */
#ifndef ST_SCREEN_KEYS_H
#define ST_SCREEN_KEYS_H

#include <SDL.h>

#include "screen.h"

struct screen_key {
    const char *key;    /* as the help shows it */
    const char *what;
};

/* The help table, n rows. */
const struct screen_key *screen_keys_table(int *n);

/* One event applied to st: text and editing keys change st->input, F1,
 * F2 and F3 toggle st's help, field and overlay; the rest is returned. */
enum screen_action screen_keys_handle(struct screen_state *st, const SDL_Event *ev);

#endif
