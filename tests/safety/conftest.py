"""Process-level safety tests: real subprocesses against a SQLite file and, when a server is
available (VETTING_TEST_PG_URL, see .ci/postgres.sh), a fresh PostgreSQL database."""

from __future__ import annotations

import pytest


@pytest.fixture(params=["sqlite", "postgresql"])
def any_db_url(request, tmp_path):
    """A fresh, empty database: a SQLite file, then a PostgreSQL database."""
    if request.param == "sqlite":
        return f"sqlite:///{tmp_path / 'vetting.db'}"
    return request.getfixturevalue("pg_url")


@pytest.fixture
def sqlite_url(tmp_path):
    return f"sqlite:///{tmp_path / 'vetting.db'}"
