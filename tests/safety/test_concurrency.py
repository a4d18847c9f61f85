"""No lost updates (issue 7 item 3): two people in two real processes edit the same instrument
at once; the second save is refused with a message naming who changed it, and nothing is
overwritten. Runs on SQLite and on PostgreSQL.

The rule tested is optimistic concurrency control (Kung & Robinson, 1981, "On optimistic
methods for concurrency control", ACM TODS 6(2)): a write succeeds only if the record is still
at the version that was read.
"""

from __future__ import annotations

import json
import time

import pytest

from ._support import worker
from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue

KEY = "inst-000002"


def _prepare(url: str) -> int:
    with Store.open(url, user="setup") as store:
        store.import_catalogue(generate_catalogue(5, n_jobs=1, seed=5), source="synthetic")
        return store.instrument(KEY).row_version


def _wait_for(path, timeout=60.0):
    deadline = time.monotonic() + timeout
    while not path.exists():
        assert time.monotonic() < deadline, f"{path.name} never appeared"
        time.sleep(0.01)


def _finish(proc) -> dict:
    out, errs = proc.communicate(timeout=120)
    assert proc.returncode == 0, errs
    assert "Traceback" not in errs, errs
    return json.loads(out.strip().splitlines()[-1])


def test_second_save_is_refused_naming_who_changed_it(any_db_url, tmp_path):
    version = _prepare(any_db_url)
    sync = tmp_path / "sync"
    sync.mkdir()
    alice = worker("editor", any_db_url, KEY, "alice", "Title by alice", str(sync))
    bob = worker("editor", any_db_url, KEY, "bob", "Title by bob", str(sync))
    try:
        # both have read the same version before either saves
        _wait_for(sync / "alice.read")
        _wait_for(sync / "bob.read")
        assert (sync / "alice.read").read_text() == (sync / "bob.read").read_text() == str(version)
        (sync / "go-alice").touch()
        first = _finish(alice)
        (sync / "go-bob").touch()
        second = _finish(bob)
    finally:
        for p in (alice, bob):
            if p.poll() is None:
                p.kill()
    assert first["ok"] is True
    assert second["ok"] is False and second.get("refused"), second
    assert second["who"] == "alice"
    assert "alice" in second["message"]

    with Store.open(any_db_url, user="checker") as store:
        inst = store.instrument(KEY)
        assert inst.title == "Title by alice"  # bob's stale save overwrote nothing
        assert inst.row_version == first["row_version"] != version
        updates = [e for e in store.audit_events(instrument=KEY) if e.action == "update"]
    assert [e.who for e in updates] == ["alice"]


def test_simultaneous_saves_exactly_one_wins(any_db_url, tmp_path):
    _prepare(any_db_url)
    sync = tmp_path / "sync"
    sync.mkdir()
    names = ("carol", "dave")
    procs = {n: worker("editor", any_db_url, KEY, n, f"Title by {n}", str(sync)) for n in names}
    try:
        for n in names:
            _wait_for(sync / f"{n}.read")
        (sync / "go-all").touch()  # both save at the same moment
        results = {n: _finish(p) for n, p in procs.items()}
    finally:
        for p in procs.values():
            if p.poll() is None:
                p.kill()
    winners = [n for n, r in results.items() if r["ok"]]
    losers = [n for n, r in results.items() if not r["ok"]]
    assert len(winners) == 1 and len(losers) == 1, results
    winner, loser = winners[0], losers[0]
    assert results[loser].get("refused"), results[loser]
    assert results[loser]["who"] == winner and winner in results[loser]["message"]
    with Store.open(any_db_url, user="checker") as store:
        assert store.instrument(KEY).title == f"Title by {winner}"
        updates = [e for e in store.audit_events(instrument=KEY) if e.action == "update"]
    assert [e.who for e in updates] == [winner]
