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

    def __init__(self, key: str | None) -> None:
        super().__init__(key)
        self.known_attributes: set[str] = set()
        self.record_label = f"instrument {key}" if key else "the new instrument"

    # -- loading -----------------------------------------------------------------------------

    def load_record(self) -> Instrument | None:
        data = self.app.data
        self.known_attributes = {a.key for a in data.attributes()}
        if self.key is None:
            return None
        return data.instrument(self.key)

    def sections(self) -> list[tuple[str, str, list[Any]]]:
        inst: Instrument | None = self.original
        locked = ["key"] if inst is not None else []
        description = RecordBlock(
            "instrument", DESCRIPTION, _texts(inst, DESCRIPTION) if inst else {}, locked=locked, classes="description"
        )
        note = Static(
            "Fields marked * are required. Lists are typed with commas. Measures: attribute:fit "
            "(fit is primary or secondary). Attributes not yet known are added when you save.",
            classes="section-note",
        )

        def listed(entity: str, specs: list[FieldSpec], items: list[Any], noun: str, id: str) -> RecordList:
            return RecordList(entity, specs, [_texts(i, specs) for i in items], noun=noun, id=id)

        sample = inst.sample_copy if inst else None
        return [
            ("describe", "Description", [note, description]),
            ("reliability", "Reliability", [listed("reliability", RELIABILITY, inst.reliability if inst else [],
                                                   "Reliability", "list-reliability")]),
            ("validity", "Validity", [listed("validity", VALIDITY, inst.validity if inst else [],
                                             "Validity study", "list-validity")]),
            ("norms", "Norms", [
                Static("Percentile table: percentile=raw pairs, both increasing, e.g. 10=12, 50=20, 90=28.",
                       classes="section-note"),
                listed("norm", NORMS, inst.norms if inst else [], "Norm group", "list-norms"),
            ]),
            ("subgroups", "Subgroups", [listed("subgroup_difference", SUBGROUPS,
                                               inst.subgroup_differences if inst else [],
                                               "Subgroup difference", "list-subgroups")]),
            ("reviews", "Reviews", [listed("review", REVIEWS, inst.reviews if inst else [], "Review",
                                           "list-reviews")]),
            ("sample", "Sample copy", [
                RecordBlock("sample_copy", SAMPLE_COPY, _texts(sample, SAMPLE_COPY) if sample else {},
                            classes="sample-copy"),
                listed("sample_check", SAMPLE_CHECKS, sample.checks if sample else [], "Check",
                       "list-checks"),
            ]),
        ]

    def _after_show(self) -> None:
        super()._after_show()
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
        for block in self.query_one("#list-norms", RecordList).blocks:
            field = block.fields["key"]
            if field.text.strip() in seen:
                out.append((field, f"{field.text.strip()!r} is used by another norm group of this instrument"))
            seen.add(field.text.strip())
        return out

    # -- building and saving -----------------------------------------------------------------

    def build_record(self) -> Instrument:
        desc = self.query_one(".description", RecordBlock).values()
        lists = {
            name: self.query_one(f"#list-{name}", RecordList).values()
            for name in ("reliability", "validity", "norms", "subgroups", "reviews", "checks")
        }
        sample_values = self.query_one(".sample-copy", RecordBlock).values()
        checks = [SampleCheck(**_kwargs(v)) for v in lists["checks"]]
        has_sample = any(v is not None for v in sample_values.values()) or checks
        sample = SampleCopy(**_kwargs(sample_values), checks=checks) if has_sample else None
        key = desc["key"] if self.original is None else self.original.key
        return Instrument(
            **_kwargs({k: v for k, v in desc.items() if k != "key"}),
            key=key,
            reliability=[Reliability(**_kwargs(v)) for v in lists["reliability"]],
            validity=[ValidityStudy(**_kwargs(v)) for v in lists["validity"]],
            norms=[NormGroup(**_kwargs(v)) for v in lists["norms"]],
            subgroup_differences=[SubgroupDifference(**_kwargs(v)) for v in lists["subgroups"]],
            reviews=[Review(**_kwargs(v)) for v in lists["reviews"]],
            sample_copy=sample,
            row_version=self.original.row_version if self.original is not None else None,
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
        key_field.input.disabled = True
        self._note_new_attributes()
        for screen in self.app.screen_stack:
            refresh = getattr(screen, "record_saved", None)
            if refresh is not None and screen is not self:
                refresh(saved.key)


def _attribute_name(key: str) -> str:
    """A readable name for an attribute first typed as a key (e.g. 'numerical-reasoning')."""
    return key.replace("-", " ").capitalize()


__all__ = ["InstrumentEditor"]
