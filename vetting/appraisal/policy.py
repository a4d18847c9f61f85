"""Scoring policy: defaults, validation and normalised weights.

The defaults are those of `vetting.records.domain.Policy` (weights coverage 30, validity 30,
reliability 15, norms 10, fairness 10, practicality 5; minimum reliability 0.80; norms at most
15 years old; impact-ratio floor 0.80). They are common practice, no published source: a
reliability of .80 as a floor for decisions about individuals and the four-fifths floor
(Uniform Guidelines 1978, 29 CFR 1607.4(D)) are widely used; the weights are a starting point
the specialist is expected to set, and lock, before seeing any result.
"""

from __future__ import annotations

import math

from vetting.appraisal.errors import PolicyError
from vetting.records.domain import CRITERIA, DEFAULT_WEIGHTS, WEIGHT_NAMES, Policy

__all__ = [
    "DEFAULT_WEIGHTS",
    "default_policy",
    "normalised_weights",
    "validate_policy",
    "with_changes",
]


def default_policy() -> Policy:
    """A fresh policy with the documented defaults (common practice, no published source)."""
    return Policy()


def _finite(name: str, value: object) -> float:
    try:
        number = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise PolicyError(f"{name}: must be a number, got {value!r}") from None
    if not math.isfinite(number):
        raise PolicyError(f"{name}: must be a finite number, got {value!r}")
    return number


def validate_policy(policy: Policy) -> None:
    """Raise PolicyError naming the field and the rule when a policy cannot be used."""
    weights = policy.weights or {}
    unknown = sorted(set(weights) - set(WEIGHT_NAMES))
    if unknown:
        raise PolicyError(
            f"weights: unknown weight name(s) {', '.join(unknown)}; "
            f"the names are {', '.join(WEIGHT_NAMES)}"
        )
    total = 0.0
    for name in WEIGHT_NAMES:
        value = _finite(f"weights.{name}", weights.get(name, 0.0))
        if value < 0:
            raise PolicyError(f"weights.{name}: must not be negative, got {value:g}")
        total += value
    if total <= 0:
        raise PolicyError("weights: the weights sum to 0; at least one weight must be positive")
    rel = _finite("min_reliability", policy.min_reliability)
    if not 0.0 <= rel < 1.0:
        raise PolicyError(f"min_reliability: must be at least 0 and below 1, got {rel:g}")
    age = _finite("max_norm_age_years", policy.max_norm_age_years)
    if age <= 0:
        raise PolicyError(f"max_norm_age_years: must be positive, got {age:g}")
    floor = _finite("impact_ratio_floor", policy.impact_ratio_floor)
    if not 0.0 < floor <= 1.0:
        raise PolicyError(f"impact_ratio_floor: must be above 0 and at most 1, got {floor:g}")
    bad = sorted(set(policy.relevant_criteria) - set(CRITERIA))
    if bad:
        raise PolicyError(
            f"relevant_criteria: unknown criterion {', '.join(bad)}; the criteria are {', '.join(CRITERIA)}"
        )


def normalised_weights(policy: Policy) -> dict[str, float]:
    """The policy weights scaled to sum to 1, for every component name (missing names are 0)."""
    validate_policy(policy)
    raw = {name: float(policy.weights.get(name, 0.0)) for name in WEIGHT_NAMES}
    total = sum(raw.values())
    return {name: value / total for name, value in raw.items()}


def with_changes(
    policy: Policy,
    *,
    weights: dict[str, float] | None = None,
    min_reliability: float | None = None,
    max_norm_age_years: int | None = None,
    impact_ratio_floor: float | None = None,
    relevant_criteria: list[str] | None = None,
    relevant_job_families: list[str] | None = None,
) -> Policy:
    """A new (unversioned, unlocked) policy: `policy` with the given changes, validated.

    `weights` may name only some components; the others keep their current values.
    """
    new_weights = dict(policy.weights)
    if weights:
        new_weights.update({k: float(v) for k, v in weights.items()})
    new = Policy(
        min_reliability=policy.min_reliability if min_reliability is None else min_reliability,
        max_norm_age_years=policy.max_norm_age_years if max_norm_age_years is None else max_norm_age_years,
        impact_ratio_floor=policy.impact_ratio_floor if impact_ratio_floor is None else impact_ratio_floor,
        weights=new_weights,
        relevant_criteria=list(policy.relevant_criteria if relevant_criteria is None else relevant_criteria),
        relevant_job_families=list(
            policy.relevant_job_families if relevant_job_families is None else relevant_job_families
        ),
    )
    validate_policy(new)
    return new
