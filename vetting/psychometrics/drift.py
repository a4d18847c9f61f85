"""Norm drift: how far an old ability norm may have drifted (the Flynn effect).

Flynn (1987), "Massive IQ gains in 14 nations", Psychological Bulletin 101:171-191, reports
gains on ability tests of roughly 3 IQ points (0.2 SD) per decade; later reviews (e.g.
Pietschnig & Voracek, 2015, Perspectives on Psychological Science 10:282-306) find the rate
varies by country, period and kind of test, and has slowed or reversed in some countries.
"""

from __future__ import annotations

from dataclasses import dataclass

from vetting.psychometrics import _normal as norm

from vetting.psychometrics import _checks as ck
from vetting.psychometrics.errors import PsychometricsError

CAVEAT = (
    "An estimate, not a correction: it assumes the documented average rate of the Flynn effect "
    "(Flynn, 1987) applied to this norm's population, which varies by country, period and kind "
    "of ability and has slowed or reversed in some countries since the 1990s. It applies to "
    "ability norms only. Prefer a newer or local norm over adjusting scores."
)


@dataclass(frozen=True)
class NormDrift:
    years: float
    iq_points: float  # expected rise of the population mean, in IQ points (SD 15)
    sd_units: float  # the same rise in SD units
    percentile_at_old_mean: float  # percentile (old norm) now earned by a person of today's average
    points_per_decade: float
    caveat: str


def norm_drift(
    norm_year: float,
    as_of_year: float,
    points_per_decade: float = 3.0,
    sd_points: float = 15.0,
) -> NormDrift:
    """Drift of a norm collected in `norm_year`, as of `as_of_year`.

    sd_units = years/10 · points_per_decade / sd_points. `percentile_at_old_mean` is what an
    average person today would score against the old norm: 100·Φ(sd_units).
    """
    ny = float(ck.in_range(norm_year, "norm_year", 1800, 2200))
    ay = float(ck.in_range(as_of_year, "as_of_year", 1800, 2200))
    if ay < ny:
        raise PsychometricsError(
            f"as_of_year must be at or after norm_year; got norm_year {ny:g} and as_of_year {ay:g}"
        )
    rate = float(ck.in_range(points_per_decade, "points_per_decade", 0.0, 15.0))
    sd = float(ck.positive(sd_points, "sd_points"))
    years = ay - ny
    points = years / 10.0 * rate
    units = points / sd
    return NormDrift(years, points, units, float(100.0 * norm.cdf(units)), rate, CAVEAT)
