"""Property tests (hypothesis): conversions invert, percentiles are monotone, success rate
rises with validity and equals the base rate at r = 0, bands widen as reliability falls."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from vetting.psychometrics import (
    band_half_width,
    expected_impact,
    percentile_from_z,
    percentiles_from_table,
    range_restriction_case2,
    raw_from_z,
    sem,
    spearman_brown,
    spearman_brown_length,
    stanine_from_z,
    sten_from_z,
    t_from_z,
    taylor_russell,
    z_from_percentile,
    z_from_raw,
    z_from_t,
)

finite = st.floats(-1e4, 1e4, allow_nan=False)
sds = st.floats(0.01, 1e3)
zs = st.floats(-6, 6)
unit_open = st.floats(0.001, 0.999)
validity = st.floats(-0.99, 0.99)


@given(finite, finite, sds)
def test_raw_z_round_trip(raw, mean, sd):
    assert raw_from_z(z_from_raw(raw, mean, sd), mean, sd) == pytest.approx(raw, abs=1e-6 * (1 + abs(raw)))


@given(zs)
def test_t_and_percentile_round_trip(z):
    assert z_from_t(t_from_z(z)) == pytest.approx(z, abs=1e-9)
    assert z_from_percentile(percentile_from_z(z)) == pytest.approx(z, abs=1e-6)


@given(zs, zs)
def test_percentiles_and_bands_are_monotone(a, b):
    lo, hi = min(a, b), max(a, b)
    assert percentile_from_z(lo) <= percentile_from_z(hi)
    assert stanine_from_z(lo) <= stanine_from_z(hi)
    assert sten_from_z(lo) <= sten_from_z(hi)
    assert 1 <= stanine_from_z(a) <= 9 and 1 <= sten_from_z(a) <= 10


@given(st.lists(st.floats(0.5, 20), min_size=2, max_size=8), st.lists(finite, min_size=2, max_size=20))
def test_table_percentiles_are_monotone(steps, raws):
    table_raw = np.cumsum(steps)
    pcts = np.linspace(5, 95, len(steps))
    got, _ = percentiles_from_table(np.sort(raws), list(zip(pcts, table_raw)))
    assert np.all(np.diff(got) >= -1e-9)


@given(validity, validity, unit_open, unit_open)
@settings(max_examples=150)
def test_success_rate_rises_with_validity(r1, r2, base, sr):
    assume(abs(r1 - r2) > 1e-3)
    lo, hi = min(r1, r2), max(r1, r2)
    assert taylor_russell(lo, base, sr) <= taylor_russell(hi, base, sr) + 1e-9


@given(unit_open, st.floats(0.001, 1.0))
def test_success_rate_equals_base_rate_at_zero_validity(base, sr):
    assert taylor_russell(0.0, base, sr) == pytest.approx(base, abs=1e-12)


@given(st.floats(0.001, 0.999), validity, unit_open)
def test_success_rate_above_base_rate_for_positive_validity(sr, r, base):
    assume(r > 0.01 and sr < 0.99)
    assert taylor_russell(r, base, sr) >= base - 1e-9


@given(sds, st.floats(0, 1), st.floats(0, 1), st.floats(0.5, 0.999))
def test_bands_widen_as_reliability_falls(sd, r1, r2, conf):
    lo, hi = min(r1, r2), max(r1, r2)
    assert band_half_width(sem(sd, lo), conf) >= band_half_width(sem(sd, hi), conf)


@given(unit_open, unit_open)
def test_spearman_brown_length_inverts(r, target):
    k = spearman_brown_length(r, target)
    assert spearman_brown(r, k) == pytest.approx(target, abs=1e-9)


@given(validity, st.floats(0.2, 5))
def test_case_ii_undone_by_the_reverse_ratio(r, u):
    assert range_restriction_case2(range_restriction_case2(r, u), 1 / u) == pytest.approx(r, abs=1e-9)


@given(st.floats(0.01, 2), st.floats(0.01, 0.99), st.floats(0.01, 0.99))
def test_expected_impact_ratio_rises_as_the_cut_falls(d, p1, p2):
    assume(abs(p1 - p2) > 1e-4)
    lo, hi = min(p1, p2), max(p1, p2)
    assert expected_impact(d, lo)[1] <= expected_impact(d, hi)[1] + 1e-12


@given(st.floats(-1, 1), st.floats(1e-6, 1 - 1e-6), st.floats(1e-6, 1.0))
@settings(max_examples=150)
def test_scalar_and_vectorised_taylor_russell_agree(r, base, sr):
    # The scalar fast path and the array path implement the same formula (Owen, 1956).
    vec = taylor_russell(np.array([r]), np.array([base]), np.array([sr]))[0]
    assert taylor_russell(r, base, sr) == pytest.approx(vec, abs=1e-12)
