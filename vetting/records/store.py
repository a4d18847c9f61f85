"""The records store: the only door to the database.

    with Store.open(url, user="ana") as store:
        store.import_catalogue(cat)
        jobs = store.jobs()

Every method runs one unit of work in its own SQLAlchemy session and returns plain objects
(vetting.records.domain, vetting.records.results); no session or row ever leaves this module.
Every create, change and delete is written to the audit trail in the same transaction.
Instruments and jobs carry a ``row_version``: saving an object read at an older version is
refused with ConcurrentEdit (nothing is overwritten).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import getpass
import os
import shutil
import sqlite3
import tempfile
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from sqlalchemy import Engine, delete, func, insert, select, text
from sqlalchemy.exc import DBAPIError, IntegrityError, OperationalError, SQLAlchemyError
from sqlalchemy.orm import Session, selectinload

from vetting.records import engine as engines
from vetting.records import instrument_io
from vetting.records import models as m
from vetting.records.domain import (
    Attribute,
    Catalogue,
    Instrument,
    Job,
    Policy,
    Requirement,
)
from vetting.records.errors import (
    CatalogueError,
    ConcurrentEdit,
    DatabaseUnavailable,
    KeyConflict,
    NotFound,
    Problem,
    RecordsError,
)
from vetting.records.results import DECISION_STATUSES, AuditEvent, Decision

SQLITE_MAGIC = b"SQLite format 3\x00"
INST = m.InstrumentRow.__table__
AUDIT = m.AuditEventRow.__table__


# ---------------------------------------------------------------------------
# small helpers
# ---------------------------------------------------------------------------


def utcnow() -> dt.datetime:
    return dt.datetime.now(dt.UTC)


def _utc(value: dt.datetime | None) -> dt.datetime | None:
    """Datetimes come back naive from SQLite (stored as UTC) and zoned from PostgreSQL."""
    if value is None:
        return None
    if value.tzinfo is None:
        return value.replace(tzinfo=dt.UTC)
    return value.astimezone(dt.UTC)


_PLAIN = (str, int, float, bool, type(None))
#: Session.info key: while set, Store._audit holds audit rows in this list instead of writing
_AUDIT_HELD = "vetting_audit_held"


#: exact types returned as they are without a call (an import snapshots every instrument:
#: about 130 values each)
_PLAIN_TYPES = frozenset(_PLAIN)


def _jsonable(value: Any) -> Any:
    """A JSON-compatible snapshot of a domain object for the audit trail."""
    plain = _PLAIN_TYPES
    if type(value) in plain or isinstance(value, _PLAIN):
        return value
    if isinstance(value, (list, tuple)):
        return [v if type(v) in plain else _jsonable(v) for v in value]
    if isinstance(value, dict):
        return {str(k): v if type(v) in plain else _jsonable(v) for k, v in value.items()}
    if isinstance(value, (dt.date, dt.datetime)):
        return value.isoformat()
    fields = getattr(type(value), "__dataclass_fields__", None)
    if fields is not None:
        out = {}
        for name in fields:
            v = getattr(value, name)
            out[name] = v if type(v) in plain else _jsonable(v)
        return out
    return value


def default_user() -> str:
    """$VETTING_USER, else the operating-system login name."""
    name = os.environ.get("VETTING_USER")
    if name:
        return name
    try:
        return getpass.getuser()
    except Exception:  # no login name available (some containers)
        return "unknown"


def _when(value: dt.datetime | None) -> str:
    return _utc(value).strftime("%Y-%m-%d %H:%M:%S UTC") if value else "an unknown time"


def _listing(keys: Iterable[str], limit: int = 10) -> str:
    keys = list(keys)
    shown = ", ".join(keys[:limit])
    return shown + (f" and {len(keys) - limit} more" if len(keys) > limit else "")


# ---------------------------------------------------------------------------
# row <-> domain conversion (only here)
# ---------------------------------------------------------------------------

_JOB_LOAD = (selectinload(m.JobRow.requirements), selectinload(m.JobRow.policies))


def _policy_from_row(p: m.PolicyVersionRow) -> Policy:
    return Policy(
        min_reliability=p.min_reliability,
        max_norm_age_years=p.max_norm_age_years,
        impact_ratio_floor=p.impact_ratio_floor,
        weights=dict(p.weights or {}),
        relevant_criteria=list(p.relevant_criteria or []),
        relevant_job_families=list(p.relevant_job_families or []),
        version=p.version,
        locked_at=_utc(p.locked_at),
        created_at=_utc(p.created_at),
    )


def _rules(p: Policy) -> tuple:
    return (
        p.min_reliability,
        p.max_norm_age_years,
        p.impact_ratio_floor,
        list(p.weights.items()),
        list(p.relevant_criteria),
        list(p.relevant_job_families),
    )


def _policy_row(policy: Policy, version: int, who: str) -> m.PolicyVersionRow:
    return m.PolicyVersionRow(
        version=version,
        min_reliability=policy.min_reliability,
        max_norm_age_years=policy.max_norm_age_years,
        impact_ratio_floor=policy.impact_ratio_floor,
        weights=dict(policy.weights),
        relevant_criteria=list(policy.relevant_criteria),
        relevant_job_families=list(policy.relevant_job_families),
        created_at=utcnow(),
        created_by=who,
    )


def _job_from_row(r: m.JobRow) -> Job:
    policy = _policy_from_row(r.policies[-1]) if r.policies else Policy()
    return Job(
        key=r.key,
        title=r.title,
        requirements=[
            Requirement(attribute=x.attribute_key, importance=x.importance, critical=x.critical)
            for x in r.requirements
        ],
        analysis_source=r.analysis_source,
        applicant_reading_grade=r.applicant_reading_grade,
        time_budget_minutes=r.time_budget_minutes,
        budget_per_applicant=r.budget_per_applicant,
        staff_qualification=r.staff_qualification,
        applicants_per_year=r.applicants_per_year,
        hires_per_year=r.hires_per_year,
        base_rate=r.base_rate,
        criterion_sd=r.criterion_sd,
        tenure_years=r.tenure_years,
        policy=policy,
        first_ranked_at=_utc(r.first_ranked_at),
        row_version=r.row_version,
    )


def _fill_job_row(r: m.JobRow, job: Job) -> None:
    r.key = job.key
    r.title = job.title
    r.analysis_source = job.analysis_source
    r.applicant_reading_grade = job.applicant_reading_grade
    r.time_budget_minutes = job.time_budget_minutes
    r.budget_per_applicant = job.budget_per_applicant
    r.staff_qualification = job.staff_qualification
    r.applicants_per_year = job.applicants_per_year
    r.hires_per_year = job.hires_per_year
    r.base_rate = job.base_rate
    r.criterion_sd = job.criterion_sd
    r.tenure_years = job.tenure_years
    r.requirements = [
        m.RequirementRow(position=i, attribute_key=x.attribute, importance=x.importance, critical=x.critical)
        for i, x in enumerate(job.requirements)
    ]


def _decision_from_row(r: m.DecisionRow) -> Decision:
    return Decision(
        id=r.id,
        job=r.job_key,
        instrument=r.instrument_key,
        status=r.status,
        author=r.author,
        fingerprint=r.fingerprint,
        created_at=_utc(r.created_at),
        override_reason=r.override_reason,
        memo_path=r.memo_path,
        memo_format=r.memo_format,
    )


def _catalogue_copy(obj: Any) -> Any:
    """A copy without the database's bookkeeping (versions, timestamps): what a catalogue holds."""
    if isinstance(obj, Instrument):
        return dataclasses.replace(obj, row_version=None)
    if isinstance(obj, Job):
        policy = dataclasses.replace(obj.policy, version=None, locked_at=None, created_at=None)
        return dataclasses.replace(obj, policy=policy, first_ranked_at=None, row_version=None)
    return obj


# ---------------------------------------------------------------------------
# the store
# ---------------------------------------------------------------------------


#: keys per audit lookup: well under the bound-parameter limits of SQLite and PostgreSQL
_AUDIT_STEP = 500


class Store:
    """One database. Open with Store.open(url); close with close() or a `with` block."""

    def __init__(self, engine: Engine, url: str, user: str) -> None:
        self._engine = engine
        self._write_engine = engine.execution_options(**{engines.WRITE_OPTION: True})
        # a read that takes several queries (an instrument and its evidence) sees one snapshot:
        # SQLite's read transactions already do; PostgreSQL needs REPEATABLE READ for it
        self._read_engine = (
            engine.execution_options(isolation_level="REPEATABLE READ")
            if engine.dialect.name == "postgresql"
            else engine
        )
        self.url = url
        self.user = user

    # -- opening and closing -------------------------------------------------

    @classmethod
    def open(cls, url: str, *, user: str | None = None) -> Store:
        """Open (creating or upgrading as needed) the database at `url`.

        Raises DatabaseUnavailable with a message naming the cause: a missing folder, a read-only
        file, an unreachable server, a file that is not a database.
        """
        engine = engines.make_engine(url)
        try:
            engines.upgrade(engine)
        except DatabaseUnavailable:
            engine.dispose()
            raise
        except (SQLAlchemyError, OSError) as exc:
            engine.dispose()
            raise DatabaseUnavailable(_unavailable_message(url, exc)) from None
        except Exception as exc:  # Alembic: unknown revision (a database from a newer vetting)
            engine.dispose()
            raise DatabaseUnavailable(f"cannot open database {_safe_url(url)}: {exc}") from None
        return cls(engine, url, user or default_user())

    def close(self) -> None:
        self._engine.dispose()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"Store({_safe_url(self.url)!r}, user={self.user!r})"

    # -- units of work ---------------------------------------------------------

    @contextmanager
    def _read(self) -> Iterator[Session]:
        try:
            with Session(self._read_engine, expire_on_commit=False) as s:
                with s.begin():
                    yield s
        except OperationalError as exc:
            raise DatabaseUnavailable(_unavailable_message(self.url, exc)) from None

    @contextmanager
    def _write(self) -> Iterator[Session]:
        try:
            with Session(self._write_engine, expire_on_commit=False, autoflush=False) as s:
                with s.begin():
                    yield s
        except IntegrityError as exc:
            detail = str(exc.orig).strip().splitlines()[0]
            if getattr(exc.orig, "sqlstate", None) == "23505" or "UNIQUE constraint failed" in detail:
                raise KeyConflict(
                    f"someone else saved a record with the same key at the same moment; nothing was saved "
                    f"(reload and try again): {detail}"
                ) from None
            raise RecordsError(f"the database refused the change (nothing was saved): {detail}") from None
        except OperationalError as exc:
            raise DatabaseUnavailable(_unavailable_message(self.url, exc)) from None

    def _audit_row(self, action: str, entity: str, key: str, before: Any = None, after: Any = None) -> dict:
        return {
            "at": utcnow(),
            "who": self.user,
            "action": action,
            "entity": entity,
            "key": key,
            "before": _jsonable(before),
            "after": _jsonable(after),
        }

    def _audit(
        self, s: Session, action: str, entity: str, key: str, before: Any = None, after: Any = None
    ) -> None:
        row = self._audit_row(action, entity, key, before, after)
        held = s.info.get(_AUDIT_HELD)
        if held is not None:  # a bulk import: written together, in this order, before it commits
            held.append(row)
        else:
            s.execute(insert(AUDIT), [row])

    @staticmethod
    def _audit_many(s: Session, rows: list[dict]) -> None:
        instrument_io.insert_rows(s, AUDIT, rows)  # COPY on PostgreSQL, executemany elsewhere

    # -- attributes ------------------------------------------------------------

    def attributes(self) -> list[Attribute]:
        with self._read() as s:
            rows = s.scalars(select(m.AttributeRow).order_by(m.AttributeRow.id)).all()
            return [Attribute(key=r.key, name=r.name, kind=r.kind) for r in rows]

    def attribute_keys(self) -> set[str]:
        with self._read() as s:
            return set(s.scalars(select(m.AttributeRow.key)).all())

    def save_attribute(self, attr: Attribute) -> Attribute:
        with self._write() as s:
            self._upsert_attribute(s, attr)
        return attr

    def _upsert_attribute(self, s: Session, attr: Attribute) -> str | None:
        row = s.scalars(select(m.AttributeRow).where(m.AttributeRow.key == attr.key)).one_or_none()
        if row is None:
            s.add(m.AttributeRow(key=attr.key, name=attr.name, kind=attr.kind))
            self._audit(s, "create", "attribute", attr.key, None, attr)
            return "created"
        before = Attribute(key=row.key, name=row.name, kind=row.kind)
        if before == attr:
            return None
        row.name, row.kind = attr.name, attr.kind
        self._audit(s, "update", "attribute", attr.key, before, attr)
        return "updated"

    # -- instruments -----------------------------------------------------------

    def instruments(self) -> list[Instrument]:
        """Every instrument with all its evidence (one query per kind of evidence, no N+1)."""
        with self._read() as s:
            return instrument_io.load(s)

    def instruments_first_by_title(self, limit: int) -> tuple[list[Instrument], int]:
        """The first `limit` instruments in title order (case-insensitive), with all their
        evidence, and how many instruments there are in all. Lets a screen show its first page
        before the whole catalogue is read."""
        with self._read() as s:
            # ordered in Python, not SQL: database collations differ (PostgreSQL's may ignore
            # spaces and punctuation), and the screen sorts by Python's str.lower()
            heads = s.execute(select(INST.c.id, INST.c.title)).all()
            heads.sort(key=lambda row: (row.title.lower(), row.id))
            first = [row.id for row in heads[: max(0, int(limit))]]
            found = instrument_io.load(s, INST.c.id.in_(first)) if first else []
            found.sort(key=lambda inst: inst.title.lower())
            return found, len(heads)

    def instrument_keys(self) -> list[str]:
        with self._read() as s:
            return list(s.scalars(select(m.InstrumentRow.key).order_by(m.InstrumentRow.id)).all())

    def instrument(self, key: str) -> Instrument:
        with self._read() as s:
            found = instrument_io.load(s, INST.c.key == key)
            if not found:
                raise NotFound(self._not_found_message(s, "instrument", key))
            return found[0]

    def save_instrument(self, inst: Instrument) -> Instrument:
        """Create the instrument, or update it when inst.row_version is the stored version
        (ConcurrentEdit otherwise, naming who saved it last and when). Returns the stored object
        with its new row_version."""
        with self._write() as s:
            self._check_attributes(s, [x.attribute for x in inst.measures], f"instrument {inst.key!r}")
            head = self._head(s, INST, inst.key)
            if head is None:
                if inst.row_version is not None:
                    raise NotFound(
                        f"instrument {inst.key!r} no longer exists (someone deleted it after you opened it); "
                        "nothing was saved"
                    )
                instrument_io.insert_new(s, [inst], who=self.user, now=utcnow())
                self._audit(s, "create", "instrument", inst.key, None, _catalogue_copy(inst))
            else:
                self._check_version(head, inst.row_version, "instrument", inst.key)
                [before] = instrument_io.load(s, INST.c.id == head.id)
                instrument_io.replace(s, head.id, inst, who=self.user, now=utcnow())
                self._audit(s, "update", "instrument", inst.key, _catalogue_copy(before), _catalogue_copy(inst))
            [saved] = instrument_io.load(s, INST.c.key == inst.key)
            return saved

    def delete_instrument(self, key: str, *, row_version: int | None = None) -> None:
        """Delete the instrument and its evidence. With `row_version`, only if it is still the
        stored version (ConcurrentEdit otherwise); without, whatever version is stored."""
        with self._write() as s:
            head = self._head(s, INST, key)
            if head is None:
                raise NotFound(self._not_found_message(s, "instrument", key))
            if row_version is not None:
                self._check_version(head, row_version, "instrument", key)
            [before] = instrument_io.load(s, INST.c.id == head.id)
            instrument_io.remove(s, head.id)
            self._audit(s, "delete", "instrument", key, _catalogue_copy(before), None)

    # -- jobs and policies -----------------------------------------------------

    @instrument_io.gc_paused
    def jobs(self) -> list[Job]:
        """Every job, each with its current (newest) policy version."""
        with self._read() as s:
            rows = s.scalars(select(m.JobRow).options(*_JOB_LOAD).order_by(m.JobRow.id)).all()
            return [_job_from_row(r) for r in rows]

    def job_keys(self) -> list[str]:
        with self._read() as s:
            return list(s.scalars(select(m.JobRow.key).order_by(m.JobRow.id)).all())

    def job(self, key: str) -> Job:
        with self._read() as s:
            row = s.scalars(select(m.JobRow).options(*_JOB_LOAD).where(m.JobRow.key == key)).one_or_none()
            if row is None:
                raise NotFound(self._not_found_message(s, "job", key))
            return _job_from_row(row)

    def save_job(self, job: Job) -> Job:
        """Create the job, or update it when job.row_version is the stored version. A policy whose
        rules differ from the current version becomes a new policy version."""
        with self._write() as s:
            self._check_attributes(s, [x.attribute for x in job.requirements], f"job {job.key!r}")
            row = self._locked_row(s, m.JobRow, job.key, _JOB_LOAD)
            if row is None:
                if job.row_version is not None:
                    raise NotFound(
                        f"job {job.key!r} no longer exists (someone deleted it after you opened it); nothing was saved"
                    )
                self._create_job(s, job)
            else:
                self._check_version(row, job.row_version, "job", job.key)
                self._replace_job(s, row, job)
        return self.job(job.key)

    def _create_job(self, s: Session, job: Job) -> None:
        now = utcnow()
        row = m.JobRow(key=job.key, title=job.title, row_version=1, created_at=now, updated_at=now, updated_by=self.user)
        _fill_job_row(row, job)
        row.policies = [_policy_row(job.policy, 1, self.user)]
        s.add(row)
        self._audit(s, "create", "job", job.key, None, _catalogue_copy(job))

    def _replace_job(self, s: Session, row: m.JobRow, job: Job) -> None:
        before = _catalogue_copy(_job_from_row(row))
        row.requirements = []
        s.flush()
        _fill_job_row(row, job)
        row.row_version += 1
        row.updated_at = utcnow()
        row.updated_by = self.user
        self._new_policy_version(s, row, job.policy)
        self._audit(s, "update", "job", job.key, before, _catalogue_copy(job))

    def _new_policy_version(self, s: Session, row: m.JobRow, policy: Policy) -> bool:
        """Append a policy version when `policy` has other rules than the current one."""
        current = row.policies[-1] if row.policies else None
        # exact comparison (list order included), so what was saved is what comes back
        if current is not None and _rules(_policy_from_row(current)) == _rules(policy):
            return False
        version = (current.version + 1) if current is not None else 1
        new = _policy_row(policy, version, self.user)
        row.policies.append(new)
        self._audit(
            s, "create", "policy", row.key,
            _jsonable(_policy_from_row(current)) if current is not None else None,
            dict(_jsonable(dataclasses.replace(policy, locked_at=None, created_at=None)), version=version),
        )
        return True

    def delete_job(self, key: str, *, row_version: int | None = None) -> None:
        with self._write() as s:
            row = self._locked_row(s, m.JobRow, key, _JOB_LOAD)
            if row is None:
                raise NotFound(self._not_found_message(s, "job", key))
            if row_version is not None:  # None: delete whatever version is stored
                self._check_version(row, row_version, "job", key)
            before = _catalogue_copy(_job_from_row(row))
            s.delete(row)
            self._audit(s, "delete", "job", key, before, None)

    def policy_versions(self, job_key: str) -> list[Policy]:
        """Every policy version of the job, oldest first."""
        with self._read() as s:
            row = s.scalars(select(m.JobRow).options(*_JOB_LOAD).where(m.JobRow.key == job_key)).one_or_none()
            if row is None:
                raise NotFound(self._not_found_message(s, "job", job_key))
            return [_policy_from_row(p) for p in row.policies]

    def set_policy(self, job_key: str, policy: Policy) -> Policy:
        """Make `policy` the job's rules (a new version when they differ); returns the current version."""
        with self._write() as s:
            row = self._locked_row(s, m.JobRow, job_key, _JOB_LOAD)
            if row is None:
                raise NotFound(self._not_found_message(s, "job", job_key))
            self._new_policy_version(s, row, policy)
            s.flush()
            return _policy_from_row(row.policies[-1])

    def lock_policy(self, job_key: str) -> Policy:
        """Fix the current policy version (UTC time stamp) before any results are seen."""
        with self._write() as s:
            row = self._locked_row(s, m.JobRow, job_key, _JOB_LOAD)
            if row is None:
                raise NotFound(self._not_found_message(s, "job", job_key))
            current = row.policies[-1]
            if current.locked_at is not None:
                raise RecordsError(
                    f"policy version {current.version} of job {job_key!r} is already locked "
                    f"(by {current.locked_by or 'unknown'} at {_when(current.locked_at)}); "
                    "a locked version cannot be changed — set new rules to make a new version"
                )
            current.locked_at = utcnow()
            current.locked_by = self.user
            self._audit(
                s, "lock", "policy", job_key, None, {"version": current.version, "locked_at": current.locked_at}
            )
            s.flush()
            return _policy_from_row(current)

    def mark_ranked(self, job_key: str) -> dt.datetime:
        """Record when the job was first ranked (only the first call sets it); returns that time."""
        with self._write() as s:
            row = self._locked_row(s, m.JobRow, job_key, ())
            if row is None:
                raise NotFound(self._not_found_message(s, "job", job_key))
            if row.first_ranked_at is None:
                row.first_ranked_at = utcnow()
                self._audit(s, "update", "job", job_key, {"first_ranked_at": None},
                            {"first_ranked_at": row.first_ranked_at})
            return _utc(row.first_ranked_at)

    # -- decisions -------------------------------------------------------------

    def record_decision(
        self,
        job_key: str,
        instrument_key: str | None,
        *,
        status: str,
        by: str,
        fingerprint: str,
        override_reason: str | None = None,
        memo_path: str | None = None,
        memo_format: str | None = None,
    ) -> int:
        """Store a decision (draft or final) and return its id."""
        if status not in DECISION_STATUSES:
            raise RecordsError(f"decision status {status!r} is not allowed; use one of: {', '.join(DECISION_STATUSES)}")
        if memo_format is None and memo_path:
            memo_format = Path(memo_path).suffix.lstrip(".").lower() or None
        with self._write() as s:
            if s.scalar(select(m.JobRow.id).where(m.JobRow.key == job_key)) is None:
                raise NotFound(self._not_found_message(s, "job", job_key))
            if instrument_key is not None and s.scalar(
                select(m.InstrumentRow.id).where(m.InstrumentRow.key == instrument_key)
            ) is None:
                raise NotFound(self._not_found_message(s, "instrument", instrument_key))
            row = m.DecisionRow(
                job_key=job_key,
                instrument_key=instrument_key,
                status=status,
                author=by,
                fingerprint=fingerprint,
                created_at=utcnow(),
                override_reason=override_reason,
                memo_path=memo_path,
                memo_format=memo_format,
            )
            s.add(row)
            s.flush()
            self._audit(s, "create", "decision", job_key, None, _decision_from_row(row))
            return row.id

    def decisions(self, job_key: str | None = None) -> list[Decision]:
        with self._read() as s:
            q = select(m.DecisionRow).order_by(m.DecisionRow.id)
            if job_key is not None:
                q = q.where(m.DecisionRow.job_key == job_key)
            return [_decision_from_row(r) for r in s.scalars(q).all()]

    def decision_by_fingerprint(self, fingerprint: str) -> Decision | None:
        """The newest decision with this fingerprint, or None."""
        with self._read() as s:
            row = s.scalars(
                select(m.DecisionRow).where(m.DecisionRow.fingerprint == fingerprint).order_by(m.DecisionRow.id.desc())
            ).first()
            return _decision_from_row(row) if row is not None else None

    # -- audit trail -----------------------------------------------------------

    def audit_events(self, *, job: str | None = None, instrument: str | None = None) -> list[AuditEvent]:
        """The audit trail, oldest first; with `job`, the job's own, policy and decision events;
        with `instrument`, the instrument's events."""
        with self._read() as s:
            q = select(m.AuditEventRow).order_by(m.AuditEventRow.id)
            if job is not None and instrument is not None:
                q = q.where(
                    ((m.AuditEventRow.key == job) & m.AuditEventRow.entity.in_(("job", "policy", "decision")))
                    | ((m.AuditEventRow.key == instrument) & (m.AuditEventRow.entity == "instrument"))
                )
            elif job is not None:
                q = q.where(m.AuditEventRow.key == job, m.AuditEventRow.entity.in_(("job", "policy", "decision")))
            elif instrument is not None:
                q = q.where(m.AuditEventRow.key == instrument, m.AuditEventRow.entity == "instrument")
            return [
                AuditEvent(
                    id=r.id, at=_utc(r.at), who=r.who, action=r.action, entity=r.entity, key=r.key,
                    before=r.before, after=r.after,
                )
                for r in s.scalars(q).all()
            ]

    def audit_events_for(self, *, jobs=(), instruments=(), last: int | None = None) -> list[AuditEvent]:
        """The audit events of many records at once, oldest first: for each key in `jobs` the
        job's own, policy and decision events, for each key in `instruments` the instrument's.
        With `last`, only the newest `last` of them. One query per 500 keys (not one per
        record), so a memo over a large catalogue stays fast; with `last`, only the events kept
        are read whole (their before/after values decoded)."""
        A = m.AuditEventRow
        rows = []
        with self._read() as s:
            if last is not None:
                ids: list[int] = []
                for entities, keys in self._audit_groups(jobs, instruments):
                    ids += [i for i, e in s.execute(select(A.id, A.entity).where(A.key.in_(keys))) if e in entities]
                ids = sorted(ids)[len(ids) - last :] if last > 0 else []
                for i in range(0, len(ids), _AUDIT_STEP):
                    rows += s.scalars(select(A).where(A.id.in_(ids[i : i + _AUDIT_STEP]))).all()
            else:
                for entities, keys in self._audit_groups(jobs, instruments):
                    rows += [r for r in s.scalars(select(A).where(A.key.in_(keys))) if r.entity in entities]
            rows.sort(key=lambda r: r.id)
            return [
                AuditEvent(
                    id=r.id, at=_utc(r.at), who=r.who, action=r.action, entity=r.entity, key=r.key,
                    before=r.before, after=r.after,
                )
                for r in rows
            ]

    def audit_event_count_for(self, *, jobs=(), instruments=()) -> int:
        """How many events audit_events_for(jobs=..., instruments=...) would return."""
        A = m.AuditEventRow
        with self._read() as s:
            return sum(
                n
                for entities, keys in self._audit_groups(jobs, instruments)
                for e, n in s.execute(select(A.entity, func.count()).where(A.key.in_(keys)).group_by(A.entity))
                if e in entities
            )

    @staticmethod
    def _audit_groups(jobs, instruments):
        """(entities, up to _AUDIT_STEP keys) to look up. The queries select on the key alone
        and the entity is checked here: on the key's index the database reads only the rows of
        these keys, where a condition on the entity as well can lead a planner without table
        statistics (a fresh SQLite file) to read every row of an entity once per group."""
        jobs, instruments = sorted(set(jobs)), sorted(set(instruments))
        for entities, keys in ((frozenset({"job", "policy", "decision"}), jobs), (frozenset({"instrument"}), instruments)):
            for i in range(0, len(keys), _AUDIT_STEP):
                yield entities, keys[i : i + _AUDIT_STEP]

    # -- catalogues ------------------------------------------------------------

    @instrument_io.gc_paused
    def import_catalogue(self, cat: Catalogue, *, replace: bool = False, source: str | None = None) -> dict[str, int]:
        """Write a whole catalogue in ONE transaction: every record lands, or none does.

        Existing instrument or job keys raise KeyConflict (listing them) unless `replace`; with it,
        each old record is replaced and the change audited with before/after values. Attributes are
        created or updated by key. A job policy that differs from the current version becomes a new
        policy version. Returns counts: attributes, instruments, jobs (records written), created,
        replaced, attributes_created, attributes_updated, policy_versions.
        """
        where = source or "<catalogue>"
        self._check_duplicates(cat, where)
        counts = dict.fromkeys(
            ("attributes", "instruments", "jobs", "created", "replaced", "attributes_created",
             "attributes_updated", "policy_versions"),
            0,
        )
        with self._write() as s:
            # audit events of this import are held and written in one go at the end (one round
            # trip instead of one per attribute and job)
            held: list[dict] = []
            s.info[_AUDIT_HELD] = held
            known = set(s.scalars(select(m.AttributeRow.key)).all()) | {a.key for a in cat.attributes}
            problems = []
            for i, inst in enumerate(cat.instruments):
                for j, x in enumerate(inst.measures):
                    if x.attribute not in known:
                        problems.append(Problem(where, None, f"instruments[{i}].measures[{j}].attribute",
                                                f"unknown attribute {x.attribute!r}; declare it under attributes"))
            for i, job in enumerate(cat.jobs):
                for j, x in enumerate(job.requirements):
                    if x.attribute not in known:
                        problems.append(Problem(where, None, f"jobs[{i}].requirements[{j}].attribute",
                                                f"unknown attribute {x.attribute!r}; declare it under attributes"))
            if problems:
                raise CatalogueError(problems[:50], truncated=len(problems) > 50)

            inst_keys = [x.key for x in cat.instruments]
            job_keys = [x.key for x in cat.jobs]
            existing_inst = self._heads_by_keys(s, INST, inst_keys)
            existing_jobs = {
                r.key: r
                for r in s.scalars(select(m.JobRow).options(*_JOB_LOAD).where(m.JobRow.key.in_(job_keys))).all()
            } if job_keys else {}
            if (existing_inst or existing_jobs) and not replace:
                clash = [f"instrument {k}" for k in inst_keys if k in existing_inst] + [
                    f"job {k}" for k in job_keys if k in existing_jobs
                ]
                raise KeyConflict(
                    f"{where}: these records already exist: {_listing(clash)}; nothing was imported "
                    "(use --replace to replace them)",
                    keys=[k for k in inst_keys if k in existing_inst] + [k for k in job_keys if k in existing_jobs],
                )

            for attr in cat.attributes:
                done = self._upsert_attribute(s, attr)
                counts["attributes"] += 1
                if done == "created":
                    counts["attributes_created"] += 1
                elif done == "updated":
                    counts["attributes_updated"] += 1
            s.flush()
            now = utcnow()
            new = [x for x in cat.instruments if x.key not in existing_inst]
            instrument_io.insert_new(s, new, who=self.user, now=now)
            audit = [self._audit_row("create", "instrument", x.key, None, _catalogue_copy(x)) for x in new]
            old = [x for x in cat.instruments if x.key in existing_inst]
            befores: dict[str, Instrument] = {}
            for start in range(0, len(old), 2000):
                part = [x.key for x in old[start:start + 2000]]
                befores.update((b.key, b) for b in instrument_io.load(s, INST.c.key.in_(part)))
            for x in old:
                instrument_io.replace(s, existing_inst[x.key].id, x, who=self.user, now=now)
                audit.append(
                    self._audit_row("update", "instrument", x.key, _catalogue_copy(befores[x.key]), _catalogue_copy(x))
                )
            held.extend(audit)
            counts["created"] += len(new)
            counts["replaced"] += len(old)
            counts["instruments"] += len(cat.instruments)
            for job in cat.jobs:
                row = existing_jobs.get(job.key)
                if row is None:
                    self._create_job(s, job)
                    counts["created"] += 1
                    counts["policy_versions"] += 1
                else:
                    before_versions = len(row.policies)
                    self._replace_job(s, row, job)
                    counts["policy_versions"] += len(row.policies) - before_versions
                    counts["replaced"] += 1
                counts["jobs"] += 1
            self._audit(s, "import", "catalogue", source or "", None, dict(counts, replace=replace))
            del s.info[_AUDIT_HELD]
            self._audit_many(s, held)  # one bulk write (COPY on PostgreSQL), same order as before
        return counts

    @staticmethod
    def _check_duplicates(cat: Catalogue, where: str) -> None:
        problems = []
        for section, items in (("attributes", cat.attributes), ("instruments", cat.instruments), ("jobs", cat.jobs)):
            seen: set[str] = set()
            for i, item in enumerate(items):
                if item.key in seen:
                    problems.append(Problem(where, None, f"{section}[{i}].key", f"duplicate key {item.key!r}"))
                seen.add(item.key)
        if problems:
            raise CatalogueError(problems)

    @instrument_io.gc_paused
    def export_catalogue(
        self, *, jobs: list[str] | None = None, instruments: list[str] | None = None
    ) -> Catalogue:
        """All records (both None), or the named jobs and/or instruments with the attributes they use.
        The objects carry no database bookkeeping (row_version, policy version...), exactly as a
        catalogue file would give them."""
        with self._read() as s:
            everything = jobs is None and instruments is None
            q_job = select(m.JobRow).options(*_JOB_LOAD).order_by(m.JobRow.id)
            if everything:
                found = instrument_io.load(s)
                job_rows = s.scalars(q_job).all()
            else:
                found = self._instruments_by_keys(s, instruments or [])
                job_rows = self._rows_by_keys(s, q_job, m.JobRow, jobs or [], "job")
            out_inst = [_catalogue_copy(x) for x in found]
            out_jobs = [_catalogue_copy(_job_from_row(r)) for r in job_rows]
            attr_rows = s.scalars(select(m.AttributeRow).order_by(m.AttributeRow.id)).all()
            if not everything:
                needed = {x.attribute for i in out_inst for x in i.measures} | {
                    x.attribute for j in out_jobs for x in j.requirements
                }
                attr_rows = [a for a in attr_rows if a.key in needed]
            attrs = [Attribute(key=a.key, name=a.name, kind=a.kind) for a in attr_rows]
            return Catalogue(attributes=attrs, instruments=out_inst, jobs=out_jobs)

    @staticmethod
    def _instruments_by_keys(s: Session, keys: list[str]) -> list[Instrument]:
        keys = list(dict.fromkeys(keys))
        found: dict[str, Instrument] = {}
        for start in range(0, len(keys), 2000):
            found.update((x.key, x) for x in instrument_io.load(s, INST.c.key.in_(keys[start:start + 2000])))
        missing = [k for k in keys if k not in found]
        if missing:
            raise NotFound(f"no instrument with key {_listing(missing)}")
        return [found[k] for k in keys]

    @staticmethod
    def _heads_by_keys(s: Session, table, keys: list[str]) -> dict[str, Any]:
        """key -> (id, key, row_version, updated_by, updated_at) of the stored records among `keys`."""
        out: dict[str, Any] = {}
        for start in range(0, len(keys), 2000):
            q = select(table.c.id, table.c.key, table.c.row_version, table.c.updated_by, table.c.updated_at).where(
                table.c.key.in_(keys[start:start + 2000])
            )
            out.update((r.key, r) for r in s.execute(q))
        return out

    def _head(self, s: Session, table, key: str) -> Any:
        """(id, key, row_version, updated_by, updated_at) of one stored record, locked for this
        transaction (SQLite: the whole database already is, by BEGIN IMMEDIATE)."""
        q = select(table.c.id, table.c.key, table.c.row_version, table.c.updated_by, table.c.updated_at).where(
            table.c.key == key
        )
        if s.bind.dialect.name == "postgresql":
            q = q.with_for_update()
        return s.execute(q).one_or_none()

    def _rows_by_keys(self, s: Session, query, model, keys: list[str], what: str) -> list:
        if not keys:
            return []
        rows = {r.key: r for r in s.scalars(query.where(model.key.in_(keys))).all()}
        missing = [k for k in keys if k not in rows]
        if missing:
            raise NotFound(f"no {what} with key {_listing(missing)}")
        return [rows[k] for k in dict.fromkeys(keys)]

    # -- whole database --------------------------------------------------------

    def is_empty(self) -> bool:
        """True when no table holds a row (a fresh database)."""
        with self._read() as s:
            return all(s.scalar(select(func.count()).select_from(t)) == 0 for t in m.metadata.sorted_tables)

    def backup(self, path: str | os.PathLike) -> Path:
        """SQLite: a consistent copy of the database, while in use, to a NEW file (online backup API).
        PostgreSQL: NotImplementedError (the CLI writes a catalogue export instead)."""
        if self._engine.dialect.name != "sqlite":
            raise NotImplementedError("backup of a non-SQLite database is a catalogue export (see vetting backup)")
        target = Path(path)
        if target.exists():
            raise RecordsError(f"backup target {target} already exists; choose a new file name")
        if not target.parent.is_dir():
            raise RecordsError(f"cannot write backup {target}: the folder {target.parent} does not exist")
        raw = self._engine.raw_connection()
        try:
            dst = sqlite3.connect(str(target))
            try:
                raw.driver_connection.backup(dst)
                dst.execute("PRAGMA journal_mode=DELETE")  # one self-contained file
            finally:
                dst.close()
        except sqlite3.Error as exc:
            target.unlink(missing_ok=True)
            raise DatabaseUnavailable(f"backup to {target} failed: {exc}") from None
        finally:
            raw.close()
        return target

    def restore(self, path: str | os.PathLike) -> dict[str, int]:
        """Copy every record (audit trail, policy versions and decisions included) from a SQLite
        backup file into this database, which must be empty. The backup file itself is not changed
        (an older backup is upgraded in a temporary copy). Returns rows copied per table."""
        source = Path(path)
        if not source.is_file():
            raise NotFound(f"backup file {source} does not exist")
        with open(source, "rb") as fh:
            if fh.read(len(SQLITE_MAGIC)) != SQLITE_MAGIC:
                raise RecordsError(f"{source} is not a vetting SQLite backup")
        if not self.is_empty():
            raise RecordsError(
                f"cannot restore into {_safe_url(self.url)}: it already holds records; restore only into an empty database"
            )
        with tempfile.TemporaryDirectory(prefix="vetting-restore-") as tmp:
            copy = Path(tmp) / "backup.db"
            shutil.copyfile(source, copy)
            src = engines.make_engine(f"sqlite:///{copy}")
            try:
                try:
                    engines.upgrade(src)
                except SQLAlchemyError as exc:
                    raise RecordsError(f"{source} is not a vetting backup: {exc.orig if isinstance(exc, DBAPIError) else exc}") from None
                return self._copy_tables(src, str(source))
            finally:
                src.dispose()

    def _copy_tables(self, src: Engine, label: str) -> dict[str, int]:
        copied: dict[str, int] = {}
        with src.connect() as sconn, self._write() as s:
            conn = s.connection()
            for table in m.metadata.sorted_tables:
                rows = [dict(r) for r in sconn.execute(select(table)).mappings()]
                for r in rows:
                    for c in table.columns:
                        if isinstance(r.get(c.name), dt.datetime):
                            r[c.name] = _utc(r[c.name])
                for start in range(0, len(rows), 1000):
                    conn.execute(insert(table), rows[start:start + 1000])
                copied[table.name] = len(rows)
            if conn.dialect.name == "postgresql":
                for table in m.metadata.sorted_tables:
                    conn.execute(
                        text(
                            f"SELECT setval(pg_get_serial_sequence('{table.name}', 'id'), "
                            f"COALESCE((SELECT MAX(id) FROM {table.name}), 0) + 1, false)"
                        )
                    )
            self._audit(s, "import", "backup", label, None, copied)
        return copied

    # -- internals -------------------------------------------------------------

    def _locked_row(self, s: Session, model, key: str, options: Iterable) -> Any:
        q = select(model).options(*options).where(model.key == key)
        if s.bind.dialect.name == "postgresql":
            q = q.with_for_update(of=model)
        return s.scalars(q).one_or_none()

    @staticmethod
    def _check_version(row, expected: int | None, what: str, key: str) -> None:
        if expected is None:
            raise KeyConflict(
                f"{what} {key!r} already exists (saved by {row.updated_by or 'unknown'} at {_when(row.updated_at)}); "
                f"open it and edit it, or import with --replace",
                keys=[key],
            )
        if expected != row.row_version:
            who = row.updated_by or "unknown"
            when = _when(row.updated_at)
            raise ConcurrentEdit(
                f"{what} {key!r} was changed by {who} at {when} after you opened it "
                f"(you had version {expected}, the database has version {row.row_version}); "
                "nothing was saved — reload it and make your change again",
                who=who,
                when=when,
            )

    @staticmethod
    def _check_attributes(s: Session, keys: list[str], what: str) -> None:
        known = set(s.scalars(select(m.AttributeRow.key).where(m.AttributeRow.key.in_(keys))).all()) if keys else set()
        missing = [k for k in dict.fromkeys(keys) if k not in known]
        if missing:
            raise NotFound(f"{what} uses unknown attribute(s) {_listing(missing)}; add them first")

    @staticmethod
    def _not_found_message(s: Session, what: str, key: str) -> str:
        model = m.InstrumentRow if what == "instrument" else m.JobRow
        keys = list(s.scalars(select(model.key).order_by(model.key).limit(11)).all())
        hint = f" (known: {_listing(keys)})" if keys else f" (there are no {what}s yet)"
        return f"no {what} with key {key!r}{hint}"


def _safe_url(url: str) -> str:
    try:
        from sqlalchemy.engine import make_url

        return make_url(url).render_as_string(hide_password=True)
    except Exception:
        return url


def _unavailable_message(url: str, exc: BaseException) -> str:
    detail = getattr(exc, "orig", None) or exc
    text_ = str(detail).strip().splitlines()[0] if str(detail).strip() else type(detail).__name__
    hint = ""
    low = text_.lower()
    if "readonly" in low or "read-only" in low:
        hint = " (the database or its folder is read-only)"
    elif "disk" in low and "full" in low:
        hint = " (the disk is full; free some space and try again — nothing was saved)"
    elif "connection" in low or "connect" in low:
        hint = " (is the database server running and reachable?)"
    elif "not a database" in low:
        hint = " (the file is not a vetting database)"
    return f"cannot use database {_safe_url(url)}: {text_}{hint}"
