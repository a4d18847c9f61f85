"""The landing screen: every instrument in one sortable table, filtered as you type.

The figures in the table come from the appraisal engine's `summarise(instrument, as_of)`;
this screen only formats them. Loading runs in a thread worker so the screen is usable at
once; filtering works in memory on a lowercase text built once per row.
"""

from __future__ import annotations

import threading
import time
from dataclasses import dataclass
from typing import Any, Callable

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.events import Key
from textual.screen import Screen
from textual.widgets import DataTable, Input, Static
from textual.worker import get_current_worker

from vetting.tui.data import CatalogueRow
from vetting.tui.widgets.fixed_table import FixedTable
from vetting.tui.widgets.footer import Footer
from vetting.tui.widgets.navbar import NavBar

NO_VALUE = "—"  # shown where the record holds no evidence for a figure


def _num(value: float | None, digits: int = 2) -> str:
    return NO_VALUE if value is None else f"{value:.{digits}f}"


def _plain(value: float | None) -> str:
    if value is None:
        return NO_VALUE
    return f"{value:g}"


def _cost(summary: Any) -> str:
    if summary.cost_per_applicant is None:
        return NO_VALUE
    text = f"{summary.cost_per_applicant:.2f}"
    return f"{text} {summary.currency}" if summary.currency else text


def _age(value: int | None) -> str:
    return NO_VALUE if value is None else f"{value} y"


_QUAL_ORDER = {"open": 0, "trained": 1, "licensed": 2}

#: rows beyond the terminal's height in the first page of a large catalogue
FIRST_PAGE_MARGIN = 10


@dataclass(frozen=True)
class Column:
    id: str
    label: str
    width: int
    cell: Callable[[CatalogueRow], str]
    sort_value: Callable[[CatalogueRow], Any]
    #: True when a larger figure is better, so the first sort puts it on top
    high_first: bool = False
    right: bool = True


COLUMNS: tuple[Column, ...] = (
    Column("title", "Title", 0, lambda r: r.title, lambda r: r.title.lower(), right=False),
    Column("minutes", "Min", 4, lambda r: _plain(r.summary.minutes), lambda r: r.summary.minutes),
    Column("grade", "Read", 4, lambda r: _plain(r.summary.reading_grade), lambda r: r.summary.reading_grade),
    Column(
        "reliability", "Rel", 4, lambda r: _num(r.summary.best_reliability),
        lambda r: r.summary.best_reliability, high_first=True,
    ),
    Column(
        "validity", "Valid", 5, lambda r: _num(r.summary.conservative_validity),
        lambda r: r.summary.conservative_validity, high_first=True,
    ),
    Column("norm_age", "Norms", 5, lambda r: _age(r.summary.norm_age_years), lambda r: r.summary.norm_age_years),
    Column("cost", "Cost", 9, lambda r: _cost(r.summary), lambda r: r.summary.cost_per_applicant),
    Column(
        "qualification", "User", 8, lambda r: r.summary.qualification or NO_VALUE,
        lambda r: _QUAL_ORDER.get(r.summary.qualification or "", None), right=False,
    ),
)
COLUMN_IDS = tuple(c.id for c in COLUMNS)
_BY_ID = {c.id: c for c in COLUMNS}
#: the title column takes what is left of the width, within these bounds
TITLE_MIN, TITLE_MAX = 16, 60


def sort_rows(rows: list[CatalogueRow], column: str, reverse: bool) -> list[CatalogueRow]:
    """Rows ordered by `column`; records without that figure always go last."""
    return SortKeys(rows).ordered(column, reverse)


class SortKeys:
    """The sort keys of one list of rows, each worked out once (a column's on its first sort).

    The order is `column`'s figure, then the title ignoring case, then the rows' own order
    (stable sorts); the records without the figure follow in their own order. It is sorted in
    two stable passes, by title (done once for every column) and then by the figure alone,
    which gives the same order as one sort on (figure, title), ties included, in either
    direction (a stable sort keeps equal keys in their order even when reversed)."""

    def __init__(self, rows: list[CatalogueRow]) -> None:
        self.rows = rows
        self._titles: list[str] | None = None
        self._by_title: dict[bool, list[int]] = {}
        self._values: dict[str, list[Any]] = {}
        self._orders: dict[tuple[str, bool], list[CatalogueRow]] = {}

    def titles(self) -> list[str]:
        if self._titles is None:
            self._titles = [r.title.lower() for r in self.rows]
        return self._titles

    def by_title(self, descending: bool) -> list[int]:
        """Row indexes in title order (ties in the rows' own order)."""
        found = self._by_title.get(descending)
        if found is None:
            titles = self.titles()
            found = self._by_title[descending] = sorted(range(len(titles)), key=titles.__getitem__,
                                                        reverse=descending)
        return found

    def values(self, column: str) -> list[Any]:
        found = self._values.get(column)
        if found is None:
            found = self._values[column] = list(map(_BY_ID[column].sort_value, self.rows))
        return found

    def prepare(self) -> "SortKeys":
        """Work out every column's keys now (done in the loading worker, off the interface)."""
        self.by_title(False)
        self.by_title(True)
        for column in COLUMN_IDS[1:]:
            self.values(column)
        return self

    def ordered(self, column: str, reverse: bool) -> list[CatalogueRow]:
        found = self._orders.get((column, reverse))
        if found is None:
            rows = self.rows
            descending = _BY_ID[column].high_first != reverse
            if column == "title":  # the figure is the title itself: (t, t) orders as t does
                order = self.by_title(descending)
                missing: list[int] = []
            else:
                values = self.values(column)
                order = [i for i in self.by_title(descending) if values[i] is not None]
                order.sort(key=values.__getitem__, reverse=descending)
                missing = [i for i, v in enumerate(values) if v is None]
            found = self._orders[(column, reverse)] = [rows[i] for i in order] + [rows[i] for i in missing]
        return found


def filter_rows(rows: list[CatalogueRow], text: str) -> list[CatalogueRow]:
    """Rows whose title, key, attributes or publisher contain every word typed."""
    words = text.lower().split()
    if not words:
        return rows
    if len(words) == 1:  # the usual case, without a generator per row
        word = words[0]
        return [r for r in rows if word in r.haystack]
    return [r for r in rows if all(w in r.haystack for w in words)]


def narrows(before: str, after: str) -> bool:
    """True when every row matching `after` also matches `before`, so the rows matching
    `before` can be filtered instead of every row: `after` is `before` with more typed at the
    end (each word of `before` is then a word of `after` or the start of its last word)."""
    return after.lower().startswith(before.lower()) and bool(before.split())


class CatalogueScreen(Screen):
    """All instruments; Enter opens one in the editor."""

    screen_name = "catalogue"
    CSS_PATH = "catalogue.tcss"
    AUTO_FOCUS = "#filter"

    BINDINGS = [
        Binding("ctrl+n", "new_instrument", "New", id="catalogue.new", tooltip="Add an instrument by hand"),
        Binding("enter", "open_selected", "Open", id="catalogue.open", tooltip="Edit the highlighted instrument"),
        Binding("ctrl+o", "next_sort", "Sort by", id="catalogue.sort", tooltip="Sort by the next column"),
        Binding("ctrl+r", "flip_sort", "Reverse", id="catalogue.reverse", tooltip="Reverse the sort order"),
        Binding("ctrl+l", "reload", "Reload", show=False, id="catalogue.reload", tooltip="Read the catalogue again"),
        Binding("ctrl+y", "delete_selected", "Delete", id="catalogue.delete",
                tooltip="Delete the highlighted instrument (asks first; kept in the audit trail)"),
        Binding("ctrl+g", "import_file", "Import", id="catalogue.import",
                tooltip="Import a catalogue file (checked first; all or nothing)"),
        Binding("escape", "clear_filter", "Clear filter", show=False, id="catalogue.clear",
                tooltip="Empty the filter box"),
        Binding("down", "to_table", "To table", show=False, id="catalogue.down", tooltip="Move into the table"),
    ]

    #: the first key after a pause this long filters at once; keys typed faster after it are
    #: taken together and applied when the typing pauses this long
    DEBOUNCE_SECONDS = 0.03
    #: the table holds at most this many rows (the best by the current sort); typing narrows
    #: the list. Sorting and filtering always work on every instrument, in memory.
    MAX_TABLE_ROWS = 100

    def __init__(self) -> None:
        super().__init__()
        self.rows: list[CatalogueRow] = []
        self.shown: list[CatalogueRow] = []
        self.sort_column = "title"
        self.sort_reverse = False
        self.loaded = False
        #: set while only the first page is on screen: how many instruments there are in all
        self.expected_total = 0
        self.first_page_shown = False
        self._filter_timer = None
        #: when the filter was last applied (time.monotonic)
        self._filtered_at = 0.0
        self._ordered: list[CatalogueRow] = []
        #: the sort keys and orders of `rows` (replaced whenever `rows` is)
        self._sort_keys: SortKeys | None = None
        #: each shown row's table cells, by key (remade when the row is read again)
        self._cells: dict[str, tuple[CatalogueRow, list[Text]]] = {}
        #: the last filter text and its rows (in the current order), to narrow from
        self._last_filter: tuple[str, list[CatalogueRow]] | None = None
        self._keys: list[str] = []
        #: True when row contents changed (a save or reload) so the table must be redrawn
        self._stale = True

    def compose(self) -> ComposeResult:
        yield NavBar("catalogue")
        with Horizontal(id="top"):
            yield Static("Catalogue", id="heading", classes="title-bar")
            yield Static("opening the database…", id="count", classes="title-bar")
        yield Input(placeholder="type to filter: title, attribute or publisher", id="filter", select_on_focus=False)
        yield FixedTable(id="table", cursor_type="row", zebra_stripes=True)
        yield Static("", id="status", classes="status-line")
        yield Footer()

    def on_mount(self) -> None:
        self._build_columns()
        self.load()

    # -- loading -----------------------------------------------------------------------------

    def _build_columns(self) -> None:
        table = self.query_one(DataTable)
        fixed = sum(self._width(c) + 2 for c in COLUMNS[1:])
        title_width = max(TITLE_MIN, min(TITLE_MAX, self.app.size.width - fixed - 4))
        if self.app.size.width > 120:
            title_width = TITLE_MAX
        for col in COLUMNS:
            label = col.label + self._arrow(col.id)
            table.add_column(label, key=col.id, width=self._width(col) if col.width else title_width)

    @staticmethod
    def _width(col: Column) -> int:
        """Room for the figures and for the label with its sort arrow."""
        return max(col.width, len(col.label) + 1)

    def _arrow(self, column: str) -> str:
        if column != self.sort_column:
            return ""
        descending = _BY_ID[column].high_first != self.sort_reverse
        return "▼" if descending else "▲"

    @work(thread=True, exclusive=True, group="catalogue-load")
    def load(self) -> None:
        worker = get_current_worker()

        def progress(done: int, total: int) -> None:
            self.app.call_from_thread(self._show_progress, done, total)

        try:
            # the first page in title order first, so the screen is usable at once on a large
            # catalogue; sorting and filtering work on every instrument once the rest is read.
            # The page is a screenful and a margin (the table later holds up to MAX_TABLE_ROWS),
            # and the rest is read only once it has been painted: reading competes with the
            # interface thread for the interpreter.
            limit = min(self.MAX_TABLE_ROWS, max(1, self.app.size.height) + FIRST_PAGE_MARGIN)
            first, total = self.app.data.catalogue_first_page(limit)
            if total > len(first) and not worker.is_cancelled:
                painted = threading.Event()
                self.app.call_from_thread(self._first_page, first, total, painted)
                painted.wait(timeout=2.0)
            rows = self.app.data.catalogue_rows(progress=progress, cancelled=lambda: worker.is_cancelled)
        except Exception as exc:  # shown to the user; the screen stays usable
            self.app.call_from_thread(self._load_failed, exc)
            return
        if not worker.is_cancelled:
            keys = SortKeys(rows).prepare()  # here, not on the interface thread
            self.app.call_from_thread(self._loaded, rows, keys)

    def _first_page(self, rows: list[CatalogueRow], total: int, painted: threading.Event | None = None) -> None:
        if painted is not None:
            self.call_after_refresh(painted.set)
        if self.loaded:
            return
        self.rows = rows
        self.expected_total = total
        self._stale = True
        self._resort()
        self._apply_filter()
        self.first_page_shown = True
        self._after_first_rows()

    def _after_first_rows(self) -> None:
        """Work that waits until the first rows are on screen (the current job for F4-F7)."""
        pick = getattr(self.app, "pick_default_job", None)
        if pick is not None:
            self.call_after_refresh(pick)

    def _show_progress(self, done: int, total: int) -> None:
        if self.rows:  # the first page is on screen: keep it, and say the rest is coming
            self.query_one("#count", Static).update(f"reading {done:,} of {total:,}…")
            return
        self.query_one("#count", Static).update(f"loading {done:,} of {total:,}…")

    def _load_failed(self, exc: Exception) -> None:
        self._after_first_rows()
        self.query_one("#count", Static).update("not loaded")
        self.query_one("#status", Static).update(f"✗ Could not read the catalogue: {exc}")
        self.notify(str(exc), title="Catalogue not loaded", severity="error", timeout=10)

    def _loaded(self, rows: list[CatalogueRow], keys: SortKeys | None = None) -> None:
        self.rows = rows
        if keys is not None and keys.rows is rows:
            self._sort_keys = keys
        self._stale = True
        self.loaded = True
        self._resort()
        self._apply_filter()
        self._after_first_rows()
        freeze = getattr(self.app, "freeze_long_lived", None)
        if freeze is not None:
            freeze()

    # -- filtering and sorting ---------------------------------------------------------------

    @on(Input.Changed, "#filter")
    def _filter_changed(self, event: Input.Changed) -> None:
        waiting = self._filter_timer is not None
        if waiting:
            self._filter_timer.stop()
            self._filter_timer = None
        if not event.value:
            # cleared (Escape, or the last character deleted): no more typing to wait for
            self._apply_filter()
            return
        if not waiting and time.monotonic() - self._filtered_at >= self.DEBOUNCE_SECONDS:
            # the first key after a pause filters at once; the keys that follow it within
            # DEBOUNCE_SECONDS are taken together when the typing pauses
            self._apply_filter()
            return
        self._filter_timer = self.set_timer(self.DEBOUNCE_SECONDS, self._apply_filter)

    def _resort(self) -> None:
        if self._sort_keys is None or self._sort_keys.rows is not self.rows:
            self._sort_keys = SortKeys(self.rows)  # new rows: their keys are worked out afresh
        self._ordered = self._sort_keys.ordered(self.sort_column, self.sort_reverse)
        self._last_filter = None

    def _apply_filter(self) -> None:
        self._filter_timer = None
        text = self.query_one("#filter", Input).value
        base = self._ordered
        last = self._last_filter
        if last is not None and narrows(last[0], text):
            base = last[1]  # typing more only narrows: filter what matched before
        shown = filter_rows(base, text)
        self._last_filter = (text, shown)
        self._fill(shown)
        self._filtered_at = time.monotonic()

    def _fill(self, shown: list[CatalogueRow]) -> None:
        table = self.query_one(DataTable)
        keep = self._keys[table.cursor_row] if 0 <= table.cursor_row < len(self._keys) else None
        self.shown = shown
        visible = shown[: self.MAX_TABLE_ROWS]
        if [r.key for r in visible] == self._keys and not self._stale:
            self._update_counts()  # same rows in the same order: nothing to redraw
            return
        self._stale = False
        table.clear()
        table.add_rows(self._row_cells(r) for r in visible)
        self._keys = [r.key for r in visible]
        if keep in self._keys:
            table.move_cursor(row=self._keys.index(keep), animate=False)
        self._update_counts()

    def _row_cells(self, row: CatalogueRow) -> list[Text]:
        """A row's cells, made once per row read (a sort or filter shows the same rows again)."""
        found = self._cells.get(row.key)
        if found is not None and found[0] is row:
            return found[1]
        # plain Text cells: no markup parsing of titles typed by people
        if len(self._cells) >= 20 * self.MAX_TABLE_ROWS:
            self._cells = {}  # a bounded memory of the rows lately shown
        cells = [Text(c.cell(row), no_wrap=True, justify="right" if c.right else "left") for c in COLUMNS]
        self._cells[row.key] = (row, cells)
        return cells

    def _update_counts(self) -> None:
        total = len(self.rows)
        shown = len(self.shown)
        count = f"{shown:,} of {total:,} instruments" if shown != total else f"{total:,} instruments"
        if not self.loaded and self.expected_total:
            count = f"first {total:,} of {self.expected_total:,} · reading the rest…"
        self.query_one("#count", Static).update(count)
        col = _BY_ID[self.sort_column]
        order = "highest first" if (col.high_first != self.sort_reverse) else "lowest first"
        if col.id == "title":
            order = "Z to A" if self.sort_reverse else "A to Z"
        status = f"sorted by {col.label.lower()} ({order}) · {NO_VALUE} = no evidence on record"
        if shown > self.MAX_TABLE_ROWS:
            status = f"first {self.MAX_TABLE_ROWS:,} of {shown:,} shown: type to narrow · " + status
        if not total:
            status = "No instruments yet. Press ctrl+n to add one, or import a catalogue file."
        elif not shown:
            status = "Nothing matches the filter. Escape clears it."
        self.query_one("#status", Static).update(status)

    def _relabel(self) -> None:
        table = self.query_one(DataTable)
        for col in COLUMNS:
            table.columns[col.id].label = Text(col.label + self._arrow(col.id))
        table.refresh()

    def set_sort(self, column: str, reverse: bool = False) -> None:
        self.sort_column = column
        self.sort_reverse = reverse
        self._relabel()
        self._resort()
        self._apply_filter()

    def action_next_sort(self) -> None:
        index = (COLUMN_IDS.index(self.sort_column) + 1) % len(COLUMN_IDS)
        self.set_sort(COLUMN_IDS[index])

    def action_flip_sort(self) -> None:
        self.set_sort(self.sort_column, not self.sort_reverse)

    @on(DataTable.HeaderSelected)
    def _header(self, event: DataTable.HeaderSelected) -> None:
        column = str(event.column_key.value)
        if column == self.sort_column:
            self.action_flip_sort()
        else:
            self.set_sort(column)

    def action_clear_filter(self) -> None:
        box = self.query_one("#filter", Input)
        box.value = ""
        box.focus()

    def action_to_table(self) -> None:
        # focus at once (Widget.focus waits for the queued messages): a key typed right after
        # Down, such as Enter, must reach the table and not the filter just left
        self.set_focus(self.query_one(DataTable))

    def action_reload(self) -> None:
        self.query_one("#count", Static).update("reloading…")
        self.load()

    # -- type-to-filter from the table -------------------------------------------------------

    def on_key(self, event: Key) -> None:
        table = self.query_one(DataTable)
        if self.focused is table and event.is_printable and event.character:
            box = self.query_one("#filter", Input)
            box.value = box.value + event.character
            box.cursor_position = len(box.value)
            box.focus()
            event.stop()
            event.prevent_default()

    # -- opening -----------------------------------------------------------------------------

    def selected_key(self) -> str | None:
        table = self.query_one(DataTable)
        if not self.shown or table.cursor_row < 0 or table.cursor_row >= len(self._keys):
            return None
        return self._keys[table.cursor_row]

    def action_open_selected(self) -> None:
        key = self.selected_key()
        if key is None:
            self.notify("No instrument is highlighted.", severity="warning")
            return
        self.app.open_instrument(key)

    @on(DataTable.RowSelected)
    def _row_selected(self, event: DataTable.RowSelected) -> None:
        event.stop()
        self.action_open_selected()

    @on(Input.Submitted, "#filter")
    def _filter_submitted(self, event: Input.Submitted) -> None:
        if self.shown:
            self.set_focus(self.query_one(DataTable))  # at once, as action_to_table

    def action_new_instrument(self) -> None:
        self.app.open_instrument(None)

    # -- deleting ----------------------------------------------------------------------------

    def action_delete_selected(self) -> None:
        key = self.selected_key()
        if key is None:
            self.notify("No instrument is highlighted.", severity="warning")
            return
        from vetting.tui.widgets.confirm import Confirm

        title = next((r.title for r in self.rows if r.key == key), key)
        question = (f"Delete instrument {key} ({title}) and all its evidence?\n"
                    "The audit trail keeps a copy of what was deleted.")

        def answered(yes: bool | None) -> None:
            if yes:
                self._delete(key)

        self.app.push_screen(Confirm(question, yes="Delete (y)", no="Keep (n)"), answered)

    @work(thread=True, group="catalogue-delete")
    def _delete(self, key: str) -> None:
        from vetting.records.errors import RecordsError

        try:
            self.app.data.delete_instrument(key, None)
        except RecordsError as exc:
            self.app.call_from_thread(self.notify, str(exc), title="Not deleted", severity="error")
            return
        self.app.call_from_thread(self.record_deleted, key)
        self.app.call_from_thread(self.notify, f"Deleted {key}.")

    # -- importing a catalogue file ---------------------------------------------------------

    def action_import_file(self) -> None:
        from vetting.tui.widgets.ask_path import AskPath

        def chosen(path: str | None) -> None:
            if path:
                self.import_file(path)

        self.app.push_screen(
            AskPath("Import which catalogue file?",
                    "The whole file is checked first; nothing is written unless every record is valid."),
            chosen,
        )

    @work(thread=True, exclusive=True, group="catalogue-import")
    def import_file(self, path: str) -> None:
        from vetting.records.errors import CatalogueError, RecordsError

        call = self.app.call_from_thread
        call(self._import_status, f"importing {path}…")
        try:
            counts = self.app.data.import_file(path)
        except CatalogueError as exc:
            call(self._import_failed, path, [str(p) for p in exc.problems], exc.truncated)
            return
        except (RecordsError, OSError) as exc:
            call(self._import_failed, path, [str(exc)], False)
            return
        call(self._imported, path, counts)

    def _import_status(self, text: str) -> None:
        self.query_one("#count", Static).update(text)

    def _import_failed(self, path: str, problems: list[str], truncated: bool) -> None:
        from vetting.tui.widgets.confirm import Notice

        shown = problems[:12]
        more = len(problems) - len(shown)
        text = "\n".join(f"✗ {p}" for p in shown)
        if more > 0 or truncated:
            text += "\n… more problems not shown (fix these first)"
        self._update_counts()
        self.app.push_screen(
            Notice(f"Nothing was imported from {path}; the database is unchanged.\n\n{text}")
        )

    def _imported(self, path: str, counts: dict[str, int]) -> None:
        summary = ", ".join(f"{v} {k}" for k, v in counts.items() if v)
        self.notify(f"Imported {summary or 'nothing new'} from {path}.", title="Import")
        self.load()

    # -- after an edit -----------------------------------------------------------------------

    def record_saved(self, key: str) -> None:
        """Refresh one row after the editor saved it."""
        self._refresh_row(key)

    @work(thread=True, group="catalogue-row")
    def _refresh_row(self, key: str) -> None:
        try:
            row = self.app.data.catalogue_row(key)
        except Exception as exc:
            self.app.call_from_thread(self.notify, str(exc), severity="error")
            return
        self.app.call_from_thread(self._replace_row, row)

    def _replace_row(self, row: CatalogueRow) -> None:
        self.rows = [r for r in self.rows if r.key != row.key] + [row]
        self._stale = True
        self._resort()
        self._apply_filter()
        if row.key in self._keys:
            self.query_one(DataTable).move_cursor(row=self._keys.index(row.key), animate=False)

    def record_deleted(self, key: str) -> None:
        self.rows = [r for r in self.rows if r.key != key]
        self._resort()
        self._apply_filter()
