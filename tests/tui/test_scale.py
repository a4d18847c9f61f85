"""What the interface does to stay quick on large catalogues, checked for the same outcome as
the plain way: narrowing the filter from the previous matches, adding long result tables in
batches, moving the chosen mark without refilling, shortening the memo preview, and pausing
the garbage collector's full scans only while the interface runs.

The expected outcomes come from the engine itself (`rank`, `gap_report`) and from filtering
every row afresh; what is checked is that the quicker paths give exactly the same rows in
the same order (common practice for such optimisations, no published source)."""

from __future__ import annotations

import gc

from hypothesis import given, settings
from hypothesis import strategies as st
from textual.widgets import DataTable, Markdown

from vetting.appraisal import rank
from vetting.records import gcpause
from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue
from vetting.tui.screens.catalogue import CatalogueScreen, filter_rows, narrows
from vetting.tui.screens.compare import CompareScreen
from vetting.tui.screens.gaps import GapsScreen
from vetting.tui.screens.memo import MemoScreen, preview_markdown

from .conftest import TODAY


def _rows(haystacks: list[str]):
    from vetting.tui.data import CatalogueRow

    return [CatalogueRow(f"k{i}", f"T{i}", "", [], None, haystack=h) for i, h in enumerate(haystacks)]


@settings(max_examples=200, deadline=None)
@given(
    st.lists(st.text(alphabet="abc -", max_size=12), max_size=40),
    st.text(alphabet="abC -", max_size=6),
    st.text(alphabet="abc -", max_size=4),
)
def test_narrowing_the_filter_gives_the_same_rows_as_filtering_every_row(haystacks, typed, more):
    rows = _rows([h.lower() for h in haystacks])
    before, after = typed, typed + more
    if narrows(before, after):
        assert filter_rows(filter_rows(rows, before), after) == filter_rows(rows, after)


def test_narrowing_is_only_used_when_text_is_added_at_the_end():
    assert narrows("ab", "abc") and narrows("ab", "ab c") and narrows("a b", "a bc")
    assert not narrows("abc", "ab")  # deleting widens
    assert not narrows("ab", "xab")  # typed in front
    assert not narrows("", "a")  # nothing typed before: every row is the base anyway


def test_preview_cuts_long_tables_and_lists_and_says_how_many_more():
    table = ["| Instrument | Gate |", "|---|---|"] + [f"| i{n} | PASS |" for n in range(100)]
    items = [f"- reason {n}" for n in range(45)]
    short = ["| a | b |", "|---|---|", "| 1 | 2 |"]
    text = "\n".join(["<!-- vetting-memo-stamp: x -->", "# Memo", "", *table, "", *items, "", *short, ""])
    preview = preview_markdown(text, rows=40)
    lines = preview.splitlines()
    assert "vetting-memo-stamp" not in preview
    assert "| i39 | PASS |" in lines and "| i40 | PASS |" not in lines
    assert "*… and 60 more rows: the exported memo (k, h or w) has them all.*" in lines
    assert "- reason 39" in lines and "- reason 40" not in lines
    assert "*… and 5 more items: the exported memo (k, h or w) has them all.*" in lines
    assert lines[-3:] == short  # a short table is left whole
    # nothing to cut: the same text, without the stamp
    assert preview_markdown("# Memo\n\n- one\n- two\n") == "# Memo\n\n- one\n- two\n"


def _generated_url(tmp_path, n: int) -> str:
    url = f"sqlite:///{tmp_path / 'scale.db'}"
    with Store.open(url, user="test") as store:
        store.import_catalogue(generate_catalogue(n, seed=3), source="generated")
    return url


def _first_job(store: Store):
    """The job the interface makes current at start (the first by title)."""
    return min(store.jobs(), key=lambda j: j.title.lower())


async def _open(pilot, settle, name: str, job: str) -> object:
    await settle(pilot)
    pilot.app.current_job = job
    pilot.app.go(name)
    await settle(pilot, rounds=6)
    return pilot.app.screen


async def test_long_ranking_is_added_in_batches_and_ends_as_the_engines(tmp_path, app_for, settle):
    url = _generated_url(tmp_path, 300)  # more rows than the first batch and one more batch
    with Store.open(url) as store:
        job = _first_job(store)
        expected = rank(job, store.instruments(), draws=2000, seed=0, as_of=TODAY)
    app = app_for(url)
    async with app.run_test(size=(140, 40)) as pilot:
        screen = await _open(pilot, settle, "compare", job.key)
        assert isinstance(screen, CompareScreen) and screen.ranking is not None, screen.error
        assert len(expected.results) > CompareScreen.FIRST_ROWS + 1
        table = screen.query_one(DataTable)
        assert table.row_count == len(expected.results)
        keys = [row.value for row in table.rows]
        assert keys == [r.instrument for r in expected.results]
        cols = [c.id for c in screen.cols]
        last = [str(getattr(c, "plain", c)).strip() for c in table.get_row_at(len(expected.results) - 1)]
        assert last[cols.index("score")] == f"{expected.results[-1].score:.1f}"

        # choosing moves the ▶ mark in the rank column of two rows, as a full refill would show
        top = expected.top
        table.move_cursor(row=keys.index(top.instrument), column=cols.index("score"), animate=False)
        await pilot.pause()
        await pilot.press("space")
        await pilot.pause()
        rank_cell = str(table.get_row_at(keys.index(top.instrument))[cols.index("rank")])
        assert rank_cell == f"▶{top.rank}"
        second = next(r for r in expected.results if r.eligible and r.instrument != top.instrument)
        table.move_cursor(row=keys.index(second.instrument), animate=False)
        await pilot.pause()
        await pilot.press("space")
        await pilot.pause()
        assert str(table.get_row_at(keys.index(top.instrument))[cols.index("rank")]) == f" {top.rank}"
        assert str(table.get_row_at(keys.index(second.instrument))[cols.index("rank")]) == f"▶{second.rank}"


async def test_long_gaps_list_is_added_in_batches_in_title_order(tmp_path, app_for, settle):
    url = _generated_url(tmp_path, 300)
    with Store.open(url) as store:
        job = _first_job(store)
        titles = [i.key for i in sorted(store.instruments(), key=lambda i: i.title.lower())]
    app = app_for(url)
    async with app.run_test(size=(140, 40)) as pilot:
        screen = await _open(pilot, settle, "gaps", job.key)
        assert isinstance(screen, GapsScreen)
        table = screen.query_one(DataTable)
        assert [row.value for row in table.rows] == titles
        assert [r.instrument for r in screen.reports] == titles


async def test_memo_preview_of_a_large_catalogue_is_cut(tmp_path, app_for, settle):
    url = _generated_url(tmp_path, 150)
    with Store.open(url) as store:
        job = _first_job(store)
    app = app_for(url)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _open(pilot, settle, "memo", job.key)
        assert isinstance(screen, MemoScreen) and screen.markdown, screen.error
        assert "more rows: the exported memo (k, h or w) has them all." in screen.markdown
        assert screen.query_one("#memo-md", Markdown).source == screen.markdown


async def test_collector_settings_are_the_interpreters_again_after_the_interface(seeded_url, app_for, settle):
    threshold = gc.get_threshold()
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        assert isinstance(app.screen, CatalogueScreen) and app.screen.loaded
        assert gc.get_freeze_count() > 0  # what was loaded is left out of full collections
        assert gc.get_threshold()[2] > threshold[2]  # full collections wait for an idle moment
        assert not gcpause._pausing  # so bulk work in workers need not switch the collector off
    assert gc.get_threshold() == threshold
    assert gc.get_freeze_count() == 0
    assert gcpause._pausing


# -- opening and leaving the results screens (issue 8) -------------------------------------
# What is checked is the mechanism, never a time: the screens' stylesheets are read once at
# start, a closed screen is freed, the idle collection's rules, and the memo pane restyling
# only itself on a focus change (common practice for such optimisations, no published source).

_JOB = "claims-clerk"  # the invented job of conftest.invented_catalogue


async def test_results_stylesheets_are_read_at_start_and_not_again_when_a_screen_opens(
        seeded_url, app_for, settle, monkeypatch):
    from pathlib import Path

    import vetting.tui.screens as screens_package

    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot)
        folder = Path(screens_package.__file__).parent
        for name in ("compare", "plan", "gaps", "memo"):
            assert app.stylesheet.has_source(str(folder / f"{name}.tcss")), name
        reparsed = []
        original = app.stylesheet.reparse
        monkeypatch.setattr(app.stylesheet, "reparse", lambda: (reparsed.append(1), original())[1])
        for name in ("compare", "plan", "gaps", "memo"):
            screen = await _open(pilot, settle, name, _JOB)
            assert type(screen).__name__ == f"{name.title()}Screen"
        assert reparsed == []


async def test_a_closed_results_screen_is_freed(seeded_url, app_for, settle):
    import weakref

    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        gone = []
        for name in ("compare", "gaps", "memo"):
            screen = await _open(pilot, settle, name, _JOB)
            assert type(screen).__name__ == f"{name.title()}Screen"
            gone.append((name, weakref.ref(screen)))
            del screen
            app.go("catalogue")
            await settle(pilot)
        gc.collect()
        # Textual's pool threads used to keep their last worker, and with it its screen
        assert [name for name, ref in gone if ref() is not None] == []


async def test_modules_used_by_the_results_screens_are_loaded_and_frozen_after_the_catalogue(
        seeded_url, app_for, settle):
    from vetting.tui.app import WARM_MODULES

    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot)
        assert app._heap_frozen
        import sys

        from vetting.tui.screens import memo

        assert all(name in sys.modules for name in WARM_MODULES)
        # frozen objects are left out of gc.get_objects(): the module's functions are there
        assert not any(o is memo.preview_markdown for o in gc.get_objects())
    assert any(o is memo.preview_markdown for o in gc.get_objects())  # handed back on exit


def _full_collections_during(fn) -> int:
    count = []

    def callback(phase, info):
        if phase == "stop" and info["generation"] == 2:
            count.append(1)

    gc.callbacks.append(callback)
    try:
        fn()
    finally:
        gc.callbacks.remove(callback)
    return len(count)


async def test_idle_full_collection_runs_on_the_catalogue_and_freezes_what_survives(seeded_url, app_for, settle):
    from vetting.tui import app as app_module

    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot)
        assert app.at_rest()

        def idle_long_ago():
            app._last_input = app._last_busy = 0.0
            if app._rest_since is not None:
                app._rest_since = 0.0
            for _ in range(app_module.FULL_COLLECTION_AFTER):
                gc.collect(1)  # each young collection adds one to the oldest generation's count

        import time

        app._collect_when_idle()  # notes that only the catalogue is shown, since now
        assert app._rest_since is not None
        app._last_input = app._last_busy = 0.0
        for _ in range(app_module.FULL_COLLECTION_AFTER):
            gc.collect(1)
        assert _full_collections_during(app._collect_when_idle) == 0  # at rest only just now
        idle_long_ago()
        app._last_input = time.monotonic()  # a key just now: no collection
        assert _full_collections_during(app._collect_when_idle) == 0
        idle_long_ago()
        frozen = gc.get_freeze_count()
        leftover = object.__new__(type("Leftover", (), {}))  # survives: frozen after the collection
        assert _full_collections_during(app._collect_when_idle) == 1
        assert gc.get_freeze_count() > frozen
        assert not any(o is leftover for o in gc.get_objects())

        # a results screen opened and closed: collected on the catalogue however little was
        # allocated (closing a screen makes garbage without allocating)
        app._last_input = time.monotonic()  # as if keys were pressed: the timer does nothing
        screen = await _open(pilot, settle, "gaps", _JOB)
        assert type(screen).__name__ == "GapsScreen"
        del screen
        app.go("catalogue")
        await settle(pilot)
        assert app.at_rest() and app._screen_closed
        app._last_input = app._last_busy = app._rest_since = 0.0
        gc.collect()  # the young count starts afresh
        assert gc.get_count()[2] < app_module.FULL_COLLECTION_AFTER
        assert _full_collections_during(app._collect_when_idle) == 1
        assert _full_collections_during(app._collect_when_idle) == 0  # once

        # with a results screen open, the idle collection waits for much more garbage
        screen = await _open(pilot, settle, "compare", _JOB)
        assert type(screen).__name__ == "CompareScreen" and not app.at_rest()
        idle_long_ago()
        assert _full_collections_during(app._collect_when_idle) == 0
        for _ in range(app_module.FULL_COLLECTION_AFTER_OPEN):
            gc.collect(1)
        frozen = gc.get_freeze_count()
        assert _full_collections_during(app._collect_when_idle) == 1
        assert gc.get_freeze_count() == frozen  # a screen's widgets are never frozen
    assert gc.get_freeze_count() == 0


async def test_memo_preview_pane_restyles_only_itself_on_a_focus_change(seeded_url, app_for, settle, monkeypatch):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        screen = await _open(pilot, settle, "memo", _JOB)
        assert isinstance(screen, MemoScreen) and screen.markdown, screen.error
        pane = screen.query_one("#preview")
        assert app.focused is pane
        assert len(list(pane.walk_children())) > 20  # the preview's many widgets
        updated = []
        original = app.stylesheet.update_nodes

        def update_nodes(nodes, animate=False):
            nodes = list(nodes)
            updated.extend(nodes)
            return original(nodes, animate=animate)

        monkeypatch.setattr(app.stylesheet, "update_nodes", update_nodes)
        before = pane.styles.background
        pane.blur()
        await pilot.pause()
        assert pane in updated and not any(node in updated for node in pane.walk_children())
        assert pane.styles.background != before  # the :focus look is gone all the same


# -- the memo preview: one widget per table and per list ----------------------------------------
#
# Textual's own Markdown widget makes a widget of every table cell and three of every list item;
# the preview folds each table and each list of one-paragraph items into one widget. What a
# reader sees must not change: the cells and items are checked against what Textual's own
# Markdown blocks hold for the same text (the reference), and the widget count is pinned.


def _textual_tables_and_lists(markdown: str):
    """Cell texts of each table and item texts of each list as Textual's own Markdown widget
    parses them (its blocks, built without mounting)."""
    from markdown_it import MarkdownIt
    from textual.widgets._markdown import MarkdownList, MarkdownListItem, MarkdownTable

    reference = Markdown()
    tables, lists = [], []

    def walk(blocks):
        for block in blocks:
            if isinstance(block, MarkdownTable):
                headers, rows = block._get_headers_and_rows()
                tables.append(([h.plain for h in headers], [[c.plain for c in row] for row in rows]))
            elif isinstance(block, MarkdownList):
                items = [b for b in block._blocks if isinstance(b, MarkdownListItem)]
                lists.append([" ".join(p._content.plain for p in item._blocks) for item in items])
                for item in items:
                    walk(item._blocks)
            else:
                walk(block._blocks)

    walk(list(reference._parse_markdown(MarkdownIt("gfm-like").parse(markdown))))
    return tables, lists


def _preview_tables_and_lists(markdown: str):
    from vetting.tui.screens.memo import LIST_TOKEN, TABLE_TOKEN, preview_parser

    tables, lists = [], []
    for token in preview_parser().parse(markdown):
        if token.type == TABLE_TOKEN:
            tables.append(([h.plain for h in token.meta["headers"]],
                           [[c.plain for c in row] for row in token.meta["rows"]]))
        elif token.type == LIST_TOKEN:
            lists.append([text.plain for _info, text in token.meta["items"]])
    return tables, lists


def test_folded_tables_and_lists_hold_what_textuals_markdown_holds():
    text = "\n".join([
        "# Memo", "", "*A subtitle*", "",
        "| Instrument | r | Note |", "|---|---:|---|",
        "| Alpha \\| one | 0.91 | **bold** and *slanted* |",
        "| Beta\\_two | 0.80 |   |",
        "| `code` here | 1,234 | a \\*star\\* |", "",
        "- **Label:** value", "- plain item with \\# hash", "- third", "",
        "1. first", "2. second", "",
        "> **A quote**", ">", "> with a line", "",
        "| one |", "|---|", "",  # a table without rows
    ])
    expected_tables, expected_lists = _textual_tables_and_lists(text)
    tables, lists = _preview_tables_and_lists(text)
    assert len(expected_tables) == 2 and len(expected_lists) == 2
    assert tables == expected_tables
    assert lists == expected_lists


def test_a_list_with_more_than_a_paragraph_per_item_is_left_to_textual():
    from vetting.tui.screens.memo import LIST_TOKEN, preview_parser

    text = "- one\n- two\n  - nested a\n  - nested b\n"
    types = [t.type for t in preview_parser().parse(text)]
    assert types[0] == "bullet_list_open"  # the outer list, as Textual's parser gives it
    assert types.count(LIST_TOKEN) == 1  # the nested list is simple and folded


async def test_memo_preview_of_1000_instruments_is_one_widget_per_table_and_list(tmp_path, app_for, settle):
    from textual.widgets._markdown import MarkdownTableCellContents

    from vetting.tui.screens.memo import PREVIEW_ROWS, PreviewList, PreviewTable

    url = _generated_url(tmp_path, 1000)
    with Store.open(url) as store:
        job = _first_job(store)
    app = app_for(url)
    async with app.run_test(size=(160, 48)) as pilot:
        screen = await _open(pilot, settle, "memo", job.key)
        assert isinstance(screen, MemoScreen) and screen.markdown, screen.error
        preview = screen.query_one("#memo-md", Markdown)
        widgets = list(preview.query("*"))
        # Textual's own Markdown made over 2,000 here (a widget per cell; value measured on
        # this catalogue before the change, common practice, no published source)
        assert len(widgets) < 200
        assert not preview.query(MarkdownTableCellContents)
        tables = list(preview.query(PreviewTable))
        expected_tables, expected_lists = _textual_tables_and_lists(screen.markdown)
        assert len(tables) == len(expected_tables) and len(list(preview.query(PreviewList))) == len(expected_lists)
        # each table shows its header row and its rows, the long ones cut at PREVIEW_ROWS
        from rich.console import Console

        longest = max(expected_tables, key=lambda t: len(t[1]))
        assert len(longest[1]) == PREVIEW_ROWS
        for widget, (headers, rows) in zip(tables, expected_tables):
            assert [[c.plain for c in row] for row in widget.rows] == rows
            console = Console(width=400, record=True, file=open("/dev/null", "w"))
            console.print(widget.table)
            shown = console.export_text()
            assert all(h in shown for h in headers)
            assert rows[0][0] in shown and rows[-1][0] in shown
        cut_notes = [p for p in preview.query("MarkdownParagraph") if "more rows: the exported memo" in str(p.render())]
        assert cut_notes


def test_a_folded_table_is_drawn_once_per_width_and_as_rich_draws_it():
    from rich.console import Console

    from vetting.tui.screens.memo import TABLE_TOKEN, preview_parser

    text = "| Instrument | r |\n|---|---:|\n" + "".join(f"| Test number {n} with a long title | 0.{n:02d} |\n"
                                                      for n in range(30))
    console = Console(width=200, file=open("/dev/null", "w"), legacy_windows=False)
    options = console.options.update_width(40)
    token = next(t for t in preview_parser((console, options)).parse(text) if t.type == TABLE_TOKEN)
    drawn = token.meta["drawn"]
    drawn_table = drawn.renderable
    calls = []
    original = type(drawn_table).__rich_console__

    def counting(self, console_, options_):
        calls.append(options_.max_width)
        return original(self, console_, options_)

    type(drawn_table).__rich_console__ = counting
    try:
        for width in (40, 40, 60, 40):
            shown = console.render_lines(drawn, console.options.update_width(width), pad=False)
            expected = console.render_lines(drawn_table, console.options.update_width(width), pad=False)
            assert shown == expected  # the reference: Rich drawing the same table itself
    finally:
        type(drawn_table).__rich_console__ = original
    # drawn at 40 when parsed, so only the 60 and the four reference draws; never 40 again
    assert calls.count(60) == 2 and calls.count(40) == 3


def test_the_gathered_records_are_let_go_in_steps_without_changing_anything():
    import weakref

    from vetting.tui.data import drop_in_steps, items_of

    class Record:
        pass

    class Data:
        pass

    records = [Record() for _ in range(1000)]
    shared = [Record() for _ in range(3)]
    inner = Data()
    inner.results = tuple(Record() for _ in range(500))
    data = Data()
    data.instruments, data.by_key, data.ranking, data.shared, data.name = (
        list(records), {i: r for i, r in enumerate(records)}, inner, shared, "x")
    refs = [weakref.ref(r) for r in records + list(inner.results)]
    del records, inner
    held = items_of(data)
    assert len(held) == 1000 + 1000 + 500 + 3
    del data
    assert all(r() is not None for r in refs)  # held, not freed with the containers
    drop_in_steps(held, step=7)
    assert held == [] and all(r() is None for r in refs)
    assert len(shared) == 3 and all(isinstance(r, Record) for r in shared)  # still referred to: untouched


async def test_plan_and_gaps_let_go_of_the_records_they_read_in_steps(tmp_path, app_for, settle, monkeypatch):
    """Plan and Gaps read every instrument in a worker; what they are done with is handed to
    drop_in_steps (freed a step at a time, so the interface's keys can run in between), not
    dropped at once. Plan also hands over its one-draw ranking's results."""
    import vetting.tui.data as data

    url = _generated_url(tmp_path, 120)
    with Store.open(url) as store:
        job = _first_job(store).key
        n = len(store.instruments())
    handed: list[tuple[str, list[str]]] = []
    original = data.drop_in_steps

    def recording(held: list, step: int = 200) -> None:
        handed.append((type(pilot.app.screen).__name__, [type(x).__name__ for x in held]))
        original(held, step)
        assert held == []

    monkeypatch.setattr(data, "drop_in_steps", recording)
    app = app_for(url)
    async with app.run_test(size=(120, 40)) as pilot:
        gaps = await _open(pilot, settle, "gaps", job)
        assert isinstance(gaps, GapsScreen) and len(gaps.reports) == n  # the screen is whole
        await _open(pilot, settle, "plan", job)
    by_screen = dict(handed)
    assert by_screen["GapsScreen"] == ["Instrument"] * n
    plan_kinds = by_screen["PlanScreen"]
    assert plan_kinds.count("Instrument") == n
    assert any("Appraisal" in kind for kind in plan_kinds)  # the ranking that chose the first instrument
