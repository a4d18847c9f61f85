"""One catalogue-table row per instrument, computed here so interfaces never compute it.

best_reliability: the reliability figure the engine uses (gates.choose_reliability: retest or
alternate-form preferred, then internal consistency, then inter-rater). conservative_validity:
over all criterion-related studies (or the given policy's relevant ones), by the psychometrics
engine's conservative rule. norm_age_years: the age of the most recent norm group at `as_of`.
"""

from __future__ import annotations

import datetime as dt

from vetting.appraisal import components as comp
from vetting.appraisal.gates import choose_reliability
from vetting.appraisal.types import InstrumentSummary
from vetting.records.domain import Instrument, Policy


def summarise(instrument: Instrument, as_of: dt.date | None = None, policy: Policy | None = None) -> InstrumentSummary:
    as_of = as_of or dt.date.today()
    rel = choose_reliability(instrument)
    detail = comp.validity_detail(instrument, policy or Policy())
    sc = instrument.sample_copy
    return InstrumentSummary(
        key=instrument.key,
        title=instrument.title,
        publisher=instrument.publisher,
        attributes=instrument.attribute_keys(),
        minutes=instrument.minutes,
        reading_grade=instrument.reading_grade,
        cost_per_applicant=instrument.cost_per_applicant,
        currency=instrument.currency,
        qualification=instrument.user_qualification,
        best_reliability=rel.value,
        best_reliability_type=rel.type,
        conservative_validity=detail.conservative,
        validity_k=detail.k,
        validity_n=detail.total_n,
        norm_age_years=min((comp.norm_age(n, as_of) for n in instrument.norms), default=None),
        norm_groups=len(instrument.norms),
        has_subgroup_data=bool(instrument.subgroup_differences),
        sample_copy_checked=bool(sc is not None and sc.checks),
    )


def summarise_all(instruments: list[Instrument], as_of: dt.date | None = None, policy: Policy | None = None) -> list[InstrumentSummary]:
    as_of = as_of or dt.date.today()
    return [summarise(i, as_of, policy) for i in instruments]
