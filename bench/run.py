"""The benchmark suite: how vetting's main operations grow with the size of the catalogue.

    .venv/bin/python bench/run.py                         # 100, 1,000 and 10,000 instruments
    .venv/bin/python bench/run.py --sizes 100,1000        # quicker
    .venv/bin/python bench/run.py --pg postgresql+psycopg://postgres@127.0.0.1:PORT/postgres
    .venv/bin/python bench/run.py --only import,rank --json bench/results.json

Not part of the test run (bench/ is outside tests/). Every measurement runs in a process of its
own, so its peak memory (the process's peak resident set, /proc/self/status VmHWM) belongs to
that one operation, with the interpreter and the libraries it imports included. Timings are
wall-clock seconds (time.perf_counter); operations that take well under a second are repeated
and the median is reported. The catalogue is made by vetting.records.synthetic (seeded), so
every run measures the same records.

Measured at each size (see docs/performance.md for the goals and the latest figures):
  import       parse the catalogue file and import it into a fresh database (one transaction)
  open         Store.open on the populated database (migration check included)
  export       export every record and write the catalogue file
  list         store.instruments(): every instrument with all its evidence
  summarise    the catalogue table's figures for every instrument (appraisal.summarise)
  filter       one keystroke of the catalogue filter over every row (the interface's filter)
  rank         a stored job ranked with 10,000 robustness draws (records loaded from the database)
  rank-memory  the same ranking on instruments already in memory, beside a bare-numpy program doing
               the same arithmetic for every instrument (bench_appraisal.baseline_all), and the
               robustness draws alone beside their bare-numpy form; also the ranking with every
               instrument's evidence read (`rank_read_all_s`: the evidence of instruments failing
               a gate is written on first reading)
  sweep        the cut-score sweep (99 selection ratios) for the top instrument
  memo-md/-html/-docx   a memo for the job in each format (the memo command's own path)
  tui-first    the interface's first usable screen (first_page_s) and until the table is filled
  tui-keys     every interactive action, each reported on its own (<action>_ms, <action>_max_ms):
               filter keystroke and clearing, cursor and page moves, sorting, opening the
               instrument editor and its sections, the job editor, F1-F7 screens, the command
               palette, Compare's working state and choosing, the planner's keys; <screen>_max_stall_ms is the longest the event loop stalled
               while a results screen worked; the reported figure is the slowest action
  cli-list     `vetting list instruments` as a person runs it (a new process)
"""

from __future__ import annotations

import argparse
import datetime as dt
import hashlib
import json
import math
import os
import platform
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
AS_OF = dt.date(2026, 11, 1)
SEED = 1
DRAWS = 10_000
DEFAULT_SIZES = (100, 1000, 10_000)
ALL = (
    "import", "open", "export", "list", "summarise", "filter", "rank", "rank-memory", "sweep",
    "memo-md", "memo-html", "memo-docx", "tui-first", "tui-keys", "cli-list",
)
#: operations that run on PostgreSQL too when --pg is given
STORE_OPS = ("import", "open", "export", "list", "rank")


# ---------------------------------------------------------------------------------------------
# worker side: one operation, in a process of its own
# ---------------------------------------------------------------------------------------------


def _rss_mb() -> float:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 2**20


def _peak_mb() -> float:
    """Peak resident memory of this process. VmHWM, not getrusage's ru_maxrss: on Linux
    ru_maxrss also counts the parent's memory at the fork that started this process."""
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # kilobytes on Linux


def _repeat(fn, *, at_least: float = 1.0, most: int = 7) -> tuple[float, list[float], object]:
    """Run fn until about `at_least` seconds or `most` runs have passed; median and all times."""
    times, result = [], None
    start = time.perf_counter()
    while len(times) < most and (not times or time.perf_counter() - start < at_least):
        t0 = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), times, result


def _job_key(store) -> str:
    return sorted(store.job_keys())[0]


def _ranking_digest(ranking) -> str:
    rows = [
        (r.instrument, r.eligible, r.rank, round(r.score, 9) if r.score is not None else None,
         round(r.p_best, 9) if r.p_best is not None else None)
        for r in ranking.results
    ]
    return hashlib.sha256(json.dumps(rows).encode()).hexdigest()[:16]


def worker(op: str, size: int, url: str, workdir: Path) -> dict:
    from vetting.records.store import Store  # imported by every operation: part of the baseline

    extra: dict = {}
    before = _rss_mb()
    catfile = workdir / f"catalogue-{size}.yaml"

    if op == "generate":
        from vetting.records.catalogue import write_catalogue
        from vetting.records.synthetic import generate_catalogue

        t0 = time.perf_counter()
        cat = generate_catalogue(size, seed=SEED)
        seconds = time.perf_counter() - t0
        write_catalogue(cat, catfile)
        runs = [seconds]
        extra = {"jobs": len(cat.jobs), "file_mb": round(catfile.stat().st_size / 2**20, 1)}
    elif op == "import":
        from vetting.records.catalogue import load_catalogue

        t0 = time.perf_counter()
        cat = load_catalogue(catfile)
        t1 = time.perf_counter()
        with Store.open(url, user="bench") as store:
            t2 = time.perf_counter()
            counts = store.import_catalogue(cat, source=str(catfile))
        t3 = time.perf_counter()
        seconds = t3 - t0
        extra = {"parse_s": round(t1 - t0, 3), "open_s": round(t2 - t1, 3), "store_s": round(t3 - t2, 3),
                 "counts": counts, "file_mb": round(catfile.stat().st_size / 2**20, 1)}
        runs = [seconds]
    elif op == "open":
        def once():
            Store.open(url, user="bench").close()
        seconds, runs, _ = _repeat(once)
    elif op == "export":
        from vetting.records.catalogue import write_catalogue

        with Store.open(url, user="bench") as store:
            out = workdir / f"export-{size}-{os.getpid()}.yaml"

            def once():
                out.unlink(missing_ok=True)
                write_catalogue(store.export_catalogue(), out)
            seconds, runs, _ = _repeat(once)
            extra = {"file_mb": round(out.stat().st_size / 2**20, 1)}
            out.unlink(missing_ok=True)
    elif op == "list":
        with Store.open(url, user="bench") as store:
            seconds, runs, got = _repeat(store.instruments)
            extra = {"instruments": len(got)}
    elif op == "summarise":
        from vetting.appraisal.summary import summarise_all

        with Store.open(url, user="bench") as store:
            instruments = store.instruments()
        before = _rss_mb()
        seconds, runs, got = _repeat(lambda: summarise_all(instruments, AS_OF))
    elif op == "filter":
        from vetting.tui.data import Data
        from vetting.tui.screens.catalogue import filter_rows

        data = Data(url, today=AS_OF)
        rows = data.catalogue_rows()
        data.close()
        before = _rss_mb()
        # a person typing "mech rea": each keystroke filters every row again
        typed = "mech rea"
        prefixes = [typed[: i + 1] for i in range(len(typed))]
        per_key = []
        for text in prefixes:
            t, _, _ = _repeat(lambda text=text: filter_rows(rows, text), at_least=0.2)
            per_key.append(t)
        seconds, runs = max(per_key), per_key
        extra = {"rows": len(rows), "worst_keystroke_ms": round(1000 * max(per_key), 2)}
    elif op == "rank":
        from vetting.appraisal.service import rank_job

        with Store.open(url, user="bench") as store:
            key = _job_key(store)
            seconds, runs, ranking = _repeat(
                lambda: rank_job(store, key, draws=DRAWS, seed=0, as_of=AS_OF, mark=False), at_least=0.5, most=3)
            extra = {"job": key, "eligible": len(ranking.eligible), "digest": _ranking_digest(ranking)}
    elif op == "rank-memory":
        seconds, runs, extra = _rank_memory(url)
    elif op == "sweep":
        import numpy as np

        from vetting.appraisal.planner import sweep
        from vetting.appraisal.ranking import rank

        with Store.open(url, user="bench") as store:
            job = store.job(_job_key(store))
            instruments = store.instruments()
        if not instruments:
            return {"op": op, "size": size, "seconds": None, "runs": [], "peak_mb": round(_peak_mb(), 1),
                    "note": "no instrument to plan for"}
        ranking = rank(job, instruments, draws=1, seed=0, as_of=AS_OF)
        top = next(i for i in instruments if i.key == (ranking.top or ranking.results[0]).instrument)
        ratios = np.linspace(0.01, 0.99, 99)
        before = _rss_mb()
        seconds, runs, _ = _repeat(lambda: sweep(job, top, ratios, as_of=AS_OF))
        extra = {"instrument": top.key, "ratios": len(ratios)}
    elif op.startswith("memo-"):
        from vetting.memo.api import make_memo

        fmt = op.split("-", 1)[1]
        with Store.open(url, user="bench") as store:
            key = _job_key(store)
            n = [0]

            def once():
                n[0] += 1
                out = workdir / f"memo-{size}-{os.getpid()}-{n[0]}.{fmt}"
                make_memo(store, key, fmt=fmt, out=out, as_of=AS_OF, now=dt.datetime(2026, 11, 1, 12, 0, tzinfo=dt.UTC))
                return out
            # the first memo in a process is what `vetting memo` costs (libraries loaded on first
            # use included); the second shows the warm cost
            _, runs, out = _repeat(once, at_least=float("inf"), most=2 if size < 10_000 else 1)
            seconds = runs[0]
            extra = {"kb": round(out.stat().st_size / 1024, 1), "warm_s": round(runs[-1], 3)}
    elif op == "tui-first":
        seconds, runs, extra = _tui(url, size, keys=False)
    elif op == "tui-keys":
        seconds, runs, extra = _tui(url, size, keys=True)
    elif op == "cli-list":
        def once():
            subprocess.run([sys.executable, "-m", "vetting", "--db", url, "list", "instruments"],
                           stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, check=True, cwd=REPO)
        seconds, runs, _ = _repeat(once, most=3)
        # the command's own process: getrusage of the children (an upper bound, see _peak_mb)
        extra = {"cli_peak_mb": round(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024, 1)}
    else:
        raise SystemExit(f"unknown operation {op!r}")
    return {"op": op, "size": size, "seconds": seconds, "runs": [round(r, 4) for r in runs if r is not None],
            "peak_mb": round(_peak_mb(), 1), "rss_before_mb": round(before, 1), **extra}


def _rank_memory(url: str):
    """rank() on instruments in memory, beside the bare-numpy baseline of the same arithmetic
    (bench/bench_appraisal.py's `baseline`, written by the appraisal engine's author)."""
    import importlib.util

    import numpy as np

    from vetting.appraisal.ranking import rank
    from vetting.records.store import Store

    with Store.open(url, user="bench") as store:
        job = store.job(_job_key(store))
        instruments = store.instruments()
    seconds, runs, ranking = _repeat(lambda: rank(job, instruments, draws=DRAWS, seed=0, as_of=AS_OF),
                                     at_least=0.5, most=5)
    extra = {"eligible": len(ranking.eligible)}
    spec = importlib.util.spec_from_file_location("bench_appraisal", HERE / "bench_appraisal.py")
    if spec and spec.loader and (HERE / "bench_appraisal.py").exists():
        ba = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(ba)
        from vetting.appraisal.ranking import COMPONENT_NAMES, component_matrix, p_best_draws, smallest_flips

        w = np.array([ranking.weights[n] for n in COMPONENT_NAMES])
        # 1. the whole ranking against the same arithmetic in bare numpy for every instrument
        #    (gates, components, meta-analysis, impact ratio, scores, draws), inputs laid out
        laid = ba.lay_out(job, instruments, AS_OF)
        b, _, _ = _repeat(lambda: ba.baseline_all(laid, w, DRAWS, 0), at_least=0.5, most=5)
        extra.update({"numpy_baseline_s": round(b, 4), "ratio_to_numpy": round(seconds / b, 2)})
        #    and the same baseline starting from the records, as rank() does (laying out timed)
        br, _, _ = _repeat(lambda: ba.baseline_all(ba.lay_out(job, instruments, AS_OF), w, DRAWS, 0),
                           at_least=0.5, most=5)
        extra.update({"numpy_from_records_s": round(br, 4), "ratio_to_numpy_from_records": round(seconds / br, 2)})
        #    and the ranking with every instrument's evidence read (rank() writes the evidence
        #    of the instruments failing a gate on first reading: the memo, `rank --json` and
        #    Compare's table read it all), against the same two baselines
        def read_all():
            ranked = rank(job, instruments, draws=DRAWS, seed=0, as_of=AS_OF)
            for r in ranked.results:
                (r.score, r.gates, r.components, r.warnings, r.validity, r.reliability_used, r.impact_ratio)
            return ranked

        ra, _, _ = _repeat(read_all, at_least=0.5, most=5)
        extra.update({"rank_read_all_s": round(ra, 4), "read_all_ratio_to_numpy": round(ra / b, 2),
                      "read_all_ratio_to_numpy_from_records": round(ra / br, 2)})
        # 2. the robustness arithmetic alone (the draws and the weight flips of the eligible
        #    instruments) against the bare-numpy draws on the same component matrix
        elig = ranking.eligible
        if len(elig) > 1:
            C = component_matrix(elig)
            vr = np.array([np.nan if a.validity.conservative is None else a.validity.conservative for a in elig])
            vse = np.array([np.nan if a.validity.se_mean_r is None else a.validity.se_mean_r for a in elig])
            raw_w = np.array([float(job.policy.weights.get(n, 0.0)) for n in COMPONENT_NAMES])
            keys = [a.instrument for a in elig]

            def ours():
                p_best_draws(C, w, vr, vse, draws=DRAWS, seed=0)
                smallest_flips(C, raw_w, keys)

            d, _, _ = _repeat(ours, at_least=0.5, most=5)
            db, _, _ = _repeat(lambda: ba.baseline(C, np.nan_to_num(vr), np.nan_to_num(vse), w, DRAWS, 0),
                               at_least=0.5, most=5)
            extra.update({"draws_s": round(d, 4), "draws_numpy_s": round(db, 4), "draws_ratio": round(d / db, 2),
                          "appraisal_s": round(max(0.0, seconds - d), 4)})
    return seconds, runs, extra


def _tui(url: str, size: int, *, keys: bool):
    """Time the interface headless (App.run_test, 160x48).

    tui-first: from start until the first usable screen (`first_page_s`: the first page of a
    large catalogue, or every row of a small one, painted) and until the table holds every row
    (`table_filled_s`, the figure reported).

    tui-keys: the response time of each interactive action, reported separately (`<action>_ms`,
    the median of its repeats, and `<action>_max_ms`). Each key is delivered the way a terminal
    delivers it (a Key event sent by the driver, without the Pilot's idle waits, which sleep at
    least 40 ms a key and also wait for any background worker); the clock stops when what the
    key asks for is on screen: at the first frame handed to the terminal for which the condition
    named below holds (checked by the app's display hook as each frame goes out; since the sixth
    round). `<action>_settled_ms` keeps the earlier measure, which stopped once the condition held
    and a further refresh had run (a `call_after_refresh` callback): one frame more whenever an
    animation kept the screen busy. Actions: a filter keystroke (the debounce
    included) until the table shows the filtered rows, Escape clearing the filter, moving the
    cursor a row and a page, sorting by the next column (Ctrl+O, through every column) and
    reversing it (Ctrl+R) until the new order is shown, Enter until the instrument editor's form is ready with the cursor
    in its first field, the editor's next section (Ctrl+O) until its fields are built, F2 back
    to the catalogue, F1 until the key list is filled, Ctrl+P until the command palette shows,
    F3 until the Jobs screen is shown (and `jobs_filled_ms`, its worker), Enter there until the
    job editor is ready (`open_job_editor`) and Escape back (`back_to_jobs`), F4 until Compare shows
    its "working" state (then, while the ranking runs in its worker, a key that hides the
    detail panel, `compare_key_while_ranking_ms`; `compare_ranked_s` until the ranked table is
    there; moving its cursor and choosing), F5-F7 until Plan, Gaps and Memo are shown
    (`<screen>_done_s`: their workers finished); on Plan, a step of the selection ratio
    (`plan_step`), the next instrument (`plan_instrument`) and the ratio/cut switch (`plan_mode`),
    each until the figures for the new choice are there (they are worked out in a worker). `<screen>_max_stall_ms` is the longest the
    interface's event loop went without running while that screen worked (how long a key could
    wait at worst then). The figure reported for tui-keys is the slowest action's median.
    """
    import asyncio

    from textual import events

    from vetting.tui.app import make_app

    async def wait_until(pilot, cond, timeout=300.0):
        deadline = time.perf_counter() + timeout
        while not cond():
            if time.perf_counter() > deadline:
                raise TimeoutError("the interface never got there")
            await pilot.pause(0.002)

    async def main():
        out: dict = {}
        times: dict[str, list[float]] = {}
        app = make_app(url, today=AS_OF, cursor_blink=False)
        t0 = time.perf_counter()
        async with app.run_test(size=(160, 48)) as pilot:
            await wait_until(pilot, lambda: type(app.screen).__name__ == "CatalogueScreen")
            out["screen_shown_s"] = time.perf_counter() - t0
            screen = app.screen
            def filled() -> bool:
                status = screen.query_one("#status")
                text = str(getattr(status, "content", "") or getattr(status, "renderable", ""))
                if "Could not read" in text:
                    raise RuntimeError(f"the interface could not load the catalogue: {text}")
                cap = getattr(screen, "MAX_TABLE_ROWS", None) or len(screen.rows)  # the table may hold the first N
                return getattr(screen, "loaded", False) and (
                    screen.query_one("DataTable").row_count == min(len(screen.shown), cap))

            # the first usable screen: the first page of rows (large catalogues) or every row,
            # painted
            await wait_until(pilot, lambda: getattr(screen, "first_page_shown", False) or filled())
            done = asyncio.Event()
            screen.call_after_refresh(done.set)
            await done.wait()
            out["first_page_s"] = time.perf_counter() - t0
            await wait_until(pilot, filled)
            out["table_filled_s"] = time.perf_counter() - t0
            out["rows"] = len(screen.rows)
            out["table_rows"] = screen.query_one("DataTable").row_count
            if keys and screen.rows:
                await _tui_actions(app, pilot, screen, out, times)
        out["total_s"] = time.perf_counter() - t0
        for name, values in times.items():
            out[f"{name}_ms"] = 1000 * statistics.median(values)
            if len(values) > 1:
                out[f"{name}_max_ms"] = 1000 * max(values)
        return out

    async def _tui_actions(app, pilot, screen, out: dict, times: dict) -> None:
        loop_stall = {"max": 0.0, "last": time.perf_counter(), "on": True}

        async def watch_loop() -> None:  # how long the event loop goes without running
            while loop_stall["on"]:
                await asyncio.sleep(0.005)
                now = time.perf_counter()
                loop_stall["max"] = max(loop_stall["max"], now - loop_stall["last"] - 0.005)
                loop_stall["last"] = now

        async def until(cond, timeout=60.0) -> None:
            deadline = time.perf_counter() + timeout
            while True:
                try:
                    if cond():
                        return
                except Exception:  # the widget asked about is not mounted yet
                    pass
                if time.perf_counter() > deadline:
                    raise TimeoutError("the interface never got there")
                await asyncio.sleep(0.001)

        async def painted() -> None:
            done = asyncio.Event()
            app.screen.call_after_refresh(done.set)
            await done.wait()

        # The clock stops at the first frame handed to the terminal that shows the result: the
        # app's display hook checks the action's condition as each frame goes out. (Waiting for
        # "the next refresh" after the condition instead counted one frame more whenever an
        # animation, such as the tab underline's slide, kept the screen busy: 15-40 ms.)
        shown_at: dict = {"cond": None, "at": None}
        display = app._display

        def display_and_note(screen_, update) -> None:
            display(screen_, update)
            cond_ = shown_at["cond"]
            if cond_ is not None and shown_at["at"] is None and update is not None and not app._batch_count:
                try:
                    if cond_():
                        shown_at["at"] = time.perf_counter()
                except Exception:  # the widget asked about is not mounted yet
                    pass

        app._display = display_and_note

        async def act(name: str, key: str, cond, timeout: float = 60.0) -> float:
            shown_at["cond"], shown_at["at"] = cond, None
            t = time.perf_counter()
            app._driver.send_message(events.Key(key, key if len(key) == 1 else None))
            await until(cond, timeout)
            # not done while the screen is held for a batch of changes: a callback asked for
            # "after the next refresh" then runs at once, with nothing painted
            await until(lambda: not app._batch_count, timeout)
            await painted()
            settled = time.perf_counter()
            shown_at["cond"] = None
            seconds = (shown_at["at"] or settled) - t
            times.setdefault(name, []).append(seconds)
            # the earlier measure, kept for comparison with earlier rounds
            times.setdefault(f"{name}_settled", []).append(settled - t)
            return seconds

        async def settle() -> None:
            await until(lambda: not any(w.is_running for w in app.workers), 600)
            await pilot.pause()

        def name_of() -> str:
            return type(app.screen).__name__

        watcher = asyncio.create_task(watch_loop())
        table = screen.query_one("DataTable")
        await settle()

        # filter keystrokes ("zep" then Escape), three rounds; the first keystroke of a round
        # filters every instrument, the next ones narrow
        for round_ in range(3):
            for ch in "zep":
                before = screen.shown
                seconds = await act("filter_key", ch, lambda: screen.shown is not before and screen._filter_timer is None)
                if round_ == 0 and ch == "z":
                    out["filter_key_first_ms"] = 1000 * seconds
            out["filtered_rows"] = len(screen.shown)
            before = screen.shown
            await act("filter_clear", "escape", lambda: screen.shown is not before and screen._filter_timer is None)
        out["debounce_ms"] = 1000 * screen.DEBOUNCE_SECONDS

        table.focus()
        table.move_cursor(row=0, animate=False)
        await pilot.pause()
        for _ in range(10):
            row = table.cursor_row
            await act("cursor_move", "down", lambda: table.cursor_row != row)
        for _ in range(3):
            row = table.cursor_row
            await act("page_down", "pagedown", lambda: table.cursor_row != row)

        # sorting the catalogue: the next column (Ctrl+O) through every column, then reversing
        # (Ctrl+R), each until the table shows the new order
        from vetting.tui.screens.catalogue import COLUMN_IDS

        for _ in range(len(COLUMN_IDS)):
            before = (screen.sort_column, screen.sort_reverse)
            await act("sort_next", "ctrl+o", lambda: (screen.sort_column, screen.sort_reverse) != before)
        for _ in range(3):
            before = (screen.sort_column, screen.sort_reverse)
            await act("sort_reverse", "ctrl+r", lambda: (screen.sort_column, screen.sort_reverse) != before)
        table.focus()
        table.move_cursor(row=0, animate=False)
        await pilot.pause()

        # the instrument editor: open, step through its sections, back to the catalogue
        for index in range(3):
            await act("open_editor", "enter", lambda: name_of() == "InstrumentEditor" and app.screen.ready
                      and app.screen.built("describe") and app.screen.focused is not None)
            if index == 0:
                out["open_editor_first_ms"] = 1000 * times["open_editor"][0]
            editor = app.screen
            tabs = editor.query_one("#sections")
            for _ in range(len(editor.sections()) - 1):
                before = tabs.active
                await act("editor_section", "ctrl+o", lambda: tabs.active != before and editor.built(tabs.active))
            await act("back_to_catalogue", "f2", lambda: app.screen is screen)
            table.focus()
            await pilot.pause()

        for _ in range(3):
            await act("help", "f1", lambda: name_of() == "HelpScreen" and app.screen.query_one("DataTable").row_count > 0)
            await act("help_close", "escape", lambda: app.screen is screen)
        for _ in range(3):
            await act("palette", "ctrl+p", lambda: name_of() == "CommandPalette")
            await act("palette_close", "escape", lambda: app.screen is screen)
        for _ in range(2):
            await act("jobs", "f3", lambda: name_of() == "JobsScreen")
            t = time.perf_counter()
            await until(lambda: app.screen.query_one("DataTable").row_count > 0)
            times.setdefault("jobs_filled", []).append(time.perf_counter() - t)
            await settle()
            jobs_screen = app.screen
            jobs_table = jobs_screen.query_one("DataTable")
            jobs_table.focus()
            await pilot.pause()
            await act("open_job_editor", "enter", lambda: name_of() == "JobEditor" and app.screen.ready
                      and app.screen.focused is not None)
            await act("back_to_jobs", "escape", lambda: app.screen is jobs_screen)
            await act("back_to_catalogue", "f2", lambda: app.screen is screen)

        # the results screens: F4-F7 from the catalogue; the key's response, then the work
        for key, name in (("f4", "compare"), ("f5", "plan"), ("f6", "gaps"), ("f7", "memo")):
            cls = f"{name.title()}Screen"
            cond = (lambda: name_of() == cls and app.screen.query_one("#working").display
                    and str(app.screen.query_one("#working-text").render()).strip() != "") if name == "compare" \
                else (lambda: name_of() == cls)
            await act(name, key, cond)
            loop_stall["max"] = 0.0
            started = time.perf_counter()
            results_screen = app.screen
            if name == "compare":
                for _ in range(3):
                    if results_screen.ranking is not None:
                        break
                    detail = results_screen.query_one("#detail")
                    shown = detail.display
                    await act("compare_key_while_ranking", "w", lambda: detail.display != shown)
                await until(lambda: results_screen.ranking is not None, 600)
                out["compare_ranked_s"] = time.perf_counter() - started
            await settle()
            out[f"{name}_done_s"] = time.perf_counter() - started
            out[f"{name}_max_stall_ms"] = 1000 * loop_stall["max"]
            if name == "plan" and getattr(results_screen, "cut_plan", None) is not None:
                # the planner's keys: a step of the selection ratio, the next instrument, the
                # ratio/cut switch, each until the figures for the new choice are shown
                for key_, action in (("right", "plan_step"), ("right", "plan_step"), ("left", "plan_step"),
                                     ("i", "plan_instrument"), ("i", "plan_instrument"),
                                     ("m", "plan_mode"), ("m", "plan_mode")):
                    before = results_screen.cut_plan
                    if before is None or (key_ == "m" and results_screen.mode == "ratio" and before.cut.raw is None):
                        continue  # no figures, or no norm group for a raw cut: the key only explains
                    await act(action, key_, lambda: results_screen.cut_plan is not before
                              or results_screen.error is not None)
                    await settle()
            if name == "compare" and results_screen.ranking is not None:
                ranking_table = results_screen.query_one("DataTable")
                ranking_table.focus()
                await pilot.pause()
                for _ in range(5):
                    row = ranking_table.cursor_row
                    await act("compare_cursor", "down", lambda: ranking_table.cursor_row != row)
                eligible = [i for i, r in enumerate(results_screen.ranking.results) if r.eligible]
                if eligible:
                    ranking_table.move_cursor(row=eligible[0], animate=False)
                    await pilot.pause()
                    chosen_before = results_screen.query_one("#chosen").render()
                    await act("compare_choose", "space",
                              lambda: str(results_screen.query_one("#chosen").render()) != str(chosen_before))
                    await settle()
            await act("back_to_catalogue", "f2", lambda: app.screen is screen)
            table.focus()
            await settle()
        loop_stall["on"] = False
        await watcher

    out = asyncio.run(main())
    # tui-first: the whole table; tui-keys: the slowest warm interactive action (its median)
    if not keys:
        seconds = out["table_filled_s"]
    else:
        interactive = ("filter_key", "filter_clear", "cursor_move", "page_down", "sort_next", "sort_reverse",
                       "open_editor", "editor_section", "back_to_catalogue", "help", "help_close", "palette",
                       "palette_close", "jobs", "open_job_editor", "back_to_jobs", "compare",
                       "compare_key_while_ranking", "compare_cursor", "compare_choose", "plan", "plan_step",
                       "plan_instrument", "plan_mode", "gaps", "memo")
        medians = [out[f"{name}_ms"] for name in interactive if f"{name}_ms" in out]
        seconds = max(medians) / 1000 if medians else None
        if medians:
            out["slowest_action"] = max((out[f"{n}_ms"], n) for n in interactive if f"{n}_ms" in out)[1]
    return seconds, ([seconds] if seconds is not None else []), {
        k: round(v, 3) if isinstance(v, float) else v for k, v in out.items()}


# ---------------------------------------------------------------------------------------------
# parent side
# ---------------------------------------------------------------------------------------------


def _run_worker(op: str, size: int, url: str, workdir: Path, timeout: float) -> dict:
    cmd = [sys.executable, str(Path(__file__).resolve()), "--worker", op, "--size", str(size),
           "--url", url, "--workdir", str(workdir)]
    t0 = time.perf_counter()
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, cwd=REPO)
    wall = time.perf_counter() - t0
    if done.returncode != 0:
        tail = (done.stderr or done.stdout).strip().splitlines()[-3:]
        return {"op": op, "size": size, "error": " | ".join(tail), "process_s": round(wall, 2)}
    result = json.loads(done.stdout.strip().splitlines()[-1])
    result["process_s"] = round(wall, 2)
    return result


def _pg_database(base: str, name: str) -> str:
    import psycopg
    from sqlalchemy.engine import make_url

    plain = base.replace("postgresql+psycopg://", "postgresql://", 1)
    with psycopg.connect(plain, autocommit=True) as conn:
        conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        conn.execute(f'CREATE DATABASE "{name}"')
    return make_url(base).set(database=name).render_as_string(hide_password=False)


def _pg_drop(base: str, name: str) -> None:
    import psycopg

    plain = base.replace("postgresql+psycopg://", "postgresql://", 1)
    try:
        with psycopg.connect(plain, autocommit=True) as conn:
            conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
    except psycopg.Error as exc:  # a benchmark database left behind is not worth failing for
        print(f"could not drop the benchmark database {name}: {exc}", file=sys.stderr)


def _fit_exponent(points: list[tuple[int, float]]) -> float | None:
    """b in time ~ a * n^b, least squares on log-log (None with fewer than 2 sizes)."""
    pts = [(n, t) for n, t in points if n > 0 and t and t > 0]
    if len(pts) < 2:
        return None
    xs = [math.log(n) for n, _ in pts]
    ys = [math.log(t) for _, t in pts]
    mx, my = statistics.fmean(xs), statistics.fmean(ys)
    sxx = sum((x - mx) ** 2 for x in xs)
    return sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sxx if sxx else None


def machine() -> str:
    cpu = "unknown CPU"
    try:
        for line in open("/proc/cpuinfo"):
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    mem = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30
    load = open("/proc/loadavg").read().split()[:3] if Path("/proc/loadavg").exists() else []
    return (f"{cpu}, {os.cpu_count()} cores, {mem:.0f} GiB RAM, {platform.system()} {platform.release()}, "
            f"Python {platform.python_version()}, load average at start {' '.join(load)}")


def _fmt_s(t: float | None) -> str:
    if t is None:
        return "—"
    if t < 0.01:
        return f"{t * 1000:.2f} ms"
    return f"{t * 1000:.0f} ms" if t < 1 else f"{t:.1f} s"


def markdown(results: list[dict], sizes: list[int]) -> str:
    backends = sorted({r.get("backend", "sqlite") for r in results}, key=lambda b: b != "sqlite")
    lines = []
    for backend in backends:
        rows = [r for r in results if r.get("backend", "sqlite") == backend]
        ops = [op for op in ALL if any(r["op"] == op for r in rows)]
        lines.append(f"**{backend}** — time (peak memory of the process)\n")
        lines.append("| operation | " + " | ".join(f"{n:,}" for n in sizes) + " | growth exponent |")
        lines.append("|---|" + "---|" * len(sizes) + "---|")
        for op in ops:
            cells, pts = [], []
            for n in sizes:
                r = next((x for x in rows if x["op"] == op and x["size"] == n), None)
                if r is None:
                    cells.append("—")
                elif "error" in r:
                    cells.append("failed")
                else:
                    cells.append(f"{_fmt_s(r['seconds'])} ({r.get('cli_peak_mb', r['peak_mb']):.0f} MB)")
                    if r["seconds"] is not None:
                        pts.append((n, r["seconds"]))
            b = _fit_exponent(pts)
            lines.append(f"| {op} | " + " | ".join(cells) + f" | {'—' if b is None else f'{b:.2f}'} |")
        lines.append("")
    return "\n".join(lines)


def table_from_logs(paths: list[str]) -> str:
    """The markdown table from the lines this script printed (for runs split over several
    invocations, e.g. `--sizes 100,1000` and then `--sizes 10000 --only ...`)."""
    results = []
    for path in paths:
        for line in Path(path).read_text().splitlines():
            parts = line.split(None, 2)
            if len(parts) == 3 and parts[0] in ("sqlite", "postgresql") and parts[1] in ALL:
                r = json.loads(parts[2])
                if "seconds" in r or "error" in r:
                    r.update(op=parts[1], backend=parts[0])
                    results.append(r)
            elif line.startswith("== "):
                size = int(line.split()[1].replace(",", ""))
            if results and "size" not in results[-1]:
                results[-1]["size"] = size
    sizes = sorted({r["size"] for r in results})
    return markdown(results, sizes)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description="vetting benchmark suite (see the module docstring)")
    ap.add_argument("--sizes", default=",".join(map(str, DEFAULT_SIZES)), help="instrument counts, comma-separated")
    ap.add_argument("--only", default="", help="comma-separated operations (default: all)")
    ap.add_argument("--pg", metavar="URL", default=None,
                    help="also run the store operations on this PostgreSQL server (a fresh database per size)")
    ap.add_argument("--json", metavar="FILE", default=None, help="write every result as JSON")
    ap.add_argument("--timeout", type=float, default=1800, help="seconds allowed for one operation")
    ap.add_argument("--keep", action="store_true", help="keep the working folder")
    # worker mode (internal)
    ap.add_argument("--worker", help=argparse.SUPPRESS)
    ap.add_argument("--size", type=int, help=argparse.SUPPRESS)
    ap.add_argument("--url", help=argparse.SUPPRESS)
    ap.add_argument("--workdir", help=argparse.SUPPRESS)
    ap.add_argument("--table-from-logs", nargs="+", metavar="LOG", help="print the table from earlier runs' output")
    args = ap.parse_args(argv)

    if args.table_from_logs:
        print(table_from_logs(args.table_from_logs))
        return 0

    if args.worker:
        print(json.dumps(worker(args.worker, args.size, args.url, Path(args.workdir))))
        return 0

    sizes = [int(s) for s in args.sizes.split(",") if s.strip()]
    ops = [o.strip() for o in args.only.split(",") if o.strip()] or list(ALL)
    unknown = set(ops) - set(ALL)
    if unknown:
        ap.error(f"unknown operation(s): {', '.join(sorted(unknown))}; choose from {', '.join(ALL)}")

    print(f"machine: {machine()}", flush=True)
    print(f"command: {' '.join([Path(sys.executable).name, *sys.argv])}", flush=True)
    workdir = Path(tempfile.mkdtemp(prefix="vetting-bench-"))
    results: list[dict] = []
    pg_names: list[str] = []
    try:
        for n in sizes:
            gen = _run_worker("generate", n, "", workdir, args.timeout)
            if "error" in gen:
                raise SystemExit(f"could not generate the catalogue: {gen['error']}")
            print(f"\n== {n:,} instruments, {gen['jobs']} jobs (generated in {gen['seconds']:.1f} s, "
                  f"file {gen['file_mb']} MB)", flush=True)
            targets = [("sqlite", f"sqlite:///{workdir / f'bench-{n}.db'}")]
            if args.pg:
                # the process id keeps two runs against one server apart
                pg_name = f"vetting_bench_{os.getpid()}_{n}"
                pg_names.append(pg_name)
                targets.append(("postgresql", _pg_database(args.pg, pg_name)))
            for backend, url in targets:
                # the database is filled by the import; without it the other operations need one
                needed = ["import"] + [o for o in ops if o != "import"]
                for op in needed:
                    if backend != "sqlite" and op not in STORE_OPS:
                        continue
                    r = _run_worker(op, n, url, workdir, args.timeout)
                    r["backend"] = backend
                    if op in ops:
                        results.append(r)
                    if args.json:  # written as it goes, so a long run that is stopped keeps its figures
                        Path(args.json).write_text(json.dumps({"machine": machine(), "sizes": sizes,
                                                               "results": results}, indent=1))
                    shown = {k: v for k, v in r.items() if k not in ("op", "size", "backend", "runs")}
                    print(f"  {backend:10} {op:12} {json.dumps(shown)}", flush=True)
            # issue 8: ranking results identical on SQLite and PostgreSQL
            digests = {r["backend"]: r.get("digest") for r in results if r["op"] == "rank" and r["size"] == n}
            if len(digests) > 1:
                same = len(set(digests.values())) == 1
                print(f"  ranking identical on SQLite and PostgreSQL: {'yes' if same else 'NO'} {digests}", flush=True)
                results.append({"op": "rank-identical", "size": n, "identical": same, "digests": digests})
    finally:
        if not args.keep:
            import shutil

            shutil.rmtree(workdir, ignore_errors=True)
            for name in pg_names:
                _pg_drop(args.pg, name)
        else:
            print(f"working folder kept: {workdir}")

    table_results = [r for r in results if r["op"] in ALL]
    print("\n" + markdown(table_results, sizes))
    if args.json:
        Path(args.json).write_text(json.dumps({"machine": machine(), "sizes": sizes, "results": results}, indent=1))
        print(f"results written to {args.json}")
    failed = [r for r in results if "error" in r]
    for r in failed:
        print(f"FAILED {r['op']} at {r['size']}: {r['error']}", file=sys.stderr)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.path.insert(0, str(REPO))
    raise SystemExit(main())
