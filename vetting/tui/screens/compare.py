"""Compare: the ranking of the whole catalogue for one job, from the appraisal engine.

The table shows each instrument's rank, its six gates (✓ / ✗, never colour alone), score,
probability of ranking first and warnings; the panel below explains the highlighted cell
(a gate's reason, a component's raw figure and mapping) and the whole row, then the
robustness, the alternatives analysis and the cautions. Space or Enter chooses the
highlighted instrument for the Plan and Memo screens.

Ranking (with its robustness draws) runs in a thread worker with a progress bar; this screen
only formats the engine's `Ranking`.
"""

from __future__ import annotations

from dataclasses import dataclass

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widgets import DataTable, ProgressBar, Static
from textual.worker import get_current_worker

from vetting.tui.widgets.fixed_table import FixedTable
from vetting.tui.widgets.footer import Footer
from vetting.tui.widgets.navbar import NavBar
from vetting.tui.widgets.results_common import (
    FAIL_MARK,
    GATE_LABELS,
    NO_VALUE,
    PASS_MARK,
    CautionLine,
    CautionsScreen,
    as_of,
    chosen_instrument,
    num,
    pct,
    remember_choice,
    store_of,
    words,
)

#: robustness draws: the usual number, and the larger one a key switches to
DRAWS = (2000, 10000)
SEED = 0

COMPONENT_LABELS = {
    "coverage": "Cov",
    "validity": "Vald",
    "reliability": "Reli",
    "norms": "Norm",
    "fairness": "Fair",
    "practicality": "Prac",
}


@dataclass(frozen=True)
class Col:
    id: str
    label: str
    width: int
    kind: str  # "rank", "title", "gate", "score", "p_best", "warnings", "component"
    name: str = ""


def columns_for(width: int) -> list[Col]:
    """The table's columns for a terminal `width` (component columns when there is room)."""
    from vetting.appraisal.types import COMPONENT_NAMES, GATE_ORDER

    cols = [Col("rank", " #", 4, "rank"), Col("title", "Instrument", 0, "title")]
    cols += [Col(f"gate:{g}", GATE_LABELS.get(g, g[:4]), len(GATE_LABELS.get(g, g[:4])) + 1, "gate", g)
             for g in GATE_ORDER]
    cols += [Col("score", "Score", 6, "score"), Col("p_best", "P(1st)", 7, "p_best")]
    if width >= 130:
        cols += [Col(f"comp:{c}", COMPONENT_LABELS.get(c, c[:4]), 5, "component", c) for c in COMPONENT_NAMES]
    cols.append(Col("warnings", " ⚠", 3, "warnings"))
    return cols


def cell(col: Col, result, chosen: str | None) -> Text | str:
    if col.kind == "rank":
        mark = "▶" if result.instrument == chosen else ""
        return Text(f"{mark or ' '}{result.rank if result.rank is not None else '✗'}", no_wrap=True)
    if col.kind == "title":
        return Text(result.title, no_wrap=True, overflow="ellipsis")
    if col.kind == "gate":
        gate = result.gates.get(col.name)
        if gate is None:
            return NO_VALUE
        if gate.passed:
            return Text(" ✓!" if gate.warning else " ✓", style="green")
        return Text(" ✗", style="bold red")
    if col.kind == "score":
        return Text(f"{result.score:5.1f}")
    if col.kind == "p_best":
        return Text(f"{pct(result.p_best) if result.eligible else NO_VALUE:>6}")
    if col.kind == "component":
        comp = result.components.get(col.name)
        return Text(f"{num(comp.value if comp else None):>4}")
    if col.kind == "warnings":
        return Text(f"{len(result.warnings):>2}" if result.warnings else "")
    return ""


def focus_text(col: Col | None, result) -> Text:
    """One line or two about the highlighted cell."""
    text = Text()
    if col is None:
        return text
    if col.kind == "gate":
        gate = result.gates.get(col.name)
        if gate is not None:
            text.append(f"Gate {words(gate.name)}: ", style="bold")
            text.append(PASS_MARK if gate.passed else FAIL_MARK, style="bold green" if gate.passed else "bold red")
            text.append(f" — {gate.reason}")
            if gate.warning:
                text.append(f"\n  ⚠ {gate.warning}")
    elif col.kind == "component":
        comp = result.components.get(col.name)
        if comp is not None:
            text.append(f"Component {words(comp.name)} = {num(comp.value)}: ", style="bold")
            text.append(comp.raw_text)
            text.append(f"\n  mapping: {comp.mapping}", style="italic")
    elif col.kind == "p_best":
        text.append("Probability of ranking first: ", style="bold")
        text.append(pct(result.p_best) if result.eligible else "not ranked (fails a gate)")
    elif col.kind == "score":
        text.append("Score: ", style="bold")
        text.append(f"{result.score:.1f} of 100, the policy-weighted sum of the six components (missing ones count 0)")
    elif col.kind == "warnings":
        text.append("Warnings: ", style="bold")
        text.append("; ".join(w.text for w in result.warnings) or "none")
    elif col.kind == "rank":
        text.append("Rank: ", style="bold")
        text.append(f"{result.rank}" if result.rank is not None else "not ranked: fails "
                    + ", ".join(words(g.name) for g in result.failed_gates))
    return text


def row_text(result, chosen: str | None) -> Text:
    """Everything the engine says about one instrument."""
    text = Text()
    text.append(f"{result.title} ({result.instrument})", style="bold")
    if result.publisher:
        text.append(f" · {result.publisher}")
    text.append("\n")
    if result.eligible:
        text.append(f"Rank {result.rank} · score {result.score:.1f} · P(ranks first) {pct(result.p_best)}")
    else:
        failed = ", ".join(words(g.name) for g in result.failed_gates)
        text.append(f"✗ Not eligible (fails: {failed}) · score {result.score:.1f} shown for reference")
    if result.instrument == chosen:
        text.append("  ▶ CHOSEN for Plan and Memo", style="bold reverse")
    text.append("\n\nGates\n", style="bold underline")
    for gate in result.gates.values():
        text.append(f"  {PASS_MARK if gate.passed else FAIL_MARK}", style="bold green" if gate.passed else "bold red")
        text.append(f" {words(gate.name)}: {gate.reason}\n")
        if gate.warning:
            text.append(f"      ⚠ {gate.warning}\n")
    text.append("\nComponents (0..1; — = no evidence, counts 0)\n", style="bold underline")
    for comp in result.components.values():
        text.append(f"  {words(comp.name):<13}{num(comp.value):>5}  ", style="bold")
        text.append(f"{comp.raw_text}\n")
    if result.impact_ratio is not None:
        text.append(f"  expected impact ratio at the job's selection ratio: {num(result.impact_ratio)}\n")
    text.append("\nWarnings\n", style="bold underline")
    if result.warnings:
        for w in result.warnings:
            text.append(f"  ⚠ {w.code}: {w.text}\n")
    else:
        text.append("  none\n")
    return text


def ranking_text(ranking) -> Text:
    """Robustness, alternatives, ranking-wide warnings and the cautions."""
    text = Text()
    rob = ranking.robustness
    text.append("\nRobustness\n", style="bold underline")
    text.append(f"  {rob.method}\n" if rob.method else f"  {rob.draws:,} draws, seed {rob.seed}\n")
    for key, p in sorted(rob.p_best.items(), key=lambda kv: -kv[1]):
        if p > 0:
            text.append(f"  P(ranks first) {pct(p):>5}  {key}\n")
    flip = rob.smallest_flip
    if flip is not None:
        text.append(
            f"  Smallest single weight change that changes the top choice: {words(flip.weight)} "
            f"{flip.from_value:g} → {flip.to_value:.3g} puts {flip.new_top} level with the top choice.\n"
        )
    else:
        text.append("  No single weight change can change the top choice.\n")
    alt = ranking.alternatives
    text.append("\nAlternatives\n", style="bold underline")
    text.append(f"  {alt.rule}\n", style="italic")
    if alt.alternatives:
        for a in alt.alternatives:
            text.append(f"  • {a.title} ({a.instrument}): {a.reason}\n")
    else:
        text.append(f"  {alt.note or 'None found.'}\n")
    if ranking.warnings:
        text.append("\nAbout this ranking\n", style="bold underline")
        for w in ranking.warnings:
            text.append(f"  ⚠ {w.code}: {w.text}\n")
    text.append("\nCautions\n", style="bold underline")
    for c in ranking.cautions:
        text.append(f"  • {c}\n")
    return text


def policy_line(ranking) -> Text:
    text = Text(no_wrap=True, overflow="ellipsis")
    version = f"v{ranking.policy_version}" if ranking.policy_version is not None else "unsaved"
    text.append(f"Policy {version} ", style="bold")
    if ranking.policy_locked:
        text.append("✓ locked", style="bold")
        if ranking.policy_locked_at is not None:
            text.append(f" {ranking.policy_locked_at:%Y-%m-%d}")
    else:
        text.append("✗ NOT locked", style="bold red")
    text.append(" · locked before first ranking: ")
    text.append("✓ yes" if ranking.locked_before_first_ranking else "✗ no",
                style="bold green" if ranking.locked_before_first_ranking else "bold red")
    text.append(f" · {len(ranking.eligible)} of {len(ranking.results)} eligible")
    text.append(f" · {ranking.robustness.draws:,} draws, seed {ranking.robustness.seed}")
    text.append(" · gates: ✓ pass, ✓! pass with evidence missing, ✗ fail", style="dim")
    return text


class CompareScreen(Screen):
    """The ranking for one job; Space or Enter chooses the highlighted instrument."""

    screen_name = "compare"
    CSS_PATH = "compare.tcss"
    AUTO_FOCUS = "#ranking"

    BINDINGS = [
        Binding("space", "choose", "Choose", id="compare.choose",
                tooltip="Choose the highlighted instrument for Plan and Memo (Enter too)"),
        Binding("j", "next_job", "Next job", id="compare.job", tooltip="Rank the next job (by title)"),
        Binding("r", "rank_again", "Rank again", id="compare.rank", tooltip="Read the records and rank again"),
        Binding("d", "more_draws", "Draws", id="compare.draws",
                tooltip=f"Switch robustness draws between {DRAWS[0]:,} and {DRAWS[1]:,}"),
        Binding("w", "toggle_detail", "Details", id="compare.detail",
                tooltip="Show or hide the explanation panel (more room for the table)"),
        Binding("c", "cautions", "Cautions", id="compare.cautions", tooltip="Every caution for these results"),
    ]

    def __init__(self, store_url: str, job_key: str | None = None) -> None:
        super().__init__()
        self.store_url = store_url
        self.job_key = job_key
        self.ranking = None
        self.draws = DRAWS[0]
        self.cols: list[Col] = []
        self.error: str | None = None
        self._rows_pending = 0
        #: the row the cursor goes back to once its batch is in the table
        self._restore_row: int | None = None

    # -- layout ------------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        yield NavBar("compare")
        with Horizontal(id="top"):
            yield Static(f"Compare · {self.job_key or 'no job'}", id="heading", classes="title-bar")
            yield Static("", id="chosen", classes="title-bar")
        yield Static("", id="policy", classes="status-line")
        with Horizontal(id="working"):  # shown from the first paint: the ranking starts at once
            yield Static("Reading the records…", id="working-text")
            yield ProgressBar(total=3, show_eta=False, id="progress")
        self._table = FixedTable(id="ranking", cursor_type="cell", zebra_stripes=True, cell_padding=0)
        yield self._table
        with VerticalScroll(id="detail", can_focus=True):
            yield Static("", id="focus")
            yield Static("", id="row")
            yield Static("", id="whole")
        yield CautionLine()
        yield Footer()

    def on_unmount(self) -> None:
        # let go of the results and the table's rows when the screen closes: they hold no
        # reference cycles, so they are freed at once, and the garbage collector (which frees
        # the screen's widgets later) does not have to scan them (10,000 rows at 10,000
        # instruments)
        self.ranking = None
        table = getattr(self, "_table", None)
        if table is not None:
            table.clear()

    def on_mount(self) -> None:
        # the ranking starts once the screen (in its working state) is painted: started here,
        # its thread competed with the first paint for the interpreter
        self.call_after_refresh(self.rank)

    # -- ranking in a worker -----------------------------------------------------------------

    def _progress(self, step: int, words_: str) -> None:
        self.query_one("#working").display = True
        self.query_one("#working-text", Static).update(words_)
        self.query_one(ProgressBar).update(progress=step)

    @work(thread=True, exclusive=True, group="compare-rank")
    def rank(self) -> None:
        from vetting.appraisal.service import rank_job

        worker = get_current_worker()
        draws = self.draws
        call = self.app.call_from_thread
        call(self._progress, 0, "Reading the records…")
        try:
            store = store_of(self, self.store_url)
            count = len(store.instrument_keys()) if hasattr(store, "instrument_keys") else None
            what = f"{count:,} instruments" if count is not None else "the catalogue"
            call(self._progress, 1, f"Ranking {what} with {draws:,} robustness draws…")
            ranking = rank_job(store, self.job_key, draws=draws, seed=SEED, as_of=as_of(self))
        except Exception as exc:  # shown on screen; the screen stays usable
            if not worker.is_cancelled:
                call(self._failed, exc)
            return
        if worker.is_cancelled:
            return
        call(self._progress, 2, "Laying out…")
        # the table's cells are formatted here, off the interface thread (10,000 rows of
        # text took over half a second there); the interface only adds them
        cols = columns_for(self.app.size.width)
        chosen = self.chosen
        rows = [(result.instrument, [cell(c, result, chosen) for c in cols]) for result in ranking.results]
        if not worker.is_cancelled:
            call(self._ranked, ranking, cols, rows)

    def _failed(self, exc: Exception) -> None:
        self.error = str(exc)
        self.query_one("#working").display = False
        self.query_one("#policy", Static).update(Text(f"✗ Cannot rank this job: {exc}", style="bold"))
        self.query_one("#focus", Static).update(
            "Fix the job on the Jobs screen (F3): it needs required attributes and weights that are not all 0."
        )
        self.notify(str(exc), title="Not ranked", severity="error", timeout=10)

    def _ranked(self, ranking, cols: list[Col] | None = None, rows: list | None = None) -> None:
        self.error = None
        self.ranking = ranking
        self.query_one(ProgressBar).update(progress=3)
        self.query_one("#working").display = False
        self.query_one("#heading", Static).update(Text(f"Compare · {ranking.job_title} ({ranking.job})",
                                                      no_wrap=True, overflow="ellipsis"))
        self.query_one("#policy", Static).update(policy_line(ranking))
        self.query_one("#whole", Static).update(ranking_text(ranking))
        self._fill(cols, rows)

    # -- the table ---------------------------------------------------------------------------

    #: rows added at once: the first batch fills a tall screen at once; the rest follow in
    #: batches, and keys are handled between batches (the table never freezes the keys)
    FIRST_ROWS = 120
    BATCH_ROWS = 200

    def _fill(self, cols: list[Col] | None = None, rows: list | None = None) -> None:
        table = self.query_one(DataTable)
        keep = table.cursor_coordinate
        table.clear(columns=True)
        self.cols = cols if cols is not None else columns_for(self.app.size.width)
        fixed = sum(c.width for c in self.cols if c.kind != "title")
        title_width = max(12, min(56, self.app.size.width - fixed - 3))
        for col in self.cols:
            table.add_column(col.label, key=col.id, width=col.width or title_width)
        if rows is None:
            chosen = self.chosen
            rows = [(r.instrument, [cell(c, r, chosen) for c in self.cols]) for r in self.ranking.results]
        self._rows_pending = len(rows)
        self._restore_row = None
        self._add_rows(table, rows[: self.FIRST_ROWS])
        if self.ranking.results:
            row = min(keep.row, len(self.ranking.results) - 1)
            column = keep.column if 1 < keep.column < len(self.cols) else 2
            if row < table.row_count:
                table.move_cursor(row=row, column=column, animate=False)
            else:  # the row comes in a later batch
                table.move_cursor(row=0, column=column, animate=False)
                self._restore_row = row
        self._show_chosen()
        self._explain()
        if len(rows) > self.FIRST_ROWS:
            self.run_worker(self._add_rest(table, rows), group="compare-fill", exclusive=True)

    def _add_rows(self, table: DataTable, rows: list) -> None:
        for key, cells in rows:
            table.add_row(*cells, key=key)
        self._rows_pending -= len(rows)

    async def _add_rest(self, table: DataTable, rows: list) -> None:
        import asyncio

        for start in range(self.FIRST_ROWS, len(rows), self.BATCH_ROWS):
            await asyncio.sleep(0)  # let keys and painting in between batches
            if table.row_count != start:  # the table was filled again meanwhile
                return
            self._add_rows(table, rows[start : start + self.BATCH_ROWS])
            wanted = self._restore_row
            if wanted is not None and wanted < table.row_count:
                self._restore_row = None
                table.move_cursor(row=wanted, animate=False)

    def _mark_chosen(self, before: str | None, after: str | None) -> None:
        """Move the ▶ mark in the rank column (no need to fill the whole table again)."""
        table = self.query_one(DataTable)
        rank_col = next((c for c in self.cols if c.kind == "rank"), None)
        if self.ranking is None or rank_col is None:
            return
        by_key = {r.instrument: r for r in self.ranking.results if r.instrument in (before, after)}
        for key in (before, after):
            if key in by_key and key in table.rows:
                table.update_cell(key, rank_col.id, cell(rank_col, by_key[key], after))

    @property
    def chosen(self) -> str | None:
        return chosen_instrument(self.app, self.job_key)

    def highlighted(self):
        if self.ranking is None or not self.ranking.results:
            return None, None
        table = self.query_one(DataTable)
        coord = table.cursor_coordinate
        if not (0 <= coord.row < len(self.ranking.results)):
            return None, None
        col = self.cols[coord.column] if 0 <= coord.column < len(self.cols) else None
        return self.ranking.results[coord.row], col

    @on(DataTable.CellHighlighted)
    def _cell_highlighted(self, event: DataTable.CellHighlighted) -> None:
        self._explain()

    def _explain(self) -> None:
        result, col = self.highlighted()
        if result is None:
            self.query_one("#focus", Static).update("No instruments on record. Add some on the Catalogue (F2).")
            self.query_one("#row", Static).update("")
            return
        focus = focus_text(col, result)
        self.query_one("#focus", Static).update(focus if focus.plain else Text(
            "Move across the row: each gate cell explains itself here.", style="italic"))
        self.query_one("#row", Static).update(row_text(result, self.chosen))

    def _show_chosen(self) -> None:
        chosen = self.chosen
        self.query_one("#chosen", Static).update(
            f"▶ chosen: {chosen}" if chosen else "none chosen (Space)"
        )

    # -- actions -----------------------------------------------------------------------------

    @on(DataTable.CellSelected)
    def _cell_selected(self, event: DataTable.CellSelected) -> None:
        event.stop()
        self.action_choose()

    def action_choose(self) -> None:
        result, _ = self.highlighted()
        if result is None:
            return
        if not result.eligible:
            failed = "; ".join(f"{words(g.name)}: {g.reason}" for g in result.failed_gates)
            self.notify(
                f"{result.instrument} fails a gate ({failed}). Choose an eligible instrument; "
                "choosing it anyway needs an override reason (command line: vetting memo --choose --override).",
                title="Not chosen", severity="warning", timeout=10,
            )
            return
        before = self.chosen
        remember_choice(self.app, self.job_key, result.instrument)
        self.notify(f"{result.title} is chosen for Plan (F5) and Memo (F7).", title="Chosen")
        self._mark_chosen(before, result.instrument)
        self._show_chosen()
        self._explain()

    def action_next_job(self) -> None:
        self._next_job()

    @work(thread=True, exclusive=True, group="compare-jobs")
    def _next_job(self) -> None:
        try:
            jobs = sorted(store_of(self, self.store_url).jobs(), key=lambda j: (j.title.lower(), j.key))
        except Exception as exc:
            self.app.call_from_thread(self.notify, str(exc), severity="error")
            return
        keys = [j.key for j in jobs]
        if not keys:
            return
        following = keys[(keys.index(self.job_key) + 1) % len(keys)] if self.job_key in keys else keys[0]
        self.app.call_from_thread(self._switch_job, following)

    def _switch_job(self, job_key: str) -> None:
        if job_key == self.job_key:
            self.notify("This is the only job on record.")
            return
        self.job_key = job_key
        self.app.current_job = job_key
        self.ranking = None
        self.query_one(DataTable).clear(columns=True)
        self.query_one("#heading", Static).update(f"Compare · {job_key}")
        self._show_chosen()
        self.rank()

    def action_rank_again(self) -> None:
        self.rank()

    def action_more_draws(self) -> None:
        self.draws = DRAWS[1] if self.draws == DRAWS[0] else DRAWS[0]
        self.notify(f"Ranking again with {self.draws:,} robustness draws.")
        self.rank()

    def action_toggle_detail(self) -> None:
        detail = self.query_one("#detail")
        detail.display = not detail.display

    def action_cautions(self) -> None:
        from vetting.appraisal.types import CAUTIONS

        self.app.push_screen(CautionsScreen(self.ranking.cautions if self.ranking else CAUTIONS))

    def on_resize(self) -> None:
        if self.ranking is not None and len(columns_for(self.app.size.width)) != len(self.cols):
            self._fill()
