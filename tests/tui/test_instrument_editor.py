"""The instrument editor driven from the keyboard: typing, rules shown beside the fields,
saving, refusing invalid records, unsaved-change questions and concurrent edits.

The rules themselves are the catalogue format's (docs/catalogue-format.md); the messages
checked here are produced by vetting.records.rules, so the form and import agree."""

from __future__ import annotations

from textual.widgets import Input, TabbedContent

from vetting.records.store import Store
from vetting.tui.screens.catalogue import CatalogueScreen
from vetting.tui.screens.instrument import InstrumentEditor
from vetting.tui.widgets.confirm import Confirm
from vetting.tui.widgets.form import LABEL_WIDTH, RecordBlock, RecordList, RuleField


def _field(screen, selector: str, name: str) -> RuleField:
    return screen.query_one(selector, RecordBlock).fields[name]


async def _type_into(pilot, field: RuleField, text: str) -> None:
    field.edit()
    await pilot.pause()
    field.input.value = ""
    await pilot.press(*text)
    await pilot.pause()


async def _open_new(pilot, settle) -> InstrumentEditor:
    await settle(pilot)
    await pilot.press("ctrl+n")
    await settle(pilot)
    screen = pilot.app.screen
    assert isinstance(screen, InstrumentEditor)
    return screen


async def _open_saved(app, pilot, settle, key: str = "tally-quick") -> InstrumentEditor:
    await settle(pilot)
    app.open_instrument(key)
    await settle(pilot)
    screen = app.screen
    assert isinstance(screen, InstrumentEditor)
    return screen


async def test_new_instrument_typed_and_saved(db_url, app_for, settle):
    app = app_for(db_url)
    async with app.run_test(size=(80, 24)) as pilot:
        editor = await _open_new(pilot, settle)
        assert app.focused is _field(editor, ".description", "key").input
        await pilot.press(*"sorting-drill", "tab")
        await pilot.press(*"Sorting Drill")
        await _type_into(pilot, _field(editor, ".description", "measures"), "filing-accuracy:primary")
        await _type_into(pilot, _field(editor, ".description", "minutes"), "25")
        assert editor.is_dirty()
        # a new attribute is announced, not refused
        assert "will be added" in (_field(editor, ".description", "measures").note or "")
        await pilot.press("f9")
        await settle(pilot)
        assert "Saved" in str(editor.query_one("#banner").render())
        assert not editor.is_dirty()
        assert _field(editor, ".description", "key").locked  # the key is fixed once saved
        # back on the catalogue the new row is there without a reload
        await pilot.press("escape")
        await settle(pilot)
        assert isinstance(app.screen, CatalogueScreen)
        assert [r.key for r in app.screen.rows] == ["sorting-drill"]
    with Store.open(db_url) as store:
        inst = store.instrument("sorting-drill")
        assert inst.title == "Sorting Drill" and inst.minutes == 25
        assert [m.attribute for m in inst.measures] == ["filing-accuracy"]
        assert "filing-accuracy" in store.attribute_keys()


async def test_rules_show_beside_the_field_and_block_saving(db_url, app_for, settle):
    app = app_for(db_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_new(pilot, settle)
        minutes = _field(editor, ".description", "minutes")
        await _type_into(pilot, minutes, "-5")
        # format rule: minutes > 0 (docs/catalogue-format.md)
        message = str(minutes.query_one(".field-message").render())
        assert message.startswith("✗ minutes must be a number greater than 0")
        assert minutes.has_class("-invalid")
        await _type_into(pilot, minutes, "30")
        assert minutes.error is None
        assert not minutes.query_one(".field-message").display
        # a reliability coefficient of 1.5 breaks the 0 < value < 1 rule
        await pilot.press("ctrl+o")  # next section: reliability
        await settle(pilot)
        assert editor.query_one("#sections", TabbedContent).active == "reliability"
        await pilot.press("ctrl+n")
        await settle(pilot)
        block = editor.query_one("#list-reliability", RecordList).blocks[0]
        await _type_into(pilot, block.fields["type"], "internal")
        await _type_into(pilot, block.fields["value"], "1.5")
        assert "less than 1" in block.fields["value"].error
        # a cross-field rule, pinned to the field it names: interval only for retest
        await _type_into(pilot, block.fields["interval_days"], "14")
        assert "applies only to type 'retest'" in block.fields["interval_days"].error
        await pilot.press("f9")
        await settle(pilot)
        banner = str(editor.query_one("#banner").render())
        assert banner.startswith("✗ Not saved")
        # the first problem is in the description (key, title, measures are required)
        assert editor.query_one("#sections", TabbedContent).active == "describe"
        assert "required" in banner
    with Store.open(db_url) as store:
        assert store.instrument_keys() == []


async def test_norm_table_must_increase(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_saved(app, pilot, settle)
        editor.query_one("#sections", TabbedContent).active = "norms"
        await settle(pilot)
        block = editor.query_one("#list-norms", RecordList).blocks[0]
        assert block.fields["table"].text == "10=16, 50=24, 90=32"
        await _type_into(pilot, block.fields["table"], "10=16, 50=14")
        assert "raw scores must increase" in block.fields["table"].error
        await pilot.press("f9")
        await settle(pilot)
        assert "Not saved" in str(editor.query_one("#banner").render())
    with Store.open(seeded_url) as store:
        assert [p.raw for p in store.instrument("tally-quick").norms[0].table] == [16, 24, 32]


async def test_editing_evidence_round_trips_through_the_store(seeded_url, app_for, settle):
    with Store.open(seeded_url) as store:
        before = store.instrument("tally-quick")
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_saved(app, pilot, settle)
        await _type_into(pilot, _field(editor, ".description", "minutes"), "22")
        editor.query_one("#sections", TabbedContent).active = "validity"
        await settle(pilot)
        await pilot.press("ctrl+n")
        await settle(pilot)
        block = editor.query_one("#list-validity", RecordList).blocks[-1]
        await _type_into(pilot, block.fields["criterion"], "turnover")
        await _type_into(pilot, block.fields["r"], "-0.2")
        await _type_into(pilot, block.fields["n"], "150")
        await pilot.press("f9")
        await settle(pilot)
        assert "Saved" in str(editor.query_one("#banner").render())
    with Store.open(seeded_url) as store:
        after = store.instrument("tally-quick")
    assert after.minutes == 22
    assert after.row_version == before.row_version + 1
    assert [(v.criterion, v.r, v.n) for v in after.validity] == [("job-performance", 0.31, 220), ("turnover", -0.2, 150)]
    # everything not touched is kept exactly
    assert after.reliability == before.reliability
    assert after.norms == before.norms
    assert after.sample_copy == before.sample_copy
    assert after.subgroup_differences == before.subgroup_differences


async def test_removing_an_entry(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_saved(app, pilot, settle)
        editor.query_one("#sections", TabbedContent).active = "reliability"
        await settle(pilot)
        rel = editor.query_one("#list-reliability", RecordList)
        rel.blocks[1].fields["value"].edit()
        await pilot.press("ctrl+y")
        await settle(pilot)
        assert len(rel.blocks) == 1
        assert editor.is_dirty()
        await pilot.press("f9")
        await settle(pilot)
    with Store.open(seeded_url) as store:
        assert [r.type for r in store.instrument("tally-quick").reliability] == ["internal"]


async def test_leaving_with_unsaved_changes_asks(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        editor = await _open_saved(app, pilot, settle, "ledger-scan")
        await _type_into(pilot, _field(editor, ".description", "title"), "Changed title")
        await pilot.press("escape")
        await settle(pilot)
        assert isinstance(app.screen, Confirm)
        assert "Unsaved changes in instrument ledger-scan" in app.screen.question
        await pilot.press("n")  # stay
        await settle(pilot)
        assert app.screen is editor
        assert _field(editor, ".description", "title").text == "Changed title"
        # F-key navigation asks too
        await pilot.press("f3")
        await settle(pilot)
        assert isinstance(app.screen, Confirm)
        await pilot.press("escape")
        await settle(pilot)
        assert app.screen is editor
        # quitting asks as well
        await pilot.press("ctrl+q")
        await settle(pilot)
        assert isinstance(app.screen, Confirm)
        await pilot.press("n")
        await settle(pilot)
        await pilot.press("escape")
        await settle(pilot)
        await pilot.press("y")  # leave without saving
        await settle(pilot)
        assert isinstance(app.screen, CatalogueScreen)
    with Store.open(seeded_url) as store:
        assert store.instrument("ledger-scan").title == "Ledger Scan Checking Task"


async def test_unchanged_editor_leaves_without_asking(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await _open_saved(app, pilot, settle, "calm-index")
        await pilot.press("escape")
        await settle(pilot)
        assert isinstance(app.screen, CatalogueScreen)


async def test_concurrent_edit_is_refused_and_names_who(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_saved(app, pilot, settle, "calm-index")
        # someone else saves the same instrument meanwhile
        with Store.open(seeded_url, user="other-person") as other:
            theirs = other.instrument("calm-index")
            theirs.minutes = 18
            other.save_instrument(theirs)
        await _type_into(pilot, _field(editor, ".description", "minutes"), "40")
        await pilot.press("f9")
        await settle(pilot)
        banner = str(editor.query_one("#banner").render())
        assert banner.startswith("✗ Not saved: other-person changed instrument calm-index")
        assert editor.is_dirty()  # what was typed is still there
        assert _field(editor, ".description", "minutes").text == "40"
    with Store.open(seeded_url) as store:
        assert store.instrument("calm-index").minutes == 18  # theirs, not overwritten


async def test_new_instrument_with_a_key_in_use_is_refused(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_new(pilot, settle)
        await _type_into(pilot, _field(editor, ".description", "key"), "calm-index")
        await _type_into(pilot, _field(editor, ".description", "title"), "Another")
        await _type_into(pilot, _field(editor, ".description", "measures"), "steadiness")
        await _type_into(pilot, _field(editor, ".description", "minutes"), "5")
        await pilot.press("f9")
        await settle(pilot)
        banner = str(editor.query_one("#banner").render())
        assert "already exists" in banner and banner.startswith("✗ Not saved")
    with Store.open(seeded_url) as store:
        assert store.instrument("calm-index").title == "Calm Index Inventory"


async def test_enum_fields_suggest_allowed_values(db_url, app_for, settle):
    app = app_for(db_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_new(pilot, settle)
        field = _field(editor, ".description", "user_qualification")
        await _type_into(pilot, field, "lic")
        assert "'lic' is not allowed" in field.error
        await pilot.press("right")  # accept the suggestion
        await pilot.pause()
        assert field.text == "licensed" and field.error is None
        assert isinstance(field.input, Input)


async def test_enter_moves_to_the_next_field(db_url, app_for, settle):
    app = app_for(db_url)
    async with app.run_test(size=(80, 24)) as pilot:
        editor = await _open_new(pilot, settle)
        await pilot.press(*"a-key", "enter", *"A title")
        await pilot.pause()
        assert _field(editor, ".description", "key").text == "a-key"
        assert _field(editor, ".description", "title").text == "A title"


def _bold(content) -> bool:
    return any("bold" in str(span.style) for span in content.spans)


async def test_the_label_shows_a_broken_rule_by_weight_as_well_as_colour(db_url, app_for, settle):
    """A field's label is drawn by the field itself ('minutes *': required). While the field
    breaks its rule the label is bold (meaning never rests on colour alone; project rule) and
    the ✗ message is below it; once fixed both go. The typed text keeps its normal weight."""
    app = app_for(db_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_new(pilot, settle)
        minutes = _field(editor, ".description", "minutes")
        assert minutes.render().plain[:LABEL_WIDTH].rstrip() == "minutes *"
        assert not _bold(minutes.render())
        await _type_into(pilot, minutes, "-5")
        assert minutes.has_class("-invalid") and _bold(minutes.render())
        assert minutes.query_one(".field-message").display
        assert not minutes.input.rich_style.bold
        await _type_into(pilot, minutes, "30")
        assert not minutes.has_class("-invalid") and not _bold(minutes.render())
        assert not minutes.query_one(".field-message").display


async def test_add_entry_in_a_section_of_one_record_says_why_nothing_is_added(db_url, app_for, settle):
    """"Add entry" stays in the key line in every section (greying it when the section
    changed rebuilt the key line); in the description, which holds one record, it explains
    and adds nothing, and in a list section it adds a record."""
    app = app_for(db_url)
    async with app.run_test(size=(80, 24)) as pilot:
        editor = await _open_new(pilot, settle)
        assert editor.check_action("add_entry", ()) is True
        blocks_before = len(editor.query(RecordBlock))
        await pilot.press("ctrl+n")
        await settle(pilot)
        assert any("holds one record" in str(n.message) for n in app._notifications)
        assert len(editor.query(RecordBlock)) == blocks_before
        await pilot.press("ctrl+o")
        await settle(pilot)
        await pilot.press("ctrl+n")
        await settle(pilot)
        assert len(editor.query_one("#list-reliability", RecordList).blocks) == 1


def _screen_lines(app) -> list[str]:
    """The terminal's text as drawn (every widget composited)."""
    return [strip.text for strip in app.screen._compositor.render_strips()]


def _row_of(app, widget) -> str:
    return _screen_lines(app)[widget.region.y]


async def test_a_field_gets_its_input_only_when_the_cursor_comes_to_it(seeded_url, app_for, settle):
    """A field the cursor has not been in is drawn as one line of text: its label, then its
    value in the column where its input shows text. The input is mounted when the cursor
    arrives (the editor's first field, Tab, a click) and stays; a locked field never gets one
    and Tab passes it by. Showing a section thus builds one input, not one a field."""
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_saved(app, pilot, settle)
        desc = editor.query_one(".description", RecordBlock)
        fields = desc.fields
        # the key is locked once saved, so the cursor starts in the title: the only input
        assert [name for name, f in fields.items() if f.input is not None] == ["title"]
        assert len(desc.query(Input)) == 1 and app.focused is fields["title"].input
        key, publisher = fields["key"], fields["publisher"]
        assert key.locked and key.input is None
        title_row, publisher_row = _row_of(app, fields["title"]), _row_of(app, publisher)
        value_column = title_row.index("Tally Quick Numbers")
        assert publisher_row.index("Brookfen Assessments") == value_column  # text lines up with the input
        assert _row_of(app, key).index("tally-quick") == value_column
        await pilot.press("tab")
        await pilot.pause()
        assert publisher.input is not None and app.focused is publisher.input
        assert publisher.input.value == "Brookfen Assessments"
        assert _row_of(app, publisher).index("Brookfen Assessments") == value_column
        await pilot.press("shift+tab", "shift+tab")  # back past the title: the locked key is skipped
        await pilot.pause()
        assert app.focused is not None and app.focused is not key and key.input is None
        edition = fields["edition"]
        assert edition.input is None and edition.text == ""
        assert "text" in _row_of(app, edition)  # an empty field shows its hint, as the input would
        await pilot.click(edition, offset=(LABEL_WIDTH + 3, 0))
        await pilot.pause()
        assert edition.input is not None and app.focused is edition.input
        await pilot.press(*"2nd")
        await pilot.pause()
        assert edition.text == "2nd" and editor.is_dirty()
