"""Fixtures for the terminal interface: an isolated temporary database (never the user's),
fixed invented data, a fixed date, and steady cursors so screenshots are stable."""

from __future__ import annotations

import datetime as dt

import pytest

from vetting.records.domain import (
    Attribute,
    Instrument,
    Job,
    Measure,
    NormGroup,
    PercentilePoint,
    Reliability,
    Requirement,
    SampleCheck,
    SampleCopy,
    SubgroupDifference,
    ValidityStudy,
)
from vetting.records.store import Store
from vetting.tui.app import make_app

#: every figure that depends on the date (norm age) is computed as of this day
TODAY = dt.date(2026, 6, 1)


def invented_catalogue() -> tuple[list[Attribute], list[Instrument], list[Job]]:
    """Three invented instruments and one invented job (no real tests or publishers)."""
    attributes = [
        Attribute("number-sense", "Number sense", "ability"),
        Attribute("careful-checking", "Careful checking", "skill"),
        Attribute("steadiness", "Steadiness", "personality"),
    ]
    instruments = [
        Instrument(
            key="tally-quick",
            title="Tally Quick Numbers",
            measures=[Measure("number-sense")],
            minutes=20,
            publisher="Brookfen Assessments",
            reading_grade=8,
            cost_per_applicant=12.5,
            currency="EUR",
            user_qualification="trained",
            reliability=[Reliability("internal", 0.88, n=410), Reliability("retest", 0.81, n=120, interval_days=28)],
            validity=[ValidityStudy("job-performance", 0.31, 220, job_family="clerical")],
            norms=[NormGroup("gen-2019", "General applicants", 900, 2019, "national", 24.0, 6.0,
                             table=[PercentilePoint(10, 16), PercentilePoint(50, 24), PercentilePoint(90, 32)])],
            subgroup_differences=[SubgroupDifference("focal vs reference", 0.35, n=600)],
            sample_copy=SampleCopy(requested=dt.date(2026, 1, 5), received=dt.date(2026, 1, 20),
                                   checked_by="R. Ostrova",
                                   checks=[SampleCheck("instructions-clear", "pass")]),
        ),
        Instrument(
            key="ledger-scan",
            title="Ledger Scan Checking Task",
            measures=[Measure("careful-checking"), Measure("number-sense", "secondary")],
            minutes=35,
            publisher="Halloway Press",
            reading_grade=10,
            cost_per_applicant=30,
            currency="EUR",
            user_qualification="open",
            reliability=[Reliability("internal", 0.79, n=150)],
        ),
        Instrument(
            key="calm-index",
            title="Calm Index Inventory",
            measures=[Measure("steadiness")],
            minutes=15,
            publisher="Brookfen Assessments",
            user_qualification="licensed",
        ),
    ]
    jobs = [
        Job(
            key="claims-clerk",
            title="Claims clerk",
            requirements=[Requirement("number-sense", 5, True), Requirement("careful-checking", 4)],
            analysis_source="Task inventory, spring 2026",
            time_budget_minutes=60,
            applicants_per_year=200,
            hires_per_year=20,
        )
    ]
    return attributes, instruments, jobs


@pytest.fixture
def db_url(tmp_path) -> str:
    """An empty database of its own for each test."""
    return f"sqlite:///{tmp_path / 'tui.db'}"


@pytest.fixture
def seeded_url(db_url) -> str:
    """The invented catalogue saved through the Store, as a person would have entered it."""
    attributes, instruments, jobs = invented_catalogue()
    with Store.open(db_url, user="seed-user") as store:
        for attr in attributes:
            store.save_attribute(attr)
        for inst in instruments:
            store.save_instrument(inst)
        for job in jobs:
            store.save_job(job)
    return db_url


@pytest.fixture
def app_for():
    """Build the app on a URL with the fixed date and steady cursors."""

    def build(url: str):
        return make_app(url, today=TODAY, cursor_blink=False)

    return build


async def _settle(pilot, rounds: int = 3) -> None:
    """Let screens mount and workers finish (Textual 8 delays screen switches)."""
    for _ in range(rounds):
        await pilot.pause()
        await pilot.app.workers.wait_for_complete()
    await pilot.pause()


@pytest.fixture
def settle():
    return _settle
