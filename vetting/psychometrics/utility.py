"""Selection utility: Taylor-Russell, Naylor-Shine, Brogden-Cronbach-Gleser.

All three assume predictor and criterion are bivariate normal (standardised), selection is
strictly top-down on the predictor, and the validity is the operational validity in the
applicant population.

* Taylor & Russell (1939), J. Applied Psychology 23:565-578: expected proportion successful
  among those selected = P(X > x_c, Y > y_c) / SR, computed here from the bivariate normal
  (Owen's T function; Owen, 1956, Ann. Math. Statist. 27:1075-1090), not from a printed table.
* Naylor & Shine (1965), J. Industrial Psychology 3:33-42: mean standardised criterion score of
  those selected = r · φ(z_c) / SR.
* Brogden (1949), Cronbach & Gleser (1965): ΔU = N_s · T · r · SDy · φ(z_c)/SR − N_a · C.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.special import ndtr, ndtri, owens_t
from vetting.psychometrics import _normal as norm

from vetting.psychometrics import _checks as ck


def cut_z_for_selection_ratio(sr: Any) -> Any:
    """Predictor cut (z) that passes a share `sr` of applicants: Φ⁻¹(1 − SR).
    SR = 1 gives −inf (everyone passes)."""
    s = ck.in_range(sr, "selection_ratio", 0.0, 1.0, lo_open=True)
    return ck.out(norm.isf(s), ck.is_scalar(sr))


def bvn_cdf(h: Any, k: Any, rho: Any) -> np.ndarray:
    """P(X ≤ h, Y ≤ k) for a standard bivariate normal with correlation rho (vectorised).

    Owen (1956): Φ2(h,k;ρ) = ½Φ(h) + ½Φ(k) − T(h, a_h) − T(k, a_k) − β with
    a_h = (k − ρh)/(h√(1−ρ²)), a_k = (h − ρk)/(k√(1−ρ²)), β = ½ when hk < 0 or
    (hk = 0 and h + k < 0), else 0. The cases h = 0 or k = 0 use the limits of the same
    formula; |ρ| = 1 and infinite limits are handled exactly.
    """
    h, k, rho = np.broadcast_arrays(
        np.asarray(h, dtype=float), np.asarray(k, dtype=float), np.asarray(rho, dtype=float)
    )
    h, k, rho = h.astype(float), k.astype(float), rho.astype(float)
    result = np.empty(h.shape, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        ph, pk = norm.cdf(h), norm.cdf(k)
        # exact cases
        inf_h = np.isinf(h)
        inf_k = np.isinf(k)
        unit = np.abs(rho) >= 1.0
        general = ~(inf_h | inf_k | unit)
        s = np.sqrt(np.where(unit, 1.0, 1.0 - rho**2))
        h0 = h == 0.0
        k0 = k == 0.0
        safe_h = np.where(h0, 1.0, h)
        safe_k = np.where(k0, 1.0, k)
        t_h = owens_t(h, (k - rho * h) / (safe_h * s))
        t_k = owens_t(k, (h - rho * k) / (safe_k * s))
        beta = np.where((h * k < 0) | ((h * k == 0) & (h + k < 0)), 0.5, 0.0)
        val = 0.5 * ph + 0.5 * pk - t_h - t_k - beta
        # h == 0 (k != 0): ½Φ(k) − T(k, −ρ/√(1−ρ²));  k == 0 symmetric;  both: ¼ + asin(ρ)/(2π)
        only_h0 = h0 & ~k0
        only_k0 = k0 & ~h0
        val = np.where(only_h0, 0.5 * pk - owens_t(k, -rho / s), val)
        val = np.where(only_k0, 0.5 * ph - owens_t(h, -rho / s), val)
        val = np.where(h0 & k0, 0.25 + np.arcsin(np.clip(rho, -1, 1)) / (2 * np.pi), val)
        result[general] = val[general]
        # |rho| == 1 (finite or infinite limits)
        plus = unit & (rho > 0)
        minus = unit & (rho < 0)
        result[plus] = np.minimum(ph, pk)[plus]
        result[minus] = np.maximum(0.0, ph + pk - 1.0)[minus]
        # an infinite limit (rho < 1): the other margin or 0
        edge = (inf_h | inf_k) & ~unit
        edge_val = np.where(
            (inf_h & (h < 0)) | (inf_k & (k < 0)), 0.0, np.where(inf_h, pk, ph)
        )
        result[edge] = edge_val[edge]
    return np.clip(result, 0.0, 1.0)


def _bvn_scalar(h: float, k: float, rho: float) -> float:
    """bvn_cdf for one point with finite h, k and |rho| < 1 (same formula, no array overhead)."""
    s = math.sqrt(1.0 - rho * rho)
    if h == 0.0 and k == 0.0:
        val = 0.25 + math.asin(rho) / (2.0 * math.pi)
    elif h == 0.0:
        val = 0.5 * float(ndtr(k)) - float(owens_t(k, -rho / s))
    elif k == 0.0:
        val = 0.5 * float(ndtr(h)) - float(owens_t(h, -rho / s))
    else:
        beta = 0.5 if h * k < 0.0 else 0.0
        val = (
            0.5 * float(ndtr(h))
            + 0.5 * float(ndtr(k))
            - float(owens_t(h, (k - rho * h) / (h * s)))
            - float(owens_t(k, (h - rho * k) / (k * s)))
            - beta
        )
    return min(1.0, max(0.0, val))


def _check_scalar(value: Any, name: str, lo: float, hi: float, lo_open: bool, hi_open: bool) -> float:
    """Fast path for one plain number; falls back to the full check for the error message."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        v = float(value)
        if (v > lo if lo_open else v >= lo) and (v < hi if hi_open else v <= hi):
            return v
    return float(ck.in_range(value, name, lo, hi, lo_open=lo_open, hi_open=hi_open))


def _taylor_russell_scalar(r: Any, base_rate: Any, sr: Any) -> float:
    rr = _check_scalar(r, "validity", -1.0, 1.0, False, False)
    b = _check_scalar(base_rate, "base_rate", 0.0, 1.0, True, True)
    s = _check_scalar(sr, "selection_ratio", 0.0, 1.0, True, False)
    if rr == 0.0 or s == 1.0:
        return b
    h, k = float(ndtri(s)), float(ndtri(b))
    if abs(rr) == 1.0:
        joint = min(s, b) if rr > 0 else max(0.0, s + b - 1.0)
    else:
        joint = _bvn_scalar(h, k, rr)
    return min(1.0, max(0.0, joint / s))


def taylor_russell(r: Any, base_rate: Any, sr: Any) -> Any:
    """Expected proportion successful among those selected (Taylor & Russell, 1939).

    r: validity in [−1, 1]; base_rate: proportion successful without the test, in (0, 1);
    sr: selection ratio in (0, 1]. r = 0 returns the base rate; SR = 1 returns the base rate.
    Vectorised over all three arguments (numpy broadcasting).
    """
    scalar = ck.is_scalar(r, base_rate, sr)
    if scalar:
        return _taylor_russell_scalar(r, base_rate, sr)
    rr = ck.correlation(r, "validity")
    b = ck.probability(base_rate, "base_rate")
    s = ck.in_range(sr, "selection_ratio", 0.0, 1.0, lo_open=True)
    rr, b, s = np.broadcast_arrays(rr, b, s)
    joint = bvn_cdf(norm.ppf(s), norm.ppf(b), rr)  # P(X > x_c, Y > y_c) by symmetry
    success = np.clip(joint / s, 0.0, 1.0)
    success = np.where(rr == 0.0, b, success)
    success = np.where(s == 1.0, b, success)
    return ck.out(success, scalar)


def naylor_shine(r: Any, sr: Any) -> Any:
    """Mean standardised criterion score of those selected: r · φ(z_c) / SR (Naylor & Shine, 1965).
    SR = 1 gives 0 (no selection, no gain)."""
    scalar = ck.is_scalar(r, sr)
    rr = ck.correlation(r, "validity")
    s = ck.in_range(sr, "selection_ratio", 0.0, 1.0, lo_open=True)
    return ck.out(rr * norm.pdf(norm.isf(s)) / s, scalar)


@dataclass(frozen=True)
class Utility:
    """Brogden-Cronbach-Gleser utility of using the test instead of selecting at random."""

    utility: float  # net gain, in the units of SDy, over the tenure
    gain: float  # hires · tenure · r · SDy · φ(z_c)/SR
    testing_cost: float  # applicants · cost per applicant
    mean_criterion_z: float  # Naylor-Shine
    cut_z: float  # predictor cut for the selection ratio (−inf when SR = 1)
    ordinate: float  # φ(z_c)


def bcg_utility(
    r: float,
    sr: float,
    hires: float,
    tenure: float,
    sdy: float,
    applicants: float,
    cost: float,
) -> Utility:
    """ΔU = hires · tenure · r · SDy · φ(z_c)/SR − applicants · cost (Brogden, 1949;
    Cronbach & Gleser, 1965). Tenure is in the time unit SDy is expressed per (e.g. years)."""
    rr = float(ck.correlation(r, "validity"))
    s = float(ck.in_range(sr, "selection_ratio", 0.0, 1.0, lo_open=True))
    h = float(ck.positive(hires, "hires"))
    t = float(ck.positive(tenure, "tenure"))
    y = float(ck.in_range(sdy, "sdy", 0.0))
    a = float(ck.positive(applicants, "applicants"))
    c = float(ck.in_range(cost, "cost", 0.0))
    if a < h:
        raise ck.PsychometricsError(
            f"applicants must be at least hires; got applicants {a:g} and hires {h:g}"
        )
    zc = float(norm.isf(s))
    ordinate = float(norm.pdf(zc))
    mean_z = rr * ordinate / s
    gain = h * t * y * mean_z
    testing_cost = a * c
    return Utility(gain - testing_cost, gain, testing_cost, mean_z, zc, ordinate)
