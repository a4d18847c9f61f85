"""The thin layer between the records Store and the pure appraisal engine.

Only these functions touch the database; everything they call takes plain domain objects.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from vetting.appraisal.gaps import gap_report
from vetting.appraisal.planner import plan
from vetting.appraisal.ranking import check_job, rank
from vetting.appraisal.types import CutPlan, GapReport, Ranking


def rank_job(store: Any, job_key: str, *, draws: int = 2000, seed: int = 0, as_of: dt.date | None = None,
             mark: bool = True) -> Ranking:
    """Rank the whole catalogue for a stored job.

    With mark=True (the default) the job's first ranking time is recorded (once, by the store)
    before the results are computed, so the ranking can say whether its policy version was
    locked before the job was first ranked. Bad input (no requirements, weights summing to 0)
    is rejected before anything is written.
    """
    job = store.job(job_key)
    check_job(job)
    first = store.mark_ranked(job_key) if mark else job.first_ranked_at
    return rank(job, store.instruments(), draws=draws, seed=seed, as_of=as_of, first_ranked_at=first)


def plan_cut(store: Any, job_key: str, instrument_key: str, **kwargs: Any) -> CutPlan:
    """The cut-score plan for a stored job and instrument (keyword arguments as planner.plan)."""
    return plan(store.job(job_key), store.instrument(instrument_key), **kwargs)


def instrument_gaps(store: Any, instrument_key: str, job_key: str | None = None,
                    as_of: dt.date | None = None) -> GapReport:
    """Evidence gaps of a stored instrument (judged by the job's policy when a job is given)."""
    instrument = store.instrument(instrument_key)
    job = store.job(job_key) if job_key else None
    return gap_report(instrument, job=job, as_of=as_of)
