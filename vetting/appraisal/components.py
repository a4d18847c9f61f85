"""The six scored components, each mapped onto 0..1 with the mapping returned as text.

Every mapping is documented in docs/methods.md (Part 2 - Appraisal scoring). The cut-off
figures in the mappings are common practice, no published source, unless a source is named.

Missing evidence gives a component value of None and a warning. In the weighted score a None
component counts as 0: missing evidence is never a bonus, and an instrument is never ranked
above an otherwise equal one because something was left out.
"""

from __future__ import annotations

import datetime as dt
import functools
import math
import re

import numpy as np

from vetting.appraisal.types import AppraisalWarning, Component, ReliabilityUsed, StudyUse, ValidityDetail
from vetting.records.domain import Instrument, Job, NormGroup, Policy

# --- documented constants (common practice, no published source unless said) ---------------

#: Coverage: credit for measuring a required attribute as a primary / secondary target.
FIT_CREDIT = {"primary": 1.0, "secondary": 0.5}
#: Coverage: a critical requirement counts this many times its importance.
CRITICAL_MULTIPLIER = 2.0
#: Validity: a conservative r at or above this maps to 1. Operational validities of the best
#: single predictors are about .5 (Schmidt & Hunter, 1998, Psychological Bulletin 124, table 1
#: - value from memory).
VALIDITY_FULL_MARKS = 0.50
#: Reliability: linear from RELIABILITY_ZERO (0) to RELIABILITY_FULL (1). .70 is the usual
#: floor for research use and .90+ the usual aim for decisions about individuals (Nunnally,
#: 1978, Psychometric Theory, 2nd ed., pp. 245-246 - value from memory).
RELIABILITY_ZERO = 0.70
RELIABILITY_FULL = 0.95
#: Norms: scope credit (local best).
SCOPE_CREDIT = {"local": 1.0, "regional": 0.8, "national": 0.6, "international": 0.4}
#: Norms: a group of this size or more gets full size credit; below, credit is sqrt(n / this)
#: because the precision of a norm's mean and percentiles grows with the square root of n.
NORM_FULL_SIZE = 1000
#: Norms: occupation credit.
OCCUPATION_CREDIT = {"match": 1.0, "related": 0.5, "general": 0.5, "other": 0.25}
#: Practicality: a part (time or cost) scores 1 - 0.5 x (used / budget) within budget, 0 over.
PRACTICALITY_SLOPE = 0.5
#: Validity: a study with fewer people than this is "small" (its r has an SE of about .1 or more
#: and its power to detect r = .20 at alpha .05 is about one half or less).
SMALL_STUDY_N = 100
#: Study designs that give criterion-related validity coefficients.
CRITERION_DESIGNS = frozenset({"predictive", "concurrent", "meta-analytic"})


def _clip01(x: float) -> float:
    return min(1.0, max(0.0, x))


def _w(code: str, text: str) -> AppraisalWarning:
    return AppraisalWarning(code, text)


class JobContext:
    """What depends only on the job and its policy, worked out once for a whole ranking instead of
    once per instrument (the requirement weights and their words, the relevant criteria and job
    families, the words of the job title). Every component gives the same result with or
    without one; passing one only saves the repeated work."""

    __slots__ = ("job", "policy", "requirements", "positions", "zero_words", "total_weight", "critical",
                 "criteria", "families", "targets")

    def __init__(self, job: Job, policy: Policy | None = None) -> None:
        self.job = job
        self.policy = policy = policy if policy is not None else job.policy
        #: (attribute, weight, critical, words by credit) in the job's order
        self.requirements = [
            (
                req.attribute,
                weight,
                req.critical,
                {c: f"{req.attribute} {c:g}x{weight:g}" for c in (0.0, *FIT_CREDIT.values())},
            )
            for req in job.requirements
            for weight in (req.importance * (CRITICAL_MULTIPLIER if req.critical else 1.0),)
        ]
        #: where each attribute sits among the requirements; the words of a 0 credit; the sum of
        #: the weights (added in the job's order); the critical attributes in the job's order
        self.positions: dict[str, list[int]] = {}
        total = 0.0
        for i, (attribute, weight, _, _) in enumerate(self.requirements):
            self.positions.setdefault(attribute, []).append(i)
            total += weight
        self.total_weight = total
        self.zero_words = [words[0.0] for _, _, _, words in self.requirements]
        self.critical = [attribute for attribute, _, critical, _ in self.requirements if critical]
        #: lower-cased relevant criteria / job families (None: every one counts)
        self.criteria = _lowered(policy.relevant_criteria)
        self.families = _lowered(policy.relevant_job_families)
        #: the significant words of the job title and of each relevant job family
        self.targets = [_occupation_tokens(job.title)] + [_occupation_tokens(f) for f in policy.relevant_job_families]


def _lowered(allowed: list[str]) -> frozenset[str] | None:
    return frozenset(a.strip().lower() for a in allowed) if allowed else None


def _context(job: Job, policy: Policy | None, ctx: JobContext | None) -> JobContext:
    if ctx is not None and ctx.job is job and (policy is None or ctx.policy is policy):
        return ctx
    return JobContext(job, policy)


# --- coverage ---------------------------------------------------------------------------------

COVERAGE_MAPPING = (
    "coverage = sum(weight x credit) / sum(weight) over the job's required attributes; "
    "weight = importance (x2 when critical); credit = 1 when measured as a primary target, "
    "0.5 as a secondary target, 0 when not measured"
)


def coverage(job: Job, instrument: Instrument, ctx: JobContext | None = None) -> tuple[Component, list[AppraisalWarning]]:
    ctx = _context(job, None, ctx)
    fits: dict[str, float] = {}
    for m in instrument.measures:
        credit = FIT_CREDIT.get(m.fit, 0.0)
        if credit > fits.get(m.attribute, 0.0):
            fits[m.attribute] = credit
    # Only the required attributes the instrument measures add to the sum; adding them in the
    # job's order gives the same sum, to the bit, as adding every requirement's weight x credit.
    hits = sorted((i, credit) for attribute, credit in fits.items() for i in ctx.positions.get(attribute, ()))
    got = 0.0
    parts = list(ctx.zero_words)
    requirements = ctx.requirements
    for i, credit in hits:
        attribute, weight, _, words = requirements[i]
        got += weight * credit
        parts[i] = words.get(credit) or f"{attribute} {credit:g}x{weight:g}"
    total = ctx.total_weight
    warnings = []
    missing_critical = [a for a in ctx.critical if not fits.get(a)]
    if missing_critical:
        names = ", ".join(f"'{a}'" for a in missing_critical)
        warnings.append(_w("critical_attribute_not_measured", f"critical attribute(s) not measured: {names}"))
    value = got / total if total > 0 else 0.0
    raw_text = f"{got:g} of {total:g} weighted points ({'; '.join(parts)})"
    return Component("coverage", value, value, raw_text, COVERAGE_MAPPING), warnings


# --- validity ---------------------------------------------------------------------------------

VALIDITY_MAPPING = (
    f"validity = conservative r / {VALIDITY_FULL_MARKS:.2f}, limited to 0..1 "
    "(r <= 0 gives 0; r >= .50 gives 1)"
)


def _matches(value: str | None, allowed: frozenset[str] | None) -> bool:
    if allowed is None:
        return True
    if value is None:
        return False
    return value.strip().lower() in allowed


def select_studies(instrument: Instrument, policy: Policy, ctx: JobContext | None = None) -> tuple[list[StudyUse], list[StudyUse]]:
    """Split the instrument's validity studies into those used for this policy and those not."""
    if ctx is not None and ctx.policy is policy:
        criteria, families = ctx.criteria, ctx.families
    else:
        criteria, families = _lowered(policy.relevant_criteria), _lowered(policy.relevant_job_families)
    used, excluded = [], []
    for i, s in enumerate(instrument.validity):
        reason = ""
        if s.design not in CRITERION_DESIGNS:
            reason = f"{s.design} study: not a criterion-related validity coefficient"
        elif not _matches(s.criterion, criteria):
            reason = f"criterion '{s.criterion}' is not marked relevant for this job"
        elif families is not None and not _matches(s.job_family, families):
            reason = (
                "job family not stated" if s.job_family is None
                else f"job family '{s.job_family}' is not marked relevant for this job"
            )
        elif s.n < 4:
            reason = f"sample too small to use (N = {s.n})"
        use = StudyUse(
            index=i, criterion=s.criterion, r=s.r, r_signed=s.r_signed, n=s.n, job_family=s.job_family,
            design=s.design, source=s.source, used=not reason,
            reason=reason or ("used (sign reversed: lower criterion is better)" if s.lower_is_better else "used"),
        )
        (excluded if reason else used).append(use)
    return used, excluded


def validity_detail(instrument: Instrument, policy: Policy) -> ValidityDetail:
    """Synthesis of the relevant studies with the psychometrics engine's conservative rule."""
    return validity_details([instrument], policy)[0]


def synthesise(used_by: list[list[StudyUse]]):
    """One grouped psychometrics call over every non-empty list of studies used, in order
    (GroupedValidity), or None when no list has a study. Shared by the ranking's validity
    details and the catalogue table's summaries, so their figures are the same."""
    from vetting.psychometrics import validity as pv

    sizes = [len(used) for used in used_by if used]
    if not sizes:
        return None
    rs = np.array([u.r_signed for used in used_by for u in used], dtype=float)
    ns = np.array([u.n for used in used_by for u in used], dtype=float)
    return pv.grouped_validity(rs, ns, sizes)


def validity_details(instruments: list[Instrument], policy: Policy, ctx: JobContext | None = None) -> list[ValidityDetail]:
    """`validity_detail` of many instruments, with one grouped call to the psychometrics engine
    (the same formulas, applied to every instrument's studies at once)."""
    from vetting.psychometrics import validity as pv

    details = []
    for instrument in instruments:
        used, excluded = select_studies(instrument, policy, ctx)
        rule = "" if used else "no relevant criterion-related study"
        details.append(ValidityDetail(rule=rule, studies_used=used, studies_excluded=excluded))
    grouped = synthesise([d.studies_used for d in details])
    synthesised = [d for d in details if d.studies_used]
    if grouped is None:
        return details
    # For a single study the conservative figure carries no meta-analysis; the bare-bones
    # summary of one study still gives its r and sampling error for display.
    rule = pv.CONSERVATIVE_RULE + " (basis: "
    for detail, meta, value, basis, floored in zip(
        synthesised, grouped.metas(), grouped.conservative.tolist(), grouped.basis.tolist(), grouped.floored.tolist()
    ):
        detail.meta = meta
        detail.conservative = value
        detail.rule = rule + basis + ("; floored at 0)" if floored else ")")
        detail.se_mean_r = meta.se_mean_r
    return details


def validity_component(detail: ValidityDetail) -> tuple[Component, list[AppraisalWarning]]:
    warnings = []
    if detail.conservative is None:
        n_ex = len(detail.studies_excluded)
        text = "no relevant criterion-related validity study" + (f" ({n_ex} excluded)" if n_ex else "")
        warnings.append(_w("no_relevant_validity", text))
        return Component("validity", None, None, text, VALIDITY_MAPPING), warnings
    r = detail.conservative
    value = _clip01(r / VALIDITY_FULL_MARKS)
    mean_r = getattr(detail.meta, "mean_r", None)
    raw_text = f"conservative r = {r:.3f} (k = {detail.k}, N = {detail.total_n}"
    raw_text += f", mean r = {float(mean_r):.3f})" if mean_r is not None else ")"
    if all(u.n < SMALL_STUDY_N for u in detail.studies_used):
        warnings.append(_w(
            "validity_small_samples",
            f"every relevant validity study has N < {SMALL_STUDY_N} (total N = {detail.total_n})",
        ))
    return Component("validity", value, r, raw_text, VALIDITY_MAPPING), warnings


# --- reliability ------------------------------------------------------------------------------

RELIABILITY_MAPPING = (
    f"reliability = (r - {RELIABILITY_ZERO:.2f}) / ({RELIABILITY_FULL:.2f} - {RELIABILITY_ZERO:.2f}), "
    "limited to 0..1"
)


def reliability_component(used: ReliabilityUsed) -> tuple[Component, list[AppraisalWarning]]:
    if used.value is None:
        return (
            Component("reliability", None, None, "no reliability figure recorded", RELIABILITY_MAPPING),
            [_w("no_reliability", "no reliability figure is recorded")],
        )
    value = _clip01((used.value - RELIABILITY_ZERO) / (RELIABILITY_FULL - RELIABILITY_ZERO))
    raw_text = f"{used.type} r = {used.value:.2f}" + (f" (N = {used.n})" if used.n else "")
    warnings = []
    if used.type not in ("retest", "alternate"):
        warnings.append(_w("no_retest_reliability", "no retest or alternate-form reliability is recorded"))
    return Component("reliability", value, used.value, raw_text, RELIABILITY_MAPPING), warnings


# --- norms ------------------------------------------------------------------------------------

NORMS_MAPPING = (
    "each norm group: 0 when older than the policy allows; otherwise the mean of four credits - "
    "age 1 - age/max age; scope local 1, regional .8, national .6, international .4; "
    f"size min(1, sqrt(n/{NORM_FULL_SIZE})); occupation matching the job 1, related (some words "
    "in common) or none stated .5, other .25. The component is the best group's value."
)


def norm_age(norm: NormGroup, as_of: dt.date) -> int:
    return max(0, as_of.year - norm.year)


_OCCUPATION_STOPWORDS = frozenset({
    "a", "an", "and", "or", "of", "the", "for", "in", "at", "all", "general", "mixed", "other",
    "staff", "role", "job", "worker", "employee", "applicant", "incumbent", "people", "personnel",
})


@functools.lru_cache(maxsize=4096)
def _occupation_tokens(text: str) -> frozenset[str]:
    """Significant words, lower case, with a plural -s dropped ('operators' -> 'operator')."""
    words = re.findall(r"[a-z]+", text.lower())
    tokens = {w[:-1] if len(w) > 3 and w.endswith("s") and not w.endswith("ss") else w for w in words}
    return frozenset(tokens - _OCCUPATION_STOPWORDS)


def occupation_match(norm: NormGroup, job: Job, policy: Policy, ctx: JobContext | None = None) -> str:
    """'match', 'related', 'general' (no occupation stated) or 'other'.

    'match': every significant word of the norm's occupation appears in the job title or in one
    of the job families marked relevant (plural -s ignored: 'control-room operators' matches
    'Water treatment control-room operator'); 'related': some do; 'other': none do.
    """
    occ = _occupation_tokens(norm.occupation or "")
    if not occ:
        return "general"
    targets = _context(job, policy, ctx).targets
    if any(t and occ <= t for t in targets):
        return "match"
    if any(occ & t for t in targets):
        return "related"
    return "other"


def norm_suitability(norm: NormGroup, job: Job, policy: Policy, as_of: dt.date, ctx: JobContext | None = None) -> tuple[float, str]:
    """0..1 suitability of one norm group for this job, and the figures in words."""
    age = norm_age(norm, as_of)
    occ = occupation_match(norm, job, policy, ctx)
    words = f"'{norm.key}': {age} years old, {norm.scope}, n = {norm.n}, occupation {occ}"
    if age > policy.max_norm_age_years:
        return 0.0, words + f" (older than the policy's {policy.max_norm_age_years} years)"
    age_c = _clip01(1.0 - age / policy.max_norm_age_years)
    scope_c = SCOPE_CREDIT.get(norm.scope, 0.0)
    size_c = min(1.0, math.sqrt(max(norm.n, 0) / NORM_FULL_SIZE))
    occ_c = OCCUPATION_CREDIT[occ]
    return (age_c + scope_c + size_c + occ_c) / 4.0, words


def best_norm(job: Job, instrument: Instrument, policy: Policy, as_of: dt.date, ctx: JobContext | None = None) -> tuple[NormGroup | None, float, str]:
    """The most suitable norm group: highest suitability, ties to the larger n, then the newer."""
    best: tuple[NormGroup | None, float, str] = (None, -1.0, "")
    for norm in instrument.norms:
        value, words = norm_suitability(norm, job, policy, as_of, ctx)
        cand = (norm, value, words)
        if best[0] is None or (value, norm.n, norm.year) > (best[1], best[0].n, best[0].year):
            best = cand
    return best


def norms_component(job: Job, instrument: Instrument, policy: Policy, as_of: dt.date, ctx: JobContext | None = None) -> tuple[Component, list[AppraisalWarning]]:
    if not instrument.norms:
        return (
            Component("norms", None, None, "no norm group recorded", NORMS_MAPPING),
            [_w("no_norms", "no norm group is recorded")],
        )
    warnings = []
    ages = [norm_age(n, as_of) for n in instrument.norms]
    if min(ages) > policy.max_norm_age_years:
        warnings.append(_w("norms_too_old", f"every norm group is older than the policy allows ({policy.max_norm_age_years} years)"))
    norm, value, words = best_norm(job, instrument, policy, as_of, ctx)
    return Component("norms", value, value, f"best group {words}", NORMS_MAPPING), warnings


# --- fairness ---------------------------------------------------------------------------------

FAIRNESS_MAPPING = (
    "fairness = expected impact ratio at the job's selection ratio, for the largest recorded "
    "subgroup difference d (the reference group's pass rate set to the selection ratio), "
    "limited to 0..1"
)


def worst_d(instrument: Instrument):
    """The recorded subgroup difference with the largest d (most adverse), or None."""
    if not instrument.subgroup_differences:
        return None
    return max(instrument.subgroup_differences, key=lambda s: s.d)


_UNSET = object()


def fairness_component(job: Job, instrument: Instrument, policy: Policy, ratio=_UNSET) -> tuple[Component, list[AppraisalWarning], float | None]:
    """Component, warnings and the expected impact ratio (None when it cannot be computed).

    `ratio`: the expected impact ratio already computed for this instrument's worst d at the
    job's selection ratio (rank() computes them for all instruments in one vectorised call).
    """
    sub = worst_d(instrument)
    if sub is None:
        return (
            Component("fairness", None, None, "no subgroup difference recorded", FAIRNESS_MAPPING),
            [_w("no_subgroup_data", "no subgroup difference (d) is recorded; adverse impact cannot be estimated")],
            None,
        )
    sr = job.selection_ratio
    if sr is None or not 0 < sr <= 1:
        text = f"d = {sub.d:.2f} ({sub.groups}); the job's selection ratio is unknown"
        return (
            Component("fairness", None, None, text, FAIRNESS_MAPPING),
            [_w("selection_ratio_unknown", "the job's hires and applicants per year are needed to estimate adverse impact")],
            None,
        )
    if ratio is _UNSET:
        from vetting.psychometrics import impact as pi

        ratio = pi.expected_impact(sub.d, sr)[1]
    ratio = float(ratio)
    warnings = []
    if ratio < policy.impact_ratio_floor:
        warnings.append(_w(
            "impact_below_floor",
            f"expected impact ratio {ratio:.2f} is below the policy floor {policy.impact_ratio_floor:.2f} at selection ratio {sr:.2f}",
        ))
    text = f"expected impact ratio {ratio:.2f} at selection ratio {sr:.2f} (d = {sub.d:.2f}, {sub.groups})"
    return Component("fairness", _clip01(ratio), ratio, text, FAIRNESS_MAPPING), warnings, ratio


# --- practicality -----------------------------------------------------------------------------

PRACTICALITY_MAPPING = (
    "practicality = mean of the parts that have a budget: time and cost each score "
    "1 - 0.5 x (used / budget) within budget and 0 over it"
)


def _part(used: float, budget: float) -> float:
    if budget <= 0:
        return 1.0 if used <= 0 else 0.0
    ratio = used / budget
    return 0.0 if ratio > 1 else _clip01(1.0 - PRACTICALITY_SLOPE * ratio)


def practicality_component(job: Job, instrument: Instrument) -> tuple[Component, list[AppraisalWarning]]:
    parts, words, warnings = [], [], []
    if job.time_budget_minutes is not None:
        parts.append(_part(instrument.minutes, job.time_budget_minutes))
        words.append(f"{instrument.minutes:g} of {job.time_budget_minutes:g} min")
    if job.budget_per_applicant is not None:
        if instrument.cost_per_applicant is None:
            warnings.append(_w("cost_unknown", "the cost per applicant is not recorded"))
        else:
            parts.append(_part(instrument.cost_per_applicant, job.budget_per_applicant))
            cur = f" {instrument.currency}" if instrument.currency else ""
            words.append(f"cost {instrument.cost_per_applicant:g}{cur} of budget {job.budget_per_applicant:g}")
    if not parts:
        warnings.append(_w("no_budgets", "practicality cannot be scored: no time or cost budget (or no cost) recorded"))
        return Component("practicality", None, None, "no budget to compare against", PRACTICALITY_MAPPING), warnings
    value = sum(parts) / len(parts)
    return Component("practicality", value, value, "; ".join(words), PRACTICALITY_MAPPING), warnings
