"""The audit trail's snapshot of a record (store._jsonable) is unchanged by its faster form.

An import writes one audit event per record with the record's full snapshot as JSON, so the
snapshot function was rewritten to skip a call for every plain value. Audit events already
stored must stay comparable with new ones, so the snapshot must be exactly what it was: the
reference below is the previous function, unchanged, and the JSON text of both is compared on
seeded synthetic catalogues and on values of every kind a record holds.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import enum
import json
from typing import Any

from vetting.records import domain as d
from vetting.records.store import _catalogue_copy, _jsonable
from vetting.records.synthetic import generate_catalogue

_PLAIN = (str, int, float, bool, type(None))


def reference_jsonable(value: Any) -> Any:
    if isinstance(value, _PLAIN):
        return value
    if isinstance(value, (list, tuple)):
        return [reference_jsonable(v) for v in value]
    if isinstance(value, dict):
        return {str(k): reference_jsonable(v) for k, v in value.items()}
    if isinstance(value, (dt.date, dt.datetime)):
        return value.isoformat()
    fields = getattr(type(value), "__dataclass_fields__", None)
    if fields is not None:
        return {name: reference_jsonable(getattr(value, name)) for name in fields}
    return value


class _Colour(str, enum.Enum):
    RED = "red"


def _same(value: Any) -> None:
    new, old = _jsonable(value), reference_jsonable(value)
    assert json.dumps(new) == json.dumps(old)
    assert new == old


def test_snapshots_of_synthetic_records_are_unchanged():
    for size, seed in ((30, 1), (200, 8)):
        cat = generate_catalogue(size, seed=seed)
        for record in [*cat.attributes, *cat.instruments, *cat.jobs]:
            _same(_catalogue_copy(record))
            _same(record)


def test_snapshots_of_every_kind_of_value_are_unchanged():
    job = generate_catalogue(3, seed=2).jobs[0]
    job = dataclasses.replace(job, first_ranked_at=dt.datetime(2026, 1, 2, 3, 4, 5, tzinfo=dt.UTC))
    _same(job)
    _same([1, 2.5, "x", None, True, (1, 2), {"a": [dt.date(2020, 1, 1)]}, {3: "three"}])
    _same({"colour": _Colour.RED, "nested": [[_Colour.RED], ()], "when": dt.datetime(2026, 1, 1)})
    _same(d.Catalogue())
    assert _jsonable(type) is reference_jsonable(type) is type  # anything else passes through
