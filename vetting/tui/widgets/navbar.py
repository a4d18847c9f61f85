"""The top line of every screen: where you are and the keys that reach the other screens.

Built from the app's own `go(...)` bindings, so the line and the keys cannot disagree. The
current screen is marked with ▸ and reverse video (not by colour alone)."""

from __future__ import annotations

from rich.text import Text
from textual.binding import Binding
from textual.widgets import Static


class NavBar(Static):
    DEFAULT_CSS = """
    NavBar {
        height: 1;
        width: 1fr;
        background: $panel;
        color: $text-muted;
    }
    """

    def __init__(self, current: str) -> None:
        super().__init__("", classes="navbar")
        self.current = current

    def on_mount(self) -> None:
        self.update(self.line())

    def line(self) -> Text:
        text = Text(no_wrap=True, overflow="ellipsis")
        entries = []
        for binding in type(self.app).BINDINGS:
            if isinstance(binding, Binding) and binding.action.startswith("go("):
                name = binding.action[4:-2]
                entries.append((name, self.app.get_key_display(binding).upper(), binding.description))
        # help last: it is not a place, it lists the keys
        entries.sort(key=lambda e: e[0] == "help")
        for index, (name, key, label) in enumerate(entries):
            if index:
                text.append(" ")
            if name == self.current:
                text.append(f"▸{key} {label}", style="reverse bold")
            else:
                text.append(f" {key}", style="bold")
                text.append(f" {label}")
        return text
