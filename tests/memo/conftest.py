from __future__ import annotations

import pytest

from vetting.records.store import Store

from tests.memo.catalogue import JOB, catalogue


@pytest.fixture
def store(tmp_path):
    url = f"sqlite:///{tmp_path / 'memo.db'}"
    with Store.open(url, user="memo-tester") as s:
        s.import_catalogue(catalogue(), source="memo-test")
        s.lock_policy(JOB)
        yield s


@pytest.fixture
def db_url(store):
    return store.url
