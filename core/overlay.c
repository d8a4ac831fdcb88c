#include "overlay.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "font.h"

static const uint8_t unlabelled_rgb[3] = {128, 128, 128};

static const uint8_t *class_rgb(const struct recipe *r, int c)
{
    return c < r->nclasses ? r->cls[c].rgb : unlabelled_rgb;
}

struct image *overlay_colourise(const struct image *classes, const struct recipe *r,
                                struct err *e)
{
    struct image *out = image_new(classes->w, classes->h, 3, e);
    if (!out)
        return NULL;
    size_t n = (size_t)classes->w * classes->h;
    for (size_t i = 0; i < n; i++)
        memcpy(out->px + 3 * i, class_rgb(r, classes->px[i]), 3);
    return out;
}

/* The frame's rows into out from row y0 on, defect classes blended. */
static void blend_into(const struct image *frame, const struct image *classes,
                       const struct recipe *r, double alpha, struct image *out, int y0)
{
    uint8_t tinted[256] = {0};
    for (int c = 0; c < r->nclasses; c++)
        tinted[c] = (uint8_t)r->cls[c].is_defect;
    const size_t n = (size_t)frame->w * frame->h;
    uint8_t *o = out->px + (size_t)y0 * out->w * 3;
    if (frame->channels == 3)
        memcpy(o, frame->px, n * 3);
    else
        for (size_t i = 0; i < n; i++)
            o[3 * i] = o[3 * i + 1] = o[3 * i + 2] = frame->px[i];
    const int a = (int)(alpha * 256 + 0.5);
    for (size_t i = 0; i < n; i++) {
        int c = classes->px[i];
        if (tinted[c])
            for (int k = 0; k < 3; k++)
                o[3 * i + k] = (uint8_t)((o[3 * i + k] * (256 - a) + r->cls[c].rgb[k] * a) >> 8);
    }
}

static int same_size(const struct image *frame, const struct image *m, const char *what,
                     struct err *e)
{
    if (frame->w == m->w && frame->h == m->h && m->channels == 1)
        return ST_OK;
    return err_set(e, ST_EINVAL, "%s %dx%d does not match frame %dx%d", what, m->w, m->h,
                   frame->w, frame->h);
}

struct image *overlay_side_by_side(const struct image *const *imgs, int n, int gap, uint8_t grey,
                                   struct err *e)
{
    int w = 0, h = imgs[0]->h;
    for (int i = 0; i < n; i++) {
        if (imgs[i]->h != h) {
            err_set(e, ST_EINVAL, "side-by-side images differ in height");
            return NULL;
        }
        w += imgs[i]->w + (i ? gap : 0);
    }
    struct image *out = image_new(w, h, 3, e);
    if (!out)
        return NULL;
    memset(out->px, grey, (size_t)w * h * 3);
    int x0 = 0;
    for (int i = 0; i < n; i++) {
        const struct image *s = imgs[i];
        for (int y = 0; y < h; y++)
            for (int x = 0; x < s->w; x++) {
                uint8_t *o = out->px + ((size_t)y * w + x0 + x) * 3;
                const uint8_t *p = s->px + ((size_t)y * s->w + x) * s->channels;
                for (int k = 0; k < 3; k++)
                    o[k] = p[s->channels == 3 ? k : 0];
            }
        x0 += s->w + gap;
    }
    return out;
}

int overlay_text_scale(int w)
{
    if (w < 240)
        return 1;
    return w / 400 > 2 ? w / 400 : 2;
}

static void put(struct image *img, int x, int y, const uint8_t rgb[3])
{
    memcpy(img->px + ((size_t)y * img->w + x) * 3, rgb, 3);
}

/* Inner outline of every zone of the map; the picture's frame starts at row y0. */
static void draw_zone_outlines(struct image *out, int y0, const struct image *zones)
{
    static const uint8_t rgb[3] = OVERLAY_ZONE_RGB;
    const int w = zones->w, h = zones->h;
    for (int y = 0; y < h; y++) {
        const uint8_t *z = zones->px + (size_t)y * w;
        for (int x = 0; x < w; x++) {
            int v = z[x];
            if (v == ZONE_NONE)
                continue;
            if ((x > 0 && z[x - 1] != v) || (x + 1 < w && z[x + 1] != v) ||
                (y > 0 && z[x - w] != v) || (y + 1 < h && z[x + w] != v))
                put(out, x, y0 + y, rgb);
        }
    }
}

static int region_at(const struct region_set *rs, size_t i)
{
    int32_t l = rs->labels[i];
    return l >= 0 && l < rs->n ? l : -1;
}

/* Each region's bounding box is all it can touch. */
static void draw_region_outlines(struct image *out, int y0, const struct region_set *rs,
                                 const struct recipe *r, int w, int h)
{
    for (int k = 0; k < rs->n; k++) {
        const struct region *g = &rs->r[k];
        int x0 = g->x0 < 0 ? 0 : g->x0, x1 = g->x1 >= w ? w - 1 : g->x1;
        int ya = g->y0 < 0 ? 0 : g->y0, yb = g->y1 >= h ? h - 1 : g->y1;
        for (int y = ya; y <= yb; y++)
            for (int x = x0; x <= x1; x++) {
                size_t i = (size_t)y * w + x;
                if (region_at(rs, i) != k)
                    continue;
                if ((x > 0 && region_at(rs, i - 1) != k) ||
                    (x + 1 < w && region_at(rs, i + 1) != k) ||
                    (y > 0 && region_at(rs, i - w) != k) ||
                    (y + 1 < h && region_at(rs, i + w) != k))
                    put(out, x, y0 + y, class_rgb(r, g->cls));
            }
    }
}

static void fill_rect(struct image *img, int x0, int y0, int x1, int y1, const uint8_t rgb[3])
{
    for (int y = y0 < 0 ? 0 : y0; y < y1 && y < img->h; y++)
        for (int x = x0 < 0 ? 0 : x0; x < x1 && x < img->w; x++)
            put(img, x, y, rgb);
}

struct box {
    int x0, y0, x1, y1;
};

static int overlaps(const struct box *a, const struct box *b)
{
    return a->x0 < b->x1 && b->x0 < a->x1 && a->y0 < b->y1 && b->y0 < a->y1;
}

/* Where a label of bw x bh goes: right of the region's box, or left of it
 * where the frame ends, moved down (then up) past labels already placed so
 * that neighbouring defects' ids stay readable; inside the frame rows. */
static struct box place_label(const struct region *g, int bw, int bh, int w, int h,
                              const struct box *placed, int nplaced)
{
    struct box b;
    b.x0 = g->x1 + 2 + bw <= w ? g->x1 + 2 : g->x0 - 2 - bw;
    b.x1 = b.x0 + bw;
    int start = g->y0 + bh <= h ? g->y0 : h - bh;
    start = start < 0 ? 0 : start;
    for (int step = 0; step <= 2 * nplaced; step++) {
        /* 0, +1, -1, +2, -2 ... label heights from the region's top */
        int k = (step + 1) / 2 * (step % 2 ? 1 : -1);
        b.y0 = start + k * (bh + 1);
        b.y1 = b.y0 + bh;
        if (b.y0 < 0 || b.y1 > h)
            continue;
        int clear = 1;
        for (int i = 0; clear && i < nplaced; i++)
            clear = !overlaps(&b, &placed[i]);
        if (clear)
            return b;
    }
    b.y0 = start;
    b.y1 = start + bh;
    return b;
}

static void draw_region_ids(struct image *out, int y0, const struct region_set *rs,
                            const struct recipe *r, int w, int h, int scale)
{
    static const uint8_t dark[3] = {16, 16, 16};
    /* Without room to remember placements the labels are still drawn, only
     * possibly on top of each other. */
    struct box *placed = malloc((size_t)rs->n * sizeof *placed);
    int nplaced = 0;
    for (int i = 0; i < rs->n; i++) {
        const struct region *g = &rs->r[i];
        if (!judge_region_counts(r, g))
            continue;
        char id[16];
        snprintf(id, sizeof id, "%d", g->id);
        int bw = font_text_width(id, scale) + 2 * scale, bh = (FONT_CELL_H + 1) * scale;
        struct box b = place_label(g, bw, bh, w, h, placed, nplaced);
        if (placed)
            placed[nplaced++] = b;
        fill_rect(out, b.x0, y0 + b.y0, b.x1, y0 + b.y1, dark);
        font_draw_text(out, b.x0 + scale, y0 + b.y0 + scale, id, scale, class_rgb(r, g->cls));
    }
    free(placed);
}

/* Banner layout, in units of the text scale s: padding, the verdict at
 * scale 2s, a gap, then lines of text BAN_LINE apart, padding. */
enum { BAN_PAD = 4, BAN_GAP = 4, BAN_LINE = FONT_CELL_H + 3 };

/* The words of s in lines no wider than width pixels at scale, drawn from
 * (x, y) when img is not NULL; returns the number of lines.  A word wider
 * than a line gets a line of its own and is clipped. */
static int text_block(struct image *img, int x, int y, int width, const char *s, int scale,
                      const uint8_t rgb[3])
{
    char line[256] = "", next[256];
    int n = 0;
    for (;;) {
        s += strspn(s, " ");
        int wl = (int)strcspn(s, " ");
        if (*line && (!wl || snprintf(next, sizeof next, "%s %.*s", line, wl, s) < 0 ||
                      font_text_width(next, scale) > width)) {
            if (img)
                font_draw_text(img, x, y + n * BAN_LINE * scale, line, scale, rgb);
            n++;
            *line = '\0';
        }
        if (!wl)
            return n;
        if (*line)
            memcpy(line, next, sizeof line);
        else
            snprintf(line, sizeof line, "%.*s", wl, s);
        s += wl;
    }
}

/* Draws the banner, height rows tall (what a first call with out NULL
 * returned), into out when it is not NULL; returns its height. */
static int banner(struct image *out, int height, int w, int s, const struct recipe *r,
                  const struct judgement *j)
{
    static const uint8_t pass[3] = OVERLAY_PASS_RGB, fail[3] = OVERLAY_FAIL_RGB,
                         none[3] = OVERLAY_NONE_RGB, text[3] = OVERLAY_TEXT_RGB;
    char reason[240] = "no rule broken";
    if (j->nreasons > 0) {
        char words[200];
        judge_describe_reason(r, &j->reasons[0], words, sizeof words);
        if (j->nreasons > 1)
            snprintf(reason, sizeof reason, "%s (+%d more)", words, j->nreasons - 1);
        else
            snprintf(reason, sizeof reason, "%s", words);
    } else if (j->verdict != VERDICT_PASS) {
        snprintf(reason, sizeof reason, "no reason recorded");
    }
    const int x = BAN_PAD * s, width = w - 2 * x;
    if (out) {
        const uint8_t *bg = j->verdict == VERDICT_PASS   ? pass
                            : j->verdict == VERDICT_FAIL ? fail
                                                         : none;
        fill_rect(out, 0, 0, w, height, bg);
        const char *word = j->verdict == VERDICT_NONE ? "NO VERDICT" : judge_verdict_name(j->verdict);
        int big = 2 * s;
        while (big > 1 && font_text_width(word, big) > width)
            big--;
        font_draw_text(out, x, BAN_PAD * s, word, big, text);
    }
    int y = (BAN_PAD + 2 * FONT_CELL_H + BAN_GAP) * s;
    y += text_block(out, x, y, width, reason, s, text) * BAN_LINE * s;
    y += text_block(out, x, y, width, OVERLAY_CAUTION, s, text) * BAN_LINE * s;
    return y + (BAN_PAD - (BAN_LINE - FONT_CELL_H)) * s;
}

struct image *overlay_inspection(const struct image *frame, const struct image *classes,
                                 const struct region_set *rs, const struct image *zones,
                                 const struct recipe *r, const struct judgement *j,
                                 struct err *e)
{
    if (same_size(frame, classes, "class map", e) || (zones && same_size(frame, zones, "zone map", e)))
        return NULL;
    const int w = frame->w, h = frame->h, s = overlay_text_scale(w);
    const int top = j ? banner(NULL, 0, w, s, r, j) : 0;
    struct image *out = image_new(w, h + top, 3, e);
    if (!out)
        return NULL;
    blend_into(frame, classes, r, OVERLAY_TINT, out, top);
    if (zones)
        draw_zone_outlines(out, top, zones);
    if (rs && rs->labels && rs->n > 0) {
        draw_region_outlines(out, top, rs, r, w, h);
        draw_region_ids(out, top, rs, r, w, h, s);
    }
    if (j)
        banner(out, top, w, s, r, j);
    return out;
}
