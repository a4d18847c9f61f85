"""Invented records for the store tests: every field filled, dates and tables included.
All names are invented; the numbers are plausible, not taken from any real test."""

from __future__ import annotations

import datetime as dt

from vetting.records.domain import (
    Attribute,
    Catalogue,
    Instrument,
    Job,
    Measure,
    NormGroup,
    PercentilePoint,
    Policy,
    Reliability,
    Requirement,
    Review,
    SampleCheck,
    SampleCopy,
    SubgroupDifference,
    ValidityStudy,
)


def attributes() -> list[Attribute]:
    return [
        Attribute("gauge-reading", "Gauge reading", "skill"),
        Attribute("spatial-folding", "Spatial folding", "ability"),
        Attribute("steadiness", "Steadiness at work", "personality"),
    ]


def full_instrument(key: str = "vessel-check-3", title: str = "Vessel Check, third form") -> Instrument:
    return Instrument(
        key=key,
        title=title,
        measures=[Measure("gauge-reading", "primary"), Measure("spatial-folding", "secondary")],
        minutes=32.5,
        publisher="Harrowgate Measures (invented)",
        edition="3rd",
        year=2021,
        mode=["paper", "online-supervised"],
        reading_grade=7.5,
        cost_per_applicant=21.75,
        currency="EUR",
        user_qualification="trained",
        accommodations=["extended-time", "large-print"],
        languages=["en", "fr"],
        reliability=[
            Reliability("internal", 0.88, 940, None, "applicants 2020", "manual table 3"),
            Reliability("retest", 0.81, 120, 28, "incumbents", "manual table 5"),
        ],
        validity=[
            ValidityStudy("job-performance", 0.31, 212, "predictive", "none", "plant operators", "site A", "report 1"),
            ValidityStudy("turnover", -0.18, 400, "concurrent", "range-restriction", None, None, None),
        ],
        norms=[
            NormGroup(
                key="national-2021",
                group="Operator applicants",
                n=1800,
                year=2021,
                scope="national",
                mean=30.25,
                sd=6.5,
                occupation="process operators",
                table=[PercentilePoint(10, 22.0), PercentilePoint(50, 30.0), PercentilePoint(90, 38.5)],
            ),
            NormGroup("local-2024", "Site applicants", 210, 2024, "local", 31.0, 5.9),
        ],
        subgroup_differences=[SubgroupDifference("group B vs group A", 0.42, 900, "manual table 9")],
        reviews=[
            Review(dt.date(2026, 3, 14), "Reviewer One", "Clear manual.", "supports", "bulletin 7"),
            Review(dt.date(2026, 5, 2), "Reviewer Two", "Old norms.", "concerns"),
        ],
        sample_copy=SampleCopy(
            requested=dt.date(2026, 9, 1),
            received=dt.date(2026, 9, 8),
            checked_by="Selection lead",
            checks=[
                SampleCheck("instructions-clear", "pass", "plain words"),
                SampleCheck("items-job-relevant", "unclear"),
                SampleCheck("answer-key-present", "fail", "key missing"),
            ],
        ),
    )


def bare_instrument(key: str, attribute: str = "gauge-reading") -> Instrument:
    return Instrument(key=key, title=f"Instrument {key}", measures=[Measure(attribute)], minutes=10)


def full_job(key: str = "dock-pump-operator") -> Job:
    return Job(
        key=key,
        title="Dock pump operator",
        requirements=[Requirement("gauge-reading", 5, True), Requirement("steadiness", 2, False)],
        analysis_source="Task inventory, spring 2026 (invented)",
        applicant_reading_grade=9.0,
        time_budget_minutes=50.0,
        budget_per_applicant=35.0,
        staff_qualification="trained",
        applicants_per_year=300,
        hires_per_year=20,
        base_rate=0.35,
        criterion_sd=12500.0,
        tenure_years=3.5,
        policy=Policy(
            min_reliability=0.75,
            max_norm_age_years=10,
            impact_ratio_floor=0.8,
            weights={"coverage": 40.0, "validity": 25.0, "reliability": 15.0, "norms": 5.0, "fairness": 10.0,
                     "practicality": 5.0},
            relevant_criteria=["job-performance", "training"],
            relevant_job_families=["plant operators"],
        ),
    )


def catalogue() -> Catalogue:
    return Catalogue(
        attributes=attributes(),
        instruments=[full_instrument(), bare_instrument("tiny-screen")],
        jobs=[full_job()],
    )
