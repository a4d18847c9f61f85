"""Form building blocks that check every value as it is typed, with the import rules.

A `RuleField` is one labelled input. It turns the text into a typed value with
`vetting.records.rules.coerce` and shows the failed rule beside the field (with a ✗, so the
meaning survives without colour). A `RecordBlock` groups the fields of one record and runs the
rules that involve several fields (`rules.check_record`), pinning each message to its field.
A `RecordList` holds any number of blocks of one kind, with keys to add and remove them.

Special field kinds, for values typed in one line:

* ``measures``  - ``attribute:fit, attribute:fit`` (fit defaults to primary)
* ``table``     - a percentile table, ``percentile=raw, percentile=raw``
* ``weight``    - one policy weight (a non-negative number)
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

from textual import events
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.content import Content
from textual.message import Message
from textual.suggester import SuggestFromList
from textual.widget import AwaitMount, Widget
from textual.widgets import Input, Static

from vetting.records import rules
from vetting.records.domain import FITS, Measure, PercentilePoint

ERROR_MARK = "✗"
NOTE_MARK = "ℹ"


@dataclass(frozen=True)
class FieldSpec:
    """One field of a form: the rule it obeys (`entity`.`name`) and how it is shown."""

    entity: str
    name: str
    label: str = ""
    #: "rule" (checked by rules.coerce) or one of the special kinds in the module docstring
    kind: str = "rule"
    placeholder: str = ""

    @property
    def title(self) -> str:
        return self.label or self.name.replace("_", " ")

    @property
    def rule(self) -> rules.Rule | None:
        return rules.ENTITIES.get(self.entity, {}).get(self.name)

    @property
    def required(self) -> bool:
        rule = self.rule
        return bool(rule and rule.required) or self.kind == "measures"

    def hint(self) -> str:
        if self.placeholder:
            return self.placeholder
        if self.kind == "measures":
            return "attribute:primary, attribute:secondary"
        if self.kind == "table":
            return "percentile=raw, e.g. 10=12, 50=20, 90=28"
        if self.kind == "weight":
            return "a number 0 or more"
        rule = self.rule
        return rules.describe(rule) if rule else ""

    def choices(self) -> list[str]:
        rule = self.rule
        return list(rule.choices) if rule and rule.choices else []


def text_of(value: Any) -> str:
    """What a stored value looks like in a form field."""
    import datetime as dt

    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() else repr(value)
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, (list, tuple)):
        return ", ".join(text_of(v) for v in value)
    return str(value)


def measures_text(measures: Iterable[Measure]) -> str:
    return ", ".join(f"{m.attribute}:{m.fit}" for m in measures)


def table_text(points: Iterable[PercentilePoint]) -> str:
    return ", ".join(f"{text_of(p.percentile)}={text_of(p.raw)}" for p in points)


def parse_measures(text: str) -> list[Measure]:
    """`attribute:fit, ...` into Measure objects, each part checked with the import rules."""
    out: list[Measure] = []
    seen: set[str] = set()
    for part in [p.strip() for p in text.split(",") if p.strip()]:
        key, _, fit = part.partition(":")
        key, fit = key.strip(), (fit.strip() or "primary")
        problem = rules.check_field("measure", "attribute", key)
        if problem:
            raise rules.RuleError(f"{part!r}: {problem}")
        problem = rules.check_field("measure", "fit", fit)
        if problem:
            raise rules.RuleError(f"{part!r}: fit {problem}")
        if key in seen:
            raise rules.RuleError(f"lists {key} more than once")
        seen.add(key)
        out.append(Measure(attribute=key, fit=fit))
    if not out:
        raise rules.RuleError("is required: name at least one attribute, e.g. " + f"numerical-reasoning:{FITS[0]}")
    return out


def parse_table(text: str) -> list[PercentilePoint]:
    """`percentile=raw, ...` into percentile points, checked like an imported norm table."""
    points: list[PercentilePoint] = []
    for part in [p.strip() for p in text.split(",") if p.strip()]:
        pct, sep, raw = part.partition("=")
        if not sep:
            raise rules.RuleError(f"{part!r}: write each point as percentile=raw, e.g. 50=20")
        try:
            p_value = rules.coerce("percentile", "percentile", pct)
            r_value = rules.coerce("percentile", "raw", raw)
        except rules.RuleError as exc:
            raise rules.RuleError(f"{part!r}: {exc}") from None
        points.append(PercentilePoint(percentile=p_value, raw=r_value))
    problems = rules.check_percentile_table(points)
    if problems:
        raise rules.RuleError(problems[0][1])
    return points


def parse_weight(name: str, text: str) -> float:
    stripped = text.strip()
    if not stripped:
        return 0.0
    try:
        value = float(stripped)
    except ValueError:
        raise rules.RuleError(f"must be a non-negative number; got {stripped!r}") from None
    problems = rules.check_weights({name: value})
    if problems and problems[0][0] is not None:
        raise rules.RuleError(problems[0][1])
    return value


def convert(spec: FieldSpec, text: str) -> Any:
    """The typed value of `text` for `spec`; raises rules.RuleError with the rule's message."""
    if spec.kind == "measures":
        return parse_measures(text)
    if spec.kind == "table":
        return parse_table(text)
    if spec.kind == "weight":
        return parse_weight(spec.name, text)
    return rules.coerce(spec.entity, spec.name, text)


#: columns of a field's label, left of its value
LABEL_WIDTH = 24


class RuleField(Widget, can_focus=True):
    """A labelled value checked on every keystroke; shows `✗ rule` beside the field.

    A field is drawn as one line of text (its label, then its value where the input will be)
    until the cursor first comes to it: only then does it mount a Textual `Input`, which stays
    for the rest of the field's life. A form of a dozen fields thus shows one widget a field and
    one input, instead of two widgets a field (`bench/form_cost.py` measures what that saves
    Textual in showing a section). `edit()` puts the cursor in the field; focusing the field
    itself (Tab, a click) does the same."""

    COMPONENT_CLASSES = {"rule-field--value", "rule-field--hint", "rule-field--locked"}

    class Changed(Message):
        def __init__(self, field: RuleField) -> None:
            super().__init__()
            self.field = field

    def __init__(self, spec: FieldSpec, text: str = "", *, locked: bool = False) -> None:
        # "-as-text" until the field has an input (form.tcss puts a message below the line)
        super().__init__(classes="rule-field -as-text")
        self.spec = spec
        self.initial = text
        #: the value's text while the field has no input (the input holds it afterwards)
        self._text = text
        self._locked = locked
        self.can_focus = not locked
        #: message from a rule on this field alone
        self.own_error: str | None = None
        #: message from a rule across fields of the record, pinned here
        self.record_error: str | None = None
        #: a note that is not an error (e.g. 'a new attribute will be added')
        self.note: str | None = None
        #: "is required" on an untouched blank field waits until the first save attempt
        self.revealed = bool(text)
        #: the text the last check() saw (the input reports its first value when mounted:
        #: that is no change, and re-checking the whole record for it made opening a form
        #: check every field once per field)
        self._checked_text: str | None = None
        self._input: Input | None = None
        self._message: Static | None = None

    def render(self) -> Content:
        spec = self.spec
        label = spec.title + (" *" if spec.required else "")
        # the colour is the widget's (form.tcss: muted, or the error colour when a rule breaks);
        # bold is set here, as a style of the text, so the input does not inherit it
        label_content = Content.styled(label, "bold" if self.has_class("-invalid") else "")
        if self._input is not None:
            return label_content  # the input, in the margin after the label, shows the value
        # no input yet: the value drawn where the input will be, as the input draws it
        # (a column of padding each side; the hint, dimmed, in an empty field)
        # (outer_size: the size laid out, read without asking the screen where the widget is,
        # which `size` does and which cost more than drawing the line; a field has no padding)
        room = max(0, self.outer_size.width - LABEL_WIDTH)
        text, component = self._text, "rule-field--value"
        if self._locked:
            component = "rule-field--locked"
        elif not text:
            text, component = spec.hint(), "rule-field--hint"
        # in terminal cells (wide characters count twice), on one line whatever the text holds
        shown = Content(" " + " ".join(text.splitlines())).truncate(max(0, room - 1), pad=True)
        if room:
            shown = shown.extend_right(1)
        label_column = label_content.truncate(LABEL_WIDTH, pad=True)
        return Content.assemble(label_column, shown.stylize(self.get_visual_style(component)))

    def on_mount(self) -> None:
        self.check()

    def _make_input(self) -> Input:
        spec = self.spec
        choices = spec.choices()
        suggester = SuggestFromList(choices, case_sensitive=False) if choices else None
        invalid = " -invalid" if self.has_class("-invalid") else ""
        return Input(
            value=self._text,
            placeholder=spec.hint(),
            suggester=suggester,
            # "-valid" from the start: Input marks itself valid when its value is first set
            # (it has no validators of its own), which would restyle it once more on mounting
            classes="field-input -valid" + invalid,
            disabled=self._locked,
            id=f"in-{spec.name}",
        )

    def edit(self) -> AwaitMount:
        """Put the cursor in this field, mounting its input the first time.

        The focus moves at once (not on the next turn of the loop). Awaiting the result waits
        until the input is mounted: the editor does so before a section is first painted, so
        that showing it with the cursor in its first field costs one layout and paint, not a
        second one for the input mounted after the first. A locked field is not edited: it
        gets no input and the cursor stays where it is."""
        mounting = AwaitMount(self, [])
        if self._locked:
            return mounting
        field_input = self._input
        if field_input is None:
            field_input = self._input = self._make_input()
            self.can_focus = False  # from now on the input takes the cursor
            self.remove_class("-as-text")
            mounting = self.mount(field_input, before=0 if self._message is not None else None)
            self.refresh()
        self.screen.set_focus(field_input)
        return mounting

    def on_focus(self, event: events.Focus) -> None:
        """Tab or a click on a field drawn as text: edit it."""
        if self._input is None:
            self.edit()

    @property
    def input(self) -> Input | None:
        """The field's input, or None while the cursor has never been in the field."""
        return self._input

    @property
    def locked(self) -> bool:
        """Whether the value is fixed (shown greyed, the cursor passes it by)."""
        return self._locked

    @locked.setter
    def locked(self, locked: bool) -> None:
        if locked == self._locked:
            return
        self._locked = locked
        if self._input is not None:
            self._input.disabled = locked
        else:
            self.can_focus = not locked
            self.refresh()

    @property
    def text(self) -> str:
        return self._input.value if self._input is not None else self._text

    @property
    def error(self) -> str | None:
        return self.own_error or self.record_error

    def value(self) -> Any:
        """The typed value (raises rules.RuleError when the text breaks a rule)."""
        return convert(self.spec, self.text)

    def check(self) -> str | None:
        self._checked_text = self.text
        try:
            convert(self.spec, self.text)
            self.own_error = None
        except rules.RuleError as exc:
            self.own_error = str(exc)
        self.show()
        return self.own_error

    def show(self) -> None:
        problem = self.error
        if problem and not self.revealed and not self.text.strip():
            problem = None
        message = self._message
        if message is None:
            if not (problem or self.note):
                self._mark_invalid(False)
                return
            message = self._message = Static("", classes="field-message", markup=False)
            self.mount(message)
        if problem:
            message.update(f"{ERROR_MARK} {self.spec.title} {problem}")
        elif self.note:
            message.update(f"{NOTE_MARK} {self.note}")
        else:
            message.update("")
        message.set_class(bool(problem), "-error")
        message.set_class(not problem and bool(self.note), "-note")
        message.display = bool(problem or self.note)
        self._mark_invalid(bool(problem))

    def _mark_invalid(self, invalid: bool) -> None:
        if self.has_class("-invalid") != invalid:
            self.set_class(invalid, "-invalid")
            self.refresh()  # the label's weight
        if self._input is not None:
            self._input.set_class(invalid, "-invalid")

    def refill(self, text: str, *, locked: bool) -> None:
        """Start again on `text`, as if the field had just been built with it (the editor
        reuses its form for the next record)."""
        self.initial = text
        self.revealed = bool(text)
        self.record_error = None
        self.note = None
        self.locked = locked
        field_input = self._input
        if field_input is None:
            if self._text != text:
                self._text = text
                self.refresh()
        else:
            if field_input.value != text:
                field_input.value = text
            # as a field built with this text: the cursor at its end, the view at its start
            field_input.cursor_position = len(text)
            field_input.scroll_home(animate=False, force=True, immediate=True)
        self.check()

    def reveal(self) -> None:
        """Show every problem, including 'is required' on fields never typed in."""
        self.revealed = True
        self.show()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        """Enter moves on to the next field, as in most forms."""
        event.stop()
        self.screen.focus_next()

    def on_input_changed(self, event: Input.Changed) -> None:
        event.stop()
        self._text = event.value
        if event.value == self._checked_text:
            return  # already checked (the value the field was built with)
        if event.value != self.initial:
            self.revealed = True
        self.check()
        self.post_message(self.Changed(self))


class RecordBlock(Vertical):
    """The fields of one record; cross-field rules are pinned to the field they name."""

    def __init__(
        self,
        entity: str,
        specs: list[FieldSpec],
        texts: dict[str, str] | None = None,
        *,
        title: str = "",
        locked: Iterable[str] = (),
        classes: str = "",
    ) -> None:
        super().__init__(classes=("record-block " + classes).strip())
        self.entity = entity
        self.specs = specs
        self.texts = texts or {}
        self.block_title = title
        self.locked = set(locked)

    def compose(self) -> ComposeResult:
        if self.block_title:
            yield Static(self.block_title, classes="block-title", markup=False)
        for spec in self.specs:
            yield RuleField(spec, self.texts.get(spec.name, ""), locked=spec.name in self.locked)

    @property
    def fields(self) -> dict[str, RuleField]:
        return {f.spec.name: f for f in self.query(RuleField)}

    def same_shape(self, other: RecordBlock) -> bool:
        """Whether `other` (not mounted) has this block's kind, fields and title."""
        return (self.entity, self.specs, self.block_title) == (other.entity, other.specs, other.block_title)

    def refill(self, texts: dict[str, str], *, locked: Iterable[str] = ()) -> None:
        """Show another record of the same kind in these fields (see RuleField.refill)."""
        self.texts = texts
        self.locked = set(locked)
        for name, field in self.fields.items():
            field.refill(texts.get(name, ""), locked=name in self.locked)
        self.check_record()

    def on_rule_field_changed(self, event: RuleField.Changed) -> None:
        self.check_record()

    def on_mount(self) -> None:
        self.call_after_refresh(self.check_record)

    def values(self) -> dict[str, Any]:
        """Typed values of the fields whose own rules pass (others are left out)."""
        out: dict[str, Any] = {}
        for name, field in self.fields.items():
            try:
                out[name] = field.value()
            except rules.RuleError:
                continue
        return out

    def check_record(self) -> None:
        fields = self.fields
        for field in fields.values():
            field.record_error = None
        if self.entity == "weights":
            first = next(iter(fields.values()), None)
            for name, message in rules.check_weights(self.values()):
                target = fields.get(name) if name else first
                if target is not None and target.own_error is None:
                    target.record_error = message
        elif self.entity in rules.ENTITIES:
            for path, message in rules.check_record(self.entity, self.values()):
                name = path.split(".")[0].split("[")[0]
                target = fields.get(name)
                if target is not None:
                    target.record_error = message
        for field in fields.values():
            field.show()

    def problems(self) -> list[tuple[RuleField, str]]:
        self.check_record()
        for field in self.fields.values():
            field.reveal()
        return [(f, f.error) for f in self.fields.values() if f.error]

    def snapshot(self) -> tuple[str, ...]:
        return tuple(f.text for f in self.fields.values())


class RecordList(Vertical):
    """Any number of records of one kind; the editor adds and removes blocks.

    A long list mounts only the blocks that fill about one screen; the next few are mounted
    when they are about to be needed: the list scrolled near its end, or the cursor in one of
    its last mounted blocks (a job may need dozens of attributes, and building every block
    before showing any held the screen for most of a second). Until then they are `pending`:
    `snapshot()` counts them as they were given, and `complete()` mounts them all (the editor
    calls it before adding or removing a record, and before saving)."""

    class Completed(Message):
        """Every block of the list is mounted (posted when some had been pending)."""

        def __init__(self, record_list: RecordList) -> None:
            super().__init__()
            self.record_list = record_list

    def __init__(
        self,
        entity: str,
        specs: list[FieldSpec],
        records: list[dict[str, str]],
        *,
        noun: str,
        id: str | None = None,
    ) -> None:
        super().__init__(id=id, classes="record-list")
        self.entity = entity
        self.specs = specs
        self.records = records
        self.noun = noun
        self._counter = 0
        #: records whose blocks are not mounted yet, in order
        self.pending: list[dict[str, str]] = []
        self._stepping = False

    #: lines of blocks mounted in one step after the first screenful
    STEP_LINES = 16

    def _blocks_in(self, lines: int, records: list[dict[str, str]]) -> int:
        """How many of `records` (at least one) take about `lines` lines: a block is its
        title, one line a field and a blank line."""
        per_block = len(self.specs) + 2
        return max(1, min(len(records), -(-lines // per_block)))

    def compose(self) -> ComposeResult:
        yield Static(self._empty_text(), classes="list-empty hint", markup=False)
        # the screen less the lines above and below an editor's section (navigation line,
        # heading, tabs, key line and the section's note)
        first = self._blocks_in(max(self.app.size.height - 7, 12), self.records)
        self.pending = list(self.records[first:])
        for texts in self.records[:first]:
            yield self._block(texts)

    def _empty_text(self) -> str:
        return f"No {self.noun} records. Press ctrl+n to add one."

    def _block(self, texts: dict[str, str]) -> RecordBlock:
        self._counter += 1
        return RecordBlock(self.entity, self.specs, texts, title=f"{self.noun} {self._counter}")

    def on_mount(self) -> None:
        self._update_empty()
        scroller = self._scroller()
        if self.pending and scroller is not None:
            self.watch(scroller, "scroll_y", self._scrolled, init=False)

    def _scroller(self) -> Widget | None:
        node = self.parent
        while isinstance(node, Widget) and not node.is_scrollable:
            node = node.parent
        return node if isinstance(node, Widget) else None

    def _scrolled(self) -> None:
        scroller = self._scroller()
        if self.pending and scroller is not None and \
                scroller.max_scroll_y - scroller.scroll_y <= scroller.size.height:
            self.call_later(self._mount_next)

    def on_descendant_focus(self, event: events.DescendantFocus) -> None:
        if self.pending and block_of(event.widget) in self.blocks[-2:]:
            self.call_later(self._mount_next)

    async def _mount_next(self) -> None:
        """Mount the next few pending blocks."""
        if not self.pending or self._stepping or not self.is_attached:
            return
        self._stepping = True
        try:
            count = self._blocks_in(self.STEP_LINES, self.pending)
            chunk, self.pending = self.pending[:count], self.pending[count:]
            await self.mount_all([self._block(texts) for texts in chunk])
        finally:
            self._stepping = False
        if self.pending:
            self.call_after_refresh(self._scrolled)  # still at the end (e.g. after End): more
        else:
            self.post_message(self.Completed(self))

    async def complete(self) -> None:
        """Mount every pending block now."""
        if self.pending:
            chunk, self.pending = self.pending, []
            await self.mount_all([self._block(texts) for texts in chunk])
            self.post_message(self.Completed(self))

    def _update_empty(self) -> None:
        self.query_one(".list-empty", Static).display = not (self.blocks or self.pending)

    @property
    def blocks(self) -> list[RecordBlock]:
        return list(self.query_children(RecordBlock))

    async def add_record(self, texts: dict[str, str] | None = None) -> RecordBlock:
        await self.complete()  # a new record goes after every other
        block = self._block(texts or {})
        await self.mount(block)
        self._update_empty()
        self._renumber()
        return block

    async def remove_block(self, block: RecordBlock) -> None:
        await self.complete()  # the blocks after it are numbered again
        await block.remove()
        self._update_empty()
        self._renumber()

    def _renumber(self) -> None:
        for index, block in enumerate(self.blocks, start=1):
            title = block.query(".block-title")
            if title:
                title.first(Static).update(f"{self.noun} {index}")

    def values(self) -> list[dict[str, Any]]:
        return [b.values() for b in self.blocks]

    def problems(self) -> list[tuple[RuleField, str]]:
        out: list[tuple[RuleField, str]] = []
        for block in self.blocks:
            out.extend(block.problems())
        return out

    def snapshot(self) -> tuple[tuple[str, ...], ...]:
        pending = tuple(tuple(texts.get(spec.name, "") for spec in self.specs) for texts in self.pending)
        return tuple(b.snapshot() for b in self.blocks) + pending


def block_of(widget: Widget | None) -> RecordBlock | None:
    """The record block holding `widget`, if any."""
    node = widget
    while node is not None and not isinstance(node, RecordBlock):
        node = node.parent  # type: ignore[assignment]
    return node


def each_problem(containers: Iterable[RecordBlock | RecordList]) -> list[tuple[RuleField, str]]:
    out: list[tuple[RuleField, str]] = []
    for container in containers:
        out.extend(container.problems())
    return out


__all__ = [
    "FieldSpec",
    "RecordBlock",
    "RecordList",
    "RuleField",
    "block_of",
    "convert",
    "each_problem",
    "measures_text",
    "table_text",
    "text_of",
]
