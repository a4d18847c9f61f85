"""Record fingerprints: did anything the memo relied on change since it was written?

Each record the memo used (the job profile, the policy version with its rules, and every
instrument considered with all its evidence) is turned into canonical JSON: the domain
dataclass field by field (what dataclasses.asdict gives), keys sorted, dates and times in ISO 8601, no whitespace,
ASCII only. Each record gets its own SHA-256 (a sub-fingerprint), and the memo's fingerprint is
the SHA-256 of the canonical JSON of all of them together. The memo stores the fingerprint and
the sub-fingerprints, so `verify` can recompute them from the database and name what changed.

Database bookkeeping that says nothing about the evidence (row versions, when the job was first
ranked) is left out, so saving a record unchanged or re-ranking a job does not count as a change.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import hashlib
import json
from dataclasses import dataclass, field
from typing import Any

from vetting.records.domain import Instrument, Job, Policy

#: Bumped only if the canonical form ever changes; stored in every stamp.
FINGERPRINT_FORMAT = 1

_JOB_SKIP = {"row_version", "first_ranked_at", "policy"}
_INSTRUMENT_SKIP = {"row_version"}


_NOT_DATACLASS = ()
_FIELDS: dict[type, tuple[str, ...]] = {}  # field names per dataclass type (() for other types)


def _field_names(t: type) -> tuple[str, ...]:
    """The field names of dataclass type `t` (() for any other type), looked up once per type."""
    names = _FIELDS.get(t)
    if names is None:
        names = _FIELDS[t] = (
            tuple(f.name for f in dataclasses.fields(t)) if dataclasses.is_dataclass(t) else _NOT_DATACLASS
        )
    return names


def _plain(value: Any) -> Any:
    """Plain JSON-ready data in one pass: the same result as dataclasses.asdict followed by a
    walk over the dicts and lists, without building the intermediate copies."""
    t = type(value)
    if t is str or t is int or t is bool or value is None:
        return value
    if t is float:
        # 30 and 30.0 are the same figure whichever database column type held it
        return int(value) if value.is_integer() and abs(value) < 2**53 else value
    if t is list or t is tuple:
        return [_plain(v) for v in value]
    names = _field_names(t)
    if names:
        return {n: _plain(getattr(value, n)) for n in names}
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, (set, frozenset)):
        return sorted(_plain(v) for v in value)
    if isinstance(value, (dt.datetime, dt.date)):
        return value.isoformat()
    if isinstance(value, float) and value.is_integer() and abs(value) < 2**53:
        # 30 and 30.0 are the same figure whichever database column type held it
        return int(value)
    if hasattr(value, "item") and callable(value.item):  # numpy scalar
        return _plain(value.item())
    return value


_PLAIN_ENCODER = json.JSONEncoder(sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=False)

#: Values _plain gives back as they are.
_SIMPLE = frozenset({str, int, bool, type(None)})
_CONVERTERS: dict[type, Any] = {}  # dataclass type -> its function making _plain's dict


def _converter(t: type):
    """A function that makes _plain(record) for records of dataclass type `t`, written once per
    type: each field read by name, and only values that are not text, whole numbers, booleans
    or None go through _value (floats, lists, dates, nested records)."""
    conv = _CONVERTERS.get(t)
    if conv is None:
        names = _field_names(t)
        if not names or not all(n.isidentifier() for n in names):
            conv = _plain
        else:
            body = ["def conv(v):"]
            for i, n in enumerate(names):
                body.append(f"    x{i} = v.{n}")
                body.append(f"    if type(x{i}) not in _SIMPLE: x{i} = _value(x{i})")
            body.append("    return {" + ", ".join(f"{n!r}: x{i}" for i, n in enumerate(names)) + "}")
            scope = {"_SIMPLE": _SIMPLE, "_value": _value}
            exec("\n".join(body), scope)  # noqa: S102 - our own text, built from field names
            conv = scope["conv"]
        _CONVERTERS[t] = conv
    return conv


def _value(x: Any) -> Any:
    """_plain(x) for a value that is not text, a whole number, a boolean or None."""
    t = type(x)
    if t is float:
        # 30 and 30.0 are the same figure whichever database column type held it
        return int(x) if x.is_integer() and abs(x) < 2**53 else x
    if t is list:
        return [e if type(e) in _SIMPLE else _value(e) for e in x]
    if _field_names(t):
        return _converter(t)(x)
    return _plain(x)


def _record_json(record: Any, skip: set[str] | frozenset[str] = frozenset()) -> str:
    """canonical_json of a domain record without the fields in `skip` (the same text as
    canonical_json(instrument_record(...)) and the like): the record made plain by its
    type's converter, then written by the standard library's C encoder in one call."""
    fields = _converter(type(record))(record)
    for name in skip:
        fields.pop(name, None)
    return _PLAIN_ENCODER.encode(fields)


def canonical_json(value: Any) -> str:
    return _encode(_plain(value))


def _encode(plain: Any) -> str:
    """canonical_json of data that is already plain (what _plain returns): _plain gives back the
    same data when given its own result, so the second walk is skipped."""
    return json.dumps(plain, sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=False)


def sha256(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def job_record(job: Job) -> dict:
    data = _plain(job)
    return {k: v for k, v in data.items() if k not in _JOB_SKIP}


def policy_record(policy: Policy) -> dict:
    return _plain(policy)


def instrument_record(instrument: Instrument) -> dict:
    data = _plain(instrument)
    return {k: v for k, v in data.items() if k not in _INSTRUMENT_SKIP}


def record_names(job_key: str, instrument_keys: list[str]) -> list[str]:
    return [f"job:{job_key}", f"policy:{job_key}"] + [f"instrument:{k}" for k in sorted(instrument_keys)]


@dataclass
class Fingerprint:
    """The memo's fingerprint and the sub-fingerprint of every record it used."""

    value: str
    job: str
    policy_version: int | None
    records: dict[str, str]  # record name ("job:KEY", "policy:KEY", "instrument:KEY") -> SHA-256

    @property
    def instrument_keys(self) -> list[str]:
        return sorted(n.split(":", 1)[1] for n in self.records if n.startswith("instrument:"))


def compute(job: Job, policy: Policy, instruments: list[Instrument]) -> Fingerprint:
    # each record's canonical JSON (canonical_json(job_record(job)) and so on): made plain by
    # a converter written once per record type, then one call of the C JSON encoder
    texts = {
        f"job:{job.key}": _record_json(job, _JOB_SKIP),
        f"policy:{job.key}": _record_json(policy),
    }
    for inst in instruments:
        texts[f"instrument:{inst.key}"] = _record_json(inst, _INSTRUMENT_SKIP)
    texts = dict(sorted(texts.items()))
    records = {name: sha256(text) for name, text in texts.items()}
    # the canonical JSON of {"format": ..., "records": payloads}, put together from the texts
    # already made (keys sorted, no whitespace: exactly what canonical_json would write)
    whole_text = (
        canonical_json({"format": FINGERPRINT_FORMAT})[:-1]
        + ',"records":{'
        + ",".join(canonical_json(name) + ":" + text for name, text in texts.items())
        + "}}"
    )
    whole = sha256(whole_text)
    return Fingerprint(value=whole, job=job.key, policy_version=policy.version, records=records)


def to_stamp(fp: Fingerprint, **extra: Any) -> dict:
    """The machine-readable stamp stored in every memo file."""
    stamp = {
        "vetting_memo": FINGERPRINT_FORMAT,
        "fingerprint": fp.value,
        "job": fp.job,
        "policy_version": fp.policy_version,
        "records": dict(fp.records),
    }
    stamp.update(extra)
    return stamp


def from_stamp(stamp: dict) -> Fingerprint:
    """Read a stamp back; raises ValueError naming the field when it is not one of ours."""
    if not isinstance(stamp, dict) or stamp.get("vetting_memo") != FINGERPRINT_FORMAT:
        raise ValueError("not a vetting memo stamp (field 'vetting_memo' missing or unknown)")
    value = stamp.get("fingerprint")
    job = stamp.get("job")
    records = stamp.get("records")
    if not isinstance(value, str) or len(value) != 64:
        raise ValueError("stamp field 'fingerprint' is not a SHA-256 hex digest")
    if not isinstance(job, str) or not job:
        raise ValueError("stamp field 'job' is missing")
    if not isinstance(records, dict) or not all(isinstance(v, str) for v in records.values()):
        raise ValueError("stamp field 'records' is not a map of record names to digests")
    return Fingerprint(value=value, job=job, policy_version=stamp.get("policy_version"), records=dict(records))


@dataclass
class Comparison:
    """The result of checking a stored fingerprint against records read now."""

    stored: Fingerprint
    current: Fingerprint
    changed: list[str] = field(default_factory=list)
    missing: list[str] = field(default_factory=list)  # records the memo used that no longer exist
    notes: list[str] = field(default_factory=list)

    @property
    def matches(self) -> bool:
        return self.stored.value == self.current.value and not self.changed and not self.missing


def compare(stored: Fingerprint, current: Fingerprint) -> Comparison:
    result = Comparison(stored=stored, current=current)
    for name, digest in sorted(stored.records.items()):
        now = current.records.get(name)
        if now is None:
            result.missing.append(name)
        elif now != digest:
            result.changed.append(name)
    if stored.policy_version != current.policy_version:
        result.notes.append(
            f"the job's policy is now version {current.policy_version} (the memo used version {stored.policy_version})"
        )
    return result
