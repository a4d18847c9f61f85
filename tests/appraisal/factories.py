"""Small invented domain objects for appraisal tests (no real tests, publishers or data)."""

from __future__ import annotations

import datetime as dt

from vetting.records.domain import (
    Instrument,
    Job,
    Measure,
    NormGroup,
    Policy,
    Reliability,
    Requirement,
    SampleCheck,
    SampleCopy,
    SubgroupDifference,
    ValidityStudy,
)

AS_OF = dt.date(2026, 6, 1)


def job(**kw) -> Job:
    base = dict(
        key="clerk",
        title="Records clerk",
        requirements=[Requirement("numeracy", 4, True), Requirement("verbal", 2, False)],
        applicant_reading_grade=10.0,
        time_budget_minutes=60.0,
        budget_per_applicant=20.0,
        staff_qualification="trained",
        applicants_per_year=200,
        hires_per_year=20,
        base_rate=0.5,
        criterion_sd=10000.0,
        tenure_years=3.0,
        policy=Policy(),
    )
    base.update(kw)
    return Job(**base)


def instrument(key: str = "alpha", **kw) -> Instrument:
    base = dict(
        key=key,
        title=f"Invented test {key}",
        publisher="Nowhere Testing Co-op",
        measures=[Measure("numeracy", "primary"), Measure("verbal", "secondary")],
        minutes=30.0,
        reading_grade=8.0,
        cost_per_applicant=10.0,
        currency="EUR",
        user_qualification="trained",
        reliability=[Reliability("retest", 0.85, 300), Reliability("internal", 0.90, 500)],
        validity=[
            ValidityStudy("job-performance", 0.30, 200, job_family="clerical"),
            ValidityStudy("job-performance", 0.34, 300, job_family="clerical"),
        ],
        norms=[NormGroup("gen", "General adults", 1000, 2021, "national", 50.0, 10.0)],
        subgroup_differences=[SubgroupDifference("A vs B", 0.5, 800)],
        sample_copy=SampleCopy(
            requested=dt.date(2026, 1, 1), received=dt.date(2026, 2, 1), checked_by="tester",
            checks=[SampleCheck("instructions clear", "pass")],
        ),
    )
    base.update(kw)
    return Instrument(**base)
