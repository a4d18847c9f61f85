"""A small modal that asks for a file path; dismisses with the path, or None on Escape."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static


class AskPath(ModalScreen[str | None]):
    DEFAULT_CSS = """
    AskPath { align: center middle; }
    AskPath > Vertical {
        width: 70; max-width: 95%; height: auto;
        border: thick $accent; background: $surface; padding: 1 2;
    }
    AskPath Input { margin-top: 1; }
    AskPath .hint { color: $text-muted; margin-top: 1; }
    """
    BINDINGS = [Binding("escape", "cancel", "Cancel", id="ask.cancel", tooltip="Close without importing")]

    def __init__(self, question: str, hint: str = "") -> None:
        super().__init__()
        self.question = question
        self.hint = hint

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static(self.question, markup=False)
            yield Input(placeholder="path/to/catalogue.yaml", id="path")
            yield Static(self.hint or "Enter imports · Escape cancels", classes="hint", markup=False)

    def on_mount(self) -> None:
        self.query_one(Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        path = event.value.strip()
        if path:
            self.dismiss(path)

    def action_cancel(self) -> None:
        self.dismiss(None)
