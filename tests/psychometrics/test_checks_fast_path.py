"""The argument checks' plain-Python fast path (for plain floats, ints and short lists) must
give exactly what the numpy path gives: the same array back, the same error message.

The reference is the numpy path itself (the fast path switched off), which the other tests in
this folder check against published values; this file only guards the shortcut.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from vetting.psychometrics import _checks as ck
from vetting.psychometrics import validity as pv
from vetting.psychometrics.errors import PsychometricsError


def _outcome(fn):
    try:
        got = fn()
    except (PsychometricsError, TypeError, ValueError, OverflowError) as exc:
        return ("error", type(exc).__name__, str(exc))
    arr = np.asarray(got)
    return ("ok", type(got).__name__, arr.dtype.str, arr.shape, arr.tobytes())


def _both(fn, monkeypatch):
    fast = _outcome(fn)
    with monkeypatch.context() as m:
        m.setattr(ck, "_passes", lambda *a, **k: False)
        slow = _outcome(fn)
    return fast, slow


VALUES = [
    0.5, 0, 1, -1, 3, 1.0, True, 2.5, -0.2, math.nan, math.inf, -math.inf, 10**400, np.float64(0.3),
    [0.1, 0.2], (0.4,), [0.1, 1.5], [0.2, math.nan], [], [0.1, "x"], [1, 10**400], [[0.1, 0.2]],
    np.array([0.2, 0.9]), np.array([0.2, np.nan]), np.array(0.5), np.arange(100) / 100.0, "0.5", None,
]


@pytest.mark.parametrize("value", VALUES, ids=repr)
def test_fast_path_matches_numpy_path(value, monkeypatch):
    checks = [
        lambda: ck.number(value, "x"),
        lambda: ck.in_range(value, "x", 0.0, 1.0),
        lambda: ck.in_range(value, "x", 0.0, 1.0, lo_open=True, hi_open=True, hint=" (hint)"),
        lambda: ck.in_range(value, "ns", 3.0, lo_open=True),
        lambda: ck.in_range(value, "x", hi=1.0, hi_open=True),
        lambda: ck.correlation(value, "r", closed=False),
        lambda: ck.probability(value, "p"),
        lambda: ck.out(value, ck.is_scalar(value)),
    ]
    for check in checks:
        fast, slow = _both(check, monkeypatch)
        assert fast == slow


finite = st.floats(min_value=-5, max_value=5, allow_nan=False)


@given(st.lists(finite | st.integers(-5, 5), min_size=1, max_size=6), st.booleans(), st.booleans())
def test_fast_path_matches_numpy_path_random(values, lo_open, hi_open):
    def run(passes):
        original = ck._passes
        ck._passes = passes
        try:
            return _outcome(lambda: ck.in_range(values, "x", -1.0, 1.0, lo_open=lo_open, hi_open=hi_open))
        finally:
            ck._passes = original

    assert run(ck._passes) == run(lambda *a, **k: False)


def test_conservative_validity_same_either_way(monkeypatch):
    # three studies (invented figures); the result must not depend on which check path ran
    rs, ns = [0.21, 0.35, 0.28], [120, 64, 210]
    fast = pv.conservative_validity(rs, ns)
    monkeypatch.setattr(ck, "_passes", lambda *a, **k: False)
    assert pv.conservative_validity(rs, ns) == fast
    assert pv.conservative_validity(np.array(rs), np.array(ns, dtype=float)) == fast
