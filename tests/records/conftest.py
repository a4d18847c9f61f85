"""Database fixtures for the records tests.

`db_url` runs each test twice: on a fresh SQLite file, and on a fresh PostgreSQL database on the
server named by VETTING_TEST_PG_URL (the `pg_url` fixture of tests/conftest.py creates it and
drops it afterwards; without a server the PostgreSQL case is skipped and the run says so loudly).
"""

from __future__ import annotations

import pytest


@pytest.fixture(params=["sqlite", "postgresql"])
def db_url(request, tmp_path):
    if request.param == "sqlite":
        return f"sqlite:///{tmp_path / 'records.db'}"
    return request.getfixturevalue("pg_url")


@pytest.fixture
def sqlite_url(tmp_path):
    """A fresh SQLite file, never the same file as `db_url`'s."""
    return f"sqlite:///{tmp_path / 'main.db'}"
