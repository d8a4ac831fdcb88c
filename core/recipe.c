/* realpath(3) is XSI, beyond the POSIX base the Makefile selects. */
#define _XOPEN_SOURCE 700

#include "recipe.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <ini.h>

enum sec_kind { SEC_PRODUCT, SEC_CLASS, SEC_FEATURES, SEC_CLASSIFIER, SEC_SCALE, SEC_TOLERANCE,
                SEC_GATES, SEC_PART, SEC_ZONE, SEC_EVIDENCE,
                SEC_LIGHTING, SEC_VERIFICATION, SEC_MASTER, SEC_CAMERA,
                SEC_TRIGGER,
                SEC_KINDS };

enum val_type {
    V_FORMAT,   /* int >= 1, refused when newer than RECIPE_FORMAT */
    V_INT,      /* int in [lo, hi] */
    V_REAL,     /* double in [lo, hi] or (lo, hi] */
    V_YESNO,    /* int 0/1 */
    V_ID,       /* char[maxn] of [a-z0-9._-] */
    V_TEXT,     /* char[maxn], free text */
    V_COLOUR,   /* uint8_t[3] from #rrggbb */
    V_REALS,    /* double[maxn] increasing, count at count_off */
    V_FAMILIES, /* unsigned OR of enum feat_family */
    V_MODEL,    /* char[PATH_MAX] ending in .json or .ubj, resolved against the recipe's folder */
    V_MASK,     /* char[PATH_MAX] ending in .png, resolved likewise */
    V_CALIB,    /* char[PATH_MAX] ending in .json (a calibration file), resolved likewise */
    V_FILE,     /* char[PATH_MAX], any file name, resolved likewise */
    V_PAIR,     /* double[2], each in [lo, hi] (or (lo, hi]) */
    V_POINTS,   /* double[maxn][2] polygon vertices, count at count_off */
    V_GRADE,    /* "N x A": int N >= 1 at off, double A > 0 at count_off */
    V_FIELD,    /* int[4] x0 y0 x1 y1, x0 < x1, y0 < y1 */
    V_WORD,     /* int index into the section's word list (see word_lists) */
    V_PASS,     /* enum recipe_pass_evidence at off, N of "every N" at count_off */
    V_SETTINGS  /* unsigned OR of enum recipe_cam_setting from setting key names */
};

enum {
    K_OPTIONAL = 1u << 0, /* has a default set before parsing */
    K_LO_OPEN = 1u << 1,  /* lower bound excluded */
    K_NONE = 1u << 2      /* accepts "none", stored as -1 */
};

#define MAX_KEYS 16
/* each single section once, the classes, their tolerances (also per zone),
 * the zones and the master parts */
#define MAX_SECTIONS                                                                               \
    (SEC_KINDS + (2 + ZONE_MAX) * RECIPE_MAX_CLASSES + ZONE_MAX + RECIPE_MAX_MASTERS)
#define NAME_MAX_LEN ((int)sizeof(((struct recipe_class *)0)->name) - 1)

struct key_def {
    const char *name;
    enum val_type type;
    size_t off;       /* into the section's target (see section_base) */
    size_t count_off; /* V_REALS: the int that receives the count */
    double lo, hi;
    int maxn;         /* V_REALS: most values; V_ID, V_TEXT: buffer size */
    unsigned flags;
    const char *const *words; /* V_WORD: the accepted words, NULL-terminated */
};

static const char *const orient_words[] = {"fixed", "moments", NULL};
static const char *const shape_words[] = {"rect", "circle", "ring", "polygon", "mask", NULL};
/* enum verdict order */
static const char *const expect_words[] = {"pass", "fail", NULL};
/* cnn_input: channel order the network was trained on */
static const char *const cnn_input_words[] = {"rgb", "bgr", NULL};
static const char *const cnn_precision_words[] = {"fp32", "bf16", NULL};

#define R(f) offsetof(struct recipe, f)
#define CLS(f) offsetof(struct recipe_class, f)
#define FEAT(f) offsetof(struct feat_spec, f)
#define TOL(f) offsetof(struct recipe_tolerance, f)
#define GATE(f) offsetof(struct recipe_gates, f)
#define PART(f) offsetof(struct recipe_part, f)
#define ZONE(f) offsetof(struct zone, f)

static const struct key_def product_keys[] = {
    {"format", V_FORMAT, R(format), 0, 1, INT_MAX, 0, 0, NULL},
    {"id", V_ID, R(product), 0, 0, 0, sizeof(((struct recipe *)0)->product), 0, NULL},
    {"version", V_INT, R(version), 0, 1, INT_MAX, 0, 0, NULL},
    {"description", V_TEXT, R(description), 0, 0, 0, sizeof(((struct recipe *)0)->description),
     K_OPTIONAL, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

static const struct key_def class_keys[] = {
    {"defect", V_YESNO, CLS(is_defect), 0, 0, 0, 0, 0, NULL},
    {"colour", V_COLOUR, CLS(rgb), 0, 0, 0, 0, 0, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

static const struct key_def features_keys[] = {
    {"families", V_FAMILIES, FEAT(families), 0, 0, 0, 0, 0, NULL},
    /* required only with a per-sigma family: checked after parsing */
    {"sigmas", V_REALS, FEAT(sigmas), FEAT(nsigmas), 0.5, 16, FEAT_MAX_SIGMAS, K_OPTIONAL, NULL},
    {"gabor_orientations", V_INT, FEAT(gabor_orientations), 0, 1, FEAT_MAX_ORIENT, 0,
     K_OPTIONAL, NULL},
    /* required only with family gabor: checked after parsing */
    {"gabor_frequencies", V_REALS, FEAT(gabor_freqs), FEAT(ngabor_freqs), 0, 0.5,
     FEAT_MAX_GABOR_FREQS, K_OPTIONAL | K_LO_OPEN, NULL},
    {"normalise", V_YESNO, FEAT(normalise), 0, 0, 0, 0, K_OPTIONAL, NULL},
    {"threads", V_INT, FEAT(threads), 0, 1, 64, 0, K_OPTIONAL, NULL},
    /* a cut pretrained network (core/cnnfeat.h); read by check_cnn */
    {"cnn_model", V_FILE, FEAT(cnn.model), 0, 0, 0, 0, K_OPTIONAL, NULL},
    {"cnn_output", V_TEXT, FEAT(cnn.output), 0, 0, 0, sizeof(((struct cnnfeat_spec *)0)->output), K_OPTIONAL, NULL},
    {"cnn_channels", V_TEXT, FEAT(cnn.channels), 0, 0, 0, sizeof(((struct cnnfeat_spec *)0)->channels),
     K_OPTIONAL, NULL},
    {"cnn_input", V_WORD, FEAT(cnn.bgr), 0, 0, 0, 0, K_OPTIONAL, cnn_input_words},
    {"cnn_precision", V_WORD, FEAT(cnn.bf16), 0, 0, 0, 0, K_OPTIONAL, cnn_precision_words},
    {"cnn_scale", V_REAL, FEAT(cnn.scale), 0, 0, 1e6, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {"cnn_mean", V_TEXT, FEAT(cnn.mean_text), 0, 0, 0, sizeof(((struct cnnfeat_spec *)0)->mean_text), K_OPTIONAL,
     NULL},
    {"cnn_std", V_TEXT, FEAT(cnn.std_text), 0, 0, 0, sizeof(((struct cnnfeat_spec *)0)->std_text), K_OPTIONAL,
     NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

static const struct key_def classifier_keys[] = {
    {"model", V_MODEL, R(model_path), 0, 0, 0, 0, 0, NULL},
    {"rounds", V_INT, R(train.rounds), 0, 1, 5000, 0, 0, NULL},
    {"depth", V_INT, R(train.depth), 0, 1, 16, 0, 0, NULL},
    {"learning_rate", V_REAL, R(train.eta), 0, 0, 1, 0, K_LO_OPEN, NULL},
    {"seed", V_INT, R(train.seed), 0, 0, INT_MAX, 0, 0, NULL},
    {"threads", V_INT, R(train.threads), 0, 1, 64, 0, 0, NULL},
    {"early_stop", V_INT, R(train.early_stop), 0, 0, 1000, 0, 0, NULL},
    {"samples_per_class", V_INT, R(samples_per_class), 0, 1, 1000000, 0, 0, NULL},
    {"validation_fraction", V_REAL, R(validation_fraction), 0, 0, 0.5, 0, K_LO_OPEN, NULL},
    {"coarse", V_YESNO, R(coarse_classify), 0, 0, 0, 0, K_OPTIONAL, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

static const struct key_def scale_keys[] = {
    /* either both mm_per_px keys or calibration: checked after parsing */
    {"mm_per_px_x", V_REAL, R(mm_per_px_x), 0, 0, 100, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {"mm_per_px_y", V_REAL, R(mm_per_px_y), 0, 0, 100, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {"calibration", V_CALIB, R(calibration_path), 0, 0, 0, 0, K_OPTIONAL, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

/* A tolerance section parses into a struct tol_slot: the limits, and the
 * class-level merge gap (refused in a zone's section). */
struct tol_slot {
    struct recipe_tolerance t;
    double merge_gap_mm;
};
#define SLOT(f) offsetof(struct tol_slot, f)

static const struct key_def tolerance_keys[] = {
    {"min_area_mm2", V_REAL, TOL(min_area_mm2), 0, 0, INFINITY, 0, K_NONE, NULL},
    {"max_area_mm2", V_REAL, TOL(max_area_mm2), 0, 0, INFINITY, 0, K_NONE | K_LO_OPEN, NULL},
    {"max_total_mm2", V_REAL, TOL(max_total_mm2), 0, 0, INFINITY, 0, K_NONE | K_LO_OPEN, NULL},
    {"max_count", V_INT, TOL(max_count), 0, 0, INT_MAX, 0, K_NONE, NULL},
    {"max_length_mm", V_REAL, TOL(max_length_mm), 0, 0, INFINITY, 0,
     K_OPTIONAL | K_NONE | K_LO_OPEN, NULL},
    {"grade", V_GRADE, TOL(grade_n), TOL(grade_a_mm), 0, 0, 0, K_OPTIONAL | K_NONE, NULL},
    {"merge_gap_mm", V_REAL, SLOT(merge_gap_mm), 0, 0, 100, 0, K_OPTIONAL, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};
#define TOL_MERGE_KEY 6

static const struct key_def gates_keys[] = {
    {"min_level", V_REAL, GATE(min_level), 0, 0, 255, 0, K_OPTIONAL, NULL},
    {"max_level", V_REAL, GATE(max_level), 0, 0, 255, 0, K_OPTIONAL, NULL},
    {"max_saturated", V_REAL, GATE(max_saturated), 0, 0, 1, 0, K_OPTIONAL, NULL},
    {"black_level", V_REAL, GATE(black_level), 0, 0, 255, 0, K_OPTIONAL, NULL},
    {"max_black", V_REAL, GATE(max_black), 0, 0, 1, 0, K_OPTIONAL, NULL},
    {"min_part_fraction", V_REAL, GATE(min_part_fraction), 0, 0, 1, 0, K_OPTIONAL, NULL},
    {"max_part_fraction", V_REAL, GATE(max_part_fraction), 0, 0, 1, 0, K_OPTIONAL, NULL},
    {"sharpness_reference", V_REAL, GATE(sharpness_reference), 0, 0, INFINITY, 0,
     K_OPTIONAL | K_LO_OPEN, NULL},
    {"min_sharpness_ratio", V_REAL, GATE(min_sharpness_ratio), 0, 0, 1, 0, K_OPTIONAL, NULL},
    {"low_confidence", V_REAL, GATE(low_confidence), 0, 0, 1, 0, K_OPTIONAL, NULL},
    {"max_low_confidence", V_REAL, GATE(max_low_confidence), 0, 0, 1, 0, K_OPTIONAL, NULL},
    {"min_frame_change", V_REAL, GATE(min_frame_change), 0, 0, 255, 0, K_OPTIONAL | K_NONE, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

static const struct key_def part_keys[] = {
    {"orientation", V_WORD, PART(orient), 0, 0, 0, 0, K_OPTIONAL, orient_words},
    {"area_mm2", V_REAL, PART(area_mm2), 0, 0, INFINITY, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {"area_tolerance", V_REAL, PART(area_tolerance), 0, 0, 1, 0, K_OPTIONAL | K_NONE | K_LO_OPEN, NULL},
    {"border_margin_px", V_INT, PART(border_margin_px), 0, 0, 1000, 0, K_OPTIONAL, NULL},
    {"field", V_FIELD, PART(field), 0, 0, 100000, 0, K_OPTIONAL, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

/* Keys of [zone NAME]; which apply depends on the shape (zone_shape_keys). */
static const struct key_def zone_keys[] = {
    {"shape", V_WORD, ZONE(shape), 0, 0, 0, 0, 0, shape_words},
    {"centre", V_PAIR, ZONE(cx), 0, -10000, 10000, 0, K_OPTIONAL, NULL},
    {"size", V_PAIR, ZONE(w), 0, 0, 10000, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {"angle", V_REAL, ZONE(angle_deg), 0, -360, 360, 0, K_OPTIONAL, NULL},
    {"radius", V_REAL, ZONE(r_out), 0, 0, 10000, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {"radii", V_PAIR, ZONE(r_in), 0, 0, 10000, 0, K_OPTIONAL, NULL},
    {"points", V_POINTS, ZONE(pts), ZONE(npoints), -10000, 10000, ZONE_MAX_POINTS, K_OPTIONAL, NULL},
    {"mask", V_MASK, ZONE(mask_path), 0, 0, 0, 0, K_OPTIONAL, NULL},
    {"mask_mm_per_px", V_REAL, ZONE(mask_mm_per_px), 0, 0, 100, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

static const struct key_def lighting_keys[] = {
    {"flat_field", V_FILE, R(flat_field), 0, 0, 0, 0, 0, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

static const struct key_def verification_keys[] = {
    {"interval_hours", V_REAL, R(verify_interval_hours), 0, 0, 8784, 0, K_LO_OPEN, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

#define MASTER(f) offsetof(struct recipe_master, f)
static const struct key_def master_keys[] = {
    {"image", V_MASK, MASTER(image), 0, 0, 0, 0, 0, NULL},
    {"expect", V_WORD, MASTER(expect), 0, 0, 0, 0, 0, expect_words},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

/* Per shape (enum zone_shape order), the zone keys it needs besides shape
 * (and may take: centre always, angle for rect and mask). */
static const struct {
    const char *word;
    const char *needs[3];
    int angled;
} zone_shape_keys[] = {
    {"rect", {"size"}, 1},          {"circle", {"radius"}, 0},
    {"ring", {"radii"}, 0},         {"polygon", {"points"}, 0},
    {"mask", {"mask", "mask_mm_per_px"}, 1},
};
#define NSHAPES ((int)(sizeof zone_shape_keys / sizeof zone_shape_keys[0]))

static const struct key_def evidence_keys[] = {
    {"pass", V_PASS, R(evidence_pass), R(evidence_every), 1, INT_MAX, 0, K_OPTIONAL, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

/* [camera]: the settings keys come first, in enum recipe_cam_setting bit
 * order, so key k's bit is 1 << k. */
#define CAM(f) R(camera.f)
static const char *const power_line_words[] = {"off", "50", "60", NULL};
static const struct key_def camera_keys[] = {
    {"exposure", V_INT, CAM(exposure), 0, 1, 10000000, 0, K_OPTIONAL, NULL},
    {"gain", V_INT, CAM(gain), 0, 0, 1000000, 0, K_OPTIONAL, NULL},
    {"white_balance_k", V_INT, CAM(white_balance_k), 0, 1000, 20000, 0, K_OPTIONAL, NULL},
    {"focus", V_INT, CAM(focus), 0, 0, 1000000, 0, K_OPTIONAL, NULL},
    {"power_line", V_WORD, CAM(power_line), 0, 0, 0, 0, K_OPTIONAL, power_line_words},
    {"width", V_INT, CAM(width), 0, 16, 16384, 0, K_OPTIONAL, NULL},
    {"height", V_INT, CAM(height), 0, 16, 16384, 0, K_OPTIONAL, NULL},
    {"fps", V_REAL, CAM(fps), 0, 0, 1000, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {"stall_ms", V_INT, CAM(stall_ms), 0, 100, 600000, 0, K_OPTIONAL, NULL},
    {"required", V_SETTINGS, CAM(required), 0, 0, 0, 0, K_OPTIONAL, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};
#define CAM_NSETTINGS 5
/* [trigger]: the live station's trigger (enum recipe_trigger_mode order) */
static const char *const trigger_words[] = {"key", "auto", "continuous", NULL};
#define TRIG(f) offsetof(struct recipe_trigger, f)
static const struct key_def trigger_keys[] = {
    {"mode", V_WORD, TRIG(mode), 0, 0, 0, 0, K_OPTIONAL, trigger_words},
    {"still_frames", V_INT, TRIG(still_frames), 0, 1, 1000, 0, K_OPTIONAL, NULL},
    {"still_level", V_REAL, TRIG(still_level), 0, 0, 255, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {"presence_level", V_REAL, TRIG(presence_level), 0, 0, 255, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {"enter_share", V_REAL, TRIG(enter_share), 0, 0, 1, 0, K_OPTIONAL | K_LO_OPEN, NULL},
    {"leave_share", V_REAL, TRIG(leave_share), 0, 0, 1, 0, K_OPTIONAL, NULL},
    {"leave_frames", V_INT, TRIG(leave_frames), 0, 1, 1000, 0, K_OPTIONAL, NULL},
    {"frozen_frames", V_INT, TRIG(frozen_frames), 0, 2, 10000, 0, K_OPTIONAL, NULL},
    {NULL, 0, 0, 0, 0, 0, 0, 0, NULL}};

static void set_trigger_defaults(struct recipe_trigger *t)
{
    /* common practice for a noisy 8-bit camera, no source: block means of
     * 64 pixels cut the noise eightfold, so 1.5 levels of mean change is
     * motion, 24 levels a part against the mat; 5 frames is 1/6 s at 30 fps */
    t->mode = RECIPE_TRIGGER_KEY;
    t->still_frames = 5;
    t->still_level = 1.5;
    t->presence_level = 24;
    t->enter_share = 0.05;
    t->leave_share = 0.02;
    t->leave_frames = 3;
    t->frozen_frames = 10;
}

static const struct sec_def {
    const char *word;
    int named;       /* [class NAME], [tolerance NAME] */
    int required;
    const struct key_def *keys;
} sections[SEC_KINDS] = {
    [SEC_PRODUCT] = {"product", 0, 1, product_keys},
    [SEC_CLASS] = {"class", 1, 1, class_keys},
    [SEC_FEATURES] = {"features", 0, 1, features_keys},
    [SEC_CLASSIFIER] = {"classifier", 0, 1, classifier_keys},
    [SEC_SCALE] = {"scale", 0, 1, scale_keys},
    [SEC_TOLERANCE] = {"tolerance", 1, 0, tolerance_keys},
    [SEC_GATES] = {"gates", 0, 0, gates_keys},
    [SEC_PART] = {"part", 0, 0, part_keys},
    [SEC_ZONE] = {"zone", 1, 0, zone_keys},
    [SEC_LIGHTING] = {"lighting", 0, 0, lighting_keys},
    [SEC_VERIFICATION] = {"verification", 0, 0, verification_keys},
    [SEC_MASTER] = {"master", 1, 0, master_keys},
    [SEC_EVIDENCE] = {"evidence", 0, 0, evidence_keys},
    [SEC_CAMERA] = {"camera", 0, 0, camera_keys},
    [SEC_TRIGGER] = {"trigger", 0, 0, trigger_keys},
};

/* Same order as the bits of enum feat_family. */
static const char *const family_names[] = {"colour",    "gauss",    "gradient", "laplace",
                                           "hessian",   "structure", "localstd", "gabor"};
#define NFAMILIES ((int)(sizeof family_names / sizeof family_names[0]))

const char *recipe_family_name(int bit)
{
    return bit >= 0 && bit < NFAMILIES ? family_names[bit] : NULL;
}

struct section {
    enum sec_kind kind;
    char name[32];
    char zone[32];          /* [tolerance CLASS in ZONE]: ZONE, else empty */
    char title[96];         /* "class scratch", for messages */
    int line;               /* of the header */
    int key_line[MAX_KEYS]; /* where each key was set, 0 = not set */
    int index;              /* class index, or slot in tolv */
    void *base;
};

struct parse {
    const char *path;
    FILE *f;
    int line;
    int failed;
    int fail_line;
    int fail_code;
    struct err *e;
    struct recipe r;
    struct tol_slot tolv[(1 + ZONE_MAX) * RECIPE_MAX_CLASSES];
    int ntol;
    struct section sec[MAX_SECTIONS];
    int nsec;
    struct section *cur;
};

/* Line 0 means the complaint concerns the whole file. */
__attribute__((format(printf, 4, 5))) static int fail_at(struct parse *p, int line, int code,
                                                         const char *fmt, ...)
{
    char what[400];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(what, sizeof what, fmt, ap);
    va_end(ap);
    p->failed = 1;
    p->fail_line = line;
    p->fail_code = code;
    if (line > 0)
        return err_set(p->e, code, "%s:%d: %s", p->path, line, what);
    return err_set(p->e, code, "%s: %s", p->path, what);
}

static int is_name_char(int c, int dot_ok)
{
    return (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' || c == '-' ||
           (dot_ok && c == '.');
}

static int valid_name(const char *s, size_t maxlen, int dot_ok)
{
    size_t n = strlen(s);
    if (n == 0 || n > maxlen)
        return 0;
    for (size_t i = 0; i < n; i++)
        if (!is_name_char((unsigned char)s[i], dot_ok))
            return 0;
    return 1;
}

static int is_blank(int c)
{
    return c == ' ' || c == '\t' || c == '\r' || c == '\f' || c == '\v';
}

/* Copies the next blank-separated word of *s into buf and advances *s.
 * Returns 0 at the end, -1 when the word does not fit, else 1. */
static int next_word(const char **s, char *buf, size_t len)
{
    const char *a = *s;
    while (is_blank((unsigned char)*a))
        a++;
    const char *b = a;
    while (*b && !is_blank((unsigned char)*b))
        b++;
    *s = b;
    if (a == b)
        return 0;
    if ((size_t)(b - a) >= len)
        return -1;
    memcpy(buf, a, (size_t)(b - a));
    buf[b - a] = '\0';
    return 1;
}

static int parse_long(const char *s, long *out)
{
    char *end;
    errno = 0;
    long v = strtol(s, &end, 10);
    if (end == s || *end)
        return -1;
    /* strtol saturates on overflow, which the range check then refuses. */
    *out = v;
    return 0;
}

/* Only plain decimal notation: this keeps out nan, inf and hex floats. */
static int parse_double(const char *s, double *out)
{
    if (!*s || s[strspn(s, "0123456789+-.eE")])
        return -1;
    char *end;
    double v = strtod(s, &end);
    if (end == s || *end || !isfinite(v))
        return -1;
    *out = v;
    return 0;
}

static void range_text(const struct key_def *k, char *buf, size_t len)
{
    int integer = k->type == V_INT || k->type == V_FORMAT;
    if (integer && k->hi >= INT_MAX)
        snprintf(buf, len, ">= %.0f", k->lo);
    else if (integer)
        snprintf(buf, len, "%.0f..%.0f", k->lo, k->hi);
    else if (isinf(k->hi))
        snprintf(buf, len, "%s %g", (k->flags & K_LO_OPEN) ? ">" : ">=", k->lo);
    else
        snprintf(buf, len, "%c%g, %g]", (k->flags & K_LO_OPEN) ? '(' : '[', k->lo, k->hi);
}

static int in_range(const struct key_def *k, double v)
{
    int lo_ok = (k->flags & K_LO_OPEN) ? v > k->lo : v >= k->lo;
    return lo_ok && v <= k->hi;
}

static int out_of_range(struct parse *p, const struct key_def *k, const char *value)
{
    char range[48];
    range_text(k, range, sizeof range);
    return fail_at(p, p->line, ST_ERANGE, "%s = %s is out of range; allowed: %s%s", k->name, value,
                   range, (k->flags & K_NONE) ? " or none" : "");
}

/* A list of distinct words from a fixed set of n, name(i) the i-th, as a
 * bit mask at k->off; an empty list only when allow_empty. */
static int store_word_set(struct parse *p, const struct key_def *k, char *base, const char *value,
                          const char *(*name)(int), int n, int allow_empty)
{
    unsigned mask = 0;
    char word[32];
    int got;
    while ((got = next_word(&value, word, sizeof word)) != 0) {
        int f = 0;
        while (got > 0 && f < n && strcmp(word, name(f)))
            f++;
        if (got < 0 || f == n) {
            char known[160] = "";
            for (int m = 0; m < n; m++)
                snprintf(known + strlen(known), sizeof known - strlen(known), "%s%s",
                         m ? " " : "", name(m));
            return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' is not one of: %s", k->name,
                           got < 0 ? "(overlong word)" : word, known);
        }
        if (mask & (1u << f))
            return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' listed twice", k->name, word);
        mask |= 1u << f;
    }
    if (!mask && !allow_empty)
        return fail_at(p, p->line, ST_EFORMAT, "%s: needs at least one of them", k->name);
    *(unsigned *)(base + k->off) = mask;
    return ST_OK;
}

static const char *family_name(int i)
{
    return family_names[i];
}

static int hex_digit(int c)
{
    if (c >= '0' && c <= '9')
        return c - '0';
    if (c >= 'a' && c <= 'f')
        return c - 'a' + 10;
    if (c >= 'A' && c <= 'F')
        return c - 'A' + 10;
    return -1;
}

static int store_colour(struct parse *p, const struct key_def *k, char *base, const char *value)
{
    uint8_t *rgb = (uint8_t *)(base + k->off);
    int ok = strlen(value) == 7 && value[0] == '#';
    for (int i = 0; ok && i < 3; i++) {
        int hi = hex_digit((unsigned char)value[1 + 2 * i]);
        int lo = hex_digit((unsigned char)value[2 + 2 * i]);
        ok = hi >= 0 && lo >= 0;
        if (ok)
            rgb[i] = (uint8_t)(hi * 16 + lo);
    }
    if (!ok)
        return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' is not #rrggbb", k->name, value);
    return ST_OK;
}

static int ends_with(const char *s, const char *suffix)
{
    size_t n = strlen(s), m = strlen(suffix);
    return n > m && !strcmp(s + n - m, suffix);
}

static int has_dotdot(const char *s)
{
    for (const char *c = s; (c = strstr(c, "..")) != NULL; c += 2)
        if ((c == s || c[-1] == '/') && (c[2] == '\0' || c[2] == '/'))
            return 1;
    return 0;
}

/* A symbolic link may still lead out of the folder: path's real location
 * (or, for a file not made yet, that of its nearest existing folder) must
 * lie inside the folder's.  A link whose target is missing is refused, since
 * writing through it (training a model) would create the target. */
static int check_inside(struct parse *p, const struct key_def *k, const char *path)
{
    char root[PATH_MAX], probe[PATH_MAX], real[PATH_MAX];
    if (!realpath(p->r.dir, root))
        return fail_at(p, p->line, ST_EIO, "%s: cannot resolve the recipe's folder %s: %s",
                       k->name, p->r.dir, strerror(errno));
    snprintf(probe, sizeof probe, "%s", path);
    while (!realpath(probe, real)) {
        int why = errno;
        struct stat st;
        char *slash = strrchr(probe, '/');
        int dangling = (why == ENOENT || why == ENOTDIR) && lstat(probe, &st) == 0;
        if ((why != ENOENT && why != ENOTDIR) || dangling || !slash || slash == probe)
            return fail_at(p, p->line, ST_EFORMAT, "%s: cannot resolve %s: %s", k->name, probe,
                           dangling ? "a link to nothing" : strerror(why));
        *slash = '\0';
    }
    size_t n = strlen(root);
    if (strcmp(root, "/") != 0 && (strncmp(real, root, n) != 0 || (real[n] && real[n] != '/')))
        return fail_at(p, p->line, ST_EFORMAT,
                       "%s: %s leads to %s%s, outside the recipe's folder %s", k->name, path, real,
                       path + strlen(probe), root);
    return ST_OK;
}

static int store_path(struct parse *p, const struct key_def *k, char *base, const char *value)
{
    char *dst = base + k->off;
    if (k->type == V_MODEL && !ends_with(value, ".json") && !ends_with(value, ".ubj"))
        return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' must end in .json or .ubj", k->name,
                       value);
    if (k->type == V_MASK && !ends_with(value, ".png"))
        return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' must end in .png", k->name, value);
    if (k->type == V_CALIB && !ends_with(value, ".json"))
        return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' must end in .json", k->name, value);
    if (value[0] == '/')
        return fail_at(p, p->line, ST_EFORMAT,
                       "%s: '%s' is an absolute path; a recipe's files lie in its folder", k->name,
                       value);
    if (has_dotdot(value))
        return fail_at(p, p->line, ST_EFORMAT,
                       "%s: '%s' contains '..'; a recipe's files lie in its folder", k->name,
                       value);
    int n = snprintf(dst, PATH_MAX, "%s/%s", p->r.dir, value);
    if (n < 0 || n >= PATH_MAX)
        return fail_at(p, p->line, ST_ERANGE, "%s: path too long", k->name);
    return check_inside(p, k, dst);
}

/* Up to max numbers of value into out, each in k's range; *n gets the count. */
static int parse_numbers(struct parse *p, const struct key_def *k, const char *value, double *out,
                         int max, int *n)
{
    char word[64];
    int got;
    *n = 0;
    while ((got = next_word(&value, word, sizeof word)) != 0) {
        double v;
        if (got < 0 || parse_double(word, &v))
            return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' is not a number", k->name,
                           got < 0 ? "(overlong word)" : word);
        if (*n == max)
            return fail_at(p, p->line, ST_ERANGE, "%s: more than %d values", k->name, max);
        if (!in_range(k, v)) {
            char range[48];
            range_text(k, range, sizeof range);
            return fail_at(p, p->line, ST_ERANGE, "%s: %s is out of range; allowed: %s", k->name,
                           word, range);
        }
        out[(*n)++] = v;
    }
    return ST_OK;
}

static int store_reals(struct parse *p, const struct key_def *k, char *base, const char *value)
{
    double *dst = (double *)(base + k->off);
    int n, rc = parse_numbers(p, k, value, dst, k->maxn, &n);
    if (rc)
        return rc;
    if (n == 0)
        return fail_at(p, p->line, ST_EFORMAT, "%s: needs at least one value", k->name);
    /* equal values would give features with the same name */
    for (int i = 1; i < n; i++)
        if (dst[i] <= dst[i - 1])
            return fail_at(p, p->line, ST_EFORMAT, "%s: values must increase", k->name);
    *(int *)(base + k->count_off) = n;
    return ST_OK;
}

static int store_pair(struct parse *p, const struct key_def *k, char *base, const char *value)
{
    double v[2];
    int n, rc = parse_numbers(p, k, value, v, 2, &n);
    if (rc)
        return rc;
    if (n != 2)
        return fail_at(p, p->line, ST_EFORMAT, "%s: needs two numbers", k->name);
    memcpy(base + k->off, v, sizeof v);
    return ST_OK;
}

static int store_points(struct parse *p, const struct key_def *k, char *base, const char *value)
{
    double v[2 * ZONE_MAX_POINTS];
    int n, rc = parse_numbers(p, k, value, v, 2 * k->maxn, &n);
    if (rc)
        return rc;
    if (n % 2 || n < 6)
        return fail_at(p, p->line, ST_EFORMAT, "%s: needs 3..%d points as x y pairs (mm)",
                       k->name, k->maxn);
    memcpy(base + k->off, v, (size_t)n * sizeof v[0]);
    *(int *)(base + k->count_off) = n / 2;
    return ST_OK;
}

/* ISO 10110-7 writes a limit for localised imperfections as N x A. */
static int store_grade(struct parse *p, const struct key_def *k, char *base, const char *value)
{
    char nw[32], xw[8], aw[32], extra[8];
    const char *cur = value;
    long n;
    double a;
    if (next_word(&cur, nw, sizeof nw) <= 0 || next_word(&cur, xw, sizeof xw) <= 0 ||
        next_word(&cur, aw, sizeof aw) <= 0 || next_word(&cur, extra, sizeof extra) != 0 ||
        strcmp(xw, "x") || parse_long(nw, &n) || parse_double(aw, &a))
        return fail_at(p, p->line, ST_EFORMAT,
                       "%s: '%s' is not N x A (ISO 10110-7, e.g. 3 x 0.4)", k->name, value);
    if (n < 1 || n > 10000 || a <= 0 || a > 100)
        return fail_at(p, p->line, ST_ERANGE, "%s: '%s' needs N in 1..10000 and A in (0, 100] mm",
                       k->name, value);
    *(int *)(base + k->off) = (int)n;
    *(double *)(base + k->count_off) = a;
    return ST_OK;
}

static int store_field(struct parse *p, const struct key_def *k, char *base, const char *value)
{
    double v[4];
    int n, rc = parse_numbers(p, k, value, v, 4, &n);
    if (rc)
        return rc;
    int *f = (int *)(base + k->off);
    for (int i = 0; i < n; i++)
        f[i] = (int)v[i];
    if (n != 4 || v[0] != f[0] || v[1] != f[1] || v[2] != f[2] || v[3] != f[3] || f[0] >= f[2] ||
        f[1] >= f[3])
        return fail_at(p, p->line, ST_EFORMAT,
                       "%s: needs four whole pixel numbers x0 y0 x1 y1 with x0 < x1, y0 < y1",
                       k->name);
    return ST_OK;
}

static int store_word(struct parse *p, const struct key_def *k, char *base, const char *value)
{
    char list[80] = "";
    for (int i = 0; k->words[i]; i++) {
        if (!strcmp(value, k->words[i])) {
            *(int *)(base + k->off) = i;
            return ST_OK;
        }
        snprintf(list + strlen(list), sizeof list - strlen(list), "%s%s", i ? " " : "",
                 k->words[i]);
    }
    return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' is not one of: %s", k->name, value, list);
}

/* "none", "all" or "every N". */
static int store_pass(struct parse *p, const struct key_def *k, char *base, const char *value)
{
    long n;
    int *mode = (int *)(base + k->off), *every = (int *)(base + k->count_off);
    if (!strcmp(value, "none") || !strcmp(value, "all")) {
        *mode = !strcmp(value, "all") ? RECIPE_PASS_ALL : RECIPE_PASS_NONE;
        return ST_OK;
    }
    if (strncmp(value, "every", 5) || !is_blank(value[5]) || parse_long(value + 6, &n))
        return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' is not none, all or every N", k->name,
                       value);
    if (!in_range(k, (double)n))
        return out_of_range(p, k, value + 6);
    *mode = RECIPE_PASS_EVERY;
    *every = (int)n;
    return ST_OK;
}

/* `required = exposure gain`: names of [camera]'s setting keys, each once. */
static const char *setting_name(int i)
{
    return camera_keys[i].name;
}

static int store_value(struct parse *p, const struct key_def *k, char *base, const char *value)
{
    long iv;
    double dv;
    int is_none = (k->flags & K_NONE) && !strcmp(value, "none");
    switch (k->type) {
    case V_FORMAT:
    case V_INT:
        if (is_none) {
            *(int *)(base + k->off) = -1;
            return ST_OK;
        }
        if (parse_long(value, &iv))
            return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' is not an integer", k->name, value);
        if (!in_range(k, (double)iv))
            return out_of_range(p, k, value);
        if (k->type == V_FORMAT && iv > RECIPE_FORMAT)
            return fail_at(p, p->line, ST_EFORMAT,
                           "format %ld is newer than this station supports (%d)", iv,
                           RECIPE_FORMAT);
        *(int *)(base + k->off) = (int)iv;
        return ST_OK;
    case V_REAL:
        if (is_none) {
            *(double *)(base + k->off) = -1;
            return ST_OK;
        }
        if (parse_double(value, &dv))
            return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' is not a number", k->name, value);
        if (!in_range(k, dv))
            return out_of_range(p, k, value);
        *(double *)(base + k->off) = dv;
        return ST_OK;
    case V_YESNO:
        if (strcmp(value, "yes") && strcmp(value, "no"))
            return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' is not yes or no", k->name, value);
        *(int *)(base + k->off) = !strcmp(value, "yes");
        return ST_OK;
    case V_ID:
        if (!valid_name(value, (size_t)k->maxn - 1, 1))
            return fail_at(p, p->line, ST_EFORMAT, "%s: '%s' must be 1..%d of a-z 0-9 . _ -",
                           k->name, value, k->maxn - 1);
        memcpy(base + k->off, value, strlen(value) + 1);
        return ST_OK;
    case V_TEXT:
        if (strlen(value) >= (size_t)k->maxn)
            return fail_at(p, p->line, ST_ERANGE, "%s: longer than %d characters", k->name,
                           k->maxn - 1);
        memcpy(base + k->off, value, strlen(value) + 1);
        return ST_OK;
    case V_COLOUR:
        return store_colour(p, k, base, value);
    case V_REALS:
        return store_reals(p, k, base, value);
    case V_FAMILIES:
        if (!strcmp(value, "none")) { /* a network's features only: check_cnn insists on one */
            *(unsigned *)(base + k->off) = 0;
            return ST_OK;
        }
        return store_word_set(p, k, base, value, family_name, NFAMILIES, 0);
    case V_GRADE:
        if (is_none) {
            *(int *)(base + k->off) = -1;
            return ST_OK;
        }
        return store_grade(p, k, base, value);
    case V_PAIR:
        return store_pair(p, k, base, value);
    case V_POINTS:
        return store_points(p, k, base, value);
    case V_FIELD:
        return store_field(p, k, base, value);
    case V_WORD:
        return store_word(p, k, base, value);
    case V_PASS:
        return store_pass(p, k, base, value);
    case V_SETTINGS:
        return store_word_set(p, k, base, value, setting_name, CAM_NSETTINGS, 1);
    case V_MODEL:
    case V_MASK:
    case V_CALIB:
    case V_FILE:
        break;
    }
    return store_path(p, k, base, value);
}

static struct section *find_section(struct parse *p, enum sec_kind kind, const char *name,
                                     const char *zone)
{
    for (int i = 0; i < p->nsec; i++)
        if (p->sec[i].kind == kind && !strcmp(p->sec[i].name, name) &&
            !strcmp(p->sec[i].zone, zone))
            return &p->sec[i];
    return NULL;
}

static void *section_base(struct parse *p, struct section *s)
{
    switch (s->kind) {
    case SEC_CLASS:
        return &p->r.cls[s->index];
    case SEC_FEATURES:
        return &p->r.feat;
    case SEC_TOLERANCE:
        return &p->tolv[s->index];
    case SEC_GATES:
        return &p->r.gates;
    case SEC_PART:
        return &p->r.part;
    case SEC_ZONE:
        return &p->r.zones[s->index];
    case SEC_MASTER:
        return &p->r.masters[s->index];
    case SEC_TRIGGER:
        return &p->r.trigger;
    default:
        return &p->r;
    }
}

/* Called by the reader on every line that opens with '[', before inih sees
 * it: inih tells its handler nothing about section headers, and a section
 * without keys would otherwise go unnoticed. */
static int begin_section(struct parse *p, char *line)
{
    char *close = strchr(line, ']');
    if (!close)
        return fail_at(p, p->line, ST_EFORMAT, "section header lacks ']'");
    const char *rest = close + 1;
    while (is_blank((unsigned char)*rest))
        rest++;
    if (*rest && *rest != ';' && *rest != '#')
        return fail_at(p, p->line, ST_EFORMAT, "text after ']'");

    char inner[64];
    const char *in = line + 1;
    size_t len = (size_t)(close - in);
    if (len >= sizeof inner)
        return fail_at(p, p->line, ST_EFORMAT, "unknown section [%.*s]", (int)len, in);
    memcpy(inner, in, len);
    inner[len] = '\0';

    char word[16], name[32], extra[8], zone[32] = "";
    const char *cur = inner;
    int gw = next_word(&cur, word, sizeof word);
    int gn = next_word(&cur, name, sizeof name);
    int gx = next_word(&cur, extra, sizeof extra);
    int kind = 0;
    while (gw > 0 && kind < SEC_KINDS && strcmp(word, sections[kind].word))
        kind++;
    if (kind == SEC_TOLERANCE && gx > 0 && !strcmp(extra, "in")) {
        int gz = next_word(&cur, zone, sizeof zone);
        if (gz <= 0 || !valid_name(zone, (size_t)NAME_MAX_LEN, 0) || next_word(&cur, extra, 2))
            return fail_at(p, p->line, ST_EFORMAT,
                           "expected [tolerance CLASS in ZONE] with a zone name of 1..%d of "
                           "a-z 0-9 _ -",
                           NAME_MAX_LEN);
        gx = 0;
    }
    if (gw <= 0 || kind == SEC_KINDS || gx != 0)
        return fail_at(p, p->line, ST_EFORMAT, "unknown section [%s]", inner);
    const struct sec_def *d = &sections[kind];
    if (d->named && gn == 0)
        return fail_at(p, p->line, ST_EFORMAT, "section [%s] needs a name, e.g. [%s scratch]",
                       word, word);
    if (!d->named && gn != 0)
        return fail_at(p, p->line, ST_EFORMAT, "section [%s] takes no name", word);
    if (d->named && (gn < 0 || !valid_name(name, (size_t)NAME_MAX_LEN, 0)))
        return fail_at(p, p->line, ST_EFORMAT, "%s name '%s' must be 1..%d of a-z 0-9 _ -",
                       word, gn < 0 ? "(overlong)" : name, NAME_MAX_LEN);
    if (!d->named)
        name[0] = '\0';

    const struct section *dup = find_section(p, (enum sec_kind)kind, name, zone);
    if (dup && kind == SEC_CLASS)
        return fail_at(p, p->line, ST_EFORMAT, "duplicate class '%s' (first on line %d)", name,
                       dup->line);
    if (dup)
        return fail_at(p, p->line, ST_EFORMAT, "duplicate section [%s] (first on line %d)",
                       dup->title, dup->line);

    struct section *s = &p->sec[p->nsec];
    memset(s, 0, sizeof *s);
    s->kind = (enum sec_kind)kind;
    s->line = p->line;
    snprintf(s->name, sizeof s->name, "%s", name);
    snprintf(s->zone, sizeof s->zone, "%s", zone);
    snprintf(s->title, sizeof s->title, "%s%s%s%s%s", word, d->named ? " " : "", name,
             *zone ? " in " : "", zone);
    if (kind == SEC_CLASS) {
        if (p->r.nclasses == RECIPE_MAX_CLASSES)
            return fail_at(p, p->line, ST_ERANGE, "more than %d classes", RECIPE_MAX_CLASSES);
        s->index = p->r.nclasses++;
        snprintf(p->r.cls[s->index].name, sizeof p->r.cls[s->index].name, "%s", name);
    } else if (kind == SEC_TOLERANCE) {
        int most = (int)(sizeof p->tolv / sizeof p->tolv[0]);
        if (p->ntol == most)
            return fail_at(p, p->line, ST_ERANGE, "more than %d tolerance sections", most);
        s->index = p->ntol++;
        /* a zone's section starts from "no limit"; check_tolerances fills
         * the keys it leaves out from the class's section */
        p->tolv[s->index].t = (struct recipe_tolerance){-1, -1, -1, -1, -1, -1, -1};
    } else if (kind == SEC_ZONE) {
        if (p->r.nzones == ZONE_MAX)
            return fail_at(p, p->line, ST_ERANGE, "more than %d zones", ZONE_MAX);
        s->index = p->r.nzones++;
        snprintf(p->r.zones[s->index].name, sizeof p->r.zones[s->index].name, "%s", name);
    } else if (kind == SEC_MASTER) {
        if (p->r.nmasters == RECIPE_MAX_MASTERS)
            return fail_at(p, p->line, ST_ERANGE, "more than %d master parts", RECIPE_MAX_MASTERS);
        s->index = p->r.nmasters++;
        snprintf(p->r.masters[s->index].name, sizeof p->r.masters[s->index].name, "%s", name);
    }
    s->base = section_base(p, s);
    p->nsec++;
    p->cur = s;
    return ST_OK;
}

/* fgets for inih that also counts lines (this inih passes no line number to
 * the handler, which runs on the line just read), refuses over-long lines
 * instead of letting inih split them, and strips leading blanks so that
 * inih never takes an indented line for a multi-line continuation. */
static char *read_line(char *buf, int num, void *stream)
{
    struct parse *p = stream;
    if (p->failed || num < 2)
        return NULL;
    int c, n = 0, nul = 0;
    while ((c = getc(p->f)) != EOF && c != '\n') {
        if (n < num - 1)
            buf[n] = (char)c;
        nul |= c == '\0';
        n++;
    }
    if (ferror(p->f)) {
        fail_at(p, 0, ST_EIO, "read error after line %d", p->line);
        return NULL;
    }
    if (c == EOF && n == 0)
        return NULL;
    p->line++;
    if (n > num - 1) {
        fail_at(p, p->line, ST_EFORMAT, "line longer than %d characters", num - 1);
        return NULL;
    }
    if (nul) {
        fail_at(p, p->line, ST_EFORMAT, "line holds a NUL byte");
        return NULL;
    }
    buf[n] = '\0';
    size_t skip = p->line == 1 && !strncmp(buf, "\xEF\xBB\xBF", 3) ? 3 : 0;
    while (is_blank((unsigned char)buf[skip]))
        skip++;
    memmove(buf, buf + skip, (size_t)n - skip + 1);
    if (buf[0] == '[' && begin_section(p, buf) != ST_OK)
        return NULL;
    return buf;
}

static int on_key(void *user, const char *section, const char *name, const char *value)
{
    struct parse *p = user;
    (void)section; /* p->cur tracks it, with the class or tolerance resolved */
    if (!p->cur) {
        fail_at(p, p->line, ST_EFORMAT, "key '%s' before any section", name);
        return 0;
    }
    const struct key_def *keys = sections[p->cur->kind].keys;
    int k = 0;
    while (keys[k].name && strcmp(keys[k].name, name))
        k++;
    if (!keys[k].name) {
        fail_at(p, p->line, ST_EFORMAT, "unknown key '%s' in [%s]", name, p->cur->title);
        return 0;
    }
    if (p->cur->key_line[k]) {
        fail_at(p, p->line, ST_EFORMAT, "duplicate key '%s' in [%s] (first on line %d)", name,
                p->cur->title, p->cur->key_line[k]);
        return 0;
    }
    p->cur->key_line[k] = p->line;
    return store_value(p, &keys[k], p->cur->base, value) == ST_OK;
}

static int key_index(enum sec_kind kind, const char *name)
{
    const struct key_def *keys = sections[kind].keys;
    int k = 0;
    while (keys[k].name && strcmp(keys[k].name, name))
        k++;
    return k;
}

static int check_sections(struct parse *p)
{
    for (int kind = 0; kind < SEC_KINDS; kind++) {
        if (!sections[kind].required)
            continue;
        int found = 0;
        for (int i = 0; i < p->nsec && !found; i++)
            found = p->sec[i].kind == (enum sec_kind)kind;
        if (!found)
            return fail_at(p, 0, ST_EFORMAT, "missing section [%s%s]", sections[kind].word,
                           sections[kind].named ? " NAME" : "");
    }
    for (int i = 0; i < p->nsec; i++) {
        const struct section *s = &p->sec[i];
        const struct key_def *keys = sections[s->kind].keys;
        /* a zone's tolerance inherits what it leaves out */
        int inherits = s->kind == SEC_TOLERANCE && *s->zone;
        for (int k = 0; keys[k].name && !inherits; k++)
            if (!(keys[k].flags & K_OPTIONAL) && !s->key_line[k])
                return fail_at(p, s->line, ST_EFORMAT, "[%s] lacks key '%s'", s->title,
                               keys[k].name);
        if (s->kind == SEC_FEATURES && (p->r.feat.families & FEAT_GABOR) &&
            !s->key_line[key_index(SEC_FEATURES, "gabor_frequencies")])
            return fail_at(p, s->line, ST_EFORMAT,
                           "[%s] lacks key 'gabor_frequencies' (required with family gabor)",
                           s->title);
        if (s->kind == SEC_FEATURES && (p->r.feat.families & ~(unsigned)(FEAT_COLOUR | FEAT_GABOR)) &&
            !s->key_line[key_index(SEC_FEATURES, "sigmas")])
            return fail_at(p, s->line, ST_EFORMAT, "[%s] lacks key 'sigmas'", s->title);
    }
    return ST_OK;
}

static int check_classes(struct parse *p)
{
    const struct recipe *r = &p->r;
    const struct section *first = find_section(p, SEC_CLASS, r->cls[0].name, "");
    if (r->cls[0].is_defect)
        return fail_at(p, first->key_line[key_index(SEC_CLASS, "defect")], ST_EFORMAT,
                       "class '%s' comes first, so it is the background and must have "
                       "defect = no",
                       r->cls[0].name);
    int surface = 0, defect = 0;
    for (int c = 1; c < r->nclasses; c++) {
        surface += !r->cls[c].is_defect;
        defect += r->cls[c].is_defect;
    }
    if (!surface)
        return fail_at(p, 0, ST_EFORMAT,
                       "needs a class with defect = no besides the background '%s'",
                       r->cls[0].name);
    if (!defect)
        return fail_at(p, 0, ST_EFORMAT, "needs at least one class with defect = yes");
    return ST_OK;
}

static int check_limits(struct parse *p, const struct section *s, const struct recipe_tolerance *t)
{
    if (t->min_area_mm2 >= 0 && t->max_area_mm2 >= 0 && t->min_area_mm2 > t->max_area_mm2) {
        int line = s->key_line[key_index(SEC_TOLERANCE, "min_area_mm2")];
        return fail_at(p, line ? line : s->line, ST_ERANGE,
                       "[%s]: min_area_mm2 = %g exceeds max_area_mm2 = %g", s->title,
                       t->min_area_mm2, t->max_area_mm2);
    }
    return ST_OK;
}

/* A zone's section: the keys it sets over the class's tolerance. */
static void inherit_tolerance(const struct section *s, const struct recipe_tolerance *own,
                              struct recipe_tolerance *out)
{
    for (int k = 0; tolerance_keys[k].name; k++) {
        const struct key_def *kd = &tolerance_keys[k];
        if (!s->key_line[k] || k == TOL_MERGE_KEY)
            continue;
        size_t n = kd->type == V_INT ? sizeof(int) : sizeof(double);
        memcpy((char *)out + kd->off, (const char *)own + kd->off, n);
        if (kd->type == V_GRADE)
            memcpy((char *)out + kd->count_off, (const char *)own + kd->count_off,
                   sizeof(double));
    }
}

static int find_zone(const struct recipe *r, const char *name)
{
    for (int z = 0; z < r->nzones; z++)
        if (!strcmp(r->zones[z].name, name))
            return z;
    return -1;
}

static int check_tolerances(struct parse *p)
{
    struct recipe *r = &p->r;
    int have[RECIPE_MAX_CLASSES] = {0};
    for (int c = 0; c < r->nclasses; c++)
        r->tol[c] = (struct recipe_tolerance){-1, -1, -1, -1, -1, -1, -1};
    /* the classes' own sections first: the zones' inherit from them */
    for (int pass = 0; pass < 2; pass++) {
        for (int i = 0; i < p->nsec; i++) {
            const struct section *s = &p->sec[i];
            if (s->kind != SEC_TOLERANCE || (pass == 0) != !*s->zone)
                continue;
            int c = recipe_find_class(r, s->name);
            if (c < 0)
                return fail_at(p, s->line, ST_EFORMAT, "[%s] names no class", s->title);
            if (!r->cls[c].is_defect)
                return fail_at(p, s->line, ST_EFORMAT,
                               "class '%s' is not a defect (defect = no) and takes no tolerance",
                               s->name);
            const struct tol_slot *slot = &p->tolv[s->index];
            if (pass == 0) {
                if (check_limits(p, s, &slot->t))
                    return p->fail_code;
                r->tol[c] = slot->t;
                r->merge_gap_mm[c] = slot->merge_gap_mm;
                have[c] = 1;
                continue;
            }
            int z = find_zone(r, s->zone);
            if (z < 0)
                return fail_at(p, s->line, ST_EFORMAT, "[%s] names no zone (no [zone %s])",
                               s->title, s->zone);
            if (s->key_line[TOL_MERGE_KEY])
                return fail_at(p, s->key_line[TOL_MERGE_KEY], ST_EFORMAT,
                               "merge_gap_mm belongs in [tolerance %s]: fragments merge the "
                               "same way in every zone",
                               s->name);
            struct recipe_tolerance t = r->tol[c];
            inherit_tolerance(s, &slot->t, &t);
            if (check_limits(p, s, &t))
                return p->fail_code;
            r->ztol[z][c] = t;
            r->ztol_set[z][c] = 1;
        }
        if (pass == 0)
            for (int c = 0; c < r->nclasses; c++)
                if (r->cls[c].is_defect && !have[c])
                    return fail_at(p, find_section(p, SEC_CLASS, r->cls[c].name, "")->line,
                                   ST_EFORMAT, "defect class '%s' has no [tolerance %s]",
                                   r->cls[c].name, r->cls[c].name);
    }
    return ST_OK;
}

/* Each shape takes its own keys and no others. */
static int check_zones(struct parse *p)
{
    for (int i = 0; i < p->nsec; i++) {
        const struct section *s = &p->sec[i];
        if (s->kind != SEC_ZONE)
            continue;
        struct zone *z = &p->r.zones[s->index];
        int sh = (int)z->shape;
        for (int k = 0; zone_keys[k].name; k++) {
            const char *name = zone_keys[k].name;
            int needed = 0;
            for (int n = 0; n < 3 && zone_shape_keys[sh].needs[n]; n++)
                needed |= !strcmp(name, zone_shape_keys[sh].needs[n]);
            int allowed = needed || !strcmp(name, "shape") || !strcmp(name, "centre") ||
                          (!strcmp(name, "angle") && zone_shape_keys[sh].angled);
            if (needed && !s->key_line[k])
                return fail_at(p, s->line, ST_EFORMAT, "[%s] lacks key '%s' (shape %s)",
                               s->title, name, zone_shape_keys[sh].word);
            if (!allowed && s->key_line[k])
                return fail_at(p, s->key_line[k], ST_EFORMAT,
                               "key '%s' does not apply to shape %s", name,
                               zone_shape_keys[sh].word);
        }
        if (z->shape == ZONE_RING && z->r_in >= z->r_out)
            return fail_at(p, s->key_line[key_index(SEC_ZONE, "radii")], ST_ERANGE,
                           "radii: inner %g must be below outer %g", z->r_in, z->r_out);
    }
    return ST_OK;
}

static int check_gates(struct parse *p)
{
    const struct recipe_gates *g = &p->r.gates;
    const struct section *s = find_section(p, SEC_GATES, "", "");
    if (g->min_level >= g->max_level)
        return fail_at(p, s ? s->line : 0, ST_ERANGE, "min_level %g must be below max_level %g",
                       g->min_level, g->max_level);
    if (g->min_part_fraction >= g->max_part_fraction)
        return fail_at(p, s ? s->line : 0, ST_ERANGE,
                       "min_part_fraction %g must be below max_part_fraction %g",
                       g->min_part_fraction, g->max_part_fraction);
    return ST_OK;
}

/* The scale comes one way only: the two mm_per_px keys, or a calibration
 * file whose scale (at the target's centre) fills them. */
/* A network named by cnn_model is read now, so feature counts, names and
 * the file's digest are known from here on. */
static int check_cnn(struct parse *p)
{
    struct cnnfeat_spec *c = &p->r.feat.cnn;
    c->on = c->model[0] != 0;
    if (!c->on && p->r.feat.families == 0)
        return fail_at(p, 0, ST_EFORMAT, "[features] families = none needs cnn_model");
    if (!c->on && (c->output[0] || c->channels[0] || c->mean_text[0] || c->std_text[0]))
        return fail_at(p, 0, ST_EFORMAT, "[features] cnn_* keys need cnn_model");
    return cnnfeat_resolve(c, p->path, p->e);
}

static int check_scale(struct parse *p)
{
    const struct section *s = NULL;
    for (int i = 0; i < p->nsec && !s; i++)
        if (p->sec[i].kind == SEC_SCALE)
            s = &p->sec[i];
    int lx = s->key_line[key_index(SEC_SCALE, "mm_per_px_x")];
    int ly = s->key_line[key_index(SEC_SCALE, "mm_per_px_y")];
    int lc = s->key_line[key_index(SEC_SCALE, "calibration")];
    if (lc && (lx || ly))
        return fail_at(p, lc, ST_EFORMAT,
                       "[scale] has both calibration and mm_per_px_%s: give one of the two",
                       lx ? "x" : "y");
    if (!lc && !(lx && ly))
        return fail_at(p, s->line, ST_EFORMAT,
                       "[scale] needs mm_per_px_x and mm_per_px_y, or calibration = FILE");
    if (!lc)
        return ST_OK;
    struct err ce = {0};
    if (calfile_load(p->r.calibration_path, &p->r.cal, &ce))
        return fail_at(p, lc, ce.code, "calibration: %s", ce.msg);
    p->r.has_calibration = 1;
    p->r.mm_per_px_x = p->r.cal.mm_per_px_x;
    p->r.mm_per_px_y = p->r.cal.mm_per_px_y;
    return ST_OK;
}

/* Verification needs both kinds of master: a good part shows the station
 * passes what it should, one just over tolerance that it still rejects. */
static int check_masters(struct parse *p)
{
    const struct section *v = find_section(p, SEC_VERIFICATION, "", "");
    int pass = 0, fail = 0;
    for (int i = 0; i < p->r.nmasters; i++) {
        pass += p->r.masters[i].expect == 0;
        fail += p->r.masters[i].expect == 1;
    }
    if (!p->r.nmasters && v)
        return fail_at(p, v->line, ST_EFORMAT, "[verification] without any [master NAME]");
    if (p->r.nmasters && !v)
        return fail_at(p, 0, ST_EFORMAT, "master parts without a [verification] interval_hours");
    if (p->r.nmasters && (!pass || !fail))
        return fail_at(p, find_section(p, SEC_MASTER, p->r.masters[0].name, "")->line,
                       ST_EFORMAT, "master parts need at least one 'expect = pass' and one "
                       "'expect = fail' (a defect just over tolerance); these have no %s",
                       pass ? "fail" : "pass");
    return ST_OK;
}

/* Which settings the recipe gives; a required one must be among them. */
static int check_camera(struct parse *p)
{
    const struct section *s = find_section(p, SEC_CAMERA, "", "");
    struct recipe_camera *c = &p->r.camera;
    if (!s)
        return ST_OK;
    for (int k = 0; k < CAM_NSETTINGS; k++)
        if (s->key_line[k])
            c->set |= 1u << k;
    for (int k = 0; k < CAM_NSETTINGS; k++)
        if ((c->required & (1u << k)) && !(c->set & (1u << k)))
            return fail_at(p, s->key_line[key_index(SEC_CAMERA, "required")], ST_EFORMAT,
                           "required lists '%s' but [camera] gives no %s value",
                           camera_keys[k].name, camera_keys[k].name);
    int lw = s->key_line[key_index(SEC_CAMERA, "width")];
    int lh = s->key_line[key_index(SEC_CAMERA, "height")];
    if (!lw != !lh)
        return fail_at(p, lw ? lw : lh, ST_EFORMAT, "[camera] needs width and height together");
    return ST_OK;
}

static int check_trigger(struct parse *p)
{
    const struct recipe_trigger *t = &p->r.trigger;
    const struct section *s = find_section(p, SEC_TRIGGER, "", "");
    if (t->leave_share >= t->enter_share)
        return fail_at(p, s ? s->line : 0, ST_ERANGE,
                       "leave_share %g must be below enter_share %g", t->leave_share,
                       t->enter_share);
    return ST_OK;
}

static void set_defaults(struct recipe *r)
{
    cnnfeat_spec_default(&r->feat.cnn);
    r->feat.gabor_orientations = 4;
    r->feat.normalise = 1;
    r->feat.threads = 2;
    /* defaults: common practice for an 8-bit camera, no source */
    r->gates.min_level = 40;
    r->gates.max_level = 235;
    r->gates.max_saturated = 0.02;
    r->gates.black_level = 8;
    r->gates.max_black = 0.05;
    r->gates.min_part_fraction = 0.05;
    r->gates.max_part_fraction = 0.9;
    r->gates.sharpness_reference = -1;
    r->gates.min_sharpness_ratio = 0.5;
    r->gates.low_confidence = 0.5;
    r->gates.max_low_confidence = 0.1;
    r->gates.min_frame_change = 0;
    r->part.orient = 0;
    r->part.area_mm2 = -1;
    r->part.area_tolerance = 0.25;
    r->part.border_margin_px = 2;
    r->part.field[0] = -1;
    r->verify_interval_hours = -1;
    r->camera.stall_ms = RECIPE_CAM_STALL_MS;
    set_trigger_defaults(&r->trigger);
}

static int set_paths(struct parse *p, const char *path)
{
    struct recipe *r = &p->r;
    size_t n = strlen(path);
    if (n == 0 || n >= sizeof r->path)
        return fail_at(p, 0, ST_ERANGE, "recipe path empty or too long");
    memcpy(r->path, path, n + 1);
    const char *slash = strrchr(path, '/');
    if (!slash)
        snprintf(r->dir, sizeof r->dir, ".");
    else if (slash == path)
        snprintf(r->dir, sizeof r->dir, "/");
    else
        snprintf(r->dir, sizeof r->dir, "%.*s", (int)(slash - path), path);
    return ST_OK;
}

int recipe_load(const char *path, struct recipe *r, struct err *e)
{
    struct parse *p = calloc(1, sizeof *p);
    int rc = ST_OK;
    if (!p)
        return err_set(e, ST_ENOMEM, "%s: out of memory", path);
    p->path = path;
    p->e = e;
    set_defaults(&p->r);
    if ((rc = set_paths(p, path)) != ST_OK)
        goto fail;
    p->f = fopen(path, "r");
    if (!p->f) {
        rc = err_set(e, ST_EIO, "%s: cannot open: %s", path, strerror(errno));
        goto fail;
    }
    int bad_line = ini_parse_stream(read_line, p, on_key, p);
    if (bad_line > 0 && (!p->failed || bad_line < p->fail_line)) {
        rc = fail_at(p, bad_line, ST_EFORMAT, "expected [section] or key = value");
        goto fail;
    }
    if (bad_line < 0) {
        rc = fail_at(p, 0, ST_ENOMEM, "inih could not allocate its line buffer");
        goto fail;
    }
    if (p->failed) {
        rc = p->fail_code;
        goto fail;
    }
    if ((rc = check_sections(p)) != ST_OK || (rc = check_classes(p)) != ST_OK ||
        (rc = check_zones(p)) != ST_OK || (rc = check_tolerances(p)) != ST_OK ||
        (rc = check_gates(p)) != ST_OK || (rc = check_scale(p)) != ST_OK ||
        (rc = check_masters(p)) != ST_OK || (rc = check_camera(p)) != ST_OK ||
        (rc = check_trigger(p)) != ST_OK || (rc = check_cnn(p)) != ST_OK)
        goto fail;
    *r = p->r;
fail:
    if (p->f)
        fclose(p->f);
    free(p);
    return rc;
}

int recipe_find_class(const struct recipe *r, const char *name)
{
    for (int c = 0; c < r->nclasses; c++)
        if (!strcmp(r->cls[c].name, name))
            return c;
    return -1;
}

int recipe_tolerance_zone(const struct recipe *r, int cls, int zone)
{
    return zone >= 0 && zone < r->nzones && r->ztol_set[zone][cls] ? zone : -1;
}

const struct recipe_tolerance *recipe_tolerance_for(const struct recipe *r, int cls, int zone)
{
    int z = recipe_tolerance_zone(r, cls, zone);
    return z >= 0 ? &r->ztol[z][cls] : &r->tol[cls];
}
