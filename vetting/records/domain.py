"""Plain domain objects: the contract between the records layer and everything above it.

These dataclasses mirror catalogue format 1 field for field (see docs/catalogue-format.md).
The database layer converts its rows into these objects before handing them out, so the
appraisal engine, the memo writer and both interfaces never hold a live database session.

Nothing here does I/O or arithmetic beyond trivial derived properties.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

# ---------------------------------------------------------------------------
# Controlled vocabularies (binding for catalogue format 1)
# ---------------------------------------------------------------------------

ATTRIBUTE_KINDS = ("ability", "knowledge", "skill", "personality", "interest", "other")
FITS = ("primary", "secondary")
MODES = ("paper", "online-supervised", "online-unsupervised", "individual", "group")
QUALIFICATIONS = ("open", "trained", "licensed")  # ordered: open < trained < licensed
RELIABILITY_TYPES = ("internal", "retest", "alternate", "split-half", "inter-rater")
CRITERIA = (
    "job-performance",
    "training",
    "output",
    "turnover",
    "absence",
    "counterproductive",
    "citizenship",
    "other",
)
#: Criteria where a lower criterion value is the desirable outcome; a negative r is good there.
LOWER_IS_BETTER_CRITERIA = frozenset({"turnover", "absence", "counterproductive"})
DESIGNS = ("predictive", "concurrent", "meta-analytic", "content", "construct")
CORRECTIONS = ("none", "criterion-unreliability", "range-restriction", "both")
SCOPES = ("local", "regional", "national", "international")
STANCES = ("supports", "mixed", "concerns")
CHECK_RESULTS = ("pass", "fail", "unclear")
WEIGHT_NAMES = ("coverage", "validity", "reliability", "norms", "fairness", "practicality")
GATE_NAMES = (
    "job_relatedness",
    "validity_evidence",
    "reliability",
    "reading_level",
    "time",
    "qualification",
)

KEY_PATTERN = r"^[a-z0-9-]+$"


def qualification_rank(level: str) -> int:
    """Position of a user-qualification level in the order open < trained < licensed."""
    return QUALIFICATIONS.index(level)


# ---------------------------------------------------------------------------
# Attributes and instruments
# ---------------------------------------------------------------------------


@dataclass
class Attribute:
    key: str
    name: str
    kind: str = "other"


@dataclass
class Measure:
    attribute: str  # attribute key
    fit: str = "primary"


@dataclass
class Reliability:
    type: str
    value: float
    n: int | None = None
    interval_days: int | None = None
    sample: str | None = None
    source: str | None = None


@dataclass
class ValidityStudy:
    criterion: str
    r: float
    n: int
    design: str = "predictive"
    corrected: str = "none"
    job_family: str | None = None
    sample: str | None = None
    source: str | None = None

    @property
    def lower_is_better(self) -> bool:
        return self.criterion in LOWER_IS_BETTER_CRITERIA

    @property
    def r_signed(self) -> float:
        """r with its sign corrected so that a positive value always means 'predicts success'."""
        return -self.r if self.lower_is_better else self.r


@dataclass
class PercentilePoint:
    percentile: float
    raw: float


@dataclass
class NormGroup:
    key: str
    group: str
    n: int
    year: int
    scope: str
    mean: float
    sd: float
    occupation: str | None = None
    table: list[PercentilePoint] = field(default_factory=list)


@dataclass
class SubgroupDifference:
    groups: str
    d: float
    n: int | None = None
    source: str | None = None


@dataclass
class Review:
    date: dt.date
    by: str
    note: str
    stance: str = "mixed"
    source: str | None = None


@dataclass
class SampleCheck:
    item: str
    result: str
    note: str | None = None


@dataclass
class SampleCopy:
    requested: dt.date | None = None
    received: dt.date | None = None
    checked_by: str | None = None
    checks: list[SampleCheck] = field(default_factory=list)


@dataclass
class Instrument:
    key: str
    title: str
    measures: list[Measure]
    minutes: float
    publisher: str | None = None
    edition: str | None = None
    year: int | None = None
    mode: list[str] = field(default_factory=list)
    reading_grade: float | None = None
    cost_per_applicant: float | None = None
    currency: str | None = None
    user_qualification: str | None = None
    accommodations: list[str] = field(default_factory=list)
    languages: list[str] = field(default_factory=list)
    reliability: list[Reliability] = field(default_factory=list)
    validity: list[ValidityStudy] = field(default_factory=list)
    norms: list[NormGroup] = field(default_factory=list)
    subgroup_differences: list[SubgroupDifference] = field(default_factory=list)
    reviews: list[Review] = field(default_factory=list)
    sample_copy: SampleCopy | None = None
    #: optimistic-concurrency version held by the database (None for objects not yet stored)
    row_version: int | None = None

    def attribute_keys(self) -> list[str]:
        return [m.attribute for m in self.measures]

    def norm(self, key: str) -> NormGroup | None:
        return next((n for n in self.norms if n.key == key), None)


# ---------------------------------------------------------------------------
# Jobs and scoring policies
# ---------------------------------------------------------------------------


@dataclass
class Requirement:
    attribute: str  # attribute key
    importance: int = 3  # 1..5
    critical: bool = False


#: Defaults are common practice, not a published standard; see docs/methods.md.
DEFAULT_WEIGHTS: dict[str, float] = {
    "coverage": 30.0,
    "validity": 30.0,
    "reliability": 15.0,
    "norms": 10.0,
    "fairness": 10.0,
    "practicality": 5.0,
}


@dataclass
class Policy:
    min_reliability: float = 0.80
    max_norm_age_years: int = 15
    impact_ratio_floor: float = 0.80
    weights: dict[str, float] = field(default_factory=lambda: dict(DEFAULT_WEIGHTS))
    #: criteria counted as relevant evidence for this job (empty = all criteria)
    relevant_criteria: list[str] = field(default_factory=list)
    #: job families counted as relevant (empty = all job families)
    relevant_job_families: list[str] = field(default_factory=list)
    #: set by the database: version number, and when (if ever) this version was locked
    version: int | None = None
    locked_at: dt.datetime | None = None
    created_at: dt.datetime | None = None

    @property
    def locked(self) -> bool:
        return self.locked_at is not None

    def same_rules(self, other: Policy) -> bool:
        """True when two policies would score identically (ignores version bookkeeping)."""
        return (
            self.min_reliability == other.min_reliability
            and self.max_norm_age_years == other.max_norm_age_years
            and self.impact_ratio_floor == other.impact_ratio_floor
            and self.weights == other.weights
            and sorted(self.relevant_criteria) == sorted(other.relevant_criteria)
            and sorted(self.relevant_job_families) == sorted(other.relevant_job_families)
        )


@dataclass
class Job:
    key: str
    title: str
    requirements: list[Requirement]
    analysis_source: str | None = None
    applicant_reading_grade: float | None = None
    time_budget_minutes: float | None = None
    budget_per_applicant: float | None = None
    staff_qualification: str | None = None
    applicants_per_year: int | None = None
    hires_per_year: int | None = None
    base_rate: float | None = None
    criterion_sd: float | None = None
    tenure_years: float | None = None
    policy: Policy = field(default_factory=Policy)
    #: when the job was first ranked (set by the database; None if never ranked)
    first_ranked_at: dt.datetime | None = None
    row_version: int | None = None

    @property
    def selection_ratio(self) -> float | None:
        """Hires / applicants, when both are known and positive."""
        if self.applicants_per_year and self.hires_per_year is not None and self.applicants_per_year > 0:
            return self.hires_per_year / self.applicants_per_year
        return None


@dataclass
class Catalogue:
    """Everything one catalogue file holds."""

    attributes: list[Attribute] = field(default_factory=list)
    instruments: list[Instrument] = field(default_factory=list)
    jobs: list[Job] = field(default_factory=list)
