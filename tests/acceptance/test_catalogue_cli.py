"""Issue 2 from the outside: the catalogue commands, global options, exit statuses and the
`FILE:LINE: path.to.field: ...` messages for each bad-input class, run as a user would run them.

Sources: the binding names are those of catalogue format 1 as written in issue 2; exit statuses
0/2/1 and stderr messages are the project's CLI contract (common practice for Unix tools,
no published source)."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
import yaml

from tests.acceptance.conftest import DEMO, run_cli, run_inproc, sqlite_url

# Every field of the format-1 example in issue 2, with invented values.
FULL = """\
format: 1
attributes:
  - key: gear-sense
    name: Gear sense
    kind: ability
  - key: calm-under-load
    name: Calm under load
    kind: personality
instruments:
  - key: tinker-lever-4
    title: "Tinker Lever Reasoning, form 4"
    publisher: "Brackenridge Testing Cooperative (invented)"
    edition: "4th"
    year: 2019
    measures:
      - attribute: gear-sense
        fit: primary
      - attribute: calm-under-load
        fit: secondary
    mode: [online-supervised, paper]
    minutes: 30
    reading_grade: 8.0
    cost_per_applicant: 18.0
    currency: USD
    user_qualification: trained
    accommodations: [extended-time, large-print]
    languages: [en, fr]
    reliability:
      - type: internal
        value: 0.89
        n: 600
        sample: "applicants, invented"
        source: "manual table 3 (invented)"
      - type: retest
        value: 0.82
        n: 120
        interval_days: 21
        sample: "volunteers, invented"
        source: "manual table 4 (invented)"
    validity:
      - criterion: job-performance
        r: 0.34
        n: 240
        design: predictive
        corrected: none
        job_family: "plant operation"
        sample: "operators, invented"
        source: "study A (invented)"
      - criterion: turnover
        r: -0.12
        n: 180
        design: concurrent
        corrected: criterion-unreliability
        job_family: "plant operation"
        sample: "operators, invented"
        source: "study B (invented)"
    norms:
      - key: national-2019
        group: "general working population (invented)"
        n: 1500
        year: 2019
        scope: national
        occupation: "operators"
        mean: 31.0
        sd: 7.0
        table:
          - {percentile: 10, raw: 22}
          - {percentile: 50, raw: 31}
          - {percentile: 90, raw: 40}
    subgroup_differences:
      - groups: "group F vs group R"
        d: 0.55
        n: 900
        source: "manual table 9 (invented)"
    reviews:
      - date: 2026-09-14
        by: "A. Reviewer (invented)"
        source: "internal review"
        stance: supports
        note: "clear manual; <b>markup</b> & ampersands kept as text"
    sample_copy:
      requested: 2026-09-01
      received: 2026-09-08
      checked_by: "B. Checker (invented)"
      checks:
        - item: instructions-clear
          result: pass
          note: "plain wording"
        - item: items-job-related
          result: unclear
          note: "two items ambiguous"
jobs:
  - key: lock-keeper
    title: "Canal lock keeper (invented)"
    analysis_source: "task inventory, 2026-08, invented"
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
      - attribute: gear-sense
        importance: 5
        critical: true
      - attribute: calm-under-load
        importance: 3
        critical: false
    policy:
      min_reliability: 0.80
      max_norm_age_years: 15
      impact_ratio_floor: 0.80
      weights: {coverage: 30, validity: 30, reliability: 15, norms: 10, fairness: 10, practicality: 5}
"""


def _records(text: str) -> dict:
    """The records in an exported catalogue, keyed for comparison (order-free lists of records)."""
    data = yaml.safe_load(text)
    assert data["format"] == 1
    return {
        "attributes": {a["key"]: a for a in data.get("attributes") or []},
        "instruments": {i["key"]: i for i in data.get("instruments") or []},
        "jobs": {j["key"]: j for j in data.get("jobs") or []},
    }


def _strip_nones(value):
    if isinstance(value, dict):
        return {k: _strip_nones(v) for k, v in value.items() if v is not None and v != [] and v != {}}
    if isinstance(value, list):
        return [_strip_nones(v) for v in value]
    return value


def test_every_format1_field_round_trips(tmp_path):
    home = tmp_path / "home"
    src = tmp_path / "full.yaml"
    src.write_text(FULL, encoding="utf-8")
    db1 = sqlite_url(tmp_path / "one.sqlite")
    assert run_cli(["import", src], home, db=db1).code == 0
    out1 = tmp_path / "out1.yaml"
    res = run_cli(["export", out1], home, db=db1)
    assert res.code == 0, res.err
    exported = _records(out1.read_text(encoding="utf-8"))

    # Every field written by hand comes back with its value (numbers compared as numbers).
    original = _records(FULL)
    for section in ("attributes", "instruments", "jobs"):
        for key, rec in original[section].items():
            assert key in exported[section], (section, key)
            got = _strip_nones(exported[section][key])
            for field, value in rec.items():
                assert field in got, f"{section}.{key}.{field} lost on export"
                assert json.loads(json.dumps(got[field], default=str)) == pytest.approx(
                    json.loads(json.dumps(value, default=str))
                ) if isinstance(value, (int, float)) else _norm(got[field]) == _norm(value), (section, key, field)

    # Re-import into a fresh database and export again: identical records.
    db2 = sqlite_url(tmp_path / "two.sqlite")
    assert run_cli(["import", out1], home, db=db2).code == 0
    out2 = tmp_path / "out2.yaml"
    assert run_cli(["export", out2], home, db=db2).code == 0
    assert _records(out2.read_text(encoding="utf-8")) == exported


def _norm(value):
    """Order of list items as written; numbers as floats; dates as ISO text."""
    if isinstance(value, dict):
        return {k: _norm(v) for k, v in value.items() if v is not None}
    if isinstance(value, list):
        return [_norm(v) for v in value]
    if isinstance(value, bool):
        return value
    if isinstance(value, (int, float)):
        return float(value)
    return str(value)


def test_demo_round_trip_and_scoped_exports(tmp_path, demo_db, capsys):
    home = tmp_path / "home"
    out = tmp_path / "all.yaml"
    assert run_cli(["export", out], home, db=demo_db).code == 0
    everything = _records(out.read_text(encoding="utf-8"))
    demo = _records(DEMO.read_text(encoding="utf-8"))
    assert set(everything["instruments"]) == set(demo["instruments"])
    assert set(everything["jobs"]) == set(demo["jobs"])

    job_key = sorted(demo["jobs"])[0]
    inst_key = sorted(demo["instruments"])[0]
    job_file = tmp_path / "job.yaml"
    inst_file = tmp_path / "inst.yaml"
    assert run_inproc(["export", "--job", job_key, job_file], capsys, db=demo_db).code == 0
    assert run_inproc(["export", "--instrument", inst_key, inst_file], capsys, db=demo_db).code == 0
    job_only = _records(job_file.read_text(encoding="utf-8"))
    inst_only = _records(inst_file.read_text(encoding="utf-8"))
    assert set(job_only["jobs"]) == {job_key} and not job_only["instruments"]
    assert set(inst_only["instruments"]) == {inst_key} and not inst_only["jobs"]
    assert job_only["jobs"][job_key] == everything["jobs"][job_key]
    assert inst_only["instruments"][inst_key] == everything["instruments"][inst_key]
    # A scoped export is a catalogue on its own: it declares the attributes it uses and imports
    # into an empty database.
    empty = sqlite_url(tmp_path / "empty.sqlite")
    assert run_inproc(["import", job_file, inst_file], capsys, db=empty).code == 0

    # Unknown keys: exit 2, message on stderr.
    res = run_inproc(["export", "--job", "no-such-job", tmp_path / "x.yaml"], capsys, db=demo_db)
    assert res.code == 2 and "no-such-job" in res.err and res.out == ""


def test_list_and_show(tmp_path, demo_db, capsys):
    home = tmp_path / "home"
    demo = _records(DEMO.read_text(encoding="utf-8"))
    res = run_cli(["list", "instruments", "--json"], home, db=demo_db)
    assert res.code == 0
    listed = res.json()
    assert isinstance(listed, list)
    assert {i["key"] for i in listed} == set(demo["instruments"])
    res = run_inproc(["list", "jobs", "--json"], capsys, db=demo_db)
    assert {j["key"] for j in res.json()} == set(demo["jobs"])
    res = run_inproc(["list", "jobs"], capsys, db=demo_db)
    assert res.code == 0 and all(k in res.out for k in demo["jobs"])

    job_key = sorted(demo["jobs"])[0]
    inst_key = sorted(demo["instruments"])[0]
    shown = run_cli(["show", "job", job_key, "--json"], home, db=demo_db).json()
    assert shown["key"] == job_key and shown["title"] == demo["jobs"][job_key]["title"]
    assert [r["attribute"] for r in shown["requirements"]] == [
        r["attribute"] for r in demo["jobs"][job_key]["requirements"]
    ]
    shown = run_inproc(["show", "instrument", inst_key, "--json"], capsys, db=demo_db).json()
    assert shown["key"] == inst_key and shown["title"] == demo["instruments"][inst_key]["title"]
    res = run_inproc(["show", "instrument", inst_key], capsys, db=demo_db)
    assert res.code == 0 and inst_key in res.out
    res = run_inproc(["show", "job", "no-such-job"], capsys, db=demo_db)
    assert res.code == 2 and "no-such-job" in res.err


def test_init_vetting_db_and_default_location(tmp_path):
    home = tmp_path / "home"
    # VETTING_DB selects the database when --db is not given.
    env_db = tmp_path / "from_env.sqlite"
    res = run_cli(["init"], home, VETTING_DB=sqlite_url(env_db))
    assert res.code == 0, res.err
    assert env_db.exists()
    # --db given before the command wins over VETTING_DB.
    flag_db = tmp_path / "from_flag.sqlite"
    res = run_cli(["import", DEMO], home, db=sqlite_url(flag_db), VETTING_DB=sqlite_url(env_db))
    assert res.code == 0, res.err
    res = run_cli(["list", "jobs", "--json"], home, VETTING_DB=sqlite_url(env_db))
    assert res.code == 0 and res.json() == []
    # No --db, no VETTING_DB: a SQLite file under the user's data directory (XDG_DATA_HOME).
    res = run_cli(["init"], home)
    assert res.code == 0, res.err
    data_home = home / ".local" / "share"
    assert any(p.suffix in {".sqlite", ".db", ".sqlite3"} for p in data_home.rglob("*")), list(data_home.rglob("*"))


def test_demo_no_open_uses_its_own_database(tmp_path, capsys):
    home = tmp_path / "home"
    main_db = tmp_path / "main.sqlite"
    res = run_cli(["demo", "--no-open"], home, VETTING_DB=sqlite_url(main_db))
    assert res.code == 0, res.err
    # The demo's own database (under the user's data directory) holds the whole demo.
    demo_files = [p for p in (home / ".local" / "share").rglob("*") if p.is_file() and p.suffix in {".db", ".sqlite"}]
    assert len(demo_files) == 1, demo_files
    listed = run_inproc(["list", "instruments", "--json"], capsys, db=sqlite_url(demo_files[0])).json()
    assert {i["key"] for i in listed} == set(_records(DEMO.read_text(encoding="utf-8"))["instruments"])
    # The user's main database is not touched (not even created with records).
    if main_db.exists():
        res = run_cli(["list", "instruments", "--json"], home, db=sqlite_url(main_db))
        assert res.json() == []


def test_usage_errors_exit_2(tmp_path, capsys):
    res = run_cli(["no-such-command"], tmp_path / "home")
    assert res.code == 2 and res.err.strip() and res.out == ""
    assert run_inproc(["list", "widgets"], capsys).code == 2
    assert run_inproc(["import"], capsys).code == 2


def test_other_failure_exits_1(tmp_path, capsys):
    # A database that cannot be opened (a directory where the file should be) is not bad
    # input in a catalogue: status 1, message on stderr.
    where = tmp_path / "is_a_dir.sqlite"
    where.mkdir()
    res = run_inproc(["list", "jobs"], capsys, db=sqlite_url(where))
    assert res.code == 1 and res.err.strip()


# ---------------------------------------------------------------------------
# Bad input: one small hand-written file per class, each message `FILE:LINE: path: ...`.
# ---------------------------------------------------------------------------

GOOD_INSTRUMENT = """\
  - key: quill-{n}
    title: "Quill test {n}"
    measures:
      - attribute: gear-sense
        fit: primary
    minutes: 20
"""

ATTR = """\
attributes:
  - key: gear-sense
    name: Gear sense
    kind: ability
"""

GOOD_JOB = """\
  - key: ferry-hand-{n}
    title: "Ferry hand {n}"
    requirements:
      - attribute: gear-sense
        importance: 3
        critical: false
"""


def _inst(extra: str = "", n: int = 1) -> str:
    return GOOD_INSTRUMENT.format(n=n) + extra


# (name, file text, line number the message must give, field path fragment, word in the message)
BAD = [
    # An unclosed bracket opened on line 3 is noticed at the end of the file (line 4); either is fair.
    ("yaml-syntax", "format: 1\ninstruments:\n  - key: [unclosed\n", (3, 4), None, "YAML"),
    ("format-missing", ATTR + "instruments:\n" + _inst(), 1, "format", None),
    ("format-unknown", "format: 7\n" + ATTR, "format: 7", "format", None),
    ("unknown-key", "format: 1\n" + ATTR + "instruments:\n" + _inst("    minuets: 3\n"), "minuets: 3", "minuets", None),
    ("unknown-top-key", "format: 1\n" + ATTR + "instrumnets: []\n", "instrumnets: []", "instrumnets", None),
    ("missing-required", "format: 1\n" + ATTR + "instruments:\n  - key: quill-1\n    title: x\n    minutes: 20\n", "- key: quill-1", "measures", None),
    ("wrong-type", "format: 1\n" + ATTR + "instruments:\n" + _inst("    year: last-year\n"), "year: last-year", "year", None),
    ("reliability-range", "format: 1\n" + ATTR + "instruments:\n" + _inst("    reliability:\n      - type: internal\n        value: 1.2\n        n: 100\n"), "value: 1.2", "reliability[0].value", None),
    ("r-range", "format: 1\n" + ATTR + "instruments:\n" + _inst("    validity:\n      - criterion: training\n        r: 1.5\n        n: 50\n        design: predictive\n"), "r: 1.5", "validity[0].r", None),
    ("n-range", "format: 1\n" + ATTR + "instruments:\n" + _inst("    validity:\n      - criterion: training\n        r: 0.3\n        n: 1\n        design: predictive\n"), "n: 1", "validity[0].n", None),
    ("importance-range", "format: 1\n" + ATTR + "jobs:\n  - key: j\n    title: J\n    requirements:\n      - attribute: gear-sense\n        importance: 9\n", "importance: 9", "requirements[0].importance", None),
    ("base-rate-range", "format: 1\n" + ATTR + "jobs:\n" + GOOD_JOB.format(n=1) + "    base_rate: 1.0\n", "base_rate: 1.0", "base_rate", None),
    ("sd-range", "format: 1\n" + ATTR + "instruments:\n" + _inst("    norms:\n      - key: nat\n        group: g\n        n: 100\n        year: 2020\n        scope: national\n        mean: 10\n        sd: 0\n"), "sd: 0", "norms[0].sd", None),
    ("hires-over-applicants", "format: 1\n" + ATTR + "jobs:\n" + GOOD_JOB.format(n=1) + "    applicants_per_year: 10\n    hires_per_year: 20\n", None, "hires_per_year", None),
    ("bad-date", "format: 1\n" + ATTR + "instruments:\n" + _inst("    reviews:\n      - date: 2026-02-30\n        stance: supports\n"), "- date: 2026-02-30", "reviews[0].date", None),
    ("bad-enum", "format: 1\n" + ATTR + "instruments:\n" + _inst("    user_qualification: wizard\n"), "user_qualification: wizard", "user_qualification", "licensed"),
    ("duplicate-key", "format: 1\n" + ATTR + "instruments:\n" + _inst(n=1) + _inst(n=1), "- key: quill-1", "key", "quill-1"),
    ("undeclared-attribute", "format: 1\ninstruments:\n" + _inst(), "- attribute: gear-sense", "measures[0].attribute", "gear-sense"),
    ("non-monotone-table", "format: 1\n" + ATTR + "instruments:\n" + _inst("    norms:\n      - key: nat\n        group: g\n        n: 100\n        year: 2020\n        scope: national\n        mean: 10\n        sd: 2\n        table:\n          - {percentile: 10, raw: 8}\n          - {percentile: 50, raw: 7}\n"), "- {percentile: 50, raw: 7}", "table", None),
]


@pytest.mark.parametrize("name,text,line,field,word", BAD, ids=[b[0] for b in BAD])
def test_bad_input_class(tmp_path, demo_copy, capsys, name, text, line, field, word):
    db, before = demo_copy
    if isinstance(line, str):  # the number of the last line whose stripped text is `line`
        line = (max(i for i, t in enumerate(text.splitlines(), 1) if t.strip() == line),)
    elif isinstance(line, int):
        line = (line,)
    bad = tmp_path / f"{name}.yaml"
    bad.write_text(text, encoding="utf-8")
    res = run_inproc(["import", bad], capsys, db=db)
    assert res.code == 2, (res.code, res.err)
    assert res.out == ""
    lines = [ln for ln in res.err.splitlines() if ln.startswith(str(bad) + ":")]
    assert lines, res.err
    pattern = re.compile(re.escape(str(bad)) + r":(\d+): ([^:]+): .+")
    matches = [pattern.match(ln) for ln in lines]
    assert all(matches), lines
    if field is not None:
        hits = [m for m in matches if field in m.group(2) or field in m.group(0)]
        assert hits, f"no message names {field!r}: {lines}"
        if line is not None:
            assert any(int(m.group(1)) in line for m in hits), (line, lines)
    elif line is not None:
        assert any(int(m.group(1)) in line for m in matches), (line, lines)
    if word is not None:
        assert word in res.err
    # Database unchanged.
    assert _export(db, tmp_path / "after.yaml", capsys) == before


def _export(db: str, path: Path, capsys) -> str:
    res = run_inproc(["export", path], capsys, db=db)
    assert res.code == 0, res.err
    return path.read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def _demo_copy_src(demo_db, tmp_path_factory):
    src = Path(demo_db.removeprefix("sqlite:///"))
    return src


@pytest.fixture
def demo_copy(_demo_copy_src, tmp_path, capsys):
    """A private copy of the demo database and its export before the test."""
    import shutil

    target = tmp_path / "copy.sqlite"
    shutil.copyfile(_demo_copy_src, target)
    db = sqlite_url(target)
    return db, _export(db, tmp_path / "before.yaml", capsys)


def test_alias_bomb_and_oversized_file_refused(tmp_path, demo_copy, capsys):
    db, before = demo_copy
    bomb = tmp_path / "bomb.yaml"
    rows = ['a: &a ["x","x","x","x","x","x","x","x","x"]']
    for i, name in enumerate("bcdefghij"):
        prev = "abcdefghij"[i]
        rows.append(f"{name}: &{name} [*{prev},*{prev},*{prev},*{prev},*{prev},*{prev},*{prev},*{prev},*{prev}]")
    bomb.write_text("format: 1\n" + "\n".join(rows) + "\n", encoding="utf-8")
    res = run_cli(["import", bomb], tmp_path / "home", db=db)
    assert res.code == 2 and str(bomb) in res.err
    big = tmp_path / "big.yaml"
    with big.open("w", encoding="utf-8") as fh:
        fh.write("format: 1\nattributes:\n")
        chunk = "  - {key: k, name: '" + "x" * 1000 + "', kind: ability}\n"
        for _ in range(70_000):  # about 70 MB: larger than any real catalogue (docs: 64 MB cap)
            fh.write(chunk)
    res = run_cli(["import", big], tmp_path / "home", db=db)
    big.unlink()
    assert res.code == 2 and str(big) in res.err
    assert _export(db, tmp_path / "after.yaml", capsys) == before


def test_all_problems_reported_at_once_and_nothing_written(tmp_path, demo_copy):
    db, before = demo_copy
    # A good new instrument and several problems in one file: none of it lands.
    text = "format: 1\n" + ATTR + "instruments:\n" + _inst(n=5) + _inst("    minutes_x: 1\n", n=6) + (
        "jobs:\n  - key: j\n    title: J\n    requirements:\n      - attribute: gear-sense\n        importance: 0\n"
    )
    bad = tmp_path / "many.yaml"
    bad.write_text(text, encoding="utf-8")
    res = run_cli(["import", bad], tmp_path / "home", db=db)
    assert res.code == 2
    assert "minutes_x" in res.err and "importance" in res.err
    after = tmp_path / "after.yaml"
    assert run_cli(["export", after], tmp_path / "home", db=db).code == 0
    assert after.read_text(encoding="utf-8") == before


def test_reimport_refused_without_replace(tmp_path, capsys):
    db = sqlite_url(tmp_path / "r.sqlite")
    first = tmp_path / "first.yaml"
    first.write_text("format: 1\n" + ATTR + "instruments:\n" + _inst(n=1), encoding="utf-8")
    assert run_inproc(["import", first], capsys, db=db).code == 0
    before = _export(db, tmp_path / "b.yaml", capsys)
    changed = tmp_path / "changed.yaml"
    changed.write_text(
        "format: 1\ninstruments:\n" + _inst(n=1).replace("minutes: 20", "minutes: 25"), encoding="utf-8"
    )
    res = run_cli(["import", changed], tmp_path / "home", db=db)
    assert res.code == 2 and "quill-1" in res.err and "--replace" in res.err
    assert _export(db, tmp_path / "a.yaml", capsys) == before
    res = run_cli(["import", "--replace", changed], tmp_path / "home", db=db)
    assert res.code == 0, res.err
    after = _records(_export(db, tmp_path / "c.yaml", capsys))
    assert after["instruments"]["quill-1"]["minutes"] == 25
    # The replacement is in the audit trail, with before and after values.
    events = run_inproc(["log", "--instrument", "quill-1", "--json"], capsys, db=db).json()
    assert len(events) >= 2
    last = events[-1] if events[-1]["action"] != "create" else events[0]
    assert last["action"] != "create"
    assert last["before"]["minutes"] == 20 and last["after"]["minutes"] == 25


def test_several_files_are_one_transaction(tmp_path, capsys):
    db = sqlite_url(tmp_path / "multi.sqlite")
    first = tmp_path / "first.yaml"
    second = tmp_path / "second.yaml"
    first.write_text("format: 1\n" + ATTR + "instruments:\n" + _inst(n=1), encoding="utf-8")
    # The second file uses the attribute declared in the first, and has one bad field.
    second.write_text("format: 1\njobs:\n" + GOOD_JOB.format(n=1) + "    base_rate: 2\n", encoding="utf-8")
    res = run_inproc(["import", first, second], capsys, db=db)
    assert res.code == 2
    assert any(ln.startswith(f"{second}:") and "base_rate" in ln for ln in res.err.splitlines()), res.err
    assert not any(ln.startswith(f"{first}:") for ln in res.err.splitlines())
    assert run_inproc(["list", "instruments", "--json"], capsys, db=db).json() == []
    second.write_text("format: 1\njobs:\n" + GOOD_JOB.format(n=1), encoding="utf-8")
    res = run_inproc(["import", first, second], capsys, db=db)
    assert res.code == 0, res.err
    assert [i["key"] for i in run_inproc(["list", "instruments", "--json"], capsys, db=db).json()] == ["quill-1"]
    assert [j["key"] for j in run_inproc(["list", "jobs", "--json"], capsys, db=db).json()] == ["ferry-hand-1"]
