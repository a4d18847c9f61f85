"""The record-keeping commands: init, list, show, log, backup, restore. Exit status 0 on
success, 2 on bad input or usage, 1 on other failures, messages on stderr (the project's CLI
convention, common practice for command-line tools, no published source)."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from tests.records import _samples as S
from vetting.cli.main import run
from vetting.records.store import Store


@pytest.fixture
def url(tmp_path):
    return f"sqlite:///{tmp_path / 'cli.db'}"


@pytest.fixture
def filled(url):
    with Store.open(url, user="ana") as s:
        s.import_catalogue(S.catalogue(), source="sample.yaml")
    return url


def vetting(capsys, *argv):
    status = run(list(argv))
    out = capsys.readouterr()
    return status, out.out, out.err


def test_init_creates_the_database_and_says_where(capsys, tmp_path, url):
    status, out, err = vetting(capsys, "--db", url, "init")
    assert status == 0, err
    assert str(tmp_path / "cli.db") in out
    assert (tmp_path / "cli.db").exists()
    status, out, _ = vetting(capsys, "--db", url, "init", "--json")
    assert json.loads(out) == {"database": str(tmp_path / "cli.db"), "instruments": 0, "jobs": 0}


def test_init_uses_vetting_db_then_the_default_location(capsys, tmp_path, monkeypatch):
    target = tmp_path / "from-env.db"
    monkeypatch.setenv("VETTING_DB", f"sqlite:///{target}")
    assert vetting(capsys, "init")[0] == 0 and target.exists()
    monkeypatch.delenv("VETTING_DB")
    status, out, _ = vetting(capsys, "init")
    # the default is a file in the user's data directory (XDG_DATA_HOME is in tmp_path here)
    assert status == 0 and str(tmp_path / "home" / ".local" / "share" / "vetting" / "vetting.db") in out


def test_init_in_a_missing_folder_fails_with_a_message(capsys, tmp_path):
    status, out, err = vetting(capsys, "--db", f"sqlite:///{tmp_path / 'nope' / 'v.db'}", "init")
    assert status == 1 and out == ""
    assert "does not exist" in err and "nope" in err


def test_list_and_show(capsys, filled):
    status, out, _ = vetting(capsys, "--db", filled, "list", "instruments")
    assert status == 0
    assert "vessel-check-3" in out and "tiny-screen" in out and "Harrowgate" in out
    status, out, _ = vetting(capsys, "--db", filled, "list", "instruments", "--json")
    data = json.loads(out)
    assert [d["key"] for d in data] == ["vessel-check-3", "tiny-screen"]
    assert data[0]["reviews"][0]["date"] == "2026-03-14"
    assert data[0]["sample_copy"]["checks"][2]["result"] == "fail"

    status, out, _ = vetting(capsys, "--db", filled, "list", "jobs")
    assert status == 0 and "dock-pump-operator" in out and "v1" in out

    status, out, _ = vetting(capsys, "--db", filled, "show", "instrument", "vessel-check-3")
    assert status == 0
    for text in ("Vessel Check, third form", "retest 0.81", "national-2021", "P90=38.5", "answer-key-present: fail"):
        assert text in out
    status, out, _ = vetting(capsys, "--db", filled, "show", "job", "dock-pump-operator", "--json")
    job = json.loads(out)
    assert job["policy"]["min_reliability"] == 0.75 and job["policy"]["version"] == 1
    assert job["requirements"][0] == {"attribute": "gauge-reading", "importance": 5, "critical": True}


def test_list_on_an_empty_database_says_so(capsys, url):
    status, out, _ = vetting(capsys, "--db", url, "list", "jobs")
    assert status == 0 and "no jobs" in out
    status, out, _ = vetting(capsys, "--db", url, "list", "jobs", "--json")
    assert json.loads(out) == []


def test_unknown_key_is_bad_input(capsys, filled):
    status, out, err = vetting(capsys, "--db", filled, "show", "instrument", "no-such-thing")
    assert status == 2 and out == ""
    assert "no-such-thing" in err and "vessel-check-3" in err  # names the key and what exists


def test_usage_errors_exit_2(capsys, filled):
    with pytest.raises(SystemExit) as exc:
        run(["--db", filled, "list", "people"])
    assert exc.value.code == 2
    with pytest.raises(SystemExit) as exc:
        run(["--db", filled, "log", "--job", "a", "--instrument", "b"])
    assert exc.value.code == 2


def test_log_shows_who_changed_what(capsys, filled):
    with Store.open(filled, user="ben") as s:
        inst = s.instrument("tiny-screen")
        inst.title = "Tiny screen, revised"
        s.save_instrument(inst)
        s.lock_policy("dock-pump-operator")
    status, out, _ = vetting(capsys, "--db", filled, "log", "--instrument", "tiny-screen")
    assert status == 0
    lines = out.splitlines()
    assert "ana  create instrument tiny-screen" in lines[0]
    assert "ben  update instrument tiny-screen" in lines[1]
    assert 'title: "Instrument tiny-screen" -> "Tiny screen, revised"' in out
    assert "row_version" not in out  # bookkeeping is not a change the user made

    status, out, _ = vetting(capsys, "--db", filled, "log", "--job", "dock-pump-operator", "--json")
    events = json.loads(out)
    assert [(e["who"], e["action"], e["entity"]) for e in events] == [
        ("ana", "create", "job"),
        ("ben", "lock", "policy"),
    ]
    status, out, _ = vetting(capsys, "--db", filled, "log", "--json")
    assert {e["entity"] for e in json.loads(out)} >= {"attribute", "instrument", "job", "catalogue", "policy"}


def test_backup_and_restore_round_trip(capsys, filled, tmp_path):
    copy = tmp_path / "backup.db"
    status, out, err = vetting(capsys, "--db", filled, "backup", str(copy))
    assert status == 0, err
    assert copy.exists()
    assert str(copy) in out

    status, _, err = vetting(capsys, "--db", filled, "backup", str(copy))
    assert status == 2 and "already exists" in err

    target = f"sqlite:///{tmp_path / 'restored.db'}"
    status, out, err = vetting(capsys, "--db", target, "restore", str(copy))
    assert status == 0, err
    with Store.open(filled) as a, Store.open(target) as b:
        assert b.export_catalogue() == a.export_catalogue()
        assert b.audit_events()[:-1] == a.audit_events()

    # restoring again (the database is no longer empty) is refused and changes nothing
    before = _dump(target)
    status, out, err = vetting(capsys, "--db", target, "restore", str(copy))
    assert status == 2 and "empty database" in err
    assert _dump(target) == before


def test_restore_of_a_missing_or_foreign_file_is_bad_input(capsys, url, tmp_path):
    status, _, err = vetting(capsys, "--db", url, "restore", str(tmp_path / "missing.db"))
    assert status == 2 and "missing.db" in err
    junk = tmp_path / "junk.yaml"
    junk.write_text("format: 99\n")
    status, _, err = vetting(capsys, "--db", url, "restore", str(junk))
    assert status == 2 and "junk.yaml" in err
    with Store.open(url) as s:
        assert s.is_empty()


def test_backup_of_postgresql_is_a_catalogue_that_restores(capsys, request, tmp_path):
    pg = request.getfixturevalue("pg_url")
    with Store.open(pg, user="ana") as s:
        s.import_catalogue(S.catalogue())
    out_file = tmp_path / "team.yaml"
    status, out, err = vetting(capsys, "--db", pg, "backup", str(out_file))
    assert status == 0, err
    assert "catalogue export" in out
    target = f"sqlite:///{tmp_path / 'from-pg.db'}"
    status, _, err = vetting(capsys, "--db", target, "restore", str(out_file))
    assert status == 0, err
    with Store.open(target) as s:
        assert s.export_catalogue() == S.catalogue()


def test_python_dash_m_reports_exit_status(tmp_path):
    missing = f"sqlite:///{tmp_path / 'nowhere' / 'x.db'}"
    done = subprocess.run(
        [sys.executable, "-m", "vetting", "--db", missing, "list", "jobs"], capture_output=True, text=True
    )
    assert done.returncode == 1 and "does not exist" in done.stderr and done.stdout == ""


def _dump(url: str) -> list:
    with Store.open(url) as s:
        return [s.export_catalogue(), s.audit_events(), s.decisions()]
