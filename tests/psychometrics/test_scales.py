"""Standard scores and percentiles, checked against the normal curve (scipy.stats.norm as the
reference library) and against published normal-curve facts."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import norm

from vetting.psychometrics import (
    PsychometricsError,
    nce_from_z,
    percentile_from_table,
    percentile_from_z,
    percentiles_from_table,
    raw_from_z,
    standard_scores,
    stanine_from_z,
    sten_from_z,
    t_from_z,
    z_from_percentile,
    z_from_raw,
    z_from_t,
)


def _shares(func, n_bins: int, offset: int) -> np.ndarray:
    """Share (in %) of a normal population in each band, from an evenly spaced quantile grid."""
    grid = norm.ppf((np.arange(200_000) + 0.5) / 200_000)
    bands = np.asarray(func(grid))
    return np.bincount(bands - offset, minlength=n_bins) / grid.size * 100


def test_stanine_percentages_4_7_12_17_20_17_12_7_4():
    # Published stanine distribution 4-7-12-17-20-17-12-7-4 per cent (e.g. Anastasi & Urbina,
    # 1997, Psychological Testing, 7th ed., ch. 3; value from memory). The printed figures are
    # rounded to whole per cents, so each band must round to them (within half a per cent).
    shares = _shares(stanine_from_z, 9, 1)
    expected = np.array([4, 7, 12, 17, 20, 17, 12, 7, 4])
    assert np.all(np.abs(shares - expected) <= 0.5), shares


def test_sten_percentages():
    # Sten bands are half an SD wide around a mean of 5.5 (Canfield, 1951); per cents
    # 2.3-4.4-9.2-15.0-19.1-19.1-15.0-9.2-4.4-2.3 read from a normal-curve table (value from memory).
    shares = _shares(sten_from_z, 10, 1)
    expected = np.array([2.3, 4.4, 9.2, 15.0, 19.1, 19.1, 15.0, 9.2, 4.4, 2.3])
    assert np.all(np.abs(shares - expected) <= 0.06), shares


def test_one_and_two_sd_areas_of_the_normal_curve():
    # Normal-curve table: 68.26% of cases within ±1 SD, 95.44% within ±2 SD (printed as
    # 2 × 34.13 and 2 × 47.72 in textbook normal-curve figures; exact 68.27 and 95.45, so a
    # tolerance of 0.015 percentage points covers the printed rounding).
    assert percentile_from_z(1.0) - percentile_from_z(-1.0) == pytest.approx(68.26, abs=0.015)
    assert percentile_from_z(2.0) - percentile_from_z(-2.0) == pytest.approx(95.44, abs=0.015)


def test_percentile_matches_scipy_reference():
    z = np.linspace(-4, 4, 801)
    assert np.allclose(percentile_from_z(z), 100 * norm.cdf(z), atol=1e-12)
    p = np.linspace(0.5, 99.5, 199)
    assert np.allclose(z_from_percentile(p), norm.ppf(p / 100), atol=1e-12)


def test_t_score_and_z_definitions():
    # T = 50 + 10z (McCall, 1922; common definition); z = (X − M)/SD.
    assert z_from_raw(115, 100, 15) == pytest.approx(1.0)
    assert raw_from_z(-2, 100, 15) == pytest.approx(70.0)
    assert t_from_z(1.5) == pytest.approx(65.0)
    assert z_from_t(30) == pytest.approx(-2.0)


def test_nce_equals_percentile_at_1_50_99():
    # Normal curve equivalents were defined (Tallmadge & Wood, 1976, ESEA Title I evaluation
    # models) so that NCE 1, 50 and 99 coincide with percentile ranks 1, 50 and 99.
    for p in (1, 50, 99):
        assert nce_from_z(norm.ppf(p / 100)) == pytest.approx(p, abs=0.02)


def test_stanine_and_sten_boundaries():
    # Stanine 5 spans −0.25..+0.25 SD; each band is 0.5 SD (common definition).
    assert stanine_from_z(0.0) == 5
    assert stanine_from_z(0.24) == 5
    assert stanine_from_z(0.26) == 6
    assert stanine_from_z(-1.76) == 1
    assert stanine_from_z(3.0) == 9
    assert stanine_from_z(-9.0) == 1
    # Sten 5 spans −0.5..0 SD, sten 6 spans 0..+0.5 SD.
    assert sten_from_z(-0.1) == 5
    assert sten_from_z(0.1) == 6
    assert sten_from_z(-2.1) == 1
    assert sten_from_z(2.1) == 10


def test_standard_scores_dict_scalar_and_array():
    s = standard_scores(130, 100, 15)
    assert set(s) == {"z", "t", "stanine", "sten", "nce", "percentile"}
    assert s["z"] == pytest.approx(2.0)
    assert s["t"] == pytest.approx(70.0)
    assert s["stanine"] == 9
    assert s["sten"] == 10
    assert s["nce"] == pytest.approx(50 + 21.06 * 2)
    assert s["percentile"] == pytest.approx(100 * norm.cdf(2.0))
    arr = standard_scores(np.array([85.0, 100.0]), 100, 15)
    assert arr["stanine"].tolist() == [3, 5]


# --- empirical norm tables -------------------------------------------------------------

TABLE = [(10, 12.0), (25, 16.0), (50, 20.0), (75, 25.0), (90, 30.0)]


def test_table_rows_are_reproduced_exactly():
    for pct, raw in TABLE:
        got = percentile_from_table(raw, TABLE)
        assert got.percentile == pytest.approx(pct)
        assert got.in_range and got.position == "within"


def test_two_row_table_is_linear():
    # With two rows the monotone cubic reduces to a straight line (Fritsch & Carlson, 1980).
    got = percentile_from_table(15.0, [(20, 10.0), (60, 20.0)])
    assert got.percentile == pytest.approx(40.0)


def test_outside_the_table_is_clamped_and_flagged():
    low = percentile_from_table(5.0, TABLE)
    high = percentile_from_table(45.0, TABLE)
    assert (low.percentile, low.position, low.in_range) == (10.0, "below", False)
    assert (high.percentile, high.position, high.in_range) == (90.0, "above", False)
    assert "at most 10" in low.note and "at least 90" in high.note


def test_table_built_from_a_normal_distribution_tracks_the_normal_percentile():
    # A norm table printed from a normal population (mean 50, SD 10) at percentiles 1..99:
    # interpolating it must give the normal-curve percentile (scipy reference) within 0.3.
    pcts = [1, 2, 5, 10, 16, 25, 40, 50, 60, 75, 84, 90, 95, 98, 99]
    table = [(p, 50 + 10 * norm.ppf(p / 100)) for p in pcts]
    raw = np.linspace(28, 72, 200)
    got, pos = percentiles_from_table(raw, table)
    assert np.all(pos == "within")
    assert np.allclose(got, 100 * norm.cdf((raw - 50) / 10), atol=0.3)


def test_table_interpolation_is_monotone_and_does_not_overshoot():
    raw = np.linspace(12, 30, 500)
    got, _ = percentiles_from_table(raw, TABLE)
    assert np.all(np.diff(got) >= -1e-12)
    assert got.min() >= 10 - 1e-9 and got.max() <= 90 + 1e-9


@pytest.mark.parametrize(
    "points, words",
    [
        ([(10, 12.0)], "at least 2"),
        ([(10, 12.0), (50, 12.0)], "rise strictly"),
        ([(10, 14.0), (50, 12.0)], "rise strictly"),
        ([(0, 12.0), (50, 14.0)], "points percentile"),
        ([(10, 12.0), (10, 14.0)], "differ"),
        ([(10, 12.0, 1)], "pairs"),
    ],
)
def test_bad_tables_are_rejected(points, words):
    with pytest.raises(PsychometricsError, match=words):
        percentile_from_table(15.0, points)
