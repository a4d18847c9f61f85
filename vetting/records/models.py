"""Database tables (SQLModel). Only vetting.records.store and the migrations use these rows;
everything above the records layer receives the plain dataclasses of vetting.records.domain.

Notes for whoever changes this file:
- No ``from __future__ import annotations`` here: SQLModel relationships must resolve at class
  creation time.
- Every schema change needs an Alembic revision in vetting/records/migrations/versions;
  tests/records/test_migrations.py fails when the models and the migrations disagree.
- Lists keep their order through a ``position`` column, so an export gives back the records in
  the order they were imported.
- Datetimes are stored as UTC; SQLite hands them back naive, the store marks them UTC again.
"""

import datetime as dt
from typing import Any, Optional

from sqlalchemy import JSON, Column, DateTime, UniqueConstraint
from sqlmodel import Field, Relationship, SQLModel

#: Constraint names that Alembic batch migrations (SQLite) can find again.
NAMING_CONVENTION = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}
SQLModel.metadata.naming_convention = NAMING_CONVENTION

metadata = SQLModel.metadata


def _json(nullable: bool = False) -> Any:
    return Field(default=None, sa_column=Column(JSON, nullable=nullable))


def _ts(nullable: bool = True) -> Any:
    return Field(default=None, sa_column=Column(DateTime(timezone=True), nullable=nullable))


def _children(order_by: str) -> Any:
    return Relationship(
        sa_relationship_kwargs={
            "cascade": "all, delete-orphan",
            "order_by": order_by,
            "passive_deletes": True,
        }
    )


# ---------------------------------------------------------------------------
# Attributes
# ---------------------------------------------------------------------------


class AttributeRow(SQLModel, table=True):
    __tablename__ = "attribute"

    id: Optional[int] = Field(default=None, primary_key=True)
    key: str = Field(unique=True)
    name: str
    kind: str


# ---------------------------------------------------------------------------
# Jobs
# ---------------------------------------------------------------------------


class JobRow(SQLModel, table=True):
    __tablename__ = "job"

    id: Optional[int] = Field(default=None, primary_key=True)
    key: str = Field(unique=True)
    title: str
    analysis_source: Optional[str] = None
    applicant_reading_grade: Optional[float] = None
    time_budget_minutes: Optional[float] = None
    budget_per_applicant: Optional[float] = None
    staff_qualification: Optional[str] = None
    applicants_per_year: Optional[int] = None
    hires_per_year: Optional[int] = None
    base_rate: Optional[float] = None
    criterion_sd: Optional[float] = None
    tenure_years: Optional[float] = None
    first_ranked_at: Optional[dt.datetime] = _ts()
    row_version: int = Field(default=1)
    created_at: Optional[dt.datetime] = _ts()
    updated_at: Optional[dt.datetime] = _ts()
    updated_by: Optional[str] = None

    requirements: list["RequirementRow"] = _children("RequirementRow.position")
    policies: list["PolicyVersionRow"] = _children("PolicyVersionRow.version")


class RequirementRow(SQLModel, table=True):
    __tablename__ = "requirement"

    id: Optional[int] = Field(default=None, primary_key=True)
    job_id: int = Field(foreign_key="job.id", ondelete="CASCADE", index=True)
    position: int
    attribute_key: str = Field(foreign_key="attribute.key", index=True)
    importance: int
    critical: bool


class PolicyVersionRow(SQLModel, table=True):
    __tablename__ = "policy_version"
    __table_args__ = (UniqueConstraint("job_id", "version", name="uq_policy_version_job_version"),)

    id: Optional[int] = Field(default=None, primary_key=True)
    job_id: int = Field(foreign_key="job.id", ondelete="CASCADE", index=True)
    version: int
    min_reliability: float
    max_norm_age_years: int
    impact_ratio_floor: float
    weights: Any = _json()
    relevant_criteria: Any = _json()
    relevant_job_families: Any = _json()
    created_at: Optional[dt.datetime] = _ts(nullable=False)
    created_by: Optional[str] = None
    locked_at: Optional[dt.datetime] = _ts()
    locked_by: Optional[str] = None


# ---------------------------------------------------------------------------
# Instruments and their evidence
# ---------------------------------------------------------------------------


class InstrumentRow(SQLModel, table=True):
    __tablename__ = "instrument"

    id: Optional[int] = Field(default=None, primary_key=True)
    key: str = Field(unique=True)
    title: str
    publisher: Optional[str] = None
    edition: Optional[str] = None
    year: Optional[int] = None
    minutes: float
    reading_grade: Optional[float] = None
    cost_per_applicant: Optional[float] = None
    currency: Optional[str] = None
    user_qualification: Optional[str] = None
    mode: Any = _json()
    accommodations: Any = _json()
    languages: Any = _json()
    row_version: int = Field(default=1)
    created_at: Optional[dt.datetime] = _ts()
    updated_at: Optional[dt.datetime] = _ts()
    updated_by: Optional[str] = None

    measures: list["MeasureRow"] = _children("MeasureRow.position")
    reliability: list["ReliabilityRow"] = _children("ReliabilityRow.position")
    validity: list["ValidityStudyRow"] = _children("ValidityStudyRow.position")
    norms: list["NormGroupRow"] = _children("NormGroupRow.position")
    subgroup_differences: list["SubgroupDifferenceRow"] = _children("SubgroupDifferenceRow.position")
    reviews: list["ReviewRow"] = _children("ReviewRow.position")
    sample_copies: list["SampleCopyRow"] = _children("SampleCopyRow.id")


class MeasureRow(SQLModel, table=True):
    __tablename__ = "measure"

    id: Optional[int] = Field(default=None, primary_key=True)
    instrument_id: int = Field(foreign_key="instrument.id", ondelete="CASCADE", index=True)
    position: int
    attribute_key: str = Field(foreign_key="attribute.key", index=True)
    fit: str


class ReliabilityRow(SQLModel, table=True):
    __tablename__ = "reliability"

    id: Optional[int] = Field(default=None, primary_key=True)
    instrument_id: int = Field(foreign_key="instrument.id", ondelete="CASCADE", index=True)
    position: int
    type: str
    value: float
    n: Optional[int] = None
    interval_days: Optional[int] = None
    sample: Optional[str] = None
    source: Optional[str] = None


class ValidityStudyRow(SQLModel, table=True):
    __tablename__ = "validity_study"

    id: Optional[int] = Field(default=None, primary_key=True)
    instrument_id: int = Field(foreign_key="instrument.id", ondelete="CASCADE", index=True)
    position: int
    criterion: str
    r: float
    n: int
    design: str
    corrected: str
    job_family: Optional[str] = None
    sample: Optional[str] = None
    source: Optional[str] = None


class NormGroupRow(SQLModel, table=True):
    __tablename__ = "norm_group"

    id: Optional[int] = Field(default=None, primary_key=True)
    instrument_id: int = Field(foreign_key="instrument.id", ondelete="CASCADE", index=True)
    position: int
    key: str
    group_label: str
    n: int
    year: int
    scope: str
    occupation: Optional[str] = None
    mean: float
    sd: float

    points: list["NormPointRow"] = _children("NormPointRow.position")


class NormPointRow(SQLModel, table=True):
    __tablename__ = "norm_point"

    id: Optional[int] = Field(default=None, primary_key=True)
    norm_group_id: int = Field(foreign_key="norm_group.id", ondelete="CASCADE", index=True)
    position: int
    percentile: float
    raw: float


class SubgroupDifferenceRow(SQLModel, table=True):
    __tablename__ = "subgroup_difference"

    id: Optional[int] = Field(default=None, primary_key=True)
    instrument_id: int = Field(foreign_key="instrument.id", ondelete="CASCADE", index=True)
    position: int
    groups: str
    d: float
    n: Optional[int] = None
    source: Optional[str] = None


class ReviewRow(SQLModel, table=True):
    __tablename__ = "review"

    id: Optional[int] = Field(default=None, primary_key=True)
    instrument_id: int = Field(foreign_key="instrument.id", ondelete="CASCADE", index=True)
    position: int
    review_date: dt.date
    reviewed_by: str
    note: str
    stance: str
    source: Optional[str] = None


class SampleCopyRow(SQLModel, table=True):
    __tablename__ = "sample_copy"

    id: Optional[int] = Field(default=None, primary_key=True)
    instrument_id: int = Field(foreign_key="instrument.id", ondelete="CASCADE", unique=True)
    requested: Optional[dt.date] = None
    received: Optional[dt.date] = None
    checked_by: Optional[str] = None

    checks: list["SampleCheckRow"] = _children("SampleCheckRow.position")


class SampleCheckRow(SQLModel, table=True):
    __tablename__ = "sample_check"

    id: Optional[int] = Field(default=None, primary_key=True)
    sample_copy_id: int = Field(foreign_key="sample_copy.id", ondelete="CASCADE", index=True)
    position: int
    item: str
    result: str
    note: Optional[str] = None


# ---------------------------------------------------------------------------
# Decisions and the audit trail (kept when the job or instrument is deleted: keys, not ids)
# ---------------------------------------------------------------------------


class DecisionRow(SQLModel, table=True):
    __tablename__ = "decision"

    id: Optional[int] = Field(default=None, primary_key=True)
    job_key: str = Field(index=True)
    instrument_key: Optional[str] = None
    status: str
    author: str
    fingerprint: str = Field(index=True)
    created_at: Optional[dt.datetime] = _ts(nullable=False)
    override_reason: Optional[str] = None
    memo_path: Optional[str] = None
    memo_format: Optional[str] = None


class AuditEventRow(SQLModel, table=True):
    __tablename__ = "audit_event"

    id: Optional[int] = Field(default=None, primary_key=True)
    at: Optional[dt.datetime] = _ts(nullable=False)
    who: str
    action: str
    entity: str = Field(index=True)
    key: str = Field(index=True)
    before: Any = _json(nullable=True)
    after: Any = _json(nullable=True)


ALL_TABLES = [
    AttributeRow,
    JobRow,
    RequirementRow,
    PolicyVersionRow,
    InstrumentRow,
    MeasureRow,
    ReliabilityRow,
    ValidityStudyRow,
    NormGroupRow,
    NormPointRow,
    SubgroupDifferenceRow,
    ReviewRow,
    SampleCopyRow,
    SampleCheckRow,
    DecisionRow,
    AuditEventRow,
]
