"""Input checks shared by the psychometrics modules (private).

Every check accepts a scalar or an array-like, converts it to a float ndarray, and raises
PsychometricsError naming the argument and the allowed range when any element breaks the rule.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from vetting.psychometrics.errors import PsychometricsError


#: types whose values are checked in plain Python (np.float64 is a subclass of float; bool is not
#: listed, so True/False keep numpy's handling)
_PLAIN = (float, int, np.float64)
_FLOAT = np.dtype(float)
_INF = math.inf


def _passes(value: Any, lo: float | None = None, hi: float | None = None, lo_open: bool = False,
            hi_open: bool = False) -> bool:
    """True when `value` is a plain float/int, a non-empty list or tuple of them, or a small
    non-empty float ndarray, and every element is finite and within the bounds. A fast path only
    (no numpy reductions for a few numbers): whenever it returns False the numpy path decides, so
    results and error messages are the same either way."""
    kind = type(value)
    if kind in _PLAIN:
        values: Any = (value,)
    elif kind is list or kind is tuple:
        values = value
    elif kind is np.ndarray and value.dtype == _FLOAT and value.size <= 64:
        values = value.ravel().tolist()
    else:
        return False
    if not values:
        return False
    try:
        for v in values:
            if type(v) not in _PLAIN:
                return False
            v = float(v)
            if not -_INF < v < _INF:  # also False for NaN
                return False
            if lo is not None and (v <= lo if lo_open else v < lo):
                return False
            if hi is not None and (v >= hi if hi_open else v > hi):
                return False
    except OverflowError:  # an int too large for a float: numpy's path reports it
        return False
    return True


def is_scalar(*values: Any) -> bool:
    """True when every value is a plain number (the result is then returned as a float)."""
    return all(type(v) in _PLAIN or np.ndim(v) == 0 for v in values)


def out(value: Any, scalar: bool) -> Any:
    """Return a float for scalar inputs, a float ndarray otherwise."""
    if scalar and type(value) in _PLAIN:
        return float(value)
    arr = np.asarray(value, dtype=float)
    return float(arr) if scalar else arr


def _show(arr: np.ndarray, mask: np.ndarray) -> str:
    bad = arr[mask] if arr.ndim else arr
    first = bad.flat[0] if bad.size else arr
    return f"{float(first):g}" if np.ndim(first) == 0 else str(first)


def number(value: Any, name: str) -> np.ndarray:
    """A finite real number (or array of them)."""
    if _passes(value):
        return np.asarray(value, dtype=float)
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise PsychometricsError(f"{name} must be a number; got {value!r}") from None
    if arr.size == 0:
        raise PsychometricsError(f"{name} must not be empty")
    bad = ~np.isfinite(arr)
    if bad.any():
        raise PsychometricsError(f"{name} must be a finite number; got {_show(arr, bad)}")
    return arr


def in_range(
    value: Any,
    name: str,
    lo: float | None = None,
    hi: float | None = None,
    *,
    lo_open: bool = False,
    hi_open: bool = False,
    hint: str = "",
) -> np.ndarray:
    """A finite number within [lo, hi]; either end may be open or absent."""
    if _passes(value, lo, hi, lo_open, hi_open):
        return np.asarray(value, dtype=float)
    # anything else (arrays, bad values): numpy checks every element and names the first bad one
    arr = number(value, name)
    bad = np.zeros(arr.shape, dtype=bool)
    if lo is not None:
        bad |= (arr <= lo) if lo_open else (arr < lo)
    if hi is not None:
        bad |= (arr >= hi) if hi_open else (arr > hi)
    if bad.any():
        raise PsychometricsError(
            f"{name} must be {describe(lo, hi, lo_open, hi_open)}{hint}; got {_show(arr, bad)}"
        )
    return arr


def describe(lo: float | None, hi: float | None, lo_open: bool, hi_open: bool) -> str:
    if lo is not None and hi is not None:
        if not lo_open and not hi_open:
            return f"between {lo:g} and {hi:g} (inclusive)"
        if lo_open and hi_open:
            return f"greater than {lo:g} and less than {hi:g}"
        if lo_open:
            return f"greater than {lo:g} and at most {hi:g}"
        return f"at least {lo:g} and less than {hi:g}"
    if lo is not None:
        return f"greater than {lo:g}" if lo_open else f"at least {lo:g}"
    if hi is not None:
        return f"less than {hi:g}" if hi_open else f"at most {hi:g}"
    return "a finite number"


def positive(value: Any, name: str) -> np.ndarray:
    return in_range(value, name, 0.0, lo_open=True)


def probability(
    value: Any, name: str, *, zero: bool = False, one: bool = False, hint: str = ""
) -> np.ndarray:
    """A proportion in (0, 1); `zero`/`one` allow the closed ends."""
    return in_range(value, name, 0.0, 1.0, lo_open=not zero, hi_open=not one, hint=hint)


def correlation(value: Any, name: str, *, closed: bool = True) -> np.ndarray:
    return in_range(value, name, -1.0, 1.0, lo_open=not closed, hi_open=not closed)


def reliability(value: Any, name: str = "reliability", *, zero: bool = True) -> np.ndarray:
    return in_range(value, name, 0.0, 1.0, lo_open=not zero)
