"""Local validation planning: sample size for a validity study, and time to gather it.

n = ((z_(1−α/2) + z_power) / atanh(r))² + 3, rounded up (Fisher's z approximation; e.g.
Cohen, 1988, *Statistical Power Analysis for the Behavioral Sciences*, 2nd ed., ch. 3,
whose Table 3.4.1 gives exact values; the approximation agrees closely for r ≤ .3 and runs a
little high for larger r).
"""

from __future__ import annotations

import math
from typing import Any

from vetting.psychometrics import _normal as norm

from vetting.psychometrics import _checks as ck


def n_for_validity(r: float, power: float = 0.80, alpha: float = 0.05, two_sided: bool = True) -> int:
    """People needed to detect a population validity `r` (test of r = 0) with `power` at `alpha`."""
    rr = float(ck.in_range(r, "r", 0.0, 1.0, lo_open=True, hi_open=True))
    pw = float(ck.probability(power, "power"))
    a = float(ck.in_range(alpha, "alpha", 0.0, 0.5, lo_open=True, hi_open=True))
    za = norm.isf(a / 2.0) if two_sided else norm.isf(a)
    zb = norm.ppf(pw)
    n = ((za + zb) / math.atanh(rr)) ** 2 + 3.0
    return int(math.ceil(n - 1e-9))


def months_to_gather(n: Any, hires_per_year: Any) -> float:
    """Months to gather `n` people with criterion data at `hires_per_year`: 12·n / hires."""
    nn = float(ck.in_range(n, "n", 0.0))
    h = float(ck.positive(hires_per_year, "hires_per_year"))
    return 12.0 * nn / h
