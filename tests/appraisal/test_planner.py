"""Cut-score planner: figures agree with the psychometrics functions called directly and with
independent computations (scipy.stats normal and bivariate normal; textbook formulas)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import multivariate_normal, norm

from vetting.appraisal.errors import AppraisalError
from vetting.appraisal.planner import plan, sweep
from vetting.psychometrics import error as pe
from vetting.psychometrics import impact as pi
from vetting.psychometrics import utility as pu
from vetting.psychometrics import validity as pv
from vetting.records.domain import NormGroup, Reliability, ValidityStudy

from tests.appraisal.factories import AS_OF, instrument, job


def test_plan_default_ratio_is_hires_over_applicants_and_matches_psychometrics():
    j, ins = job(), instrument()
    p = plan(j, ins, as_of=AS_OF)
    assert p.selection_ratio == pytest.approx(20 / 200)
    r = pv.conservative_validity([0.30, 0.34], [200, 300]).value
    assert p.validity_used == pytest.approx(r)
    assert p.expected_success_rate == pytest.approx(pu.taylor_russell(r, 0.5, 0.1))
    assert p.mean_criterion_z == pytest.approx(pu.naylor_shine(r, 0.1))
    assert p.utility_per_year == pytest.approx(pu.bcg_utility(r, 0.1, 20, 3.0, 10000.0, 200, 10.0).utility)
    assert p.impact_ratio == pytest.approx(pi.expected_impact(0.5, 0.1)[1])
    assert p.sem_raw == pytest.approx(pe.sem(10.0, 0.85))  # retest .85 is the figure used


def test_plan_worked_case_against_scipy_and_textbook_formulas():
    j, ins = job(), instrument()
    p = plan(j, ins, as_of=AS_OF)
    r, sr, br = p.validity_used, 0.10, 0.50
    zc = norm.isf(sr)  # 1.2816
    assert p.cut.z == pytest.approx(zc)
    assert p.cut.raw == pytest.approx(50 + 10 * zc)
    assert p.cut.t == pytest.approx(50 + 10 * zc)
    assert p.cut.percentile == pytest.approx(90.0)
    assert p.cut.stanine == 8  # stanine 8 spans z 1.25..1.75 (boundaries at +/-.25, .75, 1.25, 1.75 SD)
    # Taylor-Russell (1939): P(X > xc, Y > yc) / SR under a bivariate normal with correlation r
    joint = multivariate_normal(mean=[0, 0], cov=[[1, r], [r, 1]]).cdf([-zc, -norm.isf(br)])
    assert p.expected_success_rate == pytest.approx(joint / sr, abs=1e-5)
    # Naylor & Shine (1965): r * phi(zc) / SR
    assert p.mean_criterion_z == pytest.approx(r * norm.pdf(zc) / sr)
    # Brogden-Cronbach-Gleser: hires * tenure * SDy * mean z - applicants * cost
    assert p.utility_per_year == pytest.approx(20 * 3.0 * 10000.0 * r * norm.pdf(zc) / sr - 200 * 10.0)
    # expected impact: focal mean d = .5 SD lower, same cut
    assert p.impact_ratio == pytest.approx(norm.sf(zc + 0.5) / sr)
    # SEM = SD sqrt(1 - rxx); 95% band = cut +/- 1.96 SEM
    sem = 10 * math.sqrt(1 - 0.85)
    assert p.sem_raw == pytest.approx(sem)
    assert p.cut_band_raw[0] == pytest.approx(p.cut.raw - norm.ppf(0.975) * sem)
    assert p.cut_band_raw[1] == pytest.approx(p.cut.raw + norm.ppf(0.975) * sem)
    # local validation: n = ((z_.975 + z_.80) / atanh r)^2 + 3 (Fisher z), months = 12 n / hires
    n = math.ceil(((norm.ppf(0.975) + norm.ppf(0.80)) / math.atanh(r)) ** 2 + 3)
    assert p.local_validation.n == n
    assert p.local_validation.months == pytest.approx(12 * n / 20)


def test_taylor_russell_published_table_value():
    # Taylor & Russell (1939) table for base rate .50: r = .30, SR = .10 -> .71 (value from memory)
    j = job()
    ins = instrument(validity=[ValidityStudy("job-performance", 0.30, 100000)])
    p = plan(j, ins, selection_ratio=0.10, as_of=AS_OF)
    assert p.validity_used == pytest.approx(0.30, abs=0.01)
    assert p.expected_success_rate == pytest.approx(0.71, abs=0.01)


def test_plan_raw_cut_and_chosen_norm():
    local = NormGroup("loc", "Our clerks", 300, 2025, "local", 20.0, 4.0, occupation="clerk")
    ins = instrument(norms=[instrument().norms[0], local])
    p = plan(job(), ins, as_of=AS_OF)
    assert p.norm == "loc"  # local, recent and matching the job beats the national group
    p2 = plan(job(), ins, norm_key="gen", raw_cut=60.0, as_of=AS_OF)
    assert p2.cut.z == pytest.approx(1.0)
    assert p2.selection_ratio == pytest.approx(norm.sf(1.0))
    with pytest.raises(AppraisalError, match="no such norm group"):
        plan(job(), ins, norm_key="nope", as_of=AS_OF)
    with pytest.raises(AppraisalError, match="between 0 and 1"):
        plan(job(), ins, selection_ratio=1.5, as_of=AS_OF)
    with pytest.raises(AppraisalError, match="no hires and applicants"):
        plan(job(applicants_per_year=None), ins, as_of=AS_OF)


def test_plan_missing_evidence_gives_none_with_warnings():
    ins = instrument(validity=[], reliability=[], subgroup_differences=[], norms=[])
    p = plan(job(), ins, selection_ratio=0.3, as_of=AS_OF)
    assert p.validity_used is None and p.expected_success_rate is None and p.utility_per_year is None
    assert p.impact_ratio is None and p.sem_raw is None and p.cut.raw is None
    codes = [w.code for w in p.warnings]
    assert {"no_norms", "no_relevant_validity", "no_subgroup_data"} <= set(codes)


def test_sweep_matches_single_plans():
    ratios = np.array([0.05, 0.2, 0.5, 0.8])
    s = sweep(job(), instrument(), ratios, as_of=AS_OF)
    for i, sr in enumerate(ratios):
        p = plan(job(), instrument(), selection_ratio=float(sr), as_of=AS_OF)
        assert s.cut_raw[i] == pytest.approx(p.cut.raw)
        assert s.expected_success_rate[i] == pytest.approx(p.expected_success_rate)
        assert s.impact_ratio[i] == pytest.approx(p.impact_ratio)
        assert s.utility_per_year[i] == pytest.approx(p.utility_per_year)
    assert np.all(np.diff(s.impact_ratio) > 0)  # less selective cuts -> less adverse impact


def test_plan_warns_when_the_instrument_fails_a_gate():
    p = plan(job(), instrument(minutes=120), as_of=AS_OF)
    assert p.warnings[0].code == "not_eligible" and "time" in p.warnings[0].text
