"""Measurement error: SEM, SE of a difference, confidence bands, Spearman-Brown.

Classical test theory (Gulliksen, 1950, *Theory of Mental Tests*, ch. 2 and 8; Lord &
Novick, 1968, *Statistical Theories of Mental Test Scores*, ch. 3). Bands assume normally
distributed errors of equal size across the score range.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from vetting.psychometrics import _normal as norm

from vetting.psychometrics import _checks as ck
from vetting.psychometrics.errors import PsychometricsError


def sem(sd: Any, reliability: Any) -> Any:
    """Standard error of measurement: SD · √(1 − r_xx)."""
    scalar = ck.is_scalar(sd, reliability)
    s = ck.positive(sd, "sd")
    r = ck.reliability(reliability)
    return ck.out(s * np.sqrt(1.0 - r), scalar)


def se_difference(sd: Any, r1: Any, r2: Any) -> Any:
    """Standard error of the difference between two scores on the same scale:
    SD · √(2 − r1 − r2) = √(SEM1² + SEM2²)."""
    scalar = ck.is_scalar(sd, r1, r2)
    s = ck.positive(sd, "sd")
    a = ck.reliability(r1, "r1")
    b = ck.reliability(r2, "r2")
    return ck.out(s * np.sqrt(2.0 - a - b), scalar)


def confidence_fraction(confidence: Any) -> float:
    """Read a confidence level given as a fraction (0.95) or a percent (95).

    Values strictly between 0 and 1 are fractions; values strictly between 1 and 100 are
    percents. Anything else is rejected.
    """
    c = ck.number(confidence, "confidence")
    if c.ndim:
        raise PsychometricsError("confidence must be a single number")
    value = float(c)
    if 0.0 < value < 1.0:
        return value
    if 1.0 < value < 100.0:
        return value / 100.0
    raise PsychometricsError(
        f"confidence must be a fraction between 0 and 1 (e.g. 0.95) or a percent between 1 and 100 "
        f"(e.g. 95), exclusive; got {value:g}"
    )


def z_for_confidence(confidence: Any) -> Any:
    """Two-sided normal multiplier for a confidence level in (0, 1): Φ⁻¹((1 + C) / 2)."""
    c = ck.probability(confidence, "confidence", hint=" (a fraction, e.g. 0.95)")
    return ck.out(norm.ppf((1.0 + c) / 2.0), ck.is_scalar(confidence))


def confidence_band(score: Any, sem: Any, confidence: Any = 0.95) -> tuple[Any, Any]:
    """Band around an observed score: score ± z_C · SEM. Returns (lo, hi)."""
    scalar = ck.is_scalar(score, sem, confidence)
    x = ck.number(score, "score")
    e = ck.in_range(sem, "sem", 0.0)
    half = np.asarray(z_for_confidence(confidence)) * e
    return ck.out(x - half, scalar), ck.out(x + half, scalar)


def band_half_width(sem: Any, confidence: Any = 0.95) -> Any:
    """Half the width of a band: z_C · SEM."""
    scalar = ck.is_scalar(sem, confidence)
    e = ck.in_range(sem, "sem", 0.0)
    return ck.out(np.asarray(z_for_confidence(confidence)) * e, scalar)


def cut_band(cut: Any, sem: Any, confidence: Any = 0.95) -> tuple[Any, Any]:
    """Band of observed scores around a cut score (cut ± z_C · SEM) within which a pass or fail
    cannot be told apart from measurement error at the chosen confidence. Returns (lo, hi)."""
    scalar = ck.is_scalar(cut, sem, confidence)
    c = ck.number(cut, "cut")
    e = ck.in_range(sem, "sem", 0.0)
    half = np.asarray(z_for_confidence(confidence)) * e
    return ck.out(c - half, scalar), ck.out(c + half, scalar)


def spearman_brown(r: Any, k: Any) -> Any:
    """Predicted reliability when a test's length is multiplied by k (Spearman, 1910;
    Brown, 1910): k·r / (1 + (k − 1)·r)."""
    scalar = ck.is_scalar(r, k)
    rr = ck.reliability(r, "r")
    kk = ck.positive(k, "k")
    return ck.out(kk * rr / (1.0 + (kk - 1.0) * rr), scalar)


def spearman_brown_length(r: Any, target: Any) -> Any:
    """Length factor needed to move reliability r to `target`:
    k = target·(1 − r) / (r·(1 − target)). Both must be strictly between 0 and 1."""
    scalar = ck.is_scalar(r, target)
    rr = ck.probability(r, "r")
    t = ck.probability(target, "target")
    return ck.out(t * (1.0 - rr) / (rr * (1.0 - t)), scalar)
