"""Hand-worked cases for each component mapping (docs/methods.md, Part 2).

Independent checks: Fisher's (1921) z interval for one correlation computed here with the
math module; the expected impact ratio computed with scipy.stats.norm directly (normal model of
a subgroup difference d at a common cut, as in the Uniform Guidelines' four-fifths framing).
"""

from __future__ import annotations

import math

import pytest
from scipy.stats import norm

from vetting.appraisal import components as comp
from vetting.appraisal.gates import choose_reliability
from vetting.records.domain import Measure, NormGroup, Policy, Reliability, Requirement, SubgroupDifference, ValidityStudy

from tests.appraisal.factories import AS_OF, instrument, job


def test_coverage_importance_weighted_primary_and_secondary():
    # numeracy: importance 4, critical -> weight 8, primary -> credit 1: 8 points
    # verbal: importance 2 -> weight 2, secondary -> credit .5: 1 point; total 9 of 10
    c, w = comp.coverage(job(), instrument())
    assert c.value == pytest.approx(0.9)
    assert w == []
    c2, w2 = comp.coverage(job(), instrument(measures=[Measure("verbal", "primary")]))
    assert c2.value == pytest.approx(2 / 10)
    assert [x.code for x in w2] == ["critical_attribute_not_measured"]


def test_validity_single_study_is_fisher_lower_limit_over_point_five():
    ins = instrument(validity=[ValidityStudy("job-performance", 0.50, 500)])
    detail = comp.validity_detail(ins, Policy())
    lo = math.tanh(math.atanh(0.5) - norm.ppf(0.975) / math.sqrt(500 - 3))  # Fisher (1921)
    assert detail.conservative == pytest.approx(lo, abs=1e-9)
    c, _ = comp.validity_component(detail)
    assert c.value == pytest.approx(lo / 0.50)
    assert c.raw == pytest.approx(lo)
    assert "0.50" in c.mapping


def test_validity_sign_corrects_lower_is_better_and_filters_relevance():
    ins = instrument(validity=[
        ValidityStudy("turnover", -0.30, 400, job_family="clerical"),
        ValidityStudy("training", 0.60, 400, job_family="clerical"),
        ValidityStudy("job-performance", 0.40, 400, job_family="sales"),
    ])
    only_turnover = Policy(relevant_criteria=["turnover"])
    d = comp.validity_detail(ins, only_turnover)
    assert [u.r_signed for u in d.studies_used] == [0.30]
    assert len(d.studies_excluded) == 2
    assert "not marked relevant" in d.studies_excluded[0].reason
    fam = comp.validity_detail(ins, Policy(relevant_job_families=["Clerical"]))
    assert sorted(u.criterion for u in fam.studies_used) == ["training", "turnover"]
    none = comp.validity_detail(ins, Policy(relevant_job_families=["nursing"]))
    c, w = comp.validity_component(none)
    assert c.value is None and [x.code for x in w] == ["no_relevant_validity"]


def test_validity_small_samples_warning_threshold_100():
    ins = instrument(validity=[ValidityStudy("job-performance", 0.3, 99), ValidityStudy("job-performance", 0.3, 60)])
    _, w = comp.validity_component(comp.validity_detail(ins, Policy()))
    assert "validity_small_samples" in [x.code for x in w]
    ins2 = instrument(validity=[ValidityStudy("job-performance", 0.3, 100), ValidityStudy("job-performance", 0.3, 60)])
    _, w2 = comp.validity_component(comp.validity_detail(ins2, Policy()))
    assert "validity_small_samples" not in [x.code for x in w2]


@pytest.mark.parametrize("r, expected", [(0.70, 0.0), (0.85, 0.6), (0.95, 1.0), (0.99, 1.0), (0.60, 0.0)])
def test_reliability_mapping(r, expected):
    c, _ = comp.reliability_component(choose_reliability(instrument(reliability=[Reliability("retest", r, 100)])))
    assert c.value == pytest.approx(expected)


def test_reliability_internal_only_warns_no_retest():
    c, w = comp.reliability_component(choose_reliability(instrument(reliability=[Reliability("internal", 0.9, 100)])))
    assert c.value == pytest.approx(0.8) and [x.code for x in w] == ["no_retest_reliability"]


def test_norms_hand_worked():
    # 2021 norm seen in 2026: age 5 of max 15 -> 1 - 5/15; national .6; n 1000 -> 1; no occupation .5
    c, w = comp.norms_component(job(), instrument(), Policy(), AS_OF)
    assert c.value == pytest.approx((1 - 5 / 15 + 0.6 + 1.0 + 0.5) / 4)
    assert w == []
    # local, this year's, n 250 (sqrt(.25) = .5), occupation named in the job title -> match
    local = NormGroup("loc", "Our clerks", 250, 2026, "local", 20, 4, occupation="clerk")
    c2, _ = comp.norms_component(job(), instrument(norms=[local, instrument().norms[0]]), Policy(), AS_OF)
    assert c2.value == pytest.approx((1 + 1 + 0.5 + 1) / 4)
    assert "'loc'" in c2.raw_text


def test_norms_older_than_policy_score_zero_and_warn():
    old = NormGroup("old", "Adults", 5000, 2000, "local", 20, 4)
    c, w = comp.norms_component(job(), instrument(norms=[old]), Policy(max_norm_age_years=15), AS_OF)
    assert c.value == 0.0 and [x.code for x in w] == ["norms_too_old"]
    c2, w2 = comp.norms_component(job(), instrument(norms=[]), Policy(), AS_OF)
    assert c2.value is None and [x.code for x in w2] == ["no_norms"]


def test_fairness_expected_impact_ratio_against_scipy():
    # selection ratio 20/200 = .10; worst d = .8 (the larger of two)
    ins = instrument(subgroup_differences=[SubgroupDifference("A vs B", 0.3), SubgroupDifference("A vs C", 0.8)])
    c, w, ratio = comp.fairness_component(job(), ins, Policy())
    cut = norm.isf(0.10)
    expected = norm.sf(cut + 0.8) / 0.10
    assert ratio == pytest.approx(expected, rel=1e-9)
    assert c.value == pytest.approx(expected)
    assert [x.code for x in w] == ["impact_below_floor"]  # about .24 < .80


def test_fairness_missing_is_never_a_bonus():
    c, w, ratio = comp.fairness_component(job(), instrument(subgroup_differences=[]), Policy())
    assert c.value is None and ratio is None and [x.code for x in w] == ["no_subgroup_data"]
    worst, _, _ = comp.fairness_component(job(), instrument(subgroup_differences=[SubgroupDifference("x", 3.0)]), Policy())
    assert (c.value or 0.0) <= worst.value
    c3, w3, _ = comp.fairness_component(job(applicants_per_year=None), instrument(), Policy())
    assert c3.value is None and [x.code for x in w3] == ["selection_ratio_unknown"]


def test_practicality_time_and_cost():
    c, _ = comp.practicality_component(job(), instrument(minutes=30, cost_per_applicant=10))
    assert c.value == pytest.approx(0.75)  # (1 - .5*30/60 + 1 - .5*10/20) / 2
    over, _ = comp.practicality_component(job(), instrument(minutes=90, cost_per_applicant=10))
    assert over.value == pytest.approx((0 + 0.75) / 2)
    nocost, w = comp.practicality_component(job(), instrument(minutes=60, cost_per_applicant=None))
    assert nocost.value == pytest.approx(0.5) and [x.code for x in w] == ["cost_unknown"]
    none, w2 = comp.practicality_component(job(time_budget_minutes=None, budget_per_applicant=None), instrument())
    assert none.value is None and [x.code for x in w2] == ["no_budgets"]


@pytest.mark.parametrize("occupation, expected", [
    ("clerks", "match"),  # plural ignored
    ("records staff", "match"),  # 'staff' is not a significant word
    ("records officers", "related"),
    ("welders", "other"),
    (None, "general"),
])
def test_occupation_match_against_job_title(occupation, expected):
    n = NormGroup("g", "group", 500, 2024, "national", 50, 10, occupation=occupation)
    assert comp.occupation_match(n, job(title="Records clerk"), Policy()) == expected


def test_occupation_match_via_relevant_job_family():
    n = NormGroup("g", "group", 500, 2024, "national", 50, 10, occupation="Bookkeepers")
    assert comp.occupation_match(n, job(), Policy(relevant_job_families=["bookkeeper"])) == "match"
