"""Bulk writes end up exactly as SQLAlchemy's executemany left them, on both databases.

`vetting import` writes every instrument's evidence rows, and the audit trail, in bulk
(vetting.records.instrument_io.insert_rows). On PostgreSQL these now go through
COPY ... FROM STDIN (PostgreSQL documentation, "COPY": the text format, NULL as \\N, with
backslash, tab and newline escaped), and new instrument, norm-group and sample-copy ids are
taken from each table's sequence (nextval) instead of INSERT ... RETURNING; on SQLite through
the sqlite3 driver's own executemany. The outside reference is SQLAlchemy's executemany path
(USE_COPY = False), which binds every value as a parameter through the same driver: the same
catalogue imported both ways must leave identical rows, ids included, and a row the database
refuses must raise the same error and leave nothing behind.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import uuid

import pytest
from sqlalchemy import Text, cast, create_engine, select
from sqlalchemy.engine import make_url

from vetting.records import instrument_io
from vetting.records import models as m
from vetting.records.errors import RecordsError
from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue

_STAMPS = {"created_at", "updated_at", "at", "locked_at", "first_ranked_at"}
ODD_TEXTS = ["tab\there", "two\nlines\n", "back\\slash", "\\N", "\\.", "quote ' and \"", "Ümlaut – 日本語 🙂", " "]


@pytest.fixture(params=["sqlite", "postgresql"])
def two_urls(request, tmp_path):
    """Two fresh, empty databases of the same kind."""
    if request.param == "sqlite":
        return f"sqlite:///{tmp_path / 'a.db'}", f"sqlite:///{tmp_path / 'b.db'}"
    return request.getfixturevalue("two_pg_urls")


@pytest.fixture
def two_pg_urls(pg_url):
    """pg_url and a second fresh database on the same server (dropped afterwards)."""
    import psycopg

    name = f"vt_{uuid.uuid4().hex[:16]}"
    plain = pg_url.replace("postgresql+psycopg://", "postgresql://", 1)
    with psycopg.connect(plain, autocommit=True) as conn:
        conn.execute(f'CREATE DATABASE "{name}"')
    try:
        yield pg_url, make_url(pg_url).set(database=name).render_as_string(hide_password=False)
    finally:
        with psycopg.connect(plain, autocommit=True) as conn:
            conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')


def _odd_catalogue():
    cat = generate_catalogue(40, seed=77)
    for i, inst in enumerate(cat.instruments):
        odd = ODD_TEXTS[i % len(ODD_TEXTS)]
        inst.publisher = odd
        inst.accommodations = [odd, "extended-time"]
        for review in inst.reviews:
            review.note = f"{odd} {review.note}"
        for rel in inst.reliability:
            rel.sample = odd
    cat.instruments[0].reliability[0].value = 0.1 + 0.2  # a float with no short decimal form
    cat.instruments[1].minutes = 1e-7
    return cat


def _snapshot(url: str) -> dict:
    engine = create_engine(url)
    out = {}
    try:
        with engine.connect() as conn:
            for model in m.ALL_TABLES:
                table = model.__table__
                cols = [
                    cast(c, Text) if isinstance(c.type, m.JSON) else (c.isnot(None) if c.name in _STAMPS else c)
                    for c in table.columns
                ]
                out[table.name] = [tuple(r) for r in conn.execute(select(*cols).order_by(table.c.id))]
    finally:
        engine.dispose()
    return out


def _fill(url: str, use_copy: bool, monkeypatch) -> dict:
    monkeypatch.setattr(instrument_io, "USE_COPY", use_copy)
    cat = _odd_catalogue()
    with Store.open(url, user="tester") as store:
        store.import_catalogue(cat, source="odd.yaml")
        changed = dataclasses.replace(cat, instruments=cat.instruments[5:15], jobs=cat.jobs[:1])
        for inst in changed.instruments:
            inst.title = inst.title + " (revised)"
            inst.norms = inst.norms[::-1]
        store.import_catalogue(changed, replace=True, source="odd-2.yaml")
        exported = store.export_catalogue()
    return {"rows": _snapshot(url), "export": exported}


def test_bulk_writes_leave_the_same_rows_as_executemany(two_urls, monkeypatch):
    with_copy, without = two_urls
    a = _fill(with_copy, True, monkeypatch)
    b = _fill(without, False, monkeypatch)
    assert a["export"] == b["export"]
    assert a["rows"].keys() == b["rows"].keys()
    for table in a["rows"]:
        assert a["rows"][table] == b["rows"][table], table
    assert len(a["rows"]["norm_point"]) > 100 and len(a["rows"]["audit_event"]) > 40
    # the odd texts really went through and came back unchanged
    assert {x.publisher for x in a["export"].instruments} == set(ODD_TEXTS)
    assert a["export"].instruments[0].reliability[0].value == 0.1 + 0.2


@pytest.mark.parametrize("use_copy", [True, False])
def test_a_refused_row_raises_the_same_error_and_writes_nothing(db_url, monkeypatch, use_copy):
    monkeypatch.setattr(instrument_io, "USE_COPY", use_copy)
    with Store.open(db_url, user="tester") as store:
        store.import_catalogue(generate_catalogue(3, seed=1))
        before = _snapshot(db_url)
        with pytest.raises(RecordsError) as info:
            with store._write() as s:
                instrument_io.insert_rows(
                    s, m.MeasureRow.__table__,
                    [{"instrument_id": 1, "position": 9, "attribute_key": "no-such-attribute", "fit": "primary"}],
                )
        assert "the database refused the change (nothing was saved)" in str(info.value)
        assert "foreign key" in str(info.value).lower()
    assert _snapshot(db_url) == before
