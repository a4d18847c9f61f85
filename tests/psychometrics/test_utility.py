"""Selection utility, checked against the bivariate normal of scipy.stats (reference library),
the published Taylor-Russell (1939) tables and hand computation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import multivariate_normal, norm, truncnorm

from vetting.psychometrics import (
    PsychometricsError,
    bcg_utility,
    bvn_cdf,
    cut_z_for_selection_ratio,
    naylor_shine,
    taylor_russell,
)


def _scipy_success(r: float, base_rate: float, sr: float) -> float:
    """Reference: P(X > x_c, Y > y_c)/SR with scipy's bivariate normal CDF."""
    joint = multivariate_normal([0, 0], [[1, r], [r, 1]]).cdf([norm.ppf(sr), norm.ppf(base_rate)])
    return joint / sr


def test_taylor_russell_table_base_rate_50_validity_50():
    # Taylor & Russell (1939), J. Appl. Psychol. 23:565-578, table for a proportion of
    # satisfactory employees of .50, row r = .50, selection ratios .05 ... .95 (two-decimal table
    # values, quoted from memory).
    table = {0.05: 0.88, 0.10: 0.84, 0.20: 0.78, 0.30: 0.74, 0.40: 0.70, 0.50: 0.67,
             0.60: 0.63, 0.70: 0.60, 0.80: 0.57, 0.90: 0.54, 0.95: 0.52}
    srs = np.array(list(table))
    got = taylor_russell(0.50, 0.50, srs)
    assert np.allclose(got, list(table.values()), atol=0.005 + 1e-9), got


def test_taylor_russell_table_structure_r_0_and_r_1():
    # In every Taylor-Russell table the r = .00 row equals the base rate and the r = 1.00 row is
    # 1.00 wherever the selection ratio is at or below the base rate (Taylor & Russell, 1939).
    for base in (0.05, 0.30, 0.60, 0.90):
        srs = np.array([0.05, 0.2, 0.5, 0.8, 0.95])
        assert np.allclose(taylor_russell(0.0, base, srs), base)
        perfect = taylor_russell(1.0, base, srs)
        assert np.allclose(perfect[srs <= base], 1.0)
        assert np.allclose(perfect[srs > base], base / srs[srs > base])


def test_taylor_russell_closed_form_at_the_median():
    # Sheppard (1899): P(X > 0, Y > 0) = 1/4 + asin(ρ)/(2π); with BR = SR = .5 the success rate is
    # 1/2 + asin(ρ)/π.
    for r in (-0.6, 0.1, 0.35, 0.8, 0.99):
        assert taylor_russell(r, 0.5, 0.5) == pytest.approx(0.5 + math.asin(r) / math.pi, abs=1e-12)


def test_taylor_russell_matches_scipy_bivariate_normal_on_a_grid():
    rng = np.random.default_rng(3)
    r = rng.uniform(-0.95, 0.95, 60)
    base = rng.uniform(0.02, 0.98, 60)
    sr = rng.uniform(0.02, 0.98, 60)
    got = taylor_russell(r, base, sr)
    ref = np.array([_scipy_success(*args) for args in zip(r, base, sr)])
    assert np.allclose(got, ref, atol=1e-7)


def test_bvn_cdf_zero_limits_and_extremes_match_scipy():
    cases = [(0.0, 0.7, 0.4), (-0.3, 0.0, -0.5), (0.0, 0.0, 0.2), (2.0, -2.5, 0.9), (-3.0, -3.0, -0.9)]
    for h, k, rho in cases:
        ref = multivariate_normal([0, 0], [[1, rho], [rho, 1]]).cdf([h, k])
        assert bvn_cdf(h, k, rho) == pytest.approx(ref, abs=1e-8)
    assert bvn_cdf(np.inf, 0.3, 0.5) == pytest.approx(norm.cdf(0.3))
    assert bvn_cdf(-np.inf, 0.3, 0.5) == 0.0
    assert bvn_cdf(0.2, 0.4, 1.0) == pytest.approx(norm.cdf(0.2))
    assert bvn_cdf(0.2, 0.4, -1.0) == pytest.approx(max(0.0, norm.cdf(0.2) + norm.cdf(0.4) - 1))


def test_taylor_russell_edge_cases():
    assert taylor_russell(0.5, 0.3, 1.0) == pytest.approx(0.3)  # hire everyone: base rate
    near_one = taylor_russell(0.5, 0.3, 0.999999)
    assert near_one == pytest.approx(0.3, abs=1e-4)
    tiny_base = taylor_russell(0.5, 1e-9, 0.1)
    assert 1e-9 < tiny_base < 1e-6  # base rate near 0: still a proper, small probability
    assert taylor_russell(-0.5, 0.5, 0.2) < 0.5  # a negative validity makes things worse


def test_cut_for_selection_ratio_matches_normal_table():
    # Normal table: top 50% above z = 0, top 15.87% above z = 1, top 2.28% above z = 2.
    assert cut_z_for_selection_ratio(0.5) == pytest.approx(0.0)
    assert cut_z_for_selection_ratio(0.1587) == pytest.approx(1.0, abs=1e-3)
    assert cut_z_for_selection_ratio(0.0228) == pytest.approx(2.0, abs=2e-3)
    assert cut_z_for_selection_ratio(1.0) == -math.inf


def test_naylor_shine_against_truncated_normal_mean():
    # Mean criterion z of those selected = r · E[X | X > z_c]; scipy's truncated normal mean is
    # the reference. Also the classic figure: the top half of a normal population averages
    # φ(0)/.5 = .798 SD above the mean (Naylor & Shine, 1965, table; value from memory).
    for sr in (0.05, 0.2, 0.5, 0.8):
        zc = norm.isf(sr)
        assert naylor_shine(0.4, sr) == pytest.approx(0.4 * truncnorm.mean(zc, np.inf), abs=1e-10)
    assert naylor_shine(1.0, 0.5) == pytest.approx(0.798, abs=5e-4)
    assert naylor_shine(0.5, 1.0) == 0.0
    assert naylor_shine(0.0, 0.3) == 0.0


def test_bcg_utility_hand_computation():
    # Brogden (1949) / Cronbach & Gleser (1965): ΔU = N·T·r·SDy·φ(z_c)/SR − N_a·C.
    # 10 hires, 2 years, r .50, SDy 10,000, SR .20 (z_c = .8416, φ = .27996, φ/SR = 1.3998),
    # 50 applicants at 20 each: 10·2·.5·10000·1.3998 − 1000 = 139,980 − 1,000 = 138,980 (hand).
    u = bcg_utility(0.5, 0.2, hires=10, tenure=2, sdy=10_000, applicants=50, cost=20)
    assert u.utility == pytest.approx(138_980, abs=5)
    assert u.testing_cost == 1000
    assert u.mean_criterion_z == pytest.approx(0.5 * 1.3998, abs=1e-4)
    assert u.cut_z == pytest.approx(0.8416, abs=1e-4)
    zero = bcg_utility(0.0, 0.2, hires=10, tenure=2, sdy=10_000, applicants=50, cost=20)
    assert zero.utility == pytest.approx(-1000)  # no validity: only the cost remains


@pytest.mark.parametrize(
    "call, words",
    [
        (lambda: taylor_russell(0.3, 0.5, 0), "selection_ratio must be greater than 0 and at most 1"),
        (lambda: taylor_russell(0.3, 0.5, 1.2), "selection_ratio"),
        (lambda: taylor_russell(0.3, 0.0, 0.5), "base_rate must be greater than 0 and less than 1"),
        (lambda: taylor_russell(1.3, 0.5, 0.5), "validity must be between -1 and 1"),
        (lambda: naylor_shine(0.3, -0.1), "selection_ratio"),
        (lambda: bcg_utility(0.3, 0.2, -1, 2, 100, 50, 1), "hires must be greater than 0"),
        (lambda: bcg_utility(0.3, 0.2, 60, 2, 100, 50, 1), "applicants must be at least hires"),
        (lambda: bcg_utility(0.3, 0.2, 5, 2, -100, 50, 1), "sdy must be at least 0"),
        (lambda: bcg_utility(0.3, 0.2, 5, 2, 100, 50, -1), "cost must be at least 0"),
    ],
)
def test_impossible_input_is_rejected(call, words):
    with pytest.raises(PsychometricsError, match=words):
        call()
