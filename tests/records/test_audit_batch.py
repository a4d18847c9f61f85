"""Store.audit_events_for: the audit events of many records in one go (used by the memo, which
would otherwise ask once per instrument). Its answer must be exactly the union of the one-record
queries, oldest first, with no event of a record that was not asked for. Runs on SQLite and,
when a server is available, on PostgreSQL (fixture `db_url`)."""

from __future__ import annotations

import dataclasses

import pytest

from tests.records import _samples as S
from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue


@pytest.fixture
def store(db_url):
    with Store.open(db_url, user="ana") as s:
        yield s


def _union(store, jobs, instruments):
    events = {}
    for key in jobs:
        events.update((e.id, e) for e in store.audit_events(job=key))
    for key in instruments:
        events.update((e.id, e) for e in store.audit_events(instrument=key))
    return [events[i] for i in sorted(events)]


def test_batch_equals_the_union_of_single_queries(store):
    store.import_catalogue(S.catalogue(), source="sample.yaml")
    # more events: a replaced instrument, a deleted one, a new job policy version
    inst = store.instrument("vessel-check-3")
    store.save_instrument(dataclasses.replace(inst, title="Vessel Check, third form (revised)"))
    store.delete_instrument("tiny-screen")
    jobs = ["dock-pump-operator"]
    instruments = ["vessel-check-3", "tiny-screen"]
    got = store.audit_events_for(jobs=jobs, instruments=instruments)
    assert got == _union(store, jobs, instruments)
    assert [e.id for e in got] == sorted(e.id for e in got)
    assert {e.entity for e in got} >= {"instrument", "job"}
    assert {(e.entity, e.key) for e in got if e.entity == "instrument"} == {
        ("instrument", "vessel-check-3"), ("instrument", "tiny-screen")
    }
    assert any(e.action == "delete" and e.key == "tiny-screen" for e in got)

    # only what was asked for
    only_one = store.audit_events_for(instruments=["vessel-check-3"])
    assert only_one and {e.key for e in only_one} == {"vessel-check-3"}
    assert all(e.entity == "instrument" for e in only_one)
    only_job = store.audit_events_for(jobs=jobs)
    assert only_job and all(e.entity in ("job", "policy", "decision") for e in only_job)
    assert store.audit_events_for() == []
    assert store.audit_events_for(instruments=["no-such-test"]) == []


def test_batch_over_more_keys_than_one_query_takes(store):
    cat = generate_catalogue(520, seed=7)
    store.import_catalogue(cat, source="big.yaml")
    keys = [i.key for i in cat.instruments]
    jobs = [j.key for j in cat.jobs]
    got = store.audit_events_for(jobs=jobs, instruments=keys)
    assert got == _union(store, jobs, keys)
    assert {e.key for e in got if e.entity == "instrument"} == set(keys)


def test_batch_last_and_count(store):
    cat = generate_catalogue(520, seed=7)
    store.import_catalogue(cat, source="big.yaml")
    store.delete_instrument(cat.instruments[3].key)
    keys = [i.key for i in cat.instruments]
    jobs = [j.key for j in cat.jobs]
    every = _union(store, jobs, keys)
    assert store.audit_event_count_for(jobs=jobs, instruments=keys) == len(every)
    assert store.audit_events_for(jobs=jobs, instruments=keys, last=7) == every[-7:]
    assert store.audit_events_for(jobs=jobs, instruments=keys, last=10**6) == every
    assert store.audit_events_for(jobs=jobs, instruments=keys, last=0) == []
    assert store.audit_event_count_for() == 0


def test_a_job_and_an_instrument_with_the_same_key_keep_their_own_events(store):
    """The lookups select on the key and check the entity afterwards: a job that shares its
    key with an instrument must not lend its events to the instrument, nor the other way."""
    cat = S.catalogue()
    store.import_catalogue(cat, source="sample.yaml")
    job = store.job(cat.jobs[0].key)
    twin = dataclasses.replace(job, key=cat.instruments[0].key, row_version=None, first_ranked_at=None)
    store.save_job(twin)
    key = twin.key
    inst_events = store.audit_events_for(instruments=[key])
    job_events = store.audit_events_for(jobs=[key])
    assert inst_events and {e.entity for e in inst_events} == {"instrument"}
    assert job_events and {e.entity for e in job_events} <= {"job", "policy", "decision"}
    assert inst_events == store.audit_events(instrument=key)
    assert store.audit_event_count_for(instruments=[key]) == len(inst_events)
    assert store.audit_event_count_for(jobs=[key]) == len(job_events)
    both = store.audit_events_for(jobs=[key], instruments=[key], last=len(inst_events) + len(job_events))
    assert both == _union(store, [key], [key])
    assert store.audit_events_for(jobs=[key], instruments=[key], last=1) == both[-1:]
