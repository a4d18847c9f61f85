"""The whole job from the keyboard alone, on a new database (issue 6, "Done when"):

create a job with three required attributes, add two instruments with their evidence by hand,
lock the policy, compare, plan a cut, and export a Word memo.

Only key presses drive the app (no widget is set from the test). What is checked at the end
comes from outside the interface: the records read back through the Store, the engine's own
ranking of them, and the Word file opened with python-docx (Office Open XML, ECMA-376).
"""

from __future__ import annotations

import docx
import pytest

from vetting.appraisal import rank
from vetting.records.store import Store
from vetting.tui.screens.compare import CompareScreen
from vetting.tui.screens.job import JobEditor
from vetting.tui.screens.memo import MemoScreen
from vetting.tui.screens.plan import PlanScreen
from vetting.tui.widgets.results_common import PathPrompt

from .conftest import TODAY


async def _settle(pilot, rounds: int = 4) -> None:
    for _ in range(rounds):
        await pilot.pause()
        await pilot.app.workers.wait_for_complete()
    await pilot.pause()


async def _type(pilot, *fields: str) -> None:
    """Type each value into the focused field (emptied first), Tab between them."""
    for index, value in enumerate(fields):
        if index:
            await pilot.press("tab")
        await pilot.press("end", "ctrl+u")
        if value:
            await pilot.press(*value)
    await pilot.pause()


async def _new_entry(pilot, *fields: str) -> None:
    await pilot.press("ctrl+n")
    await _settle(pilot, 2)
    await _type(pilot, *fields)


async def _next_section(pilot) -> None:
    await pilot.press("ctrl+o")
    await _settle(pilot, 2)


async def _save(pilot, what: str) -> None:
    await pilot.press("f9")
    await _settle(pilot)
    banner = str(pilot.app.screen.query_one("#banner").render())
    assert "Saved" in banner, f"{what} not saved: {banner}"


async def _instrument(pilot, description: list[str], reliability: list[str], validity: list[str],
                      norms: list[str] | None, subgroups: list[str] | None) -> None:
    await pilot.press("f2")
    await _settle(pilot)
    await pilot.press("ctrl+n")
    await _settle(pilot)
    await _type(pilot, *description)
    await _next_section(pilot)  # reliability
    await _new_entry(pilot, *reliability)
    await _next_section(pilot)  # validity
    await _new_entry(pilot, *validity)
    await _next_section(pilot)  # norms
    if norms:
        await _new_entry(pilot, *norms)
    await _next_section(pilot)  # subgroup differences
    if subgroups:
        await _new_entry(pilot, *subgroups)
    await _save(pilot, f"instrument {description[0]}")
    await pilot.press("escape")
    await _settle(pilot)


@pytest.mark.slow
async def test_keyboard_only_journey_on_a_new_database(db_url, app_for, tmp_path):
    app = app_for(db_url)
    memo_path = tmp_path / "memo.docx"
    async with app.run_test(size=(80, 24)) as pilot:
        await _settle(pilot)

        # 1. a job with three required attributes
        await pilot.press("f3")
        await _settle(pilot)
        await pilot.press("ctrl+n")
        await _settle(pilot)
        assert isinstance(app.screen, JobEditor)
        # key, title, analysis source, applicants' reading grade, time budget, budget per
        # applicant, staff qualification, applicants/year, hires/year, base rate, criterion SD, tenure
        await _type(pilot, "clerk", "Claims clerk", "Task list 2026", "10", "60", "40",
                    "trained", "200", "20", "0.5", "9000", "3")
        await _next_section(pilot)  # requirements: one entry is there already
        await _type(pilot, "numbers", "5", "yes")
        await _new_entry(pilot, "checking", "4", "no")
        await _new_entry(pilot, "calm", "2", "no")
        await _save(pilot, "job")

        # 2. lock the policy before any ranking, through the command palette (ctrl+k, the
        # editor's key, is taken by a text field when one has the focus)
        await pilot.press("ctrl+p")
        await _settle(pilot, 2)
        await pilot.press(*"lock policy")
        await pilot.pause(0.5)
        await pilot.press("enter")
        await _settle(pilot)
        await pilot.press("y")
        await _settle(pilot)
        assert "Locked" in str(app.screen.query_one("#banner").render())
        await pilot.press("escape")
        await _settle(pilot)

        # 3. two instruments with evidence typed by hand
        await _instrument(
            pilot,
            # key, title, publisher, edition, year, measures, minutes, mode, reading grade, cost,
            # currency, user qualification
            ["tally", "Tally Quick", "Brookfen", "", "2020", "numbers:primary", "20", "", "8", "12", "EUR",
             "trained"],
            ["retest", "0.85", "300"],
            ["job-performance", "0.35", "250"],
            ["gen", "Applicants", "1000", "2020", "national", "24", "6"],
            ["B vs A", "0.3", "500"],
        )
        await _instrument(
            pilot,
            ["ledger", "Ledger Scan", "Halloway", "", "2021", "checking:primary, numbers:secondary", "30", "",
             "9", "20", "EUR", "open"],
            ["retest", "0.82", "200"],
            ["job-performance", "0.28", "180"],
            None,
            ["B vs A", "0.2", "400"],
        )

        # 4. compare: both ranked, policy locked before the first ranking; choose the top one
        await pilot.press("f4")
        await _settle(pilot, 6)
        assert isinstance(app.screen, CompareScreen), app.screen
        compare = app.screen
        assert compare.ranking is not None, compare.error
        assert compare.ranking.policy_locked and compare.ranking.locked_before_first_ranking
        assert {r.instrument for r in compare.ranking.results} == {"tally", "ledger"}
        top = compare.ranking.top
        assert top is not None
        await pilot.press("space")
        await _settle(pilot)

        # 5. plan a cut: a raw cut on the norm group, two points up
        await pilot.press("f5")
        await _settle(pilot, 6)
        planner = app.screen
        assert isinstance(planner, PlanScreen)
        assert planner.instrument.key == top.instrument
        if planner.cut_plan.cut.raw is not None:
            await pilot.press("m")
            await _settle(pilot)
            start = planner.raw_cut
            await pilot.press("right", "right")
            await _settle(pilot)
            assert planner.cut_plan.cut.raw == start + 2
        else:
            await pilot.press("right", "right")
            await _settle(pilot)

        # 6. the Word memo
        await pilot.press("f7")
        await _settle(pilot, 6)
        assert isinstance(app.screen, MemoScreen)
        await pilot.press("w")
        await _settle(pilot, 2)
        assert isinstance(app.screen, PathPrompt)
        await pilot.press("ctrl+u", *str(memo_path), "enter")
        await _settle(pilot, 6)
        assert memo_path.exists()

    # outside the interface: the records as typed, and the engine's own ranking of them
    with Store.open(db_url) as store:
        job = store.job("clerk")
        assert [(r.attribute, r.importance, r.critical) for r in job.requirements] == [
            ("numbers", 5, True), ("checking", 4, False), ("calm", 2, False)]
        assert job.policy.locked
        assert store.instrument("tally").reliability[0].value == 0.85
        assert store.instrument("ledger").validity[0].r == 0.28
        engine_top = rank(job, store.instruments(), draws=2000, seed=0, as_of=TODAY).top
    assert engine_top.instrument == top.instrument
    document = docx.Document(str(memo_path))
    text = "\n".join(p.text for p in document.paragraphs)
    text += "\n".join(c.text for t in document.tables for row in t.rows for c in row.cells)
    assert top.title in text and "Claims clerk" in text
