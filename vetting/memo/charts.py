"""Charts for the memo, drawn with matplotlib's object API (Figure and the Agg canvas, no pyplot;
imported only when a chart is drawn).

HTML gets inline SVG (text kept as text, no outside references); Word gets PNG. The numbers
plotted all come from the appraisal engine through the chart objects in document.py; the only
thing computed here is the shape of the normal curve drawn under the norm group's mean and SD.
"""

from __future__ import annotations

import contextvars
import io
import os
import re
import sys
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
    text = _drawn(chart, "svg", None)
    if text is None:
        text = _svg(chart)
    if id_prefix:
        text = text.replace(' id="', f' id="{id_prefix}').replace('href="#', f'href="#{id_prefix}')
        text = text.replace("url(#", f"url(#{id_prefix}")
    return text


def _svg(chart: Chart) -> str:
    """to_svg(chart) without an id prefix."""
    buf = io.StringIO()
    _save(chart, buf, format="svg", metadata={"Date": None, "Creator": None})
    text = buf.getvalue()
    text = text[text.index("<svg") :]
    # drop the RDF metadata block: it only names vocabularies by URL and adds nothing to read
    text = re.sub(r"\s*<metadata>.*?</metadata>", "", text, flags=re.S)
    # inline in HTML the parser puts <svg> in the SVG namespace and knows xlink:href by itself
    # (WHATWG HTML, "Parsing main inforeign"), so the namespace URLs are not needed: the file
    # then names no outside address at all
    return text.replace(' xmlns="http://www.w3.org/2000/svg"', "", 1).replace(
        ' xmlns:xlink="http://www.w3.org/1999/xlink"', "", 1
    )


def to_png(chart: Chart, dpi: int = 200) -> bytes:
    data = _drawn(chart, "png", dpi)
    return data if data is not None else _png(chart, dpi)


def _png(chart: Chart, dpi: int) -> bytes:
    buf = io.BytesIO()
    _save(chart, buf, format="png", dpi=dpi, metadata={"Software": None})
    return buf.getvalue()


def _draw_one(kind: str, chart: Chart, dpi: int | None):
    return _svg(chart) if kind == "svg" else _png(chart, dpi)


# ---------------------------------------------------------------------------------------------
# drawing in a helper process
# ---------------------------------------------------------------------------------------------
#
# The first memo in a process pays for importing matplotlib (about 0.2-0.3 s on the 2-core
# machine of docs/performance.md) and for drawing the charts (about 0.2 s), all of it Python
# holding the interpreter lock: a thread started early to import matplotlib while the records
# are read was measured and gained nothing (the reads are Python too). A process does run
# beside the memo: `ChartHelper.start()` forks one as the memo begins; it imports matplotlib
# while the memo reads its records and ranks them, then draws the charts it is sent, with the
# same library and the same settings, so the bytes are the same (tests pin them against
# drawing here). It is used only where forking is safe and pays: on Linux, with two processors
# or more, in a process with a single thread (a fork copies only the calling thread; the
# terminal interface runs several) that has not loaded matplotlib yet. Anything going wrong in
# the helper (it dies, a chart fails there, it stops answering) leaves the chart to be drawn
# here, as without a helper.

#: VETTING_MEMO_CHART_HELPER=0: every chart is drawn in the memo's own process; =1: a helper
#: wherever it is safe, even with one processor; unset: where it is safe and pays.
HELPER_ENV = "VETTING_MEMO_CHART_HELPER"
#: Seconds to wait for one chart from the helper before drawing it here instead.
HELPER_PATIENCE = 60.0

_DRAWN: contextvars.ContextVar = contextvars.ContextVar("vetting_memo_drawn_charts", default=None)


def _drawn(chart: Chart, kind: str, dpi: int | None):
    """The chart as the helper drew it, when a helper's results are in use and it has it."""
    helper = _DRAWN.get()
    return None if helper is None else helper.result(chart, kind, dpi)


def helper_allowed() -> bool:
    """Whether the memo starting now should have its charts drawn by a helper process."""
    setting = os.environ.get(HELPER_ENV, "")
    if setting == "0" or not sys.platform.startswith("linux"):
        return False
    if "matplotlib" in sys.modules or threading.active_count() != 1:
        return False
    return setting == "1" or _processors() >= 2


def _processors() -> int:
    """How many processors this process may run on. With one, the helper would only take turns
    with the memo: the fork and the memory pages it makes both processes copy (about 0.1 s of
    processor time at 1,000 instruments) would be paid for nothing. With two, it pays even
    while another program keeps one of them busy (measured on the 2-core machine of
    docs/performance.md at a load average of about 2: Word at 1,000 instruments 0.79 s without
    the helper, 0.61 s with it, medians of six runs back to back)."""
    try:
        return len(os.sched_getaffinity(0))
    except (OSError, AttributeError):
        return os.cpu_count() or 1


def _helper_main(requests, results, memo_ends) -> None:
    """The helper process: import matplotlib, draw the one batch of charts the memo sends, send
    the drawings back and end (ending early, it stops sharing memory pages with the memo, which
    the memo then no longer copies as it writes to them)."""
    global _loaded
    import gc

    # no collection here: it would walk, and so copy page by page, all the memo process's
    # objects this process shares with it; the process is short-lived
    gc.disable()
    for conn in memo_ends:  # the memo's ends of the pipes, copied by the fork: else no end of input
        conn.close()
    try:
        _import_matplotlib()  # a process of its own: no caller frames to keep alive
        _loaded = True
        batch = requests.recv()
        drawn = []
        for index, kind, chart, dpi in batch:
            try:
                drawn.append((index, _draw_one(kind, chart, dpi)))
            except Exception:  # drawn again in the memo's process, which then raises it
                drawn.append((index, None))
        # sent once all are drawn: a picture can fill the pipe, and the memo reads the first only
        # when it needs it, so sending each as drawn could hold up the next drawing
        for answer in drawn:
            results.send(answer)
    except BaseException:  # the memo hung up, was interrupted, or draws for itself: nothing to add
        return


def _widen(conn) -> None:
    """Let the pipe hold a memo's pictures (about 0.1-0.3 MB) so the helper can send them all
    and end before the memo reads them (Linux fcntl F_SETPIPE_SZ; up to 1 MB unprivileged)."""
    try:
        import fcntl

        fcntl.fcntl(conn.fileno(), fcntl.F_SETPIPE_SZ, 1 << 20)
    except (ImportError, AttributeError, OSError):
        pass  # a narrower pipe: the helper waits for the memo to read, and ends then


class ChartHelper:
    """A forked process drawing the memo's charts (see above). Use:

        helper = ChartHelper.start()   # None where a helper is not used
        ...
        with helper.drawing([(chart, "png", 200), ...]):
            payload = render(doc, fmt)  # to_png / to_svg take the helper's drawings
        helper.close()
    """

    def __init__(self, process, requests, results) -> None:
        self.process, self.requests, self.results = process, requests, results
        self.keys: dict = {}  # (id(chart), kind, dpi) -> index of the request (one batch)
        self.got: dict = {}  # index -> bytes/str, or None where the helper could not draw it
        self.broken = False

    @classmethod
    def start(cls) -> ChartHelper | None:
        if not helper_allowed():
            return None
        try:
            import multiprocessing

            ctx = multiprocessing.get_context("fork")
            req_read, req_write = ctx.Pipe(duplex=False)
            res_read, res_write = ctx.Pipe(duplex=False)
            _widen(res_write)
            process = ctx.Process(target=_helper_main, args=(req_read, res_write, (req_write, res_read)),
                                  name="vetting-memo-charts", daemon=True)
            process.start()
        except (OSError, ValueError):
            return None
        req_read.close()
        res_write.close()
        return cls(process, req_write, res_read)

    def submit(self, wanted) -> None:
        """Ask for the charts, each given as (chart, kind, dpi): kind "png" or "svg" (dpi None).
        The helper draws one batch: charts asked for later are drawn in the memo's process."""
        if self.keys:
            return
        batch = []
        for chart, kind, dpi in wanted:
            key = (id(chart), kind, dpi)
            if key in self.keys:
                continue
            self.keys[key] = len(self.keys)
            batch.append((self.keys[key], kind, chart, dpi))
        if batch and not self.broken:
            try:
                self.requests.send(batch)
            except Exception:  # the helper is gone, or a chart cannot be pickled: drawn here
                self.broken = True

    def drawing(self, wanted):
        """A context in which to_png/to_svg take these charts from the helper."""
        import contextlib

        self.submit(wanted)

        @contextlib.contextmanager
        def using():
            token = _DRAWN.set(self)
            try:
                yield self
            finally:
                _DRAWN.reset(token)

        return using()

    def result(self, chart: Chart, kind: str, dpi: int | None):
        index = self.keys.get((id(chart), kind, dpi))
        if index is None:
            return None
        while index not in self.got and not self.broken:
            try:
                if not self.results.poll(HELPER_PATIENCE):
                    self.broken = True
                    break
                got_index, data = self.results.recv()
            except Exception:  # the helper ended, or its answer cannot be read: drawn here
                self.broken = True
                break
            self.got[got_index] = data
        return self.got.get(index)

    def close(self) -> None:
        """Hang up; the helper ends (ended at once if it is still busy)."""
        for conn in (self.requests, self.results):
            try:
                conn.close()
            except OSError:
                pass
        process = self.process
        if process.is_alive():
            process.join(0.05)
        if process.is_alive():
            process.terminate()
            process.join()
