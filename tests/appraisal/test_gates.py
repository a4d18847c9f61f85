"""Hand-worked cases for each of the six gates (rules as written in issue 4 and gates.py)."""

from __future__ import annotations

from vetting.appraisal.gates import (
    choose_reliability,
    evaluate_gates,
    gate_job_relatedness,
    gate_qualification,
    gate_reading_level,
    gate_reliability,
    gate_time,
    gate_validity_evidence,
)
from vetting.records.domain import GATE_NAMES, Measure, Policy, Reliability

from tests.appraisal.factories import instrument, job


def test_job_relatedness_pass_and_fail():
    ok = gate_job_relatedness(job(), instrument(measures=[Measure("verbal", "secondary")]))
    assert ok.passed and "verbal" in ok.reason
    bad = gate_job_relatedness(job(), instrument(measures=[Measure("spatial", "primary")]))
    assert not bad.passed and "none of the job's required attributes" in bad.reason


def test_validity_evidence_needs_one_record():
    assert gate_validity_evidence(instrument()).passed
    g = gate_validity_evidence(instrument(validity=[]))
    assert not g.passed and g.reason == "no validity study is recorded"


def test_reliability_prefers_retest_over_a_higher_internal_figure():
    ins = instrument(reliability=[Reliability("internal", 0.92, 800), Reliability("retest", 0.78, 150)])
    used = choose_reliability(ins)
    assert (used.type, used.value) == ("retest", 0.78)
    g = gate_reliability(Policy(min_reliability=0.80), used)
    assert not g.passed and "0.78 < policy minimum 0.80" in g.reason


def test_reliability_falls_back_to_internal_and_uses_largest_sample():
    ins = instrument(reliability=[Reliability("internal", 0.91, 100), Reliability("internal", 0.86, 900),
                                  Reliability("inter-rater", 0.70, 50)])
    used = choose_reliability(ins)
    assert (used.type, used.value, used.n) == ("internal", 0.86, 900)
    assert "no retest or alternate-form" in used.why
    assert gate_reliability(Policy(min_reliability=0.86), used).passed  # at the minimum passes


def test_reliability_missing_fails():
    used = choose_reliability(instrument(reliability=[]))
    assert used.value is None
    g = gate_reliability(Policy(), used)
    assert not g.passed and "no reliability figure" in g.reason


def test_reading_level():
    assert gate_reading_level(job(applicant_reading_grade=10), instrument(reading_grade=10)).passed
    bad = gate_reading_level(job(applicant_reading_grade=10), instrument(reading_grade=12))
    assert not bad.passed and "12 > applicants' grade 10" in bad.reason
    unknown = gate_reading_level(job(), instrument(reading_grade=None))
    assert unknown.passed and unknown.warning and "unknown" in unknown.warning


def test_time_budget():
    assert gate_time(job(time_budget_minutes=60), instrument(minutes=60)).passed
    bad = gate_time(job(time_budget_minutes=60), instrument(minutes=61))
    assert not bad.passed and "61 min > budget 60 min" in bad.reason
    nob = gate_time(job(time_budget_minutes=None), instrument(minutes=500))
    assert nob.passed and nob.warning


def test_qualification_order_open_trained_licensed():
    assert gate_qualification(job(staff_qualification="trained"), instrument(user_qualification="open")).passed
    assert gate_qualification(job(staff_qualification="trained"), instrument(user_qualification="trained")).passed
    bad = gate_qualification(job(staff_qualification="trained"), instrument(user_qualification="licensed"))
    assert not bad.passed and "licensed" in bad.reason
    unknown = gate_qualification(job(staff_qualification=None), instrument(user_qualification="licensed"))
    assert unknown.passed and unknown.warning


def test_evaluate_gates_returns_the_six_names_in_order():
    ins = instrument()
    gates = evaluate_gates(job(), ins, Policy(), choose_reliability(ins))
    assert tuple(gates) == GATE_NAMES
    assert all(g.passed for g in gates.values())
    assert {g.symbol for g in gates.values()} == {"PASS"}
