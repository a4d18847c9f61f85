"""A small character chart of the planner's sweep: expected success rate and expected impact
ratio against the selection ratio.

It only draws the engine's arrays (vetting.appraisal.planner.sweep): each column shows the
sweep point nearest to it, each row is a band of the 0..1 scale. The two series use different
symbols (● and ◆), so the chart keeps its meaning without colour; the four-fifths line
(0.80, Uniform Guidelines 1978, section 4D) is dotted and the current selection ratio is a
vertical bar.
"""

from __future__ import annotations

from typing import Any, Sequence

from rich.text import Text
from textual.widget import Widget

SUCCESS = "●"
IMPACT = "◆"
BOTH = "◈"
FOUR_FIFTHS = 0.80


def _nearest(points: Sequence[float], value: float) -> int:
    """Index of the point nearest `value` (for placing a marker, not a figure)."""
    return min(range(len(points)), key=lambda i: abs(points[i] - value))


def draw(
    ratios: Sequence[float],
    success: Sequence[float] | None,
    impact: Sequence[float] | None,
    current: float | None,
    width: int,
    height: int,
) -> Text:
    """The chart as text for a box `width` x `height` (legend included)."""
    text = Text(no_wrap=True, overflow="crop")
    label_w = 5
    plot_w = max(8, width - label_w - 1)
    plot_h = max(4, height - 3)  # legend line, x axis, x labels
    n = len(ratios)
    if n == 0:
        return Text("no sweep to draw")
    columns = [round(x * (n - 1) / max(1, plot_w - 1)) for x in range(plot_w)]
    current_col = None
    if current is not None:
        target = _nearest(ratios, current)
        current_col = min(range(plot_w), key=lambda x: abs(columns[x] - target))

    def row_of(value: float) -> int:
        value = min(1.0, max(0.0, float(value)))
        return round((1.0 - value) * (plot_h - 1))

    grid = [[" "] * plot_w for _ in range(plot_h)]
    styles: list[list[str]] = [[""] * plot_w for _ in range(plot_h)]
    floor_row = row_of(FOUR_FIFTHS)
    for x in range(plot_w):
        grid[floor_row][x] = "┈"
        styles[floor_row][x] = "dim"
    if current_col is not None:
        for y in range(plot_h):
            if grid[y][current_col] in (" ", "┈"):
                grid[y][current_col] = "│"
                styles[y][current_col] = "bold"
    for series, mark, style in ((success, SUCCESS, "bold green"), (impact, IMPACT, "bold magenta")):
        if series is None:
            continue
        for x in range(plot_w):
            value = series[columns[x]]
            if value is None or value != value:  # NaN: nothing to draw
                continue
            y = row_of(value)
            grid[y][x] = BOTH if grid[y][x] in (SUCCESS, IMPACT) and grid[y][x] != mark else mark
            styles[y][x] = "bold" if grid[y][x] == BOTH else style

    legend = Text()
    legend.append(f"{SUCCESS} success" if success is not None else f"{SUCCESS} (no success rate)", style="green")
    legend.append(" ")
    legend.append(f"{IMPACT} impact" if impact is not None else f"{IMPACT} (no subgroup data)", style="magenta")
    legend.append(" ┈.80 │now", style="dim")
    text.append_text(legend)
    text.append("\n")
    for y in range(plot_h):
        label = ""
        if y == 0:
            label = "1.0"
        elif y == floor_row:
            label = ".80"
        elif y == plot_h - 1:
            label = "0"
        elif y == round((plot_h - 1) / 2) and abs(y - floor_row) > 1:
            label = ".50"
        text.append(f"{label:>{label_w - 1}} ┤" if label else " " * (label_w - 1) + " │", style="dim")
        for x in range(plot_w):
            text.append(grid[y][x], style=styles[y][x] or None)
        text.append("\n")
    text.append(" " * label_w + "└" + "─" * (plot_w - 1) + "\n", style="dim")
    first, last = f"{ratios[0]:.2f}", f"{ratios[-1]:.2f}"
    middle = "selection ratio"
    gap = max(1, plot_w - len(first) - len(last) - len(middle))
    text.append(" " * label_w + first + " " * (gap // 2) + middle + " " * (gap - gap // 2) + last, style="dim")
    return text


class RatioChart(Widget):
    """Draws the sweep it is given; `update_sweep` replaces it."""

    DEFAULT_CSS = """
    RatioChart {
        height: 1fr;
        min-height: 7;
        width: 1fr;
    }
    """

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.ratios: list[float] = []
        self.success: Any = None
        self.impact: Any = None
        self.current: float | None = None

    def update_sweep(self, ratios, success, impact, current: float | None) -> None:
        self.ratios = [float(r) for r in ratios]
        self.success = None if success is None else [float(v) for v in success]
        self.impact = None if impact is None else [float(v) for v in impact]
        self.current = current
        self.refresh()

    def render(self) -> Text:
        if not self.ratios:
            return Text("chart: waiting for the planner…", style="dim")
        return draw(self.ratios, self.success, self.impact, self.current, self.size.width, self.size.height)
