"""The form's fields on their own, in a plain Textual app (no database)."""

from __future__ import annotations

from pathlib import Path

from rich.cells import cell_len
from textual.app import App, ComposeResult
from textual.geometry import Region

import vetting.tui.widgets.form as form
from vetting.tui.widgets.form import LABEL_WIDTH, FieldSpec, RecordBlock, RuleField

FORM_CSS = Path(form.__file__).with_suffix(".tcss")


class _OneRecord(App):
    CSS_PATH = FORM_CSS
    AUTO_FOCUS = None  # nothing focused: every field stays drawn as text

    def __init__(self, texts: dict[str, str]) -> None:
        super().__init__()
        self.texts = texts

    def compose(self) -> ComposeResult:
        specs = [FieldSpec("instrument", "title"), FieldSpec("instrument", "publisher")]
        yield RecordBlock("instrument", specs, self.texts)


async def test_a_field_drawn_as_text_keeps_to_one_line_of_the_fields_width():
    """A field the cursor has not been in draws its value itself: in terminal cells (a wide
    character takes two), on one line whatever the stored text holds (a line break shows as a
    space), cut at the field's width as an input cuts it, and an empty field shows its hint."""
    app = _OneRecord({"title": "名前\nsecond line " + "x" * 80})
    async with app.run_test(size=(60, 6)) as pilot:
        await pilot.pause()
        title, publisher = app.query(RuleField)
        assert title.input is None and title.outer_size.height == 1
        line = title.render_lines(Region(0, 0, 60, 1))[0].text
        assert cell_len(line) == 60
        assert line[:LABEL_WIDTH].rstrip() == "title *"
        assert line[LABEL_WIDTH:].startswith(" 名前 second line xxx")
        assert line.endswith("x ")  # cut one column short of the edge, as the input's padding
        empty = publisher.render_lines(Region(0, 0, 60, 1))[0].text
        assert empty[LABEL_WIDTH + 1:].rstrip() == publisher.spec.hint()
        assert title.text == "名前\nsecond line " + "x" * 80  # the value itself is kept as given
