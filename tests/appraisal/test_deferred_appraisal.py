"""rank() appraises only the instruments that pass every gate at once; the others are appraised
on first reading, all together (vetting.appraisal.ranking._Pending), and the eligibility is found
first by one quick test of the six gates' conditions (gates.passes_all_gates).

These tests pin both against the plain computation they replace, on generated catalogues
(vetting.records.synthetic, whose jobs cover every gate outcome) and on the invented demo
catalogue: the quick test against the six gates themselves, and every ranking against the eager
ranking written out here as rank() did it before (every instrument appraised at once, with the
impact ratios and validity syntheses of all instruments in one call each). Equality is exact
(==, every float to the bit), whatever is read first. The gate rules themselves are checked
against their sources in test_gates.py; these tests check only that nothing changes.
"""

from __future__ import annotations

import copy
import dataclasses
import datetime as dt
import pickle
import threading
from pathlib import Path

import pytest

from vetting.appraisal import components as comp
from vetting.appraisal import ranking as rk
from vetting.appraisal.gates import choose_reliability, evaluate_gates, passes_all_gates
from vetting.appraisal.policy import normalised_weights
from vetting.appraisal.types import InstrumentAppraisal
from vetting.records.catalogue import load_catalogue
from vetting.records.domain import Reliability
from vetting.records.synthetic import generate_catalogue

AS_OF = dt.date(2026, 11, 1)
DEMO = Path(__file__).resolve().parents[2] / "vetting" / "records" / "data" / "demo.yaml"


def _eager_results(job, instruments):
    """The results as rank() wrote them before deferring: every instrument appraised at once,
    eligible ones first in rank order, then the others by key (ranks and p_best left out)."""
    policy = job.policy
    weights = normalised_weights(policy)
    ctx = comp.JobContext(job)
    ratios = rk.expected_impact_ratios(job, instruments)
    details = comp.validity_details(instruments, policy, ctx)
    results = [rk.appraise(job, ins, weights, AS_OF, ratio, detail=detail, ctx=ctx)
               for ins, ratio, detail in zip(instruments, ratios, details)]

    def order(r):
        v = r.validity.conservative
        return (-r.score, -(v if v is not None else -1.0), r.instrument)

    return (sorted((r for r in results if r.eligible), key=order)
            + sorted((r for r in results if not r.eligible), key=lambda r: r.instrument))


def _job_variants(job):
    """The job as given, and with its limits unknown or tightened (every gate's other branch)."""
    yield job
    yield dataclasses.replace(job, applicant_reading_grade=None, time_budget_minutes=None, staff_qualification=None)
    yield dataclasses.replace(job, applicant_reading_grade=9.0, time_budget_minutes=25.0, staff_qualification="open",
                              policy=dataclasses.replace(job.policy, min_reliability=0.85))


def _catalogues():
    for size, seed in ((200, 1), (200, 7), (500, 3)):
        cat = generate_catalogue(size, seed=seed)
        yield f"generated-{size}-{seed}", cat.jobs[:4], cat.instruments
    demo = load_catalogue(DEMO)
    yield "demo", demo.jobs, demo.instruments


CATALOGUES = list(_catalogues())


@pytest.mark.parametrize("name, jobs, instruments", CATALOGUES, ids=[c[0] for c in CATALOGUES])
def test_the_quick_gate_test_agrees_with_the_six_gates(name, jobs, instruments):
    outcomes = set()
    for base in jobs:
        for job in _job_variants(base):
            passes = passes_all_gates(job)
            for ins in instruments:
                gates = evaluate_gates(job, ins, job.policy, choose_reliability(ins))
                expected = all(g.passed for g in gates.values())
                assert passes(ins) is expected, (name, job.key, ins.key, {n: g.passed for n, g in gates.items()})
                outcomes.update(n for n, g in gates.items() if not g.passed)
                outcomes.add("eligible" if expected else "ineligible")
    if name.startswith("generated"):  # the generated jobs make every gate fail somewhere
        assert outcomes >= {"eligible", "job_relatedness", "validity_evidence", "reliability",
                            "reading_level", "time", "qualification"}


def test_the_quick_gate_test_reads_the_reliability_the_rule_chooses():
    # the rule prefers retest/alternate, then the largest sample, then the lower figure; and an
    # unknown kind falls back to the lowest figure (gates.RELIABILITY_TIERS)
    cat = generate_catalogue(40, seed=2)
    job = dataclasses.replace(cat.jobs[0], applicant_reading_grade=None, time_budget_minutes=None,
                              staff_qualification=None, policy=dataclasses.replace(cat.jobs[0].policy, min_reliability=0.80))
    ins = next(i for i in cat.instruments if i.validity and any(m.attribute in {r.attribute for r in job.requirements} for m in i.measures))
    cases = [
        [Reliability("internal", 0.95, 900), Reliability("retest", 0.79, 100)],  # retest preferred: fails
        [Reliability("retest", 0.81, 100), Reliability("retest", 0.70, 100)],  # equal samples, lower: fails
        [Reliability("retest", 0.70, 50), Reliability("retest", 0.90, 400)],  # larger sample: passes
        [Reliability("split-half", 0.85, None)],  # next kind: passes
        [Reliability("unheard-of", 0.90, 10), Reliability("unheard-of", 0.60, 10)],  # lowest: fails
        [],
    ]
    seen = set()
    for records in cases:
        ins.reliability = records
        expected = all(g.passed for g in evaluate_gates(job, ins, job.policy, choose_reliability(ins)).values())
        assert passes_all_gates(job)(ins) is expected, records
        seen.add(expected)
    assert seen == {True, False}


@pytest.mark.parametrize("name, jobs, instruments", CATALOGUES, ids=[c[0] for c in CATALOGUES])
def test_rank_gives_what_appraising_every_instrument_at_once_gave(name, jobs, instruments):
    for job in jobs[:3]:
        expected = _eager_results(job, instruments)
        for reading in ("in order", "last first"):
            ranking = rk.rank(job, instruments, draws=20, seed=0, as_of=AS_OF)
            results = ranking.results
            if reading == "last first":  # an instrument that failed a gate is read first
                assert results[-1] == expected[-1]
            got = [dataclasses.replace(r, rank=None, p_best=0.0) for r in results]
            want = [dataclasses.replace(r, rank=None, p_best=0.0) for r in expected]
            assert [r.instrument for r in got] == [r.instrument for r in want]
            assert got == want
            for r, e in zip(results, expected):  # field by field, floats to the bit
                for f in dataclasses.fields(InstrumentAppraisal):
                    if f.name not in ("rank", "p_best"):
                        assert getattr(r, f.name) == getattr(e, f.name), (r.instrument, f.name)
                assert repr(r.score) == repr(e.score)
                assert r.warning_codes == e.warning_codes and r.failed_gates == e.failed_gates


def test_instruments_that_fail_a_gate_are_appraised_only_when_read(monkeypatch):
    cat = generate_catalogue(300, seed=1)
    job = cat.jobs[0]
    calls = []
    plain = rk.appraise_all  # appraise()'s figures, for the instruments given
    monkeypatch.setattr(rk, "appraise_all",
                        lambda job, instruments, *a, **k: calls.extend(i.key for i in instruments) or plain(job, instruments, *a, **k))
    ranking = rk.rank(job, cat.instruments, draws=20, seed=0, as_of=AS_OF)
    eligible = ranking.eligible
    assert 0 < len(eligible) < len(cat.instruments)
    assert sorted(calls) == sorted(r.instrument for r in eligible)
    assert ranking.top is not None and ranking.alternatives.top == ranking.top.instrument
    failing = [r for r in ranking.results if not r.eligible]
    assert failing[0].instrument and failing[0].p_best == 0.0 and failing[0].rank is None
    assert len(calls) == len(eligible)  # key, title, eligibility, rank and p_best need no appraisal
    assert failing[0].failed_gates  # the first reading appraises every failing instrument, once
    assert len(calls) == len(cat.instruments)
    [r.score for r in failing]
    assert len(calls) == len(cat.instruments)


def test_a_deferred_appraisal_behaves_as_an_instrument_appraisal():
    cat = generate_catalogue(120, seed=5)
    job = cat.jobs[1]
    eager = {r.instrument: r for r in _eager_results(job, cat.instruments)}

    def failing_one():
        ranking = rk.rank(job, cat.instruments, draws=20, seed=0, as_of=AS_OF)
        return next(r for r in ranking.results if not r.eligible)

    a = failing_one()
    assert isinstance(a, InstrumentAppraisal)
    assert repr(a) == repr(eager[a.instrument])  # repr reads it (and names the public type)
    for how in (pickle.loads, ):
        b = how(pickle.dumps(failing_one()))
        assert type(b) is InstrumentAppraisal and b == eager[b.instrument]
    for how in (copy.copy, copy.deepcopy):
        b = how(failing_one())
        assert b == eager[b.instrument] and eager[b.instrument] == b
    b = failing_one()
    assert dataclasses.asdict(b) == dataclasses.asdict(eager[b.instrument])
    assert failing_one() != dataclasses.replace(eager[a.instrument], score=-1.0)
    # a field set before the first reading is kept; the others are written as usual
    c = failing_one()
    c.score = 12.5
    assert c.score == 12.5 and c.gates == eager[c.instrument].gates


def test_two_threads_reading_at_once_see_one_appraisal():
    cat = generate_catalogue(400, seed=2)
    job = cat.jobs[0]
    ranking = rk.rank(job, cat.instruments, draws=20, seed=0, as_of=AS_OF)
    failing = [r for r in ranking.results if not r.eligible]
    seen: list[list] = [[], []]
    start = threading.Barrier(2)

    def read(i):
        start.wait()
        seen[i] = [id(r.gates) for r in failing]

    threads = [threading.Thread(target=read, args=(i,)) for i in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert seen[0] == seen[1] and len(seen[0]) == len(failing)


def test_a_ranking_dropped_unread_is_freed_at_once_and_one_result_kept_still_reads():
    import gc
    import weakref

    cat = generate_catalogue(200, seed=3)
    job = cat.jobs[0]
    eager = {r.instrument: r for r in _eager_results(job, cat.instruments)}
    was = gc.isenabled()
    gc.disable()  # freed by reference counting alone: no reference cycle
    try:
        ranking = rk.rank(job, cat.instruments, draws=20, seed=0, as_of=AS_OF)
        failing = [r for r in ranking.results if not r.eligible]
        probe = weakref.ref(failing[0])
        kept = failing[-1]
        del ranking, failing
        assert probe() is None
        assert kept == eager[kept.instrument]  # the one kept is written when read
    finally:
        if was:
            gc.enable()
