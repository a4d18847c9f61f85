"""rank() writes every instrument's appraisal with batch.appraise_all: one pass doing once per
ranking what depends only on the job. These tests pin it, field by field and to the last bit of
every float, against the plain path (ranking._appraisal: one call per gate and component, with
the figures of expected_impact_ratios and components.validity_details), on generated catalogues
and on jobs and instruments varied to reach every branch (missing limits and budgets, unknown
selection ratio, narrowed criteria and job families, zero budgets, reliability types outside
the preferred tiers). No published figure is involved: both paths implement the same rules, and
the published checks of those rules are in test_gates.py and test_components.py."""

from __future__ import annotations

import copy
import dataclasses
import datetime as dt
import random

import pytest

from vetting.appraisal import components as comp
from vetting.appraisal.batch import appraise_all, validity_details
from vetting.appraisal.policy import normalised_weights
from vetting.appraisal.ranking import _appraisal, expected_impact_ratios, rank
from vetting.records.domain import Measure, Reliability, ValidityStudy
from vetting.records.synthetic import generate_catalogue

AS_OF = dt.date(2026, 11, 1)


def _exact(obj):
    """Every field with its type; floats by their bits (hex)."""
    if obj is None or isinstance(obj, (bool, int, str)):
        return (type(obj).__name__, obj)
    if isinstance(obj, float):
        return ("float", obj.hex())
    if dataclasses.is_dataclass(obj):
        return (type(obj).__name__, [(f.name, _exact(getattr(obj, f.name))) for f in dataclasses.fields(obj)])
    if isinstance(obj, dict):
        return ("dict", [(k, _exact(v)) for k, v in obj.items()])
    if isinstance(obj, (list, tuple)):
        return (type(obj).__name__, [_exact(v) for v in obj])
    raise TypeError(type(obj))


def _plain_figures(job, instruments, weights):
    ratios = expected_impact_ratios(job, instruments)
    details = comp.validity_details(instruments, job.policy)  # no context: the plain study choice
    return [_appraisal(job, ins, weights, AS_OF, ratio, detail, None)
            for ins, ratio, detail in zip(instruments, ratios, details)]


def _variants(job, rng):
    """The job as generated, then with each limit, budget or filter changed."""
    yield job
    changes = [
        dict(applicant_reading_grade=None), dict(time_budget_minutes=None), dict(budget_per_applicant=None),
        dict(staff_qualification=None), dict(applicants_per_year=None), dict(time_budget_minutes=0.0),
        dict(budget_per_applicant=0.0), dict(time_budget_minutes=None, budget_per_applicant=None),
        dict(staff_qualification="licensed", applicant_reading_grade=20.0),
    ]
    for change in changes:
        yield dataclasses.replace(job, **change)
    narrowed = copy.deepcopy(job)
    narrowed.policy.relevant_criteria = ["job-performance", "training", "turnover"]
    narrowed.policy.relevant_job_families = [job.title.split()[0].lower(), "Records ", "lab"]
    narrowed.policy.weights = dict(narrowed.policy.weights, practicality=0.0, norms=0.0)
    narrowed.policy.max_norm_age_years = 5
    narrowed.requirements = [dataclasses.replace(r, critical=rng.random() < 0.5) for r in job.requirements]
    yield narrowed


def _odd_instruments(instruments, rng, attribute):
    """Copies with records the generator seldom writes: no reliability, a type outside the
    preferred tiers, several figures of one kind, no validity and a required attribute measured
    with a fit that earns no credit, a study too small to use, no time and no cost."""
    out = []
    for i, ins in enumerate(instruments):
        ins = copy.deepcopy(ins)
        kind = i % 6
        if kind == 0:
            ins.reliability = []
        elif kind == 1:
            ins.reliability = [Reliability("parallel-odd", 0.81, 300), Reliability("odd", 0.79, None)]
        elif kind == 2:
            ins.reliability = [Reliability("retest", 0.83, 200), Reliability("alternate", 0.86, 200),
                               Reliability("internal", 0.9, 900)]
        elif kind == 3:
            ins.validity = []
            # a fit that earns no coverage credit still counts for the job-relatedness gate
            ins.measures = [m for m in ins.measures if m.attribute != attribute] + [Measure(attribute, "incidental")]
        elif kind == 4:
            ins.validity = list(ins.validity) + [ValidityStudy(criterion="job-performance", r=0.3, n=3,
                                                               design="predictive")]
        else:
            ins.minutes, ins.cost_per_applicant, ins.currency = 0.0, 0.0, None
        out.append(ins)
    rng.shuffle(out)
    return out


@pytest.mark.parametrize("size, seed", [(200, 1), (300, 7)])
def test_appraise_all_gives_the_plain_path_to_the_bit(size, seed):
    cat = generate_catalogue(size, seed=seed)
    rng = random.Random(seed)
    instruments = cat.instruments + _odd_instruments(cat.instruments[:60], rng, cat.jobs[0].requirements[0].attribute)
    for base in cat.jobs[:3]:
        for job in _variants(base, rng):
            weights = normalised_weights(job.policy)
            fast = appraise_all(job, instruments, weights, AS_OF, comp.JobContext(job))
            plain = _plain_figures(job, instruments, weights)
            assert len(fast) == len(plain)
            for ins, a, b in zip(instruments, fast, plain):
                assert _exact(a) == _exact(b), (job.key, ins.key)


def test_validity_details_give_the_plain_study_choice():
    cat = generate_catalogue(150, seed=4)
    job = copy.deepcopy(cat.jobs[0])
    for criteria, families in [([], []), (["job-performance", "absence"], []), ([], [job.title.split()[0].lower(), "fleet"]),
                               (["training"], ["plant", "Stores"])]:
        job.policy.relevant_criteria, job.policy.relevant_job_families = criteria, families
        fast = validity_details(cat.instruments, job.policy, comp.JobContext(job))
        assert _exact(fast) == _exact(comp.validity_details(cat.instruments, job.policy))


def test_rank_results_are_the_plain_appraisals():
    cat = generate_catalogue(250, seed=2)
    job = cat.jobs[1]
    weights = normalised_weights(job.policy)
    ranking = rank(job, cat.instruments, draws=20, seed=0, as_of=AS_OF)
    by_key = {r.instrument: r for r in ranking.results}
    assert any(r.eligible for r in ranking.results) and any(not r.eligible for r in ranking.results)
    for ins, figures in zip(cat.instruments, _plain_figures(job, cat.instruments, weights)):
        r = by_key[ins.key]
        got = (r.score, r.gates, r.components, r.warnings, r.validity, r.reliability_used, r.impact_ratio)
        assert _exact(got) == _exact(figures), ins.key
