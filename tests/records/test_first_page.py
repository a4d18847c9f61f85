"""The first page of the catalogue in title order, read before the whole catalogue."""

from __future__ import annotations

from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue


def test_first_page_is_the_head_of_the_full_title_order(db_url):
    cat = generate_catalogue(60, n_jobs=1, seed=3)
    with Store.open(db_url, user="ana") as store:
        store.import_catalogue(cat)
        first, total = store.instruments_first_by_title(10)
        everything = sorted(store.instruments(), key=lambda i: i.title.lower())
    assert total == 60
    assert [i.key for i in first] == [i.key for i in everything[:10]]
    # each instrument on the first page comes with all its evidence, as from instruments()
    by_key = {i.key: i for i in everything}
    assert all(inst == by_key[inst.key] for inst in first)


def test_first_page_of_an_empty_or_small_catalogue(db_url):
    with Store.open(db_url, user="ana") as store:
        assert store.instruments_first_by_title(100) == ([], 0)
        store.import_catalogue(generate_catalogue(3, n_jobs=1, seed=1))
        first, total = store.instruments_first_by_title(100)
    assert total == 3 and len(first) == 3
