"""How the memo writes figures. Formatting only: no figure is computed here.

Tests format the appraisal engine's own figures with these same functions and compare them
with what the memo shows, so a figure in the memo is always the engine's figure.
"""

from __future__ import annotations

import datetime as dt
import math

DASH = "—"


def _missing(x) -> bool:
    return x is None or (isinstance(x, float) and math.isnan(x))


def _no_negative_zero(text: str) -> str:
    return text[1:] if text.startswith("-") and set(text[1:]) <= set("0.,") else text


def r2(x) -> str:
    """A correlation, reliability or 0..1 figure: two decimals."""
    return DASH if _missing(x) else _no_negative_zero(f"{float(x):.2f}")


def r3(x) -> str:
    return DASH if _missing(x) else f"{float(x):.3f}"


def num(x, places: int = 1) -> str:
    return DASH if _missing(x) else f"{float(x):,.{places}f}"


def g(x) -> str:
    """A figure as entered (minutes, grades, weights): no padding zeros."""
    return DASH if _missing(x) else f"{float(x):g}"


def whole(x) -> str:
    return DASH if _missing(x) else f"{int(x):,}"


def pct(x, places: int = 1) -> str:
    """A 0..1 share as a percentage."""
    return DASH if _missing(x) else f"{100.0 * float(x):.{places}f}%"


def score(x) -> str:
    """A 0..100 score."""
    return DASH if _missing(x) else f"{float(x):.1f}"


def money(x, currency: str | None = None) -> str:
    if _missing(x):
        return DASH
    return f"{float(x):,.0f} {currency}".strip() if currency else f"{float(x):,.0f}"


def band(pair, places: int = 1) -> str:
    if pair is None or any(_missing(v) for v in pair):
        return DASH
    lo, hi = pair
    return f"{float(lo):.{places}f} to {float(hi):.{places}f}"


def interval(pair) -> str:
    if pair is None or any(_missing(v) for v in pair):
        return DASH
    return f"{float(pair[0]):.2f} to {float(pair[1]):.2f}"


def date(x) -> str:
    if x is None:
        return DASH
    if isinstance(x, dt.datetime):
        return x.strftime("%Y-%m-%d %H:%M") + (" UTC" if x.utcoffset() is not None and not x.utcoffset() else "")
    if isinstance(x, dt.date):
        return x.isoformat()
    return str(x)


def text(x) -> str:
    return DASH if x is None or x == "" else str(x)


def yes_no(x) -> str:
    return DASH if x is None else ("yes" if x else "no")


def words(name: str) -> str:
    """A code name as words: job_relatedness -> job relatedness."""
    return name.replace("_", " ")
