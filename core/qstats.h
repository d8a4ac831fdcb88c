/* qstats: the quality-control statistics the audit reports, as pure functions.
 *
 * - p-chart (Shewhart control chart for the fraction nonconforming): centre
 *   line p̄ = Σd / Σn over the subgroups, limits p̄ ± 3·√(p̄(1−p̄)/nᵢ) per
 *   subgroup (varying n), the lower limit floored at 0 and the upper capped
 *   at 1; a point is outside when pᵢ > UCLᵢ or pᵢ < LCLᵢ.
 * - Clopper–Pearson exact two-sided interval for k successes in n trials at
 *   confidence 1 − α: lower = B⁻¹(α/2; k, n−k+1), upper = B⁻¹(1−α/2; k+1, n−k),
 *   with lower = 0 at k = 0 and upper = 1 at k = n exactly.  B⁻¹ inverts the
 *   regularized incomplete beta function I_x(a, b), evaluated by its continued
 *   fraction (DLMF §8.17.22) with the modified Lentz method, on the side of
 *   the symmetry I_x(a,b) = 1 − I_{1−x}(b,a) where the fraction converges
 *   fast; the inverse is a Newton iteration kept inside a shrinking bisection
 *   bracket.  (Method written from memory of DLMF §8.17 and the usual Lentz
 *   recurrence; checked against scipy in tests/ref/test_qstats.py.)
 * - Cohen's kappa κ = (p_o − p_e) / (1 − p_e) from a K×K agreement table
 *   (rows = rater A, columns = rater B) or from two label arrays.
 * - Pareto of reasons keyed by (rule, class, zone): counts sorted descending
 *   (ties by key, so the order is reproducible) with share and cumulative share.
 * - Counts per verdict, per day and per shift of timestamped verdicts.
 *   Shifts are given as their start hours in ascending order (e.g. 6, 14, 22):
 *   shift i runs from start i to start i+1, the last one past midnight to the
 *   first start, and hours before the first start belong to the previous
 *   day's last shift — the night shift that began the evening before.
 *   Days are counted on the clock the times are given in (UTC from the log)
 *   shifted by a fixed offset in minutes, so a site can count in local time.
 *
 * Owns only what its structs hold (the Pareto rows and the count buckets,
 * freed by their _clear).  Never does I/O, never prints, keeps no state
 * between calls. */
#ifndef ST_QSTATS_H
#define ST_QSTATS_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"

/* ---- p-chart ---- */

struct qstats_ppoint {
    double p;         /* dᵢ / nᵢ */
    double lcl, ucl;  /* this subgroup's limits */
    int outside;      /* +1 above the UCL, −1 below the LCL, 0 within */
};

/* m subgroups of sizes n[i] > 0 with d[i] <= n[i] nonconforming; fills
 * out[0..m-1] and *pbar.  ST_EINVAL for m = 0, an empty subgroup or d > n. */
int qstats_pchart(const uint64_t *d, const uint64_t *n, size_t m, double *pbar,
                  struct qstats_ppoint *out, struct err *e);

/* ---- exact binomial interval ---- */

/* I_x(a, b) for a, b > 0 and 0 <= x <= 1; NaN for arguments outside that or
 * when the continued fraction does not converge. */
double qstats_beta_inc(double a, double b, double x);
/* The x in [0, 1] with I_x(a, b) = p, for a, b > 0 and 0 <= p <= 1; NaN otherwise. */
double qstats_beta_inc_inv(double a, double b, double p);
/* Clopper–Pearson interval; k <= n, n > 0, 0 < alpha < 1, else ST_EINVAL. */
int qstats_clopper_pearson(uint64_t k, uint64_t n, double alpha, double *lo, double *hi,
                           struct err *e);

/* ---- agreement ---- */

#define QSTATS_MAX_K 16

/* table[i * k + j]: items rater A put in category i and rater B in j.  NaN
 * when the table is empty or the expected agreement is 1 (both raters used
 * one and the same category only), where κ is undefined, as in sklearn. */
double qstats_kappa(const uint64_t *table, int k);
/* Builds the table from n label pairs in 0..k-1 and returns κ in *kappa;
 * ST_EINVAL for k outside 1..QSTATS_MAX_K, ST_ERANGE for a label outside
 * 0..k-1 (naming its index). */
int qstats_kappa_labels(const int *a, const int *b, size_t n, int k, double *kappa,
                        struct err *e);

/* ---- Pareto of reasons ---- */

struct qstats_pareto_row {
    char *rule, *cls, *zone;  /* zone "" when the reason has none */
    uint64_t count;
    double share, cumulative; /* set by qstats_pareto_sort */
};

struct qstats_pareto {
    size_t n, cap;
    struct qstats_pareto_row *rows;
    uint64_t total;
};

void qstats_pareto_init(struct qstats_pareto *p);
void qstats_pareto_clear(struct qstats_pareto *p);
/* Counts one reason; NULL strings count as "".  ST_ENOMEM when memory runs out. */
int qstats_pareto_add(struct qstats_pareto *p, const char *rule, const char *cls,
                      const char *zone, struct err *e);
/* Sorts by count descending, then rule, class, zone ascending; fills the shares. */
void qstats_pareto_sort(struct qstats_pareto *p);

/* ---- counts per verdict, day and shift ---- */

enum qstats_verdict { QSTATS_PASS = 0, QSTATS_FAIL = 1, QSTATS_NONE = 2, QSTATS_NVERDICTS = 3 };

#define QSTATS_MAX_SHIFTS 8

struct qstats_shifts {
    int n;                          /* 1..QSTATS_MAX_SHIFTS */
    int start[QSTATS_MAX_SHIFTS];   /* hours 0..23, strictly ascending */
    int offset_min;                 /* added to the given times before counting */
};

struct qstats_bucket {
    int64_t day;      /* days since 1970-01-01 */
    int shift;        /* shift index, or −1 in a per-day bucket */
    uint64_t n[QSTATS_NVERDICTS];
};

struct qstats_counts {
    struct qstats_shifts shifts;
    uint64_t total[QSTATS_NVERDICTS];
    size_t ndays, nshifts, cap_days, cap_shifts;
    struct qstats_bucket *days;     /* ascending by day */
    struct qstats_bucket *shift;    /* ascending by (day, shift) */
};

/* Parses "6,14,22" into s (offset 0); ST_EINVAL naming what is wrong. */
int qstats_shifts_parse(const char *text, struct qstats_shifts *s, struct err *e);
/* ST_EINVAL when s is not a valid shift list (count, range, order). */
int qstats_counts_init(struct qstats_counts *c, const struct qstats_shifts *s, struct err *e);
void qstats_counts_clear(struct qstats_counts *c);
/* Counts one verdict at t seconds since the epoch.  Times in roughly
 * ascending order cost O(1) each; others are placed by a search. */
int qstats_counts_add(struct qstats_counts *c, int64_t t, enum qstats_verdict v, struct err *e);

/* "YYYY-MM-DDTHH:MM:SS" with optional fraction and "Z" or "+HH:MM" / "-HH:MM"
 * (ISO 8601 extended format; no zone is read as UTC) into seconds since the
 * epoch; ST_EFORMAT otherwise. */
int qstats_parse_time(const char *iso, int64_t *t, struct err *e);
/* Days since 1970-01-01 back to "YYYY-MM-DD" (buf of at least 11 bytes). */
void qstats_format_day(int64_t day, char *buf, size_t len);

#endif
