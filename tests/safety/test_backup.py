"""Backups (issue 7 item 4): `vetting backup PATH` takes a consistent copy while another
process keeps writing, and `vetting restore PATH` brings it back into an empty database with
every record intact.

Consistency check: the writer saves instruments w-00000, w-00001, ... one transaction each, in
order. A consistent copy (one that reflects a single committed state) therefore holds exactly
w-00000..w-K for some K, and each of those complete with all its evidence; a torn copy would
show a gap or a half-written instrument. SQLite's online backup API gives such a snapshot
(sqlite.org/backup.html); for PostgreSQL the backup is a catalogue export read in one
transaction.
"""

from __future__ import annotations

import dataclasses
import sqlite3

import pytest

from vetting.records.domain import Catalogue
from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue

from ._support import assert_clean_failure, run_vetting, worker

SEED = 17
COUNT = 2000  # more than the writer can save while the backup runs; it is stopped after it


def _strip(inst):
    return dataclasses.replace(inst, key="", row_version=None)


def _check_consistent(instruments, expected) -> int:
    keys = sorted(i.key for i in instruments)
    assert keys == [f"w-{i:05d}" for i in range(len(keys))], "gap in the committed sequence"
    by_key = {i.key: i for i in instruments}
    for k in keys:
        want = expected[int(k[2:])]
        assert _strip(by_key[k]) == _strip(want), f"{k} is not complete in the backup"
    return len(keys)


def _start_writer(url):
    cat = generate_catalogue(COUNT, n_jobs=0, seed=SEED)
    with Store.open(url, user="setup") as store:
        store.import_catalogue(Catalogue(attributes=cat.attributes), source="attributes")
    proc = worker("writer", url, str(SEED), str(COUNT))
    assert proc.stdout.readline().strip() == "started", proc.stderr.read()
    return proc, cat.instruments


def _stop(proc):
    """The writer has done its part once the backup is taken: stop it (mid-transaction is fine)."""
    if proc.poll() is None:
        proc.kill()
    _, errs = proc.communicate(timeout=60)
    assert "Traceback" not in errs, errs


def test_sqlite_backup_while_writing_then_restore(tmp_path):
    url = f"sqlite:///{tmp_path / 'live.db'}"
    writer, expected = _start_writer(url)
    backup = tmp_path / "copy.db"
    try:
        proc = run_vetting("--db", url, "backup", str(backup))
        still_writing = writer.poll() is None
    finally:
        _stop(writer)
    assert proc.returncode == 0, proc.stderr
    assert still_writing, "the writer finished before the backup: raise COUNT"

    with sqlite3.connect(backup) as conn:
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    with Store.open(f"sqlite:///{backup}", user="checker") as copy:
        copied = copy.instruments()
        saved_before = _check_consistent(copied, expected)
        backup_export = copy.export_catalogue()
    assert 1 <= saved_before < COUNT, saved_before

    # restore into an empty database: every record comes back identical
    restored_url = f"sqlite:///{tmp_path / 'restored.db'}"
    proc = run_vetting("--db", restored_url, "restore", str(backup))
    assert proc.returncode == 0, proc.stderr
    with Store.open(restored_url, user="checker") as restored:
        assert restored.export_catalogue() == backup_export
        assert len(restored.audit_events()) >= saved_before  # the audit trail came along

    # restoring over a database that holds records is refused, and changes nothing
    proc = run_vetting("--db", restored_url, "restore", str(backup))
    assert_clean_failure(proc, statuses=(2,))
    with Store.open(restored_url, user="checker") as restored:
        assert restored.export_catalogue() == backup_export


def test_postgresql_backup_while_writing_then_restore(pg_url, tmp_path):
    catalogue = pytest.importorskip("vetting.records.catalogue")
    writer, expected = _start_writer(pg_url)
    backup = tmp_path / "copy.yaml"
    try:
        proc = run_vetting("--db", pg_url, "backup", str(backup))
        still_writing = writer.poll() is None
    finally:
        _stop(writer)
    assert proc.returncode == 0, proc.stderr
    assert still_writing, "the writer finished before the backup: raise COUNT"
    saved = catalogue.load_catalogue(backup)
    n = _check_consistent(saved.instruments, expected)
    assert 1 <= n < COUNT

    restored_url = f"sqlite:///{tmp_path / 'restored.db'}"
    proc = run_vetting("--db", restored_url, "restore", str(backup))
    assert proc.returncode == 0, proc.stderr
    with Store.open(restored_url, user="checker") as restored:
        again = restored.export_catalogue()
    assert [_strip(i) for i in again.instruments] == [_strip(i) for i in saved.instruments]
    assert again.attributes == saved.attributes
