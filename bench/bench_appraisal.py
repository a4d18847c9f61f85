"""Benchmark: rank 1,000 instruments against a 30-attribute job with 10,000 robustness draws.

Goal: under 1 second on the 2-core machine; and within 3x of a bare-numpy baseline doing the
same arithmetic for every instrument (`baseline_all`: the six gates, the six components with the
bare-bones meta-analysis and the expected impact ratio, the scores, then the Dirichlet weight
draws, validity perturbation and first-place count over the eligible ones), with the inputs
already laid out in arrays (`lay_out`, not timed); and the same baseline starting from the records,
as rank() does (`lay_out` timed too).

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
    if m == 0:  # nothing eligible: nothing to draw
        return np.zeros(0)
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


def lay_out(job, instruments, as_of=AS_OF) -> dict:
    """Every input of the ranking arithmetic for every instrument, as flat numpy arrays (not
    timed: the baseline starts from arrays already laid out, as a hand-written numpy program
    would). Norm groups and validity studies are flattened with a group index."""
    from vetting.appraisal import components as comp
    from vetting.records.domain import qualification_rank

    policy = job.policy
    req = [(r.attribute, r.importance * (comp.CRITICAL_MULTIPLIER if r.critical else 1.0)) for r in job.requirements]
    credit = np.zeros((len(instruments), len(req)))
    rel, grade, minutes, cost, need = [], [], [], [], []
    v_r, v_n, v_g, n_age, n_scope, n_size, n_g, worst_d = [], [], [], [], [], [], [], []
    for i, ins in enumerate(instruments):
        fits = {}
        for m in ins.measures:
            fits[m.attribute] = max(fits.get(m.attribute, 0.0), comp.FIT_CREDIT.get(m.fit, 0.0))
        credit[i] = [fits.get(a, 0.0) for a, _ in req]
        rel.append(max((r.value for r in ins.reliability), default=np.nan))
        grade.append(np.nan if ins.reading_grade is None else ins.reading_grade)
        minutes.append(ins.minutes)
        cost.append(np.nan if ins.cost_per_applicant is None else ins.cost_per_applicant)
        need.append(0 if ins.user_qualification is None else qualification_rank(ins.user_qualification))
        for s in ins.validity:
            if s.design in comp.CRITERION_DESIGNS and s.n >= 4:
                v_r.append(s.r_signed), v_n.append(s.n), v_g.append(i)
        for nm in ins.norms:
            n_age.append(max(0, as_of.year - nm.year)), n_scope.append(comp.SCOPE_CREDIT.get(nm.scope, 0.0))
            n_size.append(nm.n), n_g.append(i)
        worst_d.append(max((s.d for s in ins.subgroup_differences), default=np.nan))
    f = lambda x: np.array(x, dtype=float)  # noqa: E731
    return {
        "credit": credit, "req_weight": f([w for _, w in req]), "reliability": f(rel), "grade": f(grade),
        "minutes": f(minutes), "cost": f(cost), "need": f(need), "v_r": f(v_r), "v_n": f(v_n),
        "v_g": np.array(v_g, dtype=np.int64), "n_age": f(n_age), "n_scope": f(n_scope), "n_size": f(n_size),
        "n_g": np.array(n_g, dtype=np.int64), "worst_d": f(worst_d), "m": len(instruments),
        "limit_grade": np.nan if job.applicant_reading_grade is None else job.applicant_reading_grade,
        "budget_min": np.inf if job.time_budget_minutes is None else job.time_budget_minutes,
        "budget_cost": np.nan if job.budget_per_applicant is None else job.budget_per_applicant,
        "have": 2 if job.staff_qualification is None else qualification_rank(job.staff_qualification),
        "min_rel": policy.min_reliability, "max_age": policy.max_norm_age_years,
        "sr": job.selection_ratio or 0.5,
    }


def baseline_all(a: dict, weights: np.ndarray, draws: int, seed: int) -> np.ndarray:
    """The whole ranking arithmetic in bare numpy for EVERY instrument: the six gates, the six
    components (coverage, bare-bones meta-analysis and conservative validity, reliability, best
    norm group, expected impact ratio, practicality), the scores, then the robustness draws over
    the eligible ones. Returns p_best of the eligible instruments."""
    from scipy.special import ndtr, ndtri

    m = a["m"]
    covered = a["credit"] @ a["req_weight"]
    coverage = covered / a["req_weight"].sum()
    # bare-bones meta-analysis per instrument (Hunter & Schmidt), conservative figure
    g, r, n = a["v_g"], a["v_r"], a["v_n"]
    k = np.bincount(g, minlength=m).astype(float)
    tot = np.bincount(g, weights=n, minlength=m)
    with np.errstate(divide="ignore", invalid="ignore"):
        mr = np.bincount(g, weights=n * r, minlength=m) / tot
        vo = np.bincount(g, weights=n * (r - mr[g]) ** 2, minlength=m) / tot
        ve = (1 - mr**2) ** 2 / (tot / k - 1)
        sd = np.sqrt(np.maximum(0, vo - ve))
        se = np.where(k == 1, np.sqrt(ve), np.sqrt(vo / k))
        lo = np.where(k == 1, np.tanh(np.arctanh(mr) - 1.96 / np.sqrt(tot - 3)),
                      np.minimum(mr - 1.2816 * sd, mr - 1.96 * se))
    cons = np.maximum(0, lo)
    validity = np.clip(cons / 0.5, 0, 1)
    reliability = np.clip((a["reliability"] - 0.70) / 0.25, 0, 1)
    nv = np.where(a["n_age"] > a["max_age"], 0.0,
                  (np.clip(1 - a["n_age"] / a["max_age"], 0, 1) + a["n_scope"] + np.minimum(1, np.sqrt(a["n_size"] / 1000)) + 0.5) / 4)
    norms = np.full(m, -1.0)
    np.maximum.at(norms, a["n_g"], nv)
    zc = ndtri(a["sr"])
    fairness = np.clip(ndtr(zc - a["worst_d"]) / a["sr"], 0, 1)
    practical = (np.where(a["minutes"] > a["budget_min"], 0, 1 - 0.5 * a["minutes"] / a["budget_min"])
                 + np.where(a["cost"] > a["budget_cost"], 0, 1 - 0.5 * a["cost"] / a["budget_cost"])) / 2
    C = np.nan_to_num(np.column_stack([coverage, validity, reliability, np.maximum(norms, 0), fairness, practical]))
    scores = 100 * C @ weights
    eligible = ((covered > 0) & (k > 0) & (a["reliability"] >= a["min_rel"])
                & ~(a["grade"] > a["limit_grade"]) & (a["minutes"] <= a["budget_min"]) & (a["need"] <= a["have"]))
    order = np.flatnonzero(eligible)[np.argsort(-scores[eligible], kind="stable")]
    return baseline(C[order], cons[order], np.nan_to_num(se[order]), weights, draws, seed)


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

    from vetting.appraisal.types import COMPONENT_NAMES

    w = np.array([result.weights[n] for n in COMPONENT_NAMES])
    laid = lay_out(job, instruments)
    btimes = []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        baseline_all(laid, w, args.draws, 0)
        btimes.append(time.perf_counter() - t0)
    # the same baseline starting from the records, as rank() does: laying the inputs out timed too
    rtimes = []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        baseline_all(lay_out(job, instruments), w, args.draws, 0)
        rtimes.append(time.perf_counter() - t0)

    med, bmed, rmed = statistics.median(times), statistics.median(btimes), statistics.median(rtimes)
    print(f"instruments: {len(instruments)} ({len(eligible)} eligible), requirements: {len(job.requirements)}, draws: {args.draws}")
    print(f"rank(), median of {args.repeat}: {med:.3f} s (min {min(times):.3f}, max {max(times):.3f})")
    print(f"  of which appraisal without draws: {appraisal_only:.3f} s")
    print(f"bare-numpy baseline on arrays already laid out, median: {bmed:.3f} s")
    print(f"bare-numpy baseline from the records (laying out included), median: {rmed:.3f} s")
    print(f"ratio rank / baseline: {med / bmed:.1f}x on arrays, {med / rmed:.1f}x from the records"
          "  (goal: rank < 1 s, ratio <= 3x)")
    print(f"load average while running: {open('/proc/loadavg').read().split()[:3]}")


if __name__ == "__main__":
    main()
