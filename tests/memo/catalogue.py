"""A small invented catalogue for memo tests (no real tests, publishers, people or data).

Designed so that, for the job 'yard-dispatch' under the default policy:
- 'steady-12' passes every gate and ranks first (strong validity, good coverage);
- 'brisk-7' passes every gate, has validity within .05 of the top one and a smaller subgroup
  difference, so it is an alternative with less expected adverse impact;
- 'wordy-3' fails the reading-level gate (reading grade 14 against the applicants' 9);
- 'brisk-7' carries a review note containing HTML markup, to check escaping.
"""

from __future__ import annotations

import datetime as dt

from vetting.records.domain import (
    Attribute,
    Catalogue,
    Instrument,
    Job,
    Measure,
    NormGroup,
    Policy,
    Reliability,
    Requirement,
    Review,
    SampleCheck,
    SampleCopy,
    SubgroupDifference,
    ValidityStudy,
)

JOB = "yard-dispatch"
TOP = "steady-12"
ALT = "brisk-7"
FAILER = "wordy-3"
HOSTILE_NOTE = 'Clear items. <script>alert("memo")</script> <b>bold claim</b> & more'
AS_OF = dt.date(2026, 6, 1)


def _instrument(key: str, title: str, **kw) -> Instrument:
    base = dict(
        key=key,
        title=title,
        publisher="Invented Press",
        measures=[Measure("route-planning", "primary"), Measure("record-keeping", "secondary")],
        minutes=30.0,
        reading_grade=8.0,
        cost_per_applicant=12.0,
        currency="EUR",
        user_qualification="trained",
        accommodations=["large print", "extra time"],
        reliability=[Reliability("retest", 0.86, 320, interval_days=21, source="Manual 2022, p. 40")],
        validity=[
            ValidityStudy("job-performance", 0.33, 240, job_family="dispatch", source="Study A"),
            ValidityStudy("job-performance", 0.29, 310, job_family="dispatch", source="Study B"),
            ValidityStudy("training", 0.36, 180, job_family="dispatch", source="Study C"),
        ],
        norms=[NormGroup("dispatch-2021", "Dispatch applicants", 1400, 2021, "national", 24.0, 6.0, occupation="dispatch")],
        subgroup_differences=[SubgroupDifference("group A vs group B", 0.45, 900, source="Manual table 9")],
        reviews=[Review(dt.date(2024, 5, 2), "Invented Review Panel", "Well documented.", "supports")],
        sample_copy=SampleCopy(
            requested=dt.date(2026, 1, 10), received=dt.date(2026, 1, 24), checked_by="R. Example",
            checks=[SampleCheck("items-job-relevant", "pass"), SampleCheck("scoring-key-correct", "pass")],
        ),
    )
    base.update(kw)
    return Instrument(**base)


def catalogue() -> Catalogue:
    top = _instrument(
        TOP,
        "Steady Dispatch Reasoning 12",
        validity=[
            ValidityStudy("job-performance", 0.36, 400, job_family="dispatch", source="Study D"),
            ValidityStudy("job-performance", 0.34, 350, job_family="dispatch", source="Study E"),
            ValidityStudy("training", 0.38, 300, job_family="dispatch", source="Study F"),
        ],
        subgroup_differences=[SubgroupDifference("group A vs group B", 0.70, 1200, source="Manual table 4")],
    )
    alt = _instrument(
        ALT,
        "Brisk Routing Check 7",
        measures=[Measure("route-planning", "primary")],
        validity=[
            ValidityStudy("job-performance", 0.34, 400, job_family="dispatch", source="Study G"),
            ValidityStudy("job-performance", 0.32, 350, job_family="dispatch", source="Study H"),
            ValidityStudy("training", 0.36, 300, job_family="dispatch", source="Study I"),
        ],
        reviews=[Review(dt.date(2025, 2, 1), "Independent Reviewer", HOSTILE_NOTE, "mixed", source="Review journal")],
        subgroup_differences=[SubgroupDifference("group A vs group B", 0.20, 700)],
    )
    failer = _instrument(FAILER, "Wordy Records Inventory 3", reading_grade=14.0)
    job = Job(
        key=JOB,
        title="Yard dispatcher",
        requirements=[Requirement("route-planning", 5, True), Requirement("record-keeping", 3, False)],
        analysis_source="Invented job analysis, 2025 (task inventory, 14 incumbents)",
        applicant_reading_grade=9.0,
        time_budget_minutes=45.0,
        budget_per_applicant=25.0,
        staff_qualification="trained",
        applicants_per_year=300,
        hires_per_year=30,
        base_rate=0.5,
        criterion_sd=9000.0,
        tenure_years=4.0,
        policy=Policy(),
    )
    return Catalogue(
        attributes=[Attribute("route-planning", "Route planning", "ability"), Attribute("record-keeping", "Record keeping", "skill")],
        instruments=[top, alt, failer],
        jobs=[job],
    )
