"""SVG snapshots of each screen at 80x24 and 160x48 (pytest-textual-snapshot).

Fixed invented data, a fixed date and steady cursors keep them deterministic. After a
deliberate change: `.venv/bin/python -m pytest tests/tui --snapshot-update`, then look at the
new SVGs before committing."""

from __future__ import annotations

import pytest
from textual.widgets import TabbedContent

from vetting.tui.widgets.form import RecordBlock

SIZES = [pytest.param((80, 24), id="80x24"), pytest.param((160, 48), id="160x48")]


async def _settle(pilot) -> None:
    for _ in range(4):
        await pilot.pause()
        await pilot.app.workers.wait_for_complete()
    await pilot.pause()


@pytest.mark.parametrize("size", SIZES)
def test_catalogue(snap_compare, seeded_url, app_for, size):
    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=_settle)


@pytest.mark.parametrize("size", SIZES)
def test_catalogue_filtered(snap_compare, seeded_url, app_for, size):
    async def run_before(pilot):
        await _settle(pilot)
        await pilot.press(*"brookfen")
        await pilot.pause(0.3)
        await _settle(pilot)

    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=run_before)


@pytest.mark.parametrize("size", SIZES)
def test_instrument_editor_with_a_broken_rule(snap_compare, seeded_url, app_for, size):
    async def run_before(pilot):
        await _settle(pilot)
        pilot.app.open_instrument("tally-quick")
        await _settle(pilot)
        field = pilot.app.screen.query_one(".description", RecordBlock).fields["minutes"]
        field.edit()
        field.input.value = "-5"
        await _settle(pilot)

    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=run_before)


def _editor_section(opener: str, key: str, section: str):
    """run_before: open the editor (app.open_instrument / open_job) on `key` at `section`."""

    async def run_before(pilot):
        await _settle(pilot)
        getattr(pilot.app, opener)(key)
        await _settle(pilot)
        pilot.app.screen.query_one("#sections", TabbedContent).active = section
        await _settle(pilot)
        pilot.app.screen.focus_first_input()
        await _settle(pilot)

    return run_before


@pytest.mark.parametrize("size", SIZES)
def test_instrument_editor_norms(snap_compare, seeded_url, app_for, size):
    run_before = _editor_section("open_instrument", "tally-quick", "norms")
    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=run_before)


@pytest.mark.parametrize("size", SIZES)
def test_jobs(snap_compare, seeded_url, app_for, size):
    async def run_before(pilot):
        await _settle(pilot)
        await pilot.press("f3")
        await _settle(pilot)

    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=run_before)


@pytest.mark.parametrize("size", SIZES)
def test_job_editor_policy(snap_compare, seeded_url, app_for, size):
    run_before = _editor_section("open_job", "claims-clerk", "policy")
    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=run_before)


@pytest.mark.parametrize("size", SIZES)
def test_unsaved_changes_question(snap_compare, seeded_url, app_for, size):
    async def run_before(pilot):
        await _settle(pilot)
        pilot.app.open_instrument("ledger-scan")
        await _settle(pilot)
        field = pilot.app.screen.query_one(".description", RecordBlock).fields["title"]
        field.input.value = "Ledger Scan (changed)"
        await _settle(pilot)
        await pilot.press("escape")
        await _settle(pilot)

    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=run_before)


@pytest.mark.parametrize("size", SIZES)
def test_keys(snap_compare, db_url, app_for, size):
    async def run_before(pilot):
        await _settle(pilot)
        await pilot.press("f1")
        await _settle(pilot)

    assert snap_compare(app_for(db_url), terminal_size=size, run_before=run_before)


def test_catalogue_light_theme(snap_compare, seeded_url, app_for):
    async def run_before(pilot):
        await _settle(pilot)
        await pilot.press("f8")
        await _settle(pilot)

    assert snap_compare(app_for(seeded_url), terminal_size=(80, 24), run_before=run_before)


def test_broken_rule_without_colour(snap_compare, seeded_url, app_for, monkeypatch):
    """With NO_COLOR set the failed rule still reads as failed: the ✗ and the words carry it."""
    monkeypatch.setenv("NO_COLOR", "1")
    app = app_for(seeded_url)
    assert app.no_color

    async def run_before(pilot):
        await _settle(pilot)
        pilot.app.open_instrument("tally-quick")
        await _settle(pilot)
        field = pilot.app.screen.query_one(".description", RecordBlock).fields["minutes"]
        field.edit()
        field.input.value = "0"
        await _settle(pilot)
        assert "✗ minutes must be a number greater than 0" in str(field.query_one(".field-message").render())

    assert snap_compare(app, terminal_size=(80, 24), run_before=run_before)
