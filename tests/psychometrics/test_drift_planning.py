"""Norm drift (Flynn, 1987) and sample size for a local validation study (Fisher's z; Cohen, 1988)."""

from __future__ import annotations

import math

import pytest
from scipy.stats import norm

from vetting.psychometrics import (
    DRIFT_CAVEAT,
    PsychometricsError,
    months_to_gather,
    n_for_validity,
    norm_drift,
)


def test_flynn_rate_three_points_per_decade():
    # Flynn (1987), Psychol. Bull. 101:171-191: about 3 IQ points (0.2 SD) per decade.
    d = norm_drift(1996, 2026)
    assert d.years == 30
    assert d.iq_points == pytest.approx(9.0)
    assert d.sd_units == pytest.approx(0.6)
    # today's average person against the old norm: Φ(0.6) = 72.57th percentile (normal table)
    assert d.percentile_at_old_mean == pytest.approx(72.57, abs=0.01)
    assert d.caveat == DRIFT_CAVEAT and "estimate" in d.caveat
    assert norm_drift(2026, 2026).iq_points == 0.0
    assert norm_drift(2000, 2020, points_per_decade=2.0).sd_units == pytest.approx(4 / 15)


def test_norm_drift_rejects_a_norm_from_the_future():
    with pytest.raises(PsychometricsError, match="as_of_year must be at or after norm_year"):
        norm_drift(2030, 2026)
    with pytest.raises(PsychometricsError, match="points_per_decade"):
        norm_drift(2000, 2026, points_per_decade=-1)


def test_sample_size_matches_cohen_table():
    # Cohen (1988), Statistical Power Analysis, 2nd ed., Table 3.4.1 (two-tailed α = .05,
    # power .80): r = .10 -> 783, r = .20 -> 194, r = .30 -> 85 (values from memory). Fisher's z
    # approximation agrees exactly at these effect sizes.
    assert n_for_validity(0.10) == 783
    assert n_for_validity(0.20) == 194
    assert n_for_validity(0.30) == 85


def test_sample_size_is_the_smallest_n_reaching_the_power():
    # Power of the Fisher-z test at n: Φ(atanh(r)·√(n − 3) − z_(1−α/2)), scipy normal as reference.
    for r, power, alpha in [(0.25, 0.8, 0.05), (0.35, 0.9, 0.01), (0.15, 0.7, 0.10)]:
        n = n_for_validity(r, power, alpha)
        za = norm.isf(alpha / 2)
        assert norm.cdf(math.atanh(r) * math.sqrt(n - 3) - za) >= power
        assert norm.cdf(math.atanh(r) * math.sqrt(n - 4) - za) < power
    assert n_for_validity(0.3, two_sided=False) < n_for_validity(0.3, two_sided=True)


def test_months_to_gather():
    assert months_to_gather(85, 40) == pytest.approx(25.5)
    with pytest.raises(PsychometricsError, match="hires_per_year must be greater than 0"):
        months_to_gather(85, 0)
    with pytest.raises(PsychometricsError, match="n must be at least 0"):
        months_to_gather(-1, 10)


@pytest.mark.parametrize("r", [0.0, 1.0, -0.2, 1.5])
def test_impossible_validity_rejected(r):
    with pytest.raises(PsychometricsError, match="r must be greater than 0 and less than 1"):
        n_for_validity(r)
