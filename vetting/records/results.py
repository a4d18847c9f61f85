"""Plain records the store hands out besides the catalogue objects of vetting.records.domain:
decisions and audit events. No database session ever escapes with them."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from typing import Any

DECISION_STATUSES = ("draft", "final")
AUDIT_ACTIONS = ("create", "update", "delete", "lock", "import")


@dataclass
class Decision:
    id: int
    job: str
    instrument: str | None
    status: str  # draft | final
    author: str
    fingerprint: str
    created_at: dt.datetime  # UTC
    override_reason: str | None = None
    memo_path: str | None = None
    memo_format: str | None = None


@dataclass
class AuditEvent:
    id: int
    at: dt.datetime  # UTC
    who: str
    action: str  # create | update | delete | lock | import
    entity: str  # attribute | instrument | job | policy | decision | catalogue
    key: str
    before: Any = None  # JSON-compatible snapshot, None for a create
    after: Any = None  # JSON-compatible snapshot, None for a delete
