"""Measurement error: SEM, bands and Spearman-Brown, checked by hand computation of the
published formulas and against the normal-curve table."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import norm

from vetting.psychometrics import (
    PsychometricsError,
    band_half_width,
    confidence_band,
    confidence_fraction,
    cut_band,
    se_difference,
    sem,
    spearman_brown,
    spearman_brown_length,
    z_for_confidence,
)


def test_sem_textbook_examples():
    # SEM = SD·√(1 − r_xx) (Gulliksen, 1950, Theory of Mental Tests, ch. 2). The usual textbook
    # illustration: an IQ-type scale with SD 15 and reliability .91 has SEM 15 × 0.3 = 4.5;
    # SD 10 and reliability .84 gives 10 × 0.4 = 4.0 (hand computation).
    assert sem(15, 0.91) == pytest.approx(4.5)
    assert sem(10, 0.84) == pytest.approx(4.0)
    assert sem(10, 1.0) == 0.0
    assert sem(10, 0.0) == pytest.approx(10.0)


def test_normal_multipliers_match_the_normal_table():
    # Two-sided normal multipliers 1.645 (90%), 1.960 (95%), 2.576 (99%) from any normal table.
    assert z_for_confidence(0.90) == pytest.approx(1.645, abs=5e-4)
    assert z_for_confidence(0.95) == pytest.approx(1.960, abs=5e-4)
    assert z_for_confidence(0.99) == pytest.approx(2.576, abs=5e-4)
    # and scipy's normal quantile as reference library
    assert z_for_confidence(0.8) == pytest.approx(norm.ppf(0.9))


def test_confidence_band_and_half_width():
    # 95% band around an observed 100 with SEM 4.5: 100 ± 1.96 × 4.5 = 91.18 .. 108.82 (hand).
    lo, hi = confidence_band(100, 4.5, 0.95)
    assert lo == pytest.approx(91.18, abs=0.01)
    assert hi == pytest.approx(108.82, abs=0.01)
    assert band_half_width(4.5, 0.95) == pytest.approx(8.82, abs=0.01)
    # 68% band is about ±1 SEM (normal table: 68.27% within ±1 SD)
    lo, hi = confidence_band(50, 3, 0.6827)
    assert (lo, hi) == pytest.approx((47.0, 53.0), abs=0.01)


def test_cut_band_is_symmetric_about_the_cut():
    lo, hi = cut_band(60, 2.0, 0.90)
    assert (lo + hi) / 2 == pytest.approx(60)
    assert hi - lo == pytest.approx(2 * 1.645 * 2.0, abs=2e-3)


def test_bands_are_vectorised():
    lo, hi = confidence_band(np.array([10.0, 20.0]), np.array([1.0, 2.0]), 0.95)
    assert lo.shape == (2,)
    assert np.allclose(hi - lo, 2 * 1.959964 * np.array([1.0, 2.0]), atol=1e-5)


def test_se_difference():
    # SE of a difference = SD·√(2 − r1 − r2) = √(SEM1² + SEM2²) (Anastasi & Urbina, 1997,
    # Psychological Testing, ch. 5). SD 10, r .90 and .80: 10·√0.3 = 5.477 (hand computation).
    assert se_difference(10, 0.9, 0.8) == pytest.approx(5.4772, abs=1e-4)
    assert se_difference(10, 0.9, 0.8) == pytest.approx(np.hypot(sem(10, 0.9), sem(10, 0.8)))


def test_spearman_brown_worked_examples():
    # Spearman (1910), Brown (1910): r_kk = k·r/(1 + (k − 1)·r). Classic illustrations (hand):
    # doubling a test of reliability .60 gives 1.2/1.6 = .75; tripling .50 gives 1.5/2 = .75;
    # halving .80 gives .4/.6 = .667.
    assert spearman_brown(0.60, 2) == pytest.approx(0.75)
    assert spearman_brown(0.50, 3) == pytest.approx(0.75)
    assert spearman_brown(0.80, 0.5) == pytest.approx(2 / 3)
    assert spearman_brown(0.0, 5) == 0.0
    assert spearman_brown(1.0, 0.3) == pytest.approx(1.0)


def test_spearman_brown_length_worked_examples():
    # k = r_t(1 − r)/(r(1 − r_t)): .60 → .75 needs k = 2; .70 → .90 needs .27/.07 = 3.857 (hand).
    assert spearman_brown_length(0.60, 0.75) == pytest.approx(2.0)
    assert spearman_brown_length(0.70, 0.90) == pytest.approx(3.857, abs=1e-3)
    assert spearman_brown_length(0.80, 0.60) == pytest.approx(0.375)


def test_confidence_fraction_reads_fraction_or_percent():
    assert confidence_fraction(0.9) == pytest.approx(0.9)
    assert confidence_fraction(95) == pytest.approx(0.95)
    for bad in (0, 1, 100, -5, 150):
        with pytest.raises(PsychometricsError, match="confidence"):
            confidence_fraction(bad)


@pytest.mark.parametrize(
    "call, words",
    [
        (lambda: sem(15, 1.2), "reliability must be between 0 and 1"),
        (lambda: sem(0, 0.8), "sd must be greater than 0"),
        (lambda: sem(-3, 0.8), "sd must be greater than 0"),
        (lambda: sem(float("nan"), 0.8), "sd must be a finite number"),
        (lambda: se_difference(10, 0.9, -0.1), "r2 must be between 0 and 1"),
        (lambda: confidence_band(100, -1, 0.95), "sem must be at least 0"),
        (lambda: z_for_confidence(1.0), "confidence must be greater than 0 and less than 1"),
        (lambda: spearman_brown(0.7, 0), "k must be greater than 0"),
        (lambda: spearman_brown_length(0.7, 1.0), "target must be greater than 0 and less than 1"),
        (lambda: spearman_brown_length(0.0, 0.8), "r must be greater than 0"),
        (lambda: sem("abc", 0.8), "sd must be a number"),
    ],
)
def test_impossible_input_is_rejected(call, words):
    with pytest.raises(PsychometricsError, match=words):
        call()


def test_error_type_is_a_value_error():
    assert issubclass(PsychometricsError, ValueError)
