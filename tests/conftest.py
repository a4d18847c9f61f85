"""Shared fixtures. Every test runs with its data and configuration directories in tmp_path,
so no test can touch the user's real database."""

from __future__ import annotations

import os
import uuid
import warnings

import pytest


@pytest.fixture(autouse=True)
def _isolated_dirs(tmp_path, monkeypatch):
    home = tmp_path / "home"
    home.mkdir()
    monkeypatch.setenv("HOME", str(home))
    monkeypatch.setenv("XDG_DATA_HOME", str(home / ".local" / "share"))
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home / ".config"))
    monkeypatch.setenv("XDG_CACHE_HOME", str(home / ".cache"))
    monkeypatch.delenv("VETTING_DB", raising=False)
    monkeypatch.setenv("VETTING_USER", "test-user")
    yield


# ---------------------------------------------------------------------------
# PostgreSQL: a fresh database per test on the server named by VETTING_TEST_PG_URL
# (.ci/postgres.sh starts a throwaway cluster and sets it). Use the `pg_url` fixture; a
# `db_url`-style fixture parametrised over SQLite and PostgreSQL can call
# `request.getfixturevalue("pg_url")` for its PostgreSQL case. When the variable is unset or the
# server cannot be reached, the test is SKIPPED with a pytest warning, and the run ends with a
# loud summary line saying how many PostgreSQL tests did not run and why.
# ---------------------------------------------------------------------------

PG_ENV = "VETTING_TEST_PG_URL"
_PG = {"checked": False, "reason": None, "skipped": 0, "used": 0}


def _pg_driver_url(url: str) -> str:
    """The SQLAlchemy URL as a plain libpq URL for psycopg."""
    return url.replace("postgresql+psycopg://", "postgresql://", 1)


def _pg_unavailable_reason() -> str | None:
    if not _PG["checked"]:
        _PG["checked"] = True
        url = os.environ.get(PG_ENV)
        if not url:
            _PG["reason"] = f"{PG_ENV} is not set (run .ci/postgres.sh's start_postgres)"
        else:
            try:
                import psycopg

                with psycopg.connect(_pg_driver_url(url), connect_timeout=5) as conn:
                    conn.execute("SELECT 1")
            except Exception as exc:  # any failure means: no server to test against
                _PG["reason"] = f"cannot reach the server at {url}: {exc}".strip()
    return _PG["reason"]


@pytest.fixture
def pg_url():
    """A SQLAlchemy URL of a brand-new, empty PostgreSQL database, dropped after the test."""
    reason = _pg_unavailable_reason()
    if reason:
        _PG["skipped"] += 1
        warnings.warn(pytest.PytestWarning(f"PostgreSQL test SKIPPED: {reason}"))
        pytest.skip(f"PostgreSQL not available: {reason}")
    import psycopg
    from sqlalchemy.engine import make_url

    base = os.environ[PG_ENV]
    name = f"vt_{uuid.uuid4().hex[:16]}"
    with psycopg.connect(_pg_driver_url(base), autocommit=True, connect_timeout=5) as conn:
        conn.execute(f'CREATE DATABASE "{name}"')
    _PG["used"] += 1
    try:
        yield make_url(base).set(database=name).render_as_string(hide_password=False)
    finally:
        with psycopg.connect(_pg_driver_url(base), autocommit=True, connect_timeout=5) as conn:
            conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')


def pytest_terminal_summary(terminalreporter, exitstatus, config):
    if _PG["skipped"]:
        terminalreporter.write_sep(
            "!",
            f"{_PG['skipped']} PostgreSQL test(s) SKIPPED: {_PG['reason']}",
            red=True,
            bold=True,
        )
    elif _PG["used"]:
        terminalreporter.write_line(
            f"PostgreSQL: {_PG['used']} test(s) ran against {os.environ.get(PG_ENV)}"
        )
