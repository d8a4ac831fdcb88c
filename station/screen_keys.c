#include "screen_keys.h"

#include <stdio.h>
#include <string.h>

static const struct screen_key table[] = {
    {"Enter", "keep the typed line; on an empty line: inspect now"},
    {"F5", "inspect now"},
    {"F2", "type into serial / operator (switch)"},
    {"Backspace", "delete the last typed character"},
    {"F3", "last inspection's overlay / live picture"},
    {"F6", "learn the empty bench again (automatic trigger)"},
    {"F12", "save a snapshot of the screen"},
    {"F1", "show or hide these keys"},
    {"Escape", "close this help, else clear the typed line, else quit"},
};

const struct screen_key *screen_keys_table(int *n)
{
    *n = (int)(sizeof table / sizeof table[0]);
    return table;
}

static void append(struct screen_state *st, const char *text)
{
    size_t have = strlen(st->input), add = strlen(text);
    for (size_t i = 0; i < add; i++)
        if ((unsigned char)text[i] < 0x20 || text[i] == 0x7f)
            return;   /* control characters are not part of a serial */
    if (have + add < sizeof st->input)
        memcpy(st->input + have, text, add + 1);
}

static void backspace(char *s)
{
    size_t n = strlen(s);
    while (n > 0 && ((unsigned char)s[--n] & 0xC0) == 0x80)
        ;   /* step over UTF-8 continuation bytes to the character's start */
    s[n] = 0;
}

/* src into dst of size n, cut at a character boundary when too long */
static void keep(char *dst, size_t n, const char *src)
{
    size_t len = strlen(src);
    if (len >= n)
        for (len = n - 1; len > 0 && ((unsigned char)src[len] & 0xC0) == 0x80; len--)
            ;
    memcpy(dst, src, len);
    dst[len] = 0;
}

static enum screen_action commit(struct screen_state *st)
{
    if (!st->input[0])
        return SCREEN_TRIGGER;
    if (st->field == SCREEN_FIELD_OPERATOR)
        keep(st->operator_id, sizeof st->operator_id, st->input);
    else
        keep(st->serial, sizeof st->serial, st->input);
    st->input[0] = 0;
    return SCREEN_COMMITTED;
}

static enum screen_action key(struct screen_state *st, SDL_Keycode k)
{
    switch (k) {
    case SDLK_RETURN:
    case SDLK_KP_ENTER: return commit(st);
    case SDLK_BACKSPACE: backspace(st->input); return SCREEN_NONE;
    case SDLK_ESCAPE:
        if (st->show_help)
            st->show_help = 0;
        else if (st->input[0])
            st->input[0] = 0;
        else
            return SCREEN_QUIT;
        return SCREEN_NONE;
    case SDLK_F1: st->show_help = !st->show_help; return SCREEN_NONE;
    case SDLK_F2:
        st->field = st->field == SCREEN_FIELD_SERIAL ? SCREEN_FIELD_OPERATOR : SCREEN_FIELD_SERIAL;
        return SCREEN_NONE;
    case SDLK_F3: st->show_overlay = !st->show_overlay; return SCREEN_NONE;
    case SDLK_F5: return SCREEN_TRIGGER;
    case SDLK_F6: return SCREEN_RELEARN;
    case SDLK_F12: return SCREEN_SNAPSHOT;
    default: return SCREEN_NONE;
    }
}

enum screen_action screen_keys_handle(struct screen_state *st, const SDL_Event *ev)
{
    switch (ev->type) {
    case SDL_QUIT: return SCREEN_QUIT;
    case SDL_TEXTINPUT: append(st, ev->text.text); return SCREEN_NONE;
    case SDL_KEYDOWN: return key(st, ev->key.keysym.sym);
    default: return SCREEN_NONE;
    }
}
