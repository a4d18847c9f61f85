"""The results screens (Compare, Plan, Gaps, Memo) driven with the Pilot.

What the screens show is checked against the appraisal engine and the memo writer called
directly on the same records (the interface must show the engine's figures, not its own), and
against facts of the trade that hold whatever our code does:

* a test with no validity record fails the validity-evidence gate, and a test that measures none
  of the job's required attributes fails the job-relatedness gate (Uniform Guidelines on
  Employee Selection Procedures, 1978, sections 5B and 14: selection procedures must be job
  related and supported by validity evidence);
* with a positive validity, raising the selection ratio lowers the expected success rate of
  those selected (Taylor & Russell, 1939, the tables of expected success ratios: every table
  falls from left to right as the selection ratio grows) and lowers the cut (the upper-tail
  normal quantile falls as the tail grows; checked with scipy.stats.norm.isf);
* a Word file is a ZIP package that python-docx can open (ECMA-376, Office Open XML).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import os

import pytest
from scipy.stats import norm
from textual.widgets import DataTable, Input, Markdown, Static, TextArea

from vetting.appraisal import gap_report, plan, rank
from vetting.records.store import Store
from vetting.tui.screens.compare import CompareScreen
from vetting.tui.screens.gaps import GapsScreen
from vetting.tui.screens.memo import MemoScreen
from vetting.tui.screens.plan import PlanScreen
from vetting.tui.widgets.results_common import PathPrompt, chosen_instrument

from .conftest import TODAY, invented_catalogue

SIZES = [pytest.param((80, 24), id="80x24"), pytest.param((140, 40), id="140x40")]
JOB = "claims-clerk"


#: the records' own clock during these tests, so timestamps (and the memo's fingerprint over
#: the policy record, which holds them) are the same on every run
RECORDS_NOW = dt.datetime(2026, 5, 20, 9, 30, tzinfo=dt.timezone.utc)


@pytest.fixture
def seeded_url(db_url, monkeypatch) -> str:
    """The shared invented catalogue, with the job's base rate, criterion SD and tenure filled in
    (the planner needs them for the success rate and utility), written on a fixed clock."""
    monkeypatch.setattr("vetting.records.store.utcnow", lambda: RECORDS_NOW)
    attributes, instruments, jobs = invented_catalogue()
    job = dataclasses.replace(jobs[0], base_rate=0.5, criterion_sd=9000.0, tenure_years=3.0)
    with Store.open(db_url, user="seed-user") as store:
        for attr in attributes:
            store.save_attribute(attr)
        for inst in instruments:
            store.save_instrument(inst)
        store.save_job(job)
    return db_url


async def _open(pilot, settle, name: str, job: str = JOB):
    await settle(pilot)
    pilot.app.current_job = job
    pilot.app.go(name)
    await settle(pilot, rounds=5)
    return pilot.app.screen


def _engine_ranking(url: str):
    with Store.open(url) as store:
        return rank(store.job(JOB), store.instruments(), draws=2000, seed=0, as_of=TODAY)


def _static(screen, selector: str) -> str:
    return str(screen.query_one(selector, Static).render())


async def _move_to(pilot, screen: CompareScreen, instrument: str, column_id: str) -> None:
    table = screen.query_one(DataTable)
    row = [r.instrument for r in screen.ranking.results].index(instrument)
    column = [c.id for c in screen.cols].index(column_id)
    table.focus()
    table.move_cursor(row=row, column=column, animate=False)
    await pilot.pause()


# -- Compare -----------------------------------------------------------------------------------


@pytest.mark.parametrize("size", SIZES)
async def test_compare_shows_the_engines_ranking(seeded_url, app_for, settle, size):
    expected = _engine_ranking(seeded_url)
    app = app_for(seeded_url)
    async with app.run_test(size=size) as pilot:
        screen = await _open(pilot, settle, "compare")
        assert isinstance(screen, CompareScreen)
        assert screen.ranking is not None, screen.error
        table = screen.query_one(DataTable)
        # same order, ranks, scores and P(first) as the engine, eligible first
        assert [r.instrument for r in screen.ranking.results] == [r.instrument for r in expected.results]
        assert table.row_count == len(expected.results)
        cols = [c.id for c in screen.cols]
        for row, result in enumerate(expected.results):
            cells = [str(getattr(c, "plain", c)) for c in table.get_row_at(row)]
            assert cells[cols.index("score")].strip() == f"{result.score:.1f}"
            for gate in result.gates.values():
                assert ("✓" if gate.passed else "✗") in cells[cols.index(f"gate:{gate.name}")]
            rank_cell = cells[cols.index("rank")].strip()
            assert rank_cell == (str(result.rank) if result.eligible else "✗")
        # the facts the invented data was built for: no validity record, nothing the job needs
        by_key = {r.instrument: r for r in screen.ranking.results}
        assert not by_key["ledger-scan"].gates["validity_evidence"].passed
        assert not by_key["calm-index"].gates["job_relatedness"].passed
        # the policy version and its lock state are stated in words
        policy = _static(screen, "#policy")
        assert "Policy v1" in policy and "NOT locked" in policy and "locked before first ranking: ✗ no" in policy
        # robustness, alternatives and cautions are in the panel
        whole = _static(screen, "#whole")
        assert "Robustness" in whole and "Alternatives" in whole
        assert "local employment law" in whole
        assert not screen.query_one("#working").display  # progress gone when done


@pytest.mark.parametrize("size", SIZES)
async def test_gate_reason_shows_when_its_cell_has_focus(seeded_url, app_for, settle, size):
    expected = {r.instrument: r for r in _engine_ranking(seeded_url).results}
    app = app_for(seeded_url)
    async with app.run_test(size=size) as pilot:
        screen = await _open(pilot, settle, "compare")
        await _move_to(pilot, screen, "ledger-scan", "gate:validity_evidence")
        focus = _static(screen, "#focus")
        gate = expected["ledger-scan"].gates["validity_evidence"]
        assert "✗ FAIL" in focus and gate.reason in focus
        # moving to another gate cell explains that gate instead
        await pilot.press("right")
        gate = expected["ledger-scan"].gates["reliability"]
        focus = _static(screen, "#focus")
        assert "reliability" in focus and gate.reason in focus
        assert ("✓ PASS" if gate.passed else "✗ FAIL") in focus
        # the whole row is explained below, every gate as a word
        row = _static(screen, "#row")
        assert row.count("PASS") + row.count("FAIL") == 6


async def test_choose_remembers_eligible_and_refuses_a_failing_instrument(seeded_url, app_for, settle):
    top = _engine_ranking(seeded_url).top
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _open(pilot, settle, "compare")
        await _move_to(pilot, screen, "calm-index", "gate:job_relatedness")
        await pilot.press("space")
        assert chosen_instrument(app, JOB) is None  # fails a gate: not chosen
        await _move_to(pilot, screen, top.instrument, "gate:reliability")
        await pilot.press("enter")
        await pilot.pause()
        assert chosen_instrument(app, JOB) == top.instrument
        assert top.instrument in _static(screen, "#chosen")
        # Plan opens on the chosen instrument
        plan_screen = await _open(pilot, settle, "plan")
        assert isinstance(plan_screen, PlanScreen)
        assert plan_screen.instrument.key == top.instrument


async def test_compare_more_draws_ranks_again_in_a_worker(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _open(pilot, settle, "compare")
        assert screen.ranking.robustness.draws == 2000
        await pilot.press("d")
        await settle(pilot)
        assert screen.ranking.robustness.draws == 10000
        assert "10,000 draws" in _static(screen, "#policy")


# -- Plan --------------------------------------------------------------------------------------


@pytest.mark.parametrize("size", SIZES)
async def test_plan_follows_the_keys(seeded_url, app_for, settle, size):
    app = app_for(seeded_url)
    async with app.run_test(size=size) as pilot:
        screen = await _open(pilot, settle, "plan")
        assert isinstance(screen, PlanScreen)
        assert screen.cut_plan is not None, screen.error
        assert screen.instrument.key == "tally-quick"  # the engine's top choice (nothing chosen yet)
        with Store.open(seeded_url) as store:
            job, inst = store.job(JOB), store.instrument("tally-quick")
        default = plan(job, inst, as_of=TODAY)
        assert screen.cut_plan.selection_ratio == pytest.approx(default.selection_ratio)
        before = screen.cut_plan

        await pilot.press("right")
        await settle(pilot)
        after = screen.cut_plan
        assert after.selection_ratio == pytest.approx(round(before.selection_ratio + 0.01, 2))
        # the figures are the engine's at the new ratio
        engine = plan(job, inst, selection_ratio=after.selection_ratio, as_of=TODAY)
        assert after.cut.z == pytest.approx(engine.cut.z)
        assert after.expected_success_rate == pytest.approx(engine.expected_success_rate)
        # Taylor & Russell (1939): a larger selection ratio gives a lower success rate; the cut
        # is the upper-tail normal quantile (scipy)
        assert after.expected_success_rate < before.expected_success_rate
        assert after.cut.z == pytest.approx(norm.isf(after.selection_ratio), abs=1e-6)
        figures = _static(screen, "#figures-text")
        assert f"{after.selection_ratio:.2f}" in figures
        assert f"{engine.expected_success_rate:.1%}" in figures

        await pilot.press("up")  # large step
        await settle(pilot)
        assert screen.cut_plan.selection_ratio == pytest.approx(round(after.selection_ratio + 0.05, 2))

        # cut mode: the raw cut moves by whole points and the ratio follows
        await pilot.press("m")
        await settle(pilot)
        assert screen.mode == "cut"
        start = screen.raw_cut
        ratio_before = screen.cut_plan.selection_ratio
        await pilot.press("right")
        await settle(pilot)
        assert screen.raw_cut == start + 1
        assert screen.cut_plan.cut.raw == pytest.approx(start + 1)
        assert screen.cut_plan.selection_ratio < ratio_before  # a higher cut passes fewer people

        await pilot.press("0")  # back to the job's own ratio
        await settle(pilot)
        assert screen.cut_plan.selection_ratio == pytest.approx(default.selection_ratio)
        # the chart received the engine's sweep
        chart = screen.query_one("#chart")
        assert len(chart.ratios) == len(screen.sweep.selection_ratio)
        assert "success" in str(chart.render())


async def test_plan_instrument_without_norms_explains_raw_cut(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _open(pilot, settle, "plan")
        keys = [i.key for i in screen.instruments]
        while screen.instrument.key != "ledger-scan":
            await pilot.press("i")
            await settle(pilot)
            assert screen.instrument.key in keys
        assert screen.cut_plan is not None and screen.cut_plan.cut.raw is None
        await pilot.press("m")
        await settle(pilot)
        assert screen.mode == "ratio"  # refused: no norm group to put a raw cut on
        assert "Band" in _static(screen, "#figures-text")


# -- Gaps --------------------------------------------------------------------------------------


@pytest.mark.parametrize("size", SIZES)
async def test_gaps_list_and_letter_saved(seeded_url, app_for, settle, size, tmp_path):
    with Store.open(seeded_url) as store:
        report = gap_report(store.instrument("calm-index"), job=store.job(JOB), as_of=TODAY)
    assert report.gaps  # no reliability, validity or norms on record: a reviewer asks for them
    app = app_for(seeded_url)
    async with app.run_test(size=size) as pilot:
        screen = await _open(pilot, settle, "gaps")
        assert isinstance(screen, GapsScreen)
        table = screen.query_one(DataTable)
        row = [r.instrument for r in screen.reports].index("calm-index")
        table.move_cursor(row=row, animate=False)
        await pilot.pause()
        listed = _static(screen, "#gap-list")
        for gap in report.gaps:
            assert gap.text in listed
        letter = screen.query_one(TextArea)
        assert letter.read_only and letter.text == report.letter
        target = tmp_path / "letter.txt"
        await pilot.press("s")
        await pilot.pause()
        assert isinstance(app.screen, PathPrompt)
        app.screen.query_one(Input).value = str(target)
        await pilot.press("enter")
        await settle(pilot)
        assert target.read_text(encoding="utf-8") == report.letter
        assert str(target) in _static(screen, "#status")


async def test_gaps_save_to_a_missing_folder_says_so(seeded_url, app_for, settle, tmp_path):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _open(pilot, settle, "gaps")
        row = [r.instrument for r in screen.reports].index("calm-index")
        screen.query_one(DataTable).move_cursor(row=row, animate=False)
        await pilot.pause()
        await pilot.press("s")
        await pilot.pause()
        app.screen.query_one(Input).value = str(tmp_path / "no-such-folder" / "letter.txt")
        await pilot.press("enter")
        await settle(pilot)
        status = _static(screen, "#status")
        assert "Not saved" in status and "does not exist" in status
        assert not (tmp_path / "no-such-folder").exists()


# -- Memo --------------------------------------------------------------------------------------


@pytest.mark.parametrize("size", SIZES)
async def test_memo_preview_and_word_export(seeded_url, app_for, settle, size, tmp_path):
    import docx

    top = _engine_ranking(seeded_url).top
    app = app_for(seeded_url)
    async with app.run_test(size=size) as pilot:
        screen = await _open(pilot, settle, "memo")
        assert isinstance(screen, MemoScreen)
        assert screen.markdown, screen.error
        assert top.title in screen.markdown
        assert "local employment law" in screen.markdown  # the memo's cautions
        assert "vetting-memo-stamp" not in screen.markdown  # the machine stamp is not previewed
        assert screen.query_one("#memo-md", Markdown).source == screen.markdown
        # the preview's tables are one widget each, and the ranking's first row is the engine's top
        from rich.console import Console

        from vetting.tui.screens.memo import PreviewTable

        tables = list(screen.query(PreviewTable))
        assert tables and not screen.query("MarkdownTableCellContents")
        ranked = [t for t in tables if t.rows and top.title in t.rows[0][0].plain]
        assert ranked, [t.rows[0][0].plain for t in tables if t.rows]
        console = Console(width=156, record=True, file=open(os.devnull, "w"))  # the pane at 160 columns
        console.print(ranked[0].table)
        assert f"{top.title} ({top.instrument})" in console.export_text()
        target = tmp_path / "memo.docx"
        await pilot.press("w")
        await pilot.pause()
        assert isinstance(app.screen, PathPrompt)
        app.screen.query_one(Input).value = str(target)
        await pilot.press("enter")
        await settle(pilot, rounds=6)
        assert target.exists()
        assert str(target) in _static(screen, "#written")
    document = docx.Document(str(target))
    text = "\n".join(p.text for p in document.paragraphs)
    text += "\n".join(cell.text for table in document.tables for row in table.rows for cell in row.cells)
    assert top.title in text
    assert "DRAFT" in text.upper()


async def test_memo_markdown_and_html_exports(seeded_url, app_for, settle, tmp_path):
    from html.parser import HTMLParser

    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _open(pilot, settle, "memo")
        for key, name in (("k", "memo.md"), ("h", "memo.html")):
            await pilot.press(key)
            await pilot.pause()
            app.screen.query_one(Input).value = str(tmp_path / name)
            await pilot.press("enter")
            await settle(pilot)
        assert screen.written == [tmp_path / "memo.md", tmp_path / "memo.html"]
    md = (tmp_path / "memo.md").read_text(encoding="utf-8")
    assert md.startswith("# ")
    parser = HTMLParser()
    parser.feed((tmp_path / "memo.html").read_text(encoding="utf-8"))  # parses without error
    parser.close()


async def test_memo_unwritable_path_leaves_nothing(seeded_url, app_for, settle, tmp_path):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _open(pilot, settle, "memo")
        await pilot.press("w")
        await pilot.pause()
        out = tmp_path / "out"
        out.mkdir()
        app.screen.query_one(Input).value = str(out)  # a folder, not a file
        await pilot.press("enter")
        await settle(pilot)
        written = _static(screen, "#written")
        assert "not written" in written and "folder" in written
    assert list(out.iterdir()) == []  # nothing half-written


async def test_final_memo_is_recorded_as_a_decision(seeded_url, app_for, settle, tmp_path):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _open(pilot, settle, "memo")
        await pilot.press("f")
        await settle(pilot)
        assert screen.final and "FINAL" in _static(screen, "#state")
        await pilot.press("k")
        await pilot.pause()
        app.screen.query_one(Input).value = str(tmp_path / "final.md")
        await pilot.press("enter")
        await settle(pilot)
    from vetting.memo.api import verify

    with Store.open(seeded_url) as store:
        check = verify(store, str(tmp_path / "final.md"))
        assert check.matches and check.decision is not None



async def test_no_color_keeps_pass_and_fail_readable(seeded_url, app_for, settle, monkeypatch):
    # NO_COLOR (no-color.org): colour is dropped, and the symbols and words still tell pass from fail
    monkeypatch.setenv("NO_COLOR", "1")
    app = app_for(seeded_url)
    async with app.run_test(size=(120, 30)) as pilot:
        screen = await _open(pilot, settle, "compare")
        assert app.no_color
        await _move_to(pilot, screen, "calm-index", "gate:job_relatedness")
        assert "✗ FAIL" in _static(screen, "#focus")
        svg = app.export_screenshot()
        assert "✗" in svg and "✓" in svg


async def test_compare_next_job_ranks_that_job(seeded_url, app_for, settle):
    from vetting.records.domain import Job, Requirement

    with Store.open(seeded_url) as store:
        store.save_job(Job(key="steady-role", title="Steady role", requirements=[Requirement("steadiness", 5, True)]))
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _open(pilot, settle, "compare")
        assert screen.ranking.job == JOB
        await pilot.press("j")
        await settle(pilot, rounds=5)
        assert screen.ranking.job == "steady-role" and app.current_job == "steady-role"
        # only calm-index measures steadiness: the others fail job relatedness (UGESP 1978)
        by_key = {r.instrument: r for r in screen.ranking.results}
        assert by_key["calm-index"].gates["job_relatedness"].passed
        assert not by_key["tally-quick"].gates["job_relatedness"].passed
