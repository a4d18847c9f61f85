"""Benchmark the psychometrics engine (not part of the test run).

    .venv/bin/python bench/bench_psychometrics.py

Times, with time.perf_counter (best of several repeats, so a busy shared machine disturbs the
figure less):
  * 10,000 Taylor-Russell evaluations in one vectorised call (random validity, base rate and
    selection ratio), and the same 10,000 one scalar call at a time;
  * 100,000 score conversions (raw -> z, T, stanine, sten, NCE, percentile) in one call;
  * for scale, the bivariate normal reference in scipy.stats (multivariate_normal.cdf), one call
    per evaluation, on the first 1,000 points only.
Results go to standard output; docs/performance.md ("## Psychometrics") quotes them.
"""

from __future__ import annotations

import platform
import time

import numpy as np

from vetting.psychometrics import standard_scores, taylor_russell


def best_of(func, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        best = min(best, time.perf_counter() - start)
    return best


def main() -> None:
    rng = np.random.default_rng(2026)
    n_tr = 10_000
    r = rng.uniform(-0.9, 0.9, n_tr)
    base = rng.uniform(0.01, 0.99, n_tr)
    sr = rng.uniform(0.01, 1.0, n_tr)
    raw = rng.normal(100, 15, 100_000)

    taylor_russell(r[:10], base[:10], sr[:10])  # warm-up
    t_vec = best_of(lambda: taylor_russell(r, base, sr), 5)
    t_loop = best_of(lambda: [taylor_russell(float(a), float(b), float(c)) for a, b, c in zip(r, base, sr)], 3)
    t_scores = best_of(lambda: standard_scores(raw, 100.0, 15.0), 5)

    from scipy.stats import multivariate_normal, norm

    def scipy_reference() -> None:
        for a, b, c in zip(r[:1000], base[:1000], sr[:1000]):
            multivariate_normal([0, 0], [[1, a], [a, 1]]).cdf([norm.ppf(c), norm.ppf(b)]) / c

    t_ref = best_of(scipy_reference, 1)

    print(f"python {platform.python_version()}, numpy {np.__version__}, {platform.machine()}")
    print(f"Taylor-Russell, 10,000 evaluations, one vectorised call: {t_vec * 1e3:8.1f} ms "
          f"({t_vec / n_tr * 1e6:.2f} us each)")
    print(f"Taylor-Russell, 10,000 evaluations, scalar calls:        {t_loop * 1e3:8.1f} ms "
          f"({t_loop / n_tr * 1e6:.1f} us each)")
    print(f"Score conversions, 100,000 raw scores (6 scales each):   {t_scores * 1e3:8.1f} ms")
    print(f"scipy.stats multivariate_normal reference, 1,000 calls:  {t_ref * 1e3:8.1f} ms "
          f"({t_ref / 1000 * 1e6:.0f} us each)")


if __name__ == "__main__":
    main()
