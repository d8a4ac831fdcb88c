#include "screen_layout.h"

static struct screen_rect rect(int x, int y, int w, int h)
{
    return (struct screen_rect){x, y, w > 0 ? w : 0, h > 0 ? h : 0};
}

int screen_layout_text_px(int h, enum screen_text_size size)
{
    static const int at800[SCREEN_NPX] = {18, 22, 26, 64};
    int px = at800[size] * h / 800;
    /* never below the 800-line sizes' smallest readable size */
    return px < 14 ? 14 : px;
}

void screen_layout_compute(int w, int h, struct screen_layout *L)
{
    int pad = h / 100 < 4 ? 4 : h / 100;
    int small = screen_layout_text_px(h, SCREEN_PX_SMALL);
    int body = screen_layout_text_px(h, SCREEN_PX_BODY);
    int title = screen_layout_text_px(h, SCREEN_PX_TITLE);
    L->w = w;
    L->h = h;
    L->pad = pad;
    /* two header lines: the recipe and status, then camera and calibration */
    L->header = rect(0, 0, w, title + small + 3 * pad);
    L->caution = rect(0, h - (small + 2 * pad), w, small + 2 * pad);
    L->input = rect(0, L->caution.y - (body + 3 * pad), w, body + 3 * pad);
    int top = L->header.y + L->header.h, bottom = L->input.y;
    int col_x = w * 3 / 5 + pad;
    L->picture = rect(pad, top, col_x - 2 * pad, bottom - top);
    int cw = w - col_x - pad;
    int y = top + pad;
    L->verdict = rect(col_x, y, cw, h * 22 / 100);
    int side = L->verdict.h - 2 * pad;
    if (side > cw * 3 / 10)
        side = cw * 3 / 10;
    L->symbol = rect(col_x + pad, y + (L->verdict.h - side) / 2, side, side);
    L->word = rect(L->symbol.x + side + 2 * pad, L->symbol.y, cw - side - 4 * pad, side);
    y += L->verdict.h + pad;
    /* one row of counters: a label over its number (line height ~1.2 em) */
    int counters_h = (small + title) * 6 / 5 + 2 * pad;
    int rest = bottom - pad - counters_h - pad - y;
    L->reasons = rect(col_x, y, cw, rest * 11 / 20);
    y += L->reasons.h + pad;
    L->bars = rect(col_x, y, cw, rest - L->reasons.h - pad);
    L->counters = rect(col_x, bottom - pad - counters_h, cw, counters_h);
    L->help = rect(w / 5, top + 2 * pad, w * 3 / 5, bottom - top - 4 * pad);
}

struct screen_rect screen_layout_fit(int img_w, int img_h, struct screen_rect area)
{
    if (img_w <= 0 || img_h <= 0 || area.w <= 0 || area.h <= 0)
        return rect(area.x, area.y, 0, 0);
    /* compare w/h ratios in integers: img_w * area.h vs area.w * img_h */
    long long lw = (long long)img_w * area.h, aw = (long long)area.w * img_h;
    int w, h;
    if (lw >= aw) {
        w = area.w;
        h = (int)((long long)img_h * area.w / img_w);
    } else {
        h = area.h;
        w = (int)((long long)img_w * area.h / img_h);
    }
    return rect(area.x + (area.w - w) / 2, area.y + (area.h - h) / 2, w, h);
}
