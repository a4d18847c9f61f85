"""Errors of the appraisal engine. Each message names the field and the rule that failed."""

from __future__ import annotations


class AppraisalError(ValueError):
    """Input the engine cannot appraise (the command line turns it into exit status 2)."""


class PolicyError(AppraisalError):
    """A scoring policy breaks a rule (unknown weight name, negative weight, weights sum to 0...)."""


class JobError(AppraisalError):
    """A job that cannot be ranked (e.g. no required attributes)."""
