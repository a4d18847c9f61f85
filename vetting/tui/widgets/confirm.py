"""A yes/no question in a modal box; dismisses with True (yes) or False (no)."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Button, Static


class Confirm(ModalScreen[bool]):
    """Ask one question. `y`/`n` answer from the keyboard; escape means no."""

    DEFAULT_CSS = """
    Confirm { align: center middle; }
    Confirm > Vertical {
        width: 60; max-width: 95%; height: auto;
        border: thick $warning; background: $surface; padding: 1 2;
    }
    Confirm #question { width: 100%; margin-bottom: 1; }
    Confirm Horizontal { height: auto; align-horizontal: right; }
    Confirm Button { margin-left: 2; min-width: 12; }
    """

    BINDINGS = [
        Binding("y", "answer(True)", "Yes", id="confirm.yes"),
        Binding("n", "answer(False)", "No", id="confirm.no"),
        Binding("escape", "answer(False)", "No", show=False, id="confirm.cancel"),
    ]

    def __init__(self, question: str, yes: str = "Yes (y)", no: str = "No (n)") -> None:
        super().__init__()
        self.question = question
        self.yes_label = yes
        self.no_label = no

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static(self.question, id="question", markup=False)
            with Horizontal():
                yield Button(self.no_label, id="no", variant="primary")
                yield Button(self.yes_label, id="yes", variant="error")

    def on_mount(self) -> None:
        self.query_one("#no", Button).focus()

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        self.dismiss(event.button.id == "yes")

    def action_answer(self, value: bool) -> None:
        self.dismiss(value)


class Notice(ModalScreen[None]):
    """A message to read and close (Enter, Escape or y)."""

    DEFAULT_CSS = """
    Notice { align: center middle; }
    Notice > Vertical {
        width: 90; max-width: 95%; height: auto; max-height: 90%;
        border: thick $error; background: $surface; padding: 1 2;
    }
    Notice #message { width: 100%; margin-bottom: 1; }
    Notice Horizontal { height: auto; align-horizontal: right; }
    """

    BINDINGS = [Binding("escape,y", "close", "Close", id="notice.close")]

    def __init__(self, message: str) -> None:
        super().__init__()
        self.message = message

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static(self.message, id="message", markup=False)
            with Horizontal():
                yield Button("Close", id="close", variant="primary")

    def on_mount(self) -> None:
        self.query_one(Button).focus()

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        self.dismiss(None)

    def action_close(self) -> None:
        self.dismiss(None)
