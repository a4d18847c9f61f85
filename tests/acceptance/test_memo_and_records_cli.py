"""Issues 5 and 7 from the outside: `memo` in the three formats, `verify`, `log`, `backup`,
`restore`, through the real console script."""

from __future__ import annotations

import html.parser
import shutil
from pathlib import Path

import pytest
import yaml

from tests.acceptance.conftest import DEMO, run_cli, run_inproc, sqlite_url

CATALOGUE = yaml.safe_load(DEMO.read_text(encoding="utf-8"))
JOBS = {j["key"]: j for j in CATALOGUE["jobs"]}
JOB = "control-room-operator"


@pytest.fixture
def private_demo(demo_db, tmp_path):
    """A private copy of the module's demo database (for tests that change it)."""
    target = tmp_path / "private.sqlite"
    shutil.copyfile(demo_db.removeprefix("sqlite:///"), target)
    return sqlite_url(target)


def _top_and_failing(db, capsys):
    ranked = run_inproc(["rank", JOB, "--json"], capsys, db=db).json()
    top = next(r for r in ranked["results"] if r["rank"] == 1)["instrument"]
    failing = next(r for r in ranked["results"] if not r["eligible"])
    return top, failing


class _Collector(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[str] = []
        self.links: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for name, value in attrs:
            if name in ("href", "src") and value and not value.startswith(("#", "data:")):
                self.links.append(value)

    def handle_data(self, data):
        self.text.append(data)


def test_memo_final_md_then_verify_detects_change(tmp_path, private_demo, capsys):
    db = private_demo
    home = tmp_path / "h"
    top, _ = _top_and_failing(db, capsys)
    memo = tmp_path / "memo.md"
    res = run_cli(["memo", JOB, "--format", "md", "--out", memo, "--by", "Rowan Quist", "--final"], home, db=db)
    assert res.code == 0, res.err
    text = memo.read_text(encoding="utf-8")
    assert JOBS[JOB]["title"] in text and "Rowan Quist" in text and top in text
    assert "final" in text.lower()
    # The usual cautions and the deferral to local law / licensed practice (project rules).
    low = text.lower()
    for word in ("adverse impact", "accommodation", "qualified", "local validation", "employment law"):
        assert word in low, word
    res = run_cli(["verify", memo], home, db=db)
    assert res.code == 0, res.err

    # Change one of the records the memo used: verify says so (exit 1) and names it.
    exported = tmp_path / "inst.yaml"
    assert run_inproc(["export", "--instrument", top, exported], capsys, db=db).code == 0
    data = yaml.safe_load(exported.read_text(encoding="utf-8"))
    data["instruments"][0]["minutes"] = data["instruments"][0]["minutes"] + 1
    exported.write_text(yaml.safe_dump(data, sort_keys=False), encoding="utf-8")
    assert run_inproc(["import", "--replace", exported], capsys, db=db).code == 0
    res = run_cli(["verify", memo], home, db=db)
    assert res.code == 1
    assert top in res.out + res.err
    # By fingerprint too (the memo states it).
    fingerprint = next(w for w in text.replace("*", " ").split() if len(w) == 64 and all(c in "0123456789abcdef" for c in w))
    res = run_inproc(["verify", fingerprint, "--json"], capsys, db=db)
    assert res.code == 1 and res.json()["matches"] is False


def test_memo_html_and_docx(tmp_path, demo_db, capsys):
    top, _ = _top_and_failing(demo_db, capsys)
    out_html = tmp_path / "memo.html"
    res = run_inproc(["memo", JOB, "--format", "html", "--out", out_html, "--by", "R. Quist"], capsys, db=demo_db)
    assert res.code == 0, res.err
    parser = _Collector()
    parser.feed(out_html.read_text(encoding="utf-8"))
    assert "script" not in parser.tags  # no scripts
    assert parser.links == []  # self-contained: no outside links
    assert "style" in parser.tags and "table" in parser.tags
    body = " ".join(parser.text)
    assert JOBS[JOB]["title"] in body and top in body and "draft" in body.lower()

    docx_path = tmp_path / "memo.docx"
    res = run_cli(["memo", JOB, "--format", "docx", "--out", docx_path], tmp_path / "h", db=demo_db)
    assert res.code == 0, res.err
    import docx

    document = docx.Document(str(docx_path))
    headings = [p.text for p in document.paragraphs if p.style.name.startswith(("Heading", "Title"))]
    assert len(headings) >= 8, headings
    assert document.tables
    everything = "\n".join(p.text for p in document.paragraphs) + "\n".join(
        c.text for t in document.tables for row in t.rows for c in row.cells
    )
    assert top in everything and JOBS[JOB]["title"] in everything


def test_memo_choose_override_and_bad_input(tmp_path, demo_db, capsys):
    _, failing = _top_and_failing(demo_db, capsys)
    key = failing["instrument"]
    out = tmp_path / "chosen.md"
    res = run_inproc(["memo", JOB, "--choose", key, "--format", "md", "--out", out], capsys, db=demo_db)
    assert res.code == 2 and key in res.err and not out.exists()
    reason = "pilot agreed with the works council (invented)"
    res = run_inproc(
        ["memo", JOB, "--choose", key, "--override", reason, "--format", "md", "--out", out], capsys, db=demo_db
    )
    assert res.code == 0, res.err
    text = out.read_text(encoding="utf-8")
    assert reason in text and key in text and "override" in text.lower()

    # Unknown job, unknown format, unwritable paths: exit 2, nothing written.
    for argv, path in [
        (["memo", "no-such-job", "--format", "md", "--out", tmp_path / "a.md"], tmp_path / "a.md"),
        (["memo", JOB, "--format", "pdf", "--out", tmp_path / "b.pdf"], tmp_path / "b.pdf"),
        (["memo", JOB, "--format", "md", "--out", tmp_path / "missing-dir" / "c.md"], tmp_path / "missing-dir" / "c.md"),
    ]:
        res = run_inproc(argv, capsys, db=demo_db)
        assert res.code == 2, argv
        assert not path.exists()
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder", encoding="utf-8")
    res = run_cli(["memo", JOB, "--format", "html", "--out", blocker / "d.html"], tmp_path / "h", db=demo_db)
    assert res.code == 2 and res.err.strip()
    assert blocker.read_text(encoding="utf-8") == "not a folder"
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith((".", "tmp"))) == []


def test_log_backup_restore(tmp_path, private_demo, capsys):
    db = private_demo
    home = tmp_path / "h"
    src = tmp_path / "one.yaml"
    src.write_text(
        "format: 1\nattributes:\n  - {key: knot-tying, name: Knot tying, kind: skill}\n"
        "instruments:\n  - key: rope-check-1\n    title: Rope check\n    measures:\n"
        "      - {attribute: knot-tying, fit: primary}\n    minutes: 12\n",
        encoding="utf-8",
    )
    res = run_cli(["import", src], home, db=db)
    assert res.code == 0, res.err
    events = run_inproc(["log", "--instrument", "rope-check-1", "--json"], capsys, db=db).json()
    assert len(events) == 1
    event = events[0]
    assert {"at", "who", "action", "before", "after"} <= set(event)
    assert event["action"] == "create" and event["who"] == "acceptance-checker"
    assert event["before"] is None and event["after"]["minutes"] == 12
    job_events = run_inproc(["log", "--job", JOB, "--json"], capsys, db=db).json()
    assert job_events and all(JOB in str(e) for e in job_events)
    assert not any("rope-check-1" in str(e) for e in job_events)
    text = run_inproc(["log"], capsys, db=db)
    assert text.code == 0 and "rope-check-1" in text.out
    # A key with no history (it may have been deleted, so it is not refused): an empty list.
    assert run_inproc(["log", "--job", "no-such-job", "--json"], capsys, db=db).json() == []

    # Backup, restore into an empty database, same records.
    backup = tmp_path / "copy.bak"
    res = run_cli(["backup", backup], home, db=db)
    assert res.code == 0, res.err and backup.exists()
    fresh = sqlite_url(tmp_path / "fresh.sqlite")
    res = run_cli(["restore", backup], home, db=fresh)
    assert res.code == 0, res.err
    a, b = tmp_path / "a.yaml", tmp_path / "b.yaml"
    assert run_inproc(["export", a], capsys, db=db).code == 0
    assert run_inproc(["export", b], capsys, db=fresh).code == 0
    assert a.read_text(encoding="utf-8") == b.read_text(encoding="utf-8")
    restored_log = run_inproc(["log", "--instrument", "rope-check-1", "--json"], capsys, db=fresh).json()
    assert restored_log == events
    # Restoring over records is refused (exit 2) and changes nothing.
    res = run_inproc(["restore", backup], capsys, db=db)
    assert res.code == 2 and res.err.strip()
    assert run_inproc(["export", b], capsys, db=db).code == 0
    assert a.read_text(encoding="utf-8") == b.read_text(encoding="utf-8")
    # A backup file that is not one: not a crash.
    junk = tmp_path / "junk.bak"
    junk.write_text("hello", encoding="utf-8")
    res = run_inproc(["restore", junk], capsys, db=sqlite_url(tmp_path / "empty2.sqlite"))
    assert res.code in (1, 2) and res.err.strip() and "Traceback" not in res.err
