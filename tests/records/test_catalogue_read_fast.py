"""The faster catalogue reader reads exactly what the reader before it read.

Two things were sped up in vetting.records.catalogue: the loop that turns PyYAML's events into
the node tree (`_read_tree`), and the checking of plain text and number fields (`_fast_value`,
an inlined common case of `_Checker.field_value`). Both must be invisible: the same tree for
every file, the same values, and for bad input the same `FILE:LINE: path: rule` problems in the
same order. The old tree builder is kept unchanged in tests/records/_reference_read.py; the
general field path is still in the module (switched on for every field with `_FAST_PATH =
False`). Inputs: the demo catalogue, seeded synthetic catalogues, hand-written hostile files,
and mutated catalogues (hypothesis) built with the fuzz tests' own strategies. Numbers follow
YAML 1.1's int and float types (yaml.org/type/int.html, yaml.org/type/float.html: 0x, 0o,
leading-zero octal, sexagesimal 1:30, underscores), which the fast path must leave to PyYAML.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.records._reference_read import _read_tree as reference_read_tree
from tests.records.test_fuzz_catalogue import COMMON, catalogues, mutated_text
from vetting.records import catalogue as cio
from vetting.records.errors import CatalogueError
from vetting.records.synthetic import generate_catalogue

REPO = Path(__file__).resolve().parents[2]
NAME = "fast/cat.yaml"


def _shape(node):
    if node is None:
        return None
    if node.kind == "scalar":
        return ("scalar", node.tag, node.value, node.line)
    if node.kind == "seq":
        return ("seq", node.line, [_shape(x) for x in node.items])
    return ("map", node.line, [(name, line, _shape(value)) for name, line, value in node.items])


def _tree_outcome(reader, text: str):
    try:
        return ("tree", _shape(reader(text, NAME)))
    except CatalogueError as exc:
        return ("refused", [str(p) for p in exc.problems], exc.truncated)


def _same_tree(text: str) -> None:
    assert _tree_outcome(cio._read_tree, text) == _tree_outcome(reference_read_tree, text)


def _parse_outcome(files, fast: bool):
    """Parse `files` ([(data, name)]) with the new reader (fast=True: the inlined field path and
    checking each record as it is read) or the old way (the general path, whole tree)."""
    old = cio._FAST_PATH, cio._CHECK_WHILE_READING
    cio._FAST_PATH = cio._CHECK_WHILE_READING = fast
    try:
        return ("read", cio.parse_catalogues(files))
    except CatalogueError as exc:
        return ("refused", [str(p) for p in exc.problems], exc.truncated)
    finally:
        cio._FAST_PATH, cio._CHECK_WHILE_READING = old


def _same_parse(data, *more) -> tuple:
    files = [(data, NAME), *((x, f"more-{i}.yaml") for i, x in enumerate(more))]
    fast = _parse_outcome(files, True)
    assert fast == _parse_outcome(files, False)
    if fast[0] == "read" and not more:
        fast = ("read", fast[1][0])
    return fast


def test_demo_and_synthetic_catalogues_read_the_same():
    texts = [(REPO / "catalogues" / "demo.yaml").read_text(encoding="utf-8")]
    texts += [cio.dump_catalogue(generate_catalogue(n, seed=s)) for n, s in ((0, 1), (5, 2), (120, 33))]
    for text in texts:
        _same_tree(text)
        assert _same_parse(text)[0] == "read"


HOSTILE_FILES = [
    "",
    "---\n",
    "\ufeffformat: 1\n",
    "format: 1\r\ninstruments: []\r\n",
    "format: 1\nx: &a 1\ny: *a\n",
    "format: 1\nx: *a\n",
    "format: 1\nx: &a [1, 2]\n",
    "format: 1\n<<: {a: 1}\n",
    "format: 1\nx: !!binary aGk=\n",
    "format: 1\nx: !!python/object:os.system [1]\n",
    "format: 1\nx: !!set {a}\n",
    "format: 1\nx: !!str 5\n",
    "format: 1\nx: !custom 5\n",
    "format: 1\n---\nformat: 1\n",
    "format: 1\n? [a, b]\n: 1\n",
    "format: 1\n? {a: 1}\n: 1\n",
    "format: 1\n~: 1\n",
    "format: 1\n: 1\n",
    "format: 1\nx: " + "y" * (cio.MAX_SCALAR_CHARS + 1) + "\n",
    "format: 1\nx: " + "[" * 25 + "]" * 25 + "\n",
    "format: 1\nx: " + "[" * 2000 + "]" * 2000 + "\n",
    "format: 1\nx: [1, 2\n",
    "format: 1\n\tx: 1\n",
    "format: 1\nx: 'unterminated\n",
    "format: 1\nx: \x07\n",
    "- 1\n- 2\n",
    "just text\n",
    "format: 1\nformat: 1\nformat: 2\n",
    "format: 1\ninstruments:\n  - key: a\n    key: b\n",
]


@pytest.mark.parametrize("text", HOSTILE_FILES, ids=range(len(HOSTILE_FILES)))
def test_hostile_files_are_refused_or_read_the_same(text):
    _same_tree(text)
    _same_parse(text)


def test_too_many_values_is_refused_at_the_same_value(monkeypatch):
    text = "format: 1\nx: [" + ", ".join(["1"] * 50) + "]\n"
    monkeypatch.setattr(cio, "MAX_NODES", 40)
    monkeypatch.setattr("tests.records._reference_read.MAX_NODES", 40)
    outcome = _tree_outcome(cio._read_tree, text)
    assert outcome[0] == "refused" and "too many values" in outcome[1][0]
    assert outcome == _tree_outcome(reference_read_tree, text)


# Numbers in every YAML 1.1 spelling, in fields of each kind (yaml.org/type/int.html and
# yaml.org/type/float.html): the fast path takes plain decimals only.
NUMBERS = [
    "0", "-0", "+0", "7", "+7", "-7", "007", "0o17", "0x1F", "0b101", "1_000", "1:30", "190:20:30", "12345678901234567890",
    "9" * 40, "0.5", "-0.0", "+1.5", ".5", "5.", "1e3", "1.0e+3", "1.5E-3", "1.0e3", "6.8523015e+5", "685.230_15e+03",
    "-.inf", ".NaN", ".inf", "yes", "no", "true", "~", "null", "''", "'5'", '"5.0"', "2026-01-01", "[5]", "{a: 5}",
]


@pytest.mark.parametrize("number", NUMBERS)
def test_numbers_in_any_yaml_spelling_read_the_same(number):
    base = (REPO / "catalogues" / "demo.yaml").read_text(encoding="utf-8")
    assert "\n    minutes: " in base
    for field in ("minutes", "year", "n", "importance", "edition", "key", "currency", "kind", "value", "r"):
        lines = base.splitlines(keepends=True)
        for i, line in enumerate(lines):
            stripped = line.lstrip(" -")
            if stripped.startswith(field + ": "):
                lines[i] = line[: len(line) - len(stripped)] + f"{field}: {number}\n"
                break
        _same_parse("".join(lines))


def test_many_problems_are_listed_and_cut_off_the_same_way():
    cat = cio.dump_catalogue(generate_catalogue(40, seed=4))
    # break every minutes and every reliability value: far more than MAX_PROBLEMS problems
    text = "\n".join(
        line.replace("minutes: ", "minutes: -").replace("value: 0.", "value: 1.") for line in cat.splitlines()
    )
    outcome = _same_parse(text)
    assert outcome[0] == "refused" and outcome[2] is True and len(outcome[1]) == cio.MAX_PROBLEMS


@settings(max_examples=150, **COMMON)
@given(mutated_text())
def test_mutated_catalogues_read_the_same(text):
    _same_tree(text)
    _same_parse(text)


@settings(max_examples=40, **COMMON)
@given(mutated_text(), mutated_text())
def test_several_mutated_files_read_the_same(first, second):
    _same_parse(first, second)


def test_several_files_with_many_problems_are_cut_off_the_same_way():
    good = cio.dump_catalogue(generate_catalogue(30, seed=6))
    bad = good.replace("minutes: ", "minutes: -").replace("\n    title:", "\n    titel:")
    outcome = _same_parse(bad, bad.replace("format: 1", "format: 1\nformat: 1"), good, "format: 2\n")
    assert outcome[0] == "refused" and outcome[2] is True


@settings(max_examples=60, **COMMON)
@given(st.data())
def test_mutated_bytes_read_the_same(data):
    raw = bytearray(cio.dump_catalogue(data.draw(catalogues(max_instruments=1, max_jobs=1))).encode())
    for _ in range(data.draw(st.integers(1, 6))):
        pos = data.draw(st.integers(0, len(raw) - 1))
        raw[pos] = data.draw(st.integers(0, 255))
    _same_parse(bytes(raw))
    try:
        text = bytes(raw).decode("utf-8")
    except UnicodeDecodeError:
        return
    _same_tree(text)


@pytest.mark.parametrize("empty", ["~", "null", "Null", ""])
@pytest.mark.parametrize("field", ["year", "n", "importance", "reading_grade", "publisher"])
def test_an_optional_field_given_as_null_or_empty_is_not_given(field, empty):
    # docs/catalogue-format.md, General rules: "Absent, empty (`field:`) and `null` mean the
    # same: the field is not given." (Whole-number and number fields used to crash here.)
    base = (REPO / "catalogues" / "demo.yaml").read_text(encoding="utf-8")
    lines = base.splitlines(keepends=True)
    for i, line in enumerate(lines):
        stripped = line.lstrip(" -")
        if stripped.startswith(field + ": "):
            prefix = line[: len(line) - len(stripped)]
            given = prefix + f"{field}: {empty}\n".replace(": \n", ":\n")
            absent = "" if prefix.strip() == "" else None
            break
    assert absent is not None, "pick a field that is not the first of its list item"
    with_null = "".join(lines[:i] + [given] + lines[i + 1:])
    without = "".join(lines[:i] + lines[i + 1:])
    assert _same_parse(with_null) == _same_parse(without)
    assert _same_parse(with_null)[0] == "read"


@pytest.mark.parametrize("field", ["minutes", "n", "year", "importance", "value"])
@pytest.mark.parametrize("digits", [309, 400, 4000])
def test_a_whole_number_beyond_any_float_is_a_problem_not_a_crash(field, digits):
    # A double holds at most about 1.8e308 (IEEE 754-2008, binary64); a longer whole number in
    # any number field used to crash the range check ("int too large to convert to float").
    base = (REPO / "catalogues" / "demo.yaml").read_text(encoding="utf-8")
    lines = base.splitlines(keepends=True)
    i = next(i for i, line in enumerate(lines) if line.lstrip(" -").startswith(field + ": "))
    stripped = lines[i].lstrip(" -")
    lines[i] = lines[i][: len(lines[i]) - len(stripped)] + f"{field}: " + "9" * digits + "\n"
    outcome = _same_parse("".join(lines))
    assert outcome[0] == "refused"
    assert len(outcome[1]) == 1 and f":{i + 1}: " in outcome[1][0] and "as a number" in outcome[1][0], outcome
