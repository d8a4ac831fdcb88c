#include "trigger.h"

#include <stdlib.h>
#include <string.h>

struct trigger {
    struct recipe_trigger p;
    int mode;
    int tw, th;               /* thumbnail size; 0: no frame yet */
    uint32_t *cur, *last, *empty;
    int have_last, same_count, leave_count, relearn;
    struct trigger_view v;
};

static const char *const mode_names[] = {"key", "auto", "continuous"};

const char *trigger_mode_name(int mode)
{
    return mode >= 0 && mode < 3 ? mode_names[mode] : "?";
}

int trigger_mode_parse(const char *s)
{
    for (int m = 0; m < 3; m++)
        if (s && !strcmp(s, mode_names[m]))
            return m;
    return -1;
}

int trigger_new(const struct recipe_trigger *params, int mode, struct trigger **out,
                struct err *e)
{
    *out = NULL;
    if (mode < RECIPE_TRIGGER_KEY || mode > RECIPE_TRIGGER_CONTINUOUS)
        return err_set(e, ST_EINVAL, "trigger: unknown mode %d", mode);
    struct trigger *t = calloc(1, sizeof *t);
    if (!t)
        return err_set(e, ST_ENOMEM, "trigger: out of memory");
    t->p = *params;
    t->mode = mode;
    t->v.stillness = t->v.presence = -1;
    t->v.armed = 1;
    *out = t;
    return ST_OK;
}

void trigger_free(struct trigger *t)
{
    if (!t)
        return;
    free(t->cur);
    free(t->last);
    free(t->empty);
    free(t);
}

static int resize(struct trigger *t, int tw, int th, struct err *e)
{
    size_t n = (size_t)tw * th;
    free(t->cur);
    free(t->last);
    free(t->empty);
    t->cur = malloc(n * sizeof *t->cur);
    t->last = malloc(n * sizeof *t->last);
    t->empty = malloc(n * sizeof *t->empty);
    t->tw = t->th = 0;
    if (!t->cur || !t->last || !t->empty)
        return err_set(e, ST_ENOMEM, "trigger: out of memory for a %dx%d thumbnail", tw, th);
    t->tw = tw;
    t->th = th;
    t->have_last = 0;
    t->v.learned = t->v.present = 0;
    t->v.armed = 1;
    t->v.presence = -1;
    return ST_OK;
}

static void thumbnail(const struct image *img, int tw, int th, uint32_t *out)
{
    memset(out, 0, (size_t)tw * th * sizeof *out);
    for (int y = 0; y < th * TRIGGER_BLOCK; y++) {
        const uint8_t *row = img->px + (size_t)y * img->w * 3;
        uint32_t *o = out + (size_t)(y / TRIGGER_BLOCK) * tw;
        for (int bx = 0; bx < tw; bx++) {
            const uint8_t *p = row + (size_t)bx * TRIGGER_BLOCK * 3;
            uint32_t s = 0;
            for (int k = 0; k < 3 * TRIGGER_BLOCK; k++)
                s += p[k];
            o[bx] += s;
        }
    }
}

/* sums of 3 * 64 values per block: grey level = sum / 192 */
#define BLOCK_VALUES (3.0 * TRIGGER_BLOCK * TRIGGER_BLOCK)

static void measure_presence(struct trigger *t, size_t n)
{
    double level = t->p.presence_level * BLOCK_VALUES;
    size_t over = 0;
    for (size_t i = 0; i < n; i++) {
        double d = (double)t->cur[i] - (double)t->empty[i];
        over += (d < 0 ? -d : d) > level;
    }
    t->v.presence = (double)over / (double)n;
    if (!t->v.present) {
        if (t->v.presence > t->p.enter_share) {
            t->v.present = 1;
            t->leave_count = 0;
        }
    } else if (t->v.presence < t->p.leave_share) {
        if (++t->leave_count >= t->p.leave_frames) {
            t->v.present = 0;
            t->v.armed = 1;
        }
    } else {
        t->leave_count = 0;
    }
}

int trigger_feed(struct trigger *t, const struct image *img, unsigned *events, struct err *e)
{
    *events = 0;
    if (!img || img->channels != 3)
        return err_set(e, ST_EINVAL, "trigger: an RGB frame is needed");
    int tw = img->w / TRIGGER_BLOCK, th = img->h / TRIGGER_BLOCK;
    if (tw < 1 || th < 1)
        return err_set(e, ST_ERANGE, "trigger: frame %dx%d is smaller than one %dx%d block",
                       img->w, img->h, TRIGGER_BLOCK, TRIGGER_BLOCK);
    if (tw != t->tw || th != t->th) {
        int rc = resize(t, tw, th, e);
        if (rc)
            return rc;
    }
    size_t n = (size_t)tw * th;
    thumbnail(img, tw, th, t->cur);
    if (!t->have_last) {
        t->v.stillness = -1;
        t->v.still_count = 0;
        t->same_count = 0;
    } else {
        double sum = 0;
        for (size_t i = 0; i < n; i++)
            sum += t->cur[i] > t->last[i] ? t->cur[i] - t->last[i] : t->last[i] - t->cur[i];
        t->v.stillness = sum / (double)n / BLOCK_VALUES;
        t->same_count = sum == 0 ? t->same_count + 1 : 0;
        /* a repeated frame says nothing about stillness: a camera frozen
         * while a part slides in must not look like a part lying still */
        t->v.still_count =
            sum > 0 && t->v.stillness <= t->p.still_level ? t->v.still_count + 1 : 0;
    }
    t->have_last = 1;
    int frozen = t->same_count + 1 >= t->p.frozen_frames;
    if (frozen != t->v.frozen)
        *events |= frozen ? TRIGGER_FROZEN : TRIGGER_MOVING;
    t->v.frozen = frozen;
    if (!frozen && (!t->v.learned || t->relearn) && t->v.still_count >= t->p.still_frames) {
        memcpy(t->empty, t->cur, n * sizeof *t->cur);
        t->v.learned = 1;
        t->relearn = 0;
        t->v.present = 0;
        t->v.armed = 1;
        *events |= TRIGGER_LEARNED;
    }
    if (!frozen && t->v.learned)
        measure_presence(t, n);
    if (!frozen && (t->mode == RECIPE_TRIGGER_CONTINUOUS ||
                    (t->mode == RECIPE_TRIGGER_AUTO && t->v.learned && t->v.present &&
                     t->v.armed && t->v.still_count >= t->p.still_frames))) {
        *events |= TRIGGER_FIRE;
        t->v.armed = 0;
    }
    uint32_t *swap = t->last;
    t->last = t->cur;
    t->cur = swap;
    return ST_OK;
}

void trigger_relearn(struct trigger *t)
{
    t->relearn = 1;
}

void trigger_disarm(struct trigger *t)
{
    t->v.armed = 0;
}

void trigger_restart(struct trigger *t)
{
    t->have_last = 0;
    t->v.still_count = 0;
    t->same_count = 0;
    t->v.stillness = -1;
}

void trigger_view(const struct trigger *t, struct trigger_view *v)
{
    *v = t->v;
}
