"""Adverse impact: the four-fifths rule and the expected impact of a subgroup difference.

* Four-fifths rule: Uniform Guidelines on Employee Selection Procedures (1978),
  29 CFR 1607.4(D): "A selection rate for any race, sex, or ethnic group which is less than
  four-fifths (4/5) (or eighty percent) of the rate for the group with the highest rate will
  generally be regarded by the Federal enforcement agencies as evidence of adverse impact".
  So a ratio of exactly 0.80 is not flagged. The rule is a rule of thumb; the Guidelines
  themselves allow for statistical and practical significance and small samples.
* Expected impact of a standardised mean difference d (focal mean d reference-group SDs
  lower, equal SDs, normal scores, one cut): focal pass rate = Φ(Φ⁻¹(P) − d), where P is the
  reference group's pass rate (e.g. Sackett & Ellingson, 1997, Personnel Psychology 50:707-721).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from vetting.psychometrics import _normal as norm

from vetting.psychometrics import _checks as ck

FOUR_FIFTHS = 0.8


def impact_ratio(focal_rate: Any, reference_rate: Any) -> Any:
    """Focal selection rate / reference selection rate. reference_rate must be > 0."""
    scalar = ck.is_scalar(focal_rate, reference_rate)
    f = ck.probability(focal_rate, "focal_rate", zero=True, one=True)
    r = ck.in_range(reference_rate, "reference_rate", 0.0, 1.0, lo_open=True)
    return ck.out(f / r, scalar)


def four_fifths(focal_rate: Any, reference_rate: Any) -> tuple[Any, Any]:
    """(impact ratio, met): `met` is False when the ratio is less than 4/5 (29 CFR 1607.4(D)).

    Compare each group with the group that has the highest rate; a focal rate above the
    reference rate gives a ratio above 1, which meets the rule.
    """
    ratio = impact_ratio(focal_rate, reference_rate)
    met = np.asarray(ratio) >= FOUR_FIFTHS - 1e-12
    return ratio, (bool(met) if np.ndim(ratio) == 0 else met)


def expected_impact(d: Any, reference_pass_rate: Any) -> tuple[Any, Any]:
    """(focal pass rate, impact ratio) for a focal mean d SD below the reference mean, at the
    cut passing `reference_pass_rate` of the reference group. Vectorised."""
    scalar = ck.is_scalar(d, reference_pass_rate)
    dd = ck.number(d, "d")
    p = ck.in_range(reference_pass_rate, "reference_pass_rate", 0.0, 1.0, lo_open=True)
    focal = np.where(p == 1.0, 1.0, norm.cdf(norm.ppf(p) - dd))
    return ck.out(focal, scalar), ck.out(focal / p, scalar)


@dataclass(frozen=True)
class ImpactLimit:
    """The most selective cut that keeps the expected impact ratio at or above `floor`.

    For d > 0 the expected ratio rises steadily as the cut is lowered (more people pass), so
    every cut at or below `max_cut_z` (every reference pass rate at or above
    `min_reference_pass_rate`) also meets the floor. For d ≤ 0 any cut meets a floor ≤ 1.
    """

    d: float
    floor: float
    exists: bool
    min_reference_pass_rate: float | None  # the smallest selection ratio (reference group)
    max_cut_z: float | None  # the highest cut, in reference-group z units (inf: any cut)
    note: str


def max_selection_ratio_for_floor(d: float, floor: float = FOUR_FIFTHS) -> ImpactLimit:
    """Where the expected impact ratio Φ(Φ⁻¹(P) − d)/P reaches `floor` (0 < floor ≤ 1).

    Returns the limit as an ImpactLimit: the highest cut (lowest reference pass rate) at which
    the expected ratio is still at least `floor`. Solved with Brent's method on the log ratio.
    """
    dd = float(ck.number(d, "d"))
    fl = float(ck.in_range(floor, "floor", 0.0, 1.0, lo_open=True))
    if dd <= 0.0:
        return ImpactLimit(
            dd, fl, True, 0.0, math.inf,
            "the focal group does not score lower (d <= 0): every cut meets the floor",
        )
    if fl >= 1.0:
        return ImpactLimit(
            dd, fl, True, 1.0, -math.inf,
            "with d > 0 an expected ratio of 1 is reached only when everyone passes",
        )
    target = math.log(fl)

    def gap(c: float) -> float:  # log ratio − log floor, decreasing in the cut c
        return float(norm.logsf(c + dd) - norm.logsf(c)) - target

    lo, hi = -40.0, 1.0
    while gap(hi) > 0.0:
        hi *= 2.0
        if hi > 1e6:  # pragma: no cover - ratio always falls below any floor < 1 eventually
            return ImpactLimit(dd, fl, False, None, None, "no cut found")
    if gap(lo) < 0.0:
        return ImpactLimit(
            dd, fl, False, None, None,
            "even passing nearly everyone leaves the expected ratio below the floor",
        )
    from scipy.optimize import brentq  # imported here: scipy.optimize is slow to import

    cut = brentq(gap, lo, hi, xtol=1e-12, rtol=1e-12)
    p = float(norm.sf(cut))
    return ImpactLimit(
        dd, fl, True, p, float(cut),
        f"pass at least {100 * p:.1f}% of the reference group (cut at z <= {cut:.3f}) to keep the "
        f"expected impact ratio at or above {fl:g}",
    )
