/* core/qstats: published worked examples and hand-countable sets.  The
 * seeded comparisons with SciPy and scikit-learn are tests/ref/test_qstats.py. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <math.h>
#include <string.h>

#include "core/qstats.h"

#define assert_near(got, want, tol) near_or_fail((got), (want), (tol), __FILE__, __LINE__)

static void near_or_fail(double got, double want, double tol, const char *file, int line)
{
    if (!(fabs(got - want) <= tol)) {
        print_error("%s:%d: got %.17g, want %.17g (tolerance %g)\n", file, line, got, want, tol);
        fail();
    }
}

/* Montgomery, Introduction to Statistical Quality Control, the orange-juice
 * concentrate can example (fraction nonconforming control chart, phase I):
 * 30 samples of n = 50 cans.  The counts and the book's figures are quoted
 * from memory: p̄ = 0.2313, UCL = 0.4102, LCL = 0.0524, samples 15 and 23
 * above the UCL.  The book rounds to four places, hence the tolerance. */
static void test_pchart_montgomery_orange_juice(void **state)
{
    (void)state;
    const uint64_t d[30] = {12, 15, 8,  10, 4,  7,  16, 9,  14, 10, 5,  6,  17, 12, 22,
                            8,  10, 5,  13, 11, 20, 18, 24, 15, 9,  12, 7,  13, 9,  6};
    uint64_t n[30];
    for (int i = 0; i < 30; i++)
        n[i] = 50;
    struct qstats_ppoint pt[30];
    double pbar;
    struct err e;
    assert_int_equal(qstats_pchart(d, n, 30, &pbar, pt, &e), ST_OK);
    assert_near(pbar, 0.2313, 5e-5);
    for (int i = 0; i < 30; i++) {
        assert_near(pt[i].ucl, 0.4102, 5e-5);
        assert_near(pt[i].lcl, 0.0524, 5e-5);
        assert_near(pt[i].p, (double)d[i] / 50.0, 1e-15);
        /* samples are numbered from 1 in the book */
        assert_int_equal(pt[i].outside, (i + 1 == 15 || i + 1 == 23) ? 1 : 0);
    }
}

/* Varying subgroup sizes and the floor at 0: common practice, no source.
 * Worked by hand: d = {0, 5}, n = {4, 16}: p̄ = 5/20 = 0.25;
 * n = 4: 3·√(0.25·0.75/4) = 0.6495 -> LCL 0 (floored), UCL 0.8995;
 * n = 16: 3·√(0.1875/16) = 0.3248 -> LCL 0 (floored), UCL 0.5748. */
static void test_pchart_varying_n_and_refusals(void **state)
{
    (void)state;
    const uint64_t d[2] = {0, 5}, n[2] = {4, 16};
    struct qstats_ppoint pt[2];
    double pbar;
    struct err e;
    assert_int_equal(qstats_pchart(d, n, 2, &pbar, pt, &e), ST_OK);
    assert_near(pbar, 0.25, 1e-15);
    assert_near(pt[0].ucl, 0.25 + 3 * sqrt(0.1875 / 4), 1e-15);
    assert_near(pt[1].ucl, 0.25 + 3 * sqrt(0.1875 / 16), 1e-15);
    assert_true(pt[0].lcl == 0.0 && pt[1].lcl == 0.0);
    assert_int_equal(pt[0].outside + pt[1].outside, 0);
    const uint64_t bad_d[1] = {3}, bad_n[1] = {2}, zero_n[1] = {0};
    assert_int_equal(qstats_pchart(bad_d, bad_n, 1, &pbar, pt, &e), ST_EINVAL);
    assert_int_equal(qstats_pchart(d, zero_n, 1, &pbar, pt, &e), ST_EINVAL);
    assert_int_equal(qstats_pchart(d, n, 0, &pbar, pt, &e), ST_EINVAL);
}

/* Wikipedia, "Cohen's kappa", worked example: 50 grant proposals read by
 * readers A and B; both yes 20, A yes B no 5, A no B yes 10, both no 15:
 * p_o = 0.70, p_e = 0.50, κ = 0.40. */
static void test_kappa_wikipedia_example(void **state)
{
    (void)state;
    const uint64_t t[4] = {20, 5, 10, 15};
    assert_near(qstats_kappa(t, 2), 0.40, 1e-12);
    /* the same 50 items as label pairs (1 = yes) */
    int a[50], b[50], i = 0;
    for (int k = 0; k < 20; k++, i++)
        a[i] = 1, b[i] = 1;
    for (int k = 0; k < 5; k++, i++)
        a[i] = 1, b[i] = 0;
    for (int k = 0; k < 10; k++, i++)
        a[i] = 0, b[i] = 1;
    for (int k = 0; k < 15; k++, i++)
        a[i] = 0, b[i] = 0;
    double kappa;
    struct err e;
    assert_int_equal(qstats_kappa_labels(a, b, 50, 2, &kappa, &e), ST_OK);
    assert_near(kappa, 0.40, 1e-12);
    /* undefined cases are NaN, not a made-up value */
    const uint64_t empty[4] = {0}, one[4] = {7, 0, 0, 0};
    assert_true(isnan(qstats_kappa(empty, 2)));
    assert_true(isnan(qstats_kappa(one, 2)));
    a[3] = 2;
    assert_int_equal(qstats_kappa_labels(a, b, 50, 2, &kappa, &e), ST_ERANGE);
    assert_non_null(strstr(e.msg, "pair 3"));
}

/* Eight reasons counted by eye: (max_area, scratch, "") 3, (max_area,
 * scratch, rim) 2, (too_dark, image, "") 2, (max_count, pit, "") 1.  The
 * tie at 2 is broken by rule name, so max_area/rim comes first. */
static void test_pareto_by_hand(void **state)
{
    (void)state;
    struct qstats_pareto p;
    struct err e;
    qstats_pareto_init(&p);
    const char *in[8][3] = {{"too_dark", "image", NULL},   {"max_area", "scratch", ""},
                            {"max_count", "pit", NULL},    {"max_area", "scratch", "rim"},
                            {"max_area", "scratch", NULL}, {"too_dark", "image", ""},
                            {"max_area", "scratch", "rim"}, {"max_area", "scratch", NULL}};
    for (int i = 0; i < 8; i++)
        assert_int_equal(qstats_pareto_add(&p, in[i][0], in[i][1], in[i][2], &e), ST_OK);
    qstats_pareto_sort(&p);
    assert_int_equal(p.n, 4);
    assert_int_equal(p.total, 8);
    const char *want[4][3] = {{"max_area", "scratch", ""},
                              {"max_area", "scratch", "rim"},
                              {"too_dark", "image", ""},
                              {"max_count", "pit", ""}};
    const uint64_t count[4] = {3, 2, 2, 1};
    const double cum[4] = {3 / 8.0, 5 / 8.0, 7 / 8.0, 1.0};
    for (int i = 0; i < 4; i++) {
        assert_string_equal(p.rows[i].rule, want[i][0]);
        assert_string_equal(p.rows[i].cls, want[i][1]);
        assert_string_equal(p.rows[i].zone, want[i][2]);
        assert_int_equal(p.rows[i].count, count[i]);
        assert_near(p.rows[i].share, count[i] / 8.0, 1e-15);
        assert_near(p.rows[i].cumulative, cum[i], 1e-15);
    }
    qstats_pareto_clear(&p);
    assert_int_equal(p.n, 0);
    qstats_pareto_clear(&p);
}

/* Epoch seconds from GNU date: `date -u -d 2026-12-01T00:00:00Z +%s` =
 * 1796083200, 2000-02-29T12:34:56Z = 951827696, 1969-12-31T23:00:00Z = -3600. */
static void test_parse_time(void **state)
{
    (void)state;
    int64_t t;
    struct err e;
    assert_int_equal(qstats_parse_time("2026-12-01T00:00:00Z", &t, &e), ST_OK);
    assert_int_equal(t, 1796083200);
    assert_int_equal(qstats_parse_time("2026-12-01T01:30:00.250+01:30", &t, &e), ST_OK);
    assert_int_equal(t, 1796083200);
    assert_int_equal(qstats_parse_time("2000-02-29T12:34:56", &t, &e), ST_OK);
    assert_int_equal(t, 951827696);
    assert_int_equal(qstats_parse_time("1969-12-31T23:00:00Z", &t, &e), ST_OK);
    assert_int_equal(t, -3600);
    const char *bad[] = {"2025-02-29T00:00:00Z", "2026-12-01 00:00:00Z", "2026-13-01T00:00:00Z",
                         "2026-12-01T24:00:00Z", "2026-12-01T00:00:00Q", "2026-12-01T00:00",
                         "2026-12-01T00:00:00."};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        assert_int_equal(qstats_parse_time(bad[i], &t, &e), ST_EFORMAT);
        assert_non_null(strstr(e.msg, bad[i]));
    }
    char day[16];
    qstats_format_day(1796083200 / 86400, day, sizeof day);
    assert_string_equal(day, "2026-12-01");
    qstats_format_day(951827696 / 86400, day, sizeof day);
    assert_string_equal(day, "2000-02-29");
    qstats_format_day(-1, day, sizeof day);
    assert_string_equal(day, "1969-12-31");
}

static void add(struct qstats_counts *c, const char *iso, enum qstats_verdict v)
{
    int64_t t;
    struct err e;
    assert_int_equal(qstats_parse_time(iso, &t, &e), ST_OK);
    assert_int_equal(qstats_counts_add(c, t, v, &e), ST_OK);
}

/* Shifts 6, 14, 22: a 05:59 part belongs to the night shift that began the
 * evening before; 22:00 and 01:00 the next morning are the same night shift.
 * Given out of time order on purpose.  Counted by eye below. */
static void test_counts_days_and_shifts(void **state)
{
    (void)state;
    struct qstats_shifts s;
    struct qstats_counts c;
    struct err e;
    assert_int_equal(qstats_shifts_parse("6,14,22", &s, &e), ST_OK);
    assert_int_equal(qstats_counts_init(&c, &s, &e), ST_OK);
    add(&c, "2026-12-01T06:00:00Z", QSTATS_PASS);  /* 12-01 day shift */
    add(&c, "2026-12-01T13:59:59Z", QSTATS_FAIL);  /* 12-01 day shift */
    add(&c, "2026-12-01T05:59:59Z", QSTATS_PASS);  /* 11-30 night */
    add(&c, "2026-12-01T14:00:00Z", QSTATS_NONE);  /* 12-01 late */
    add(&c, "2026-12-02T01:00:00Z", QSTATS_FAIL);  /* 12-01 night, day 12-02 */
    add(&c, "2026-12-01T22:00:00Z", QSTATS_PASS);  /* 12-01 night */
    assert_int_equal(c.total[QSTATS_PASS], 3);
    assert_int_equal(c.total[QSTATS_FAIL], 2);
    assert_int_equal(c.total[QSTATS_NONE], 1);
    char day[16];
    assert_int_equal(c.ndays, 2);
    qstats_format_day(c.days[0].day, day, sizeof day);
    assert_string_equal(day, "2026-12-01");
    assert_int_equal(c.days[0].n[QSTATS_PASS], 3);
    assert_int_equal(c.days[0].n[QSTATS_FAIL], 1);
    assert_int_equal(c.days[0].n[QSTATS_NONE], 1);
    qstats_format_day(c.days[1].day, day, sizeof day);
    assert_string_equal(day, "2026-12-02");
    assert_int_equal(c.days[1].n[QSTATS_FAIL], 1);
    /* (11-30, 2) (12-01, 0) (12-01, 1) (12-01, 2) */
    assert_int_equal(c.nshifts, 4);
    const int shift[4] = {2, 0, 1, 2};
    const char *sday[4] = {"2026-11-30", "2026-12-01", "2026-12-01", "2026-12-01"};
    const uint64_t total[4] = {1, 2, 1, 2};
    for (int i = 0; i < 4; i++) {
        qstats_format_day(c.shift[i].day, day, sizeof day);
        assert_string_equal(day, sday[i]);
        assert_int_equal(c.shift[i].shift, shift[i]);
        assert_int_equal(c.shift[i].n[0] + c.shift[i].n[1] + c.shift[i].n[2], total[i]);
    }
    assert_int_equal(c.shift[1].n[QSTATS_FAIL], 1);
    assert_int_equal(c.shift[3].n[QSTATS_FAIL], 1);
    qstats_counts_clear(&c);

    /* a local clock one hour ahead puts 23:30 UTC on the next day */
    s.offset_min = 60;
    assert_int_equal(qstats_counts_init(&c, &s, &e), ST_OK);
    add(&c, "2026-12-01T23:30:00Z", QSTATS_PASS);
    qstats_format_day(c.days[0].day, day, sizeof day);
    assert_string_equal(day, "2026-12-02");
    assert_int_equal(c.shift[0].shift, 2);
    qstats_format_day(c.shift[0].day, day, sizeof day);
    assert_string_equal(day, "2026-12-01");
    qstats_counts_clear(&c);

    const char *bad[] = {"", "6,,14", "14,6", "6,24", "x", "1,2,3,4,5,6,7,8,9"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++)
        assert_int_equal(qstats_shifts_parse(bad[i], &s, &e), ST_EINVAL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_pchart_montgomery_orange_juice),
        cmocka_unit_test(test_pchart_varying_n_and_refusals),
        cmocka_unit_test(test_kappa_wikipedia_example),
        cmocka_unit_test(test_pareto_by_hand),
        cmocka_unit_test(test_parse_time),
        cmocka_unit_test(test_counts_days_and_shifts),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
