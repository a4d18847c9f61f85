"""The instrument editor: the description and every kind of evidence, checked as you type with
the same rules as import (vetting.records.rules). Saving refuses invalid records and uses the
record's row version, so a concurrent change by someone else is refused, never overwritten."""

from __future__ import annotations

from typing import Any

from textual.widgets import Static

from vetting.records.domain import (
    Attribute,
    Instrument,
    NormGroup,
    Reliability,
    Review,
    SampleCheck,
    SampleCopy,
    SubgroupDifference,
    ValidityStudy,
)
from vetting.tui.widgets.editor import EditorScreen
from vetting.tui.widgets.form import (
    FieldSpec,
    RecordBlock,
    RecordList,
    RuleField,
    measures_text,
    table_text,
    text_of,
)


def _specs(entity: str, names: list[str], **special: str) -> list[FieldSpec]:
    return [FieldSpec(entity, name, kind=special.get(name, "rule")) for name in names]


DESCRIPTION = _specs(
    "instrument",
    [
        "key", "title", "publisher", "edition", "year", "measures", "minutes", "mode",
        "reading_grade", "cost_per_applicant", "currency", "user_qualification",
        "accommodations", "languages",
    ],
    measures="measures",
)
RELIABILITY = _specs("reliability", ["type", "value", "n", "interval_days", "sample", "source"])
VALIDITY = _specs("validity", ["criterion", "r", "n", "design", "corrected", "job_family", "sample", "source"])
NORMS = _specs(
    "norm", ["key", "group", "n", "year", "scope", "mean", "sd", "occupation", "table"], table="table"
)
SUBGROUPS = _specs("subgroup_difference", ["groups", "d", "n", "source"])
REVIEWS = _specs("review", ["date", "by", "stance", "note", "source"])
SAMPLE_COPY = _specs("sample_copy", ["requested", "received", "checked_by"])
SAMPLE_CHECKS = _specs("sample_check", ["item", "result", "note"])


def _texts(obj: Any, specs: list[FieldSpec]) -> dict[str, str]:
    out: dict[str, str] = {}
    for spec in specs:
        value = getattr(obj, spec.name, None)
        if spec.kind == "measures":
            out[spec.name] = measures_text(value or [])
        elif spec.kind == "table":
            out[spec.name] = table_text(value or [])
        else:
            out[spec.name] = text_of(value)
    return out


def _kwargs(values: dict[str, Any], defaults: dict[str, Any] | None = None) -> dict[str, Any]:
    out = dict(defaults or {})
    out.update({k: v for k, v in values.items() if v is not None})
    return out


class InstrumentEditor(EditorScreen):
    """Edit one instrument (key None: a new one)."""

    CSS_PATH = ["../widgets/form.tcss", "../widgets/editor.tcss"]
    kind_label = "Instrument"

    def begin(self, key: str | None) -> None:
        super().begin(key)
        self.known_attributes: set[str] = set()
        self.record_label = f"instrument {key}" if key else "the new instrument"

    # -- loading -----------------------------------------------------------------------------

    def load_record(self) -> Instrument | None:
        data = self.app.data
        self.known_attributes = {a.key for a in data.attributes()}
        if self.key is None:
            return None
        return data.instrument(self.key)

    def sections(self) -> list[tuple[str, str, Any]]:
        inst: Instrument | None = self.original
        locked = ["key"] if inst is not None else []

        def describe() -> list[Any]:
            note = Static(
                "* required · lists: a, b · measures: attribute:fit (primary or secondary) · "
                "new attributes are added on saving",
                classes="section-note",
            )
            texts = _texts(inst, DESCRIPTION) if inst else {}
            return [note, RecordBlock("instrument", DESCRIPTION, texts, locked=locked, classes="description")]

        def listed(entity: str, specs: list[FieldSpec], attr: str, noun: str, id: str, note: str = "") -> Any:
            def build() -> list[Any]:
                items = getattr(inst, attr) if inst else []
                widgets: list[Any] = [Static(note, classes="section-note")] if note else []
                widgets.append(RecordList(entity, specs, [_texts(i, specs) for i in items], noun=noun, id=id))
                return widgets

            return build

        def sample() -> list[Any]:
            copy = inst.sample_copy if inst else None
            return [
                RecordBlock("sample_copy", SAMPLE_COPY, _texts(copy, SAMPLE_COPY) if copy else {}, classes="sample-copy"),
                RecordList("sample_check", SAMPLE_CHECKS, [_texts(c, SAMPLE_CHECKS) for c in (copy.checks if copy else [])],
                           noun="Check", id="list-checks"),
            ]

        return [
            ("describe", "Description", describe),
            ("reliability", "Reliability", listed("reliability", RELIABILITY, "reliability", "Reliability",
                                                  "list-reliability")),
            ("validity", "Validity", listed("validity", VALIDITY, "validity", "Validity study", "list-validity")),
            ("norms", "Norms", listed("norm", NORMS, "norms", "Norm group", "list-norms",
                                      "Percentile table: percentile=raw pairs, both increasing, "
                                      "e.g. 10=12, 50=20, 90=28.")),
            ("subgroups", "Subgroups", listed("subgroup_difference", SUBGROUPS, "subgroup_differences",
                                              "Subgroup difference", "list-subgroups")),
            ("reviews", "Reviews", listed("review", REVIEWS, "reviews", "Review", "list-reviews")),
            ("sample", "Sample copy", sample),
        ]

    def pane_built(self, pane_id: str) -> None:
        if pane_id == "describe":
            self._note_new_attributes()

    # -- checks ------------------------------------------------------------------------------

    def on_rule_field_changed(self, event: RuleField.Changed) -> None:
        if event.field.spec.kind == "measures":
            self._note_new_attributes()

    def _measures_field(self) -> RuleField:
        return self.query_one(".description", RecordBlock).fields["measures"]

    def _note_new_attributes(self) -> None:
        field = self._measures_field()
        try:
            measures = field.value()
        except Exception:
            field.note = None
            field.show()
            return
        new = [m.attribute for m in measures if m.attribute not in self.known_attributes]
        field.note = f"new attribute{'s' if len(new) > 1 else ''} {', '.join(new)} will be added on saving" if new else None
        field.show()

    def extra_problems(self) -> list[tuple[RuleField, str]]:
        out: list[tuple[RuleField, str]] = []
        seen: set[str] = set()
        if not self.built("norms"):
            return out
        for block in self.query_one("#list-norms", RecordList).blocks:
            field = block.fields["key"]
            if field.text.strip() in seen:
                out.append((field, f"{field.text.strip()!r} is used by another norm group of this instrument"))
            seen.add(field.text.strip())
        return out

    # -- building and saving -----------------------------------------------------------------

    def build_record(self) -> Instrument:
        inst: Instrument | None = self.original
        desc = self.query_one(".description", RecordBlock).values()

        def items(pane: str, list_id: str, cls: type, attr: str) -> list[Any]:
            if not self.built(pane):  # never shown: keep what is stored
                return list(getattr(inst, attr)) if inst else []
            return [cls(**_kwargs(v)) for v in self.query_one(f"#{list_id}", RecordList).values()]

        if self.built("sample"):
            sample_values = self.query_one(".sample-copy", RecordBlock).values()
            checks = [SampleCheck(**_kwargs(v)) for v in self.query_one("#list-checks", RecordList).values()]
            has_sample = any(v is not None for v in sample_values.values()) or checks
            sample = SampleCopy(**_kwargs(sample_values), checks=checks) if has_sample else None
        else:
            sample = inst.sample_copy if inst else None
        key = desc["key"] if inst is None else inst.key
        return Instrument(
            **_kwargs({k: v for k, v in desc.items() if k != "key"}),
            key=key,
            reliability=items("reliability", "list-reliability", Reliability, "reliability"),
            validity=items("validity", "list-validity", ValidityStudy, "validity"),
            norms=items("norms", "list-norms", NormGroup, "norms"),
            subgroup_differences=items("subgroups", "list-subgroups", SubgroupDifference, "subgroup_differences"),
            reviews=items("reviews", "list-reviews", Review, "reviews"),
            sample_copy=sample,
            row_version=inst.row_version if inst is not None else None,
        )

    def store_record(self, record: Instrument) -> Instrument:
        data = self.app.data
        for measure in record.measures:
            if measure.attribute not in self.known_attributes:
                data.save_attribute(Attribute(key=measure.attribute, name=_attribute_name(measure.attribute)))
                self.known_attributes.add(measure.attribute)
        return data.save_instrument(record)

    def after_saved(self, saved: Instrument) -> None:
        self.record_label = f"instrument {saved.key}"
        key_field = self.query_one(".description", RecordBlock).fields["key"]
        key_field.locked = True
        self._note_new_attributes()
        for screen in self.app.screen_stack:
            refresh = getattr(screen, "record_saved", None)
            if refresh is not None and screen is not self:
                refresh(saved.key)


def _attribute_name(key: str) -> str:
    """A readable name for an attribute first typed as a key (e.g. 'numerical-reasoning')."""
    return key.replace("-", " ").capitalize()


__all__ = ["InstrumentEditor"]
