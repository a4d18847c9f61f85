"""Record fingerprints: SHA-256 over canonical JSON, one digest per record used."""

from __future__ import annotations

import copy
import datetime as dt

from vetting.memo import fingerprint as fpm
from vetting.records.domain import (
    Instrument,
    Job,
    Measure,
    Policy,
    Reliability,
    Requirement,
    Review,
)


def _job() -> Job:
    return Job(key="night-dispatch", title="Night dispatcher", requirements=[Requirement("reasoning", 5, True)])


def _inst(key: str) -> Instrument:
    return Instrument(
        key=key,
        title=f"Test {key}",
        measures=[Measure("reasoning")],
        minutes=20,
        reliability=[Reliability("internal", 0.88, 400)],
        reviews=[Review(dt.date(2024, 3, 1), "Reviewer", "fine")],
    )


def test_sha256_is_the_standard_digest():
    # FIPS 180-2, Appendix B.1: SHA-256("abc")
    assert fpm.sha256("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def test_canonical_json_sorts_keys_and_writes_iso_dates():
    text = fpm.canonical_json({"b": 1, "a": dt.date(2024, 3, 1), "c": [1.5, dt.datetime(2024, 1, 2, 3, 4, 5)]})
    assert text == '{"a":"2024-03-01","b":1,"c":[1.5,"2024-01-02T03:04:05"]}'


def test_same_records_same_fingerprint_and_bookkeeping_ignored():
    job, pol, insts = _job(), Policy(version=1), [_inst("a"), _inst("b")]
    one = fpm.compute(job, pol, insts)
    job2 = copy.deepcopy(job)
    job2.row_version = 7
    job2.first_ranked_at = dt.datetime(2026, 1, 1)
    insts2 = copy.deepcopy(insts)
    insts2[0].row_version = 3
    insts2[1].minutes = 20.0  # the same figure as 20
    two = fpm.compute(job2, pol, list(reversed(insts2)))
    assert one.value == two.value and one.records == two.records
    assert len(one.value) == 64 and set(one.records) == {"job:night-dispatch", "policy:night-dispatch", "instrument:a", "instrument:b"}


def test_a_changed_review_note_changes_only_that_instrument():
    job, pol, insts = _job(), Policy(version=1), [_inst("a"), _inst("b")]
    before = fpm.compute(job, pol, insts)
    insts[1].reviews[0].note = "fine, but the norms are old"
    after = fpm.compute(job, pol, insts)
    cmp = fpm.compare(before, after)
    assert not cmp.matches
    assert cmp.changed == ["instrument:b"] and cmp.missing == []


def test_policy_change_and_missing_instrument_are_named():
    job, insts = _job(), [_inst("a"), _inst("b")]
    before = fpm.compute(job, Policy(version=1), insts)
    newer = Policy(version=2, min_reliability=0.85)
    after = fpm.compute(job, newer, insts[:1])
    cmp = fpm.compare(before, after)
    assert cmp.changed == ["policy:night-dispatch"]
    assert cmp.missing == ["instrument:b"]
    assert any("version 2" in n for n in cmp.notes)


def test_stamp_round_trip_and_bad_stamp():
    fp = fpm.compute(_job(), Policy(version=1), [_inst("a")])
    back = fpm.from_stamp(fpm.to_stamp(fp, status="final"))
    assert back.value == fp.value and back.records == fp.records and back.instrument_keys == ["a"]
    import pytest

    with pytest.raises(ValueError, match="fingerprint"):
        fpm.from_stamp({"vetting_memo": 1, "fingerprint": "x", "job": "j", "records": {}})
    with pytest.raises(ValueError, match="not a vetting memo"):
        fpm.from_stamp({"fingerprint": "a" * 64})
