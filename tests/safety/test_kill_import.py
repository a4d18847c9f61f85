"""Atomic import (issue 7 item 5): an import killed with SIGKILL partway leaves a database that
opens cleanly with either all or none of that import. A real process imports a large generated
catalogue; it is killed while its transaction is demonstrably open and writing. Runs on SQLite
and on PostgreSQL.

The guarantee relied on is transaction atomicity: SQLite's write-ahead log only makes a
transaction visible at its commit record ("Write-Ahead Logging", sqlite.org/wal.html), and
PostgreSQL rolls back the transaction of a backend whose client vanished (PostgreSQL 15
documentation, chapter 13 and 30 "Reliability and the Write-Ahead Log").
"""

from __future__ import annotations

import os
import select
import signal
import sqlite3
import time
from pathlib import Path

import pytest

from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue

from ._support import worker

N = 2000
SEED = 31


def _readline(proc, timeout: float) -> str:
    ready, _, _ = select.select([proc.stdout], [], [], timeout)
    return proc.stdout.readline().strip() if ready else ""


def _sqlite_path(url: str) -> Path:
    return Path(url.removeprefix("sqlite:///"))


#: how far into the import to kill it: SQLite by the size of the write-ahead log the open
#: transaction has written (a full import of N instruments writes about 11 MB), PostgreSQL by
#: time after its transaction first wrote (a full import takes seconds)
STAGES = {"early": (256 * 1024, 0.0), "late": (4 * 1024 * 1024, 0.3)}


def _writing_now(url: str, wal_bytes: int) -> bool:
    """Evidence that the import's transaction is open and has written something."""
    if url.startswith("sqlite"):
        wal = _sqlite_path(url).with_name(_sqlite_path(url).name + "-wal")
        return wal.exists() and wal.stat().st_size > wal_bytes
    import psycopg
    from sqlalchemy.engine import make_url

    u = make_url(url)
    with psycopg.connect(host=u.host, port=u.port, user=u.username, dbname=u.database) as conn:
        row = conn.execute(
            "SELECT count(*) FROM pg_stat_activity WHERE datname = %s AND pid <> pg_backend_pid() "
            "AND backend_xid IS NOT NULL",  # a transaction that has written (holds an xid)
            (u.database,),
        ).fetchone()
    return row[0] > 0


@pytest.mark.parametrize("stage", sorted(STAGES))
def test_import_killed_partway_leaves_all_or_nothing(any_db_url, stage):
    wal_bytes, pg_delay = STAGES[stage]
    with Store.open(any_db_url, user="setup") as store:  # schema in place before the race
        assert store.is_empty()
    proc = worker("importer", any_db_url, str(N), str(SEED))
    try:
        assert _readline(proc, 120) == "generated"
        assert _readline(proc, 60) == "importing"
        deadline = time.monotonic() + 60
        while not _writing_now(any_db_url, wal_bytes):
            assert proc.poll() is None, "the import ended before it could be killed: raise N"
            assert time.monotonic() < deadline, "never saw the import writing"
            time.sleep(0.02)
        if not any_db_url.startswith("sqlite"):
            time.sleep(pg_delay)
        assert proc.poll() is None, "the import ended before it could be killed: raise N"
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
        proc.stdout.close()
        proc.stderr.close()
    assert proc.returncode == -signal.SIGKILL

    if any_db_url.startswith("sqlite"):
        with sqlite3.connect(_sqlite_path(any_db_url)) as conn:
            assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"

    with Store.open(any_db_url, user="checker") as store:  # opens cleanly
        keys = store.instrument_keys()
        assert len(keys) in (0, N), f"partial import: {len(keys)} of {N} instruments"
        if keys:  # all of it: every record is there
            assert len(store.jobs()) == len(generate_catalogue(N, seed=SEED).jobs)
        else:  # none of it: no job, no attribute, and nothing (lock, debris) blocks the next import
            assert store.jobs() == [] and store.attributes() == []
            small = generate_catalogue(3, n_jobs=1, seed=SEED)
            store.import_catalogue(small, source="synthetic")
            assert sorted(store.instrument_keys()) == sorted(i.key for i in small.instruments)
