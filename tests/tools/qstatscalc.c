/* qstatscalc: exposes core/qstats to the reference tests.
 *
 *   qstatscalc cp      stdin: lines "k n alpha"  -> stdout: "lo hi" per line
 *   qstatscalc beta    stdin: lines "a b x"      -> stdout: "I_x(a,b) inverse(a,b,x)"
 *   qstatscalc kappa   stdin: "K N" then N labels of rater A, then N of rater B
 *                      -> stdout: kappa ("nan" when undefined)
 *   qstatscalc pchart  stdin: lines "d n"        -> stdout: "pbar" then "p lcl ucl outside"
 *
 * Numbers are printed with 17 significant digits.  Malformed input exits 2;
 * a qstats error prints its message on stderr and exits 3. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/qstats.h"

static int fail(const struct err *e)
{
    fprintf(stderr, "%s\n", e->msg);
    return 3;
}

static int run_cp(struct err *e)
{
    unsigned long long k, n;
    double alpha, lo, hi;
    while (scanf("%llu %llu %lf", &k, &n, &alpha) == 3) {
        if (qstats_clopper_pearson(k, n, alpha, &lo, &hi, e) != ST_OK)
            return fail(e);
        printf("%.17g %.17g\n", lo, hi);
    }
    return feof(stdin) ? 0 : 2;
}

static int run_beta(void)
{
    double a, b, x;
    while (scanf("%lf %lf %lf", &a, &b, &x) == 3)
        printf("%.17g %.17g\n", qstats_beta_inc(a, b, x), qstats_beta_inc_inv(a, b, x));
    return feof(stdin) ? 0 : 2;
}

static int run_kappa(struct err *e)
{
    int k, n;
    if (scanf("%d %d", &k, &n) != 2 || n < 0 || n > 10000000)
        return 2;
    int *lab = malloc(2 * (size_t)n * sizeof *lab + 1);
    if (!lab)
        return 2;
    for (int i = 0; i < 2 * n; i++)
        if (scanf("%d", &lab[i]) != 1) {
            free(lab);
            return 2;
        }
    double kappa;
    int rc = qstats_kappa_labels(lab, lab + n, (size_t)n, k, &kappa, e);
    free(lab);
    if (rc != ST_OK)
        return fail(e);
    printf("%.17g\n", kappa);
    return 0;
}

static int run_pchart(struct err *e)
{
    uint64_t d[4096], n[4096];
    unsigned long long dv, nv;
    size_t m = 0;
    while (m < 4096 && scanf("%llu %llu", &dv, &nv) == 2) {
        d[m] = dv;
        n[m++] = nv;
    }
    struct qstats_ppoint pt[4096];
    double pbar;
    if (qstats_pchart(d, n, m, &pbar, pt, e) != ST_OK)
        return fail(e);
    printf("%.17g\n", pbar);
    for (size_t i = 0; i < m; i++)
        printf("%.17g %.17g %.17g %d\n", pt[i].p, pt[i].lcl, pt[i].ucl, pt[i].outside);
    return 0;
}

int main(int argc, char **argv)
{
    struct err e;
    err_clear(&e);
    if (argc != 2) {
        fprintf(stderr, "usage: qstatscalc cp|beta|kappa|pchart < input\n");
        return 2;
    }
    if (!strcmp(argv[1], "cp"))
        return run_cp(&e);
    if (!strcmp(argv[1], "beta"))
        return run_beta();
    if (!strcmp(argv[1], "kappa"))
        return run_kappa(&e);
    if (!strcmp(argv[1], "pchart"))
        return run_pchart(&e);
    fprintf(stderr, "qstatscalc: unknown mode '%s'\n", argv[1]);
    return 2;
}
