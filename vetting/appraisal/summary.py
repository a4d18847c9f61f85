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
from vetting.records.gcpause import gc_pause


def summarise(instrument: Instrument, as_of: dt.date | None = None, policy: Policy | None = None) -> InstrumentSummary:
    return summarise_all([instrument], as_of, policy)[0]


def summarise_all(instruments: list[Instrument], as_of: dt.date | None = None, policy: Policy | None = None) -> list[InstrumentSummary]:
    """`summarise` for every instrument, with the shared set-up (date, policy, engine) done once
    and every conservative validity figure from one grouped call to the psychometrics engine
    (`components.synthesise`, as the ranking's validity details, so the figures are equal)."""
    as_of = as_of or dt.date.today()
    policy = policy or Policy()
    # many small objects and no cycles: the garbage collector would only rescan a large heap
    with gc_pause():
        used_by = [comp.select_studies(i, policy)[0] for i in instruments]
        grouped = comp.synthesise(used_by)
        values = iter(grouped.conservative.tolist() if grouped is not None else [])
        return [_summary(i, as_of, used, next(values) if used else None) for i, used in zip(instruments, used_by)]


def _summary(instrument: Instrument, as_of: dt.date, used: list, validity: float | None) -> InstrumentSummary:
    rel = choose_reliability(instrument)
    # The same figures as components.validity_details (the same studies, the same engine call),
    # without what the table does not show: the meta-analysis of a single study and the rule text.
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
        conservative_validity=validity,
        validity_k=len(used),
        validity_n=sum(u.n for u in used),
        norm_age_years=min((comp.norm_age(n, as_of) for n in instrument.norms), default=None),
        norm_groups=len(instrument.norms),
        has_subgroup_data=bool(instrument.subgroup_differences),
        sample_copy_checked=bool(sc is not None and sc.checks),
    )
