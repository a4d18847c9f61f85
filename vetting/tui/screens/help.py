"""Every key of every screen, read from the bindings themselves so the list cannot drift."""

from __future__ import annotations

from collections.abc import Iterable

from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Static

from vetting.tui.widgets.footer import Footer
from vetting.tui.widgets.navbar import NavBar


def screen_classes() -> list[tuple[str, type]]:
    """(where, class) for the app and each screen whose keys the help lists."""
    from vetting.tui.app import RESULT_SCREENS, VettingApp, result_screen_class
    from vetting.tui.screens.catalogue import CatalogueScreen
    from vetting.tui.screens.instrument import InstrumentEditor
    from vetting.tui.screens.job import JobEditor, JobsScreen
    from vetting.tui.widgets.ask_path import AskPath
    from vetting.tui.widgets.confirm import Confirm, Notice

    found: list[tuple[str, type]] = [
        ("Everywhere", VettingApp),
        ("Catalogue", CatalogueScreen),
        ("Instrument editor", InstrumentEditor),
        ("Jobs", JobsScreen),
        ("Job editor", JobEditor),
    ]
    for name in RESULT_SCREENS:
        cls = result_screen_class(name)
        if cls is not None:
            found.append((name.title(), cls))
    found.append(("Questions", Confirm))
    found.append(("Messages", Notice))
    found.append(("File name", AskPath))
    found.append(("This list", HelpScreen))
    return found


def _bindings(cls: type) -> Iterable[Binding]:
    seen: set[str] = set()
    for klass in cls.__mro__:
        for binding in getattr(klass, "BINDINGS", []) or []:
            if isinstance(binding, Binding) and binding.description and binding.key not in seen:
                if klass.__module__.startswith("textual."):
                    continue
                seen.add(binding.key)
                yield binding


def key_rows(app) -> list[tuple[str, str, str, str]]:
    """(where, key, action, what it does) for every described binding."""
    rows = []
    for where, cls in screen_classes():
        for binding in _bindings(cls):
            key = app.get_key_display(binding)
            rows.append((where, key, binding.description, binding.tooltip or ""))
    rows.append(("Everywhere", app.get_key_display(Binding("ctrl+p", "command_palette")), "Commands",
                 "Search every action by name"))
    rows.append(("Everywhere", "tab / shift+tab", "Next / previous field", "Move between fields and tables"))
    return rows


class HelpScreen(Screen):
    """The key list. F1 or Escape goes back to where you were."""

    screen_name = "help"
    DEFAULT_CSS = """
    HelpScreen #keys { height: 1fr; }
    """
    BINDINGS = [
        Binding("escape,f1", "close", "Back", id="help.back", tooltip="Return to the previous screen"),
    ]

    def compose(self) -> ComposeResult:
        yield NavBar("help")
        yield Static("Keys", classes="title-bar")
        yield Static(
            "Every key, by screen. Ctrl+P searches these actions by name. Missing figures show as —.",
            classes="status-line",
        )
        yield DataTable(id="keys", cursor_type="row", zebra_stripes=True)
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        table.add_columns("Where", "Key", "Action", "What it does")
        table.add_rows(key_rows(self.app))
        table.focus()

    def on_screen_resume(self) -> None:
        # the screen is kept between showings (VettingApp.go): each showing starts at the top
        table = self.query_one(DataTable)
        table.move_cursor(row=0, animate=False)
        table.scroll_home(animate=False, immediate=True)
        table.focus()

    def action_close(self) -> None:
        self.app.pop_screen()
