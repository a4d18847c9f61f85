"""Validity corrections and bare-bones meta-analysis, checked by hand computation of the
published equations and by simulation from the model the methods assume (numpy's seeded
bivariate normal generator as an outside reference)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from vetting.psychometrics import (
    CONSERVATIVE_RULE,
    PsychometricsError,
    bare_bones_meta,
    conservative_validity,
    correct_attenuation,
    fisher_interval,
    range_restriction_case2,
)


def test_correction_for_attenuation_worked_examples():
    # Spearman (1904). Criterion only: observed .30 with criterion reliability .52 (the mean
    # inter-rater reliability of supervisory ratings, Viswesvaran, Ones & Schmidt, 1996, J. Appl.
    # Psychol. 81:557-574; value from memory): .30/√.52 = .4160 (hand).
    assert correct_attenuation(0.30, 0.52) == pytest.approx(0.4160, abs=1e-4)
    # Both: .30/√(.80 × .50) = .4743 (hand).
    assert correct_attenuation(0.30, 0.50, 0.80) == pytest.approx(0.4743, abs=1e-4)
    assert correct_attenuation(0.30, 1.0) == pytest.approx(0.30)


def test_correction_beyond_one_is_rejected_not_clipped():
    with pytest.raises(PsychometricsError, match="exceed 1"):
        correct_attenuation(0.8, 0.4)


def test_thorndike_case_ii_hand_computation():
    # Thorndike (1949), Personnel Selection, Case II: R = rU/√(1 + r²(U² − 1)).
    # r = .25, U = 1.5: .375/√1.078125 = .3612 (hand computation).
    assert range_restriction_case2(0.25, 1.5) == pytest.approx(0.3612, abs=1e-4)
    # r = .30, U = 2: .6/√1.27 = .5324 (hand)
    assert range_restriction_case2(0.30, 2.0) == pytest.approx(0.5324, abs=1e-4)
    assert range_restriction_case2(0.30, 1.0) == pytest.approx(0.30)
    assert range_restriction_case2(0.0, 3.0) == 0.0


def test_thorndike_case_ii_recovers_the_population_validity_in_simulation():
    # Model assumed by Case II: bivariate normal, direct top-down selection on the predictor.
    rng = np.random.default_rng(20261201)
    rho = 0.5
    cov = [[1.0, rho], [rho, 1.0]]
    xy = rng.multivariate_normal([0.0, 0.0], cov, size=400_000)
    kept = xy[xy[:, 0] > 0.5]  # hire the top ~31%
    r_restricted = np.corrcoef(kept[:, 0], kept[:, 1])[0, 1]
    u = xy[:, 0].std() / kept[:, 0].std()
    assert r_restricted < 0.35  # the restriction really bites
    assert range_restriction_case2(r_restricted, u) == pytest.approx(rho, abs=0.01)


STUDIES_R = [0.20, 0.30, 0.10, 0.40]
STUDIES_N = [100, 200, 50, 150]


def test_bare_bones_meta_hand_computation():
    # Equations of Hunter & Schmidt (2004), Methods of Meta-Analysis, 2nd ed., ch. 3, worked by
    # hand for four invented studies:
    #   r̄ = (20 + 60 + 5 + 60)/500 = .29
    #   S²r = (100·.0081 + 200·.0001 + 50·.0361 + 150·.0121)/500 = 4.45/500 = .0089
    #   S²e = (1 − .29²)²/(125 − 1) = .9159²/124 = .0067651
    #   S²ρ = .0089 − .0067651 = .0021349, Sρ = .046205, % sampling error = 76.01
    #   80% credibility: .29 ± 1.28·.046205 = .2309 .. .3491 (H&S use 1.28)
    m = bare_bones_meta(STUDIES_R, STUDIES_N)
    assert m.k == 4 and m.total_n == 500
    assert m.mean_r == pytest.approx(0.29)
    assert m.var_observed == pytest.approx(0.0089)
    assert m.var_sampling_error == pytest.approx(0.0067651, abs=1e-7)
    assert m.var_residual == pytest.approx(0.0021349, abs=1e-7)
    assert m.sd_residual == pytest.approx(0.046205, abs=1e-6)
    assert m.pct_variance_sampling_error == pytest.approx(76.01, abs=0.01)
    assert m.credibility_80[0] == pytest.approx(0.2309, abs=1e-3)
    assert m.credibility_80[1] == pytest.approx(0.3491, abs=1e-3)
    # 95% CI of the mean: .29 ± 1.96·√(.0089/4) = .29 ± .0925 (hand)
    assert m.confidence_95[0] == pytest.approx(0.1975, abs=2e-4)
    assert m.confidence_95[1] == pytest.approx(0.3825, abs=2e-4)


def test_bare_bones_meta_homogeneous_studies_simulated():
    # Studies drawn from one population validity (.30, n = 80 each): H&S (2004, ch. 3) predict
    # that sampling error explains about 100% of the observed variance and Sρ is near 0.
    rng = np.random.default_rng(7)
    rho, n, k = 0.30, 80, 1500
    cov = [[1.0, rho], [rho, 1.0]]
    rs = [np.corrcoef(*rng.multivariate_normal([0, 0], cov, size=n).T)[0, 1] for _ in range(k)]
    m = bare_bones_meta(rs, [n] * k)
    assert m.mean_r == pytest.approx(rho, abs=0.01)
    assert m.pct_variance_sampling_error == pytest.approx(100, abs=10)
    assert m.sd_residual < 0.03


def test_bare_bones_meta_single_study():
    m = bare_bones_meta([0.3], [100])
    assert m.k == 1
    assert m.var_observed == 0.0
    assert m.sd_residual == 0.0
    assert m.credibility_80 == (0.3, 0.3)
    assert m.pct_variance_sampling_error == math.inf
    assert m.confidence_95 == pytest.approx(fisher_interval(0.3, 100))


def test_fisher_interval_hand_computation():
    # Fisher (1921) z: atanh(.30) = .30952; ± 1.96/√97 = ± .19901 -> tanh(.11051) = .1101,
    # tanh(.50853) = .4688 (hand computation).
    lo, hi = fisher_interval(0.30, 100)
    assert lo == pytest.approx(0.1101, abs=1e-4)
    assert hi == pytest.approx(0.4688, abs=1e-4)


def test_conservative_validity_rule():
    one = conservative_validity([0.30], [100])
    assert one.basis == "single-study"
    assert one.value == pytest.approx(0.1101, abs=1e-4)  # lower Fisher limit, above
    assert one.meta is None
    many = conservative_validity(STUDIES_R, STUDIES_N)
    assert many.meta is not None
    assert many.value == pytest.approx(min(many.meta.credibility_80[0], many.meta.confidence_95[0]))
    assert many.rule == CONSERVATIVE_RULE
    # heterogeneous studies: the credibility bound is the lower one
    wide = conservative_validity([0.05, 0.45, 0.10, 0.50, 0.25], [500, 500, 500, 500, 500])
    assert wide.basis == "credibility"
    assert wide.value == pytest.approx(wide.meta.credibility_80[0])
    # floored at zero, and says so
    weak = conservative_validity([0.02, -0.05], [60, 40])
    assert weak.value == 0.0 and weak.floored


@pytest.mark.parametrize(
    "call, words",
    [
        (lambda: bare_bones_meta([0.3], [-5]), "ns must be greater than 3"),
        (lambda: bare_bones_meta([0.3, 0.2], [50]), "same length"),
        (lambda: bare_bones_meta([1.0], [50]), "rs must be greater than -1 and less than 1"),
        (lambda: bare_bones_meta([0.3], [50.5]), "whole numbers"),
        (lambda: bare_bones_meta([], []), "must not be empty"),
        (lambda: range_restriction_case2(0.3, 0), "u must be greater than 0"),
        (lambda: range_restriction_case2(1.3, 1.5), "r must be between -1 and 1"),
        (lambda: correct_attenuation(0.3, 0.0), "r_yy must be greater than 0"),
        (lambda: correct_attenuation(0.3, 0.8, 1.2), "r_xx must be greater than 0 and at most 1"),
        (lambda: fisher_interval(0.3, 3), "n must be greater than 3"),
    ],
)
def test_impossible_input_is_rejected(call, words):
    with pytest.raises(PsychometricsError, match=words):
        call()
