"""Benchmark: rank 1,000 instruments against a 30-attribute job with 10,000 robustness draws.

Goal (issue 4): under 1 second on the 2-core machine; and within 3x of a bare-numpy baseline
doing the same arithmetic (component values for every instrument, then the Dirichlet weight
draws, validity perturbation, scores and the first-place count), with the component inputs
already laid out in arrays.

Run:  .venv/bin/python bench/bench_appraisal.py [--instruments 1000] [--draws 10000] [--repeat 5]
Not part of the test run; figures go in docs/performance.md (## Appraisal).
"""

from __future__ import annotations

import argparse
import datetime as dt
import random
import statistics
import time

import numpy as np

from vetting.appraisal.ranking import CONCENTRATION, rank
from vetting.records.domain import Policy, Requirement
from vetting.records.synthetic import generate_catalogue

AS_OF = dt.date(2026, 11, 1)


def build(n_instruments: int, n_requirements: int = 30, seed: int = 1):
    cat = generate_catalogue(n_instruments, n_jobs=1, n_attributes=max(60, n_requirements), seed=seed)
    rng = random.Random(seed)
    job = cat.jobs[0]
    keys = [a.key for a in cat.attributes]
    job.requirements = [Requirement(a, rng.randint(1, 5), rng.random() < 0.2) for a in rng.sample(keys, n_requirements)]
    # generous limits, so that most instruments are eligible and all take part in the draws
    job.applicant_reading_grade = 20.0
    job.time_budget_minutes = 1000.0
    job.staff_qualification = "licensed"
    job.policy = Policy(min_reliability=0.5)
    return job, cat.instruments


def baseline(C: np.ndarray, validity_r: np.ndarray, validity_se: np.ndarray, weights: np.ndarray,
             draws: int, seed: int) -> np.ndarray:
    """The same robustness arithmetic in bare numpy: all draws at once, no pruning, single
    precision, one fused update per component (the fastest plain form found)."""
    rng = np.random.default_rng(seed)
    m = C.shape[0]
    W = rng.dirichlet(CONCENTRATION * weights, size=draws).astype(np.float32)
    S = np.clip(rng.standard_normal((draws, m), dtype=np.float32), -6, 6)
    S *= (validity_se / 0.5).astype(np.float32)
    S += (validity_r / 0.5).astype(np.float32)
    np.clip(S, 0, 1, out=S)
    S *= W[:, 1:2]
    C32 = C.astype(np.float32)
    for k in (0, 2, 3, 4, 5):
        S += W[:, k : k + 1] * C32[:, k]
    return np.bincount(S.argmax(axis=1), minlength=m) / draws


def baseline_components(raw: dict[str, np.ndarray], weights: np.ndarray) -> np.ndarray:
    """Component values from pre-extracted raw arrays (mappings of docs/methods.md, Part 2)."""
    cov = raw["covered"] / raw["total"]
    val = np.clip(raw["validity"] / 0.5, 0, 1)
    rel = np.clip((raw["reliability"] - 0.70) / 0.25, 0, 1)
    norms = raw["norms"]
    fair = np.clip(raw["impact"], 0, 1)
    prac = (np.clip(1 - 0.5 * raw["minutes_ratio"], 0, 1) + np.clip(1 - 0.5 * raw["cost_ratio"], 0, 1)) / 2
    C = np.column_stack([cov, val, rel, norms, fair, prac])
    _ = 100 * C @ weights  # the scores
    return C


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--instruments", type=int, default=1000)
    ap.add_argument("--draws", type=int, default=10000)
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    job, instruments = build(args.instruments)

    times = []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        result = rank(job, instruments, draws=args.draws, seed=0, as_of=AS_OF)
        times.append(time.perf_counter() - t0)
    eligible = result.eligible
    # phase split: appraisal only (draws=1) vs the whole
    t0 = time.perf_counter()
    rank(job, instruments, draws=1, seed=0, as_of=AS_OF)
    appraisal_only = time.perf_counter() - t0

    C = np.array([[a.components[n].value or 0.0 for n in ("coverage", "validity", "reliability", "norms", "fairness", "practicality")]
                  for a in eligible])
    vr = np.array([a.validity.conservative or 0.0 for a in eligible])
    vse = np.array([a.validity.se_mean_r or 0.0 for a in eligible])
    w = np.array(list(result.weights.values()))
    raw = {
        "covered": C[:, 0] * 10.0, "total": np.full(len(eligible), 10.0), "validity": vr,
        "reliability": 0.70 + 0.25 * C[:, 2], "norms": C[:, 3], "impact": C[:, 4],
        "minutes_ratio": np.full(len(eligible), 0.4), "cost_ratio": np.full(len(eligible), 0.4),
    }
    btimes = []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        Cb = baseline_components(raw, w)
        baseline(Cb, vr, vse, w, args.draws, 0)
        btimes.append(time.perf_counter() - t0)

    med, bmed = statistics.median(times), statistics.median(btimes)
    print(f"instruments: {len(instruments)} ({len(eligible)} eligible), requirements: {len(job.requirements)}, draws: {args.draws}")
    print(f"rank(), median of {args.repeat}: {med:.3f} s (min {min(times):.3f}, max {max(times):.3f})")
    print(f"  of which appraisal without draws: {appraisal_only:.3f} s")
    print(f"bare-numpy baseline, median: {bmed:.3f} s")
    print(f"ratio rank / baseline: {med / bmed:.1f}x  (goal: rank < 1 s, ratio <= 3x)")
    print(f"load average while running: {open('/proc/loadavg').read().split()[:3]}")


if __name__ == "__main__":
    main()
