"""SVG snapshots of the results screens (Compare, Plan, Gaps, Memo) at 80x24 and 160x48.

Deterministic: invented records, a fixed date (conftest.TODAY), a fixed robustness seed,
steady cursors and a fixed memo time (noon UTC on that date). After a deliberate change run
`.venv/bin/python -m pytest tests/tui/test_results_snapshots.py --snapshot-update` and look at
the new SVGs before committing."""

from __future__ import annotations

import pytest

from .test_results_screens import JOB, seeded_url  # noqa: F401  (the fixture)

SIZES = [pytest.param((80, 24), id="80x24"), pytest.param((160, 48), id="160x48")]


def _opener(name: str, *keys: str):
    async def run_before(pilot) -> None:
        async def settle(rounds: int = 4) -> None:
            for _ in range(rounds):
                await pilot.pause()
                await pilot.app.workers.wait_for_complete()
            await pilot.pause()

        await settle()
        pilot.app.current_job = JOB
        pilot.app.go(name)
        await settle(6)
        for key in keys:
            await pilot.press(key)
            await settle()
        pilot.app.clear_notifications()
        await pilot.pause()

    return run_before


@pytest.mark.parametrize("size", SIZES)
def test_compare(snap_compare, seeded_url, app_for, size):  # noqa: F811
    # two cells to the right: the reliability gate of the top row explains itself
    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=_opener("compare", "right", "right"))


@pytest.mark.parametrize("size", SIZES)
def test_compare_failing_gate(snap_compare, seeded_url, app_for, size):  # noqa: F811
    # the last row fails gates: its first gate cell shows the reason
    assert snap_compare(app_for(seeded_url), terminal_size=size,
                        run_before=_opener("compare", "down", "down"))


@pytest.mark.parametrize("size", SIZES)
def test_plan(snap_compare, seeded_url, app_for, size):  # noqa: F811
    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=_opener("plan", "right", "up"))


@pytest.mark.parametrize("size", SIZES)
def test_gaps(snap_compare, seeded_url, app_for, size):  # noqa: F811
    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=_opener("gaps"))


@pytest.mark.parametrize("size", SIZES)
def test_memo(snap_compare, seeded_url, app_for, size):  # noqa: F811
    assert snap_compare(app_for(seeded_url), terminal_size=size, run_before=_opener("memo"))


def _light(name: str, *keys: str):
    inner = _opener(name, *keys)

    async def run_before(pilot) -> None:
        await pilot.press("f8")  # the light theme
        await inner(pilot)

    return run_before


@pytest.mark.parametrize("name", ["compare", "plan"])
def test_light_theme(snap_compare, seeded_url, app_for, name):  # noqa: F811
    # pass/fail stays readable as symbols and words in the light theme too
    assert snap_compare(app_for(seeded_url), terminal_size=(80, 24), run_before=_light(name))
