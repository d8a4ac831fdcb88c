#include "qstats.h"

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "civil.h"

/* ---- p-chart ---- */

int qstats_pchart(const uint64_t *d, const uint64_t *n, size_t m, double *pbar,
                  struct qstats_ppoint *out, struct err *e)
{
    if (m == 0)
        return err_set(e, ST_EINVAL, "p-chart: no subgroups");
    uint64_t sd = 0, sn = 0;
    for (size_t i = 0; i < m; i++) {
        if (n[i] == 0 || d[i] > n[i])
            return err_set(e, ST_EINVAL, "p-chart: subgroup %zu has %llu of %llu", i,
                           (unsigned long long)d[i], (unsigned long long)n[i]);
        sd += d[i];
        sn += n[i];
    }
    double pb = (double)sd / (double)sn;
    for (size_t i = 0; i < m; i++) {
        double p = (double)d[i] / (double)n[i];
        double h = 3.0 * sqrt(pb * (1.0 - pb) / (double)n[i]);
        out[i].p = p;
        out[i].lcl = pb - h > 0 ? pb - h : 0;
        out[i].ucl = pb + h < 1 ? pb + h : 1;
        out[i].outside = p > out[i].ucl ? 1 : p < out[i].lcl ? -1 : 0;
    }
    *pbar = pb;
    return ST_OK;
}

/* ---- regularized incomplete beta and its inverse ---- */

#define CF_MAX_ITER 20000
#define CF_EPS 1e-16
#define CF_TINY 1e-300

/* lgamma is C99; glibc's also writes the signgam global, which no caller
 * reads and which is harmless for positive arguments. */
static double log_beta(double a, double b)
{
    return lgamma(a) + lgamma(b) - lgamma(a + b);
}

/* The continued fraction of DLMF §8.17.22 by the modified Lentz method;
 * converges fast for x < (a + 1) / (a + b + 2).  NaN when it does not. */
static double beta_cf(double a, double b, double x)
{
    double c = 1.0, d = 1.0 - (a + b) * x / (a + 1.0);
    if (fabs(d) < CF_TINY)
        d = CF_TINY;
    d = 1.0 / d;
    double h = d;
    for (int m = 1; m <= CF_MAX_ITER; m++) {
        double m2 = 2.0 * m;
        /* even term d_2m, then odd term d_2m+1 */
        double t[2] = {m * (b - m) * x / ((a + m2 - 1.0) * (a + m2)),
                       -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1.0))};
        for (int s = 0; s < 2; s++) {
            d = 1.0 + t[s] * d;
            if (fabs(d) < CF_TINY)
                d = CF_TINY;
            c = 1.0 + t[s] / c;
            if (fabs(c) < CF_TINY)
                c = CF_TINY;
            d = 1.0 / d;
            h *= d * c;
            if (s == 1 && fabs(d * c - 1.0) < CF_EPS)
                return h;
        }
    }
    return NAN;
}

double qstats_beta_inc(double a, double b, double x)
{
    if (!(a > 0 && b > 0 && x >= 0 && x <= 1))
        return NAN;
    if (x == 0 || x == 1)
        return x;
    double front = exp(a * log(x) + b * log1p(-x) - log_beta(a, b));
    if (x < (a + 1.0) / (a + b + 2.0))
        return front * beta_cf(a, b, x) / a;
    return 1.0 - front * beta_cf(b, a, 1.0 - x) / b;
}

double qstats_beta_inc_inv(double a, double b, double p)
{
    if (!(a > 0 && b > 0 && p >= 0 && p <= 1))
        return NAN;
    if (p == 0 || p == 1)
        return p;
    double lb = log_beta(a, b);
    double lo = 0, hi = 1, x = a / (a + b), step_old = 1, step = 1;
    for (int it = 0; it < 400; it++) {
        double f = qstats_beta_inc(a, b, x) - p;
        if (isnan(f))
            return NAN;
        if (f == 0)
            return x;
        if (f < 0)
            lo = x;
        else
            hi = x;
        double df = exp((a - 1.0) * log(x) + (b - 1.0) * log1p(-x) - lb);
        double nx = x - f / df;
        /* Newton only while it lands inside the bracket and converges at
         * least as fast as bisection; otherwise halve the bracket. */
        if (!(df > 0) || !(nx > lo && nx < hi) || fabs(2.0 * f) > fabs(step_old * df)) {
            step_old = step;
            step = 0.5 * (hi - lo);
            nx = lo + step;
        } else {
            step_old = step;
            step = x - nx;
        }
        if (fabs(nx - x) <= 4.0 * DBL_EPSILON * nx || hi - lo <= 4.0 * DBL_EPSILON * hi)
            return nx;
        x = nx;
    }
    return x;
}

int qstats_clopper_pearson(uint64_t k, uint64_t n, double alpha, double *lo, double *hi,
                           struct err *e)
{
    if (n == 0 || k > n || !(alpha > 0 && alpha < 1))
        return err_set(e, ST_EINVAL, "Clopper-Pearson: needs 0 <= k <= n, n > 0, 0 < alpha < 1");
    double kd = (double)k, nd = (double)n;
    *lo = k == 0 ? 0.0 : qstats_beta_inc_inv(kd, nd - kd + 1.0, alpha / 2);
    *hi = k == n ? 1.0 : qstats_beta_inc_inv(kd + 1.0, nd - kd, 1.0 - alpha / 2);
    if (isnan(*lo) || isnan(*hi))
        return err_set(e, ST_ERANGE, "Clopper-Pearson: no convergence for %llu of %llu",
                       (unsigned long long)k, (unsigned long long)n);
    return ST_OK;
}

/* ---- Cohen's kappa ---- */

double qstats_kappa(const uint64_t *table, int k)
{
    if (k < 1 || k > QSTATS_MAX_K)
        return NAN;
    double row[QSTATS_MAX_K] = {0}, col[QSTATS_MAX_K] = {0}, agree = 0, total = 0;
    for (int i = 0; i < k; i++)
        for (int j = 0; j < k; j++) {
            double v = (double)table[i * k + j];
            row[i] += v;
            col[j] += v;
            total += v;
            if (i == j)
                agree += v;
        }
    if (total == 0)
        return NAN;
    double pe = 0;
    for (int i = 0; i < k; i++)
        pe += row[i] / total * (col[i] / total);
    if (pe >= 1.0)
        return NAN;
    return (agree / total - pe) / (1.0 - pe);
}

int qstats_kappa_labels(const int *a, const int *b, size_t n, int k, double *kappa,
                        struct err *e)
{
    if (k < 1 || k > QSTATS_MAX_K)
        return err_set(e, ST_EINVAL, "kappa: %d categories (1..%d allowed)", k, QSTATS_MAX_K);
    uint64_t t[QSTATS_MAX_K * QSTATS_MAX_K] = {0};
    for (size_t i = 0; i < n; i++) {
        if (a[i] < 0 || a[i] >= k || b[i] < 0 || b[i] >= k)
            return err_set(e, ST_ERANGE, "kappa: label pair %zu (%d, %d) outside 0..%d", i, a[i],
                           b[i], k - 1);
        t[a[i] * k + b[i]]++;
    }
    *kappa = qstats_kappa(t, k);
    return ST_OK;
}

/* ---- Pareto ---- */

void qstats_pareto_init(struct qstats_pareto *p)
{
    memset(p, 0, sizeof *p);
}

void qstats_pareto_clear(struct qstats_pareto *p)
{
    for (size_t i = 0; i < p->n; i++) {
        free(p->rows[i].rule);
        free(p->rows[i].cls);
        free(p->rows[i].zone);
    }
    free(p->rows);
    qstats_pareto_init(p);
}

static int same(const char *a, const char *b)
{
    return strcmp(a, b ? b : "") == 0;
}

int qstats_pareto_add(struct qstats_pareto *p, const char *rule, const char *cls,
                      const char *zone, struct err *e)
{
    /* a log holds a few dozen distinct keys, so a linear search is enough */
    for (size_t i = 0; i < p->n; i++) {
        struct qstats_pareto_row *r = &p->rows[i];
        if (same(r->rule, rule) && same(r->cls, cls) && same(r->zone, zone)) {
            r->count++;
            p->total++;
            return ST_OK;
        }
    }
    if (p->n == p->cap) {
        size_t cap = p->cap ? 2 * p->cap : 16;
        struct qstats_pareto_row *grown = realloc(p->rows, cap * sizeof *grown);
        if (!grown)
            return err_set(e, ST_ENOMEM, "Pareto: out of memory");
        p->rows = grown;
        p->cap = cap;
    }
    struct qstats_pareto_row r = {strdup(rule ? rule : ""), strdup(cls ? cls : ""),
                                  strdup(zone ? zone : ""), 1, 0, 0};
    if (!r.rule || !r.cls || !r.zone) {
        free(r.rule);
        free(r.cls);
        free(r.zone);
        return err_set(e, ST_ENOMEM, "Pareto: out of memory");
    }
    p->rows[p->n++] = r;
    p->total++;
    return ST_OK;
}

static int pareto_order(const void *pa, const void *pb)
{
    const struct qstats_pareto_row *a = pa, *b = pb;
    if (a->count != b->count)
        return a->count > b->count ? -1 : 1;
    int c = strcmp(a->rule, b->rule);
    if (!c)
        c = strcmp(a->cls, b->cls);
    return c ? c : strcmp(a->zone, b->zone);
}

void qstats_pareto_sort(struct qstats_pareto *p)
{
    if (p->n > 1)
        qsort(p->rows, p->n, sizeof *p->rows, pareto_order);
    uint64_t run = 0;
    for (size_t i = 0; i < p->n; i++) {
        run += p->rows[i].count;
        p->rows[i].share = (double)p->rows[i].count / (double)p->total;
        p->rows[i].cumulative = (double)run / (double)p->total;
    }
}

/* ---- counts per day and shift ---- */

static int shifts_valid(const struct qstats_shifts *s)
{
    if (s->n < 1 || s->n > QSTATS_MAX_SHIFTS || s->offset_min < -24 * 60 ||
        s->offset_min > 24 * 60)
        return 0;
    for (int i = 0; i < s->n; i++)
        if (s->start[i] < 0 || s->start[i] > 23 || (i && s->start[i] <= s->start[i - 1]))
            return 0;
    return 1;
}

int qstats_shifts_parse(const char *text, struct qstats_shifts *s, struct err *e)
{
    memset(s, 0, sizeof *s);
    const char *p = text;
    while (*p) {
        char *end;
        long h = strtol(p, &end, 10);
        if (end == p || (*end && *end != ',') || s->n == QSTATS_MAX_SHIFTS)
            return err_set(e, ST_EINVAL,
                           "shifts '%s': want up to %d start hours like 6,14,22", text,
                           QSTATS_MAX_SHIFTS);
        s->start[s->n++] = h < 0 || h > 23 ? -1 : (int)h;
        p = *end ? end + 1 : end;
    }
    if (!shifts_valid(s))
        return err_set(e, ST_EINVAL, "shifts '%s': start hours must be 0..23 and ascending",
                       text);
    return ST_OK;
}

int qstats_counts_init(struct qstats_counts *c, const struct qstats_shifts *s, struct err *e)
{
    memset(c, 0, sizeof *c);
    if (!shifts_valid(s))
        return err_set(e, ST_EINVAL, "shifts: 1..%d start hours 0..23, ascending",
                       QSTATS_MAX_SHIFTS);
    c->shifts = *s;
    return ST_OK;
}

void qstats_counts_clear(struct qstats_counts *c)
{
    free(c->days);
    free(c->shift);
    memset(c, 0, sizeof *c);
}

static int bucket_cmp(int64_t day, int shift, const struct qstats_bucket *b)
{
    if (day != b->day)
        return day < b->day ? -1 : 1;
    return shift < b->shift ? -1 : shift > b->shift;
}

/* The bucket for (day, shift) in the sorted array, inserted when new. */
static struct qstats_bucket *bucket_get(struct qstats_bucket **arr, size_t *n, size_t *cap,
                                        int64_t day, int shift)
{
    size_t lo = 0, hi = *n;
    if (*n && bucket_cmp(day, shift, &(*arr)[*n - 1]) >= 0)
        lo = *n - 1;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        int c = bucket_cmp(day, shift, &(*arr)[mid]);
        if (c == 0)
            return &(*arr)[mid];
        if (c < 0)
            hi = mid;
        else
            lo = mid + 1;
    }
    if (*n == *cap) {
        size_t nc = *cap ? 2 * *cap : 64;
        struct qstats_bucket *grown = realloc(*arr, nc * sizeof *grown);
        if (!grown)
            return NULL;
        *arr = grown;
        *cap = nc;
    }
    memmove(&(*arr)[lo + 1], &(*arr)[lo], (*n - lo) * sizeof **arr);
    (*arr)[lo] = (struct qstats_bucket){day, shift, {0}};
    (*n)++;
    return &(*arr)[lo];
}

static int64_t floor_div(int64_t a, int64_t b)
{
    return a / b - (a % b < 0);
}

int qstats_counts_add(struct qstats_counts *c, int64_t t, enum qstats_verdict v, struct err *e)
{
    if ((unsigned)v >= QSTATS_NVERDICTS)
        return err_set(e, ST_EINVAL, "counts: verdict %d is not one of the three", (int)v);
    int64_t local = t + (int64_t)c->shifts.offset_min * 60;
    int64_t day = floor_div(local, 86400);
    int hour = (int)((local - day * 86400) / 3600);
    int64_t sday = day;
    int s = c->shifts.n - 1;
    if (hour < c->shifts.start[0])
        sday = day - 1;
    else
        while (c->shifts.start[s] > hour)
            s--;
    struct qstats_bucket *bd = bucket_get(&c->days, &c->ndays, &c->cap_days, day, -1);
    struct qstats_bucket *bs =
        bd ? bucket_get(&c->shift, &c->nshifts, &c->cap_shifts, sday, s) : NULL;
    if (!bs)
        return err_set(e, ST_ENOMEM, "counts: out of memory");
    bd->n[v]++;
    bs->n[v]++;
    c->total[v]++;
    return ST_OK;
}

static int digits(const char *s, int n, int *v)
{
    *v = 0;
    for (int i = 0; i < n; i++) {
        if (s[i] < '0' || s[i] > '9')
            return -1;
        *v = *v * 10 + (s[i] - '0');
    }
    return 0;
}

int qstats_parse_time(const char *iso, int64_t *t, struct err *e)
{
    static const int mdays[12] = {31, 29, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    int y, mo, d, h, mi, s, oh = 0, om = 0;
    size_t len = strlen(iso);
    const char *p = iso + 19;
    if (len < 19 || digits(iso, 4, &y) || iso[4] != '-' || digits(iso + 5, 2, &mo) ||
        iso[7] != '-' || digits(iso + 8, 2, &d) || iso[10] != 'T' || digits(iso + 11, 2, &h) ||
        iso[13] != ':' || digits(iso + 14, 2, &mi) || iso[16] != ':' || digits(iso + 17, 2, &s))
        goto bad;
    int leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    if (mo < 1 || mo > 12 || d < 1 || d > mdays[mo - 1] || (mo == 2 && d == 29 && !leap) ||
        h > 23 || mi > 59 || s > 60)
        goto bad;
    if (*p == '.' || *p == ',') {
        p++;
        if (*p < '0' || *p > '9')
            goto bad;
        while (*p >= '0' && *p <= '9')
            p++;
    }
    int sign = 0;
    if (*p == 'Z')
        p++;
    else if (*p == '+' || *p == '-') {
        sign = *p == '+' ? 1 : -1;
        if (digits(p + 1, 2, &oh) || p[3] != ':' || digits(p + 4, 2, &om) || oh > 23 || om > 59)
            goto bad;
        p += 6;
    }
    if (*p)
        goto bad;
    *t = civil_days(y, mo, d) * 86400 + h * 3600 + mi * 60 + s -
         sign * (oh * 3600 + om * 60);
    return ST_OK;
bad:
    return err_set(e, ST_EFORMAT, "time '%.40s' is not ISO 8601 YYYY-MM-DDTHH:MM:SSZ", iso);
}

void qstats_format_day(int64_t day, char *buf, size_t len)
{
    int64_t y;
    int m, d;
    civil_date(day, &y, &m, &d);
    snprintf(buf, len, "%04lld-%02d-%02d", (long long)y, m, d);
}
