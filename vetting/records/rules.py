"""Field rules for catalogue format 1, shared by the catalogue importer and the editing forms.

One table (`ENTITIES`) says, for every record kind and field, its type, whether it is required,
its allowed values or range, and what it means. The importer (vetting.records.catalogue) and
the terminal interface's forms both check values through the functions below, so a value that
a form accepts is exactly a value that import accepts.

* `check_field(entity, field, value)` -> message or None, for a typed Python value.
* `coerce(entity, field, text)` -> typed value from what a person typed in a form
  (raises `RuleError` with the rule's message).
* `check_record(entity, values)` -> [(field path, message)] for rules that involve more than one
  field (hires <= applicants, retest-only interval, percentile tables increasing, received
  on or after requested, policy weights).

Ranges are facts of the format (docs/catalogue-format.md), not of any published standard; where
a bound is a plausibility limit it says so in its `meaning`.
"""

from __future__ import annotations

import datetime as dt
import difflib
import math
import re
import unicodedata
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from vetting.records import domain as d

__all__ = [
    "ENTITIES",
    "Rule",
    "RuleError",
    "allowed_fields",
    "check_field",
    "check_item",
    "check_percentile_table",
    "check_record",
    "check_value",
    "check_text",
    "check_weights",
    "coerce",
    "describe",
    "suggest",
    "what_is",
]

MAX_KEY_LENGTH = 100
MAX_TEXT_LENGTH = 20_000
MIN_YEAR = 1900
_KEY_RE = re.compile(d.KEY_PATTERN)
_CURRENCY_RE = re.compile(r"^[A-Z]{3}$")
_LANGUAGE_RE = re.compile(r"^[A-Za-z]{2,3}(-[A-Za-z0-9]{1,8})*$")
#: Line separators YAML treats as line breaks; allowed nowhere inside a value (they do not
#: survive a YAML round trip unchanged).
_BREAK_LIKE = {"\x85", "\u2028", "\u2029"}


class RuleError(ValueError):
    """A value broke a field rule; `str(exc)` is the message to show next to the field."""


@dataclass(frozen=True)
class Rule:
    """How one field is checked.

    kind: text | key | int | number | bool | date | year | enum | currency |
          list-text | list-enum | list-language | entity | list-entity | weights
    """

    kind: str
    required: bool = False
    choices: tuple[str, ...] = ()
    low: float | None = None
    low_open: bool = False  # True: value must be > low; False: >= low
    high: float | None = None
    high_open: bool = False
    entity: str | None = None  # nested record kind for entity / list-entity
    min_items: int = 0
    meaning: str = ""


def _r(kind: str, meaning: str = "", **kw: Any) -> Rule:
    return Rule(kind=kind, meaning=meaning, **kw)


TEXT = "text"

ENTITIES: dict[str, dict[str, Rule]] = {
    "catalogue": {
        "format": _r("int", "catalogue format version; must be 1", required=True, low=1, high=1),
        "attributes": _r("list-entity", "attributes declared by this file", entity="attribute"),
        "instruments": _r("list-entity", "candidate tests and their evidence", entity="instrument"),
        "jobs": _r("list-entity", "job profiles", entity="job"),
    },
    "attribute": {
        "key": _r("key", "unique name used to refer to the attribute", required=True),
        "name": _r(TEXT, "display name", required=True),
        "kind": _r("enum", "what sort of attribute", choices=d.ATTRIBUTE_KINDS),
    },
    "instrument": {
        "key": _r("key", "unique name of the instrument in this catalogue", required=True),
        "title": _r(TEXT, "title as published", required=True),
        "publisher": _r(TEXT, "publisher"),
        "edition": _r(TEXT, "edition or form"),
        "year": _r("year", "year of publication"),
        "measures": _r("list-entity", "attributes it measures", required=True, entity="measure", min_items=1),
        "mode": _r("list-enum", "ways it can be given", choices=d.MODES),
        "minutes": _r("number", "applicant testing time in minutes", required=True, low=0, low_open=True, high=1440),
        "reading_grade": _r("number", "reading level of the material, school grade", low=0, high=20),
        "cost_per_applicant": _r("number", "cost per applicant, in `currency`", low=0),
        "currency": _r("currency", "three-letter currency code, e.g. USD, EUR"),
        "user_qualification": _r("enum", "qualification needed to give and score it", choices=d.QUALIFICATIONS),
        "accommodations": _r("list-text", "accommodations the publisher offers, e.g. extended-time"),
        "languages": _r("list-language", "languages available, as language tags (en, fr-CA)"),
        "reliability": _r("list-entity", "reliability evidence", entity="reliability"),
        "validity": _r("list-entity", "criterion-related validity studies", entity="validity"),
        "norms": _r("list-entity", "norm groups", entity="norm"),
        "subgroup_differences": _r("list-entity", "standardised subgroup differences", entity="subgroup_difference"),
        "reviews": _r("list-entity", "review notes", entity="review"),
        "sample_copy": _r("entity", "inspection of a sample copy", entity="sample_copy"),
    },
    "measure": {
        "attribute": _r("key", "key of a declared attribute", required=True),
        "fit": _r("enum", "how directly it measures the attribute", choices=d.FITS),
    },
    "reliability": {
        "type": _r("enum", "kind of reliability coefficient", required=True, choices=d.RELIABILITY_TYPES),
        "value": _r("number", "the coefficient", required=True, low=0, low_open=True, high=1, high_open=True),
        "n": _r("int", "sample size", low=2),
        "interval_days": _r("int", "days between test and retest (retest only)", low=1, high=36500),
        "sample": _r(TEXT, "who was tested"),
        "source": _r(TEXT, "where the figure was published"),
    },
    "validity": {
        "criterion": _r("enum", "what was predicted", required=True, choices=d.CRITERIA),
        "r": _r(
            "number",
            "correlation as reported; for turnover, absence and counterproductive a negative r is the desirable sign",
            required=True, low=-1, low_open=True, high=1, high_open=True,
        ),
        "n": _r("int", "sample size (a correlation needs at least 3 people)", required=True, low=3),
        "design": _r("enum", "study design", choices=d.DESIGNS),
        "corrected": _r("enum", "corrections already applied to r", choices=d.CORRECTIONS),
        "job_family": _r(TEXT, "job family studied"),
        "sample": _r(TEXT, "who was studied"),
        "source": _r(TEXT, "where it was published"),
    },
    "norm": {
        "key": _r("key", "unique within the instrument", required=True),
        "group": _r(TEXT, "who is in the norm group", required=True),
        "n": _r("int", "number of people", required=True, low=2),
        "year": _r("year", "year the norm data were collected", required=True),
        "scope": _r("enum", "how wide the group is", required=True, choices=d.SCOPES),
        "occupation": _r(TEXT, "occupation of the group"),
        "mean": _r("number", "raw-score mean", required=True),
        "sd": _r("number", "raw-score standard deviation", required=True, low=0, low_open=True),
        "table": _r("list-entity", "raw score at each percentile, both increasing", entity="percentile"),
    },
    "percentile": {
        "percentile": _r("number", "percentile rank", required=True, low=0, low_open=True, high=100, high_open=True),
        "raw": _r("number", "raw score at that percentile", required=True),
    },
    "subgroup_difference": {
        "groups": _r(TEXT, "your own label, e.g. 'focal vs reference'", required=True),
        "d": _r(
            "number",
            "standardised difference; positive means the focal group scores lower (|d| < 5 is a plausibility limit)",
            required=True, low=-5, low_open=True, high=5, high_open=True,
        ),
        "n": _r("int", "total sample size", low=2),
        "source": _r(TEXT, "where it was published"),
    },
    "review": {
        "date": _r("date", "date of the review (YYYY-MM-DD)", required=True),
        "by": _r(TEXT, "reviewer", required=True),
        "source": _r(TEXT, "where the review appeared"),
        "stance": _r("enum", "overall stance", choices=d.STANCES),
        "note": _r(TEXT, "what the review says", required=True),
    },
    "sample_copy": {
        "requested": _r("date", "date a sample copy was requested"),
        "received": _r("date", "date it arrived (on or after requested)"),
        "checked_by": _r(TEXT, "who inspected it"),
        "checks": _r("list-entity", "inspection checklist", entity="sample_check"),
    },
    "sample_check": {
        "item": _r(TEXT, "what was checked, e.g. instructions-clear", required=True),
        "result": _r("enum", "outcome", required=True, choices=d.CHECK_RESULTS),
        "note": _r(TEXT, "remarks"),
    },
    "job": {
        "key": _r("key", "unique name of the job", required=True),
        "title": _r(TEXT, "job title", required=True),
        "analysis_source": _r(TEXT, "where the requirements came from (job analysis, date, method)"),
        "applicant_reading_grade": _r("number", "applicants' reading level, school grade", low=0, high=20),
        "time_budget_minutes": _r("number", "testing time available per applicant", low=0, low_open=True, high=1440),
        "budget_per_applicant": _r("number", "money available per applicant", low=0),
        "staff_qualification": _r("enum", "highest qualification of the staff who will test", choices=d.QUALIFICATIONS),
        "applicants_per_year": _r("int", "applicants per year", low=1),
        "hires_per_year": _r("int", "hires per year (at most applicants_per_year)", low=1),
        "base_rate": _r("number", "share of applicants who would succeed without testing", low=0, low_open=True, high=1, high_open=True),
        "criterion_sd": _r("number", "SDy: standard deviation of job performance in currency per hire per year", low=0, low_open=True),
        "tenure_years": _r("number", "average years a hire stays (at most 60, a plausibility limit)", low=0, low_open=True, high=60),
        "requirements": _r("list-entity", "required attributes", required=True, entity="requirement", min_items=1),
        "policy": _r("entity", "scoring rules fixed before results (defaults apply when absent)", entity="policy"),
    },
    "requirement": {
        "attribute": _r("key", "key of a declared attribute", required=True),
        "importance": _r("int", "1 (minor) to 5 (essential)", low=1, high=5),
        "critical": _r("bool", "true when an instrument must cover it"),
    },
    "policy": {
        "min_reliability": _r("number", "lowest acceptable reliability", low=0, low_open=True, high=1, high_open=True),
        "max_norm_age_years": _r("int", "oldest acceptable norm group, in years", low=1, high=100),
        "impact_ratio_floor": _r("number", "lowest acceptable adverse-impact ratio", low=0, low_open=True, high=1),
        "weights": _r("weights", "relative weights of " + ", ".join(d.WEIGHT_NAMES) + " (non-negative, not all 0; names left out weigh 0)"),
        "relevant_criteria": _r("list-enum", "criteria counted as relevant evidence (empty: all)", choices=d.CRITERIA),
        "relevant_job_families": _r("list-text", "job families counted as relevant (empty: all)"),
    },
}


def allowed_fields(entity: str) -> list[str]:
    return list(ENTITIES[entity])


def suggest(name: str, allowed: Sequence[str]) -> str | None:
    """The closest allowed name to a misspelt one, or None."""
    found = difflib.get_close_matches(str(name), list(allowed), n=1, cutoff=0.6)
    return found[0] if found else None


# ---------------------------------------------------------------------------
# Describing rules (messages and docs)
# ---------------------------------------------------------------------------


def _fmt(x: float) -> str:
    if isinstance(x, int):  # exact, and no float conversion (which overflows past about 1e308)
        if x.bit_length() > 256:
            return f"a whole number of about {int(x.bit_length() * 0.30103) + 1} digits"
        return str(x)
    return str(int(x)) if float(x).is_integer() else str(x)


def _max_year() -> int:
    return dt.date.today().year + 1


def _range_text(rule: Rule) -> str:
    if rule.low is not None and rule.high is not None and not rule.low_open and not rule.high_open:
        return f"from {_fmt(rule.low)} to {_fmt(rule.high)}"
    parts = []
    if rule.low is not None:
        parts.append(("greater than " if rule.low_open else "at least ") + _fmt(rule.low))
    if rule.high is not None:
        parts.append(("less than " if rule.high_open else "at most ") + _fmt(rule.high))
    return " and ".join(parts)


def describe(rule: Rule) -> str:
    """What a field allows, in words (used in messages and in docs/catalogue-format.md)."""
    k = rule.kind
    if k == TEXT:
        return "text"
    if k == "key":
        return "a key of lower-case letters, digits and hyphens"
    if k in ("int", "number"):
        base = "a whole number" if k == "int" else "a number"
        rng = _range_text(rule)
        return f"{base} {rng}" if rng else base
    if k == "year":
        return f"a year from {MIN_YEAR} to {_max_year()}"
    if k == "bool":
        return "true or false"
    if k == "date":
        return "a date YYYY-MM-DD"
    if k == "enum":
        return "one of: " + ", ".join(rule.choices)
    if k == "currency":
        return "a three-letter currency code such as USD"
    if k == "list-text":
        return "a list of text"
    if k == "list-enum":
        return "a list of any of: " + ", ".join(rule.choices)
    if k == "list-language":
        return "a list of language tags such as en, fr-CA"
    if k == "entity":
        return "a mapping"
    if k == "list-entity":
        return "a list" + (f" of at least {rule.min_items}" if rule.min_items else "")
    if k == "weights":
        return "a mapping of " + ", ".join(d.WEIGHT_NAMES) + " to non-negative numbers, not all 0"
    return k


def what_is(value: Any) -> str:
    """A short description of a wrong value, for messages."""
    if value is None:
        return "nothing"
    if isinstance(value, bool):
        return f"a yes/no value ({str(value).lower()})"
    if isinstance(value, (int, float)):
        return f"the number {value!r}"
    if isinstance(value, str):
        shown = value if len(value) <= 40 else value[:37] + "..."
        return f"text {shown!r}"
    if isinstance(value, dt.datetime):
        return f"a date and time ({value.isoformat()})"
    if isinstance(value, dt.date):
        return f"a date ({value.isoformat()})"
    if isinstance(value, Mapping):
        return "a mapping"
    if isinstance(value, (list, tuple)):
        return "a list"
    return type(value).__name__


# ---------------------------------------------------------------------------
# Checking one field
# ---------------------------------------------------------------------------


def check_text(value: str, *, max_length: int = MAX_TEXT_LENGTH) -> str | None:
    """Text rule shared by every text field: no control characters, not too long."""
    if len(value) > max_length:
        return f"is too long ({len(value)} characters; at most {max_length})"
    if value.isprintable():  # fast path: no control, separator or surrogate characters at all
        return None
    for ch in value:
        if ch in ("\t", "\n"):
            continue
        if ch in _BREAK_LIKE or unicodedata.category(ch) in ("Cc", "Cs"):
            return (
                f"contains the control character U+{ord(ch):04X}; "
                "only ordinary characters, tabs and line breaks are allowed"
            )
    return None


def _number_problem(rule: Rule, value: Any) -> str | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return f"must be {describe(rule)}; got {what_is(value)}"
    if isinstance(value, float) and not math.isfinite(value):
        return f"must be {describe(rule)}; got {value!r}"
    if rule.kind == "int" and not (isinstance(value, int) or float(value).is_integer()):
        return f"must be {describe(rule)}; got {what_is(value)}"
    if rule.low is not None and (value <= rule.low if rule.low_open else value < rule.low):
        return f"must be {describe(rule)}; got {_fmt(value)}"
    if rule.high is not None and (value >= rule.high if rule.high_open else value > rule.high):
        return f"must be {describe(rule)}; got {_fmt(value)}"
    return None


def _choice_problem(rule: Rule, value: Any) -> str | None:
    if not isinstance(value, str):
        return f"must be one of: {', '.join(rule.choices)}; got {what_is(value)}"
    if value in rule.choices:
        return None
    hint = suggest(value, rule.choices)
    hint_text = f"; did you mean {hint!r}?" if hint else ""
    return f"{value!r} is not allowed{hint_text} (allowed: {', '.join(rule.choices)})"


def _rule(entity: str, field: str) -> Rule:
    try:
        return ENTITIES[entity][field]
    except KeyError:
        raise KeyError(f"no rule for {entity}.{field}") from None


def check_value(rule: Rule, value: Any) -> str | None:
    """Check a typed value against a rule. None means 'absent' and is checked by `required`."""
    if value is None:
        return "is required" if rule.required else None
    k = rule.kind
    if k in ("int", "number"):
        return _number_problem(rule, value)
    if k == "year":
        yr = Rule("int", low=MIN_YEAR, high=_max_year())
        problem = _number_problem(yr, value)
        return problem and f"must be a year from {MIN_YEAR} to {_max_year()}; got {what_is(value)}"
    if k == "bool":
        return None if isinstance(value, bool) else f"must be true or false; got {what_is(value)}"
    if k == "date":
        if isinstance(value, dt.datetime) or not isinstance(value, dt.date):
            return f"must be a date YYYY-MM-DD; got {what_is(value)}"
        if not MIN_YEAR <= value.year <= 2100:
            return f"must be a date between {MIN_YEAR} and 2100; got {value.isoformat()}"
        return None
    if k == TEXT:
        if not isinstance(value, str):
            return f"must be text; got {what_is(value)}"
        if not value.strip():
            return "is required and must not be blank" if rule.required else "must not be blank (leave it out instead)"
        return check_text(value)
    if k == "key":
        if not isinstance(value, str):
            return f"must be a key of lower-case letters, digits and hyphens; got {what_is(value)}"
        if len(value) > MAX_KEY_LENGTH:
            return f"is too long ({len(value)} characters; at most {MAX_KEY_LENGTH})"
        if not _KEY_RE.match(value):
            return f"{value[:60]!r} is not a valid key: use only lower-case letters a-z, digits 0-9 and hyphens"
        return None
    if k == "enum":
        return _choice_problem(rule, value)
    if k == "currency":
        if not isinstance(value, str) or not _CURRENCY_RE.match(value):
            return f"must be a three-letter upper-case currency code such as USD; got {what_is(value)}"
        return None
    if k in ("list-text", "list-enum", "list-language"):
        if isinstance(value, (str, bytes)) or not isinstance(value, (list, tuple)):
            return f"must be {describe(rule)}, e.g. [a, b]; got {what_is(value)}"
        for i, item in enumerate(value):
            problem = check_item(rule, item)
            if problem:
                return f"item {i + 1}: {problem}"
        dupes = sorted({str(x) for x in value if value.count(x) > 1})
        if dupes:
            return f"lists {', '.join(dupes)} more than once"
        return None
    if k == "weights":
        problems = check_weights(value)
        return problems[0][1] if problems else None
    if k == "entity":
        return None if isinstance(value, Mapping) or hasattr(value, "__dataclass_fields__") else (
            f"must be a mapping of fields; got {what_is(value)}"
        )
    if k == "list-entity":
        if isinstance(value, (str, bytes, Mapping)) or not isinstance(value, (list, tuple)):
            return f"must be a list; got {what_is(value)}"
        if len(value) < rule.min_items:
            return f"must list at least {rule.min_items}"
        return None
    raise ValueError(f"unknown rule kind {k}")


def check_item(rule: Rule, item: Any) -> str | None:
    """Check one element of a list field."""
    if rule.kind == "list-enum":
        return _choice_problem(rule, item)
    if not isinstance(item, str):
        return f"must be text; got {what_is(item)}"
    if not item.strip():
        return "must not be blank"
    if rule.kind == "list-language" and not _LANGUAGE_RE.match(item):
        return f"{item[:40]!r} is not a language tag such as en or fr-CA"
    return check_text(item, max_length=MAX_KEY_LENGTH * 2)


def check_field(entity: str, field: str, value: Any) -> str | None:
    """Check one typed value of `entity.field`; returns the rule's message or None when fine.

    `None` means the field is absent (an error only for required fields).
    """
    return check_value(_rule(entity, field), value)


def check_weights(value: Any) -> list[tuple[str | None, str]]:
    """Problems with a policy's weights: [(weight name or None, message)]."""
    if not isinstance(value, Mapping):
        return [(None, f"must be a mapping of weight names to numbers; got {what_is(value)}")]
    out: list[tuple[str | None, str]] = []
    total = 0.0
    for name, w in value.items():
        if name not in d.WEIGHT_NAMES:
            hint = suggest(name, d.WEIGHT_NAMES)
            hint_text = f"; did you mean {hint!r}?" if hint else ""
            out.append((str(name), f"unknown weight {str(name)[:40]!r}{hint_text} (allowed: {', '.join(d.WEIGHT_NAMES)})"))
            continue
        problem = _number_problem(Rule("number", low=0, high=1e6), w)
        if problem:
            out.append((str(name), f"must be a number from 0 to 1000000; got {what_is(w)}"))
            continue
        total += float(w)
    if not out and total <= 0:
        out.append((None, "weights must not all be 0: give at least one weight above 0"))
    return out


# ---------------------------------------------------------------------------
# Rules across fields
# ---------------------------------------------------------------------------


def _get(values: Any, name: str) -> Any:
    if isinstance(values, Mapping):
        return values.get(name)
    return getattr(values, name, None)


def check_percentile_table(points: Sequence[Any]) -> list[tuple[str, str]]:
    """Percentiles and raw scores must both increase down the table.

    `points` holds PercentilePoint objects or mappings with `percentile` and `raw`.
    Returns [(path relative to the norm, e.g. 'table[2].raw', message)].
    """
    out: list[tuple[str, str]] = []
    prev_p = prev_raw = None
    for i, pt in enumerate(points):
        p, raw = _get(pt, "percentile"), _get(pt, "raw")
        ok_p = isinstance(p, (int, float)) and not isinstance(p, bool) and math.isfinite(p)
        ok_r = isinstance(raw, (int, float)) and not isinstance(raw, bool) and math.isfinite(raw)
        if ok_p and prev_p is not None and p <= prev_p:
            out.append((f"table[{i}].percentile", f"percentiles must increase down the table: {_fmt(p)} follows {_fmt(prev_p)}"))
        if ok_r and prev_raw is not None and raw <= prev_raw:
            out.append((f"table[{i}].raw", f"raw scores must increase with percentile: {_fmt(raw)} follows {_fmt(prev_raw)}"))
        prev_p = p if ok_p else prev_p
        prev_raw = raw if ok_r else prev_raw
    return out


def check_record(entity: str, values: Any) -> list[tuple[str, str]]:
    """Rules involving more than one field of one record (a mapping or a domain object).

    Fields that are absent or of the wrong type are skipped (their own rule reports them).
    Returns [(field path relative to the record, message)].
    """
    out: list[tuple[str, str]] = []

    def num(name: str) -> float | None:
        v = _get(values, name)
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            return None
        return v

    if entity == "reliability":
        if _get(values, "interval_days") is not None and _get(values, "type") != "retest":
            out.append(("interval_days", "applies only to type 'retest'; remove it or set type: retest"))
    elif entity == "job":
        hires, applicants = num("hires_per_year"), num("applicants_per_year")
        if hires is not None and applicants is not None and hires > applicants:
            out.append(("hires_per_year", f"must not exceed applicants_per_year ({_fmt(applicants)}); got {_fmt(hires)}"))
    elif entity == "sample_copy":
        req, rec = _get(values, "requested"), _get(values, "received")
        if (
            isinstance(req, dt.date) and isinstance(rec, dt.date)
            and not isinstance(req, dt.datetime) and not isinstance(rec, dt.datetime)
            and rec < req
        ):
            out.append(("received", f"must be on or after requested ({req.isoformat()}); got {rec.isoformat()}"))
    elif entity == "norm":
        table = _get(values, "table")
        if isinstance(table, (list, tuple)):
            out.extend(check_percentile_table(table))
    elif entity == "policy":
        weights = _get(values, "weights")
        if weights is not None:
            for name, msg in check_weights(weights):
                out.append((f"weights.{name}" if name else "weights", msg))
    return out


# ---------------------------------------------------------------------------
# Values typed into a form
# ---------------------------------------------------------------------------

_TRUE = {"true", "yes", "y", "on", "1"}
_FALSE = {"false", "no", "n", "off", "0"}


def coerce(entity: str, field: str, text: str) -> Any:
    """Turn what a person typed into the field's typed value, checked by the field's rule.

    Blank text means 'absent' (None), which is an error for a required field. Lists are typed
    comma-separated. Raises RuleError with the message to show beside the field.
    """
    rule = _rule(entity, field)
    raw = "" if text is None else str(text)
    stripped = raw.strip()
    value: Any
    if not stripped:
        value = [] if rule.kind.startswith("list-") and rule.kind != "list-entity" else None
        if value is None and rule.required:
            raise RuleError("is required")
        if value == [] and rule.required:
            raise RuleError("is required")
        return value
    k = rule.kind
    if k in ("int", "year", "number"):
        try:
            if "_" in stripped:  # Python would read 1_000; a person typing it made a slip
                raise ValueError(stripped)
            number = float(stripped)
        except ValueError:
            raise RuleError(f"must be {describe(rule)}; got {what_is(stripped)}") from None
        if k != "number" and math.isfinite(number) and number.is_integer():
            value = int(number)
        else:
            value = number
    elif k == "bool":
        low = stripped.lower()
        if low in _TRUE:
            value = True
        elif low in _FALSE:
            value = False
        else:
            raise RuleError(f"must be true or false; got {what_is(stripped)}")
    elif k == "date":
        try:
            value = dt.date.fromisoformat(stripped)
        except ValueError:
            raise RuleError(f"must be a date YYYY-MM-DD; got {what_is(stripped)}") from None
    elif k in ("list-text", "list-enum", "list-language"):
        value = [part.strip() for part in stripped.split(",") if part.strip()]
    elif k == TEXT:
        value = raw  # keep the person's text as typed (inner line breaks included)
    elif k in ("key", "enum", "currency"):
        value = stripped
    else:
        raise RuleError(f"{entity}.{field} is not typed as text ({describe(rule)})")
    problem = check_value(rule, value)
    if problem:
        raise RuleError(problem)
    return value
