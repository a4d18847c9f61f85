"""Pieces shared by the results screens (Compare, Plan, Gaps, Memo).

Only formatting and plumbing live here: every figure shown comes finished from the appraisal
engine or the memo writer. Meaning never rests on colour alone: pass/fail is a word and a
symbol, warnings carry a ⚠ sign.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Input, Static

NO_VALUE = "—"  # shown where there is no figure (no evidence on record)
PASS_MARK = "✓ PASS"
FAIL_MARK = "✗ FAIL"

#: short labels of the six gates, in the engine's order (see vetting.appraisal.types.GATE_ORDER)
GATE_LABELS = {
    "job_relatedness": "Job",
    "validity_evidence": "Valid",
    "reliability": "Rel",
    "reading_level": "Read",
    "time": "Time",
    "qualification": "Qual",
}

#: one line that stands for the full cautions (the whole list is one key away)
CAUTION_LINE = (
    "⚠ Supports a judgement, does not make it: monitor adverse impact, validate locally, "
    "qualified users, accommodations; local law and licensed practice prevail."
)


def words(name: str) -> str:
    return name.replace("_", " ")


def num(value: float | None, digits: int = 2) -> str:
    return NO_VALUE if value is None else f"{value:.{digits}f}"


def pct(value: float | None, digits: int = 0) -> str:
    """A share shown as a percentage (formatting only: Python's % format)."""
    return NO_VALUE if value is None else f"{value:.{digits}%}"


def money(value: float | None, currency: str | None = None) -> str:
    if value is None:
        return NO_VALUE
    text = f"{value:,.0f}"
    return f"{text} {currency}" if currency else text


def store_of(screen: Any, url: str):
    """The Store for `url`: the app's shared one when it serves the same database."""
    data = getattr(screen.app, "data", None)
    if data is not None and getattr(data, "url", None) == url:
        return data.store
    cache = screen.app.__dict__.setdefault("_results_stores", {})
    if url not in cache:
        from vetting.records.store import Store

        cache[url] = Store.open(url)
    return cache[url]


def as_of(screen: Any) -> dt.date:
    data = getattr(screen.app, "data", None)
    if data is not None and hasattr(data, "as_of"):
        return data.as_of()
    return getattr(screen.app, "today", None) or dt.date.today()


def fixed_now(screen: Any) -> dt.datetime | None:
    """Noon UTC on the app's fixed day (tests and screenshots), or None: the real time."""
    today = getattr(screen.app, "today", None)
    if today is None:
        return None
    return dt.datetime.combine(today, dt.time(12, 0), tzinfo=dt.timezone.utc)


def chosen_instrument(app: Any, job_key: str | None) -> str | None:
    """The instrument chosen on the Compare screen for `job_key` (remembered for Plan and Memo)."""
    if job_key is None:
        return None
    return app.__dict__.get("chosen_instruments", {}).get(job_key)


def remember_choice(app: Any, job_key: str, instrument_key: str | None) -> None:
    choices = app.__dict__.setdefault("chosen_instruments", {})
    if instrument_key is None:
        choices.pop(job_key, None)
    else:
        choices[job_key] = instrument_key


def bar_line(label: str, value: str, width: int = 22) -> Text:
    text = Text(no_wrap=False)
    text.append(f"{label:<{width}}", style="bold")
    text.append(value)
    return text


class CautionLine(Static):
    """The cautions in one line; `c` shows them all."""

    DEFAULT_CSS = """
    CautionLine {
        height: 1;
        padding: 0 1;
        color: $warning;
        background: $boost;
    }
    """

    def __init__(self) -> None:
        super().__init__(Text(CAUTION_LINE + " (c: all)", no_wrap=True, overflow="ellipsis"), classes="caution-line")


class CautionsScreen(ModalScreen[None]):
    """The full list of cautions from the engine."""

    DEFAULT_CSS = """
    CautionsScreen { align: center middle; }
    CautionsScreen > Vertical {
        width: 90%;
        max-width: 100;
        height: auto;
        max-height: 90%;
        border: thick $warning;
        background: $surface;
        padding: 0 1;
    }
    CautionsScreen #cautions-body { height: auto; max-height: 20; }
    """
    BINDINGS = [Binding("escape,c,enter", "close", "Close", id="cautions.close", tooltip="Back to the results")]

    def __init__(self, cautions: tuple[str, ...] | list[str]) -> None:
        super().__init__()
        self.cautions = list(cautions)

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static(Text("⚠ Cautions for using these results", style="bold"))
            with VerticalScroll(id="cautions-body"):
                yield Static("\n".join(f"• {c}" for c in self.cautions))
            yield Static(Text("Escape closes", style="dim"))

    def action_close(self) -> None:
        self.dismiss(None)


class PathPrompt(ModalScreen[str | None]):
    """Ask for a file path (prefilled); Enter answers, Escape cancels."""

    DEFAULT_CSS = """
    PathPrompt { align: center middle; }
    PathPrompt > Vertical {
        width: 90%;
        max-width: 100;
        height: auto;
        border: thick $primary;
        background: $surface;
        padding: 0 1;
    }
    PathPrompt Input { margin: 1 0 0 0; }
    """
    BINDINGS = [Binding("escape", "cancel", "Cancel", id="path.cancel", tooltip="Do not write anything")]

    def __init__(self, question: str, default: str) -> None:
        super().__init__()
        self.question = question
        self.default = default

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static(Text(self.question, style="bold"))
            yield Input(value=self.default, id="path")
            yield Static(Text("Enter writes the file · Escape cancels", style="dim"))

    def on_mount(self) -> None:
        box = self.query_one(Input)
        box.cursor_position = len(box.value)
        box.focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        value = event.value.strip()
        self.dismiss(value or None)

    def action_cancel(self) -> None:
        self.dismiss(None)


__all__ = [
    "CAUTION_LINE",
    "CautionLine",
    "CautionsScreen",
    "FAIL_MARK",
    "GATE_LABELS",
    "NO_VALUE",
    "PASS_MARK",
    "PathPrompt",
    "as_of",
    "chosen_instrument",
    "fixed_now",
    "money",
    "num",
    "pct",
    "remember_choice",
    "store_of",
    "words",
]
