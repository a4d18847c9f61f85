"""Reading and writing instruments with their evidence in bulk (SQLAlchemy Core).

An instrument owns rows in nine tables. Loading goes table by table — one query per kind of
evidence, whatever the number of instruments — and builds the domain objects straight from the
result tuples; writing uses executemany inserts. Both stay fast at tens of thousands of
instruments, where the ORM unit of work would spend minutes on object bookkeeping.
Used only by vetting.records.store, inside its transactions.
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from typing import Any

from sqlalchemy import delete, insert, select, text, update
from sqlalchemy.sql import sqltypes
from sqlalchemy.exc import DBAPIError
from sqlalchemy.orm import Session

from vetting.records import gcpause as _gcpause
from vetting.records import models as m
from vetting.records.domain import (
    Instrument,
    Measure,
    NormGroup,
    PercentilePoint,
    Reliability,
    Review,
    SampleCheck,
    SampleCopy,
    SubgroupDifference,
    ValidityStudy,
)

I = m.InstrumentRow.__table__
MEAS = m.MeasureRow.__table__
REL = m.ReliabilityRow.__table__
VAL = m.ValidityStudyRow.__table__
NORM = m.NormGroupRow.__table__
POINT = m.NormPointRow.__table__
SUB = m.SubgroupDifferenceRow.__table__
REV = m.ReviewRow.__table__
SC = m.SampleCopyRow.__table__
CHK = m.SampleCheckRow.__table__

_CHUNK = 2000


#: the garbage collector paused during bulk reads and writes (vetting.records.gcpause: counted
#: across threads, so one worker finishing does not switch it back on under another)
gc_paused = _gcpause.gc_paused


def _grouped(s: Session, table, ids_query, fields: list[str]) -> dict[int, list[tuple]]:
    cols = [table.c.instrument_id, *(table.c[f] for f in fields)]
    q = select(*cols).order_by(table.c.instrument_id, table.c.position)
    if ids_query is not None:
        q = q.where(table.c.instrument_id.in_(ids_query))
    out: dict[int, list[tuple]] = defaultdict(list)
    for row in s.execute(q).all():
        out[row[0]].append(tuple(row[1:]))
    return out


@gc_paused
def load(s: Session, condition=None) -> list[Instrument]:
    """Instruments matching `condition` (a WHERE clause on the instrument table; None = all),
    in the order they were stored, with all their evidence. Eleven queries in all."""
    head_q = select(
        I.c.id, I.c.key, I.c.title, I.c.minutes, I.c.publisher, I.c.edition, I.c.year,
        I.c.mode, I.c.reading_grade, I.c.cost_per_applicant, I.c.currency, I.c.user_qualification,
        I.c.accommodations, I.c.languages, I.c.row_version,
    ).order_by(I.c.id)
    ids_query = None
    if condition is not None:
        head_q = head_q.where(condition)
        ids_query = select(I.c.id).where(condition)
    heads = s.execute(head_q).all()
    if not heads:
        return []

    measures = _grouped(s, MEAS, ids_query, ["attribute_key", "fit"])
    rels = _grouped(s, REL, ids_query, ["type", "value", "n", "interval_days", "sample", "source"])
    vals = _grouped(s, VAL, ids_query,
                    ["criterion", "r", "n", "design", "corrected", "job_family", "sample", "source"])
    norms = _grouped(s, NORM, ids_query,
                     ["id", "key", "group_label", "n", "year", "scope", "mean", "sd", "occupation"])
    subs = _grouped(s, SUB, ids_query, ["groups", "d", "n", "source"])
    revs = _grouped(s, REV, ids_query, ["review_date", "reviewed_by", "note", "stance", "source"])

    points: dict[int, list[PercentilePoint]] = defaultdict(list)
    pq = (
        select(POINT.c.norm_group_id, POINT.c.percentile, POINT.c.raw)
        .join(NORM, NORM.c.id == POINT.c.norm_group_id)
        .order_by(POINT.c.norm_group_id, POINT.c.position)
    )
    if ids_query is not None:
        pq = pq.where(NORM.c.instrument_id.in_(ids_query))
    for gid, pct, raw in s.execute(pq).all():
        points[gid].append(PercentilePoint(percentile=pct, raw=raw))

    sq = select(SC.c.instrument_id, SC.c.id, SC.c.requested, SC.c.received, SC.c.checked_by)
    cq = (
        select(CHK.c.sample_copy_id, CHK.c.item, CHK.c.result, CHK.c.note)
        .join(SC, SC.c.id == CHK.c.sample_copy_id)
        .order_by(CHK.c.sample_copy_id, CHK.c.position)
    )
    if ids_query is not None:
        sq = sq.where(SC.c.instrument_id.in_(ids_query))
        cq = cq.where(SC.c.instrument_id.in_(ids_query))
    checks: dict[int, list[SampleCheck]] = defaultdict(list)
    for cid, item, result, note in s.execute(cq).all():
        checks[cid].append(SampleCheck(item=item, result=result, note=note))
    samples: dict[int, SampleCopy] = {}
    for iid, cid, requested, received, checked_by in s.execute(sq).all():
        samples[iid] = SampleCopy(requested=requested, received=received, checked_by=checked_by,
                                  checks=checks.get(cid, []))

    out = []
    for (iid, key, title, minutes, publisher, edition, year, mode, reading_grade, cost, currency, qual,
         accommodations, languages, row_version) in heads:
        out.append(
            Instrument(
                key=key,
                title=title,
                measures=[Measure(attribute=a, fit=f) for a, f in measures.get(iid, ())],
                minutes=minutes,
                publisher=publisher,
                edition=edition,
                year=year,
                mode=list(mode or []),
                reading_grade=reading_grade,
                cost_per_applicant=cost,
                currency=currency,
                user_qualification=qual,
                accommodations=list(accommodations or []),
                languages=list(languages or []),
                reliability=[
                    Reliability(type=t, value=v, n=n, interval_days=days, sample=smp, source=src)
                    for t, v, n, days, smp, src in rels.get(iid, ())
                ],
                validity=[
                    ValidityStudy(criterion=c, r=r, n=n, design=d, corrected=cor, job_family=fam, sample=smp,
                                  source=src)
                    for c, r, n, d, cor, fam, smp, src in vals.get(iid, ())
                ],
                norms=[
                    NormGroup(key=k, group=g, n=n, year=y, scope=sc, mean=mean, sd=sd, occupation=occ,
                              table=points.get(gid, []))
                    for gid, k, g, n, y, sc, mean, sd, occ in norms.get(iid, ())
                ],
                subgroup_differences=[
                    SubgroupDifference(groups=g, d=d, n=n, source=src) for g, d, n, src in subs.get(iid, ())
                ],
                reviews=[
                    Review(date=date, by=by, note=note, stance=stance, source=src)
                    for date, by, note, stance, src in revs.get(iid, ())
                ],
                sample_copy=samples.get(iid),
                row_version=row_version,
            )
        )
    return out


def head_values(inst: Instrument) -> dict[str, Any]:
    """The instrument table's own columns for `inst` (bookkeeping columns excluded)."""
    return {
        "key": inst.key,
        "title": inst.title,
        "publisher": inst.publisher,
        "edition": inst.edition,
        "year": inst.year,
        "minutes": inst.minutes,
        "reading_grade": inst.reading_grade,
        "cost_per_applicant": inst.cost_per_applicant,
        "currency": inst.currency,
        "user_qualification": inst.user_qualification,
        "mode": list(inst.mode),
        "accommodations": list(inst.accommodations),
        "languages": list(inst.languages),
    }


#: Bulk writes use COPY on PostgreSQL and the driver's executemany on SQLite (see insert_rows);
#: False uses SQLAlchemy's executemany everywhere (the tests compare the two).
USE_COPY = True


def insert_rows(s: Session, table, params: list[dict]) -> None:
    """Insert the rows `params` (dicts with the same keys) into `table`.

    PostgreSQL through psycopg: one COPY ... FROM STDIN streams every row in one round trip
    (executemany sent one INSERT per row: about 17 statements an instrument). SQLite: the
    driver's own executemany with the rows as tuples, each value passed through its column
    type's SQLAlchemy bind processor first (SQLAlchemy's per-row parameter handling took as
    long as the inserts). Elsewhere: SQLAlchemy's executemany in chunks."""
    if not params:
        return
    if _copy_rows(s, table, params) or _sqlite_rows(s, table, params):
        return
    stmt = insert(table)
    for start in range(0, len(params), _CHUNK):
        s.execute(stmt, params[start:start + _CHUNK])


_many = insert_rows


def _copy_target(s: Session):
    """The session's SQLAlchemy connection when COPY can be used on it, else None."""
    if not USE_COPY:
        return None
    conn = s.connection()
    if conn.dialect.name != "postgresql" or conn.dialect.driver != "psycopg":
        return None
    return conn


def _copy_rows(s: Session, table, params: list[dict]) -> bool:
    """COPY the rows into `table` on a psycopg PostgreSQL connection, inside the session's
    transaction; False (nothing done) on any other database.

    Each value goes through the same psycopg adaptation a bound parameter gets: str, int,
    float (its shortest round-trip text), date and aware datetime as they are, None as NULL,
    and a JSON column's value wrapped in psycopg's Json, as SQLAlchemy's JSON type does for
    psycopg (so None there is the JSON value null, as before). A database error comes back as
    SQLAlchemy's matching exception (IntegrityError...), as executemany's would."""
    conn = _copy_target(s)
    if conn is None:
        return False
    import psycopg  # present: the dialect uses it
    from psycopg.types.json import Json

    names = list(params[0])
    json_at = [i for i, n in enumerate(names) if isinstance(table.c[n].type, sqltypes.JSON)]
    preparer = conn.dialect.identifier_preparer
    sql = f"COPY {preparer.format_table(table)} ({', '.join(preparer.quote(n) for n in names)}) FROM STDIN"
    raw = conn.connection.driver_connection
    try:
        with raw.cursor() as cur, cur.copy(sql) as copy:
            write = copy.write_row
            for row in params:
                values = [row[n] for n in names]
                for i in json_at:
                    values[i] = Json(values[i])
                write(values)
    except psycopg.Error as exc:
        raise DBAPIError.instance(sql, None, exc, psycopg.Error) from exc
    return True


def _sqlite_rows(s: Session, table, params: list[dict]) -> bool:
    """INSERT the rows with sqlite3's executemany inside the session's transaction; False
    (nothing done) on any other database. Values go through the bind processor SQLAlchemy
    would apply for the column's type (dates and datetimes to SQLAlchemy's text form, JSON
    to text), so the stored values are the same; a database error comes back as SQLAlchemy's
    matching exception."""
    if not USE_COPY:
        return False
    conn = s.connection()
    if conn.dialect.name != "sqlite":
        return False
    import sqlite3

    dialect = conn.dialect
    names = list(params[0])
    processors = [(i, p) for i, n in enumerate(names)
                  if (p := table.c[n].type.dialect_impl(dialect).bind_processor(dialect)) is not None]
    preparer = dialect.identifier_preparer
    sql = (f"INSERT INTO {preparer.format_table(table)} ({', '.join(preparer.quote(n) for n in names)}) "
           f"VALUES ({', '.join('?' * len(names))})")

    def rows():
        for row in params:
            values = [row[n] for n in names]
            for i, process in processors:
                values[i] = process(values[i])
            yield values

    raw = conn.connection.driver_connection
    cursor = raw.cursor()
    try:
        cursor.executemany(sql, rows())
    except sqlite3.Error as exc:
        raise DBAPIError.instance(sql, None, exc, sqlite3.Error) from exc
    finally:
        cursor.close()
    return True


def _returning_ids(s: Session, table, params: list[dict]) -> list[int]:
    """Insert the rows and return their new ids, in the order of `params`.

    PostgreSQL: the ids are taken from the table's own sequence in one query (ascending, so
    rows get increasing ids in the order given, as the INSERT did), then the rows, ids
    included, go in by COPY. Elsewhere: INSERT ... RETURNING in chunks."""
    if params and _copy_target(s) is not None:
        seq = s.execute(text("SELECT pg_get_serial_sequence(:t, 'id')"), {"t": table.name}).scalar_one()
        if seq is not None:
            ids = sorted(
                s.execute(
                    text("SELECT nextval(CAST(:seq AS regclass)) FROM generate_series(1, :n)"),
                    {"seq": seq, "n": len(params)},
                ).scalars()
            )
            _copy_rows(s, table, [{"id": i, **p} for i, p in zip(ids, params)])
            return ids
    ids: list[int] = []
    stmt = insert(table).returning(table.c.id, sort_by_parameter_order=True)
    for start in range(0, len(params), _CHUNK):
        ids.extend(r[0] for r in s.execute(stmt, params[start:start + _CHUNK]))
    return ids


def insert_new(s: Session, insts: list[Instrument], *, who: str, now: dt.datetime) -> list[int]:
    """Insert new instruments with all their evidence; returns their ids."""
    if not insts:
        return []
    heads = [dict(head_values(x), row_version=1, created_at=now, updated_at=now, updated_by=who) for x in insts]
    ids = _returning_ids(s, I, heads)
    insert_evidence(s, list(zip(ids, insts)))
    return ids


@gc_paused
def insert_evidence(s: Session, pairs: list[tuple[int, Instrument]]) -> None:
    """Insert the evidence rows of each (instrument id, instrument)."""
    meas, rels, vals, subs, revs, norm_params, norm_tables, sc_params, sc_checks = ([] for _ in range(9))
    for iid, x in pairs:
        meas += [{"instrument_id": iid, "position": i, "attribute_key": v.attribute, "fit": v.fit}
                 for i, v in enumerate(x.measures)]
        rels += [{"instrument_id": iid, "position": i, "type": v.type, "value": v.value, "n": v.n,
                  "interval_days": v.interval_days, "sample": v.sample, "source": v.source}
                 for i, v in enumerate(x.reliability)]
        vals += [{"instrument_id": iid, "position": i, "criterion": v.criterion, "r": v.r, "n": v.n,
                  "design": v.design, "corrected": v.corrected, "job_family": v.job_family, "sample": v.sample,
                  "source": v.source}
                 for i, v in enumerate(x.validity)]
        subs += [{"instrument_id": iid, "position": i, "groups": v.groups, "d": v.d, "n": v.n, "source": v.source}
                 for i, v in enumerate(x.subgroup_differences)]
        revs += [{"instrument_id": iid, "position": i, "review_date": v.date, "reviewed_by": v.by, "note": v.note,
                  "stance": v.stance, "source": v.source}
                 for i, v in enumerate(x.reviews)]
        for i, v in enumerate(x.norms):
            norm_params.append({"instrument_id": iid, "position": i, "key": v.key, "group_label": v.group, "n": v.n,
                                "year": v.year, "scope": v.scope, "occupation": v.occupation, "mean": v.mean,
                                "sd": v.sd})
            norm_tables.append(v.table)
        if x.sample_copy is not None:
            c = x.sample_copy
            sc_params.append({"instrument_id": iid, "requested": c.requested, "received": c.received,
                              "checked_by": c.checked_by})
            sc_checks.append(c.checks)
    for table, params in ((MEAS, meas), (REL, rels), (VAL, vals), (SUB, subs), (REV, revs)):
        _many(s, table, params)
    if norm_params:
        gids = _returning_ids(s, NORM, norm_params)
        pts = [{"norm_group_id": gid, "position": j, "percentile": p.percentile, "raw": p.raw}
               for gid, table in zip(gids, norm_tables) for j, p in enumerate(table)]
        _many(s, POINT, pts)
    if sc_params:
        cids = _returning_ids(s, SC, sc_params)
        chk = [{"sample_copy_id": cid, "position": j, "item": c.item, "result": c.result, "note": c.note}
               for cid, cs in zip(cids, sc_checks) for j, c in enumerate(cs)]
        _many(s, CHK, chk)


def delete_evidence(s: Session, ids: list[int]) -> None:
    """Delete the evidence rows of the instruments `ids` (not the instruments themselves)."""
    if not ids:
        return
    for start in range(0, len(ids), _CHUNK):
        part = ids[start:start + _CHUNK]
        s.execute(delete(POINT).where(POINT.c.norm_group_id.in_(select(NORM.c.id).where(NORM.c.instrument_id.in_(part)))))
        s.execute(delete(CHK).where(CHK.c.sample_copy_id.in_(select(SC.c.id).where(SC.c.instrument_id.in_(part)))))
        for table in (MEAS, REL, VAL, NORM, SUB, REV, SC):
            s.execute(delete(table).where(table.c.instrument_id.in_(part)))


def replace(s: Session, iid: int, inst: Instrument, *, who: str, now: dt.datetime) -> None:
    """Overwrite instrument `iid` with `inst` and bump its row_version."""
    delete_evidence(s, [iid])
    s.execute(
        update(I)
        .where(I.c.id == iid)
        .values(**head_values(inst), row_version=I.c.row_version + 1, updated_at=now, updated_by=who)
    )
    insert_evidence(s, [(iid, inst)])


def remove(s: Session, iid: int) -> None:
    delete_evidence(s, [iid])
    s.execute(delete(I).where(I.c.id == iid))
