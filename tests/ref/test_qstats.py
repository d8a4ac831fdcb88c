#!/usr/bin/python3
"""core/qstats against SciPy and scikit-learn (references: scipy 1.10,
scikit-learn 1.2.1, Debian 12).

- Clopper-Pearson: scipy.stats.binomtest(k, n).proportion_ci(method="exact",
  confidence_level=1-alpha) for every k of n = 1..30 at alpha 0.05 and of
  n = 1..10 at 0.01 and 0.10, and selected k of n = 100 to 100 000 at all
  three, including 4/20, 0/30 and k = n.
- The regularized incomplete beta function and its inverse:
  scipy.special.betainc and betaincinv.
- Cohen's kappa: sklearn.metrics.cohen_kappa_score on seeded random label
  pairs with 2, 3 and 5 categories, raters that agree often and seldom.

Tolerances: 1e-11 absolute on interval ends and on I_x (both sides evaluate
the same function in double precision by different methods; the worst
measured difference is about 5e-13 on the intervals and 1e-12 relative on
the inverse); 1e-12 on kappa (a ratio of small integers)."""
import subprocess
import sys
import warnings

import numpy as np
from scipy.special import betainc, betaincinv
from scipy.stats import binomtest
from sklearn.metrics import cohen_kappa_score

from refcheck import check, status, tool

TOOL = tool("qstatscalc")
TOL_CI = 1e-11
TOL_KAPPA = 1e-12


def run(mode, text):
    r = subprocess.run([TOOL, mode], input=text, capture_output=True, text=True)
    if r.returncode:
        raise RuntimeError(f"qstatscalc {mode} exited {r.returncode}: {r.stderr.strip()}")
    return [[float(v) for v in line.split()] for line in r.stdout.splitlines()]


def clopper_pearson():
    cases = []
    # every k of small n (binomtest is slow, so fewer at the other levels)
    for alpha, top in ((0.05, 30), (0.01, 10), (0.10, 10)):
        for n in range(1, top + 1):
            cases += [(k, n, alpha) for k in range(n + 1)]
    for alpha in (0.05, 0.01, 0.10):
        for n in (100, 1000, 10000, 100000):
            cases += [(k, n, alpha) for k in (0, 1, 2, 7, n // 3, n // 2, n - 1, n)]
    got = run("cp", "".join(f"{k} {n} {a}\n" for k, n, a in cases))
    check("cp: one line per case", len(got) == len(cases), f"{len(got)} vs {len(cases)}")
    worst, where = 0.0, None
    for (k, n, a), (lo, hi) in zip(cases, got):
        ci = binomtest(k, n).proportion_ci(confidence_level=1 - a, method="exact")
        d = max(abs(lo - ci.low), abs(hi - ci.high))
        if d > worst:
            worst, where = d, (k, n, a, lo, hi, ci.low, ci.high)
    check(f"cp: {len(cases)} intervals == scipy binomtest exact within {TOL_CI} "
          f"(worst {worst:.2e})", worst <= TOL_CI, str(where))
    # The cases the issue names, printed one by one.
    named = {(4, 20): None, (0, 30): None, (30, 30): None}
    for (k, n, a), (lo, hi) in zip(cases, got):
        if (k, n) in named and a == 0.05:
            named[(k, n)] = (lo, hi)
    for (k, n), (lo, hi) in named.items():
        ci = binomtest(k, n).proportion_ci(method="exact")
        check(f"cp: {k}/{n} = [{lo:.6f}, {hi:.6f}] == scipy [{ci.low:.6f}, {ci.high:.6f}]",
              abs(lo - ci.low) <= TOL_CI and abs(hi - ci.high) <= TOL_CI)
    # Exact edges: k = 0 has lower 0, k = n upper 1, with no rounding.
    edges = [(lo, hi, k, n) for (k, n, a), (lo, hi) in zip(cases, got)]
    check("cp: k = 0 gives lower exactly 0", all(lo == 0.0 for lo, hi, k, n in edges if k == 0))
    check("cp: k = n gives upper exactly 1", all(hi == 1.0 for lo, hi, k, n in edges if k == n))


def beta():
    rng = np.random.default_rng(20261201)
    cases = [(a, b, x) for a, b, x in zip(np.exp(rng.uniform(-2, 7, 300)),
                                          np.exp(rng.uniform(-2, 7, 300)),
                                          rng.uniform(0, 1, 300))]
    cases += [(0.5, 0.5, 0.5), (1.0, 1.0, 0.3), (5.0, 3.0, 0.0), (5.0, 3.0, 1.0)]
    got = run("beta", "".join(f"{a!r} {b!r} {x!r}\n" for a, b, x in cases))
    di = max(abs(g[0] - betainc(a, b, x)) for (a, b, x), g in zip(cases, got))
    check(f"betainc: {len(cases)} values == scipy.special.betainc within {TOL_CI} "
          f"(worst {di:.2e})", di <= TOL_CI)
    # The inverse is compared where the function is not flat to double
    # precision (otherwise many x give the same I and neither side is wrong).
    dv, n = 0.0, 0
    for (a, b, p), g in zip(cases, got):
        ref = betaincinv(a, b, p)
        if 1e-300 < ref < 1 - 1e-15:
            dv = max(dv, abs(g[1] - ref) / max(ref, 1e-3))
            n += 1
    check(f"betaincinv: {n} values == scipy.special.betaincinv within {TOL_CI} relative "
          f"(worst {dv:.2e})", dv <= TOL_CI)


def kappa():
    rng = np.random.default_rng(4)
    for k in (2, 3, 5):
        for agree in (0.9, 0.5, 0.1):
            n = int(rng.integers(30, 400))
            a = rng.integers(0, k, n)
            b = np.where(rng.random(n) < agree, a, rng.integers(0, k, n))
            text = f"{k} {n}\n" + " ".join(map(str, a)) + "\n" + " ".join(map(str, b)) + "\n"
            got = run("kappa", text)[0][0]
            ref = cohen_kappa_score(a, b)
            check(f"kappa: K={k}, n={n}, agreement {agree}: {got:.6f} == sklearn "
                  f"cohen_kappa_score {ref:.6f}", abs(got - ref) <= TOL_KAPPA)
    # Both raters always say the same single category: expected agreement is
    # 1 and sklearn gives nan (0/0); so must we.
    got = run("kappa", "2 4\n1 1 1 1\n1 1 1 1\n")[0][0]
    with np.errstate(all="ignore"):
        ref = cohen_kappa_score([1, 1, 1, 1], [1, 1, 1, 1])
    check("kappa: one category only is undefined (nan) like sklearn",
          np.isnan(got) and np.isnan(ref), f"{got} vs {ref}")
    r = subprocess.run([TOOL, "kappa"], input="2 2\n0 1\n0 2\n", capture_output=True, text=True)
    check("kappa: a label outside 0..K-1 is refused", r.returncode == 3 and "pair 1" in r.stderr,
          r.stderr)


def main():
    # binomtest's pmf warns about log(0) at k = 0 or k = n; the interval is unaffected
    warnings.simplefilter("ignore", RuntimeWarning)
    clopper_pearson()
    beta()
    kappa()
    return status()


if __name__ == "__main__":
    sys.exit(main())
