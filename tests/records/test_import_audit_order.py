"""An import's audit events are written in one go at the end, in the order they happened.

Store.import_catalogue used to write each attribute's and each job's audit event with its own
INSERT as it went; it now holds them and writes them all with the instruments' events in one
bulk write before the transaction commits. The trail must read exactly as before: oldest
first, attributes, then instruments, then jobs (a replaced job's new policy version just
before the job's own update event), then the import itself, with times that never go back.
This is the order the import code makes the changes in (vetting/records/store.py), checked
here on both databases.
"""

from __future__ import annotations

import dataclasses

from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue


def _trail(store: Store) -> list[tuple[str, str, str]]:
    events = store.audit_events()
    assert [e.at for e in events] == sorted(e.at for e in events)
    assert [e.id for e in events] == sorted(e.id for e in events)
    return [(e.action, e.entity, e.key) for e in events]


def test_import_and_replace_audit_in_the_order_of_the_changes(db_url):
    cat = generate_catalogue(12, seed=3)
    with Store.open(db_url, user="tester") as store:
        store.import_catalogue(cat, source="first.yaml")
        expected = (
            [("create", "attribute", a.key) for a in cat.attributes]
            + [("create", "instrument", x.key) for x in cat.instruments]
            + [("create", "job", j.key) for j in cat.jobs]
            + [("import", "catalogue", "first.yaml")]
        )
        assert _trail(store) == expected
        created = {(e.entity, e.key): e.after for e in store.audit_events()}
        assert created[("instrument", cat.instruments[3].key)]["title"] == cat.instruments[3].title

        renamed = dataclasses.replace(cat.attributes[1], name=cat.attributes[1].name + " (renamed)")
        jobs = [dataclasses.replace(j, title=j.title + " II") for j in cat.jobs]
        jobs[0] = dataclasses.replace(jobs[0], policy=dataclasses.replace(jobs[0].policy, min_reliability=0.71))
        again = dataclasses.replace(
            cat, attributes=[renamed], instruments=cat.instruments[2:5][::-1], jobs=jobs
        )
        store.import_catalogue(again, replace=True, source="second.yaml")
        second = (
            [("update", "attribute", renamed.key)]
            + [("update", "instrument", x.key) for x in again.instruments]
            + [("create", "policy", jobs[0].key), ("update", "job", jobs[0].key)]
            + [("update", "job", j.key) for j in jobs[1:]]
            + [("import", "catalogue", "second.yaml")]
        )
        assert _trail(store) == expected + second
