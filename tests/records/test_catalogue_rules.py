"""Field rules shared by import and the editing forms (vetting.records.rules), the blank template
and the format reference.

Ranges are those of the binding format-1 schema in issue 2 (0 < reliability < 1, -1 < r < 1,
importance 1..5, 0 < base_rate < 1, sd > 0, hires <= applicants, percentile table increasing in
both columns, retest-only interval_days).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import re
from pathlib import Path

import pytest

from vetting.records import domain as d
from vetting.records import rules
from vetting.records.catalogue import dump_catalogue, load_catalogue, parse_catalogue
from vetting.records.rules import RuleError, check_field, check_record, coerce

REPO = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize(
    "entity, field, value, fragment",
    [
        ("reliability", "value", 0.0, "greater than 0"),
        ("reliability", "value", 1.0, "less than 1"),
        ("reliability", "value", True, "yes/no value"),
        ("reliability", "value", float("nan"), "nan"),
        ("validity", "r", -1.0, "greater than -1"),
        ("validity", "n", 2, "at least 3"),
        ("requirement", "importance", 0, "from 1 to 5"),
        ("requirement", "importance", 6, "from 1 to 5"),
        ("requirement", "importance", 2.5, "whole number"),
        ("job", "base_rate", 1.0, "less than 1"),
        ("norm", "sd", 0.0, "greater than 0"),
        ("norm", "year", 1899, "a year from 1900"),
        ("norm", "year", dt.date.today().year + 2, "a year from 1900"),
        ("instrument", "minutes", 0, "greater than 0"),
        ("instrument", "reading_grade", 20.5, "from 0 to 20"),
        ("instrument", "mode", "paper", "must be a list"),
        ("instrument", "mode", ["paper", "paper"], "more than once"),
        ("instrument", "mode", ["papr"], "did you mean 'paper'?"),
        ("instrument", "currency", "usd", "three-letter"),
        ("instrument", "languages", ["english language"], "language tag"),
        ("instrument", "key", "Bad Key", "lower-case"),
        ("instrument", "title", "   ", "must not be blank"),
        ("instrument", "title", None, "is required"),
        ("instrument", "title", "a\x00b", "control character U+0000"),
        ("instrument", "title", "a\x85b", "control character U+0085"),
        ("review", "date", dt.datetime(2026, 1, 1, 12, 0), "date and time"),
        ("review", "date", "2026-01-01", "must be a date"),
        ("review", "stance", "positive", "allowed: supports, mixed, concerns"),
        ("requirement", "critical", "yes", "true or false"),
        ("policy", "weights", {"coverage": 0, "validity": 0}, "must not all be 0"),
        ("policy", "weights", {"valdity": 3}, "did you mean 'validity'?"),
        ("policy", "weights", {"coverage": -1}, "from 0 to"),
    ],
)
def test_check_field_names_the_rule(entity, field, value, fragment):
    message = check_field(entity, field, value)
    assert message is not None and fragment in message


@pytest.mark.parametrize(
    "entity, field, value",
    [
        ("reliability", "value", 0.89),
        ("validity", "r", -0.2),
        ("validity", "n", 3),
        ("requirement", "importance", 5),
        ("job", "base_rate", 0.4),
        ("instrument", "title", "Line one\n\tLine two – ünïcode"),
        ("instrument", "publisher", None),
        ("instrument", "languages", ["en", "fr-CA"]),
        ("review", "date", dt.date(2026, 9, 14)),
        ("policy", "weights", {"validity": 1}),
    ],
)
def test_check_field_accepts_good_values(entity, field, value):
    assert check_field(entity, field, value) is None


def test_coerce_turns_form_text_into_checked_values():
    assert coerce("reliability", "value", " 0.89 ") == 0.89
    assert coerce("validity", "n", "240") == 240
    assert coerce("requirement", "critical", "yes") is True
    assert coerce("review", "date", "2026-09-14") == dt.date(2026, 9, 14)
    assert coerce("instrument", "mode", "paper, group") == ["paper", "group"]
    assert coerce("instrument", "publisher", "  ") is None
    with pytest.raises(RuleError, match="greater than 0 and less than 1"):
        coerce("reliability", "value", "1.5")
    with pytest.raises(RuleError, match="must be a number"):
        coerce("reliability", "value", "high")
    with pytest.raises(RuleError, match="is required"):
        coerce("instrument", "title", "")
    with pytest.raises(RuleError, match="must be a date"):
        coerce("review", "date", "14/09/2026")
    with pytest.raises(RuleError, match="whole number"):
        coerce("validity", "n", "24.5")
    with pytest.raises(RuleError, match="got text '1_000'"):
        coerce("validity", "n", "1_000")
    with pytest.raises(RuleError, match="got inf"):
        coerce("instrument", "minutes", "inf")


def test_cross_field_rules_on_mappings_and_domain_objects():
    assert check_record("job", {"applicants_per_year": 10, "hires_per_year": 11}) == [
        ("hires_per_year", "must not exceed applicants_per_year (10); got 11")
    ]
    assert check_record("job", d.Job("j", "J", [], applicants_per_year=10, hires_per_year=10)) == []
    assert check_record("reliability", d.Reliability("internal", 0.9, interval_days=7))[0][0] == "interval_days"
    assert check_record("reliability", d.Reliability("retest", 0.9, interval_days=7)) == []
    copy = d.SampleCopy(requested=dt.date(2026, 5, 2), received=dt.date(2026, 5, 1))
    assert check_record("sample_copy", copy)[0][0] == "received"
    table = [d.PercentilePoint(10, 5), d.PercentilePoint(50, 5), d.PercentilePoint(40, 9)]
    found = check_record("norm", {"table": table})
    assert [path for path, _ in found] == ["table[1].raw", "table[2].percentile"]
    assert check_record("policy", d.Policy()) == []


def test_every_rule_names_a_known_field_of_the_domain_objects():
    classes = {
        "attribute": d.Attribute, "instrument": d.Instrument, "measure": d.Measure, "reliability": d.Reliability,
        "validity": d.ValidityStudy, "norm": d.NormGroup, "percentile": d.PercentilePoint,
        "subgroup_difference": d.SubgroupDifference, "review": d.Review, "sample_copy": d.SampleCopy,
        "sample_check": d.SampleCheck, "job": d.Job, "requirement": d.Requirement, "policy": d.Policy,
    }
    bookkeeping = {"row_version", "version", "locked_at", "created_at", "first_ranked_at"}
    for entity, cls in classes.items():
        fields = {f.name for f in dataclasses.fields(cls)} - bookkeeping
        assert set(rules.ENTITIES[entity]) == fields, entity
        required = {f.name for f in dataclasses.fields(cls)
                    if f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING}
        assert {n for n, r in rules.ENTITIES[entity].items() if r.required} == required, entity


def test_issue_2_vocabularies_are_used():
    # issue 2, "Catalogue format 1": the enumerations written beside each field
    assert rules.ENTITIES["attribute"]["kind"].choices == (
        "ability", "knowledge", "skill", "personality", "interest", "other")
    assert rules.ENTITIES["reliability"]["type"].choices == (
        "internal", "retest", "alternate", "split-half", "inter-rater")
    assert rules.ENTITIES["validity"]["corrected"].choices == (
        "none", "criterion-unreliability", "range-restriction", "both")
    assert rules.ENTITIES["norm"]["scope"].choices == ("local", "regional", "national", "international")
    assert rules.ENTITIES["sample_check"]["result"].choices == ("pass", "fail", "unclear")


# ---------------------------------------------------------------------------
# The blank template and the reference document
# ---------------------------------------------------------------------------


def _uncommented_template() -> str:
    text = (REPO / "catalogues" / "template.yaml").read_text(encoding="utf-8")
    keep = [
        line for line in text.splitlines()
        if not line.startswith("##") and not re.match(r"^(attributes|instruments|jobs): \[\]$", line)
    ]
    return "\n".join(line[2:] if line.startswith("# ") else line for line in keep) + "\n"


def test_template_loads_as_an_empty_catalogue():
    assert load_catalogue(REPO / "catalogues" / "template.yaml") == d.Catalogue()


def test_template_examples_cover_every_field_and_load_when_uncommented():
    text = _uncommented_template()
    cat = parse_catalogue(text, "template (uncommented)")
    assert len(cat.attributes) == len(cat.instruments) == len(cat.jobs) == 1
    for entity, fields in rules.ENTITIES.items():
        for name in fields:
            assert re.search(rf"^\s*(- )?{name}:|{{{name}:|, {name}:", text, re.M), f"{entity}.{name} missing"


def test_reference_document_lists_every_field():
    doc = (REPO / "docs" / "catalogue-format.md").read_text(encoding="utf-8")
    for entity, fields in rules.ENTITIES.items():
        for name, rule in fields.items():
            assert f"| `{name}` |" in doc, f"{entity}.{name} not documented"
            assert rule.meaning in doc, f"meaning of {entity}.{name} not documented"
    # and the short example in it is a valid catalogue
    example = doc.split("```yaml\n", 1)[1].split("```", 1)[0]
    cat = parse_catalogue(example, "docs example")
    assert parse_catalogue(dump_catalogue(cat), "again") == cat


@pytest.mark.parametrize("value, shown", [
    (10**400, "a whole number of about 401 digits"),  # beyond any float: no OverflowError
    (-(10**400), "a whole number of about 401 digits"),
    (10**50, str(10**50)),  # exact, not rounded through a float
])
def test_a_whole_number_too_large_for_a_float_is_reported_not_crashed(value, shown):
    message = rules.check_field("instrument", "minutes", value)
    assert message is not None and message.startswith("must be a number greater than 0")
    assert message.endswith(shown)
