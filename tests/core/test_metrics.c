/* core/metrics: worked examples whose answers come from outside the project,
 * plus the refusal paths.  Exact ratios of small integers are compared with
 * a tolerance of 1e-12.  The seeded random comparison with scikit-learn is
 * tests/ref/test_metrics.py. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <math.h>
#include <string.h>

#include "core/metrics.h"

#define TOL 1e-12

/* cmocka's assert_float_equal rounds to float; these need double. */
#define assert_near(got, want, tol) near_or_fail((got), (want), (tol), __FILE__, __LINE__)

static void near_or_fail(double got, double want, double tol, const char *file, int line)
{
    if (!(fabs(got - want) <= tol)) {
        print_error("%s:%d: got %.17g, want %.17g (tolerance %g)\n", file, line, got, want, tol);
        fail();
    }
}

/* Multiclass example of sklearn.metrics.jaccard_score's docstring
 * (scikit-learn 1.2.1): y_true = [0, 1, 2, 2], y_pred = [0, 2, 1, 2] gives
 * jaccard_score(average=None) = [1, 0, 0.33...]; accuracy_score = 2/4. */
static void test_docstring_multiclass(void **state)
{
    (void)state;
    const uint8_t truth[] = {0, 1, 2, 2};
    const uint8_t pred[] = {0, 2, 1, 2};
    struct confusion cm;
    struct err e;
    metrics_init(&cm, 3);
    assert_int_equal(metrics_add(&cm, truth, pred, 4, &e), ST_OK);
    assert_near(metrics_iou(&cm, 0), 1.0, TOL);
    assert_near(metrics_iou(&cm, 1), 0.0, TOL);
    assert_near(metrics_iou(&cm, 2), 1.0 / 3.0, TOL);
    assert_near(metrics_accuracy(&cm), 0.5, TOL);
    /* reference: mean of the docstring's array, (1 + 0 + 1/3) / 3 */
    assert_near(metrics_mean_iou(&cm, NULL), (1.0 + 1.0 / 3.0) / 3.0, TOL);
    /* reference: the docstring's pairs counted by hand; rows = truth */
    const uint64_t want[3][3] = {{1, 0, 0}, {0, 0, 1}, {0, 1, 1}};
    for (int t = 0; t < 3; t++)
        for (int p = 0; p < 3; p++)
            assert_int_equal(cm.c[t][p], want[t][p]);
    assert_near(metrics_row_share(&cm, 2, 1), 0.5, TOL);
    assert_near(metrics_row_share(&cm, 1, 2), 1.0, TOL);
}

/* Unlabelled truth is skipped whatever the prediction says; accumulation
 * over two calls equals one call; a class seen nowhere is absent and left
 * out of the mean; the defect mask selects classes. */
static void test_unlabelled_absent_and_mask(void **state)
{
    (void)state;
    /* hand-worked: labelled pairs (0,0) (0,1) (1,1) (1,1) (2,2) (2,0) (3,3);
     * class 4 nowhere.  IoU: 0 -> 1/3, 1 -> 2/3, 2 -> 1/2, 3 -> 1. */
    const uint8_t truth[] = {0, 0, 255, 1, 1, 255, 2, 2, 3};
    const uint8_t pred[] = {0, 1, 200, 1, 1, 4, 2, 0, 3};
    struct confusion one, two;
    struct err e;
    metrics_init(&one, 5);
    metrics_init(&two, 5);
    assert_int_equal(metrics_add(&one, truth, pred, 9, &e), ST_OK);
    assert_int_equal(metrics_add(&two, truth, pred, 4, &e), ST_OK);
    assert_int_equal(metrics_add(&two, truth + 4, pred + 4, 5, &e), ST_OK);
    assert_memory_equal(&one, &two, sizeof one);
    assert_near(metrics_accuracy(&one), 5.0 / 7.0, TOL);
    assert_near(metrics_iou(&one, 0), 1.0 / 3.0, TOL);
    assert_near(metrics_iou(&one, 1), 2.0 / 3.0, TOL);
    assert_near(metrics_iou(&one, 2), 0.5, TOL);
    assert_near(metrics_iou(&one, 3), 1.0, TOL);
    assert_true(metrics_iou(&one, 4) < 0);
    assert_true(metrics_iou(&one, 5) < 0);
    assert_near(metrics_mean_iou(&one, NULL), (1.0 / 3 + 2.0 / 3 + 0.5 + 1.0) / 4, TOL);
    const int defects[5] = {0, 0, 1, 0, 1};
    assert_near(metrics_mean_iou(&one, defects), 0.5, TOL);
    const int only_absent[5] = {0, 0, 0, 0, 1};
    assert_true(metrics_mean_iou(&one, only_absent) < 0);
    assert_near(metrics_row_share(&one, 4, 4), 0.0, TOL);
}

static void test_empty(void **state)
{
    (void)state;
    struct confusion cm;
    metrics_init(&cm, 3);
    assert_true(metrics_accuracy(&cm) < 0);
    assert_true(metrics_mean_iou(&cm, NULL) < 0);
    assert_near(metrics_row_share(&cm, 0, 0), 0.0, TOL);
}

/* A value outside 0..n-1 is refused and leaves the matrix as it was. */
static void test_refusals(void **state)
{
    (void)state;
    const uint8_t truth[] = {0, 1, 3, 1};
    const uint8_t pred[] = {0, 1, 1, 1};
    struct confusion cm, before;
    struct err e;
    metrics_init(&cm, 3);
    assert_int_equal(metrics_add(&cm, truth, pred, 2, &e), ST_OK);
    before = cm;
    err_clear(&e);
    assert_int_equal(metrics_add(&cm, truth, pred, 4, &e), ST_ERANGE);
    assert_non_null(strstr(e.msg, "pixel 2: truth 3"));
    assert_memory_equal(&cm, &before, sizeof cm);
    assert_int_equal(metrics_add(&cm, pred, truth, 4, &e), ST_ERANGE);
    assert_non_null(strstr(e.msg, "prediction 3"));
    assert_memory_equal(&cm, &before, sizeof cm);
    struct confusion big;
    metrics_init(&big, METRICS_MAX_CLASSES + 1);
    assert_int_equal(metrics_add(&big, truth, pred, 4, &e), ST_EINVAL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_docstring_multiclass),
        cmocka_unit_test(test_unlabelled_absent_and_mask),
        cmocka_unit_test(test_empty),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
