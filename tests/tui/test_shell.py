"""The app shell: keys screen generated from the bindings, the command palette listing every
action, navigation by function keys, the hook for the results screens, themes and NO_COLOR."""

from __future__ import annotations

import sys
import types

from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Static

from vetting.tui import app as app_module
from vetting.tui.app import ActionsProvider, VettingApp
from vetting.tui.screens.catalogue import CatalogueScreen
from vetting.tui.screens.help import HelpScreen, key_rows, screen_classes
from vetting.tui.screens.job import JobsScreen


def _described(cls) -> set[str]:
    found = set()
    for klass in cls.__mro__:
        for b in getattr(klass, "BINDINGS", []) or []:
            if isinstance(b, Binding) and b.description and not klass.__module__.startswith("textual."):
                found.add(b.description)
    return found


async def test_keys_screen_lists_every_binding(db_url, app_for, settle):
    app = app_for(db_url)
    async with app.run_test(size=(160, 48)) as pilot:
        await settle(pilot)
        await pilot.press("f1")
        await settle(pilot)
        assert isinstance(app.screen, HelpScreen)
        table = app.screen.query_one(DataTable)
        listed = {(str(table.get_row_at(i)[0]), str(table.get_row_at(i)[2])) for i in range(table.row_count)}
        for where, cls in screen_classes():
            for description in _described(cls):
                assert (where, description) in listed, (where, description)
        assert table.row_count == len(key_rows(app))
        await pilot.press("pagedown", "pagedown")
        await settle(pilot)
        assert table.cursor_row > 0 and table.scroll_offset.y > 0
        await pilot.press("escape")
        await settle(pilot)
        assert isinstance(app.screen, CatalogueScreen)
        # kept between showings, and each showing starts at the top with the same list
        help_screen = app.get_screen("help")
        await pilot.press("f1")
        await settle(pilot)
        assert app.screen is help_screen
        assert table.cursor_row == 0 and table.scroll_offset.y == 0
        assert table.row_count == len(key_rows(app))
        assert app.focused is table
        await pilot.press("f1")
        await settle(pilot)
        assert isinstance(app.screen, CatalogueScreen)


async def test_palette_lists_every_action_of_the_screen_and_app(db_url, app_for, settle):
    app = app_for(db_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        provider = ActionsProvider(app.screen)
        titles = [hit.text async for hit in provider.discover()]
        expected = _described(CatalogueScreen) | _described(VettingApp)
        assert expected <= set(titles)
        # choosing a command from the palette runs it
        await pilot.press("ctrl+p")
        await settle(pilot)
        await pilot.press(*"Jobs")
        await pilot.pause(0.5)
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, JobsScreen)


async def test_function_keys_move_between_screens(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await pilot.press("f3")
        await settle(pilot)
        assert isinstance(app.screen, JobsScreen)
        await pilot.press("f2")
        await settle(pilot)
        assert isinstance(app.screen, CatalogueScreen)
        assert len(app.screen_stack) == 2  # nothing piles up under the catalogue
        nav = str(app.screen.query_one("NavBar", Static).render())
        assert "▸F2 Catalogue" in nav  # where you are, marked without colour


async def test_results_screens_plug_in_by_name(seeded_url, app_for, settle, monkeypatch):
    """The agreed hook: vetting.tui.screens.<name>.<Name>Screen(store_url, job_key)."""
    made = {}

    class FakeCompare(Screen):
        def __init__(self, store_url: str, job_key: str | None = None) -> None:
            super().__init__()
            made["args"] = (store_url, job_key)

        def compose(self):
            yield Static("compare here")

    module = types.ModuleType("vetting_test_fake_compare")
    module.CompareScreen = FakeCompare
    monkeypatch.setitem(sys.modules, "vetting_test_fake_compare", module)
    monkeypatch.setitem(app_module.RESULT_SCREENS, "compare", ("vetting_test_fake_compare", "CompareScreen"))
    monkeypatch.setitem(app_module.RESULT_SCREENS, "plan", ("vetting_test_no_such_module", "PlanScreen"))
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        # no job highlighted yet: the first job (in the Jobs screen's order) is the current one
        assert app.current_job == min(app.data.jobs(), key=lambda j: j.title.lower()).key
        app.current_job = "claims-clerk"
        await pilot.press("f4")
        await settle(pilot)
        assert isinstance(app.screen, FakeCompare)
        assert made["args"] == (seeded_url, "claims-clerk")
        await pilot.press("f5")  # a results screen that is not installed says so
        await settle(pilot)
        assert isinstance(app.screen, FakeCompare)
        assert any("not installed" in str(n.message) for n in app._notifications)


async def test_results_keys_on_an_empty_database_ask_for_a_job(db_url, app_for, settle):
    app = app_for(db_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        assert app.current_job is None
        await pilot.press("f4")
        await settle(pilot)
        assert isinstance(app.screen, CatalogueScreen)
        assert any("Choose a job first" in str(n.message) for n in app._notifications)


async def test_light_and_dark_themes(db_url, app_for, settle):
    app = app_for(db_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        assert app.theme == "textual-dark"
        await pilot.press("f8")
        assert app.theme == "textual-light"
        await pilot.press("f8")
        assert app.theme == "textual-dark"


def test_no_color_is_honoured(db_url, monkeypatch):
    """NO_COLOR (no-color.org, 2017: 'when present... prevents the addition of ANSI color')."""
    monkeypatch.setenv("NO_COLOR", "1")
    app = VettingApp(db_url)
    assert app.no_color


async def test_quit_without_changes_exits(db_url, app_for, settle):
    app = app_for(db_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await pilot.press("ctrl+q")
        await pilot.pause()
    assert app.return_value == 0
