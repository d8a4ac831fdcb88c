#include "recipe_show.h"

#include <math.h>
#include <stdarg.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "core/judge.h"
#include "core/model.h"
#include "core/recipever.h"
#include "trigger.h"

/* Appends one clause to a sentence being built in buf. */
static void clause(char *buf, size_t len, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void clause(char *buf, size_t len, const char *fmt, ...)
{
    size_t n = strlen(buf);
    if (n && n + 2 < len) {
        memcpy(buf + n, "; ", 3);
        n += 2;
    }
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf + n, len - n, fmt, ap);
    va_end(ap);
}

static json_t *limit(double v)
{
    return v < 0 ? json_null() : json_real(v);
}

/* What a tolerance allows, in words ("at most 2 regions, none larger than ..."). */
static json_t *tolerance_json(const struct recipe *r, int c, int z)
{
    const struct recipe_tolerance *t = recipe_tolerance_for(r, c, z);
    char s[600] = "";
    if (t->min_area_mm2 > 0)
        clause(s, sizeof s, "regions under %g mm² are not counted", t->min_area_mm2);
    if (t->max_count >= 0)
        clause(s, sizeof s, "at most %d region%s", t->max_count, t->max_count == 1 ? "" : "s");
    if (t->max_area_mm2 >= 0)
        clause(s, sizeof s, "none larger than %g mm²", t->max_area_mm2);
    if (t->max_total_mm2 >= 0)
        clause(s, sizeof s, "total area at most %g mm²", t->max_total_mm2);
    if (t->max_length_mm >= 0)
        clause(s, sizeof s, "none longer than %g mm", t->max_length_mm);
    if (t->grade_n > 0)
        clause(s, sizeof s,
               "ISO 10110-7 grade %d x %g: none over %g mm (square root of its area), total area "
               "at most %d x %g² = %g mm²",
               t->grade_n, t->grade_a_mm, t->grade_a_mm, t->grade_n, t->grade_a_mm,
               t->grade_n * t->grade_a_mm * t->grade_a_mm);
    if (r->merge_gap_mm[c] > 0)
        clause(s, sizeof s, "pieces less than %g mm apart are one region", r->merge_gap_mm[c]);
    if (!*s)
        clause(s, sizeof s, "no limit: found and shown, never failed");
    char text[800];
    if (z < 0)
        snprintf(text, sizeof text, "%s%s: %s", r->cls[c].name,
                 r->nzones ? " (outside zones with their own tolerance)" : "", s);
    else
        snprintf(text, sizeof text, "%s in %s: %s", r->cls[c].name, r->zones[z].name, s);
    return json_pack("{s:s,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:s}", "class", r->cls[c].name,
                     "zone", z < 0 ? json_null() : json_string(r->zones[z].name),
                     "min_area_mm2", limit(t->min_area_mm2), "max_area_mm2",
                     limit(t->max_area_mm2), "max_total_mm2", limit(t->max_total_mm2),
                     "max_count", t->max_count < 0 ? json_null() : json_integer(t->max_count),
                     "max_length_mm", limit(t->max_length_mm), "grade",
                     t->grade_n > 0 ? json_pack("{s:i,s:f}", "n", t->grade_n, "a_mm",
                                                t->grade_a_mm)
                                    : json_null(),
                     "merge_gap_mm", limit(r->merge_gap_mm[c] > 0 ? r->merge_gap_mm[c] : -1),
                     "own_section", json_boolean(z < 0 || r->ztol_set[z][c]), "text", text);
}

static json_t *zone_json(const struct zone *z)
{
    char s[PATH_MAX + 200];
    json_t *o;
    switch (z->shape) {
    case ZONE_RECT:
        snprintf(s, sizeof s, "rectangle %g x %g mm centred at (%g, %g) mm, turned %g°", z->w,
                 z->h, z->cx, z->cy, z->angle_deg);
        o = json_pack("{s:s,s:f,s:f,s:f,s:f,s:f}", "shape", "rect", "cx_mm", z->cx, "cy_mm", z->cy,
                      "w_mm", z->w, "h_mm", z->h, "angle_deg", z->angle_deg);
        break;
    case ZONE_CIRCLE:
        snprintf(s, sizeof s, "circle of radius %g mm centred at (%g, %g) mm", z->r_out, z->cx,
                 z->cy);
        o = json_pack("{s:s,s:f,s:f,s:f}", "shape", "circle", "cx_mm", z->cx, "cy_mm", z->cy,
                      "r_mm", z->r_out);
        break;
    case ZONE_RING:
        snprintf(s, sizeof s, "ring from radius %g to %g mm around (%g, %g) mm", z->r_in, z->r_out,
                 z->cx, z->cy);
        o = json_pack("{s:s,s:f,s:f,s:f,s:f}", "shape", "ring", "cx_mm", z->cx, "cy_mm", z->cy,
                      "r_in_mm", z->r_in, "r_out_mm", z->r_out);
        break;
    case ZONE_POLYGON: {
        json_t *pts = json_array();
        snprintf(s, sizeof s, "polygon through");
        for (int i = 0; i < z->npoints; i++) {
            size_t n = strlen(s);
            snprintf(s + n, sizeof s - n, " (%g, %g)", z->pts[i][0], z->pts[i][1]);
            json_array_append_new(pts, json_pack("[f,f]", z->pts[i][0], z->pts[i][1]));
        }
        size_t n = strlen(s);
        snprintf(s + n, sizeof s - n, " mm");
        o = json_pack("{s:s,s:o}", "shape", "polygon", "points_mm", pts);
        break;
    }
    default:
        snprintf(s, sizeof s, "mask %s, %g mm per pixel, centred at (%g, %g) mm, turned %g°",
                 z->mask_path, z->mask_mm_per_px, z->cx, z->cy, z->angle_deg);
        o = json_pack("{s:s,s:s,s:f}", "shape", "mask", "file", z->mask_path, "mm_per_px",
                      z->mask_mm_per_px);
    }
    json_object_set_new(o, "name", json_string(z->name));
    json_object_set_new(o, "text", json_string(s));
    return o;
}

static json_t *hashes_json(const struct recipe *r, struct err *e)
{
    char file[SHA256_HEX_LEN];
    struct recipever v;
    if (sha256_hex_file(r->path, file, e) || recipever_read(r->path, &v, e))
        return NULL;
    json_t *o = json_pack("{s:s,s:s}", "file_sha256", file, "content_sha256", v.content_sha256);
    if (v.recorded)
        json_object_update_new(o, json_pack("{s:i,s:s,s:s,s:b}", "saved_version",
                                            v.recorded_version, "saved_content_sha256",
                                            v.recorded_sha256, "saved_utc", v.saved_utc,
                                            "saved_matches",
                                            !strcmp(v.recorded_sha256, v.content_sha256)));
    else
        json_object_set_new(o, "saved_version", json_null());
    return o;
}

static json_t *model_json(const struct recipe *r)
{
    struct model_meta m;
    struct err e, we;
    err_clear(&e);
    err_clear(&we);
    char basis[MODEL_BASIS_MAX], basis_hex[SHA256_HEX_LEN] = "";
    model_basis(r, basis, basis_hex, &we);
    char meta_path[PATH_MAX];
    model_meta_path(r->model_path, meta_path, sizeof meta_path, &e);
    if (access(meta_path, F_OK) != 0)
        return json_pack("{s:s,s:s,s:s}", "path", r->model_path, "recipe_basis_sha256", basis_hex,
                         "check", "not trained yet: station train RECIPE --data DIR");
    int ok = model_check(r, &m, &e) == ST_OK;
    json_t *o = json_pack("{s:s,s:s,s:s}", "path", r->model_path, "recipe_basis_sha256", basis_hex,
                          "check", ok ? "ok" : e.msg);
    struct err le;
    if (!ok && model_meta_load(r->model_path, &m, &le) != ST_OK)
        return o;   /* the metadata is unreadable: the check says why */
    json_t *samples = json_object();
    for (int c = 0; c < m.nclasses; c++)
        json_object_set_new(samples, m.classes[c],
                            json_pack("{s:I,s:i,s:I}", "pixels", (json_int_t)m.samples[c],
                                      "images", m.images[c], "labelled",
                                      (json_int_t)m.labelled[c]));
    json_object_update_new(
        o, json_pack("{s:s,s:o,s:i,s:s,s:i,s:i,s:i,s:f,s:f,s:o,s:{s:f,s:f,s:i}}", "sha256",
                     m.model_sha256, "trained_basis_sha256",
                     m.basis_sha256[0] ? json_string(m.basis_sha256) : json_null(),
                     "trained_for_version", m.recipe_version, "trained_utc", m.trained_utc,
                     "best_round", m.best_round, "rounds", r->train.rounds, "depth", m.depth,
                     "validation_mlogloss", m.val_mlogloss, "holdout_fraction", m.holdout,
                     "training_samples", samples, "references", "sharpness", m.ref_sharpness,
                     "part_area_mm2", m.ref_part_area_mm2, "frames", m.ref_frames));
    return o;
}

static json_t *scale_json(const struct recipe *r)
{
    json_t *o = json_pack("{s:f,s:f}", "mm_per_px_x", r->mm_per_px_x, "mm_per_px_y",
                          r->mm_per_px_y);
    if (!r->has_calibration) {
        json_object_set_new(o, "calibration", json_null());
        json_object_set_new(o, "text", json_string("not calibrated: the recipe's own scale"));
        return o;
    }
    char made[32], s[200];
    calfile_format_time(r->cal.created, made, sizeof made);
    double left = r->cal.valid_days - calfile_age_days(&r->cal, time(NULL));
    snprintf(s, sizeof s, "calibrated %s, valid %d days: %s %.0f days", made, r->cal.valid_days,
             left >= 0 ? "valid" : "EXPIRED", fabs(left));
    json_object_update_new(o, json_pack("{s:s,s:s,s:i,s:f,s:s}", "calibration",
                                        r->calibration_path, "made", made, "valid_days",
                                        r->cal.valid_days, "days_left", left, "text", s));
    return o;
}

static json_t *camera_json(const struct recipe_camera *c)
{
    static const char *pl[] = {"off", "50 Hz", "60 Hz"};
    json_t *o = json_pack("{s:i,s:i,s:f,s:i}", "width", c->width, "height", c->height, "fps",
                          c->fps, "stall_ms", c->stall_ms);
    if (c->set & RCAM_EXPOSURE)
        json_object_set_new(o, "exposure_100us", json_integer(c->exposure));
    if (c->set & RCAM_GAIN)
        json_object_set_new(o, "gain", json_integer(c->gain));
    if (c->set & RCAM_WHITE_BALANCE)
        json_object_set_new(o, "white_balance_k", json_integer(c->white_balance_k));
    if (c->set & RCAM_FOCUS)
        json_object_set_new(o, "focus", json_integer(c->focus));
    if (c->set & RCAM_POWER_LINE)
        json_object_set_new(o, "power_line", json_string(pl[c->power_line % 3]));
    json_object_set_new(o, "required", json_integer(c->required));
    return o;
}

json_t *recipe_show_json(const struct recipe *r, struct err *e)
{
    json_t *hashes = hashes_json(r, e);
    if (!hashes)
        return NULL;
    json_t *classes = json_array(), *tols = json_array(), *zones = json_array();
    for (int c = 0; c < r->nclasses; c++) {
        char col[8];
        snprintf(col, sizeof col, "#%02x%02x%02x", r->cls[c].rgb[0], r->cls[c].rgb[1],
                 r->cls[c].rgb[2]);
        json_array_append_new(classes, json_pack("{s:i,s:s,s:b,s:s}", "index", c, "name",
                                                 r->cls[c].name, "defect", r->cls[c].is_defect,
                                                 "colour", col));
        if (!r->cls[c].is_defect)
            continue;
        json_array_append_new(tols, tolerance_json(r, c, -1));
        for (int z = 0; z < r->nzones; z++)
            if (r->ztol_set[z][c])
                json_array_append_new(tols, tolerance_json(r, c, z));
    }
    for (int z = 0; z < r->nzones; z++)
        json_array_append_new(zones, zone_json(&r->zones[z]));
    json_t *fam = json_array(), *sig = json_array(), *freq = json_array();
    for (int b = 0; recipe_family_name(b); b++)
        if (r->feat.families & (1u << b))
            json_array_append_new(fam, json_string(recipe_family_name(b)));
    for (int i = 0; i < r->feat.nsigmas; i++)
        json_array_append_new(sig, json_real(r->feat.sigmas[i]));
    for (int i = 0; i < r->feat.ngabor_freqs; i++)
        json_array_append_new(freq, json_real(r->feat.gabor_freqs[i]));
    const struct recipe_gates *g = &r->gates;
    const struct recipe_trigger *t = &r->trigger;
    json_t *masters = json_array();
    for (int i = 0; i < r->nmasters; i++)
        json_array_append_new(masters, json_pack("{s:s,s:s,s:s}", "name", r->masters[i].name,
                                                 "image", r->masters[i].image, "expect",
                                                 judge_verdict_name(r->masters[i].expect)));
    static const char *pass_ev[] = {"none", "all", "every"};
    return json_pack(
        "{s:s,s:s,s:s,s:i,s:i,s:o,s:o,s:o,"
        "s:{s:o,s:o,s:i,s:o,s:b,s:i},"
        "s:{s:i,s:i,s:f,s:i,s:i,s:i,s:f,s:b},"
        "s:o,s:{s:s,s:f,s:f,s:i},s:o,s:o,"
        "s:{s:f,s:f,s:f,s:f,s:f,s:f,s:f,s:o,s:f,s:f,s:f,s:o},"
        "s:{s:s,s:i,s:f,s:f,s:f,s:f,s:i,s:i},s:o,"
        "s:{s:o,s:o},s:{s:s,s:i}}",
        "file", r->path, "product", r->product, "description", r->description, "format",
        r->format, "version", r->version, "hashes", hashes, "model", model_json(r), "classes",
        classes, "features", "families", fam, "sigmas", sig, "gabor_orientations",
        r->feat.gabor_orientations, "gabor_frequencies", freq, "normalise", r->feat.normalise,
        "count", feat_count(&r->feat), "classifier", "rounds", r->train.rounds, "depth",
        r->train.depth, "learning_rate", r->train.eta, "seed", r->train.seed, "early_stop",
        r->train.early_stop, "samples_per_class", r->samples_per_class, "validation_fraction",
        r->validation_fraction, "coarse", r->coarse_classify, "scale", scale_json(r), "part",
        "orientation",
        r->part.orient == PART_ORIENT_FIXED ? "fixed" : "moments", "area_mm2", r->part.area_mm2,
        "area_tolerance", r->part.area_tolerance, "border_margin_px", r->part.border_margin_px,
        "zones", zones, "tolerances", tols, "gates", "min_level", g->min_level, "max_level",
        g->max_level, "max_saturated", g->max_saturated, "black_level", g->black_level,
        "max_black", g->max_black, "min_part_fraction", g->min_part_fraction,
        "max_part_fraction", g->max_part_fraction, "sharpness_reference",
        limit(g->sharpness_reference), "min_sharpness_ratio", g->min_sharpness_ratio,
        "low_confidence", g->low_confidence, "max_low_confidence", g->max_low_confidence,
        "min_frame_change", limit(g->min_frame_change), "trigger", "mode",
        trigger_mode_name(t->mode), "still_frames", t->still_frames, "still_level",
        t->still_level, "presence_level", t->presence_level, "enter_share", t->enter_share,
        "leave_share", t->leave_share, "leave_frames", t->leave_frames, "frozen_frames",
        t->frozen_frames, "camera", camera_json(&r->camera), "verification", "interval_hours",
        limit(r->verify_interval_hours), "masters", masters, "evidence", "pass",
        pass_ev[r->evidence_pass % 3], "every", r->evidence_every);
}

static const char *str(const json_t *o, const char *k)
{
    const char *s = json_string_value(json_object_get(o, k));
    return s ? s : "";
}

static double num(const json_t *o, const char *k)
{
    return json_number_value(json_object_get(o, k));
}

/* A JSON array of numbers as "1 2 4". */
static void numbers(const json_t *a, char *buf, size_t len)
{
    size_t i, n = 0;
    json_t *x;
    buf[0] = 0;
    json_array_foreach(a, i, x) n += (size_t)snprintf(buf + n, n < len ? len - n : 0, "%s%g",
                                                      i ? " " : "", json_number_value(x));
}

static void print_model(const json_t *m, FILE *f)
{
    fprintf(f, "Model %s\n", str(m, "path"));
    if (json_object_get(m, "sha256")) {
        fprintf(f, "  SHA-256 %s, trained %s for recipe version %d\n", str(m, "sha256"),
                str(m, "trained_utc"), (int)num(m, "trained_for_version"));
        fprintf(f, "  best round %d of %d, depth %d, validation mlogloss %.4f; %s\n",
                (int)num(m, "best_round"), (int)num(m, "rounds"), (int)num(m, "depth"),
                num(m, "validation_mlogloss"),
                num(m, "holdout_fraction") > 0 ? "" : "no images held out of training");
        if (num(m, "holdout_fraction") > 0)
            fprintf(f, "  %.0f%% of the images held out of training (evaluate --split %g)\n",
                    100 * num(m, "holdout_fraction"), num(m, "holdout_fraction"));
        fprintf(f, "  training data (labelled pixels, pixels sampled, images with the class):\n");
        const char *k;
        json_t *v;
        json_object_foreach(json_object_get(m, "training_samples"), k, v)
            fprintf(f, "    %-12s %9.0f labelled %8.0f sampled from %3.0f images\n", k,
                    num(v, "labelled"), num(v, "pixels"), num(v, "images"));
        json_t *ref = json_object_get(m, "references");
        fprintf(f, "  image references over %d training frames: sharpness %.1f, part area %.1f mm²\n",
                (int)num(ref, "frames"), num(ref, "sharpness"), num(ref, "part_area_mm2"));
    } else {
        fprintf(f, "  no training data on record\n");
    }
    fprintf(f, "  training basis SHA-256 %s (what the model depends on)\n",
            str(m, "recipe_basis_sha256"));
    fprintf(f, "  check against this recipe: %s\n", str(m, "check"));
}

void recipe_show_print(const json_t *o, FILE *f)
{
    const json_t *h = json_object_get(o, "hashes");
    char buf[400];
    size_t i;
    json_t *x;
    fprintf(f, "Recipe %s: product %s, version %d (format %d)\n  %s\n", str(o, "file"),
            str(o, "product"), (int)num(o, "version"), (int)num(o, "format"),
            str(o, "description"));
    fprintf(f, "  file SHA-256 %s (stored with every log record)\n  content SHA-256 %s: ",
            str(h, "file_sha256"), str(h, "content_sha256"));
    if (json_is_null(json_object_get(h, "saved_version")))
        fprintf(f, "never saved (station recipe save FILE records it)\n");
    else if (json_is_true(json_object_get(h, "saved_matches")))
        fprintf(f, "as saved for version %d on %s\n", (int)num(h, "saved_version"),
                str(h, "saved_utc"));
    else
        fprintf(f, "CHANGED since version %d was saved on %s: run station recipe save\n",
                (int)num(h, "saved_version"), str(h, "saved_utc"));
    print_model(json_object_get(o, "model"), f);
    fprintf(f, "Classes (label value, name, colour):\n");
    json_array_foreach(json_object_get(o, "classes"), i, x)
        fprintf(f, "  %d %-12s %s%s\n", (int)num(x, "index"), str(x, "name"), str(x, "colour"),
                json_is_true(json_object_get(x, "defect")) ? "  defect" : "");
    const json_t *ft = json_object_get(o, "features");
    char fam[200] = "";
    json_array_foreach(json_object_get(ft, "families"), i, x)
        snprintf(fam + strlen(fam), sizeof fam - strlen(fam), "%s%s", i ? " " : "",
                 json_string_value(x));
    numbers(json_object_get(ft, "sigmas"), buf, sizeof buf);
    char fr[100];
    numbers(json_object_get(ft, "gabor_frequencies"), fr, sizeof fr);
    fprintf(f, "Features: %d per pixel: %s; sigmas %s px; Gabor %d orientations at %s cycles/px; "
               "brightness normalised: %s\n",
            (int)num(ft, "count"), fam, buf, (int)num(ft, "gabor_orientations"), fr,
            json_is_true(json_object_get(ft, "normalise")) ? "yes" : "no");
    const json_t *c = json_object_get(o, "classifier");
    fprintf(f, "Classifier: up to %d rounds of depth %d, learning rate %g, seed %d, early stop "
               "after %d; at most %d pixels per class per image, %g held out for early stopping\n",
            (int)num(c, "rounds"), (int)num(c, "depth"), num(c, "learning_rate"),
            (int)num(c, "seed"), (int)num(c, "early_stop"), (int)num(c, "samples_per_class"),
            num(c, "validation_fraction"));
    if (json_is_true(json_object_get(c, "coarse")))
        fprintf(f, "  coarse classification (approximate): every other pixel of the part "
                   "classified, the rest copied where its classified neighbours agree\n");
    const json_t *sc = json_object_get(o, "scale");
    fprintf(f, "Scale: %g x %g mm per pixel; %s\n", num(sc, "mm_per_px_x"), num(sc, "mm_per_px_y"),
            str(sc, "text"));
    const json_t *p = json_object_get(o, "part");
    if (num(p, "area_mm2") < 0)
        snprintf(buf, sizeof buf, "the model's reference");
    else
        snprintf(buf, sizeof buf, "%g mm²", num(p, "area_mm2"));
    fprintf(f, "Part: orientation %s; area %s, within %.0f%%; at least %d px from the frame's "
               "edge\n",
            str(p, "orientation"), buf, 100 * num(p, "area_tolerance"),
            (int)num(p, "border_margin_px"));
    fprintf(f, "Zones (in mm from the part's centre; earlier zones own overlaps):\n");
    json_array_foreach(json_object_get(o, "zones"), i, x)
        fprintf(f, "  %s: %s\n", str(x, "name"), str(x, "text"));
    if (!json_array_size(json_object_get(o, "zones")))
        fprintf(f, "  none: the whole part is judged as one\n");
    fprintf(f, "Tolerances (a zone's own restates what differs, the rest is the class's):\n");
    json_array_foreach(json_object_get(o, "tolerances"), i, x)
        fprintf(f, "  %s\n", str(x, "text"));
    const json_t *g = json_object_get(o, "gates");
    fprintf(f, "Gates (NO VERDICT when the picture cannot be trusted): part grey %g..%g, at most "
               "%g saturated, at most %g black (grey <= %g), part %g..%g of the frame, sharpness "
               "at least %g of the reference, at most %g of part pixels with confidence under "
               "%g\n",
            num(g, "min_level"), num(g, "max_level"), num(g, "max_saturated"), num(g, "max_black"),
            num(g, "black_level"), num(g, "min_part_fraction"), num(g, "max_part_fraction"),
            num(g, "min_sharpness_ratio"), num(g, "max_low_confidence"), num(g, "low_confidence"));
    const json_t *t = json_object_get(o, "trigger");
    fprintf(f, "Trigger: %s; still after %d frames changing at most %g grey levels; a part is "
               "present over %g of blocks %g levels off the empty bench, gone under %g for %d "
               "frames; frozen after %d identical frames\n",
            str(t, "mode"), (int)num(t, "still_frames"), num(t, "still_level"),
            num(t, "enter_share"), num(t, "presence_level"), num(t, "leave_share"),
            (int)num(t, "leave_frames"), (int)num(t, "frozen_frames"));
    const json_t *cam = json_object_get(o, "camera");
    fprintf(f, "Camera: ");
    if (num(cam, "width") > 0)
        fprintf(f, "%dx%d, ", (int)num(cam, "width"), (int)num(cam, "height"));
    if (num(cam, "fps") > 0)
        fprintf(f, "%g fps, ", num(cam, "fps"));
    const char *k;
    json_object_foreach((json_t *)cam, k, x) if (strcmp(k, "width") && strcmp(k, "height") &&
                                                 strcmp(k, "fps") && strcmp(k, "required")) {
        if (json_is_string(x))
            fprintf(f, "%s %s, ", k, json_string_value(x));
        else
            fprintf(f, "%s %g, ", k, json_number_value(x));
    }
    fprintf(f, "the rest as the camera has it\n");
    const json_t *v = json_object_get(o, "verification");
    if (json_is_null(json_object_get(v, "interval_hours")))
        fprintf(f, "Verification: no master parts\n");
    else
        fprintf(f, "Verification: master parts at least every %g hours:\n",
                num(v, "interval_hours"));
    json_array_foreach(json_object_get(v, "masters"), i, x)
        fprintf(f, "  %s must be %s: %s\n", str(x, "name"), str(x, "expect"), str(x, "image"));
    const json_t *ev = json_object_get(o, "evidence");
    if (!strcmp(str(ev, "pass"), "every"))
        fprintf(f, "Evidence: every FAIL and NO VERDICT, and every %d. PASS\n",
                (int)num(ev, "every"));
    else
        fprintf(f, "Evidence: every FAIL and NO VERDICT, and %s PASS\n",
                !strcmp(str(ev, "pass"), "all") ? "every" : "no");
}
