"""Adverse impact: the four-fifths rule as written in the Uniform Guidelines, and the expected
impact of a standardised difference, checked against scipy's normal distribution."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import norm

from vetting.psychometrics import (
    PsychometricsError,
    expected_impact,
    four_fifths,
    impact_ratio,
    max_selection_ratio_for_floor,
)


def test_four_fifths_rule_as_written():
    # Uniform Guidelines on Employee Selection Procedures (1978), 29 CFR 1607.4(D): "A selection
    # rate for any race, sex, or ethnic group which is less than four-fifths (4/5) (or eighty
    # percent) of the rate for the group with the highest rate will generally be regarded ... as
    # evidence of adverse impact". Numbers below are invented.
    ratio, met = four_fifths(30 / 100, 60 / 100)  # 30% vs 60%: ratio .50 -> adverse impact
    assert ratio == pytest.approx(0.5) and met is False
    ratio, met = four_fifths(48 / 100, 60 / 100)  # exactly 4/5: not "less than" -> not flagged
    assert ratio == pytest.approx(0.8) and met is True
    ratio, met = four_fifths(47 / 100, 60 / 100)  # .783 -> flagged
    assert met is False
    ratio, met = four_fifths(0.7, 0.6)  # focal above reference: ratio > 1, met
    assert ratio > 1 and met is True


def test_four_fifths_vectorised():
    ratio, met = four_fifths(np.array([0.2, 0.5]), np.array([0.5, 0.5]))
    assert met.tolist() == [False, True]
    assert impact_ratio(0.0, 0.4) == 0.0


def test_expected_impact_matches_scipy_normal():
    # Focal mean d SD below the reference, equal SDs, one cut (Sackett & Ellingson, 1997).
    for d in (-0.3, 0.2, 0.5, 1.0):
        for p in (0.1, 0.3, 0.5, 0.9):
            cut = norm.isf(p)
            focal_ref = norm.sf(cut, loc=-d)
            focal, ratio = expected_impact(d, p)
            assert focal == pytest.approx(focal_ref, abs=1e-12)
            assert ratio == pytest.approx(focal_ref / p, abs=1e-12)


def test_expected_impact_normal_table_example():
    # d = 1, cut at the reference mean: the focal pass rate is the area above +1 SD,
    # 15.87% (normal-curve table), so the ratio is .317.
    focal, ratio = expected_impact(1.0, 0.5)
    assert focal == pytest.approx(0.1587, abs=1e-4)
    assert ratio == pytest.approx(0.3173, abs=1e-4)
    assert expected_impact(0.0, 0.3) == pytest.approx((0.3, 1.0))
    assert expected_impact(0.8, 1.0) == pytest.approx((1.0, 1.0))  # everyone passes


def test_impact_limit_solves_the_inverse():
    for d in (0.2, 0.5, 1.0):
        lim = max_selection_ratio_for_floor(d, 0.8)
        assert lim.exists
        _, ratio = expected_impact(d, lim.min_reference_pass_rate)
        assert ratio == pytest.approx(0.8, abs=1e-9)
        # a more selective cut breaks the floor, a less selective one keeps it
        assert expected_impact(d, lim.min_reference_pass_rate * 0.95)[1] < 0.8
        assert expected_impact(d, min(1.0, lim.min_reference_pass_rate * 1.02))[1] > 0.8
        assert lim.max_cut_z == pytest.approx(norm.isf(lim.min_reference_pass_rate))


def test_impact_limit_edge_cases():
    none_needed = max_selection_ratio_for_floor(-0.2, 0.8)
    assert none_needed.exists and none_needed.min_reference_pass_rate == 0.0
    assert none_needed.max_cut_z == math.inf
    everyone = max_selection_ratio_for_floor(0.5, 1.0)
    assert everyone.min_reference_pass_rate == 1.0
    huge = max_selection_ratio_for_floor(3.0, 0.8)
    assert huge.exists and huge.min_reference_pass_rate > 0.99


@pytest.mark.parametrize(
    "call, words",
    [
        (lambda: impact_ratio(0.3, 0.0), "reference_rate must be greater than 0"),
        (lambda: impact_ratio(1.3, 0.5), "focal_rate must be between 0 and 1"),
        (lambda: expected_impact(0.5, 0.0), "reference_pass_rate must be greater than 0"),
        (lambda: expected_impact(float("inf"), 0.5), "d must be a finite number"),
        (lambda: max_selection_ratio_for_floor(0.5, 1.5), "floor must be greater than 0 and at most 1"),
    ],
)
def test_impossible_input_is_rejected(call, words):
    with pytest.raises(PsychometricsError, match=words):
        call()
