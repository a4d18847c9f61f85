"""Catalogue format 1: reading, checking and writing (vetting.records.catalogue).

The outside reference is the binding format-1 schema in issue 2 ("Catalogue format 1": field
names, vocabularies and ranges such as 0 < reliability < 1, -1 < r < 1, importance 1..5,
0 < base_rate < 1, sd > 0, hires <= applicants) and YAML 1.1 itself (yaml.org/spec/1.1: plain
scalars such as `yes` are booleans, `2026-02-30` matches the timestamp pattern but is no date).
Every bad-input case asserts the exact rendering `FILE:LINE: path.to.field: message`.
"""

from __future__ import annotations

import datetime as dt
import os

import pytest

from tests.records._measure import peak_kib
from vetting.records import catalogue as cio
from vetting.records import domain as d
from vetting.records.catalogue import dump_catalogue, load_catalogue, parse_catalogue, write_catalogue
from vetting.records.errors import CatalogueError, Problem

NAME = "team/cat.yaml"

# A complete catalogue using every field of the issue-2 schema (values invented).
VALID = """\
format: 1
attributes:
  - key: mechanical-reasoning
    name: Mechanical reasoning
    kind: ability
  - key: checking
    name: Checking accuracy
    kind: skill
instruments:
  - key: plant-mech-2
    title: Plant mechanics, form 2
    publisher: Invented Press
    edition: "2"
    year: 2019
    measures:
      - attribute: mechanical-reasoning
        fit: primary
    mode: [online-supervised, paper]
    minutes: 30
    reading_grade: 8.0
    cost_per_applicant: 18.0
    currency: USD
    user_qualification: trained
    accommodations: [extended-time, large-print]
    languages: [en, fr-CA]
    reliability:
      - type: internal
        value: 0.89
        n: 600
        sample: applicants
        source: manual
      - type: retest
        value: 0.81
        n: 120
        interval_days: 21
    validity:
      - criterion: job-performance
        r: 0.34
        n: 240
        design: predictive
        corrected: none
        job_family: plant operations
        sample: operators
        source: manual
      - criterion: turnover
        r: -0.12
        n: 300
    norms:
      - key: national-2019
        group: plant applicants
        n: 1500
        year: 2019
        scope: national
        occupation: operators
        mean: 31.0
        sd: 7.0
        table:
          - {percentile: 10, raw: 22}
          - {percentile: 50, raw: 31}
          - {percentile: 90, raw: 40}
    subgroup_differences:
      - groups: focal vs reference
        d: 0.55
        n: 900
        source: manual
    reviews:
      - date: 2026-09-14
        by: A. Reviewer
        source: newsletter
        stance: supports
        note: Clear manual.
    sample_copy:
      requested: 2026-09-01
      received: 2026-09-08
      checked_by: B. Checker
      checks:
        - item: instructions-clear
          result: pass
          note: fine
jobs:
  - key: control-room-operator
    title: Control room operator
    analysis_source: task inventory, 2026
    applicant_reading_grade: 10
    time_budget_minutes: 45
    budget_per_applicant: 40
    staff_qualification: trained
    applicants_per_year: 240
    hires_per_year: 24
    base_rate: 0.40
    criterion_sd: 14000
    tenure_years: 4
    requirements:
      - attribute: mechanical-reasoning
        importance: 5
        critical: true
      - attribute: checking
        importance: 3
    policy:
      min_reliability: 0.80
      max_norm_age_years: 15
      impact_ratio_floor: 0.80
      weights: {coverage: 30, validity: 30, reliability: 15, norms: 10, fairness: 10, practicality: 5}
"""


def problems_of(text, name=NAME, **kw) -> list[Problem]:
    with pytest.raises(CatalogueError) as info:
        parse_catalogue(text, name, **kw)
    assert info.value.problems, "a refused file must name at least one problem"
    return info.value.problems


def line_of(text: str, fragment: str, nth: int = 1) -> int:
    """1-based line number of the nth line containing `fragment`."""
    hits = [i + 1 for i, line in enumerate(text.splitlines()) if fragment in line]
    assert len(hits) >= nth, f"{fragment!r} not in text"
    return hits[nth - 1]


def assert_problem(text: str, line: int | None, path: str, fragment: str, name: str = NAME, **kw) -> Problem:
    found = problems_of(text, name, **kw)
    for p in found:
        if p.line == line and p.path == path and fragment in p.message:
            where = f"{name}:{line}" if line is not None else name
            assert str(p).startswith(f"{where}: {path}: " if path else f"{where}: ")
            return p
    raise AssertionError("expected problem not found:\n" + "\n".join(str(p) for p in found))


# ---------------------------------------------------------------------------
# The valid example
# ---------------------------------------------------------------------------


def test_valid_example_reads_every_field():
    cat = parse_catalogue(VALID, NAME)
    assert [a.key for a in cat.attributes] == ["mechanical-reasoning", "checking"]
    inst = cat.instruments[0]
    assert inst.key == "plant-mech-2" and inst.edition == "2" and inst.year == 2019
    assert inst.minutes == 30.0 and inst.mode == ["online-supervised", "paper"]
    assert inst.languages == ["en", "fr-CA"]
    assert [(r.type, r.value, r.n, r.interval_days) for r in inst.reliability] == [
        ("internal", 0.89, 600, None),
        ("retest", 0.81, 120, 21),
    ]
    assert inst.validity[1].criterion == "turnover" and inst.validity[1].r == -0.12
    assert inst.validity[1].design == "predictive" and inst.validity[1].corrected == "none"  # defaults
    norm = inst.norms[0]
    assert [(p.percentile, p.raw) for p in norm.table] == [(10, 22), (50, 31), (90, 40)]
    assert inst.reviews[0].date == dt.date(2026, 9, 14)
    assert inst.sample_copy.received == dt.date(2026, 9, 8)
    assert inst.sample_copy.checks[0].result == "pass"
    job = cat.jobs[0]
    assert job.hires_per_year == 24 and job.base_rate == 0.40 and job.criterion_sd == 14000
    assert job.requirements[1] == d.Requirement("checking", 3, False)
    assert job.policy.weights == {
        "coverage": 30, "validity": 30, "reliability": 15, "norms": 10, "fairness": 10, "practicality": 5,
    }


def test_minimal_catalogue_and_defaults():
    cat = parse_catalogue("format: 1\n", NAME)
    assert cat == d.Catalogue()
    text = (
        "format: 1\nattributes: [{key: a, name: A}]\n"
        "jobs: [{key: j, title: J, requirements: [{attribute: a}]}]\n"
    )
    job = parse_catalogue(text, NAME).jobs[0]
    assert job.policy == d.Policy()  # defaults documented in docs/catalogue-format.md
    assert job.requirements[0] == d.Requirement("a", 3, False)


def test_partial_weights_leave_the_others_at_zero():
    text = VALID.replace(
        "weights: {coverage: 30, validity: 30, reliability: 15, norms: 10, fairness: 10, practicality: 5}",
        "weights: {validity: 2, coverage: 1}",
    )
    weights = parse_catalogue(text, NAME).jobs[0].policy.weights
    assert list(weights) == list(d.WEIGHT_NAMES)
    assert weights["validity"] == 2 and weights["coverage"] == 1 and weights["norms"] == 0


def test_attributes_known_to_the_database_need_no_declaration():
    text = "format: 1\njobs: [{key: j, title: J, requirements: [{attribute: stored-one}]}]\n"
    assert_problem(text, 2, "jobs[0].requirements[0].attribute", "'stored-one' is not declared")
    cat = parse_catalogue(text, NAME, known_attributes={"stored-one"})
    assert cat.jobs[0].requirements[0].attribute == "stored-one"


def test_numbers_written_as_text_for_text_fields_stay_text():
    text = VALID.replace('edition: "2"', "edition: 3")
    assert parse_catalogue(text, NAME).instruments[0].edition == "3"


# ---------------------------------------------------------------------------
# Bad input: every class named in issue 2 "Bad input" and issue 7 item 6
# ---------------------------------------------------------------------------

# (case id, text to replace, replacement, marker whose line is expected, path, message fragment)
FIELD_CASES = [
    ("unknown key with suggestion", "    minutes: 30", "    minuts: 30", "minuts", "instruments[0].minuts",
     "did you mean 'minutes'?"),
    ("unknown key without suggestion", "    minutes: 30", "    minutes: 30\n    colour: red", "colour",
     "instruments[0].colour", "allowed here: key, title"),
    ("unknown nested key", "        fit: primary", "        fitt: primary", "fitt", "instruments[0].measures[0].fitt",
     "did you mean 'fit'?"),
    ("missing required field", "    title: Plant mechanics, form 2\n", "", "- key: plant-mech-2",
     "instruments[0].title", "is required"),
    ("required field empty", "    title: Plant mechanics, form 2", "    title:", "    title:",
     "instruments[0].title", "is required"),
    ("bool is not a number", "        value: 0.89", "        value: yes", "value: yes",
     "instruments[0].reliability[0].value", "got a yes/no value (true)"),
    ("text is not a number", "    minutes: 30", "    minutes: half an hour", "half an hour",
     "instruments[0].minutes", "got text 'half an hour'"),
    ("string is not a list", "    mode: [online-supervised, paper]", "    mode: paper", "mode: paper",
     "instruments[0].mode", "must be a list"),
    ("mapping is not a list",
     "    subgroup_differences:\n      - groups: focal vs reference\n        d: 0.55\n        n: 900\n        source: manual\n",
     "    subgroup_differences:\n      groups: focal vs reference\n      d: 0.55\n", "      groups: focal",
     "instruments[0].subgroup_differences", "must be a list"),
    ("reliability above 1", "        value: 0.89", "        value: 1.2", "value: 1.2",
     "instruments[0].reliability[0].value", "greater than 0 and less than 1"),
    ("reliability of exactly 1", "        value: 0.89", "        value: 1", "value: 1",
     "instruments[0].reliability[0].value", "less than 1"),
    ("reliability zero", "        value: 0.89", "        value: 0", "value: 0",
     "instruments[0].reliability[0].value", "greater than 0"),
    ("reliability sample size 0", "        n: 600", "        n: 0", "n: 0",
     "instruments[0].reliability[0].n", "at least 2"),
    ("r of -1", "        r: 0.34", "        r: -1", "r: -1", "instruments[0].validity[0].r", "greater than -1"),
    ("r above 1", "        r: 0.34", "        r: 1.3", "r: 1.3", "instruments[0].validity[0].r", "less than 1"),
    ("validity n fractional", "        n: 240", "        n: 24.5", "n: 24.5", "instruments[0].validity[0].n",
     "whole number"),
    ("validity n zero", "        n: 240", "        n: 0", "n: 0", "instruments[0].validity[0].n", "at least 3"),
    ("importance 6", "        importance: 5", "        importance: 6", "importance: 6",
     "jobs[0].requirements[0].importance", "from 1 to 5"),
    ("importance 0", "        importance: 5", "        importance: 0", "importance: 0",
     "jobs[0].requirements[0].importance", "from 1 to 5"),
    ("base rate 1", "    base_rate: 0.40", "    base_rate: 1.0", "base_rate: 1.0", "jobs[0].base_rate",
     "greater than 0 and less than 1"),
    ("base rate 0", "    base_rate: 0.40", "    base_rate: 0", "base_rate: 0", "jobs[0].base_rate", "greater than 0"),
    ("sd zero", "        sd: 7.0", "        sd: 0", "sd: 0", "instruments[0].norms[0].sd", "greater than 0"),
    ("sd negative", "        sd: 7.0", "        sd: -2", "sd: -2", "instruments[0].norms[0].sd", "greater than 0"),
    ("hires above applicants", "    hires_per_year: 24", "    hires_per_year: 300", "hires_per_year",
     "jobs[0].hires_per_year", "must not exceed applicants_per_year (240)"),
    ("minutes zero", "    minutes: 30", "    minutes: 0", "minutes: 0", "instruments[0].minutes", "greater than 0"),
    ("reading grade 25", "    reading_grade: 8.0", "    reading_grade: 25", "reading_grade", "instruments[0].reading_grade",
     "from 0 to 20"),
    ("implausible year", "    year: 2019", "    year: 1850", "year: 1850", "instruments[0].year", "a year from 1900"),
    ("impossible date", "      - date: 2026-09-14", "      - date: 2026-02-30", "2026-02-30",
     "instruments[0].reviews[0].date", "not a valid date"),
    ("date as words", "      - date: 2026-09-14", "      - date: last spring", "last spring",
     "instruments[0].reviews[0].date", "must be a date YYYY-MM-DD"),
    ("received before requested", "      received: 2026-09-08", "      received: 2026-08-08", "received:",
     "instruments[0].sample_copy.received", "on or after requested (2026-09-01)"),
    ("interval on non-retest", "        n: 600", "        n: 600\n        interval_days: 14", "interval_days: 14",
     "instruments[0].reliability[0].interval_days", "only to type 'retest'"),
    ("enum misspelt", "        stance: supports", "        stance: suports", "suports",
     "instruments[0].reviews[0].stance", "did you mean 'supports'?"),
    ("enum in a list", "    mode: [online-supervised, paper]", "    mode: [online, paper]", "mode: [online",
     "instruments[0].mode[0]", "'online' is not allowed"),
    ("bad key pattern", "  - key: plant-mech-2", "  - key: Plant_Mech", "Plant_Mech", "instruments[0].key",
     "lower-case letters"),
    ("empty requirements", "    requirements:\n      - attribute: mechanical-reasoning\n        importance: 5\n"
     "        critical: true\n      - attribute: checking\n        importance: 3\n", "    requirements: []\n",
     "requirements: []", "jobs[0].requirements", "at least 1"),
    ("non-monotone percentiles", "          - {percentile: 50, raw: 31}", "          - {percentile: 5, raw: 31}",
     "percentile: 5,", "instruments[0].norms[0].table[1].percentile", "percentiles must increase"),
    ("non-monotone raw scores", "          - {percentile: 90, raw: 40}", "          - {percentile: 90, raw: 30}",
     "raw: 30", "instruments[0].norms[0].table[2].raw", "raw scores must increase"),
    ("undeclared attribute", "      - attribute: mechanical-reasoning\n        fit",
     "      - attribute: mechanical-reasonin\n        fit", "attribute: mechanical-reasonin",
     "instruments[0].measures[0].attribute", "did you mean 'mechanical-reasoning'?"),
    ("negative weight", "weights: {coverage: 30,", "weights: {coverage: -30,", "coverage: -30",
     "jobs[0].policy.weights.coverage", "from 0 to"),
    ("unknown weight", "weights: {coverage: 30,", "weights: {coverage: 30, speed: 3,", "speed: 3",
     "jobs[0].policy.weights.speed", "unknown weight 'speed'"),
    ("weights all zero",
     "weights: {coverage: 30, validity: 30, reliability: 15, norms: 10, fairness: 10, practicality: 5}",
     "weights: {coverage: 0, validity: 0}", "weights:", "jobs[0].policy.weights", "must not all be 0"),
    ("control character", "    title: Plant mechanics, form 2", '    title: "Plant\\x07mechanics"', "Plant\\x07",
     "instruments[0].title", "control character U+0007"),
    ("line-separator character", "    title: Plant mechanics, form 2", '    title: "Plant\\Lmechanics"', "Plant\\L",
     "instruments[0].title", "control character U+2028"),
    ("next-line character (PyYAML would turn it into a space)", "    title: Plant mechanics, form 2",
     '    title: "Plant\\Nmechanics"', "Plant\\N", "instruments[0].title", "control character U+0085"),
    ("duplicate YAML key", "    minutes: 30", "    minutes: 30\n    minutes: 35", "minutes: 35",
     "instruments[0].minutes", "given twice in the same place (first on line"),
]


@pytest.mark.parametrize(
    "old, new, marker, path, fragment", [c[1:] for c in FIELD_CASES], ids=[c[0] for c in FIELD_CASES]
)
def test_bad_field_is_named_with_file_line_and_rule(old, new, marker, path, fragment):
    assert old in VALID
    text = VALID.replace(old, new, 1)
    assert_problem(text, line_of(text, marker), path, fragment)


def _append_instrument(text: str, key: str) -> str:
    extra = f"  - key: {key}\n    title: Second\n    minutes: 10\n    measures: [{{attribute: checking}}]\n"
    return text.replace("jobs:\n", extra + "jobs:\n", 1)


def test_duplicate_instrument_key():
    text = _append_instrument(VALID, "plant-mech-2")
    assert_problem(text, line_of(text, "- key: plant-mech-2", 2), "instruments[1].key",
                   f"duplicate instrument key 'plant-mech-2' (first on line {line_of(text, '- key: plant-mech-2')})")


def test_duplicate_job_attribute_and_norm_keys():
    text = VALID + "  - key: control-room-operator\n    title: Again\n    requirements: [{attribute: checking}]\n"
    assert_problem(text, line_of(text, "- key: control-room-operator", 2), "jobs[1].key", "duplicate job key")
    text = VALID.replace("  - key: checking\n", "  - key: mechanical-reasoning\n", 1)
    assert_problem(text, line_of(text, "- key: mechanical-reasoning", 2), "attributes[1].key",
                   "duplicate attribute key 'mechanical-reasoning'")
    text = VALID.replace(
        "    subgroup_differences:",
        "      - {key: national-2019, group: g, n: 10, year: 2001, scope: local, mean: 1, sd: 1}\n"
        "    subgroup_differences:",
    )
    assert_problem(text, line_of(text, "{key: national-2019"), "instruments[0].norms[1].key", "duplicate norm key")


def test_same_attribute_twice_in_one_job():
    text = VALID.replace("      - attribute: checking\n        importance: 3",
                         "      - attribute: mechanical-reasoning\n        importance: 3")
    assert_problem(text, line_of(text, "- attribute: mechanical-reasoning", 3), "jobs[0].requirements[1].attribute",
                   "listed twice")


@pytest.mark.parametrize(
    "text, line, fragment",
    [
        ("attributes: []\n", 1, "first line of a catalogue must be 'format: 1'"),
        ("format: 2\n", 1, "unsupported catalogue format '2'; this version of vetting reads format 1"),
        ("format: one\n", 1, "unsupported catalogue format 'one'"),
        ('format: "1"\n', 1, "must be the number 1, not text"),
    ],
    ids=["missing", "future", "words", "quoted"],
)
def test_format_version(text, line, fragment):
    assert_problem(text, line, "format", fragment)


@pytest.mark.parametrize(
    "text, line, fragment",
    [
        ("format: 1\ninstruments:\n  - key: a\n   title: b\n", 4, "YAML syntax error"),
        ("format: 1\njobs: [1, 2\n", 3, "YAML syntax error"),
        ("format: 1\n\tjobs: []\n", 2, "YAML syntax error"),
        ("- format: 1\n", 1, "must be a mapping that starts with 'format: 1'"),
        ("", 1, "the file is empty"),
        ("format: 1\n---\nformat: 1\n", 2, "only one YAML document"),
        ("format: 1\njobs: !!python/object:os.system ls\n", 2, "YAML tag"),
        ("format: 1\n<<: {jobs: []}\n", 2, "merge keys"),
        ('format: 1\nattributes: [{key: a, name: "x\x01y"}]\n', 2, "U+0001"),
    ],
    ids=["indent", "unclosed", "tab", "list", "empty", "two-docs", "python-tag", "merge", "raw-control"],
)
def test_yaml_level_problems(text, line, fragment):
    assert_problem(text, line, "", fragment)


def test_all_problems_are_reported_at_once_in_line_order():
    text = VALID.replace("        value: 0.89", "        value: 1.5").replace("    base_rate: 0.40", "    base_rate: 2")
    found = problems_of(text)
    assert [p.path for p in found] == ["instruments[0].reliability[0].value", "jobs[0].base_rate"]
    assert found[0].line < found[1].line


def test_problem_list_is_capped():
    items = "".join(f"  - {{key: A{i}, name: x}}\n" for i in range(200))
    with pytest.raises(CatalogueError) as info:
        parse_catalogue("format: 1\nattributes:\n" + items, NAME)
    assert len(info.value.problems) == cio.MAX_PROBLEMS and info.value.truncated
    assert "more problems not shown" in str(info.value)


# ---------------------------------------------------------------------------
# Hostile input (issue 7 item 6): refused quickly with bounded memory
# ---------------------------------------------------------------------------




def billion_laughs(levels: int = 9) -> str:
    # The classic alias expansion attack, written in YAML (each level 9x the one before).
    lines = ["format: 1", 'a0: &a0 ["lol","lol","lol","lol","lol","lol","lol","lol","lol"]']
    for i in range(1, levels):
        lines.append(f"a{i}: &a{i} [" + ",".join([f"*a{i - 1}"] * 9) + "]")
    return "\n".join(lines) + "\n"


def test_alias_bomb_is_refused_without_expanding():
    text = billion_laughs()
    holder = {}

    def run():
        with pytest.raises(CatalogueError) as info:
            parse_catalogue(text, NAME)
        holder["e"] = info.value

    assert peak_kib(run) < 2048
    assert str(holder["e"].problems[0]) == f"{NAME}:2: YAML anchors (&name) are not allowed in a catalogue; write each value out in full"


def test_alias_without_anchor_is_refused():
    assert_problem("format: 1\njobs: *x\n", 2, "", "")  # undefined alias: a YAML error with its line


def test_deep_nesting_is_refused():
    text = "format: 1\nx: " + "[" * 5000 + "]" * 5000 + "\n"
    assert peak_kib(lambda: problems_of(text)) < 4096
    assert_problem(text, 2, "", "nest")  # libyaml's own limit or ours, whichever trips first
    text = "format: 1\nx:\n" + "".join("  " * i + f"k{i}:\n" for i in range(1, 60))
    assert_problem(text, line_of(text, "k20:"), "", "nested too deeply")


def test_huge_scalar_is_refused():
    text = 'format: 1\nattributes: [{key: a, name: "' + "x" * (cio.MAX_SCALAR_CHARS + 1) + '"}]\n'
    assert_problem(text, 2, "", "a value is too long")


def test_too_many_values_are_refused(monkeypatch):
    monkeypatch.setattr(cio, "MAX_NODES", 50)
    text = "format: 1\nattributes:\n" + "".join(f"  - {{key: a{i}, name: x}}\n" for i in range(20))
    # each attribute is 5 values (its mapping, two names, two values): the 50-value budget runs out
    # on the 10th attribute, line 12
    assert_problem(text, 12, "", "too many values to be a catalogue")


def test_huge_number_is_a_problem_not_a_crash():
    text = VALID.replace("    applicants_per_year: 240", "    applicants_per_year: " + "9" * 5000)
    assert_problem(text, line_of(text, "applicants_per_year"), "jobs[0].applicants_per_year", "cannot read")


def test_non_utf8_bytes_name_the_line():
    data = VALID.encode().replace(b"Invented Press", b"Invent\xe9 Press")
    assert_problem(data, line_of(VALID, "Invented Press"), "", "not UTF-8")


def test_utf8_with_bom_is_fine():
    assert parse_catalogue(b"\xef\xbb\xbf" + VALID.encode(), NAME).jobs[0].key == "control-room-operator"


def test_file_too_large_is_refused_before_reading(tmp_path):
    big = tmp_path / "big.yaml"
    with open(big, "wb") as fh:  # sparse: no disk space used, but stat says > cap
        fh.truncate(cio.MAX_BYTES + 1)
    with pytest.raises(CatalogueError) as info:
        load_catalogue(big)
    assert f"{big}: the file is too large to be a catalogue" in str(info.value)


def test_oversized_data_is_refused_before_parsing(monkeypatch):
    monkeypatch.setattr(cio, "MAX_BYTES", 100)
    assert_problem(VALID.encode(), None, "", "too large to be a catalogue")


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(CatalogueError, match="no such file"):
        load_catalogue(tmp_path / "nope.yaml")
    with pytest.raises(CatalogueError, match="is a directory"):
        load_catalogue(tmp_path)


# ---------------------------------------------------------------------------
# Several files as one import
# ---------------------------------------------------------------------------


def test_files_may_use_attributes_declared_in_each_other():
    a = "format: 1\nattributes: [{key: shared, name: Shared}]\n"
    b = "format: 1\njobs: [{key: j, title: J, requirements: [{attribute: shared}]}]\n"
    cats = cio.parse_catalogues([(a, "a.yaml"), (b, "b.yaml")])
    merged = cio.merge_catalogues(cats)
    assert [x.key for x in merged.attributes] == ["shared"] and merged.jobs[0].key == "j"


def test_same_key_in_two_files_is_refused():
    b = "format: 1\njobs: [{key: control-room-operator, title: J, requirements: [{attribute: checking}]}]\n"
    with pytest.raises(CatalogueError) as info:
        cio.parse_catalogues([(VALID, "a.yaml"), (b, "b.yaml")])
    assert str(info.value.problems[0]).startswith(
        f"b.yaml:2: jobs[0].key: job key 'control-room-operator' is also in a.yaml:{line_of(VALID, '- key: control-room')}"
    )


def test_problems_of_every_file_are_reported():
    with pytest.raises(CatalogueError) as info:
        cio.parse_catalogues([("format: 3\n", "a.yaml"), ("format: 1\nfoo: 1\n", "b.yaml")])
    assert [p.file for p in info.value.problems] == ["a.yaml", "b.yaml"]


# ---------------------------------------------------------------------------
# Writing
# ---------------------------------------------------------------------------


def test_round_trip_of_the_full_example_is_identical():
    cat = parse_catalogue(VALID, NAME)
    text = dump_catalogue(cat)
    again = parse_catalogue(text, "exported.yaml")
    assert again == cat
    assert dump_catalogue(again) == text  # stable: a second export is byte-identical


def test_dump_leaves_out_absent_fields_and_writes_iso_dates():
    text = dump_catalogue(parse_catalogue(VALID, NAME))
    assert "row_version" not in text and "null" not in text and "[]" not in text
    assert "date: 2026-09-14" in text
    # fields come in the order of the format reference: key, then title, ...
    assert text.index("- key: plant-mech-2\n  title: Plant mechanics, form 2\n") > 0


def test_text_with_tabs_line_breaks_quotes_and_unicode_survives():
    note = "Line one\n\tindented 'quoted' \"double\" # not a comment\nÜmlaut – ok: yes\n"
    cat = parse_catalogue(VALID, NAME)
    cat.instruments[0].reviews[0].note = note
    cat.instruments[0].title = " leading space and trailing "
    cat.instruments[0].publisher = "yes"  # would be a boolean if written plain
    cat.instruments[0].edition = "2026-01-01"  # would be a date if written plain
    again = parse_catalogue(dump_catalogue(cat), NAME)
    assert again == cat


def test_write_is_atomic_and_leaves_no_temporary_files(tmp_path):
    folder = tmp_path / "out"
    folder.mkdir()
    target = folder / "out.yaml"
    target.write_text("old contents\n")
    cat = parse_catalogue(VALID, NAME)
    write_catalogue(cat, target)
    assert load_catalogue(target) == cat
    bad = parse_catalogue(VALID, NAME)
    bad.instruments[0].minutes = float("inf")  # cannot be written: nothing may change
    before = target.read_bytes()
    with pytest.raises(ValueError):
        write_catalogue(bad, target)
    assert target.read_bytes() == before
    assert sorted(os.listdir(folder)) == ["out.yaml"]


def test_windows_line_endings_keep_line_numbers():
    text = VALID.replace("        value: 0.89", "        value: 1.89")
    crlf = text.replace("\n", "\r\n").encode("utf-8")
    assert_problem(crlf, line_of(text, "value: 1.89"), "instruments[0].reliability[0].value", "less than 1")
    assert parse_catalogue(VALID.replace("\n", "\r\n"), NAME) == parse_catalogue(VALID, NAME)
