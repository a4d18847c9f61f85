"""One form per editor, refilled for the next record (VettingApp._open_editor, EditorScreen.reuse).

The app keeps one instrument editor and one job editor once built (and builds the instrument
editor unseen while the catalogue is at rest). Opening the next record must show that record and nothing of
the one before: its values, its locked key, no leftover rule messages or notes, no unsaved
changes, the first section shown, and the other sections built from the new record."""

from __future__ import annotations

import contextlib
import threading

from textual.widgets import TabbedContent

from vetting.records.store import Store
from vetting.tui.screens.catalogue import CatalogueScreen
from vetting.tui.screens.instrument import InstrumentEditor
from vetting.tui.screens.job import JobEditor, JobsScreen
from vetting.tui.widgets.confirm import Confirm
from vetting.tui.widgets.form import RecordBlock, RecordList, RuleField

from tests.tui.test_instrument_editor import _field, _type_into


def _message(field: RuleField) -> str:
    """The message shown under a field ('' when none is shown)."""
    for widget in field.query(".field-message"):
        if widget.display:
            return str(widget.render())
    return ""


async def _open(app, pilot, settle, opener: str, key: str | None):
    """Open `key` with app.<opener> (open_instrument or open_job), wait, and return the screen."""
    getattr(app, opener)(key)
    await settle(pilot)
    return app.screen


async def _closed_editor(app, pilot, settle) -> InstrumentEditor:
    """The instrument editor, opened on calm-index and closed again (kept for the next)."""
    await settle(pilot)
    editor = await _open(app, pilot, settle, "open_instrument", "calm-index")
    assert isinstance(editor, InstrumentEditor)
    await pilot.press("escape")
    await settle(pilot)
    return editor


async def _leave_discarding(app, pilot, settle) -> None:
    """Escape from an editor with unsaved changes: it asks, and "y" throws them away."""
    await pilot.press("escape")
    await settle(pilot)
    assert isinstance(app.screen, Confirm)
    await pilot.press("y")
    await settle(pilot)


@contextlib.asynccontextmanager
async def _editor_with_reads_held(app_for, url, settle, monkeypatch, key: str | None = None):
    """A running app whose instrument editor was opened and closed once, with reading a record
    (`key`'s, or any) held until the yielded event is set: (app, pilot, editor, release)."""
    app = app_for(url)
    release = threading.Event()
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _closed_editor(app, pilot, settle)
        _hold_reads(monkeypatch, release, key)
        yield app, pilot, editor, release


def _hold_reads(monkeypatch, release: threading.Event, key: str | None = None) -> None:
    """Reading a record (`key`'s, or any) waits for `release` (at most 5 s)."""
    original = InstrumentEditor.load_record

    def held(self):
        if key is None or self.key == key:
            release.wait(5)
        return original(self)

    monkeypatch.setattr(InstrumentEditor, "load_record", held)


async def test_editors_are_built_ahead_while_the_catalogue_rests(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot)
        for _ in range(100):  # built at the first quiet moment after the warm-up
            if app.is_screen_installed("editor:InstrumentEditor"):
                break
            await pilot.pause(0.05)
        await settle(pilot)
        spare = app.get_screen("editor:InstrumentEditor")
        assert isinstance(spare, InstrumentEditor) and spare.can_reuse()
        assert spare.query_one(".description", RecordBlock)  # its form is built, unseen
        assert isinstance(app.screen, CatalogueScreen)  # and the catalogue never left
        assert not app.is_screen_installed("editor:JobEditor")  # built when first opened
        await _open(app, pilot, settle, "open_instrument", "ledger-scan")
        assert app.screen is spare
        assert _field(spare, ".description", "title").text == "Ledger Scan Checking Task"
        assert _field(spare, ".description", "key").locked
        assert not spare.is_dirty()


async def test_the_next_instrument_shows_its_own_values_and_nothing_left_over(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot)
        editor = await _open(app, pilot, settle, "open_instrument", "ledger-scan")
        assert isinstance(editor, InstrumentEditor)
        # leave a broken rule, a shown section and unsaved text behind
        minutes = _field(editor, ".description", "minutes")
        await _type_into(pilot, minutes, "-5")
        assert _message(minutes).startswith("✗ minutes")
        await pilot.press("ctrl+o")
        await settle(pilot)
        assert editor.built("reliability")
        await _leave_discarding(app, pilot, settle)
        assert isinstance(app.screen, CatalogueScreen)

        await _open(app, pilot, settle, "open_instrument", "tally-quick")
        assert app.screen is editor  # the same form, refilled
        desc = ".description"
        assert _field(editor, desc, "key").text == "tally-quick"
        assert _field(editor, desc, "key").locked
        assert _field(editor, desc, "title").text == "Tally Quick Numbers"
        assert _field(editor, desc, "minutes").text == "20"
        assert _field(editor, desc, "publisher").text == "Brookfen Assessments"
        assert _message(_field(editor, desc, "minutes")) == ""
        assert not _field(editor, desc, "minutes").has_class("-invalid")
        assert not editor.is_dirty()
        assert "tally-quick" in str(editor.query_one("#heading").render())
        assert str(editor.query_one("#banner").render()).strip() == ""
        tabs = editor.query_one("#sections", TabbedContent)
        assert tabs.active == "describe"
        assert app.focused is _field(editor, desc, "title").input  # the key is locked
        # the other sections come from this record when shown
        assert not editor.built("reliability")
        await pilot.press("ctrl+o")
        await settle(pilot)
        assert len(editor.query_one("#list-reliability", RecordList).blocks) == 2  # tally-quick has two
        await pilot.press("escape")
        await settle(pilot)
        assert isinstance(app.screen, CatalogueScreen)  # nothing changed: no question


async def test_a_new_instrument_after_a_stored_one_starts_blank(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot)
        editor = await _open(app, pilot, settle, "open_instrument", "tally-quick")
        await pilot.press("escape")
        await settle(pilot)
        await pilot.press("ctrl+n")
        await settle(pilot)
        assert app.screen is editor
        key = _field(editor, ".description", "key")
        assert not key.locked and key.text == ""
        assert app.focused is key.input
        assert all(f.text == "" for f in editor.query_one(".description", RecordBlock).fields.values())
        # "is required" waits for the first save, as on a form built new
        assert _message(key) == "" and _message(_field(editor, ".description", "title")) == ""
        await pilot.press("f9")
        await settle(pilot)
        assert "Not saved" in str(editor.query_one("#banner").render())
        assert _message(key).startswith("✗ key")
        await pilot.press(*"drill-two", "tab", *"Drill Two")
        await _type_into(pilot, _field(editor, ".description", "measures"), "steadiness:primary")
        await _type_into(pilot, _field(editor, ".description", "minutes"), "12")
        await pilot.press("f9")
        await settle(pilot)
        assert "Saved" in str(editor.query_one("#banner").render())
    with Store.open(seeded_url) as store:
        saved = store.instrument("drill-two")
        assert saved.title == "Drill Two" and saved.minutes == 12 and saved.reliability == []
        assert store.instrument("tally-quick").minutes == 20  # the earlier record is untouched


async def test_a_read_slower_than_the_limit_shows_loading_then_the_record(seeded_url, app_for, settle, monkeypatch):
    async with _editor_with_reads_held(app_for, seeded_url, settle, monkeypatch) as (app, pilot, editor, release):
        app.open_instrument("ledger-scan")
        await pilot.pause(editor.SHOW_LOADING_AFTER + 0.2)
        assert app.screen is editor
        assert editor.query_one("#loading").display
        assert not editor.query_one("#sections").display  # calm-index is not shown meanwhile
        release.set()
        await settle(pilot)
        assert not editor.query_one("#loading").display
        assert _field(editor, ".description", "title").text == "Ledger Scan Checking Task"


async def test_only_the_last_record_asked_for_is_shown(seeded_url, app_for, settle, monkeypatch):
    # the first read (tally-quick's) ends after the second
    async with _editor_with_reads_held(app_for, seeded_url, settle, monkeypatch, "tally-quick") as (
            app, pilot, editor, gate):
        app.open_instrument("tally-quick")
        app.open_instrument("ledger-scan")
        await pilot.pause(0.1)
        gate.set()
        await settle(pilot)
        await pilot.pause(0.2)
        assert app.screen is editor
        assert _field(editor, ".description", "title").text == "Ledger Scan Checking Task"
        assert app.screen_stack.count(editor) == 1


async def test_going_elsewhere_before_the_record_is_read_does_not_show_it(seeded_url, app_for, settle, monkeypatch):
    async with _editor_with_reads_held(app_for, seeded_url, settle, monkeypatch) as (app, pilot, editor, release):
        app.open_instrument("ledger-scan")
        await pilot.press("f3")  # within the wait, before "loading…" would show
        await pilot.pause(0.05)
        release.set()
        await settle(pilot)
        await pilot.pause(editor.SHOW_LOADING_AFTER + 0.1)
        assert isinstance(app.screen, JobsScreen)
        assert editor not in app.screen_stack
        monkeypatch.undo()
        await pilot.press("f2")
        await settle(pilot)
        await _open(app, pilot, settle, "open_instrument", "tally-quick")  # still usable
        assert app.screen is editor
        assert _field(editor, ".description", "title").text == "Tally Quick Numbers"


async def test_the_job_editor_refilled_for_a_new_job_builds_every_section(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot)
        editor = await _open(app, pilot, settle, "open_job", "claims-clerk")
        assert isinstance(editor, JobEditor)
        assert _field(editor, ".job-profile", "title").text == "Claims clerk"
        assert not editor.built("requirements")  # a stored job: built when shown
        await pilot.press("escape")
        await settle(pilot)
        await _open(app, pilot, settle, "open_job", None)
        assert app.screen is editor
        key = _field(editor, ".job-profile", "key")
        assert not key.locked and key.text == ""
        assert _field(editor, ".job-profile", "title").text == ""
        # a new job builds its one blank requirement and its policy at once (checked on saving)
        assert editor.built("requirements") and editor.built("policy")
        blocks = editor.query_one("#list-requirements", RecordList).blocks
        assert len(blocks) == 1 and blocks[0].fields["importance"].text == "3"
        assert "defaults" in str(editor.query_one("#policy-state").render())
        await pilot.press("escape")
        await settle(pilot)
        await _open(app, pilot, settle, "open_job", "claims-clerk")
        assert app.screen is editor
        assert _field(editor, ".job-profile", "title").text == "Claims clerk"
        assert _field(editor, ".job-profile", "key").locked
        assert not editor.built("requirements")
        await pilot.press("ctrl+o")
        await settle(pilot)
        texts = [b.fields["attribute"].text for b in editor.query_one("#list-requirements", RecordList).blocks]
        assert texts == ["number-sense", "careful-checking"]
        assert not editor.is_dirty()


async def test_a_long_value_shows_its_start_as_in_a_form_built_new(seeded_url, app_for, settle):
    with Store.open(seeded_url) as store:
        inst = store.instrument("calm-index")
        inst.title = "Calm Index Inventory, " + "long form for every shift pattern and season " * 3
        store.save_instrument(inst)
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        editor = await _open(app, pilot, settle, "open_instrument", "tally-quick")
        await pilot.press("escape")
        await settle(pilot)
        await _open(app, pilot, settle, "open_instrument", "calm-index")
        assert app.screen is editor
        title = _field(editor, ".description", "title").input
        assert title.value.startswith("Calm Index Inventory, long form")
        assert title.cursor_position == len(title.value)
        assert title.scroll_offset.x == 0  # the start shown, not the end


async def test_a_section_shows_the_next_records_values_whatever_their_number(seeded_url, app_for, settle):
    """A list section shown for one record and then for the next, in the editor kept between
    them, holds the next record's records: as many as it has (more or fewer than before), none
    of the earlier ones, numbered from 1. A broken value thrown away with the earlier record
    plays no part in saving the next."""
    app = app_for(seeded_url)

    def values(editor) -> list[str]:
        return [b.fields["value"].text for b in editor.query_one("#list-reliability", RecordList).blocks]

    def titles(editor) -> list[str]:
        blocks = editor.query_one("#list-reliability", RecordList).blocks
        return [str(b.query_one(".block-title").render()) for b in blocks]

    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot)
        editor = await _open(app, pilot, settle, "open_instrument", "tally-quick")
        await pilot.press("ctrl+o")
        await settle(pilot)
        assert values(editor) == ["0.88", "0.81"]
        first = editor.query_one("#list-reliability", RecordList).blocks[0].fields["value"]
        await _type_into(pilot, first, "1.3")
        assert first.error
        await _leave_discarding(app, pilot, settle)

        await _open(app, pilot, settle, "open_instrument", "ledger-scan")
        assert app.screen is editor and not editor.built("reliability")
        assert not editor.is_dirty() and editor.problems() == []
        await _type_into(pilot, _field(editor, ".description", "minutes"), "36")
        await pilot.press("f9")  # saved without showing the list: the thrown-away 1.3 plays no part
        await settle(pilot)
        assert "Saved" in str(editor.query_one("#banner").render())
        await pilot.press("ctrl+o")
        await settle(pilot)
        assert values(editor) == ["0.79"] and titles(editor) == ["Reliability 1"]
        block = editor.query_one("#list-reliability", RecordList).blocks[0]
        assert block.fields["n"].text == "150" and block.fields["value"].error is None
        assert not editor.is_dirty()
        await pilot.press("escape")
        await settle(pilot)
        assert isinstance(app.screen, CatalogueScreen)  # nothing changed: no question

        await _open(app, pilot, settle, "open_instrument", "tally-quick")  # two again
        await pilot.press("ctrl+o")
        await settle(pilot)
        assert values(editor) == ["0.88", "0.81"] and titles(editor) == ["Reliability 1", "Reliability 2"]
        await pilot.press("escape")
        await settle(pilot)

        await _open(app, pilot, settle, "open_instrument", "calm-index")  # none
        await pilot.press("ctrl+o")
        await settle(pilot)
        assert values(editor) == []
        assert editor.query_one("#list-reliability", RecordList).query_one(".list-empty").display
    with Store.open(seeded_url) as store:
        saved = store.instrument("ledger-scan")
        assert saved.minutes == 36
        assert [(r.value, r.n) for r in saved.reliability] == [(0.79, 150)]
