"""Engine factory and schema upgrades. No engine is ever created at import time.

SQLite connections get WAL, foreign keys and a busy timeout on every connect; write units of
work start with ``BEGIN IMMEDIATE`` so two processes queue for the write lock instead of
failing half-way. Opening a database runs ``alembic upgrade head`` with the migrations shipped
in this package.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Engine, create_engine, event
from sqlalchemy.engine import make_url
from sqlalchemy.exc import ArgumentError, SQLAlchemyError
from sqlalchemy.pool import StaticPool

from vetting.records.errors import BadDatabaseURL, DatabaseUnavailable

MIGRATIONS_DIR = Path(__file__).resolve().parent / "migrations"
BUSY_TIMEOUT_MS = 30_000
#: execution option marking a unit of work that writes (SQLite: BEGIN IMMEDIATE)
WRITE_OPTION = "vetting_write"
#: advisory-lock number that serialises schema upgrades on one PostgreSQL database
_PG_MIGRATION_LOCK = 0x76657474  # "vett"


def sqlite_path(url: str) -> Path | None:
    """The file behind a SQLite URL, or None for other databases and in-memory SQLite."""
    u = make_url(url)
    if u.get_backend_name() != "sqlite":
        return None
    db = u.database
    if not db or db == ":memory:" or db.startswith("file:"):
        return None
    return Path(db)


def _check_sqlite_file(url: str) -> None:
    path = sqlite_path(url)
    if path is None:
        return
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise DatabaseUnavailable(
            f"cannot open database {path}: the folder {folder} does not exist (create it first, or choose another --db)"
        )
    if path.exists():
        if path.is_dir():
            raise DatabaseUnavailable(f"cannot open database {path}: it is a folder, not a database file")
        if not os.access(path, os.W_OK):
            raise DatabaseUnavailable(
                f"cannot open database {path}: the file is read-only; vetting needs to write to it "
                "(make it writable, or copy it and open the copy)"
            )
        if not os.access(folder, os.W_OK):
            raise DatabaseUnavailable(
                f"cannot open database {path}: its folder {folder} is read-only; SQLite needs to create "
                "journal files next to the database"
            )
    elif not os.access(folder, os.W_OK):
        raise DatabaseUnavailable(f"cannot create database {path}: the folder {folder} is read-only")


def make_engine(url: str) -> Engine:
    """A new engine for `url` (any SQLAlchemy URL), with vetting's connection settings."""
    try:
        u = make_url(url)
    except ArgumentError as exc:
        raise BadDatabaseURL(f"not a database URL: {url!r} ({exc})") from None
    backend = u.get_backend_name()
    kwargs: dict[str, Any] = {}
    if backend == "sqlite":
        _check_sqlite_file(url)
        kwargs["connect_args"] = {"check_same_thread": False, "timeout": BUSY_TIMEOUT_MS / 1000}
        if sqlite_path(url) is None:
            kwargs["poolclass"] = StaticPool  # one shared in-memory database
    elif backend == "postgresql":
        kwargs["pool_pre_ping"] = True
        if u.drivername == "postgresql":
            u = u.set(drivername="postgresql+psycopg")
        kwargs["connect_args"] = {"connect_timeout": 10}
    try:
        engine = create_engine(u, **kwargs)
    except ArgumentError as exc:  # an unknown kind of database ("Can't load plugin ...")
        raise BadDatabaseURL(
            f"cannot use database {u.render_as_string(hide_password=True)}: {exc} "
            "(use sqlite:///PATH or postgresql://USER@HOST/NAME)"
        ) from None
    except (ImportError, SQLAlchemyError) as exc:
        raise DatabaseUnavailable(f"cannot use database {u.render_as_string(hide_password=True)}: {exc}") from None
    if backend == "sqlite":
        _install_sqlite_hooks(engine)
    return engine


def _install_sqlite_hooks(engine: Engine) -> None:
    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_conn, _record):  # pragma: no cover - exercised by every test
        # take transaction control away from the driver so BEGIN is ours
        dbapi_conn.isolation_level = None
        cur = dbapi_conn.cursor()
        cur.execute(f"PRAGMA busy_timeout={BUSY_TIMEOUT_MS}")
        cur.execute("PRAGMA foreign_keys=ON")
        cur.execute("PRAGMA journal_mode=WAL")
        cur.execute("PRAGMA synchronous=NORMAL")
        cur.close()

    @event.listens_for(engine, "begin")
    def _on_begin(conn):  # pragma: no cover - exercised by every test
        write = conn.get_execution_options().get(WRITE_OPTION, False)
        conn.exec_driver_sql("BEGIN IMMEDIATE" if write else "BEGIN")


def alembic_config() -> Config:
    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS_DIR))
    return cfg


def head_revision() -> str | None:
    return ScriptDirectory.from_config(alembic_config()).get_current_head()


def current_revision(engine: Engine) -> str | None:
    with engine.connect() as conn:
        return MigrationContext.configure(conn).get_current_revision()


def upgrade(engine: Engine, revision: str = "head") -> None:
    """Bring the schema to `revision` (default: the newest). Nothing happens when it is there."""
    current = current_revision(engine)
    if revision == "head" and current == head_revision():
        return
    if current is not None:
        script = ScriptDirectory.from_config(alembic_config())
        try:
            script.get_revision(current)
        except Exception:
            raise DatabaseUnavailable(
                f"this database has schema revision {current}, written by a newer version of vetting; "
                "upgrade vetting to open it (nothing was changed)"
            ) from None
    cfg = alembic_config()
    with engine.execution_options(**{WRITE_OPTION: True}).begin() as conn:
        # one upgrader at a time: SQLite's BEGIN IMMEDIATE already serialises; on PostgreSQL a
        # transaction-scoped advisory lock does. Alembic then reads the version under the lock.
        if conn.dialect.name == "postgresql":
            conn.exec_driver_sql("SELECT pg_advisory_xact_lock(%s)" % _PG_MIGRATION_LOCK)
        cfg.attributes["connection"] = conn
        command.upgrade(cfg, revision)
