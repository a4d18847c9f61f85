"""Scale (issue 8): a generated catalogue of 2,000 instruments imports into a fresh database and
ranks with the right counts. Not a timed test: speed is measured by bench/run.py."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue

N = 2000
AS_OF = dt.date(2026, 11, 1)


@pytest.fixture(scope="module")
def big(tmp_path_factory):
    cat = generate_catalogue(N, seed=23)
    url = f"sqlite:///{tmp_path_factory.mktemp('scale') / 'scale.db'}"
    with Store.open(url, user="scale") as store:
        counts = store.import_catalogue(cat, source="synthetic")
    return cat, url, counts


def test_import_lands_every_record(big):
    cat, url, counts = big
    with Store.open(url, user="checker") as store:
        assert len(store.instrument_keys()) == N
        assert len(store.jobs()) == len(cat.jobs)
        assert len(store.attributes()) == len(cat.attributes)
        loaded = {i.key: i for i in store.instruments()}
    # every piece of evidence came back (spot-check counts on all instruments)
    for inst in cat.instruments:
        got = loaded[inst.key]
        assert (len(got.reliability), len(got.validity), len(got.norms), len(got.reviews)) == (
            len(inst.reliability), len(inst.validity), len(inst.norms), len(inst.reviews))


def test_ranks_the_whole_catalogue_with_correct_counts(big):
    from vetting.appraisal.service import rank_job

    cat, url, _ = big
    job = cat.jobs[0]
    required = {r.attribute for r in job.requirements}
    # instruments measuring none of the job's attributes cannot be job-related (the gate's rule)
    unrelated = {i.key for i in cat.instruments if not required & set(i.attribute_keys())}
    no_validity = {i.key for i in cat.instruments if not i.validity}
    with Store.open(url, user="checker") as store:
        ranking = rank_job(store, job.key, draws=500, seed=0, as_of=AS_OF, mark=False)
    results = ranking.results
    assert len(results) == N and len({r.instrument for r in results}) == N
    eligible = [r for r in results if r.eligible]
    # eligible first, ranked 1..E without gaps; every ineligible one failed a gate
    assert results[: len(eligible)] == eligible
    assert [r.rank for r in eligible] == list(range(1, len(eligible) + 1))
    assert all(any(not g.passed for g in r.gates.values()) for r in results if not r.eligible)
    assert all(all(g.passed for g in r.gates.values()) for r in eligible)
    failed_relatedness = {r.instrument for r in results if not r.gates["job_relatedness"].passed}
    assert failed_relatedness == unrelated
    failed_validity = {r.instrument for r in results if not r.gates["validity_evidence"].passed}
    assert failed_validity == no_validity
    # the robustness draws spread a probability of being best over the eligible ones
    if eligible:
        assert np.isclose(sum(r.p_best for r in eligible), 1.0, atol=1e-9)
        scores = [r.score for r in eligible]
        assert scores == sorted(scores, reverse=True)
