#include "screen_panels.h"

#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "core/judge.h"
#include "screen_keys.h"

static const uint8_t BACK[3] = SCREEN_RGB_BACK, PANEL[3] = SCREEN_RGB_PANEL,
                     TEXT[3] = SCREEN_RGB_TEXT, DIM[3] = SCREEN_RGB_DIM, INK[3] = SCREEN_RGB_BLACK,
                     SKY[3] = SCREEN_RGB_SKY, ORANGE[3] = SCREEN_RGB_ORANGE,
                     VERMILION[3] = SCREEN_RGB_VERMILION;

struct screen_look screen_panels_look(const struct screen_state *st)
{
    static const struct screen_look halted = {SCREEN_RGB_PURPLE, "HALTED", SCREEN_SYM_HALT},
                                    waiting = {SCREEN_RGB_WAITING, "WAITING", SCREEN_SYM_NONE},
                                    looks[3] = {{SCREEN_RGB_GREEN, "PASS", SCREEN_SYM_TICK},
                                                {SCREEN_RGB_VERMILION, "FAIL", SCREEN_SYM_CROSS},
                                                {SCREEN_RGB_YELLOW, "NO VERDICT",
                                                 SCREEN_SYM_QUESTION}},
                                    capture = {SCREEN_RGB_SKY, "CAPTURE", SCREEN_SYM_NONE};
    if (st->halted[0])
        return halted;
    if (st->capture)
        return capture;
    if (st->verdict < VERDICT_PASS || st->verdict > VERDICT_NONE)
        return waiting;
    return looks[st->verdict];
}

static struct screen_rect draw(const struct screen_canvas *c, enum screen_text_size size,
                               const char *s, const uint8_t rgb[3], int x, int y,
                               enum screen_align align, int max_w, int wrap)
{
    return screen_text_draw(c->text, size, s, rgb, x, y, align, max_w, wrap);
}

static int line(const struct screen_canvas *c, enum screen_text_size size)
{
    return screen_text_line(c->text, size);
}

void screen_panels_header(const struct screen_canvas *c, const struct screen_state *st)
{
    const struct screen_rect *r = &c->L->header;
    int p = c->L->pad, half = r->w / 2 - 2 * p;
    screen_paint_rect(c->ren, *r, PANEL);
    draw(c, SCREEN_PX_TITLE, st->recipe[0] ? st->recipe : "no recipe", TEXT, p, p, SCREEN_LEFT,
         half, 0);
    draw(c, SCREEN_PX_TITLE, st->status, TEXT, r->w - p, p, SCREEN_RIGHT, half, 0);
    char cam[2 * SCREEN_TEXT + 128];
    const char *what = st->camera[0] ? st->camera : "none";
    if (st->camera_lost)   /* no frames: a frame rate would be stale */
        snprintf(cam, sizeof cam, "CAMERA LOST: %s · trigger: %s", what, st->trigger);
    else
        snprintf(cam, sizeof cam, "Camera: %s · %.1f fps shown · trigger: %s", what, st->fps,
                 st->trigger);
    int y = p + line(c, SCREEN_PX_TITLE) + p / 2;
    char cal[SCREEN_TEXT + 32];
    snprintf(cal, sizeof cal, "Calibration: %s", st->calibration[0] ? st->calibration : "none");
    /* the calibration line is short and the camera's can be long: the
     * camera takes whatever width the calibration leaves */
    struct screen_rect drawn = draw(c, SCREEN_PX_SMALL, cal, DIM, r->w - p, y, SCREEN_RIGHT, half, 0);
    draw(c, SCREEN_PX_SMALL, cam, st->camera_lost ? ORANGE : DIM, p, y, SCREEN_LEFT,
         r->w - 3 * p - drawn.w, 0);
}

void screen_panels_verdict(const struct screen_canvas *c, const struct screen_state *st)
{
    const struct screen_layout *L = c->L;
    struct screen_look k = screen_panels_look(st);
    screen_paint_rect(c->ren, L->verdict, k.rgb);
    screen_paint_symbol(c->ren, L->symbol, k.sym, INK, k.rgb);
    if (k.sym == SCREEN_SYM_QUESTION)
        draw(c, SCREEN_PX_HUGE, "?", INK, L->symbol.x + L->symbol.w / 2,
             L->symbol.y + (L->symbol.h - line(c, SCREEN_PX_HUGE)) / 2, SCREEN_CENTRE, 0, 0);
    /* "NO VERDICT" is too wide for one line beside the symbol at this size */
    const char *space = strchr(k.word, ' ');
    int x = k.sym ? L->word.x : L->verdict.x + 2 * L->pad, y = L->word.y;
    int max_w = L->verdict.x + L->verdict.w - L->pad - x, huge = line(c, SCREEN_PX_HUGE);
    if (space) {
        char first[16];
        snprintf(first, sizeof first, "%.*s", (int)(space - k.word), k.word);
        draw(c, SCREEN_PX_HUGE, first, INK, x, y, SCREEN_LEFT, max_w, 0);
        draw(c, SCREEN_PX_HUGE, space + 1, INK, x, y + huge * 4 / 5, SCREEN_LEFT, max_w, 0);
        y += huge * 4 / 5;
    } else {
        draw(c, SCREEN_PX_HUGE, k.word, INK, x, y, SCREEN_LEFT, max_w, 0);
    }
    char note[64];
    if (st->capture)
        snprintf(note, sizeof note, "%ld frame%s saved", st->inspected,
                 st->inspected == 1 ? "" : "s");
    else if (st->halted[0])
        snprintf(note, sizeof note, "inspection halted");
    else if (st->verdict < 0)
        snprintf(note, sizeof note, "no part inspected yet");
    else if (st->log_seq >= 0)
        snprintf(note, sizeof note, "log record %lld", (long long)st->log_seq);
    else
        note[0] = 0;
    draw(c, SCREEN_PX_BODY, note, INK, x, y + huge, SCREEN_LEFT, max_w, 0);
}

/* The panel's background and title; returns the first line's y. */
static int section(const struct screen_canvas *c, struct screen_rect r, const char *title)
{
    screen_paint_rect(c->ren, r, PANEL);
    draw(c, SCREEN_PX_SMALL, title, DIM, r.x + c->L->pad, r.y + c->L->pad / 2, SCREEN_LEFT,
         r.w - 2 * c->L->pad, 0);
    return r.y + c->L->pad / 2 + line(c, SCREEN_PX_SMALL);
}

/* "• " and the reason, a figure kept on one line with its unit: the space
 * before "mm" becomes a no-break space, where SDL2_ttf does not wrap. */
static void bullet(char *out, size_t len, const char *reason)
{
    size_t o = (size_t)snprintf(out, len, "• ");
    for (const char *p = reason; *p && o + 3 < len; p++) {
        if (p[0] == ' ' && p[1] == 'm' && p[2] == 'm') {
            out[o++] = (char)0xC2;
            out[o++] = (char)0xA0;
        } else {
            out[o++] = *p;
        }
    }
    out[o] = 0;
}

void screen_panels_reasons(const struct screen_canvas *c, const struct screen_state *st)
{
    struct screen_rect r = c->L->reasons;
    int p = c->L->pad, body = line(c, SCREEN_PX_BODY), wrap = r.w - 3 * p;
    int y = section(c, r, st->halted[0] ? "Why inspection is halted"
                          : st->capture ? "Last frame saved"
                                        : "Reasons");
    int bottom = r.y + r.h - p / 2;
    if (st->capture) {
        draw(c, SCREEN_PX_BODY, st->saved[0] ? st->saved : "none yet", TEXT, r.x + p, y,
             SCREEN_LEFT, 0, wrap);
        return;
    }
    if (st->halted[0]) {
        draw(c, SCREEN_PX_BODY, st->halted, TEXT, r.x + p, y, SCREEN_LEFT, 0, wrap);
        return;
    }
    if (st->verdict == VERDICT_PASS && !st->nreasons) {
        draw(c, SCREEN_PX_BODY, "every measure within its tolerance", TEXT, r.x + p, y,
             SCREEN_LEFT, wrap, 0);
        return;
    }
    int shown = 0;
    for (; shown < st->nreasons; shown++) {
        char words[2 * SCREEN_TEXT];
        bullet(words, sizeof words, st->reasons[shown]);
        /* a reason is left out rather than cut; the last line says so */
        int h = screen_text_measure(c->text, SCREEN_PX_BODY, words, TEXT, 0, wrap).h;
        int room = shown + 1 < st->nreasons || st->more_reasons ? body : 0;
        if (y + h + room > bottom)
            break;
        struct screen_rect d = draw(c, SCREEN_PX_BODY, words, TEXT, r.x + p, y, SCREEN_LEFT, 0,
                                    wrap);
        y += d.h + p / 4;
    }
    int more = st->nreasons - shown + st->more_reasons;
    if (more > 0) {
        char s[64];
        snprintf(s, sizeof s, "+ %d more (in the log)", more);
        draw(c, SCREEN_PX_BODY, s, DIM, r.x + p, y, SCREEN_LEFT, wrap, 0);
    }
}

/* v with at most two decimals and no trailing zeros, as the judge's words
 * print their figures ("2.5 mm²", "0.93 mm²", "4 mm²") */
static void figure(char *buf, size_t len, double v)
{
    snprintf(buf, len, "%.2f", v);
    char *end = buf + strlen(buf) - 1;
    while (end > buf && *end == '0')
        *end-- = 0;
    if (*end == '.')
        *end = 0;
}

static void bar(const struct screen_canvas *c, const struct screen_bar *b, int x, int y, int w)
{
    int over = b->limit >= 0 && b->value > b->limit;
    char figures[96], value[32], limit[32];
    figure(value, sizeof value, b->value);
    figure(limit, sizeof limit, b->limit);
    if (b->limit < 0)
        snprintf(figures, sizeof figures, "%s %s, no limit", value, b->unit);
    else
        snprintf(figures, sizeof figures, "%s of %s %s%s", value, limit, b->unit,
                 over ? " — OVER" : "");
    draw(c, SCREEN_PX_BODY, b->name, TEXT, x, y, SCREEN_LEFT, w / 3, 0);
    /* the word OVER says it; vermilion text on the grey panel would be under
     * WCAG's 4.5:1, so only the bar takes the colour */
    draw(c, SCREEN_PX_BODY, figures, TEXT, x + w, y, SCREEN_RIGHT, w * 2 / 3 - c->L->pad, 0);
    int by = y + line(c, SCREEN_PX_BODY), bh = c->L->pad + 4;
    static const uint8_t track[3] = {80, 80, 80};
    screen_paint_rect(c->ren, (struct screen_rect){x, by, w, bh}, track);
    if (b->limit < 0)
        return;
    /* the limit sits at 80 % of the track, so a value over it shows its excess */
    double f = b->limit > 0 ? 0.8 * b->value / b->limit : (b->value > 0 ? 1 : 0);
    int fill = (int)((f > 1 ? 1 : f) * w);
    if (fill > 0)
        screen_paint_rect(c->ren, (struct screen_rect){x, by, fill, bh}, over ? VERMILION : SKY);
    screen_paint_rect(c->ren, (struct screen_rect){x + w * 4 / 5 - 1, by - 3, 3, bh + 6}, TEXT);
}

void screen_panels_bars(const struct screen_canvas *c, const struct screen_state *st)
{
    struct screen_rect r = c->L->bars;
    int p = c->L->pad;
    int y = section(c, r, "Defects counted, against the part's tolerance");
    if (!st->nbars) {
        const char *why = st->capture ? "not judged while capturing"
                          : st->verdict == VERDICT_NONE && !st->halted[0]
                              ? "not judged: no verdict"
                              : "nothing measured yet";
        draw(c, SCREEN_PX_BODY, why, DIM, r.x + p, y, SCREEN_LEFT, r.w - 2 * p, 0);
        return;
    }
    int step = line(c, SCREEN_PX_BODY) + 2 * p + 4;
    for (int i = 0; i < st->nbars && y + step <= r.y + r.h + p; i++, y += step)
        bar(c, &st->bars[i], r.x + p, y, r.w - 2 * p);
}

static void counter(const struct screen_canvas *c, int x, int y, int w, const char *label,
                    const char *value)
{
    draw(c, SCREEN_PX_SMALL, label, DIM, x, y, SCREEN_LEFT, w, 0);
    draw(c, SCREEN_PX_TITLE, value, TEXT, x, y + line(c, SCREEN_PX_SMALL), SCREEN_LEFT, w, 0);
}

void screen_panels_counters(const struct screen_canvas *c, const struct screen_state *st)
{
    struct screen_rect r = c->L->counters;
    int p = c->L->pad, x = r.x + p, y = r.y + p;
    screen_paint_rect(c->ren, r, PANEL);
    char v[5][32];
    if (st->capture) {
        snprintf(v[0], sizeof v[0], "%ld", st->inspected);
        counter(c, x, y, r.w - 2 * p, "Saved this session", v[0]);
        return;
    }
    snprintf(v[0], sizeof v[0], "%ld", st->inspected);
    snprintf(v[1], sizeof v[1], "%ld", st->passed);
    snprintf(v[2], sizeof v[2], "%ld", st->failed);
    snprintf(v[3], sizeof v[3], "%ld", st->no_verdict);
    double rate = st->inspected > 0 ? 100.0 * (double)st->failed / (double)st->inspected : 0;
    if (st->inspected > 0)   /* "100.0 %" is wider than the cell: whole percent from 99.95 */
        snprintf(v[4], sizeof v[4], rate >= 99.95 ? "%.0f %%" : "%.1f %%", rate);
    else
        snprintf(v[4], sizeof v[4], "–");
    /* widths in fifths of the row: the labels' own lengths, roughly */
    static const char *labels[5] = {"Inspected", "Passed", "Failed", "No verdict", "Reject rate"};
    static const int share[5] = {22, 17, 16, 22, 23};
    int w = r.w - 2 * p;
    for (int i = 0; i < 5; i++) {
        int cw = w * share[i] / 100;
        counter(c, x, y, cw - p, labels[i], v[i]);
        x += cw;
    }
}

/* "Label: value" in a cell; the field being typed into is underlined. */
static void field(const struct screen_canvas *c, int x, int w, const char *label,
                  const char *value, int active)
{
    const struct screen_rect *r = &c->L->input;
    int p = c->L->pad, y = r->y + (r->h - line(c, SCREEN_PX_BODY)) / 2;
    struct screen_rect d = draw(c, SCREEN_PX_BODY, label, active ? SKY : DIM, x, y, SCREEN_LEFT,
                                w, 0);
    draw(c, SCREEN_PX_BODY, value[0] ? value : "–", TEXT, x + d.w + p, y, SCREEN_LEFT,
         w - d.w - 2 * p, 0);
    if (active)
        screen_paint_rect(c->ren, (struct screen_rect){x, r->y + r->h - p, w - p, 3}, SKY);
}

void screen_panels_input(const struct screen_canvas *c, const struct screen_state *st)
{
    const struct screen_rect *r = &c->L->input;
    int p = c->L->pad, serial = st->field != SCREEN_FIELD_OPERATOR;
    screen_paint_rect(c->ren, *r, PANEL);
    field(c, p, r->w / 4, "Operator:", st->operator_id, !serial);
    field(c, r->w / 4, r->w * 3 / 10, "Serial:", st->serial, serial);
    struct screen_rect box = {r->w * 11 / 20, r->y + p, r->w * 9 / 20 - p, r->h - 2 * p};
    screen_paint_rect(c->ren, box, BACK);
    screen_paint_frame(c->ren, box, 2, SKY);
    char s[SCREEN_TEXT];
    const char *what = serial ? "serial" : "operator";
    if (st->input[0])
        snprintf(s, sizeof s, "%s › %s▏", what, st->input);
    else
        snprintf(s, sizeof s, "type or scan the %s, then Enter", what);
    int y = box.y + (box.h - line(c, SCREEN_PX_BODY)) / 2;
    struct screen_rect hint = draw(c, SCREEN_PX_SMALL, "F1 keys", DIM, box.x + box.w - p,
                                   box.y + (box.h - line(c, SCREEN_PX_SMALL)) / 2, SCREEN_RIGHT,
                                   0, 0);
    draw(c, SCREEN_PX_BODY, s, st->input[0] ? TEXT : DIM, box.x + p, y, SCREEN_LEFT,
         hint.x - box.x - 3 * p, 0);
}

void screen_panels_caution(const struct screen_canvas *c)
{
    const struct screen_rect *r = &c->L->caution;
    screen_paint_rect(c->ren, *r, INK);
    draw(c, SCREEN_PX_SMALL, CLI_CAUTION, TEXT, r->x + r->w / 2,
         r->y + (r->h - line(c, SCREEN_PX_SMALL)) / 2, SCREEN_CENTRE, r->w - 2 * c->L->pad, 0);
}

void screen_panels_halted(const struct screen_canvas *c, const struct screen_state *st)
{
    const struct screen_rect *pic = &c->L->picture;
    int p = c->L->pad;
    static const uint8_t purple[3] = SCREEN_RGB_PURPLE;
    int title = line(c, SCREEN_PX_TITLE), body = line(c, SCREEN_PX_BODY);
    struct screen_rect band = {pic->x, pic->y, pic->w, title + 2 * body + 3 * p};
    screen_paint_rect(c->ren, band, purple);
    screen_paint_symbol(c->ren, (struct screen_rect){band.x + p, band.y + p, title, title},
                        SCREEN_SYM_HALT, INK, purple);
    draw(c, SCREEN_PX_TITLE, "INSPECTION HALTED: no verdicts", INK, band.x + 2 * p + title,
         band.y + p, SCREEN_LEFT, band.w - 3 * p - title, 0);
    draw(c, SCREEN_PX_BODY, st->halted, INK, band.x + p, band.y + 2 * p + title, SCREEN_LEFT, 0,
         band.w - 2 * p);
}

void screen_panels_camera_lost(const struct screen_canvas *c, const struct screen_state *st)
{
    const struct screen_rect *pic = &c->L->picture;
    int p = c->L->pad;
    static const uint8_t deep[3] = {70, 48, 0};
    screen_paint_rect(c->ren, *pic, BACK);
    screen_paint_hatch(c->ren, *pic, 3 * p, deep);
    int title = line(c, SCREEN_PX_TITLE), body = line(c, SCREEN_PX_BODY);
    struct screen_rect box = {pic->x + pic->w / 8, pic->y + pic->h / 3, pic->w * 3 / 4,
                              title + 3 * body + 4 * p};
    screen_paint_rect(c->ren, box, INK);
    screen_paint_frame(c->ren, box, 3, ORANGE);
    int cx = box.x + box.w / 2, y = box.y + p;
    draw(c, SCREEN_PX_TITLE, "CAMERA LOST", ORANGE, cx, y, SCREEN_CENTRE, box.w - 2 * p, 0);
    y += title + p;
    draw(c, SCREEN_PX_BODY, st->camera[0] ? st->camera : "no camera", TEXT, cx, y, SCREEN_CENTRE,
         box.w - 2 * p, 0);
    y += body + p;
    draw(c, SCREEN_PX_BODY, "reconnecting; inspections are NO VERDICT", TEXT, cx, y,
         SCREEN_CENTRE, box.w - 2 * p, 0);
}

void screen_panels_help(const struct screen_canvas *c)
{
    static const char foot[] =
        "Letters, digits and a barcode scanner type into the input line and never run a "
        "command; Enter keeps the line for the serial or the operator.";
    const struct screen_rect *area = &c->L->help;
    int p = c->L->pad, n, body = line(c, SCREEN_PX_BODY);
    const struct screen_key *k = screen_keys_table(&n);
    int wrap = area->w - 6 * p;
    int foot_h = screen_text_measure(c->text, SCREEN_PX_BODY, foot, DIM, 0, wrap).h;
    int h = 2 * p + line(c, SCREEN_PX_TITLE) + p + n * (body + p / 2) + p + foot_h + 2 * p;
    struct screen_rect r = {area->x, area->y + (area->h > h ? (area->h - h) / 2 : 0), area->w,
                            h < area->h ? h : area->h};
    screen_paint_rect(c->ren, r, BACK);
    screen_paint_frame(c->ren, r, 3, SKY);
    int y = r.y + 2 * p, x = r.x + 3 * p, keyw = r.w / 5;
    draw(c, SCREEN_PX_TITLE, "Keys", TEXT, x, y, SCREEN_LEFT, 0, 0);
    y += line(c, SCREEN_PX_TITLE) + p;
    for (int i = 0; i < n; i++, y += body + p / 2) {
        draw(c, SCREEN_PX_BODY, k[i].key, SKY, x, y, SCREEN_LEFT, keyw, 0);
        draw(c, SCREEN_PX_BODY, k[i].what, TEXT, x + keyw, y, SCREEN_LEFT, r.w - keyw - 6 * p, 0);
    }
    draw(c, SCREEN_PX_BODY, foot, DIM, x, y + p, SCREEN_LEFT, 0, wrap);
}
