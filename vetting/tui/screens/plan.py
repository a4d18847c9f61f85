"""Plan: the cut-score planner for one instrument and the job.

Keys move the selection ratio (or, in cut mode, the raw cut on the norm group) and every figure
is asked again from the engine (`vetting.appraisal.planner.plan`); the chart draws the engine's
`sweep` arrays. This screen computes nothing: it only moves the input and formats the answer.
"""

from __future__ import annotations

from typing import NamedTuple

from rich.text import Text
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widgets import Static
from textual.worker import get_current_worker

from vetting.tui.widgets.footer import Footer
from vetting.tui.widgets.navbar import NavBar
from vetting.tui.widgets.ratio_chart import RatioChart
from vetting.tui.widgets.results_common import (
    NO_VALUE,
    CautionLine,
    CautionsScreen,
    as_of,
    chosen_instrument,
    money,
    num,
    pct,
    store_of,
)


class InstrumentEntry(NamedTuple):
    """One instrument the planner can step to: only what the keys need. The full record is
    read when the planner turns to it (holding 10,000 full records made the collector scan
    about a million objects, a stall of most of a second)."""

    key: str
    title: str

#: selection ratios the chart is drawn over (inputs to the engine's sweep)
SWEEP_RATIOS = tuple(round(0.02 * k, 2) for k in range(1, 50))
#: key steps: selection ratio in ratio mode, raw points in cut mode (small, large)
RATIO_STEPS = (0.01, 0.05)
RAW_STEPS = (1.0, 5.0)
RATIO_LIMITS = (0.01, 0.99)


def figures_text(cut_plan, mode: str, wide: bool = True) -> Text:
    """The planner's figures, formatted (no arithmetic). Narrow: short labels, no source notes."""
    p = cut_plan
    text = Text()

    def line(label: str, value: str, note: str = "") -> None:
        text.append(f"{label:<{19 if wide else 15}}", style="bold")
        text.append(value)
        if note and wide:
            text.append(f"  {note}", style="dim")
        text.append("\n")

    moving = "◀▶ "
    c = p.cut
    raw = NO_VALUE if c.raw is None else f"{c.raw:.1f}"
    line("Selection ratio" if wide else "Select. ratio", f"{moving if mode == 'ratio' else ''}{num(p.selection_ratio)}",
         "share of applicants who pass")
    line("Cut (raw)", f"{moving if mode == 'cut' else ''}{raw}", "on the norm group's scale")
    line("", f"z {c.z:+.2f} · T {c.t:.1f}")
    line("", f"stanine {c.stanine} · percentile {c.percentile:.1f}")
    if p.cut_band_raw is not None:
        low, high = p.cut_band_raw
        line(f"Band {p.confidence:.0%}", f"{low:.1f} to {high:.1f}", f"raw; SEM {num(p.sem_raw)} raw points")
    else:
        line("Band", NO_VALUE, "needs a norm group and a reliability figure")
    rel = p.reliability_used
    line("Validity used", f"r = {num(p.validity_used, 3)}",
         f"reliability {rel.type} {num(rel.value)}" if rel is not None and rel.value is not None else "")
    line("Success rate", f"{pct(p.expected_success_rate, 1)} (base {pct(p.base_rate, 1)})",
         "of those passing (Taylor-Russell)")
    line("Mean criterion z" if wide else "Mean crit. z",
         NO_VALUE if p.mean_criterion_z is None else f"{p.mean_criterion_z:+.2f}",
         "of those passing (Naylor-Shine)")
    line("Utility per year" if wide else "Utility/year", money(p.utility_per_year), "Brogden-Cronbach-Gleser")
    line("Impact ratio", f"{num(p.impact_ratio)}" + (f" (d {num(p.d_used)})" if p.d_used is not None else ""),
         "expected; four-fifths rule: 0.80" if p.d_used is not None else "no subgroup data")
    lv = p.local_validation
    if lv is not None and wide:
        text.append("Local validation: ", style="bold")
        text.append(lv.text + "\n")
    elif lv is not None:
        months = "" if lv.months is None else f", about {lv.months:.0f} months"
        line("Local study", NO_VALUE if lv.n is None else f"{lv.n} people{months}")
    if p.warnings:
        for w in p.warnings:
            text.append(f"⚠ {w.code}: {w.text}\n")
    return text


class PlanScreen(Screen):
    """Move the selection ratio or the cut; every planner figure follows."""

    screen_name = "plan"
    CSS_PATH = "plan.tcss"

    BINDINGS = [
        Binding("right,plus,equals_sign", "step(1, 0)", "Up", id="plan.up",
                tooltip="Raise the selection ratio (or the raw cut) a small step"),
        Binding("left,minus", "step(-1, 0)", "Down", id="plan.down",
                tooltip="Lower the selection ratio (or the raw cut) a small step"),
        Binding("up", "step(1, 1)", "Up more", show=False, id="plan.up_more",
                tooltip="Raise the selection ratio (or the raw cut) a large step"),
        Binding("down", "step(-1, 1)", "Down more", show=False, id="plan.down_more",
                tooltip="Lower the selection ratio (or the raw cut) a large step"),
        Binding("m", "switch_mode", "Ratio/cut", id="plan.mode",
                tooltip="Move the selection ratio, or a raw cut on the norm group"),
        Binding("i", "next_instrument(1)", "Instrument", id="plan.instrument", tooltip="Next instrument"),
        Binding("I", "next_instrument(-1)", "Prev instrument", show=False, id="plan.instrument_back",
                tooltip="Previous instrument"),
        Binding("n", "next_norm", "Norm group", id="plan.norm",
                tooltip="Next norm group (first: the one the engine finds most suitable)"),
        Binding("0", "reset", "Default", id="plan.reset", tooltip="Back to the job's own ratio (hires ÷ applicants)"),
        Binding("c", "cautions", "Cautions", id="plan.cautions", tooltip="Every caution for these results"),
        Binding("pagedown", "scroll_figures(1)", "Scroll down", show=False, id="plan.page_down",
                tooltip="Scroll the figures down"),
        Binding("pageup", "scroll_figures(-1)", "Scroll up", show=False, id="plan.page_up",
                tooltip="Scroll the figures up"),
    ]

    def __init__(self, store_url: str, job_key: str | None = None) -> None:
        super().__init__()
        self.store_url = store_url
        self.job_key = job_key
        self.job = None
        #: every instrument, by title (key and title only); the current one in full below
        self.instruments: list[InstrumentEntry] = []
        self.current = None
        self.index = 0
        self.norm_key: str | None = None  # None: the engine's most suitable
        self.mode = "ratio"
        self.selection_ratio: float | None = None  # None: the job's default
        self.raw_cut: float | None = None
        self.cut_plan = None
        self.sweep = None
        self._sweep_for: tuple | None = None
        self.error: str | None = None

    def compose(self) -> ComposeResult:
        yield NavBar("plan")
        yield Static(f"Plan · {self.job_key or 'no job'}", id="heading", classes="title-bar")
        yield Static("loading…", id="choice", classes="status-line")
        with Horizontal(id="body"):
            with VerticalScroll(id="figures", can_focus=False):
                yield Static("", id="figures-text")
            yield RatioChart(id="chart")
        yield CautionLine()
        yield Footer()

    def on_mount(self) -> None:
        # read once the screen is painted (a worker started here competes with the first paint)
        self.call_after_refresh(self.load)

    # -- loading -----------------------------------------------------------------------------

    @work(thread=True, exclusive=True, group="plan-load")
    def load(self) -> None:
        from vetting.appraisal import rank
        from vetting.records.gcpause import gc_pause
        from vetting.tui.data import drop_in_steps, items_of

        try:
            store = store_of(self, self.store_url)
            job = store.job(self.job_key)
            # no collection in the middle of this bulk work (see vetting.records.gcpause); only
            # the keys and titles, and one full record, outlive it
            with gc_pause():
                instruments = sorted(store.instruments(), key=lambda i: i.title.lower())
                start = chosen_instrument(self.app, self.job_key)
                held: list = []
                if start is None and instruments:
                    try:  # no choice yet: start on the engine's top choice (one draw, nothing recorded)
                        ranking = rank(job, instruments, draws=1, seed=0, as_of=as_of(self))
                        top = ranking.top
                        start = top.instrument if top is not None else None
                        held = items_of(ranking)
                        del ranking, top
                    except ValueError:
                        start = None
                entries = [InstrumentEntry(i.key, i.title) for i in instruments]
                keys = [e.key for e in entries]
                index = keys.index(start) if start in keys else 0
                current = instruments[index] if instruments else None
                held.extend(instruments)
                del instruments
                drop_in_steps(held)  # not all at once: that held the keys (see drop_in_steps)
        except Exception as exc:
            self.app.call_from_thread(self._failed, exc)
            return
        self.app.call_from_thread(self._loaded, job, entries, index, current)

    def _loaded(self, job, entries: list[InstrumentEntry], index: int, current) -> None:
        self.job = job
        self.instruments = entries
        self.index = index
        self.current = current
        instruments = entries
        self.query_one("#heading", Static).update(Text(f"Plan · {job.title} ({job.key})", no_wrap=True,
                                                      overflow="ellipsis"))
        if not instruments:
            self._failed(ValueError("no instruments on record; add some on the Catalogue (F2)"))
            return
        self.compute()

    def _failed(self, exc: Exception) -> None:
        self.error = str(exc)
        self.query_one("#figures-text", Static).update(Text(f"✗ {exc}", style="bold"))

    @property
    def instrument(self):
        """The full record of the instrument on screen."""
        return self.current

    # -- asking the engine -------------------------------------------------------------------

    @work(thread=True, exclusive=True, group="plan-compute")
    def compute(self) -> None:
        from vetting.appraisal import plan, sweep

        worker = get_current_worker()
        job = self.job
        if not self.instruments or job is None:
            return
        wanted = self.instruments[self.index].key
        day = as_of(self)
        try:
            inst = self.current
            if inst is None or inst.key != wanted:
                inst = store_of(self, self.store_url).instrument(wanted)
            if self.mode == "cut" and self.raw_cut is not None:
                result = plan(job, inst, raw_cut=self.raw_cut, norm_key=self.norm_key, as_of=day)
            else:
                result = plan(job, inst, selection_ratio=self.selection_ratio, norm_key=self.norm_key, as_of=day)
            key = (inst.key, result.norm)
            swept = self.sweep if self._sweep_for == key else sweep(
                job, inst, SWEEP_RATIOS, norm_key=result.norm, as_of=day)
        except Exception as exc:  # the engine's message names the problem
            if not worker.is_cancelled:
                self.app.call_from_thread(self._compute_failed, exc)
            return
        if not worker.is_cancelled:
            self.app.call_from_thread(self._computed, result, swept, key, inst)

    def _compute_failed(self, exc: Exception) -> None:
        self.error = str(exc)
        self._show_choice()
        self.query_one("#figures-text", Static).update(Text(f"✗ {exc}", style="bold"))
        self.notify(str(exc), title="Planner", severity="warning", timeout=8)

    def _computed(self, result, swept, key, inst=None) -> None:
        if inst is not None:
            self.current = inst
        self.error = None
        self.cut_plan = result
        self.sweep = swept
        self._sweep_for = key
        self._show_choice()
        self._show_figures()
        self.query_one(RatioChart).update_sweep(swept.selection_ratio, swept.expected_success_rate,
                                                swept.impact_ratio, result.selection_ratio)

    def _show_figures(self) -> None:
        if self.cut_plan is not None:
            wide = self.query_one("#figures").size.width >= 70
            self.query_one("#figures-text", Static).update(figures_text(self.cut_plan, self.mode, wide))

    def on_resize(self) -> None:
        self.call_after_refresh(self._show_figures)

    def _show_choice(self) -> None:
        inst = self.instrument
        text = Text(no_wrap=True, overflow="ellipsis")
        if inst is None:
            return
        chosen = chosen_instrument(self.app, self.job_key)
        text.append("Instrument ", style="bold")
        text.append(f"[i {self.index + 1}/{len(self.instruments)}] ", style="dim")
        text.append("▶ chosen: " if inst.key == chosen else "")
        text.append(f"{inst.title} ({inst.key})")
        text.append("\nNorm group ", style="bold")
        text.append("[n] ", style="dim")
        if self.cut_plan is not None and self.cut_plan.norm is not None:
            text.append(f"{self.cut_plan.norm_text}")
            text.append(" (your choice)" if self.norm_key else " (most suitable for the job)", style="dim")
        elif self.cut_plan is not None:
            text.append("none recorded: raw cuts and the band need one", style="dim")
        text.append(f" [n: {len(inst.norms)} on record]", style="dim")
        self.query_one("#choice", Static).update(text)

    # -- keys --------------------------------------------------------------------------------

    def action_step(self, direction: int, large: int) -> None:
        if self.cut_plan is None:
            return
        if self.mode == "ratio":
            current = self.selection_ratio if self.selection_ratio is not None else self.cut_plan.selection_ratio
            step = RATIO_STEPS[large]
            low, high = RATIO_LIMITS
            new = min(high, max(low, round(current + direction * step, 2)))
            if new == current:
                self.notify(f"The selection ratio stays between {low} and {high}.", severity="warning")
                return
            self.selection_ratio = new
        else:
            if self.raw_cut is None:
                return
            self.raw_cut = self.raw_cut + direction * RAW_STEPS[large]
        self.compute()

    def action_switch_mode(self) -> None:
        if self.cut_plan is None:
            return
        if self.mode == "ratio":
            if self.cut_plan.cut.raw is None:
                self.notify("A raw cut needs a norm group; this instrument has none recorded.",
                            title="Planner", severity="warning")
                return
            self.mode = "cut"
            self.raw_cut = float(round(self.cut_plan.cut.raw))  # start on a whole raw score
        else:
            self.mode = "ratio"
            self.selection_ratio = round(self.cut_plan.selection_ratio, 2)
        self.compute()

    def action_next_instrument(self, direction: int) -> None:
        if not self.instruments:
            return
        self.index = (self.index + direction) % len(self.instruments)
        self.norm_key = None
        self.mode = "ratio"
        self.raw_cut = None
        self.compute()

    def action_next_norm(self) -> None:
        inst = self.instrument
        if inst is None or not inst.norms:
            self.notify("This instrument has no norm groups on record.", severity="warning")
            return
        keys = [None] + [n.key for n in inst.norms]
        position = keys.index(self.norm_key) if self.norm_key in keys else 0
        self.norm_key = keys[(position + 1) % len(keys)]
        if self.mode == "cut":  # a raw cut belongs to one norm group's scale
            self.mode = "ratio"
            self.raw_cut = None
        self.compute()

    def action_reset(self) -> None:
        self.mode = "ratio"
        self.selection_ratio = None
        self.raw_cut = None
        self.compute()

    def action_scroll_figures(self, direction: int) -> None:
        figures = self.query_one("#figures", VerticalScroll)
        if direction > 0:
            figures.scroll_page_down()
        else:
            figures.scroll_page_up()

    def action_cautions(self) -> None:
        from vetting.appraisal.types import CAUTIONS

        self.app.push_screen(CautionsScreen(self.cut_plan.cautions if self.cut_plan else CAUTIONS))
