/* station/audit_stats: eight hand-built log records whose figures can be
 * counted by eye (the table in each test), plus the refusals.  Outside
 * references: the false-reject interval 1 of 3 from
 * scipy.stats.binomtest(1, 3).proportion_ci(method="exact") (scipy 1.10.1)
 * = [0.008403758659612647, 0.9057006759492866]; kappa of the 2x2 table
 * [[1, 1], [1, 2]] from sklearn.metrics.cohen_kappa_score([1,1,1,0,0],
 * [1,0,1,1,0]) (scikit-learn 1.2.1) = 0.16666666666666663. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <math.h>
#include <string.h>

#include "core/judge.h"
#include "station/audit_stats.h"

#define assert_near(got, want, tol) near_or_fail((got), (want), (tol), __FILE__, __LINE__)

static void near_or_fail(double got, double want, double tol, const char *file, int line)
{
    if (!(fabs(got - want) <= tol)) {
        print_error("%s:%d: got %.17g, want %.17g (tolerance %g)\n", file, line, got, want, tol);
        fail();
    }
}

#define SCRATCH "{\"rule\":\"max_area\",\"class\":\"scratch\",\"zone\":\"rim\"}"
#define PIT "{\"rule\":\"max_count\",\"class\":\"pit\"}"
#define DARK "{\"rule\":\"too_dark\",\"class\":\"image\"}"

static const struct {
    const char *utc;
    int verdict;
    const char *reasons;
    int disp;
} SET[8] = {
    /* shifts 6, 14, 22                               day    shift        */
    {"2026-11-30T23:00:00Z", VERDICT_PASS, "[]", 0},  /* 11-30  11-30 22h  */
    {"2026-12-01T05:00:00Z", VERDICT_FAIL, "[" SCRATCH "]", LOG_DISP_CONFIRMED}, /* 12-01 11-30 22h */
    {"2026-12-01T07:00:00Z", VERDICT_FAIL, "[" SCRATCH "," PIT "]", LOG_DISP_FALSE_REJECT},
    {"2026-12-01T08:00:00.5Z", VERDICT_NONE, "[" DARK "]", LOG_DISP_REWORK}, /* 12-01 06h */
    {"2026-12-01T15:00:00Z", VERDICT_PASS, "[]", LOG_DISP_CONFIRMED},  /* 12-01 14h: an escape */
    {"2026-12-01T16:00:00Z", VERDICT_PASS, "[]", LOG_DISP_FALSE_REJECT}, /* 12-01 14h */
    {"2026-12-01T23:59:59Z", VERDICT_FAIL, "[" PIT "]", LOG_DISP_OTHER},  /* 12-01 22h */
    {"2026-12-02T00:00:00Z", VERDICT_FAIL, "[" SCRATCH "]", 0},          /* 12-02, 12-01 22h */
};

static json_t *gather(int by_shift)
{
    struct qstats_shifts sh;
    struct audit_stats st;
    struct err e;
    assert_int_equal(qstats_shifts_parse("6,14,22", &sh, &e), ST_OK);
    assert_int_equal(audit_stats_init(&st, &sh, &e), ST_OK);
    char reasons[256];
    for (int i = 0; i < 8; i++) {
        struct log_record r;
        memset(&r, 0, sizeof r);
        r.seq = i + 1;
        snprintf(r.utc, sizeof r.utc, "%s", SET[i].utc);
        r.verdict = SET[i].verdict;
        snprintf(reasons, sizeof reasons, "%s", SET[i].reasons);
        r.reasons_json = reasons;
        r.has_disposition = SET[i].disp != 0;
        r.disp.disp = SET[i].disp;
        assert_int_equal(audit_stats_add(&st, &r, &e), ST_OK);
    }
    json_t *js = audit_stats_json(&st, by_shift);
    audit_stats_clear(&st);
    assert_non_null(js);
    return js;
}

static json_int_t geti(const json_t *o, const char *path)
{
    /* "a.b.c" through objects */
    char buf[128];
    snprintf(buf, sizeof buf, "%s", path);
    const json_t *x = o;
    for (char *k = strtok(buf, "."); k; k = strtok(NULL, "."))
        x = json_object_get(x, k);
    assert_true(json_is_integer(x));
    return json_integer_value(x);
}

static void expect_verdicts(const json_t *b, int pass, int fail, int none)
{
    const json_t *v = json_object_get(b, "verdicts");
    assert_int_equal(geti(v, "PASS"), pass);
    assert_int_equal(geti(v, "FAIL"), fail);
    assert_int_equal(geti(v, "NO_VERDICT"), none);
}

static void test_counts_and_pchart_by_day(void **state)
{
    (void)state;
    json_t *js = gather(0);
    assert_int_equal(geti(js, "records"), 8);
    assert_string_equal(json_string_value(json_object_get(js, "first")), SET[0].utc);
    assert_string_equal(json_string_value(json_object_get(js, "last")), SET[7].utc);
    expect_verdicts(js, 3, 4, 1);
    const json_t *days = json_object_get(js, "days");
    assert_int_equal(json_array_size(days), 3);
    const char *label[3] = {"2026-11-30", "2026-12-01", "2026-12-02"};
    const int want[3][3] = {{1, 0, 0}, {2, 3, 1}, {0, 1, 0}};
    for (int i = 0; i < 3; i++) {
        const json_t *d = json_array_get(days, i);
        assert_string_equal(json_string_value(json_object_get(d, "label")), label[i]);
        expect_verdicts(d, want[i][0], want[i][1], want[i][2]);
    }
    /* rejects per day 0/1, 4/6, 1/1: p̄ = 5/8; limits by the p-chart formula */
    const json_t *pc = json_object_get(js, "pchart");
    assert_string_equal(json_string_value(json_object_get(pc, "subgroup")), "day");
    assert_near(json_real_value(json_object_get(pc, "pbar")), 5.0 / 8.0, 1e-15);
    const json_t *p1 = json_array_get(json_object_get(pc, "points"), 1);
    assert_int_equal(geti(p1, "rejects"), 4);
    assert_int_equal(geti(p1, "n"), 6);
    double h = 3 * sqrt(5.0 / 8 * 3.0 / 8 / 6);
    assert_near(json_real_value(json_object_get(p1, "ucl")), fmin(1, 5.0 / 8 + h), 1e-15);
    assert_near(json_real_value(json_object_get(p1, "lcl")), fmax(0, 5.0 / 8 - h), 1e-15);
    assert_int_equal(json_array_size(json_object_get(pc, "outside")), 0);
    json_decref(js);
}

static void test_shifts(void **state)
{
    (void)state;
    json_t *js = gather(1);
    const json_t *sh = json_object_get(js, "shifts");
    assert_int_equal(json_array_size(sh), 4);
    const char *label[4] = {"2026-11-30 22:00", "2026-12-01 06:00", "2026-12-01 14:00",
                            "2026-12-01 22:00"};
    const int want[4][3] = {{1, 1, 0}, {0, 1, 1}, {2, 0, 0}, {0, 2, 0}};
    for (int i = 0; i < 4; i++) {
        const json_t *s = json_array_get(sh, i);
        assert_string_equal(json_string_value(json_object_get(s, "label")), label[i]);
        expect_verdicts(s, want[i][0], want[i][1], want[i][2]);
    }
    const json_t *pc = json_object_get(js, "pchart");
    assert_string_equal(json_string_value(json_object_get(pc, "subgroup")), "shift");
    assert_int_equal(json_array_size(json_object_get(pc, "points")), 4);
    json_decref(js);
}

static void test_pareto_and_audit(void **state)
{
    (void)state;
    json_t *js = gather(0);
    const json_t *pa = json_object_get(js, "pareto");
    assert_int_equal(json_array_size(pa), 3);
    const char *cls[3] = {"scratch", "pit", "image"};
    const int count[3] = {3, 2, 1};
    for (int i = 0; i < 3; i++) {
        const json_t *r = json_array_get(pa, i);
        assert_string_equal(json_string_value(json_object_get(r, "class")), cls[i]);
        assert_int_equal(geti(r, "count"), count[i]);
    }
    assert_string_equal(json_string_value(json_object_get(json_array_get(pa, 0), "zone")), "rim");
    assert_near(json_real_value(json_object_get(json_array_get(pa, 1), "cumulative")), 5.0 / 6,
                1e-15);

    const json_t *au = json_object_get(js, "audit");
    assert_int_equal(geti(au, "rejects"), 5);
    assert_int_equal(geti(au, "dispositions.none"), 1);
    assert_int_equal(geti(au, "dispositions.confirmed"), 1);
    assert_int_equal(geti(au, "dispositions.false-reject"), 1);
    assert_int_equal(geti(au, "dispositions.rework"), 1);
    assert_int_equal(geti(au, "dispositions.other"), 1);
    assert_int_equal(geti(au, "false_reject.false_rejects"), 1);
    assert_int_equal(geti(au, "false_reject.audited"), 3);
    const json_t *fr = json_object_get(au, "false_reject");
    assert_near(json_real_value(json_object_get(fr, "rate")), 1.0 / 3, 1e-15);
    const json_t *ci = json_object_get(fr, "ci95");
    assert_near(json_real_value(json_array_get(ci, 0)), 0.008403758659612647, 1e-12);
    assert_near(json_real_value(json_array_get(ci, 1)), 0.9057006759492866, 1e-12);
    const json_t *ka = json_object_get(au, "kappa");
    const json_t *t = json_object_get(ka, "table");
    const int tab[2][2] = {{1, 1}, {1, 2}};
    for (int i = 0; i < 2; i++)
        for (int j = 0; j < 2; j++)
            assert_int_equal(json_integer_value(json_array_get(json_array_get(t, i), j)),
                             tab[i][j]);
    assert_near(json_real_value(json_object_get(ka, "value")), 0.16666666666666663, 1e-12);
    json_decref(js);
}

static void test_empty_and_refusals(void **state)
{
    (void)state;
    struct qstats_shifts sh = {1, {0}, 0};
    struct audit_stats st;
    struct err e;
    assert_int_equal(audit_stats_init(&st, &sh, &e), ST_OK);
    json_t *js = audit_stats_json(&st, 0);
    assert_true(json_is_null(json_object_get(js, "pchart")));
    assert_true(json_is_null(json_object_get(js, "first")));
    const json_t *au = json_object_get(js, "audit");
    assert_true(json_is_null(json_object_get(json_object_get(au, "false_reject"), "rate")));
    assert_true(json_is_null(json_object_get(json_object_get(au, "kappa"), "value")));
    json_decref(js);

    struct log_record r;
    memset(&r, 0, sizeof r);
    r.seq = 41;
    r.verdict = VERDICT_FAIL;
    snprintf(r.utc, sizeof r.utc, "yesterday");
    r.reasons_json = (char *)"[]";
    assert_int_equal(audit_stats_add(&st, &r, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, "record 41"));
    snprintf(r.utc, sizeof r.utc, "2026-12-01T00:00:00Z");
    r.reasons_json = (char *)"[{\"rule\":";
    assert_int_equal(audit_stats_add(&st, &r, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, "record 41: reasons"));
    r.reasons_json = (char *)"[{\"class\":\"pit\"}]";
    assert_int_equal(audit_stats_add(&st, &r, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, "no rule"));
    audit_stats_clear(&st);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_counts_and_pchart_by_day),
        cmocka_unit_test(test_shifts),
        cmocka_unit_test(test_pareto_and_audit),
        cmocka_unit_test(test_empty_and_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
