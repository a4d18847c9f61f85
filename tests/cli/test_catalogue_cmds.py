"""`vetting import`, `vetting export` and `vetting demo` (issue 2 items 5-7, "Bad input").

Checked against the issue-2 contract: bad input gives `FILE:LINE: path.to.field: message` on
stderr, exit status 2, and the database exactly as it was (compared by a full export and the
audit-trail length before and after); export after import re-imports to identical records.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from vetting.cli.main import OpenInterface, run
from vetting.records import catalogue as cio
from vetting.records.catalogue import dump_catalogue, load_catalogue, parse_catalogue
from vetting.records.location import default_url, demo_url
from vetting.records.store import Store

REPO = Path(__file__).resolve().parents[2]

GOOD = """\
format: 1
attributes:
  - {key: numeric, name: Numerical reasoning, kind: ability}
  - {key: care, name: Care with detail, kind: skill}
instruments:
  - key: sums-a
    title: Sums A
    minutes: 20
    measures: [{attribute: numeric}]
    reliability: [{type: internal, value: 0.85, n: 300}]
    norms:
      - key: local-2020
        group: applicants
        n: 400
        year: 2020
        scope: local
        mean: 20
        sd: 5
        table: [{percentile: 25, raw: 16}, {percentile: 75, raw: 24}]
jobs:
  - key: clerk
    title: Clerk
    applicants_per_year: 100
    hires_per_year: 10
    requirements: [{attribute: numeric, importance: 4, critical: true}, {attribute: care}]
"""


@pytest.fixture(params=["sqlite", "postgresql"])
def db(request, tmp_path):
    """A fresh SQLite file, and a fresh PostgreSQL database when a server is available
    (VETTING_TEST_PG_URL; skipped loudly otherwise, see tests/conftest.py)."""
    if request.param == "sqlite":
        return f"sqlite:///{tmp_path / 'cli.db'}"
    return request.getfixturevalue("pg_url")


def write(tmp_path: Path, name: str, text: str | bytes) -> Path:
    path = tmp_path / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


def snapshot(url: str) -> tuple[str, int]:
    """Everything in the database as catalogue text, plus the number of audit events."""
    with Store.open(url) as store:
        return dump_catalogue(store.export_catalogue()), len(store.audit_events())


def test_import_prints_counts_and_stores_records(tmp_path, db, capsys):
    path = write(tmp_path, "good.yaml", GOOD)
    assert run(["--db", db, "import", str(path)]) == 0
    out = capsys.readouterr().out
    assert "1 instrument, 1 job and 2 attributes from 1 file" in out
    with Store.open(db) as store:
        assert store.instrument("sums-a").norms[0].table[1].raw == 24
        assert store.job("clerk").requirements[1].importance == 3


def test_import_json(tmp_path, db, capsys):
    path = write(tmp_path, "good.yaml", GOOD)
    assert run(["--db", db, "import", "--json", str(path)]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["instruments"] == 1 and data["jobs"] == 1 and data["files"] == [str(path)]


BAD_CASES = {
    "yaml syntax": (GOOD.replace("    title: Sums A", "   title: Sums A"), 7, "", "YAML syntax error"),
    "missing format": (GOOD.replace("format: 1\n", ""), 1, "format", "must be 'format: 1'"),
    "unknown format": (GOOD.replace("format: 1", "format: 7"), 1, "format", "unsupported catalogue format"),
    "unknown key": (GOOD.replace("    minutes: 20", "    minutess: 20"), 8, "instruments[0].minutess",
                    "did you mean 'minutes'?"),
    "missing required": (GOOD.replace("    title: Clerk\n", ""), 21, "jobs[0].title", "is required"),
    "wrong type": (GOOD.replace("    minutes: 20", "    minutes: true"), 8, "instruments[0].minutes",
                   "got a yes/no value"),
    "coefficient out of range": (GOOD.replace("value: 0.85", "value: 1.85"), 10,
                                 "instruments[0].reliability[0].value", "less than 1"),
    "hires above applicants": (GOOD.replace("hires_per_year: 10", "hires_per_year: 101"), 24,
                               "jobs[0].hires_per_year", "must not exceed applicants_per_year (100)"),
    "duplicate key": (GOOD.replace("  - {key: care,", "  - {key: numeric,"), 4, "attributes[1].key",
                      "duplicate attribute key 'numeric'"),
    "undeclared attribute": (GOOD.replace("{attribute: care}", "{attribute: cares}"), 25,
                             "jobs[0].requirements[1].attribute", "did you mean 'care'?"),
    "non-monotone table": (GOOD.replace("{percentile: 75, raw: 24}", "{percentile: 75, raw: 12}"), 19,
                           "instruments[0].norms[0].table[1].raw", "raw scores must increase"),
    "bad date": (GOOD.replace("    minutes: 20", "    minutes: 20\n    reviews: [{date: 2026-13-01, by: x, note: y}]"),
                 9, "instruments[0].reviews[0].date", "not a valid date"),
    "string is not a list": (GOOD.replace("    minutes: 20", "    minutes: 20\n    languages: en"), 9,
                             "instruments[0].languages", "must be a list"),
    "sd zero": (GOOD.replace("        sd: 5", "        sd: 0"), 18, "instruments[0].norms[0].sd", "greater than 0"),
    "importance out of range": (GOOD.replace("importance: 4", "importance: 9"), 25,
                                "jobs[0].requirements[0].importance", "from 1 to 5"),
    "duplicate YAML key": (GOOD.replace("    minutes: 20", "    minutes: 20\n    minutes: 25"), 9,
                           "instruments[0].minutes", "given twice"),
    "weights all zero": (GOOD + "    policy: {weights: {validity: 0}}\n", 26, "jobs[0].policy.weights",
                         "must not all be 0"),
    "huge scalar": ("format: 1\nattributes: [{key: a, name: '" + "x" * (cio.MAX_SCALAR_CHARS + 5) + "'}]\n", 2, "",
                    "a value is too long"),
    "alias bomb": ("format: 1\na: &a [x, x, x, x, x, x, x, x, x]\nb: &b [*a, *a, *a, *a, *a, *a, *a, *a, *a]\n"
                   "c: [*b, *b, *b, *b, *b, *b, *b, *b, *b]\n", 2, "", "anchors"),
    "deep nesting": ("format: 1\nx: " + "[" * 200 + "]" * 200 + "\n", 2, "", "nested too deeply"),
    "non-utf8": (GOOD.encode().replace(b"Clerk", b"Cl\xffrk"), 22, "", "not UTF-8"),
}


@pytest.mark.parametrize("case", sorted(BAD_CASES))
def test_bad_file_is_refused_with_location_and_database_unchanged(tmp_path, db, capsys, case):
    text, line, path, fragment = BAD_CASES[case]
    seed = write(tmp_path, "seed.yaml", "format: 1\nattributes: [{key: existing, name: Existing}]\n")
    assert run(["--db", db, "import", str(seed)]) == 0
    before = snapshot(db)
    capsys.readouterr()
    bad = write(tmp_path, "bad.yaml", text)
    assert run(["--db", db, "import", "--replace", str(bad)]) == 2
    err = capsys.readouterr().err
    expected = f"{bad}:{line}: {path}: " if path else f"{bad}:{line}: "
    lines = [x for x in err.splitlines() if x.startswith(expected)]
    assert any(fragment in x for x in lines), err
    assert "nothing was written" in err
    assert snapshot(db) == before


def test_too_large_file_is_refused_before_reading(tmp_path, db, capsys):
    big = tmp_path / "big.yaml"
    with open(big, "wb") as fh:
        fh.truncate(cio.MAX_BYTES + 1)  # sparse file
    before = snapshot(db)
    assert run(["--db", db, "import", str(big)]) == 2
    assert f"{big}: the file is too large to be a catalogue" in capsys.readouterr().err
    assert snapshot(db) == before


def test_one_bad_file_means_no_file_is_imported(tmp_path, db, capsys):
    good = write(tmp_path, "good.yaml", GOOD)
    bad = write(tmp_path, "bad.yaml", "format: 1\nattributes: [{key: x, name: X, kind: mood}]\n")
    before = snapshot(db)
    assert run(["--db", db, "import", str(good), str(bad)]) == 2
    assert f"{bad}:2: attributes[0].kind: 'mood' is not allowed" in capsys.readouterr().err
    assert snapshot(db) == before


def test_files_of_one_import_share_attributes(tmp_path, db):
    attrs = write(tmp_path, "attrs.yaml", "format: 1\nattributes: [{key: shared, name: Shared}]\n")
    jobs = write(tmp_path, "jobs.yaml",
                 "format: 1\njobs: [{key: j1, title: J1, requirements: [{attribute: shared}]}]\n")
    assert run(["--db", db, "import", str(jobs), str(attrs)]) == 0
    with Store.open(db) as store:
        assert store.job("j1").requirements[0].attribute == "shared"
    later = write(tmp_path, "later.yaml",
                  "format: 1\njobs: [{key: j2, title: J2, requirements: [{attribute: shared}]}]\n")
    assert run(["--db", db, "import", str(later)]) == 0  # known from the database now


def test_existing_keys_need_replace_and_replacing_is_audited(tmp_path, db, capsys):
    path = write(tmp_path, "good.yaml", GOOD)
    assert run(["--db", db, "import", str(path)]) == 0
    before = snapshot(db)
    capsys.readouterr()
    assert run(["--db", db, "import", str(path)]) == 2
    err = capsys.readouterr().err
    assert "sums-a" in err and "clerk" in err
    assert snapshot(db) == before
    changed = write(tmp_path, "changed.yaml", GOOD.replace("title: Sums A", "title: Sums A, second edition"))
    assert run(["--db", db, "import", "--replace", str(changed)]) == 0
    with Store.open(db) as store:
        assert store.instrument("sums-a").title == "Sums A, second edition"
        events = store.audit_events(instrument="sums-a")
    assert any(e.before and "Sums A" in json.dumps(e.before) for e in events)


def test_missing_file_is_bad_input(tmp_path, db, capsys):
    assert run(["--db", db, "import", str(tmp_path / "nope.yaml")]) == 2
    assert "nope.yaml: no such file" in capsys.readouterr().err


# ---------------------------------------------------------------------------
# export
# ---------------------------------------------------------------------------


def test_export_round_trip(tmp_path, db, capsys):
    src = write(tmp_path, "good.yaml", GOOD)
    assert run(["--db", db, "import", str(src)]) == 0
    out = tmp_path / "exported.yaml"
    assert run(["--db", db, "export", str(out)]) == 0
    assert "Wrote 1 instrument, 1 job and 2 attributes" in capsys.readouterr().out
    assert load_catalogue(out) == parse_catalogue(GOOD, "good.yaml")
    other = f"sqlite:///{tmp_path / 'other.db'}"
    assert run(["--db", other, "import", str(out)]) == 0
    out2 = tmp_path / "exported2.yaml"
    assert run(["--db", other, "export", str(out2)]) == 0
    assert out2.read_bytes() == out.read_bytes()


def test_export_selected_records(tmp_path, db, capsys):
    src = write(tmp_path, "good.yaml", GOOD)
    assert run(["--db", db, "import", str(src)]) == 0
    out = tmp_path / "job.yaml"
    capsys.readouterr()
    assert run(["--db", db, "export", str(out), "--job", "clerk", "--json"]) == 0
    assert json.loads(capsys.readouterr().out) == {"file": str(out), "instruments": 0, "jobs": 1, "attributes": 2}
    cat = load_catalogue(out)
    assert [j.key for j in cat.jobs] == ["clerk"] and cat.instruments == []
    assert run(["--db", db, "export", "-", "--instrument", "sums-a"]) == 0
    cat = parse_catalogue(capsys.readouterr().out, "stdout")
    assert [i.key for i in cat.instruments] == ["sums-a"] and [a.key for a in cat.attributes] == ["numeric"]


def test_export_unknown_key_or_unwritable_place(tmp_path, db, capsys):
    assert run(["--db", db, "export", str(tmp_path / "x.yaml"), "--job", "nobody"]) == 2
    assert "nobody" in capsys.readouterr().err
    assert run(["--db", db, "export", str(tmp_path / "no-dir" / "x.yaml")]) == 2
    assert "cannot write" in capsys.readouterr().err
    assert not (tmp_path / "x.yaml").exists()


# ---------------------------------------------------------------------------
# demo
# ---------------------------------------------------------------------------


def test_demo_loads_into_its_own_database(capsys):
    main_file = Path(default_url()[len("sqlite:///"):])
    assert run(["demo", "--no-open"]) == 0
    out = capsys.readouterr().out
    assert f"vetting --db {demo_url()}" in out
    assert not main_file.exists(), "the demo must never touch the user's main database"
    shipped = parse_catalogue(cio.read_catalogue_file(REPO / "vetting" / "records" / "data" / "demo.yaml"), "demo")
    with Store.open(demo_url()) as store:
        assert sorted(store.instrument_keys()) == sorted(i.key for i in shipped.instruments)
        exported = store.export_catalogue()
    assert parse_catalogue(dump_catalogue(exported), "x") == exported
    assert {i.key: i for i in exported.instruments} == {i.key: i for i in shipped.instruments}
    assert {j.key: j for j in exported.jobs} == {j.key: j for j in shipped.jobs}
    # rebuilt fresh every time: a second run neither conflicts nor accumulates
    with Store.open(demo_url()) as store:
        store.delete_instrument(shipped.instruments[0].key)
    assert run(["demo", "--no-open", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["url"] == demo_url() and data["instruments"] == len(shipped.instruments)
    with Store.open(demo_url()) as store:
        assert len(store.instrument_keys()) == len(shipped.instruments)


def test_demo_opens_the_interface_on_the_demo_database():
    result = run(["demo"])
    assert isinstance(result, OpenInterface) and result.url == demo_url()


def test_demo_round_trips_through_export_and_reimport(tmp_path, db):
    assert run(["demo", "--no-open"]) == 0
    first = tmp_path / "demo-export.yaml"
    assert run(["--db", demo_url(), "export", str(first)]) == 0
    assert run(["--db", db, "import", str(first)]) == 0
    second = tmp_path / "demo-export-2.yaml"
    assert run(["--db", db, "export", str(second)]) == 0
    assert first.read_bytes() == second.read_bytes()
