"""Cut-score planner: one instrument, one job, a selection ratio (or a raw cut) -> every figure.

All formulas come from vetting.psychometrics:
- cut z for a selection ratio (upper-tail normal quantile), raw = mean + z x SD on the chosen
  norm group, T, stanine and percentile from z (normal model);
- expected success rate: Taylor-Russell (1939), needs the job's base rate;
- mean criterion z of those selected: Naylor-Shine (1965);
- utility of one year's hiring: Brogden-Cronbach-Gleser, with hires = selection ratio x
  applicants per year, the job's tenure and criterion SD (SDy), and the cost per applicant;
- expected impact ratio: normal model of the largest recorded subgroup difference d, with the
  reference group's pass rate equal to the selection ratio;
- SEM in raw points from the norm group's SD and the reliability used (gates.choose_reliability)
  and the band of +/- z_C x SEM around the raw cut;
- local validation: people needed to detect the conservative validity (power .80, alpha .05
  two-sided, Fisher z) and months to gather them at the job's hires per year.

Default norm group: the most suitable one for the job (components.best_norm: the highest
norm-suitability value - age against the policy, scope with local best, size, occupation
match - ties to the larger group, then the newer).
The validity used is the conservative figure for the job's policy (components.validity_detail).
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np

from vetting.appraisal import components as comp
from vetting.appraisal.errors import AppraisalError
from vetting.appraisal.gates import choose_reliability, evaluate_gates
from vetting.appraisal.types import AppraisalWarning, CutPlan, CutScores, LocalValidationPlan, PlanSweep
from vetting.psychometrics import error as pe
from vetting.psychometrics import impact as pi
from vetting.psychometrics import planning as pp
from vetting.psychometrics import scales as ps
from vetting.psychometrics import utility as pu
from vetting.records.domain import Instrument, Job, NormGroup


def _choose_norm(job: Job, instrument: Instrument, norm_key: str | None, as_of: dt.date) -> tuple[NormGroup | None, str]:
    if norm_key is not None:
        norm = instrument.norm(norm_key)
        if norm is None:
            known = ", ".join(n.key for n in instrument.norms) or "none recorded"
            raise AppraisalError(f"norm '{norm_key}': instrument '{instrument.key}' has no such norm group (known: {known})")
        return norm, "chosen by the user"
    norm, value, words = comp.best_norm(job, instrument, job.policy, as_of)
    if norm is None:
        return None, "no norm group is recorded"
    return norm, f"most suitable norm group for this job (suitability {value:.2f}: {words})"


def _check_ratio(sr: float) -> float:
    try:
        sr = float(sr)
    except (TypeError, ValueError):
        raise AppraisalError(f"selection ratio: must be a number, got {sr!r}") from None
    if not (0.0 < sr < 1.0) or math.isnan(sr):
        raise AppraisalError(f"selection ratio: must be between 0 and 1 (exclusive), got {sr:g}")
    return sr


def plan(
    job: Job,
    instrument: Instrument,
    *,
    selection_ratio: float | None = None,
    norm_key: str | None = None,
    raw_cut: float | None = None,
    confidence: float = 0.95,
    power: float = 0.80,
    alpha: float = 0.05,
    as_of: dt.date | None = None,
) -> CutPlan:
    """The full cut-score plan. Give a selection ratio (default hires / applicants) or a raw cut."""
    as_of = as_of or dt.date.today()
    warnings: list[AppraisalWarning] = []
    norm, norm_reason = _choose_norm(job, instrument, norm_key, as_of)

    if raw_cut is not None:
        if selection_ratio is not None:
            raise AppraisalError("give either a selection ratio or a raw cut, not both")
        if norm is None:
            raise AppraisalError(f"raw cut: instrument '{instrument.key}' has no norm group to place a raw cut on")
        z = float(ps.z_from_raw(raw_cut, norm.mean, norm.sd))
        sr = _check_ratio(1.0 - float(ps.percentile_from_z(z)) / 100.0)
    else:
        if selection_ratio is None:
            selection_ratio = job.selection_ratio
            if selection_ratio is None:
                raise AppraisalError(
                    f"selection ratio: job '{job.key}' has no hires and applicants per year; give a selection ratio"
                )
        sr = _check_ratio(selection_ratio)
        z = float(pu.cut_z_for_selection_ratio(sr))

    raw = float(ps.raw_from_z(z, norm.mean, norm.sd)) if norm is not None else None
    if norm is None:
        warnings.append(AppraisalWarning("no_norms", "no norm group: the cut cannot be given in raw points"))
    cut = CutScores(
        z=z,
        raw=raw,
        percentile=float(ps.percentile_from_z(z)),
        t=float(ps.t_from_z(z)),
        stanine=int(ps.stanine_from_z(z)),
    )

    detail = comp.validity_detail(instrument, job.policy)
    r = detail.conservative
    success = mean_z = utility = None
    if r is None:
        warnings.append(AppraisalWarning("no_relevant_validity", "no relevant validity figure: success rate, gain and utility cannot be estimated"))
    else:
        mean_z = float(pu.naylor_shine(r, sr))
        if job.base_rate is None:
            warnings.append(AppraisalWarning("no_base_rate", "the job's base rate is unknown: no expected success rate"))
        else:
            success = float(pu.taylor_russell(r, job.base_rate, sr))
        utility = _utility(job, instrument, r, sr, warnings)

    sub = comp.worst_d(instrument)
    impact_ratio = None
    if sub is None:
        warnings.append(AppraisalWarning("no_subgroup_data", "no subgroup difference recorded: expected impact unknown"))
    else:
        impact_ratio = float(pi.expected_impact(sub.d, sr)[1])
        if impact_ratio < job.policy.impact_ratio_floor:
            warnings.append(AppraisalWarning(
                "impact_below_floor",
                f"expected impact ratio {impact_ratio:.2f} is below the policy floor {job.policy.impact_ratio_floor:.2f}",
            ))

    rel = choose_reliability(instrument)
    failed = [g for g in evaluate_gates(job, instrument, job.policy, rel).values() if not g.passed]
    if failed:
        warnings.insert(0, AppraisalWarning(
            "not_eligible",
            "this instrument fails gate(s) for this job: " + "; ".join(f"{g.name}: {g.reason}" for g in failed),
        ))
    sem_raw = band = None
    if norm is not None and rel.value is not None:
        sem_raw = float(pe.sem(norm.sd, rel.value))
        lo, hi = pe.cut_band(raw, sem_raw, confidence)
        band = (float(lo), float(hi))
    elif rel.value is None:
        warnings.append(AppraisalWarning("no_reliability", "no reliability figure: no SEM band around the cut"))

    return CutPlan(
        selection_ratio=sr,
        validity_used=r,
        cut=cut,
        expected_success_rate=success,
        mean_criterion_z=mean_z,
        utility_per_year=utility,
        impact_ratio=impact_ratio,
        sem_raw=sem_raw,
        cut_band_raw=band,
        job=job.key,
        instrument=instrument.key,
        norm=norm.key if norm is not None else None,
        norm_text=(f"{norm.group} ({norm.year}, n = {norm.n}, {norm.scope}; mean {norm.mean:g}, SD {norm.sd:g})"
                   if norm is not None else ""),
        norm_reason=norm_reason,
        base_rate=job.base_rate,
        confidence=confidence,
        reliability_used=rel,
        d_used=sub.d if sub is not None else None,
        local_validation=_local_validation(job, r, power, alpha),
        warnings=warnings,
    )


def _utility(job: Job, instrument: Instrument, r: float, sr: float, warnings: list[AppraisalWarning] | None) -> float | None:
    need = {
        "applicants per year": job.applicants_per_year,
        "tenure (years)": job.tenure_years,
        "criterion SD (SDy)": job.criterion_sd,
        "cost per applicant": instrument.cost_per_applicant,
    }
    missing = [k for k, v in need.items() if v is None or (k == "applicants per year" and v <= 0)]
    if missing or not job.tenure_years or job.tenure_years <= 0:
        if warnings is not None:
            warnings.append(AppraisalWarning("utility_unknown", "utility needs " + ", ".join(missing or ["a positive tenure"])))
        return None
    applicants = float(job.applicants_per_year)
    hires = sr * applicants
    return float(pu.bcg_utility(r, sr, hires, job.tenure_years, job.criterion_sd, applicants,
                                instrument.cost_per_applicant).utility)


def _local_validation(job: Job, r: float | None, power: float, alpha: float) -> LocalValidationPlan:
    if r is None or r <= 0:
        return LocalValidationPlan(r, power, alpha, None, None,
                                   "no positive validity figure to plan a local validation study around")
    n = int(pp.n_for_validity(r, power, alpha))
    months = float(pp.months_to_gather(n, job.hires_per_year)) if job.hires_per_year else None
    text = f"{n} people with criterion data to detect r = {r:.2f} (power {power:.2f}, alpha {alpha:.2f}, two-sided)"
    text += f"; about {months:.0f} months at {job.hires_per_year} hires a year" if months is not None else "; hires per year unknown"
    return LocalValidationPlan(r, power, alpha, n, months, text)


def sweep(job: Job, instrument: Instrument, ratios, *, norm_key: str | None = None, as_of: dt.date | None = None) -> PlanSweep:
    """Planner figures across selection ratios (vectorised where the formulas are), for charts."""
    as_of = as_of or dt.date.today()
    s = np.asarray(ratios, dtype=float).reshape(-1)
    if s.size == 0 or np.any(~(s > 0)) or np.any(~(s < 1)):
        raise AppraisalError("selection ratios: each must be between 0 and 1 (exclusive)")
    norm, _ = _choose_norm(job, instrument, norm_key, as_of)
    z = np.asarray(pu.cut_z_for_selection_ratio(s), dtype=float)
    raw = np.asarray(ps.raw_from_z(z, norm.mean, norm.sd), dtype=float) if norm is not None else None
    r = comp.validity_detail(instrument, job.policy).conservative
    success = mean_z = utility = None
    if r is not None:
        mean_z = np.asarray(pu.naylor_shine(r, s), dtype=float)
        if job.base_rate is not None:
            success = np.asarray(pu.taylor_russell(r, job.base_rate, s), dtype=float)
        if _utility(job, instrument, r, float(s[0]), None) is not None:
            utility = np.array([_utility(job, instrument, r, float(x), None) for x in s])
    sub = comp.worst_d(instrument)
    impact_ratio = np.asarray(pi.expected_impact(sub.d, s)[1], dtype=float) if sub is not None else None
    return PlanSweep(job.key, instrument.key, norm.key if norm is not None else None, s, z, raw,
                     success, mean_z, utility, impact_ratio)
