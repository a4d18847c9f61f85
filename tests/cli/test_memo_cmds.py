"""`vetting memo` and `vetting verify` from the command line (exit statuses, messages, files)."""

from __future__ import annotations

import json
import os

import docx

from tests.memo.catalogue import ALT, FAILER, JOB, TOP
from tests.memo.conftest import db_url, store  # noqa: F401  (fixtures shared with tests/memo)
from vetting.cli.main import run


def _run(url, *argv):
    return run(["--db", url, *argv])


def test_memo_writes_each_format_and_verify_says_unchanged(db_url, tmp_path, capsys):
    for fmt in ("md", "html", "docx"):
        out = tmp_path / f"memo.{fmt}"
        assert _run(db_url, "memo", JOB, "--format", fmt, "--out", str(out), "--by", "A. Author") == 0
        assert out.exists()
        printed = capsys.readouterr().out
        assert f"decision: {TOP}" in printed and "does not replace advice" in printed
        assert _run(db_url, "verify", str(out)) == 0
        assert "unchanged" in capsys.readouterr().out
    d = docx.Document(str(tmp_path / "memo.docx"))
    assert d.core_properties.author == "A. Author"


def test_final_memo_json_and_verify_by_fingerprint(db_url, tmp_path, capsys):
    out = tmp_path / "memo.md"
    assert _run(db_url, "memo", JOB, "--format", "md", "--out", str(out), "--final", "--json") == 0
    info = json.loads(capsys.readouterr().out)
    assert info["status"] == "final" and info["decision"] == TOP and info["decision_id"] is not None
    assert _run(db_url, "verify", info["fingerprint"], "--json") == 0
    result = json.loads(capsys.readouterr().out)
    assert result["matches"] is True and result["decision"] == info["decision_id"]


def test_verify_exit_1_names_the_changed_record(store, db_url, tmp_path, capsys):
    out = tmp_path / "memo.html"
    assert _run(db_url, "memo", JOB, "--format", "html", "--out", str(out)) == 0
    capsys.readouterr()
    inst = store.instrument(ALT)
    inst.minutes = 35.0
    store.save_instrument(inst)
    assert _run(db_url, "verify", str(out)) == 1
    printed = capsys.readouterr().out
    assert "CHANGED" in printed and f"changed: instrument:{ALT}" in printed
    assert f"update instrument {ALT}" in printed  # the audit event that changed it


def test_bad_input_exit_2_and_nothing_written(db_url, tmp_path, capsys):
    out = tmp_path / "out"
    out.mkdir()
    cases = [
        (["memo", "no-such-job", "--format", "md", "--out", str(out / "m.md")], "no-such-job"),
        (["memo", JOB, "--format", "md", "--out", str(out / "nope" / "m.md")], "does not exist"),
        (["memo", JOB, "--choose", FAILER, "--format", "md", "--out", str(out / "m.md")], "--override"),
        (["memo", JOB, "--override", "x", "--format", "md", "--out", str(out / "m.md")], "--choose"),
        (["verify", str(out / "missing.md")], "no such file"),
        (["verify", "0" * 64], "no decision with this fingerprint"),
    ]
    for argv, words in cases:
        assert _run(db_url, *argv) == 2, argv
        msg = capsys.readouterr().err
        assert words in msg, (argv, msg)
    not_memo = out / "plain.md"
    not_memo.write_text("# just notes\n", encoding="utf-8")
    assert _run(db_url, "verify", str(not_memo)) == 2
    assert "not a vetting memo" in capsys.readouterr().err
    assert os.listdir(out) == ["plain.md"]


def test_override_is_accepted_and_reported(db_url, tmp_path, capsys):
    out = tmp_path / "memo.md"
    argv = ["memo", JOB, "--choose", FAILER, "--override", "Agreed with counsel", "--format", "md", "--out", str(out)]
    assert _run(db_url, *argv) == 0
    assert "OVERRIDE" in capsys.readouterr().out
    assert "Reason given for the override: Agreed with counsel" in out.read_text(encoding="utf-8")
