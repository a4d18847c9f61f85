"""The one error type of the psychometrics layer."""

from __future__ import annotations


class PsychometricsError(ValueError):
    """Impossible input to a published method.

    The message names the argument, the value given and the allowed range, e.g.
    ``reliability must be between 0 and 1 (inclusive); got 1.2``.
    """
