#include "label_doc.h"

#include <assert.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define TILE_BYTES (LABEL_TILE * LABEL_TILE)

struct step {
    uint64_t id, prev;   /* the state after it, and before it */
    int n;
    int *tile;
    uint8_t *before, *after;   /* n tiles of TILE_BYTES each */
};

struct label_doc {
    int w, h, tw, th;
    uint8_t *mask;
    size_t cap, bytes;
    struct step *steps;
    int nsteps, cur, alloc;    /* steps[0..cur) applied, steps[cur..nsteps) redoable */
    uint64_t state, saved, next_id;
    /* the open step: the tiles touched so far and their content before */
    int open, npend, pend_alloc;
    uint8_t *touched;
    int *pend_tile;
    uint8_t *pend_before;
};

struct label_doc *label_doc_new(int w, int h, size_t undo_cap, struct err *e)
{
    size_t bytes;
    if (image_check_size(w, h, 1, &bytes, e))
        return NULL;
    struct label_doc *d = calloc(1, sizeof *d);
    if (!d) {
        err_set(e, ST_ENOMEM, "label: out of memory");
        return NULL;
    }
    d->w = w;
    d->h = h;
    d->tw = (w + LABEL_TILE - 1) / LABEL_TILE;
    d->th = (h + LABEL_TILE - 1) / LABEL_TILE;
    d->cap = undo_cap;
    d->next_id = 1;
    d->mask = malloc(bytes);
    d->touched = calloc((size_t)d->tw * d->th, 1);
    if (!d->mask || !d->touched) {
        label_doc_free(d);
        err_set(e, ST_ENOMEM, "label: out of memory for a %d x %d mask", w, h);
        return NULL;
    }
    memset(d->mask, LABEL_UNLABELLED, bytes);
    return d;
}

static void step_clear(struct step *s)
{
    free(s->tile);
    free(s->before);
    free(s->after);
    memset(s, 0, sizeof *s);
}

static size_t step_bytes(const struct step *s)
{
    return (size_t)s->n * 2 * TILE_BYTES;
}

static void drop_redo(struct label_doc *d)
{
    for (int i = d->cur; i < d->nsteps; i++) {
        d->bytes -= step_bytes(&d->steps[i]);
        step_clear(&d->steps[i]);
    }
    d->nsteps = d->cur;
}

static void drop_history(struct label_doc *d)
{
    d->cur = 0;
    drop_redo(d);
}

void label_doc_free(struct label_doc *d)
{
    if (!d)
        return;
    drop_history(d);
    free(d->steps);
    free(d->mask);
    free(d->touched);
    free(d->pend_tile);
    free(d->pend_before);
    free(d);
}

int label_doc_w(const struct label_doc *d) { return d->w; }
int label_doc_h(const struct label_doc *d) { return d->h; }
const uint8_t *label_doc_mask(const struct label_doc *d) { return d->mask; }

void label_doc_set_mask(struct label_doc *d, const uint8_t *mask)
{
    assert(!d->open);
    drop_history(d);
    memcpy(d->mask, mask, (size_t)d->w * d->h);
    d->state = d->saved = d->next_id++;
}

/* Copies tile t of the mask to or from buf (edge tiles use part of it). */
static void tile_io(struct label_doc *d, int t, uint8_t *buf, int to_mask)
{
    int x0 = t % d->tw * LABEL_TILE, y0 = t / d->tw * LABEL_TILE;
    int tw = d->w - x0 < LABEL_TILE ? d->w - x0 : LABEL_TILE;
    int th = d->h - y0 < LABEL_TILE ? d->h - y0 : LABEL_TILE;
    for (int y = 0; y < th; y++) {
        uint8_t *m = &d->mask[(size_t)(y0 + y) * d->w + x0], *b = &buf[y * LABEL_TILE];
        if (to_mask)
            memcpy(m, b, (size_t)tw);
        else
            memcpy(b, m, (size_t)tw);
    }
}

void label_doc_begin(struct label_doc *d)
{
    assert(!d->open);
    d->open = 1;
    d->npend = 0;
}

/* Remembers tile t's content before its first change in this step.  Out of
 * memory for the record only loses the undo of that step, never the edit:
 * the step is then dropped at label_doc_end, which reports it. */
static void touch(struct label_doc *d, int t)
{
    if (d->touched[t])
        return;
    d->touched[t] = 1;
    if (d->npend < 0)
        return;
    if (d->npend == d->pend_alloc) {
        int n = d->pend_alloc ? 2 * d->pend_alloc : 16;
        int *tl = realloc(d->pend_tile, (size_t)n * sizeof *tl);
        if (tl)
            d->pend_tile = tl;
        uint8_t *b = tl ? realloc(d->pend_before, (size_t)n * TILE_BYTES) : NULL;
        if (!b) {
            d->npend = -1;
            return;
        }
        d->pend_before = b;
        d->pend_alloc = n;
    }
    d->pend_tile[d->npend] = t;
    tile_io(d, t, &d->pend_before[(size_t)d->npend * TILE_BYTES], 0);
    d->npend++;
}

static inline void put(struct label_doc *d, int x, int y, uint8_t v)
{
    uint8_t *m = &d->mask[(size_t)y * d->w + x];
    if (*m == v)
        return;
    touch(d, y / LABEL_TILE * d->tw + x / LABEL_TILE);
    *m = v;
}

void label_doc_dab(struct label_doc *d, int cx, int cy, int r, uint8_t v)
{
    assert(d->open && r >= 0);
    long r2 = (long)r * r;
    int y0 = cy - r < 0 ? 0 : cy - r, y1 = cy + r >= d->h ? d->h - 1 : cy + r;
    for (int y = y0; y <= y1; y++) {
        long dy = y - cy, rest = r2 - dy * dy;
        /* the widest |dx| with dx² <= rest */
        int half = (int)sqrt((double)rest);
        while ((long)(half + 1) * (half + 1) <= rest)
            half++;
        while ((long)half * half > rest)
            half--;
        int x0 = cx - half < 0 ? 0 : cx - half, x1 = cx + half >= d->w ? d->w - 1 : cx + half;
        for (int x = x0; x <= x1; x++)
            put(d, x, y, v);
    }
}

void label_doc_line(struct label_doc *d, int x0, int y0, int x1, int y1, int r, uint8_t v)
{
    int dx = x1 - x0, dy = y1 - y0;
    int n = abs(dx) > abs(dy) ? abs(dx) : abs(dy);
    for (int k = 1; k <= n; k++)
        label_doc_dab(d, x0 + (int)lround((double)k * dx / n), y0 + (int)lround((double)k * dy / n),
                      r, v);
}

static int near(const uint8_t *a, const uint8_t *b, int tol)
{
    for (int c = 0; c < 3; c++)
        if (abs((int)a[c] - (int)b[c]) > tol)
            return 0;
    return 1;
}

int label_doc_fill(struct label_doc *d, const struct image *rgb, int x, int y, int tol, uint8_t v,
                   size_t *filled, struct err *e)
{
    assert(d->open);
    *filled = 0;
    if (!rgb || rgb->w != d->w || rgb->h != d->h || rgb->channels != 3)
        return err_set(e, ST_EINVAL, "label: the picture to fill by is not RGB of the mask's size");
    if (x < 0 || y < 0 || x >= d->w || y >= d->h)
        return ST_OK;
    size_t n = (size_t)d->w * d->h;
    uint8_t *seen = calloc(n, 1);
    uint32_t *queue = malloc(n * sizeof *queue);
    if (!seen || !queue) {
        free(seen);
        free(queue);
        return err_set(e, ST_ENOMEM, "label: out of memory for a fill");
    }
    const uint8_t *seed = &rgb->px[((size_t)y * d->w + x) * 3];
    size_t head = 0, tail = 0;
    queue[tail++] = (uint32_t)((size_t)y * d->w + x);
    seen[queue[0]] = 1;
    while (head < tail) {
        uint32_t i = queue[head++];
        int px = (int)(i % (uint32_t)d->w), py = (int)(i / (uint32_t)d->w);
        put(d, px, py, v);
        const int nb[4][2] = {{px - 1, py}, {px + 1, py}, {px, py - 1}, {px, py + 1}};
        for (int k = 0; k < 4; k++) {
            int qx = nb[k][0], qy = nb[k][1];
            if (qx < 0 || qy < 0 || qx >= d->w || qy >= d->h)
                continue;
            size_t j = (size_t)qy * d->w + qx;
            if (!seen[j] && near(&rgb->px[j * 3], seed, tol)) {
                seen[j] = 1;
                queue[tail++] = (uint32_t)j;
            }
        }
    }
    *filled = tail;
    free(seen);
    free(queue);
    return ST_OK;
}

/* Forgets the oldest steps until the history fits the cap (the newest
 * step always stays). */
static void trim(struct label_doc *d)
{
    int drop = 0;
    while (d->bytes > d->cap && drop < d->cur - 1)
        d->bytes -= step_bytes(&d->steps[drop++]);
    if (!drop)
        return;
    for (int i = 0; i < drop; i++)
        step_clear(&d->steps[i]);
    memmove(d->steps, d->steps + drop, (size_t)(d->nsteps - drop) * sizeof *d->steps);
    d->nsteps -= drop;
    d->cur -= drop;
}

int label_doc_end(struct label_doc *d, struct err *e)
{
    assert(d->open);
    d->open = 0;
    int rc = ST_OK;
    struct step s = {0};
    int lost = d->npend < 0;
    for (int i = 0; i < d->npend; i++)
        d->touched[d->pend_tile[i]] = 0;
    if (lost) {
        memset(d->touched, 0, (size_t)d->tw * d->th);
        rc = err_set(e, ST_ENOMEM, "label: out of memory for the undo history; the edit stays but "
                                   "cannot be undone");
        goto forget;
    }
    if (d->npend == 0)
        return ST_OK;
    s.tile = malloc((size_t)d->npend * sizeof *s.tile);
    s.before = malloc((size_t)d->npend * TILE_BYTES);
    s.after = malloc((size_t)d->npend * TILE_BYTES);
    if (!s.tile || !s.before || !s.after) {
        rc = err_set(e, ST_ENOMEM, "label: out of memory for the undo history; the edit stays but "
                                   "cannot be undone");
        goto forget;
    }
    for (int i = 0; i < d->npend; i++) {
        uint8_t *after = &s.after[(size_t)s.n * TILE_BYTES];
        memset(after, 0, TILE_BYTES);
        tile_io(d, d->pend_tile[i], after, 0);
        const uint8_t *before = &d->pend_before[(size_t)i * TILE_BYTES];
        if (!memcmp(before, after, TILE_BYTES))
            continue;   /* painted and painted back within the step */
        memcpy(&s.before[(size_t)s.n * TILE_BYTES], before, TILE_BYTES);
        s.tile[s.n++] = d->pend_tile[i];
    }
    if (s.n == 0) {
        step_clear(&s);
        return ST_OK;
    }
    drop_redo(d);
    if (d->nsteps == d->alloc) {
        int n = d->alloc ? 2 * d->alloc : 32;
        struct step *st = realloc(d->steps, (size_t)n * sizeof *st);
        if (!st) {
            rc = err_set(e, ST_ENOMEM, "label: out of memory for the undo history; the edit stays "
                                       "but cannot be undone");
            goto forget;
        }
        d->steps = st;
        d->alloc = n;
    }
    s.prev = d->state;
    s.id = d->state = d->next_id++;
    d->steps[d->nsteps++] = s;
    d->cur = d->nsteps;
    d->bytes += step_bytes(&s);
    trim(d);
    return ST_OK;
forget:
    /* an edit without its record: what came before it can no longer be
     * restored exactly, so the whole history goes */
    step_clear(&s);
    drop_history(d);
    d->state = d->next_id++;
    return rc;
}

static void apply(struct label_doc *d, const struct step *s, int undo)
{
    for (int i = 0; i < s->n; i++)
        tile_io(d, s->tile[i], &(undo ? s->before : s->after)[(size_t)i * TILE_BYTES], 1);
    d->state = undo ? s->prev : s->id;
}

int label_doc_undo(struct label_doc *d)
{
    if (d->open || d->cur == 0)
        return 0;
    apply(d, &d->steps[--d->cur], 1);
    return 1;
}

int label_doc_redo(struct label_doc *d)
{
    if (d->open || d->cur == d->nsteps)
        return 0;
    apply(d, &d->steps[d->cur++], 0);
    return 1;
}

int label_doc_can_undo(const struct label_doc *d) { return d->cur > 0; }
int label_doc_can_redo(const struct label_doc *d) { return d->cur < d->nsteps; }
int label_doc_dirty(const struct label_doc *d) { return d->state != d->saved; }
void label_doc_mark_saved(struct label_doc *d) { d->saved = d->state; }

size_t label_doc_labelled(const struct label_doc *d)
{
    size_t n = 0, all = (size_t)d->w * d->h;
    for (size_t i = 0; i < all; i++)
        n += d->mask[i] != LABEL_UNLABELLED;
    return n;
}

size_t label_doc_history_bytes(const struct label_doc *d) { return d->bytes; }
