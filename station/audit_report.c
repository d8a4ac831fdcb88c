#include "audit_report.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "core/judge.h"
#include "core/pngio.h"

struct image *audit_thumb_scale(const struct image *src, int side, struct err *e)
{
    int big = src->w > src->h ? src->w : src->h;
    if (big <= side)
        return image_clone(src, e);
    int w = (int)((int64_t)src->w * side / big), h = (int)((int64_t)src->h * side / big);
    struct image *dst = image_new(w > 0 ? w : 1, h > 0 ? h : 1, src->channels, e);
    if (!dst)
        return NULL;
    int c = src->channels;
    for (int y = 0; y < dst->h; y++) {
        int y0 = (int)((int64_t)y * src->h / dst->h), y1 = (int)((int64_t)(y + 1) * src->h / dst->h);
        for (int x = 0; x < dst->w; x++) {
            int x0 = (int)((int64_t)x * src->w / dst->w);
            int x1 = (int)((int64_t)(x + 1) * src->w / dst->w);
            uint32_t sum[4] = {0};
            for (int yy = y0; yy < y1; yy++)
                for (int xx = x0; xx < x1; xx++)
                    for (int k = 0; k < c; k++)
                        sum[k] += src->px[((size_t)yy * src->w + xx) * c + k];
            uint32_t n = (uint32_t)((y1 - y0) * (x1 - x0));
            for (int k = 0; k < c; k++)
                dst->px[((size_t)y * dst->w + x) * c + k] = (uint8_t)((sum[k] + n / 2) / n);
        }
    }
    return dst;
}

char *audit_base64(const unsigned char *data, size_t len)
{
    static const char abc[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    char *out = malloc((len + 2) / 3 * 4 + 1), *o = out;
    if (!out)
        return NULL;
    for (size_t i = 0; i < len; i += 3) {
        uint32_t v = (uint32_t)data[i] << 16;
        if (i + 1 < len)
            v |= (uint32_t)data[i + 1] << 8;
        if (i + 2 < len)
            v |= data[i + 2];
        *o++ = abc[v >> 18];
        *o++ = abc[(v >> 12) & 63];
        *o++ = i + 1 < len ? abc[(v >> 6) & 63] : '=';
        *o++ = i + 2 < len ? abc[v & 63] : '=';
    }
    *o = '\0';
    return out;
}

static void esc(FILE *f, const char *s)
{
    for (; s && *s; s++) {
        switch (*s) {
        case '&': fputs("&amp;", f); break;
        case '<': fputs("&lt;", f); break;
        case '>': fputs("&gt;", f); break;
        case '"': fputs("&quot;", f); break;
        case '\'': fputs("&#39;", f); break;
        default: fputc(*s, f);
        }
    }
}

static const char *str(const json_t *o, const char *key)
{
    const char *s = json_string_value(json_object_get(o, key));
    return s ? s : "";
}

static long long num(const json_t *o, const char *key)
{
    return (long long)json_integer_value(json_object_get(o, key));
}

static double real(const json_t *o, const char *key)
{
    return json_number_value(json_object_get(o, key));
}

/* A tick step of 1, 2 or 5 times a power of ten giving at most 6 ticks. */
static double tick_step(double top)
{
    double base = pow(10, floor(log10(top / 6)));
    const double mult[3] = {1, 2, 5};
    for (int i = 0; i < 3; i++)
        if (top / (base * mult[i]) <= 6)
            return base * mult[i];
    return base * 10;
}

enum { SVG_W = 760, SVG_L = 60, SVG_R = 48, SVG_T = 24 };

static void y_axis(FILE *f, double top, int h)
{
    double step = tick_step(top);
    for (double v = 0; v <= top * 1.0001; v += step) {
        double y = SVG_T + h * (1 - v / top);
        fprintf(f, "<line class=\"grid\" x1=\"%d\" x2=\"%d\" y1=\"%.1f\" y2=\"%.1f\"/>", SVG_L,
                SVG_W - SVG_R, y, y);
        fprintf(f, "<text x=\"%d\" y=\"%.1f\" text-anchor=\"end\">%.*f</text>\n", SVG_L - 6,
                y + 4, step >= 1 ? 0 : step < 0.01 ? 3 : 2, v);
    }
}

static void x_labels(FILE *f, const json_t *points, const char *key, double dx, int y,
                     int rotate)
{
    size_t m = json_array_size(points), every = m <= 12 ? 1 : (m + 7) / 8;
    for (size_t i = 0; i < m; i += every) {
        double x = SVG_L + (i + 0.5) * dx;
        fprintf(f, "<text x=\"%.1f\" y=\"%d\" text-anchor=\"%s\"", x, y, rotate ? "end" : "middle");
        if (rotate)
            fprintf(f, " transform=\"rotate(-35 %.1f %d)\"", x, y);
        fputc('>', f);
        esc(f, str(json_array_get(points, i), key));
        fputs("</text>\n", f);
    }
}

static void svg_pchart(FILE *f, const json_t *pc)
{
    const json_t *pts = json_object_get(pc, "points");
    size_t m = json_array_size(pts);
    const int h = 220;
    double top = 0;
    for (size_t i = 0; i < m; i++) {
        const json_t *p = json_array_get(pts, i);
        top = fmax(top, fmax(real(p, "p"), real(p, "ucl")));
    }
    top = fmax(top * 1.1, 0.01);
    double dx = (double)(SVG_W - SVG_L - SVG_R) / (double)m;
    fprintf(f, "<svg class=\"chart\" viewBox=\"0 0 %d %d\" role=\"img\" "
               "aria-label=\"reject rate per subgroup with control limits\">\n",
            SVG_W, h + SVG_T + 70);
    y_axis(f, top, h);
    const char *lim[2] = {"ucl", "lcl"};
    for (int l = 0; l < 2; l++) {
        fputs("<path class=\"limit\" d=\"", f);
        /* a step line: each subgroup's limit spans its own slot */
        for (size_t i = 0; i < m; i++) {
            double y = SVG_T + h * (1 - real(json_array_get(pts, i), lim[l]) / top);
            if (i == 0)
                fprintf(f, "M%d %.1f", SVG_L, y);
            else
                fprintf(f, "V%.1f", y);
            fprintf(f, "H%.1f", SVG_L + (i + 1) * dx);
        }
        fputs("\"/>\n", f);
    }
    double yc = SVG_T + h * (1 - real(pc, "pbar") / top);
    fprintf(f, "<line class=\"centre\" x1=\"%d\" x2=\"%d\" y1=\"%.1f\" y2=\"%.1f\"/>\n", SVG_L,
            SVG_W - SVG_R, yc, yc);
    fputs("<polyline class=\"series\" points=\"", f);
    for (size_t i = 0; i < m; i++)
        fprintf(f, "%.1f,%.1f ", SVG_L + (i + 0.5) * dx,
                SVG_T + h * (1 - real(json_array_get(pts, i), "p") / top));
    fputs("\"/>\n", f);
    for (size_t i = 0; i < m; i++) {
        const json_t *p = json_array_get(pts, i);
        int out = num(p, "outside") != 0;
        fprintf(f, "<circle class=\"%s\" cx=\"%.1f\" cy=\"%.1f\" r=\"%d\"><title>", out ? "out" : "in",
                SVG_L + (i + 0.5) * dx, SVG_T + h * (1 - real(p, "p") / top), out ? 5 : 3);
        esc(f, str(p, "label"));
        fprintf(f, ": %lld of %lld</title></circle>\n", num(p, "rejects"), num(p, "n"));
    }
    x_labels(f, pts, "label", dx, SVG_T + h + 16, m > 6);
    fprintf(f, "<text x=\"%d\" y=\"%d\">reject rate (points), centre line (solid), "
               "control limits (dashed), outside the limits (red)</text>\n</svg>\n",
            SVG_L, SVG_T - 10);
}

#define PARETO_BARS 10

static void svg_pareto(FILE *f, const json_t *rows)
{
    size_t m = json_array_size(rows), shown = m > PARETO_BARS ? PARETO_BARS : m;
    const int h = 200;
    double top = (double)num(json_array_get(rows, 0), "count") * 1.1;
    double dx = (double)(SVG_W - SVG_L - SVG_R) / (double)shown;
    fprintf(f, "<svg class=\"chart\" viewBox=\"0 0 %d %d\" role=\"img\" "
               "aria-label=\"reasons of rejects, most frequent first\">\n",
            SVG_W, h + SVG_T + 110);
    y_axis(f, top, h);
    json_t *labels = json_array();
    for (size_t i = 0; i < shown; i++) {
        const json_t *r = json_array_get(rows, i);
        double bh = h * (double)num(r, "count") / top;
        fprintf(f, "<rect class=\"bar\" x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\">"
                   "<title>%lld</title></rect>\n",
                SVG_L + i * dx + dx * 0.15, SVG_T + h - bh, dx * 0.7, bh, num(r, "count"));
        char label[160];
        snprintf(label, sizeof label, "%s %s%s%s", str(r, "class"), str(r, "rule"),
                 *str(r, "zone") ? " / " : "", str(r, "zone"));
        json_array_append_new(labels, json_pack("{s:s}", "label", label));
    }
    x_labels(f, labels, "label", dx, SVG_T + h + 16, 1);
    json_decref(labels);
    /* the cumulative share on its own axis, 0 to 100% on the right */
    fputs("<polyline class=\"series\" points=\"", f);
    for (size_t i = 0; i < shown; i++)
        fprintf(f, "%.1f,%.1f ", SVG_L + (i + 0.5) * dx,
                SVG_T + h * (1 - real(json_array_get(rows, i), "cumulative")));
    fputs("\"/>\n", f);
    for (size_t i = 0; i < shown; i++)
        fprintf(f, "<circle class=\"in\" cx=\"%.1f\" cy=\"%.1f\" r=\"3\"/>\n",
                SVG_L + (i + 0.5) * dx,
                SVG_T + h * (1 - real(json_array_get(rows, i), "cumulative")));
    for (int q = 0; q <= 4; q++)
        fprintf(f, "<text x=\"%d\" y=\"%.1f\">%d%%</text>\n", SVG_W - SVG_R + 6,
                SVG_T + h * (1 - q / 4.0) + 4, 25 * q);
    fprintf(f, "<text x=\"%d\" y=\"%d\">rejects per reason (bars)</text>"
               "<text x=\"%d\" y=\"%d\" text-anchor=\"end\">cumulative share (line)</text>\n"
               "</svg>\n",
            SVG_L, SVG_T - 10, SVG_W - 4, SVG_T - 10);
}

static void verdict_row(FILE *f, const char *label, const json_t *v)
{
    fputs("<tr><td>", f);
    esc(f, label);
    long long p = num(v, "PASS"), x = num(v, "FAIL"), n = num(v, "NO_VERDICT");
    fprintf(f, "</td><td>%lld</td><td>%lld</td><td>%lld</td><td>%lld</td></tr>\n", p, x, n,
            p + x + n);
}

static void bucket_table(FILE *f, const char *title, const json_t *a)
{
    fprintf(f, "<table><tr><th>%s</th><th>PASS</th><th>FAIL</th><th>NO VERDICT</th>"
               "<th>total</th></tr>\n",
            title);
    size_t i;
    json_t *b;
    json_array_foreach(a, i, b) verdict_row(f, str(b, "label"), json_object_get(b, "verdicts"));
    fputs("</table>\n", f);
}

/* One row of the stations table: st has records, verdicts; rejects and
 * the audit's false_reject are passed, as the total keeps them elsewhere. */
static void station_row(FILE *f, const char *station, const char *line, const json_t *st,
                        long long rejects, const json_t *fr)
{
    const json_t *v = json_object_get(st, "verdicts");
    long long n = num(st, "records");
    fputs("<tr><td>", f);
    esc(f, station);
    fputs("</td><td>", f);
    esc(f, line && *line ? line : "-");
    fprintf(f, "</td><td>%lld</td><td>%lld</td><td>%lld</td><td>%lld</td><td>%lld</td>", n,
            num(v, "PASS"), num(v, "FAIL"), num(v, "NO_VERDICT"), rejects);
    if (n > 0)
        fprintf(f, "<td>%.2f%%</td>", 100.0 * (double)rejects / (double)n);
    else
        fputs("<td>-</td>", f);
    if (json_is_real(json_object_get(fr, "rate")))
        fprintf(f, "<td>%lld of %lld (%.1f%%)</td>", num(fr, "false_rejects"), num(fr, "audited"),
                100 * real(fr, "rate"));
    else
        fputs("<td>-</td>", f);
    fputs("<td>", f);
    if (*str(st, "public_key")) {
        fputs("<code>", f);
        esc(f, str(st, "public_key"));
        fputs("</code>", f);
    }
    fputs("</td></tr>\n", f);
}

/* The stations side by side, with the total, when the log holds several. */
static void stations_section(FILE *f, const json_t *st)
{
    const json_t *a = json_object_get(st, "stations");
    if (json_array_size(a) < 2)
        return;
    fputs("<h2>Stations</h2>\n<table><tr><th>station</th><th>line</th><th>records</th>"
          "<th>PASS</th><th>FAIL</th><th>NO VERDICT</th><th>rejects</th><th>reject rate</th>"
          "<th>false rejects (audited)</th><th>public key</th></tr>\n",
          f);
    size_t i;
    json_t *s;
    json_array_foreach(a, i, s)
    {
        const json_t *au = json_object_get(s, "audit");
        station_row(f, str(s, "station"), str(s, "line"), s, num(s, "rejects"),
                    json_object_get(au, "false_reject"));
    }
    const json_t *au = json_object_get(st, "audit");
    station_row(f, "total", "", st, num(au, "rejects"), json_object_get(au, "false_reject"));
    fputs("</table>\n", f);
}

static void pchart_section(FILE *f, const json_t *pc)
{
    fputs("<h2>Reject rate</h2>\n", f);
    if (!json_is_object(pc)) {
        fputs("<p>No records in the period.</p>\n", f);
        return;
    }
    fprintf(f, "<p>Rejects (FAIL and NO VERDICT) per %s, with the centre line p&#772; = %.4f "
               "and limits p&#772; &#177; 3&#183;&#8730;(p&#772;(1&#8722;p&#772;)/n) of each "
               "subgroup (Shewhart p-chart).</p>\n",
            str(pc, "subgroup"), real(pc, "pbar"));
    svg_pchart(f, pc);
    const json_t *out = json_object_get(pc, "outside");
    if (json_array_size(out) == 0) {
        fputs("<p>No subgroup outside its limits.</p>\n", f);
        return;
    }
    fputs("<p class=\"warn\">Outside the limits: ", f);
    for (size_t i = 0; i < json_array_size(out); i++) {
        fputs(i ? ", " : "", f);
        esc(f, json_string_value(json_array_get(out, i)));
    }
    fputs(".</p>\n", f);
}

static void pareto_section(FILE *f, const json_t *rows)
{
    fputs("<h2>Reasons of rejects</h2>\n", f);
    if (json_array_size(rows) == 0) {
        fputs("<p>No reasons recorded.</p>\n", f);
        return;
    }
    svg_pareto(f, rows);
    fputs("<table><tr><th>class</th><th>rule</th><th>zone</th><th>count</th><th>share</th>"
          "<th>cumulative</th></tr>\n",
          f);
    size_t i;
    json_t *r;
    json_array_foreach(rows, i, r)
    {
        fputs("<tr><td>", f);
        esc(f, str(r, "class"));
        fputs("</td><td>", f);
        esc(f, str(r, "rule"));
        fputs("</td><td>", f);
        esc(f, str(r, "zone"));
        fprintf(f, "</td><td>%lld</td><td>%.1f%%</td><td>%.1f%%</td></tr>\n", num(r, "count"),
                100 * real(r, "share"), 100 * real(r, "cumulative"));
    }
    fputs("</table>\n", f);
}

static void audit_section(FILE *f, const json_t *au)
{
    fputs("<h2>Audit of rejects</h2>\n<table><tr><th>latest disposition</th><th>rejects</th>"
          "</tr>\n",
          f);
    const json_t *d = json_object_get(au, "dispositions");
    for (int k = 0; k < LOG_DISP_COUNT; k++)
        fprintf(f, "<tr><td>%s</td><td>%lld</td></tr>\n",
                k ? log_disp_name(k) : "not yet disposed", num(d, log_disp_name(k)));
    fputs("</table>\n", f);
    const json_t *fr = json_object_get(au, "false_reject");
    if (json_is_number(json_object_get(fr, "rate"))) {
        const json_t *ci = json_object_get(fr, "ci95");
        fprintf(f, "<p>False rejects: %lld of %lld audited rejects (confirmed, rework or "
                   "false-reject) = %.1f%%, exact (Clopper&#8211;Pearson) 95%% interval "
                   "%.1f%% to %.1f%%.</p>\n",
                num(fr, "false_rejects"), num(fr, "audited"), 100 * real(fr, "rate"),
                100 * json_number_value(json_array_get(ci, 0)),
                100 * json_number_value(json_array_get(ci, 1)));
    } else {
        fputs("<p>False rejects: no audited rejects in the period.</p>\n", f);
    }
    const json_t *ka = json_object_get(au, "kappa");
    const json_t *t = json_object_get(ka, "table");
    fputs("<p>Station against auditor on the disposed records (Cohen's kappa): ", f);
    if (json_is_number(json_object_get(ka, "value")))
        fprintf(f, "&#954; = %.3f.</p>\n", real(ka, "value"));
    else
        fputs("undefined (every disposed record fell in one row and one column).</p>\n", f);
    fputs("<table><tr><th></th><th>auditor: good</th><th>auditor: reject</th></tr>\n", f);
    const char *row[2] = {"station: PASS", "station: reject"};
    for (size_t i = 0; i < 2; i++) {
        const json_t *r = json_array_get(t, i);
        fprintf(f, "<tr><th>%s</th><td>%lld</td><td>%lld</td></tr>\n", row[i],
                (long long)json_integer_value(json_array_get(r, 0)),
                (long long)json_integer_value(json_array_get(r, 1)));
    }
    fputs("</table>\n", f);
}

static void reasons_text(FILE *f, const char *reasons_json)
{
    json_t *a = json_loads(reasons_json ? reasons_json : "[]", 0, NULL);
    size_t i;
    json_t *x;
    json_array_foreach(a, i, x)
    {
        fputs(i ? "; " : "", f);
        esc(f, str(x, "class"));
        fputc(' ', f);
        esc(f, str(x, "rule"));
    }
    json_decref(a);
}

static int thumb_figure(FILE *f, const struct audit_thumb *t, struct err *e)
{
    const struct log_record *r = t->rec;
    fputs("<figure>", f);
    if (t->img) {
        unsigned char *png;
        size_t len;
        char what[64];
        snprintf(what, sizeof what, "thumbnail of record %lld", (long long)r->seq);
        int rc = pngio_encode_mem(what, t->img, 6, &png, &len, e);
        if (rc)
            return rc;
        char *b64 = audit_base64(png, len);
        free(png);
        if (!b64)
            return err_set(e, ST_ENOMEM, "%s: out of memory", what);
        fprintf(f, "<img width=\"%d\" height=\"%d\" alt=\"overlay of record %lld\" "
                   "src=\"data:image/png;base64,%s\">",
                t->img->w, t->img->h, (long long)r->seq, b64);
        free(b64);
    } else {
        fputs("<div class=\"missing\">", f);
        esc(f, t->note ? t->note : "no evidence");
        fputs("</div>", f);
    }
    fprintf(f, "<figcaption><b>#%lld</b> ", (long long)r->seq);
    esc(f, r->utc);
    fprintf(f, " %s<br>", r->verdict == VERDICT_NONE ? "NO VERDICT" : judge_verdict_name(r->verdict));
    reasons_text(f, r->reasons_json);
    if (r->has_disposition) {
        fprintf(f, "<br>%s by ", log_disp_name(r->disp.disp));
        esc(f, r->disp.auditor);
    } else {
        fputs("<br>not yet disposed", f);
    }
    fputs("</figcaption></figure>\n", f);
    return ST_OK;
}

static const char STYLE[] =
    "body{font-family:sans-serif;max-width:60em;margin:1em auto;padding:0 1em;color:#222}"
    "table{border-collapse:collapse;margin:.5em 0}td,th{border:1px solid #bbb;padding:.2em .6em;"
    "text-align:right}td:first-child{text-align:left}th{background:#eee}.caution{border:2px solid #b60;padding:.5em;"
    "background:#fff4e0}.warn{color:#a00;font-weight:bold}svg.chart{width:100%;height:auto}"
    "svg text{font-size:11px;fill:#333}.grid{stroke:#ddd}.limit{fill:none;stroke:#a00;"
    "stroke-dasharray:5 3}.centre{stroke:#444}.series{fill:none;stroke:#269}.in{fill:#269}"
    ".out{fill:#d00}.bar{fill:#7ab}figure{display:inline-block;width:200px;margin:.3em;"
    "vertical-align:top;font-size:.8em}figure img{display:block}.missing{width:192px;"
    "height:144px;background:#eee;display:flex;align-items:center;justify-content:center}";

int audit_report_html(FILE *f, const char *source, const json_t *st,
                      const struct audit_thumb *thumbs, size_t nthumbs, struct err *e)
{
    fprintf(f, "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
               "<title>Inspection audit</title>\n<style>%s</style>\n</head>\n<body>\n"
               "<h1>Inspection audit</h1>\n<p class=\"caution\">",
            STYLE);
    esc(f, CLI_CAUTION);
    fputs("</p>\n<p>Log: ", f);
    esc(f, source);
    fprintf(f, "<br>%lld records", num(st, "records"));
    if (*str(st, "first")) {
        fputs(" from ", f);
        esc(f, str(st, "first"));
        fputs(" to ", f);
        esc(f, str(st, "last"));
    }
    fprintf(f, " (days and shifts counted at UTC%+d min).</p>\n", (int)num(st, "utc_offset_min"));
    if (*str(st, "public_key")) {
        fputs("<p>Signed with the station's Ed25519 public key <code>", f);
        esc(f, str(st, "public_key"));
        fputs("</code>: check a copy of the log with <code>station audit verify --public-key"
              " KEY</code> against this key obtained separately.</p>\n", f);
    }
    fputs("<h2>Verdicts</h2>\n", f);
    fputs("<table><tr><th></th><th>PASS</th><th>FAIL</th><th>NO VERDICT</th><th>total</th></tr>\n",
          f);
    verdict_row(f, "all", json_object_get(st, "verdicts"));
    fputs("</table>\n", f);
    stations_section(f, st);
    fputs("<h2>Per day</h2>\n", f);
    bucket_table(f, "day", json_object_get(st, "days"));
    fputs("<h2>Per shift</h2>\n", f);
    bucket_table(f, "shift (day it began, start)", json_object_get(st, "shifts"));
    pchart_section(f, json_object_get(st, "pchart"));
    pareto_section(f, json_object_get(st, "pareto"));
    audit_section(f, json_object_get(st, "audit"));
    fprintf(f, "<h2>Rejects</h2>\n<p>%zu shown, newest first, with the overlay evidence "
               "(defects marked).</p>\n",
            nthumbs);
    for (size_t i = 0; i < nthumbs; i++) {
        int rc = thumb_figure(f, &thumbs[i], e);
        if (rc)
            return rc;
    }
    fputs("</body>\n</html>\n", f);
    if (ferror(f))
        return err_set(e, ST_EIO, "report: write failed");
    return ST_OK;
}
