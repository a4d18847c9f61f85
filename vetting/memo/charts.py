"""Charts for the memo, drawn with matplotlib's object API (Figure and the Agg canvas, no pyplot;
imported only when a chart is drawn).

HTML gets inline SVG (text kept as text, no outside references); Word gets PNG. The numbers
plotted all come from the appraisal engine through the chart objects in document.py; the only
thing computed here is the shape of the normal curve drawn under the norm group's mean and SD.
"""

from __future__ import annotations

import io
import re
import threading

from vetting.memo.document import Chart, DistributionChart, SweepChart

_INK = "#1f2933"
_ACCENT = "#1c5d99"
_SECOND = "#b5542d"
_BAND = "#f2c14e"


#: Look of every chart; applied while the figure is drawn AND while it is saved (the SVG writer
#: reads svg.fonttype and svg.hashsalt at save time).
_STYLE = {
    "font.size": 9,
    "axes.edgecolor": _INK,
    "axes.labelcolor": _INK,
    "xtick.color": _INK,
    "ytick.color": _INK,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "svg.fonttype": "none",
    "svg.hashsalt": "vetting-memo",
}


_loaded = False
_load_lock = threading.Lock()


def _import_matplotlib() -> None:
    import matplotlib  # noqa: F401
    import matplotlib.backends.backend_agg  # noqa: F401
    import matplotlib.figure  # noqa: F401


def _mpl():
    """matplotlib's object API only (Figure + the Agg canvas): no pyplot, no global figure
    manager, no interactive backend machinery to load.

    The first import runs on a short-lived thread of its own. Importing matplotlib raises and
    keeps exceptions (its font-pattern parser, pyparsing, keeps their tracebacks), and a
    traceback's frames link back to every caller's frame: imported inside a memo, those frames
    held the memo's frames and so all its data in reference cycles, freed only by a collection
    of the generation they had reached. On a thread of its own the import's frames reach no
    frame of the caller."""
    global _loaded
    if not _loaded:
        with _load_lock:
            if not _loaded:
                problem = []

                def load() -> None:
                    try:
                        _import_matplotlib()
                    except BaseException as exc:  # re-raised in the caller's thread
                        problem.append(exc)

                worker = threading.Thread(target=load, name="vetting-matplotlib-import", daemon=True)
                worker.start()
                worker.join()
                if problem:
                    raise problem[0]
                _loaded = True
    import matplotlib

    return matplotlib


def _safe(text: str) -> str:
    """Keep user text literal: a '$' would otherwise switch matplotlib into math mode."""
    return text.replace("\\", "\\\\").replace("$", r"\$")


def _draw(chart: Chart):
    _mpl()
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.4, 3.3), dpi=100)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    if isinstance(chart, SweepChart):
        _draw_sweep(ax, chart)
    elif isinstance(chart, DistributionChart):
        _draw_distribution(ax, chart)
    else:  # pragma: no cover - the model has only these two
        raise TypeError(f"unknown chart {type(chart).__name__}")
    fig.tight_layout()
    # tight_layout() leaves a placeholder layout engine behind, and savefig() then lays the
    # whole figure out once more (a draw with rendering switched off, "so that a layout engine
    # works") before drawing it: about a third of each chart's time. The layout is done and
    # fixed, so the figure is given no engine at all.
    fig.set_layout_engine(None)
    return fig


def _save(chart: Chart, buf, **kwargs) -> None:
    with _mpl().rc_context(_STYLE):
        fig = _draw(chart)
        fig.savefig(buf, **kwargs)


def _draw_sweep(ax, chart: SweepChart) -> None:
    xs = chart.selection_ratios
    ax.plot(xs, chart.success_rates, color=_ACCENT, marker="o", ms=3, label="Expected success rate")
    pairs = [(x, y) for x, y in zip(xs, chart.impact_ratios) if y is not None]
    if pairs:
        ax.plot(
            [p[0] for p in pairs],
            [p[1] for p in pairs],
            color=_SECOND,
            marker="s",
            ms=3,
            label="Expected impact ratio",
        )
        ax.axhline(chart.impact_floor, color=_SECOND, lw=0.8, ls=":", label=f"Impact-ratio floor {chart.impact_floor:g}")
    if chart.base_rate is not None:
        ax.axhline(chart.base_rate, color=_ACCENT, lw=0.8, ls=":", label=f"Base rate {chart.base_rate:g}")
    if chart.planned_ratio is not None:
        ax.axvline(chart.planned_ratio, color=_INK, lw=0.8, ls="--", label=f"Planned ratio {chart.planned_ratio:.2f}")
    ax.set_xlabel("Selection ratio (share of applicants who pass)")
    ax.set_ylabel("Rate / ratio")
    ax.set_ylim(0, 1.05)
    ax.set_xlim(0, 1)
    ax.set_title(_safe(chart.instrument), fontsize=9, loc="left")
    ax.legend(fontsize=7, loc="lower right", frameon=False)


def _draw_distribution(ax, chart: DistributionChart) -> None:
    import numpy as np

    lo = min(chart.mean - 3.5 * chart.sd, chart.band_low)
    hi = max(chart.mean + 3.5 * chart.sd, chart.band_high)
    xs = np.linspace(lo, hi, 300)
    # only the shape of the normal curve is drawn (the y axis has no scale): exp(-z²/2)
    z = (xs - chart.mean) / chart.sd
    ys = np.exp(-0.5 * z * z)
    ax.plot(xs, ys, color=_ACCENT, lw=1.4, label=_safe(f"Norm group: {chart.norm_label}"))
    above = xs >= chart.cut_raw
    ax.fill_between(xs[above], ys[above], color=_ACCENT, alpha=0.15, lw=0, label="Scores at or above the cut")
    ax.axvspan(chart.band_low, chart.band_high, color=_BAND, alpha=0.35, lw=0, label="SEM band around the cut")
    ax.axvline(chart.cut_raw, color=_SECOND, lw=1.2, label=f"Cut {chart.cut_raw:.1f} (raw)")
    ax.set_xlabel("Raw score")
    ax.set_yticks([])
    ax.set_ylabel("Share of applicants")
    ax.set_ylim(bottom=0)
    ax.set_title(_safe(chart.instrument), fontsize=9, loc="left")
    ax.legend(fontsize=7, loc="upper left", frameon=False)


def to_svg(chart: Chart, id_prefix: str = "") -> str:
    """The chart as an inline <svg> element (no XML prolog, no outside references).

    id_prefix is put before every id (and every reference to one), so that several charts in
    one HTML page do not share ids."""
    buf = io.StringIO()
    _save(chart, buf, format="svg", metadata={"Date": None, "Creator": None})
    text = buf.getvalue()
    text = text[text.index("<svg") :]
    # drop the RDF metadata block: it only names vocabularies by URL and adds nothing to read
    text = re.sub(r"\s*<metadata>.*?</metadata>", "", text, flags=re.S)
    # inline in HTML the parser puts <svg> in the SVG namespace and knows xlink:href by itself
    # (WHATWG HTML, "Parsing main inforeign"), so the namespace URLs are not needed: the file
    # then names no outside address at all
    text = text.replace(' xmlns="http://www.w3.org/2000/svg"', "", 1).replace(
        ' xmlns:xlink="http://www.w3.org/1999/xlink"', "", 1
    )
    if id_prefix:
        text = text.replace(' id="', f' id="{id_prefix}').replace('href="#', f'href="#{id_prefix}')
        text = text.replace("url(#", f"url(#{id_prefix}")
    return text


def to_png(chart: Chart, dpi: int = 200) -> bytes:
    buf = io.BytesIO()
    _save(chart, buf, format="png", dpi=dpi, metadata={"Software": None})
    return buf.getvalue()
