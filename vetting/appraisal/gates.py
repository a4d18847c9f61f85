"""The six pass/fail gates, each with a reason a person can read.

An instrument is eligible for ranking only when all six pass:

- job_relatedness: it measures at least one of the job's required attributes.
- validity_evidence: it has at least one validity record (any criterion; relevance to the job
  is judged by the validity component, not by this gate).
- reliability: the reliability figure used (see `choose_reliability`) is at least the
  policy's minimum. No reliability figure at all fails.
- reading_level: the material's reading grade is at most the applicants' reading grade.
  Either grade unknown: passes, with a warning.
- time: testing minutes are within the job's time budget. No budget: passes, with a warning.
- qualification: the user qualification the instrument requires (open < trained < licensed) is
  at or below the qualification of the staff who will give it. Either unknown: passes, with a
  warning (the specialist must check it by hand).

Passing "with a warning" never adds to the score: it only avoids excluding an instrument for a
missing record, and the warning is shown and listed among the evidence gaps.
"""

from __future__ import annotations

from vetting.appraisal.types import GateResult, ReliabilityUsed
from vetting.records.domain import (
    GATE_NAMES,
    Instrument,
    Job,
    Policy,
    Reliability,
    qualification_rank,
)

#: Reliability types in tiers of preference for selection use (see `choose_reliability`).
RELIABILITY_TIERS: tuple[tuple[str, ...], ...] = (
    ("retest", "alternate"),
    ("internal", "split-half"),
    ("inter-rater",),
)

RELIABILITY_RULE = (
    "Reliability used: a selection score is acted on some time after testing, so coefficients "
    "that include error over time or forms (test-retest, alternate-form) are preferred; when "
    "none is recorded, internal consistency (alpha/KR-20 or split-half) is used, then "
    "inter-rater. Within the preferred kind, the figure from the largest sample is used, and "
    "among equal samples the lower figure. (Matching the coefficient to the intended use follows "
    "the Standards for Educational and Psychological Testing, AERA/APA/NCME 2014, chapter 2 - "
    "value from memory; the tier order is common practice, no published source.)"
)


def _fmt(x: float) -> str:
    return f"{x:g}"


def _reliability_choice(records: list[Reliability]) -> tuple[Reliability | None, tuple[str, ...] | None, list[Reliability]]:
    """The record the reliability rule chooses, its tier (None: no record of a known type, the
    lowest figure is taken) and the candidates of that tier. Shared by `choose_reliability`
    and the ranking's eligibility screen, so both read the same figure."""
    if not records:
        return None, None, []
    for tier in RELIABILITY_TIERS:
        candidates = [r for r in records if r.type in tier]
        if candidates:
            return min(candidates, key=_reliability_order), tier, candidates
    return min(records, key=lambda r: r.value), None, records


def _reliability_order(r: Reliability) -> tuple:
    return (-(r.n or 0), r.value)


def choose_reliability(instrument: Instrument) -> ReliabilityUsed:
    """The reliability figure used for this instrument, with the reason it was chosen."""
    records = list(instrument.reliability)
    if not records:
        return ReliabilityUsed(type=None, value=None, n=None, why="no reliability figure is recorded")
    best, tier, candidates = _reliability_choice(records)
    if tier is not None:
        others = [r.type for r in records if r is not best]
        why = f"{best.type} reliability {best.value:.2f}" + (f" (N = {best.n})" if best.n else " (N not stated)")
        if tier == RELIABILITY_TIERS[0]:
            why += ": a retest/alternate-form figure is preferred for selection use"
        else:
            why += ": no retest or alternate-form figure is recorded, so the next preferred kind is used"
        if len(candidates) > 1:
            why += "; of several figures of this kind, the one from the largest sample (then the lower) is used"
        if others:
            why += f"; also recorded: {', '.join(sorted(set(others)))}"
        return ReliabilityUsed(type=best.type, value=best.value, n=best.n, why=why, source=best.source)
    # Unknown types cannot occur with validated records; use the lowest figure to stay conservative.
    low = best
    return ReliabilityUsed(type=low.type, value=low.value, n=low.n, why=f"{low.type} reliability {low.value:.2f} (lowest recorded)")


def gate_job_relatedness(job: Job, instrument: Instrument) -> GateResult:
    required = [r.attribute for r in job.requirements]
    measured = set(instrument.attribute_keys())
    hit = [a for a in required if a in measured]
    if hit:
        return GateResult("job_relatedness", True, f"measures required attribute(s): {', '.join(hit)}")
    return GateResult(
        "job_relatedness",
        False,
        f"measures none of the job's required attributes ({', '.join(required) or 'none listed'})",
    )


def gate_validity_evidence(instrument: Instrument) -> GateResult:
    k = len(instrument.validity)
    if k:
        n = sum(s.n for s in instrument.validity)
        return GateResult("validity_evidence", True, f"{k} validity record(s), total N = {n}")
    return GateResult("validity_evidence", False, "no validity study is recorded")


def gate_reliability(policy: Policy, used: ReliabilityUsed) -> GateResult:
    minimum = policy.min_reliability
    if used.value is None:
        return GateResult("reliability", False, f"no reliability figure is recorded (policy minimum {minimum:.2f})")
    if used.value >= minimum:
        return GateResult("reliability", True, f"{used.type} reliability {used.value:.2f} >= policy minimum {minimum:.2f}")
    return GateResult("reliability", False, f"{used.type} reliability {used.value:.2f} < policy minimum {minimum:.2f}")


def gate_reading_level(job: Job, instrument: Instrument) -> GateResult:
    grade, limit = instrument.reading_grade, job.applicant_reading_grade
    if grade is None or limit is None:
        missing = "the material's reading grade" if grade is None else "the applicants' reading grade"
        if grade is None and limit is None:
            missing = "both reading grades"
        return GateResult(
            "reading_level",
            True,
            f"passes by default: {missing} unknown",
            warning=f"reading level not checked: {missing} unknown",
        )
    if grade <= limit:
        return GateResult("reading_level", True, f"reading grade {_fmt(grade)} <= applicants' grade {_fmt(limit)}")
    return GateResult("reading_level", False, f"reading grade {_fmt(grade)} > applicants' grade {_fmt(limit)}")


def gate_time(job: Job, instrument: Instrument) -> GateResult:
    budget = job.time_budget_minutes
    if budget is None:
        return GateResult(
            "time",
            True,
            f"passes by default: {_fmt(instrument.minutes)} min, the job has no time budget",
            warning="time not checked: the job has no time budget",
        )
    if instrument.minutes <= budget:
        return GateResult("time", True, f"{_fmt(instrument.minutes)} min <= budget {_fmt(budget)} min")
    return GateResult("time", False, f"{_fmt(instrument.minutes)} min > budget {_fmt(budget)} min")


def gate_qualification(job: Job, instrument: Instrument) -> GateResult:
    need, have = instrument.user_qualification, job.staff_qualification
    if need is None or have is None:
        missing = "the instrument's required user qualification" if need is None else "the staff's qualification"
        if need is None and have is None:
            missing = "both qualification levels"
        return GateResult(
            "qualification",
            True,
            f"passes by default: {missing} unknown",
            warning=f"qualification not checked: {missing} unknown",
        )
    if qualification_rank(need) <= qualification_rank(have):
        return GateResult("qualification", True, f"requires '{need}' users; staff are '{have}'")
    return GateResult("qualification", False, f"requires '{need}' users; staff are only '{have}'")


def evaluate_gates(job: Job, instrument: Instrument, policy: Policy, used: ReliabilityUsed) -> dict[str, GateResult]:
    """All six gates, keyed by name in the documented order."""
    results = {
        "job_relatedness": gate_job_relatedness(job, instrument),
        "validity_evidence": gate_validity_evidence(instrument),
        "reliability": gate_reliability(policy, used),
        "reading_level": gate_reading_level(job, instrument),
        "time": gate_time(job, instrument),
        "qualification": gate_qualification(job, instrument),
    }
    assert tuple(results) == GATE_NAMES
    return results


def passes_all_gates(job: Job, policy: Policy | None = None):
    """A test `passes(instrument) -> bool` giving exactly `all(g.passed for g in
    evaluate_gates(job, instrument, policy, choose_reliability(instrument)).values())` without
    writing any gate's reasons: the same conditions, read once for the job, the cheapest first
    and stopping at the first that fails. The ranking uses it to find the eligible instruments
    before it writes anything about them (tests/appraisal/test_deferred_appraisal.py pins it
    against the gates themselves)."""
    policy = policy if policy is not None else job.policy
    required = frozenset(r.attribute for r in job.requirements)
    minimum = policy.min_reliability
    limit = job.applicant_reading_grade
    budget = job.time_budget_minutes
    have = job.staff_qualification
    have_rank = None if have is None else qualification_rank(have)
    choice = _reliability_choice

    def passes(instrument: Instrument) -> bool:
        if not instrument.validity:  # validity_evidence
            return False
        if budget is not None and not instrument.minutes <= budget:  # time
            return False
        grade = instrument.reading_grade  # reading_level
        if grade is not None and limit is not None and not grade <= limit:
            return False
        need = instrument.user_qualification  # qualification
        if need is not None and have_rank is not None and not qualification_rank(need) <= have_rank:
            return False
        for m in instrument.measures:  # job_relatedness
            if m.attribute in required:
                break
        else:
            return False
        best = choice(list(instrument.reliability))[0]  # reliability
        return best is not None and best.value is not None and best.value >= minimum

    return passes
