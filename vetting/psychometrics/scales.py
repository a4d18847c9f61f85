"""Normal curve and standard scores.

All conversions assume scores are normally distributed in the norm group (the usual
assumption behind derived standard scores; see docs/methods.md, Part 1, section 1).
Functions take a number or an array and return a float or an ndarray of the same shape.

Standard-score definitions (conventional; e.g. Anastasi & Urbina, 1997, *Psychological
Testing*, 7th ed., ch. 3):

* z = (raw - mean) / sd
* T = 50 + 10 z
* stanine: 1..9, boundaries at z = ±0.25, ±0.75, ±1.25, ±1.75 (each band half an SD wide,
  stanine 5 centred on the mean); a z exactly on a boundary goes to the higher stanine.
* sten: 1..10, mean 5.5, SD 2, boundaries at z = 0, ±0.5, ±1, ±1.5, ±2; a z exactly on a
  boundary goes to the higher sten.
* normal curve equivalent: NCE = 50 + 21.06 z (unrounded; not clipped to 1..99).
* percentile rank under normality: 100 Φ(z).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
from vetting.psychometrics import _normal as norm

from vetting.psychometrics import _checks as ck
from vetting.psychometrics.errors import PsychometricsError

STANINE_EDGES = np.array([-1.75, -1.25, -0.75, -0.25, 0.25, 0.75, 1.25, 1.75])
STEN_EDGES = np.array([-2.0, -1.5, -1.0, -0.5, 0.0, 0.5, 1.0, 1.5, 2.0])
NCE_SLOPE = 21.06


def z_from_raw(raw: Any, mean: Any, sd: Any) -> Any:
    """z = (raw - mean) / sd. `sd` must be greater than 0."""
    scalar = ck.is_scalar(raw, mean, sd)
    x = ck.number(raw, "raw")
    m = ck.number(mean, "mean")
    s = ck.positive(sd, "sd")
    return ck.out((x - m) / s, scalar)


def raw_from_z(z: Any, mean: Any, sd: Any) -> Any:
    """raw = mean + z * sd (the inverse of z_from_raw)."""
    scalar = ck.is_scalar(z, mean, sd)
    zz = ck.number(z, "z")
    m = ck.number(mean, "mean")
    s = ck.positive(sd, "sd")
    return ck.out(m + zz * s, scalar)


def t_from_z(z: Any) -> Any:
    """T score: mean 50, SD 10."""
    return ck.out(50.0 + 10.0 * ck.number(z, "z"), ck.is_scalar(z))


def z_from_t(t: Any) -> Any:
    return ck.out((ck.number(t, "t") - 50.0) / 10.0, ck.is_scalar(t))


def stanine_from_z(z: Any) -> Any:
    """Stanine 1..9 (int for a scalar, int ndarray for an array)."""
    zz = ck.number(z, "z")
    result = np.digitize(zz, STANINE_EDGES) + 1
    return int(result) if ck.is_scalar(z) else result


def sten_from_z(z: Any) -> Any:
    """Sten 1..10 (int for a scalar, int ndarray for an array)."""
    zz = ck.number(z, "z")
    result = np.digitize(zz, STEN_EDGES) + 1
    return int(result) if ck.is_scalar(z) else result


def nce_from_z(z: Any) -> Any:
    """Normal curve equivalent, 50 + 21.06 z (unrounded, not clipped)."""
    return ck.out(50.0 + NCE_SLOPE * ck.number(z, "z"), ck.is_scalar(z))


def percentile_from_z(z: Any) -> Any:
    """Percentile rank 0..100 under normality: 100 Φ(z)."""
    return ck.out(100.0 * norm.cdf(ck.number(z, "z")), ck.is_scalar(z))


def z_from_percentile(percentile: Any) -> Any:
    """Inverse of percentile_from_z; `percentile` strictly between 0 and 100."""
    p = ck.in_range(percentile, "percentile", 0.0, 100.0, lo_open=True, hi_open=True)
    return ck.out(norm.ppf(p / 100.0), ck.is_scalar(percentile))


def standard_scores(raw: Any, mean: Any, sd: Any) -> dict[str, Any]:
    """All standard scores for a raw score: keys z, t, stanine, sten, nce, percentile."""
    z = z_from_raw(raw, mean, sd)
    return {
        "z": z,
        "t": t_from_z(z),
        "stanine": stanine_from_z(z),
        "sten": sten_from_z(z),
        "nce": nce_from_z(z),
        "percentile": percentile_from_z(z),
    }


# ---------------------------------------------------------------------------
# Empirical norm tables
# ---------------------------------------------------------------------------

WITHIN = "within"
BELOW = "below"
ABOVE = "above"


@dataclass(frozen=True)
class TablePercentile:
    """Percentile rank read from an empirical norm table.

    `position` is "within", "below" or "above" the table's raw-score range. Outside the
    range the percentile is clamped to the table's first or last percentile and
    `in_range` is False: the table says only that the score is at or below (above) that
    point, so the figure is a bound, not an estimate.
    """

    raw: float
    percentile: float
    position: str
    in_range: bool
    note: str


def _table(points: Sequence[Sequence[float]]) -> tuple[np.ndarray, np.ndarray]:
    try:
        arr = np.asarray(points, dtype=float)
    except (TypeError, ValueError):
        raise PsychometricsError("points must be a sequence of (percentile, raw) pairs") from None
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise PsychometricsError("points must be a sequence of (percentile, raw) pairs")
    if arr.shape[0] < 2:
        raise PsychometricsError(f"points must hold at least 2 (percentile, raw) pairs; got {arr.shape[0]}")
    pct = ck.in_range(arr[:, 0], "points percentile", 0.0, 100.0, lo_open=True, hi_open=True)
    raw = ck.number(arr[:, 1], "points raw")
    order = np.argsort(pct)
    pct, raw = pct[order], raw[order]
    if np.any(np.diff(pct) <= 0):
        raise PsychometricsError("points percentile values must all differ (each percentile listed once)")
    if np.any(np.diff(raw) <= 0):
        raise PsychometricsError(
            "points raw scores must rise strictly as the percentile rises "
            "(a norm table is monotone; merge tied raw scores into one row)"
        )
    return pct, raw


def percentiles_from_table(raw: Any, points: Sequence[Sequence[float]]) -> tuple[np.ndarray, np.ndarray]:
    """Vectorised table look-up: (percentiles, positions) for an array of raw scores.

    Interpolation is monotone piecewise-cubic Hermite (Fritsch & Carlson, 1980, SIAM J.
    Numer. Anal. 17:238-246; scipy.interpolate.PchipInterpolator) of percentile on raw score,
    which never overshoots between table rows and keeps the percentile non-decreasing in raw.
    With two rows it is linear. Outside the table the percentile is clamped (see TablePercentile).
    """
    pct, table_raw = _table(points)
    x = ck.number(raw, "raw")
    from scipy.interpolate import PchipInterpolator  # imported here: slow to import

    interp = PchipInterpolator(table_raw, pct, extrapolate=False)
    inside = np.clip(x, table_raw[0], table_raw[-1])
    result = np.asarray(interp(inside), dtype=float)
    position = np.where(x < table_raw[0], BELOW, np.where(x > table_raw[-1], ABOVE, WITHIN))
    result = np.where(x < table_raw[0], pct[0], np.where(x > table_raw[-1], pct[-1], result))
    return result, position


def percentile_from_table(raw: float, points: Sequence[Sequence[float]]) -> TablePercentile:
    """Percentile rank of one raw score from a norm table of (percentile, raw) rows."""
    if not ck.is_scalar(raw):
        raise PsychometricsError("raw must be a single number here; use percentiles_from_table for arrays")
    values, positions = percentiles_from_table(raw, points)
    pct, table_raw = _table(points)
    value, position = float(values), str(positions)
    if position == BELOW:
        note = (
            f"raw {float(raw):g} is below the table's lowest row (raw {table_raw[0]:g} at "
            f"percentile {pct[0]:g}); the percentile is at most {pct[0]:g}"
        )
    elif position == ABOVE:
        note = (
            f"raw {float(raw):g} is above the table's highest row (raw {table_raw[-1]:g} at "
            f"percentile {pct[-1]:g}); the percentile is at least {pct[-1]:g}"
        )
    else:
        note = "interpolated monotonically between table rows"
    return TablePercentile(float(raw), value, position, position == WITHIN, note)
