"""Gaps: the evidence still missing per instrument, and the request letter to its publisher.

Both come from the appraisal engine (`vetting.appraisal.gap_report`, judged by the job's
policy). The letter sits in a read-only text area (select and copy it), `y` copies all of it
to the clipboard, and `s` saves it to a file (written whole or not at all).
"""

from __future__ import annotations

from pathlib import Path

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import Screen
from textual.widgets import DataTable, Static, TextArea

from vetting.tui.widgets.fixed_table import FixedTable
from vetting.tui.widgets.footer import Footer
from vetting.tui.widgets.navbar import NavBar
from vetting.tui.widgets.results_common import PathPrompt, as_of, chosen_instrument, store_of

NO_GAPS_LETTER = "Nothing to ask for: no evidence gap was found for this instrument."


def gaps_text(report) -> Text:
    text = Text()
    text.append(f"{report.title} ({report.instrument})", style="bold")
    if report.publisher:
        text.append(f" · {report.publisher}")
    text.append("\n")
    if not report.gaps:
        text.append("✓ No evidence gaps found.\n")
        return text
    text.append(f"{len(report.gaps)} still missing:\n")
    for gap in report.gaps:
        text.append(f"  ✗ {gap.text}", style="")
        text.append(f"  [{gap.code}]\n", style="dim")
    return text


def _cells(report) -> tuple[Text, Text]:
    count = len(report.gaps)
    return (Text(report.title, no_wrap=True, overflow="ellipsis"), Text(f"{count:>3}" if count else "  ✓"))


def default_letter_path(instrument_key: str) -> str:
    return str(Path.cwd() / f"request-{instrument_key}.txt")


class GapsScreen(Screen):
    """Missing evidence per instrument; the letter for the highlighted one."""

    screen_name = "gaps"
    CSS_PATH = "gaps.tcss"
    AUTO_FOCUS = "#instruments"

    BINDINGS = [
        Binding("s", "save_letter", "Save letter", id="gaps.save", tooltip="Write the request letter to a file"),
        Binding("y", "copy_letter", "Copy letter", id="gaps.copy",
                tooltip="Copy the whole letter to the clipboard (terminals that allow it)"),
        Binding("r", "reload", "Reload", id="gaps.reload", tooltip="Read the records again"),
    ]

    def __init__(self, store_url: str, job_key: str | None = None) -> None:
        super().__init__()
        self.store_url = store_url
        self.job_key = job_key
        self.reports: list = []

    def compose(self) -> ComposeResult:
        yield NavBar("gaps")
        yield Static(f"Gaps · {self.job_key or 'no job'}", id="heading", classes="title-bar")
        with Horizontal(id="body"):
            self._table = FixedTable(id="instruments", cursor_type="row", zebra_stripes=True)
            yield self._table
            with Vertical(id="right"):
                with VerticalScroll(id="list", can_focus=False):
                    yield Static("loading…", id="gap-list")
                yield Static("Request letter · y copies · s saves · Tab to select",
                             id="letter-label", classes="status-line")
                yield TextArea("", id="letter", read_only=True, soft_wrap=True, show_line_numbers=False)
        yield Static("", id="status", classes="status-line")
        yield Footer()

    def on_unmount(self) -> None:
        # let go of the results and the table's rows when the screen closes: they hold no
        # reference cycles, so they are freed at once, and the garbage collector (which frees
        # the screen's widgets later) does not have to scan them (10,000 rows at 10,000
        # instruments)
        self.reports = []
        table = getattr(self, "_table", None)
        if table is not None:
            table.clear()

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        table.add_column("Instrument", key="title", width=max(16, min(40, self.app.size.width // 3 - 7)))
        table.add_column("Gaps", key="gaps", width=4)
        # read once the screen is painted (a worker started here competes with the first paint)
        self.call_after_refresh(self.load)

    @work(thread=True, exclusive=True, group="gaps-load")
    def load(self) -> None:
        from vetting.appraisal import gap_report
        from vetting.records.gcpause import gc_pause
        from vetting.tui.data import drop_in_steps

        try:
            store = store_of(self, self.store_url)
            job = store.job(self.job_key) if self.job_key else None
            day = as_of(self)
            # no collection in the middle of this bulk work (it would hold the interface's keys
            # for as long as it runs; see vetting.records.gcpause)
            with gc_pause():
                instruments = sorted(store.instruments(), key=lambda i: i.title.lower())
                reports = [gap_report(inst, job=job, as_of=day) for inst in instruments]
                drop_in_steps(instruments)  # not all at once: that held the keys (see drop_in_steps)
        except Exception as exc:
            self.app.call_from_thread(self._failed, exc)
            return
        # the table's cells are made here, off the interface thread
        rows = [(report.instrument, _cells(report)) for report in reports]
        self.app.call_from_thread(self._loaded, reports, job, rows)

    def _failed(self, exc: Exception) -> None:
        self.query_one("#gap-list", Static).update(Text(f"✗ Could not read the records: {exc}", style="bold"))

    #: rows added at once; the rest follow in batches with keys handled in between
    FIRST_ROWS = 120
    BATCH_ROWS = 200

    def _loaded(self, reports, job, rows: list | None = None) -> None:
        self.reports = reports
        if job is not None:
            self.query_one("#heading", Static).update(Text(
                f"Gaps · {job.title} ({job.key}) · judged by its policy", no_wrap=True, overflow="ellipsis"))
        if rows is None:
            rows = [(report.instrument, _cells(report)) for report in reports]
        table = self.query_one(DataTable)
        table.clear()
        for key, cells in rows[: self.FIRST_ROWS]:
            table.add_row(*cells, key=key)
        if not reports:
            self.query_one("#gap-list", Static).update("No instruments on record. Add some on the Catalogue (F2).")
            return
        keys = [r.instrument for r in reports]
        chosen = chosen_instrument(self.app, self.job_key)
        row = keys.index(chosen) if chosen in keys else 0
        table.move_cursor(row=row if row < table.row_count else 0, animate=False)
        self._show()
        if len(rows) > self.FIRST_ROWS:
            self.run_worker(self._add_rest(table, rows, row), group="gaps-fill", exclusive=True)

    async def _add_rest(self, table: DataTable, rows: list, wanted: int) -> None:
        import asyncio

        for start in range(self.FIRST_ROWS, len(rows), self.BATCH_ROWS):
            await asyncio.sleep(0)  # keys and painting in between batches
            if table.row_count != start:  # filled again meanwhile
                return
            for key, cells in rows[start : start + self.BATCH_ROWS]:
                table.add_row(*cells, key=key)
            if wanted and start <= wanted < table.row_count:
                table.move_cursor(row=wanted, animate=False)

    def current(self):
        table = self.query_one(DataTable)
        if not self.reports or not (0 <= table.cursor_row < len(self.reports)):
            return None
        return self.reports[table.cursor_row]

    @on(DataTable.RowHighlighted)
    def _highlighted(self, event: DataTable.RowHighlighted) -> None:
        self._show()

    def _show(self) -> None:
        report = self.current()
        if report is None:
            return
        self.query_one("#gap-list", Static).update(gaps_text(report))
        self.query_one("#letter", TextArea).load_text(report.letter or NO_GAPS_LETTER)

    # -- the letter --------------------------------------------------------------------------

    def action_copy_letter(self) -> None:
        report = self.current()
        if report is None or not report.letter:
            self.notify("There is no letter to copy.", severity="warning")
            return
        self.app.copy_to_clipboard(report.letter)
        self.notify("Letter copied to the clipboard (if your terminal allows it; otherwise save it with s).")

    def action_save_letter(self) -> None:
        report = self.current()
        if report is None or not report.letter:
            self.notify("There is no letter to save: nothing is missing.", severity="warning")
            return

        def answered(path: str | None) -> None:
            if path:
                self.save_letter(report.letter, path)

        self.app.push_screen(PathPrompt(f"Save the request letter for {report.instrument} to:",
                                        default_letter_path(report.instrument)), answered)

    @work(thread=True, group="gaps-save")
    def save_letter(self, letter: str, path: str) -> None:
        from vetting.memo.api import MemoError, write_atomic

        try:
            written = write_atomic(path, letter.encode("utf-8"))
        except (MemoError, OSError) as exc:
            self.app.call_from_thread(self._saved, None, str(exc).replace("--out ", ""))
            return
        self.app.call_from_thread(self._saved, written, None)

    def _saved(self, path: Path | None, problem: str | None) -> None:
        status = self.query_one("#status", Static)
        if path is None:
            status.update(Text(f"✗ Not saved: {problem}", style="bold"))
            self.notify(problem or "not saved", title="Letter not saved", severity="error", timeout=10)
        else:
            status.update(f"✓ Letter saved to {path}")
            self.notify(f"Saved to {path}", title="Letter saved")

    def action_reload(self) -> None:
        self.load()
