"""Safe records: no lost updates between two stores, backups of a database in use, restores,
clear errors when the database cannot be used, and loading without N+1 queries.

Optimistic concurrency with a version column is common practice, no published source; the
SQLite online-backup guarantee is the SQLite documentation's ("Online Backup API", sqlite.org).
"""

from __future__ import annotations

import dataclasses
import os
import sqlite3
import threading

import pytest
from sqlalchemy import event

from tests.records import _samples as S
from vetting.records.domain import Catalogue
from vetting.records.errors import ConcurrentEdit, DatabaseUnavailable, NotFound, RecordsError
from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue

# ---------------------------------------------------------------------------
# two people, one record
# ---------------------------------------------------------------------------


def test_second_save_with_a_stale_version_is_refused_naming_the_other_user(db_url):
    with Store.open(db_url, user="ana") as ana, Store.open(db_url, user="ben") as ben:
        ana.import_catalogue(S.catalogue())
        mine = ana.instrument("vessel-check-3")
        theirs = ben.instrument("vessel-check-3")

        ana.save_instrument(dataclasses.replace(mine, title="Ana's title"))
        with pytest.raises(ConcurrentEdit) as exc:
            ben.save_instrument(dataclasses.replace(theirs, title="Ben's title"))
        assert exc.value.who == "ana"
        assert "ana" in str(exc.value) and "nothing was saved" in str(exc.value)
        assert "UTC" in exc.value.when
        assert ben.instrument("vessel-check-3").title == "Ana's title"

        # the same for jobs, and for a delete with a stale version
        job_a, job_b = ana.job("dock-pump-operator"), ben.job("dock-pump-operator")
        ben.save_job(dataclasses.replace(job_b, title="Ben's job"))
        with pytest.raises(ConcurrentEdit, match="ben"):
            ana.save_job(dataclasses.replace(job_a, title="Ana's job"))
        with pytest.raises(ConcurrentEdit, match="ben"):
            ana.delete_job("dock-pump-operator", row_version=job_a.row_version)
        assert ana.job("dock-pump-operator").title == "Ben's job"

        # after reloading, the edit goes through
        fresh = ben.instrument("vessel-check-3")
        assert ben.save_instrument(dataclasses.replace(fresh, title="Ben's title")).row_version == 3
        who = [(e.who, e.action) for e in ana.audit_events(instrument="vessel-check-3")]
        assert who == [("ana", "create"), ("ana", "update"), ("ben", "update")]


def test_saving_a_record_someone_deleted_is_refused(db_url):
    with Store.open(db_url, user="ana") as ana, Store.open(db_url, user="ben") as ben:
        ana.import_catalogue(S.catalogue())
        held = ben.instrument("tiny-screen")
        ana.delete_instrument("tiny-screen")
        with pytest.raises(NotFound, match="deleted"):
            ben.save_instrument(held)
        assert "tiny-screen" not in ana.instrument_keys()


def test_concurrent_writers_on_one_sqlite_file_queue_instead_of_failing(sqlite_url):
    """Two threads, two stores, 2 x 15 saves of the same record with reloads on conflict: every
    save either lands or is refused as ConcurrentEdit; none fails with a locking error."""
    with Store.open(sqlite_url, user="setup") as s:
        s.import_catalogue(S.catalogue())
    landed, errors = [], []

    def worker(name):
        with Store.open(sqlite_url, user=name) as st:
            for i in range(15):
                inst = st.instrument("tiny-screen")
                try:
                    st.save_instrument(dataclasses.replace(inst, title=f"{name} {i}"))
                    landed.append(name)
                except ConcurrentEdit:
                    pass
                except Exception as exc:  # pragma: no cover - this is the failure being tested
                    errors.append(repr(exc))

    threads = [threading.Thread(target=worker, args=(n,)) for n in ("ana", "ben")]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    with Store.open(sqlite_url) as s:
        assert s.instrument("tiny-screen").row_version == 1 + len(landed)
        updates = [e for e in s.audit_events(instrument="tiny-screen") if e.action == "update"]
        assert len(updates) == len(landed)


# ---------------------------------------------------------------------------
# backup and restore
# ---------------------------------------------------------------------------


def test_backup_of_a_database_in_use_is_consistent_and_restores(sqlite_url, tmp_path, db_url):
    with Store.open(sqlite_url, user="ana") as live:
        live.import_catalogue(S.catalogue())
        live.lock_policy("dock-pump-operator")
        live.record_decision("dock-pump-operator", "vessel-check-3", status="final", by="ana", fingerprint="fp")
        # another connection holds an open, uncommitted write while the backup runs
        path = live.url.removeprefix("sqlite:///")
        other = sqlite3.connect(path, isolation_level=None)
        other.execute("BEGIN IMMEDIATE")
        other.execute("UPDATE instrument SET title = 'half-done' WHERE key = 'tiny-screen'")
        target = live.backup(tmp_path / "copy.db")
        other.execute("ROLLBACK")
        other.close()
        with pytest.raises(RecordsError, match="already exists"):
            live.backup(target)
        expected = live.export_catalogue()
        expected_events = live.audit_events()
        expected_policies = live.policy_versions("dock-pump-operator")
        expected_decisions = live.decisions()

    # the backup is a plain, self-contained SQLite file with the committed records only
    check = sqlite3.connect(target)
    assert check.execute("PRAGMA integrity_check").fetchone() == ("ok",)
    assert check.execute("PRAGMA journal_mode").fetchone() == ("delete",)
    check.close()
    assert not os.path.exists(f"{target}-wal")
    with Store.open(f"sqlite:///{target}") as copy:
        assert copy.instrument("tiny-screen").title == "Instrument tiny-screen"
        assert copy.export_catalogue() == expected

    # restore into an empty database (SQLite, and PostgreSQL when available)
    with Store.open(db_url, user="restorer") as fresh:
        copied = fresh.restore(target)
        assert copied["instrument"] == 2 and copied["decision"] == 1
        assert fresh.export_catalogue() == expected
        assert fresh.policy_versions("dock-pump-operator") == expected_policies
        assert fresh.decisions() == expected_decisions
        events = fresh.audit_events()
        assert events[: len(expected_events)] == expected_events
        assert (events[-1].action, events[-1].who) == ("import", "restorer")
        # new rows get fresh ids after the copied ones
        fresh.save_instrument(S.bare_instrument("after-restore"))
        assert fresh.instrument_keys()[-1] == "after-restore"
        with pytest.raises(RecordsError, match="empty database"):
            fresh.restore(target)


def test_restore_refuses_a_file_that_is_not_a_backup(sqlite_url, tmp_path):
    junk = tmp_path / "notes.txt"
    junk.write_text("hello")
    with Store.open(sqlite_url) as s:
        with pytest.raises(RecordsError, match="not a vetting SQLite backup"):
            s.restore(junk)
        with pytest.raises(NotFound):
            s.restore(tmp_path / "missing.db")
        assert s.is_empty()


def test_backup_is_not_offered_for_postgresql(request):
    url = request.getfixturevalue("pg_url")
    with Store.open(url) as s, pytest.raises(NotImplementedError):
        s.backup("/tmp/never-written.db")


# ---------------------------------------------------------------------------
# databases that cannot be used
# ---------------------------------------------------------------------------


def test_missing_folder_is_a_clear_error(tmp_path):
    with pytest.raises(DatabaseUnavailable, match="does not exist"):
        Store.open(f"sqlite:///{tmp_path / 'no' / 'such' / 'folder' / 'v.db'}")
    assert not (tmp_path / "no").exists()


def test_read_only_database_is_a_clear_error(tmp_path):
    db = tmp_path / "v.db"
    with Store.open(f"sqlite:///{db}") as s:
        s.import_catalogue(S.catalogue())
    # a connection the operating system only allows to read (SQLite's read-only open mode)
    with pytest.raises(DatabaseUnavailable, match="read-only|readonly"):
        with Store.open(f"sqlite:///file:{db}?mode=ro&uri=true") as ro:
            ro.save_instrument(S.bare_instrument("x"))
    if os.geteuid() != 0:  # root may write any file, so the permission check needs a normal user
        db.chmod(0o444)
        with pytest.raises(DatabaseUnavailable, match="read-only"):
            Store.open(f"sqlite:///{db}")


def test_a_file_that_is_not_a_database_is_a_clear_error(tmp_path):
    bad = tmp_path / "letter.db"
    bad.write_bytes(b"Dear colleague, this is not a database." * 100)
    with pytest.raises(DatabaseUnavailable, match="not a"):
        Store.open(f"sqlite:///{bad}")


def test_unreachable_server_is_a_clear_error():
    # port 9 (discard) on localhost: nothing listens there on a test machine
    with pytest.raises(DatabaseUnavailable, match="reachable|connect"):
        Store.open("postgresql+psycopg://nobody@127.0.0.1:9/none")


def test_bad_url_is_a_clear_error():
    with pytest.raises(DatabaseUnavailable, match="URL|database"):
        Store.open("this is not a url")


# ---------------------------------------------------------------------------
# loading cost
# ---------------------------------------------------------------------------


def _count_selects(store, fn):
    seen = []

    def before(conn, cursor, statement, params, context, executemany):
        if statement.lstrip().upper().startswith("SELECT"):
            seen.append(statement)

    event.listen(store._engine, "before_cursor_execute", before)
    try:
        fn()
    finally:
        event.remove(store._engine, "before_cursor_execute", before)
    return len(seen)


def test_loading_instruments_costs_the_same_few_queries_for_5_or_120(db_url):
    """No N+1: the number of queries does not grow with the number of instruments."""
    with Store.open(db_url) as s:
        s.import_catalogue(generate_catalogue(5, seed=1))
        small = _count_selects(s, s.instruments)
        big_cat = generate_catalogue(120, seed=2)
        big_cat = Catalogue(instruments=[dataclasses.replace(i, key=f"b-{i.key}") for i in big_cat.instruments],
                            attributes=big_cat.attributes)
        s.import_catalogue(big_cat)
        assert len(s.instruments()) == 125
        big = _count_selects(s, s.instruments)
        assert small == big
        assert big <= 12


def test_a_key_saved_by_someone_else_meanwhile_is_a_key_conflict(db_url, monkeypatch):
    """Two stores create the same new key at once: the loser gets KeyConflict, not a crash.
    The race is forced by hiding the other store's row from the existence check."""
    from vetting.records.errors import KeyConflict

    with Store.open(db_url, user="ana") as ana, Store.open(db_url, user="ben") as ben:
        ana.import_catalogue(S.catalogue())
        ben.save_instrument(S.bare_instrument("fresh"))
        monkeypatch.setattr(Store, "_head", lambda self, s, table, key: None)
        with pytest.raises(KeyConflict, match="same key"):
            ana.save_instrument(S.bare_instrument("fresh"))
        monkeypatch.undo()
        assert ana.instrument("fresh").row_version == 1
        assert [e.who for e in ana.audit_events(instrument="fresh")] == ["ben"]
