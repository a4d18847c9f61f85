"""The records store: round trips, atomic imports, key conflicts, replacement with audit,
policy versions and locks, ranking time stamps and decisions. Each test runs on SQLite and,
when a server is available, on PostgreSQL (fixture `db_url`)."""

from __future__ import annotations

import dataclasses
import datetime as dt

import pytest

from tests.records import _samples as S
from vetting.records.domain import Attribute, Catalogue, Policy
from vetting.records.errors import CatalogueError, KeyConflict, NotFound, RecordsError
from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue


@pytest.fixture
def store(db_url):
    with Store.open(db_url, user="ana") as s:
        yield s


def _stored(obj, version=1):
    """What the store should hand back for an object it holds at `version`."""
    return dataclasses.replace(obj, row_version=version)


# ---------------------------------------------------------------------------
# round trips
# ---------------------------------------------------------------------------


def test_new_database_is_empty_and_knows_its_user(db_url, monkeypatch):
    monkeypatch.setenv("VETTING_USER", "zoe")
    with Store.open(db_url) as s:
        assert s.is_empty()
        assert s.user == "zoe"
        assert s.url == db_url
        assert s.instruments() == [] and s.jobs() == [] and s.attributes() == []


def test_catalogue_round_trip_keeps_every_field(store):
    cat = S.catalogue()
    counts = store.import_catalogue(cat, source="sample.yaml")
    assert counts["instruments"] == 2 and counts["jobs"] == 1 and counts["attributes"] == 3
    assert counts["created"] == 3 and counts["replaced"] == 0
    assert store.export_catalogue() == cat
    assert not store.is_empty()

    got = store.instrument("vessel-check-3")
    assert got == _stored(S.full_instrument())
    assert got.reviews[0].date == dt.date(2026, 3, 14)
    assert got.sample_copy.checks[2].note == "key missing"
    assert got.norms[0].table[2].raw == 38.5
    assert store.instruments() == [_stored(i) for i in cat.instruments]
    assert store.instrument_keys() == ["vessel-check-3", "tiny-screen"]
    assert store.attributes() == S.attributes()
    assert store.attribute_keys() == {"gauge-reading", "spatial-folding", "steadiness"}

    job = store.job("dock-pump-operator")
    assert job.row_version == 1 and job.first_ranked_at is None
    assert job.policy.version == 1 and job.policy.locked_at is None
    assert job.policy.created_at.tzinfo is not None
    assert job.policy.same_rules(S.full_job().policy)
    plain = dataclasses.replace(job, row_version=None, policy=S.full_job().policy)
    assert plain == S.full_job()
    assert store.jobs() == [job]


def test_generated_catalogue_round_trips(store):
    cat = generate_catalogue(40, seed=7)
    store.import_catalogue(cat)
    assert store.export_catalogue() == cat


def test_save_instrument_creates_then_updates(store):
    store.save_attribute(Attribute("gauge-reading", "Gauge reading", "skill"))
    store.save_attribute(Attribute("spatial-folding", "Spatial folding", "ability"))
    created = store.save_instrument(S.full_instrument())
    assert created == _stored(S.full_instrument(), 1)

    edited = dataclasses.replace(created, title="Vessel Check, revised", sample_copy=None, norms=[])
    saved = store.save_instrument(edited)
    assert saved.row_version == 2
    assert saved == dataclasses.replace(edited, row_version=2)
    assert store.instrument("vessel-check-3") == saved

    # a one-to-one sample copy can be replaced by another in one save
    again = dataclasses.replace(saved, sample_copy=S.full_instrument().sample_copy)
    assert store.save_instrument(again).sample_copy == S.full_instrument().sample_copy


def test_saving_a_new_object_over_an_existing_key_is_refused(store):
    store.import_catalogue(S.catalogue())
    with pytest.raises(KeyConflict) as exc:
        store.save_instrument(S.full_instrument(title="Someone else's"))
    assert "vessel-check-3" in str(exc.value)
    assert store.instrument("vessel-check-3").title == "Vessel Check, third form"


def test_unknown_keys_raise_not_found_with_the_key(store):
    store.import_catalogue(S.catalogue())
    with pytest.raises(NotFound, match="no-such-test"):
        store.instrument("no-such-test")
    with pytest.raises(NotFound, match="no-such-job"):
        store.job("no-such-job")
    with pytest.raises(NotFound, match="unknown-attr"):
        store.save_instrument(S.bare_instrument("x", attribute="unknown-attr"))


def test_delete_removes_the_record_and_its_evidence_and_audits_it(store):
    store.import_catalogue(S.catalogue())
    store.delete_instrument("vessel-check-3", row_version=1)
    assert store.instrument_keys() == ["tiny-screen"]
    last = store.audit_events(instrument="vessel-check-3")[-1]
    assert (last.action, last.who, last.after) == ("delete", "ana", None)
    assert last.before["title"] == "Vessel Check, third form"
    # the evidence rows went with it: re-creating the key starts clean
    store.save_instrument(S.bare_instrument("vessel-check-3"))
    assert store.instrument("vessel-check-3").reliability == []
    store.delete_job("dock-pump-operator")
    assert store.jobs() == []


# ---------------------------------------------------------------------------
# imports: atomic, conflicts, replacement
# ---------------------------------------------------------------------------


def test_import_failing_midway_leaves_nothing(store):
    cat = S.catalogue()
    broken = S.bare_instrument("broken")
    broken.title = None  # the database refuses a missing title when it reaches that row
    cat.instruments.append(broken)
    with pytest.raises(RecordsError):
        store.import_catalogue(cat)
    assert store.is_empty()


def test_import_interrupted_after_some_records_leaves_nothing(store, monkeypatch):
    cat = S.catalogue()
    original = Store._create_job

    def explode(self, s, job):
        original(self, s, job)
        raise RuntimeError("power cut")

    monkeypatch.setattr(Store, "_create_job", explode)
    with pytest.raises(RuntimeError):
        store.import_catalogue(cat)
    monkeypatch.setattr(Store, "_create_job", original)
    assert store.is_empty()
    store.import_catalogue(cat)  # and the database is fine afterwards
    assert store.export_catalogue() == cat


def test_unknown_attribute_in_catalogue_is_named_and_nothing_is_written(store):
    cat = S.catalogue()
    cat.jobs[0].requirements[1].attribute = "not-declared"
    with pytest.raises(CatalogueError) as exc:
        store.import_catalogue(cat, source="team.yaml")
    assert "team.yaml: jobs[0].requirements[1].attribute" in str(exc.value)
    assert "not-declared" in str(exc.value)
    assert store.is_empty()


def test_existing_keys_are_refused_listing_them(store):
    store.import_catalogue(S.catalogue())
    before = store.audit_events()
    second = Catalogue(
        attributes=[Attribute("gauge-reading", "Renamed", "skill")],
        instruments=[S.bare_instrument("new-one"), S.full_instrument(title="changed")],
        jobs=[S.full_job()],
    )
    with pytest.raises(KeyConflict) as exc:
        store.import_catalogue(second)
    assert exc.value.keys == ["vessel-check-3", "dock-pump-operator"]
    assert "vessel-check-3" in str(exc.value) and "dock-pump-operator" in str(exc.value)
    assert "--replace" in str(exc.value)
    # nothing changed, not even the attribute or the audit trail
    assert store.export_catalogue() == S.catalogue()
    assert store.audit_events() == before


def test_replace_records_before_and_after_in_the_audit_trail(store):
    store.import_catalogue(S.catalogue())
    changed = S.full_instrument(title="Vessel Check, fourth form")
    changed.reliability[0].value = 0.9
    counts = store.import_catalogue(Catalogue(instruments=[changed]), replace=True, source="update.yaml")
    assert counts["replaced"] == 1 and counts["created"] == 0
    got = store.instrument("vessel-check-3")
    assert got.title == "Vessel Check, fourth form" and got.row_version == 2
    event = [e for e in store.audit_events(instrument="vessel-check-3") if e.action == "update"][-1]
    assert event.who == "ana"
    assert event.before["title"] == "Vessel Check, third form"
    assert event.after["title"] == "Vessel Check, fourth form"
    assert event.before["reliability"][0]["value"] == 0.88
    assert event.after["reliability"][0]["value"] == 0.9
    imports = [e for e in store.audit_events() if e.action == "import"]
    assert imports[-1].key == "update.yaml" and imports[-1].after["replaced"] == 1


def test_attributes_are_upserted_by_key(store):
    store.import_catalogue(S.catalogue())
    store.import_catalogue(Catalogue(attributes=[Attribute("steadiness", "Steadiness", "personality"),
                                                 Attribute("new-one", "New", "other")]))
    assert [a.name for a in store.attributes()] == ["Gauge reading", "Spatial folding", "Steadiness", "New"]
    ev = [e for e in store.audit_events() if e.entity == "attribute" and e.action == "update"]
    assert ev[-1].before["name"] == "Steadiness at work" and ev[-1].after["name"] == "Steadiness"


def test_export_of_selected_records_carries_the_attributes_they_need(store):
    store.import_catalogue(S.catalogue())
    only_job = store.export_catalogue(jobs=["dock-pump-operator"])
    assert only_job.instruments == [] and [j.key for j in only_job.jobs] == ["dock-pump-operator"]
    assert [a.key for a in only_job.attributes] == ["gauge-reading", "steadiness"]
    only_inst = store.export_catalogue(instruments=["tiny-screen"])
    assert [a.key for a in only_inst.attributes] == ["gauge-reading"] and only_inst.jobs == []
    with pytest.raises(NotFound, match="nope"):
        store.export_catalogue(instruments=["nope"])


# ---------------------------------------------------------------------------
# policies, ranking, decisions
# ---------------------------------------------------------------------------


def test_policy_versions_and_lock(store):
    store.import_catalogue(S.catalogue())
    job = store.job("dock-pump-operator")
    # saving the job with the same rules makes no new version
    same = store.save_job(dataclasses.replace(job, title="Dock pump operator (day shift)"))
    assert same.policy.version == 1 and same.row_version == 2

    locked = store.lock_policy("dock-pump-operator")
    assert locked.version == 1 and locked.locked
    assert locked.locked_at.tzinfo is not None
    assert abs((dt.datetime.now(dt.UTC) - locked.locked_at).total_seconds()) < 120
    with pytest.raises(RecordsError, match="already locked"):
        store.lock_policy("dock-pump-operator")

    stricter = dataclasses.replace(S.full_job().policy, min_reliability=0.85)
    current = store.set_policy("dock-pump-operator", stricter)
    assert current.version == 2 and not current.locked and current.min_reliability == 0.85
    assert store.set_policy("dock-pump-operator", stricter).version == 2  # same rules: no new version

    versions = store.policy_versions("dock-pump-operator")
    assert [v.version for v in versions] == [1, 2]
    assert versions[0].locked and versions[0].min_reliability == 0.75
    assert store.job("dock-pump-operator").policy.version == 2
    assert store.lock_policy("dock-pump-operator").version == 2

    events = [(e.action, e.entity) for e in store.audit_events(job="dock-pump-operator")]
    assert ("lock", "policy") in events and events.count(("create", "policy")) == 1


def test_save_job_with_new_rules_and_import_replace_make_new_versions(store):
    store.import_catalogue(S.catalogue())
    job = store.job("dock-pump-operator")
    job.policy = Policy()  # the defaults differ from the sample's rules
    saved = store.save_job(job)
    assert saved.policy.version == 2 and saved.policy.same_rules(Policy())
    counts = store.import_catalogue(Catalogue(jobs=[S.full_job()]), replace=True)
    assert counts["policy_versions"] == 1
    assert [v.version for v in store.policy_versions("dock-pump-operator")] == [1, 2, 3]
    assert store.job("dock-pump-operator").policy.same_rules(S.full_job().policy)


def test_mark_ranked_sets_the_time_once(store):
    store.import_catalogue(S.catalogue())
    first = store.mark_ranked("dock-pump-operator")
    assert first.tzinfo is not None
    assert store.mark_ranked("dock-pump-operator") == first
    assert store.job("dock-pump-operator").first_ranked_at == first
    assert store.job("dock-pump-operator").row_version == 1  # bookkeeping, not an edit
    with pytest.raises(NotFound):
        store.mark_ranked("nope")


def test_decisions_are_kept_and_found_by_fingerprint(store):
    store.import_catalogue(S.catalogue())
    d1 = store.record_decision("dock-pump-operator", "vessel-check-3", status="draft", by="ana", fingerprint="f1")
    d2 = store.record_decision(
        "dock-pump-operator", None, status="final", by="ben", fingerprint="f2",
        override_reason="no instrument met the gates", memo_path="/tmp/memo.docx",
    )
    assert d2 > d1
    all_ = store.decisions()
    assert [d.id for d in all_] == [d1, d2]
    final = store.decision_by_fingerprint("f2")
    assert final.instrument is None and final.status == "final" and final.author == "ben"
    assert final.override_reason == "no instrument met the gates"
    assert final.memo_format == "docx" and final.created_at.tzinfo is not None
    assert store.decision_by_fingerprint("missing") is None
    assert store.decisions("other-job") == []
    with pytest.raises(RecordsError, match="status"):
        store.record_decision("dock-pump-operator", None, status="maybe", by="ana", fingerprint="x")
    with pytest.raises(NotFound):
        store.record_decision("nope", None, status="draft", by="ana", fingerprint="x")
    # decisions outlive the job they were about
    store.delete_job("dock-pump-operator")
    assert [d.id for d in store.decisions("dock-pump-operator")] == [d1, d2]
    assert [e.entity for e in store.audit_events(job="dock-pump-operator")].count("decision") == 2


def test_policy_rules_come_back_exactly_as_saved_even_in_another_order(store):
    store.import_catalogue(S.catalogue())
    job = S.full_job()
    job.policy.relevant_criteria = ["training", "job-performance"]
    job.policy.weights = dict(reversed(list(job.policy.weights.items())))
    store.import_catalogue(Catalogue(jobs=[job]), replace=True)
    got = store.export_catalogue(jobs=[job.key]).jobs[0].policy
    assert got.relevant_criteria == ["training", "job-performance"]
    assert list(got.weights) == list(job.policy.weights)
    assert store.job(job.key).policy.version == 2
