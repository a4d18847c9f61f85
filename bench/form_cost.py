"""What a form section costs Textual to show, with an input per field or with text rows.

    .venv/bin/python bench/form_cost.py            # 12 and 24 fields, both kinds, 160x48

A plain Textual app (no vetting code, Textual's default styles) with two tabs; each switch to the
second tab mounts a section of N fields and shows it, and the clock stops after the screen has
been painted (as `bench/run.py`'s tui-keys does). "input" is a field as the editors build it: a
widget drawing its label, holding an Input. "text" is the same section drawn as one line of text
a field (label and value), which is what a form with a single input for the field being edited
would show. Medians of six switches, headless. Not part of the test run.
"""

from __future__ import annotations

import argparse
import asyncio
import statistics
import time

from textual.app import App, ComposeResult
from textual.containers import VerticalScroll
from textual.content import Content
from textual.widget import Widget
from textual.widgets import Input, Static, TabbedContent, TabPane


class Field(Widget):
    DEFAULT_CSS = "Field { height: auto; } Field Input { border: none; height: 1; margin-left: 24; padding: 0 1; }"

    def __init__(self, index: int) -> None:
        super().__init__()
        self.index = index

    def compose(self) -> ComposeResult:
        yield Input(value=f"value {self.index}")

    def render(self) -> Content:
        return Content(f"label {self.index}")


def section(kind: str, n: int) -> list[Widget]:
    if kind == "input":
        return [Field(i) for i in range(n)]
    return [Static(f"label {i:<20}    value {i}") for i in range(n)]


class Switcher(App):
    def __init__(self, kind: str, n: int) -> None:
        super().__init__()
        self.kind, self.n = kind, n

    def compose(self) -> ComposeResult:
        with TabbedContent(id="tabs"):
            yield TabPane("one", Static("first"), id="one")
            yield TabPane("two", id="two")

    async def show_section(self) -> None:
        tabs = self.query_one("#tabs", TabbedContent)
        pane = tabs.get_pane("two")
        with self.batch_update():
            await pane.remove_children()
            await pane.mount(VerticalScroll(*section(self.kind, self.n)))
            tabs.active = "two"


async def measure(kind: str, n: int, size: tuple[int, int], repeats: int) -> list[float]:
    app = Switcher(kind, n)
    times: list[float] = []
    async with app.run_test(size=size) as pilot:
        await pilot.pause(0.3)
        for _ in range(repeats):
            start = time.perf_counter()
            await app.show_section()
            painted = asyncio.Event()
            app.screen.call_after_refresh(painted.set)
            await painted.wait()
            times.append(1000 * (time.perf_counter() - start))
            app.query_one("#tabs", TabbedContent).active = "one"
            await pilot.pause(0.3)
    return times


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--fields", default="12,24", help="section sizes, comma-separated")
    ap.add_argument("--repeats", type=int, default=6)
    args = ap.parse_args()
    for n in [int(x) for x in args.fields.split(",")]:
        for kind in ("input", "text"):
            times = asyncio.run(measure(kind, n, (160, 48), args.repeats))
            print(f"{n:3} fields, {kind:5}: median {statistics.median(times):6.1f} ms "
                  f"(runs: {', '.join(f'{t:.0f}' for t in times)})")


if __name__ == "__main__":
    main()
