"""rank() appraises every instrument with the job's context worked out once and every validity
synthesis in one grouped engine call. These tests pin that this gives exactly what appraising
each instrument on its own gives (the plain path: no shared context, one engine call each), on
generated catalogues whose jobs cover every component and gate outcome."""

from __future__ import annotations

import dataclasses
import datetime as dt

import pytest

from vetting.appraisal import components as comp
from vetting.appraisal.policy import normalised_weights
from vetting.appraisal.ranking import appraise, expected_impact_ratios, rank
from vetting.records.synthetic import generate_catalogue

AS_OF = dt.date(2026, 11, 1)


def _plain(obj):
    """Dataclasses as nested dicts, floats to 12 significant digits (the grouped sums may differ
    from one-at-a-time sums in the last bit)."""
    if dataclasses.is_dataclass(obj):
        return {f.name: _plain(getattr(obj, f.name)) for f in dataclasses.fields(obj)}
    if isinstance(obj, dict):
        return {k: _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, float):
        return float(f"{obj:.12g}")
    return obj


@pytest.mark.parametrize("size, seed", [(150, 1), (150, 5), (400, 9)])
def test_rank_appraises_each_instrument_as_the_one_instrument_path_does(size, seed):
    cat = generate_catalogue(size, seed=seed)
    for job in cat.jobs[:4]:
        ranking = rank(job, cat.instruments, draws=50, seed=0, as_of=AS_OF)
        by_key = {r.instrument: r for r in ranking.results}
        weights = normalised_weights(job.policy)
        ratios = expected_impact_ratios(job, cat.instruments)
        for ins, ratio in zip(cat.instruments, ratios):
            alone = appraise(job, ins, weights, AS_OF, ratio)  # no context, its own engine call
            batched = by_key[ins.key]
            assert _plain(dataclasses.replace(batched, rank=None, p_best=0.0)) == _plain(alone), ins.key


def test_components_give_the_same_with_and_without_a_job_context():
    cat = generate_catalogue(120, seed=3)
    for job in cat.jobs:
        # a policy that narrows criteria and job families exercises the study filters
        job.policy.relevant_criteria = ["Job performance ratings", "training success"]
        job.policy.relevant_job_families = [job.title.split()[0]]
        ctx = comp.JobContext(job)
        for ins in cat.instruments:
            assert comp.coverage(job, ins, ctx) == comp.coverage(job, ins)
            assert comp.select_studies(ins, job.policy, ctx) == comp.select_studies(ins, job.policy)
            assert comp.norms_component(job, ins, job.policy, AS_OF, ctx) == comp.norms_component(job, ins, job.policy, AS_OF)
            for norm in ins.norms:
                assert comp.occupation_match(norm, job, job.policy, ctx) == comp.occupation_match(norm, job, job.policy)


def test_a_context_for_another_job_is_not_used():
    cat = generate_catalogue(30, seed=2)
    job_a, job_b = cat.jobs[0], cat.jobs[1]
    assert [r.attribute for r in job_a.requirements] != [r.attribute for r in job_b.requirements]
    ctx_a = comp.JobContext(job_a)
    for ins in cat.instruments:
        assert comp.coverage(job_b, ins, ctx_a) == comp.coverage(job_b, ins)
