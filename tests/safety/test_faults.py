"""Fault handling (issue 7 item 5): a read-only database and a full disk give a clear error,
exit status 1 or 2, no traceback, and leave the database as it was.

How the faults are made:
- read-only file: chmod 0444 for an ordinary user; as root (who ignores file modes) the
  file is made immutable with `chattr +i`, which the kernel enforces even for root.
- read-only file system: a small tmpfs remounted read-only (root only).
- full disk: a real 1 MiB tmpfs when the tests run as root (mount allowed); as well, on any
  machine, RLIMIT_FSIZE (setrlimit(2)) caps the size of any file the process writes, with
  SIGXFSZ ignored so that write(2) fails with EFBIG; SQLite then reports an I/O or "disk
  full" error exactly as on a full disk. That is a simulation and is named so in the test id.
"""

from __future__ import annotations

import contextlib
import os
import resource
import shutil
import signal
import subprocess
from pathlib import Path

import pytest

from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue

from ._support import assert_clean_failure, run_vetting

catalogue = pytest.importorskip("vetting.records.catalogue")

IS_ROOT = os.geteuid() == 0


def _seed_db(path: Path) -> list[str]:
    """A small database with a few records; returns its instrument keys."""
    with Store.open(f"sqlite:///{path}", user="setup") as store:
        store.import_catalogue(generate_catalogue(3, n_jobs=1, seed=2), source="synthetic")
        return sorted(store.instrument_keys())


def _big_file(tmp_path: Path, n: int = 120) -> Path:
    cat = generate_catalogue(n, n_jobs=2, seed=99)
    # new keys, so the import is not refused as a key conflict before it writes anything
    for i, inst in enumerate(cat.instruments):
        inst.key = f"new-{i:05d}"
    for j, job in enumerate(cat.jobs):
        job.key = f"new-job-{j:03d}"
    path = tmp_path / "incoming.yaml"
    path.write_text(catalogue.dump_catalogue(cat), encoding="utf-8")
    return path


def _keys(path: Path) -> list[str]:
    with Store.open(f"sqlite:///{path}", user="checker") as store:
        return sorted(store.instrument_keys())


@contextlib.contextmanager
def _tmpfs(where: Path, size: str):
    where.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(where)],
                          capture_output=True, text=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.strip()}")
    try:
        yield where
    finally:
        subprocess.run(["umount", "-l", str(where)], capture_output=True)


def test_read_only_database_file(tmp_path):
    db = tmp_path / "vetting.db"
    before = _seed_db(db)
    # WAL mode: fold the log into the main file first so the file alone holds everything
    for extra in ("-wal", "-shm"):
        Path(str(db) + extra).unlink(missing_ok=True)
    incoming = _big_file(tmp_path, 5)
    if IS_ROOT:
        made = subprocess.run(["chattr", "+i", str(db)], capture_output=True, text=True)
        if made.returncode != 0:
            pytest.skip(f"running as root and chattr +i is not available: {made.stderr.strip()}")
    else:
        db.chmod(0o444)
    try:
        proc = run_vetting("--db", f"sqlite:///{db}", "import", str(incoming))
    finally:
        if IS_ROOT:
            subprocess.run(["chattr", "-i", str(db)], capture_output=True)
        db.chmod(0o644)
    assert_clean_failure(proc)
    assert "read" in proc.stderr.lower() and "only" in proc.stderr.lower(), proc.stderr
    assert _keys(db) == before


@pytest.mark.skipif(not IS_ROOT, reason="mounting a read-only file system needs root")
def test_read_only_file_system(tmp_path):
    with _tmpfs(tmp_path / "mnt", "8M") as mnt:
        db = mnt / "vetting.db"
        before = _seed_db(db)
        incoming = _big_file(tmp_path, 5)
        ro = subprocess.run(["mount", "-o", "remount,ro", str(mnt)], capture_output=True, text=True)
        if ro.returncode != 0:
            pytest.skip(f"cannot remount read-only: {ro.stderr.strip()}")
        proc = run_vetting("--db", f"sqlite:///{db}", "import", str(incoming))
        assert_clean_failure(proc)
        subprocess.run(["mount", "-o", "remount,rw", str(mnt)], check=True)
        assert _keys(db) == before


@pytest.mark.skipif(not IS_ROOT, reason="mounting a small tmpfs needs root; see the RLIMIT_FSIZE variant")
def test_full_disk_real_tmpfs(tmp_path):
    incoming = _big_file(tmp_path)
    with _tmpfs(tmp_path / "mnt", "1M") as mnt:
        db = mnt / "vetting.db"
        before = _seed_db(db)
        # fill the disk, leaving 32 KiB: far less than the import needs
        free = shutil.disk_usage(mnt).free
        (mnt / "filler").write_bytes(b"\0" * max(0, free - 32 * 1024))
        proc = run_vetting("--db", f"sqlite:///{db}", "import", str(incoming))
        assert_clean_failure(proc)
        assert any(w in proc.stderr.lower() for w in ("full", "space", "write")), proc.stderr
        # the database still opens (reading needs no space) and nothing of the import landed
        assert _keys(db) == before


def _limit_file_size(limit: int):
    def apply():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))

    return apply


def test_full_disk_simulated_with_file_size_limit(tmp_path):
    db = tmp_path / "vetting.db"
    before = _seed_db(db)
    incoming = _big_file(tmp_path)
    size_now = max(p.stat().st_size for p in tmp_path.glob("vetting.db*"))
    proc = run_vetting(
        "--db", f"sqlite:///{db}", "import", str(incoming),
        preexec_fn=_limit_file_size(size_now + 32 * 1024),
    )
    assert_clean_failure(proc)
    assert _keys(db) == before


def test_unreachable_server_is_a_clear_error(tmp_path):
    # nothing listens on port 9 of 127.0.0.1 (the discard port is never enabled by default)
    proc = run_vetting("--db", "postgresql+psycopg://nobody@127.0.0.1:9/none", "list", "instruments",
                       timeout=60)
    assert_clean_failure(proc)


def test_missing_directory_is_a_clear_error(tmp_path):
    proc = run_vetting("--db", f"sqlite:///{tmp_path / 'no' / 'such' / 'dir' / 'v.db'}", "list", "instruments")
    assert_clean_failure(proc)
    assert not (tmp_path / "no").exists()

