"""Plain result types of the appraisal engine.

These dataclasses are the contract between the appraisal engine and its readers (the memo
writer, the command line and the terminal interface). They hold finished figures: readers
display them and never recompute anything. Every figure that maps a raw value onto 0..1
carries the raw figure and the mapping as text beside it (see docs/methods.md, Part 2).

Nothing here does arithmetic or I/O.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Any

from vetting.records.domain import GATE_NAMES, WEIGHT_NAMES

#: Component names, in display order (the same names as the policy weights).
COMPONENT_NAMES: tuple[str, ...] = WEIGHT_NAMES
#: Gate names, in display order.
GATE_ORDER: tuple[str, ...] = GATE_NAMES

#: The cautions printed under every ranking, plan and exported result.
CAUTIONS: tuple[str, ...] = (
    "Use a test only for the job-related purpose it was chosen for, and keep the job analysis on file.",
    "Monitor adverse impact on actual pass rates (four-fifths rule) and review it regularly.",
    "Plan a local validation study; published validity is evidence, not proof for this job.",
    "Only qualified users should administer, score and interpret the test, following the publisher's standard procedures.",
    "Offer reasonable accommodations to applicants with disabilities.",
    "Treat scores near the cut as a band (measurement error), not as exact points; check that the norms are relevant and recent.",
    "These figures support a professional judgement; they do not replace advice under local employment law or licensed professional practice.",
)


@dataclass(slots=True)
class AppraisalWarning:
    """A short machine code (e.g. `reading_grade_unknown`) and a sentence a person can read."""

    code: str
    text: str


@dataclass(slots=True)
class GateResult:
    """One pass/fail gate. `warning` is set when the gate passed only because evidence is missing."""

    name: str
    passed: bool
    reason: str
    warning: str | None = None

    @property
    def symbol(self) -> str:
        """Pass/fail as text, so meaning never depends on colour."""
        return "PASS" if self.passed else "FAIL"


@dataclass(slots=True)
class Component:
    """One scored component.

    value: 0..1, or None when the evidence is missing (None counts as 0 in the score).
    raw: the raw figure the value came from (e.g. a conservative r of 0.31), if a single number.
    raw_text: the raw figure(s) in words, e.g. "conservative r = 0.31 (k = 3, N = 612)".
    mapping: how the raw figure was mapped onto 0..1, in words.
    """

    name: str
    value: float | None
    raw: float | None
    raw_text: str
    mapping: str


@dataclass(slots=True)
class StudyUse:
    """One validity study and whether it entered the synthesis for this job (and why not)."""

    index: int  # position in Instrument.validity
    criterion: str
    r: float
    r_signed: float  # sign-corrected: positive means "predicts success"
    n: int
    job_family: str | None
    design: str
    source: str | None
    used: bool
    reason: str


@dataclass(slots=True)
class ValidityDetail:
    """How the validity figure was reached for one instrument and one job's policy.

    meta: the psychometrics MetaAnalysis over the studies used (None when no study was used).
    conservative: the single conservative validity figure used for scoring (None when none).
    rule: the psychometrics engine's description of how the conservative figure was chosen.
    se_mean_r: sampling error (SE) of the mean r, used to perturb validity in the robustness draws.
    """

    meta: Any = None
    conservative: float | None = None
    rule: str = ""
    se_mean_r: float | None = None
    studies_used: list[StudyUse] = field(default_factory=list)
    studies_excluded: list[StudyUse] = field(default_factory=list)

    @property
    def k(self) -> int:
        return len(self.studies_used)

    @property
    def total_n(self) -> int:
        return sum(s.n for s in self.studies_used)


@dataclass(slots=True)
class ReliabilityUsed:
    """The reliability figure used for the gate, the component, SEM and the planner."""

    type: str | None
    value: float | None
    n: int | None
    why: str
    source: str | None = None


@dataclass(slots=True)
class InstrumentAppraisal:
    """Everything the engine concluded about one instrument for one job.

    score: 0..100, the policy-weighted sum of the components (None components count as 0).
    It is computed for every instrument; only eligible ones (all six gates passed) get a rank.
    """

    instrument: str
    title: str
    eligible: bool
    rank: int | None
    score: float
    gates: dict[str, GateResult]
    components: dict[str, Component]
    warnings: list[AppraisalWarning]
    p_best: float
    validity: ValidityDetail
    reliability_used: ReliabilityUsed
    publisher: str | None = None
    impact_ratio: float | None = None  # expected impact ratio at the job's selection ratio

    @property
    def warning_codes(self) -> list[str]:
        return [w.code for w in self.warnings]

    @property
    def failed_gates(self) -> list[GateResult]:
        return [g for g in self.gates.values() if not g.passed]


@dataclass
class WeightFlip:
    """A single-weight change that would change the top choice.

    The weight moves from `from_value` to `to_value` (in the policy's own units, all other
    weights unchanged); at `to_value` the two instruments tie, beyond it `new_top` leads.
    """

    weight: str
    from_value: float
    to_value: float
    new_top: str

    @property
    def change(self) -> float:
        return self.to_value - self.from_value


@dataclass
class Robustness:
    """How sure the top choice is.

    p_best: instrument key -> share of draws in which it ranked first (eligible instruments only).
    draws, seed: the Monte Carlo settings (same seed -> same figures).
    concentration: the Dirichlet concentration used around the normalised policy weights.
    smallest_flip: the smallest single weight change that changes the top choice (None when no
    single weight change can, e.g. a single eligible instrument); flips: the smallest change for
    each weight (None for weights that cannot flip it).
    """

    p_best: dict[str, float]
    draws: int
    seed: int
    concentration: float
    smallest_flip: WeightFlip | None
    flips: dict[str, WeightFlip | None] = field(default_factory=dict)
    method: str = ""
    #: eligible instruments whose score equals the top choice's (the order between them is
    #: then only the tie-break: higher conservative validity, then key)
    tied_with_top: list[str] = field(default_factory=list)


@dataclass
class Alternative:
    """An eligible instrument of substantially equal validity with a better expected impact ratio."""

    instrument: str
    title: str
    conservative_validity: float
    validity_difference: float  # alternative minus top choice
    impact_ratio: float
    impact_ratio_gain: float  # alternative minus top choice
    score: float
    reason: str


@dataclass
class AlternativesReport:
    """The alternatives analysis for the top choice (Uniform Guidelines 1978, section 3B)."""

    top: str | None
    top_validity: float | None
    top_impact_ratio: float | None
    tolerance: float
    rule: str
    alternatives: list[Alternative] = field(default_factory=list)
    note: str = ""


@dataclass
class Ranking:
    """A ranking of a catalogue for one job under one policy version."""

    job: str
    job_title: str
    policy_version: int | None
    policy_locked: bool
    policy_locked_at: dt.datetime | None
    locked_before_first_ranking: bool
    first_ranked_at: dt.datetime | None
    as_of: dt.date
    weights: dict[str, float]  # normalised, sum 1
    results: list[InstrumentAppraisal]  # eligible first by rank, then ineligible
    robustness: Robustness
    alternatives: AlternativesReport
    selection_ratio: float | None = None
    warnings: list[AppraisalWarning] = field(default_factory=list)
    cautions: tuple[str, ...] = CAUTIONS

    @property
    def eligible(self) -> list[InstrumentAppraisal]:
        return [r for r in self.results if r.eligible]

    @property
    def top(self) -> InstrumentAppraisal | None:
        return next((r for r in self.results if r.eligible and r.rank == 1), None)

    def result(self, instrument_key: str) -> InstrumentAppraisal | None:
        return next((r for r in self.results if r.instrument == instrument_key), None)


@dataclass
class Gap:
    """One piece of evidence a careful reviewer would still ask the publisher for."""

    code: str
    text: str  # what is missing, for the list
    request: str = ""  # the same as a polite request sentence, for the letter


@dataclass
class GapReport:
    instrument: str
    title: str
    publisher: str | None
    gaps: list[Gap]
    letter: str

    @property
    def codes(self) -> list[str]:
        return [g.code for g in self.gaps]


@dataclass
class CutScores:
    """One cut expressed on every scale (raw on the chosen norm group)."""

    z: float
    raw: float | None
    percentile: float
    t: float
    stanine: int


@dataclass
class PlanPoint:
    """The planner's figures at one selection ratio."""

    selection_ratio: float
    validity_used: float | None
    cut: CutScores
    expected_success_rate: float | None
    mean_criterion_z: float | None
    utility_per_year: float | None
    impact_ratio: float | None
    sem_raw: float | None
    cut_band_raw: tuple[float, float] | None


@dataclass
class LocalValidationPlan:
    """Sample size for a local validation study and how long gathering it takes."""

    validity: float | None
    power: float
    alpha: float
    n: int | None
    months: float | None
    text: str


@dataclass
class CutPlan(PlanPoint):
    """A full cut-score plan for one instrument and job (a PlanPoint plus its context)."""

    job: str = ""
    instrument: str = ""
    norm: str | None = None
    norm_text: str = ""
    norm_reason: str = ""
    base_rate: float | None = None
    confidence: float = 0.95
    reliability_used: ReliabilityUsed | None = None
    d_used: float | None = None
    local_validation: LocalValidationPlan | None = None
    warnings: list[AppraisalWarning] = field(default_factory=list)
    cautions: tuple[str, ...] = CAUTIONS


@dataclass
class PlanSweep:
    """Planner figures across many selection ratios (numpy arrays, same length), for charts."""

    job: str
    instrument: str
    norm: str | None
    selection_ratio: Any
    cut_z: Any
    cut_raw: Any  # None when no norm group
    expected_success_rate: Any  # None when no validity or base rate
    mean_criterion_z: Any
    utility_per_year: Any
    impact_ratio: Any  # None when no subgroup data


@dataclass
class InstrumentSummary:
    """One row of the catalogue table (computed by `summarise`, never by an interface)."""

    key: str
    title: str
    publisher: str | None
    attributes: list[str]
    minutes: float
    reading_grade: float | None
    cost_per_applicant: float | None
    currency: str | None
    qualification: str | None
    best_reliability: float | None
    best_reliability_type: str | None
    conservative_validity: float | None
    validity_k: int
    validity_n: int
    norm_age_years: int | None  # age of the most recent norm group
    norm_groups: int
    has_subgroup_data: bool
    sample_copy_checked: bool
