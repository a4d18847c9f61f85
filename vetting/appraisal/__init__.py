"""vetting.appraisal: rules-first scoring of candidate tests for a job.

Pure functions over the domain objects of vetting.records.domain (no database, no terminal):

- rank(job, instruments, *, draws, seed, as_of) -> Ranking       (ranking.py)
- plan(job, instrument, *, selection_ratio, norm_key, raw_cut) -> CutPlan; sweep(...) -> PlanSweep
- gap_report(instrument, *, job) -> GapReport                      (gaps.py)
- summarise(instrument, as_of) -> InstrumentSummary                (summary.py)
- find_alternatives(results) -> AlternativesReport                 (alternatives.py)
- policy helpers: validate_policy, normalised_weights, with_changes (policy.py)

service.py holds the only functions that touch the records Store.
Result types live in types.py; errors (AppraisalError, PolicyError, JobError) in errors.py.
"""

from vetting.appraisal.alternatives import find_alternatives
from vetting.appraisal.errors import AppraisalError, JobError, PolicyError
from vetting.appraisal.gaps import find_gaps, gap_report
from vetting.appraisal.planner import plan, sweep
from vetting.appraisal.policy import normalised_weights, validate_policy, with_changes
from vetting.appraisal.ranking import rank
from vetting.appraisal.summary import summarise, summarise_all
from vetting.appraisal.types import CAUTIONS

__all__ = [
    "CAUTIONS",
    "AppraisalError",
    "JobError",
    "PolicyError",
    "find_alternatives",
    "find_gaps",
    "gap_report",
    "normalised_weights",
    "plan",
    "rank",
    "summarise",
    "summarise_all",
    "sweep",
    "validate_policy",
    "with_changes",
]
