"""Appraise every instrument for a job, rank the eligible ones, and say how sure the choice is.

Score (0..100) = 100 x sum(normalised weight x component value); a component with no evidence
(None) counts as 0. Only instruments that pass all six gates are ranked (eligible first, by
score; ties by conservative validity, then key). Ineligible instruments keep their score for
information but get no rank and a p_best of 0.

Which instruments pass every gate is found first, by one quick test of the six gates'
conditions (gates.passes_all_gates); only those are appraised at once. The evidence of the
others (score, gates with their reasons, components, warnings) is written when any of it is
first read, for all of them together and with the same calls, so the figures and words are the
same whenever they are read; a ranking read only for its eligible instruments (the top choice,
the draws, the alternatives) writes nothing about the rest.

Robustness (Monte Carlo, vectorised with numpy, deterministic for a given seed):
- weights: each draw takes weights from a Dirichlet distribution centred on the normalised
  policy weights, with concentration CONCENTRATION (alpha_j = 50 x w_j; weights the policy
  sets to 0 stay 0). A weight of .30 then varies with an SD of about .064 (about a fifth of
  its value), enough to show whether the choice hangs on the exact weights. The concentration
  is common practice, no published source.
- validity: each instrument's conservative r is perturbed by a normal draw with the sampling
  error (SE) of the mean r from the bare-bones meta-analysis (psychometrics engine), and mapped
  to 0..1 with the validity mapping. Instruments without a validity figure stay at 0.
p_best is the share of draws in which an instrument scores highest.

The smallest single weight change that changes the top choice is found exactly: with one raw
weight w_k changed by delta (others fixed) every instrument's unnormalised score changes by
delta x its component k, so the change at which another instrument ties the top one is
-(gap) / (difference in component k); the smallest admissible |delta| (weight stays >= 0) over
all weights and instruments is reported.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import threading
import weakref

import numpy as np

from vetting.appraisal import components as comp
from vetting.appraisal.alternatives import find_alternatives
from vetting.appraisal.batch import appraise_all
from vetting.appraisal.errors import JobError
from vetting.appraisal.gates import choose_reliability, evaluate_gates, passes_all_gates
from vetting.appraisal.policy import normalised_weights, validate_policy
from vetting.appraisal.types import (
    COMPONENT_NAMES,
    AppraisalWarning,
    InstrumentAppraisal,
    Ranking,
    Robustness,
    ValidityDetail,
    WeightFlip,
)
from vetting.records.domain import Instrument, Job
from vetting.records.gcpause import gc_pause

CONCENTRATION = 50.0
#: Validity perturbations are normal draws truncated at +/- this many SEs (a probability of
#: about 2e-9 per draw is cut off); the bound lets instruments that can never rank first be
#: left out of the draws exactly.
TRUNCATE_SE = 6.0
_CHUNK = 500  # draws per block, to bound memory (chunk x instruments floats)

ROBUSTNESS_METHOD = (
    f"{{draws}} draws (seed {{seed}}): weights from a Dirichlet distribution around the policy "
    f"weights (concentration {CONCENTRATION:g}), each validity figure perturbed within its "
    "sampling error (SE of the mean r); p_best = share of draws ranked first"
)


def _utc(when: dt.datetime) -> dt.datetime:
    """Aware UTC time; a naive time is taken to be UTC already (the store keeps UTC)."""
    return when.replace(tzinfo=dt.timezone.utc) if when.tzinfo is None else when.astimezone(dt.timezone.utc)


def check_job(job: Job) -> None:
    """Raise JobError / PolicyError when the job cannot be ranked."""
    if not job.requirements:
        raise JobError(f"job '{job.key}': requirements: the job has no required attributes; add at least one before ranking")
    validate_policy(job.policy)


def expected_impact_ratios(job: Job, instruments: list[Instrument]) -> list[float | None]:
    """Expected impact ratio of each instrument's largest d at the job's selection ratio, in one
    vectorised call to the psychometrics engine (None where it cannot be computed)."""
    from vetting.psychometrics import impact as pi

    sr = job.selection_ratio
    worst = [comp.worst_d(i) for i in instruments]
    out: list[float | None] = [None] * len(instruments)
    idx = [k for k, w in enumerate(worst) if w is not None]
    if sr is None or not 0 < sr <= 1 or not idx:
        return out
    ratios = np.atleast_1d(pi.expected_impact(np.array([worst[k].d for k in idx], dtype=float), sr)[1])
    for k, value in zip(idx, ratios):
        out[k] = float(value)
    return out


def appraise(job: Job, instrument: Instrument, weights: dict[str, float], as_of: dt.date,
             impact_ratio=comp._UNSET, *, detail: ValidityDetail | None = None,
             ctx: comp.JobContext | None = None) -> InstrumentAppraisal:
    """Gates, components, warnings and score of one instrument for one job (no rank, no p_best).

    detail: the instrument's validity synthesis if already worked out (rank() does all of them
    in one grouped call); ctx: the job's context, worked out once per ranking.
    """
    score, gates, components, warnings, detail, used_rel, impact_ratio = _appraisal(
        job, instrument, weights, as_of, impact_ratio, detail, ctx)
    return InstrumentAppraisal(
        instrument=instrument.key,
        title=instrument.title,
        eligible=all(g.passed for g in gates.values()),
        rank=None,
        score=score,
        gates=gates,
        components=components,
        warnings=warnings,
        p_best=0.0,
        validity=detail,
        reliability_used=used_rel,
        publisher=instrument.publisher,
        impact_ratio=impact_ratio,
    )


def _made(instrument: Instrument, figures: tuple) -> InstrumentAppraisal:
    """The InstrumentAppraisal appraise() makes from _appraisal()'s figures."""
    score, gates, components, warnings, detail, used_rel, impact_ratio = figures
    return InstrumentAppraisal(
        instrument.key, instrument.title, all(g.passed for g in gates.values()), None, score, gates,
        components, warnings, 0.0, detail, used_rel, instrument.publisher, impact_ratio,
    )


def _appraisal(job: Job, instrument: Instrument, weights: dict[str, float], as_of: dt.date,
               impact_ratio, detail: ValidityDetail | None, ctx: comp.JobContext | None) -> tuple:
    """appraise()'s figures in _DEFERRED_FIELDS order: score, gates, components, warnings,
    validity, reliability used, impact ratio."""
    policy = job.policy
    used_rel = choose_reliability(instrument)
    gates = evaluate_gates(job, instrument, policy, used_rel)
    warnings: list[AppraisalWarning] = []
    for g in gates.values():
        if g.warning:
            warnings.append(AppraisalWarning(f"{g.name}_not_checked", g.warning))

    c_cov, w = comp.coverage(job, instrument, ctx)
    warnings += w
    if detail is None:
        detail = comp.validity_detail(instrument, policy)
    c_val, w = comp.validity_component(detail)
    warnings += w
    c_rel, w = comp.reliability_component(used_rel)
    warnings += w
    c_norm, w = comp.norms_component(job, instrument, policy, as_of, ctx)
    warnings += w
    c_fair, w, impact_ratio = comp.fairness_component(job, instrument, policy, impact_ratio)
    warnings += w
    c_prac, w = comp.practicality_component(job, instrument)
    warnings += w
    components = {c.name: c for c in (c_cov, c_val, c_rel, c_norm, c_fair, c_prac)}
    for name in COMPONENT_NAMES:
        if components[name].value is None and weights.get(name, 0) > 0:
            warnings.append(AppraisalWarning(f"missing_{name}", f"{name}: no evidence, counted as 0 in the score"))
    score = 100.0 * sum(weights[n] * (components[n].value or 0.0) for n in COMPONENT_NAMES)
    return score, gates, components, _dedupe(warnings), detail, used_rel, impact_ratio


def _key(r: InstrumentAppraisal) -> str:
    return r.instrument


#: The fields of an appraisal that are written only when first read, for instruments that fail a
#: gate (the key, title, publisher, eligibility, rank and p_best are known at once).
_DEFERRED_FIELDS = ("score", "gates", "components", "warnings", "validity", "reliability_used", "impact_ratio")
_FIELD_NAMES = tuple(f.name for f in dataclasses.fields(InstrumentAppraisal))


class _Pending:
    """The instruments of one ranking that failed a gate, appraised together on first reading.

    fill() gives each of them exactly what rank() gives the eligible ones (`batch.appraise_all`:
    appraise()'s figures, with the expected impact ratios in one vectorised call and the validity
    syntheses in one grouped call: per-instrument figures that do not depend on which other
    instruments are in the call). The ranking keeps its records until then; like every result
    of the engine it describes the records as they were given, so they should not be changed
    while it is in use. The appraisals are held by weak references: no reference cycle, so a
    ranking dropped unread is freed at once (and an appraisal already dropped is not written).
    """

    __slots__ = ("job", "weights", "as_of", "ctx", "waiting", "lock")

    def __init__(self, job: Job, weights: dict[str, float], as_of: dt.date, ctx: comp.JobContext) -> None:
        self.job, self.weights, self.as_of, self.ctx = job, weights, as_of, ctx
        self.waiting: list[tuple[weakref.ref, Instrument]] | None = []
        self.lock = threading.Lock()

    def add(self, instrument: Instrument) -> "_DeferredAppraisal":
        a = _new_deferred(_DeferredAppraisal)
        a.instrument = instrument.key
        a.title = instrument.title
        a.eligible = False
        a.rank = None
        a.p_best = 0.0
        a.publisher = instrument.publisher
        a._pending = self
        self.waiting.append((_weak(a), instrument))
        return a

    def fill(self) -> None:
        with self.lock:
            waiting = self.waiting
            if waiting is None:
                return
            job, weights, as_of, ctx = self.job, self.weights, self.as_of, self.ctx
            alive = [(target, ins) for ref, ins in waiting if (target := ref()) is not None]
            instruments = [ins for _, ins in alive]
            with gc_pause():
                p_score, p_gates, p_components, p_warnings, p_validity, p_reliability, p_impact = (
                    put for _, put in _SLOTS.values())
                figures = appraise_all(job, instruments, weights, as_of, ctx)
                for (target, _), (score, gates, components, warnings, detail, used, ratio) in zip(alive, figures):
                    p_score(target, score)
                    p_gates(target, gates)
                    p_components(target, components)
                    p_warnings(target, warnings)
                    p_validity(target, detail)
                    p_reliability(target, used)
                    p_impact(target, ratio)
                    target._pending = None
            self.waiting = None
            self.job = self.ctx = None


_new_deferred = object.__new__
_weak = weakref.ref
_SLOTS = {  # in _DEFERRED_FIELDS order (fill() names them one by one)
    name: (InstrumentAppraisal.__dict__[name].__get__, InstrumentAppraisal.__dict__[name].__set__)
    for name in _DEFERRED_FIELDS
}


def _deferred_field(name: str) -> property:
    get, put = _SLOTS[name]

    def read(self):
        try:
            return get(self)
        except AttributeError:
            self._pending.fill()
            return get(self)

    def write(self, value):
        try:
            pending = _PENDING_SLOT(self)
        except AttributeError:  # made by the dataclass's __init__ (dataclasses.replace)
            pending = None
        if pending is not None:  # the figures are written first, so a value set here stays
            pending.fill()
        put(self, value)

    return property(read, write, doc=f"{name} (written on first reading)")


class _DeferredAppraisal(InstrumentAppraisal):
    """An InstrumentAppraisal of an instrument that failed a gate, whose evidence (score, gates,
    components, warnings, validity, reliability, impact ratio) is written on first reading of
    any of them, for all such instruments of the ranking at once. Reads, compares, prints,
    copies and pickles as the InstrumentAppraisal it stands for."""

    __slots__ = ("_pending", "__weakref__")

    def __eq__(self, other):
        if not isinstance(other, InstrumentAppraisal):
            return NotImplemented
        return tuple(getattr(self, n) for n in _FIELD_NAMES) == tuple(getattr(other, n) for n in _FIELD_NAMES)

    __hash__ = None  # as InstrumentAppraisal (a mutable dataclass)

    def __repr__(self) -> str:
        return "InstrumentAppraisal(" + ", ".join(f"{n}={getattr(self, n)!r}" for n in _FIELD_NAMES) + ")"

    def __reduce__(self):
        return InstrumentAppraisal, tuple(getattr(self, n) for n in _FIELD_NAMES)


_PENDING_SLOT = _DeferredAppraisal.__dict__["_pending"].__get__
for _name in _DEFERRED_FIELDS:
    setattr(_DeferredAppraisal, _name, _deferred_field(_name))
del _name


def _dedupe(warnings: list[AppraisalWarning]) -> list[AppraisalWarning]:
    seen, out = set(), []
    for w in warnings:
        if (w.code, w.text) not in seen:
            seen.add((w.code, w.text))
            out.append(w)
    return out


def component_matrix(results: list[InstrumentAppraisal]) -> np.ndarray:
    """Component values (None -> 0), shape (instruments, 6) in COMPONENT_NAMES order."""
    return np.array(
        [[(r.components[n].value or 0.0) for n in COMPONENT_NAMES] for r in results], dtype=float
    ).reshape(len(results), len(COMPONENT_NAMES))


def p_best_draws(
    C: np.ndarray,
    weights: np.ndarray,
    validity_r: np.ndarray,
    validity_se: np.ndarray,
    *,
    draws: int,
    seed: int,
    concentration: float = CONCENTRATION,
) -> np.ndarray:
    """Share of draws in which each row of C scores highest (see the module docstring).

    C: (m, 6) component values; weights: (6,) normalised; validity_r / validity_se: (m,)
    conservative r and its SE (NaN r = no validity figure: the validity value stays C[:, 1]).
    """
    m = C.shape[0]
    if m == 0:
        return np.zeros(0)
    if m == 1:
        return np.ones(1)
    rng = np.random.default_rng(seed)
    vi = COMPONENT_NAMES.index("validity")
    positive = weights > 0
    alpha = concentration * weights[positive]
    has_r = ~np.isnan(validity_r)
    # instruments without a validity figure: r0 = 0 and se = 0 keep their validity value at 0
    r0 = np.where(has_r, validity_r, 0.0)
    se = np.where(has_r, np.nan_to_num(validity_se), 0.0)
    live = _contenders(C, positive, r0, se)
    # single precision for the draws: score differences that matter are far above its
    # resolution (about 1e-7), and it halves the memory traffic
    f32 = np.float32
    Cl = C[live].astype(f32)
    r0l = (r0[live] / comp.VALIDITY_FULL_MARKS).astype(f32)
    sel = (se[live] / comp.VALIDITY_FULL_MARKS).astype(f32)
    ml = Cl.shape[0]
    others = [k for k in np.flatnonzero(positive) if k != vi]
    counts = np.zeros(ml, dtype=np.int64)
    done = 0
    while done < draws:
        b = min(_CHUNK, draws - done)
        W = np.zeros((b, len(weights)), dtype=f32)
        W[:, positive] = rng.dirichlet(alpha, size=b) if positive.sum() > 1 else 1.0
        S = np.clip(rng.standard_normal((b, ml), dtype=f32), -TRUNCATE_SE, TRUNCATE_SE)
        S *= sel
        S += r0l
        np.clip(S, 0.0, 1.0, out=S)  # the validity value of each instrument in each draw
        S *= W[:, vi : vi + 1]
        for k in others:  # a loop of fused updates beats a (b x 6) @ (6 x m) product here
            S += W[:, k : k + 1] * Cl[:, k]
        counts += np.bincount(np.argmax(S, axis=1), minlength=ml)
        done += b
    out = np.zeros(m)
    out[live] = counts / float(draws)
    return out


def _contenders(C: np.ndarray, positive: np.ndarray, r0: np.ndarray, se: np.ndarray, block: int = 256) -> np.ndarray:
    """Indices of the instruments that can rank first in some draw (in their original order).

    Instrument i can never rank first when an instrument j earlier in the order is at least as
    good on every component with a positive weight in every draw (validity bounded by
    +/- TRUNCATE_SE x SE): j's score is then at least i's in every draw, also as computed
    (rounding keeps the order of the parts and sums), and argmax gives ties to the earlier one.
    Dropping such instruments leaves the distribution of the winner unchanged and makes the
    draws cheap. A later j, even strictly better on some component, cannot drop i: a
    difference too small to survive the rounding of the draws leaves the two tied, and the
    tie goes to i. (rank() passes the eligible instruments best score first, so nearly every
    dominated instrument has a dominating one before it.)
    """
    vi = COMPONENT_NAMES.index("validity")
    m = C.shape[0]
    lo = C.copy()
    hi = C.copy()
    lo[:, vi] = np.clip((r0 - TRUNCATE_SE * se) / comp.VALIDITY_FULL_MARKS, 0.0, 1.0)
    hi[:, vi] = np.clip((r0 + TRUNCATE_SE * se) / comp.VALIDITY_FULL_MARKS, 0.0, 1.0)
    lo, hi = lo[:, positive], hi[:, positive]
    keep = np.ones(m, dtype=bool)
    order = np.arange(m)
    for start in range(0, m, block):
        end = min(m, start + block)
        # [i, j] for i in this block and every j before its end: j always >= i, and j earlier
        dominated = np.all(lo[None, :end, :] >= hi[start:end, None, :], axis=2)
        dominated &= order[None, :end] < order[start:end, None]
        keep[start:end] = ~dominated.any(axis=1)
    return np.flatnonzero(keep)


def smallest_flips(C: np.ndarray, raw_weights: np.ndarray, keys: list[str]) -> tuple[WeightFlip | None, dict[str, WeightFlip | None]]:
    """Exact smallest single-weight change that lets another row tie the top row (row 0)."""
    flips: dict[str, WeightFlip | None] = {n: None for n in COMPONENT_NAMES}
    if C.shape[0] < 2:
        return None, flips
    base = C @ raw_weights
    gap = base[0] - base[1:]  # >= 0 when row 0 is the top
    total = raw_weights.sum()
    best: WeightFlip | None = None
    for k, name in enumerate(COMPONENT_NAMES):
        diff = C[0, k] - C[1:, k]
        with np.errstate(divide="ignore", invalid="ignore"):
            delta = np.where(diff != 0, -gap / diff, np.nan)
        # the weight must stay positive (a tie reached only at weight 0 cannot be crossed)
        ok = ~np.isnan(delta) & (raw_weights[k] + delta > 1e-12) & (total + delta > 0)
        if not ok.any():
            continue
        idx = np.flatnonzero(ok)
        j = idx[np.argmin(np.abs(delta[idx]))]
        d = float(delta[j])
        flip = WeightFlip(name, float(raw_weights[k]), float(raw_weights[k] + d), keys[j + 1])
        flips[name] = flip
        if best is None or abs(flip.change) < abs(best.change):
            best = flip
    return best, flips


def rank(
    job: Job,
    instruments: list[Instrument],
    *,
    draws: int = 2000,
    seed: int = 0,
    as_of: dt.date | None = None,
    first_ranked_at: dt.datetime | None = None,
) -> Ranking:
    """Appraise and rank `instruments` for `job` under the job's current policy.

    first_ranked_at: when this job was first ranked (default job.first_ranked_at); used to say
    whether the policy was locked before the first ranking.
    """
    check_job(job)
    if draws < 1:
        raise JobError(f"draws: must be at least 1, got {draws}")
    as_of = as_of or dt.date.today()
    policy = job.policy
    weights = normalised_weights(policy)
    with gc_pause():  # tens of thousands of small acyclic objects (see records.gcpause)
        ctx = comp.JobContext(job)
        # Only the instruments that pass every gate are appraised here: they are ordered, drawn
        # and compared. The others are appraised on first reading (all of them at once, with
        # the same calls: see _Pending), so a ranking that shows only its eligible instruments
        # writes nothing about the rest.
        passes = passes_all_gates(job, policy)
        screened = [passes(ins) for ins in instruments]
        kept = [ins for ins, ok in zip(instruments, screened) if ok]
        appraised = iter([
            _made(ins, figures) for ins, figures in zip(kept, appraise_all(job, kept, weights, as_of, ctx))
        ])
        pending = _Pending(job, weights, as_of, ctx)
        results = [next(appraised) if ok else pending.add(ins) for ins, ok in zip(instruments, screened)]

    def order(r: InstrumentAppraisal):
        v = r.validity.conservative
        return (-r.score, -(v if v is not None else -1.0), r.instrument)

    eligible = sorted((r for r in results if r.eligible), key=order)
    ineligible = sorted((r for r in results if not r.eligible), key=_key)
    for i, r in enumerate(eligible, start=1):
        r.rank = i

    C = component_matrix(eligible)
    w = np.array([weights[n] for n in COMPONENT_NAMES])
    vr = np.array([np.nan if r.validity.conservative is None else r.validity.conservative for r in eligible])
    vse = np.array([np.nan if r.validity.se_mean_r is None else r.validity.se_mean_r for r in eligible])
    p = p_best_draws(C, w, vr, vse, draws=draws, seed=seed)
    for r, pb in zip(eligible, p):
        r.p_best = float(pb)
    raw_w = np.array([float(policy.weights.get(n, 0.0)) for n in COMPONENT_NAMES])
    smallest, flips = smallest_flips(C, raw_w, [r.instrument for r in eligible])
    robustness = Robustness(
        p_best={r.instrument: r.p_best for r in eligible},
        draws=draws,
        seed=seed,
        concentration=CONCENTRATION,
        smallest_flip=smallest,
        flips=flips,
        method=ROBUSTNESS_METHOD.format(draws=draws, seed=seed),
        tied_with_top=[r.instrument for r in eligible[1:] if abs(r.score - eligible[0].score) < 1e-9],
    )
    all_results = eligible + ineligible
    first = first_ranked_at if first_ranked_at is not None else job.first_ranked_at
    locked_before = bool(policy.locked_at is not None and (first is None or _utc(policy.locked_at) <= _utc(first)))
    ranking_warnings = []
    if not policy.locked:
        ranking_warnings.append(AppraisalWarning("policy_not_locked", "the scoring policy was not locked before this ranking"))
    elif not locked_before:
        ranking_warnings.append(AppraisalWarning(
            "policy_locked_after_first_ranking",
            "the policy version used was locked only after the job was first ranked",
        ))
    if not eligible:
        ranking_warnings.append(AppraisalWarning("no_eligible_instrument", "no instrument passes all six gates"))
    return Ranking(
        job=job.key,
        job_title=job.title,
        policy_version=policy.version,
        policy_locked=policy.locked,
        policy_locked_at=policy.locked_at,
        locked_before_first_ranking=locked_before,
        first_ranked_at=first,
        as_of=as_of,
        weights=weights,
        results=all_results,
        robustness=robustness,
        alternatives=find_alternatives(all_results),
        selection_ratio=job.selection_ratio,
        warnings=ranking_warnings,
    )
