"""Helpers shared by the command modules: errors with exit codes, output, JSON."""

from __future__ import annotations

import dataclasses
import datetime as dt
import json
import math
import sys
from typing import Any

EXIT_OK = 0
EXIT_FAILURE = 1
EXIT_BAD_INPUT = 2


class CommandError(Exception):
    """A failure the user should read; `status` is the process exit status."""

    def __init__(self, message: str, status: int = EXIT_BAD_INPUT) -> None:
        super().__init__(message)
        self.message = message
        self.status = status


class BadInput(CommandError):
    def __init__(self, message: str) -> None:
        super().__init__(message, EXIT_BAD_INPUT)


_PLAIN_JSON = (str, int, bool, type(None))
_FIELDS: dict[type, tuple[str, ...]] = {}


def to_jsonable(value: Any) -> Any:
    """Convert dataclasses, dates, numpy scalars, tuples and NaN into plain JSON values."""
    kind = type(value)
    if kind in _PLAIN_JSON:  # the common case first: most leaves are text and whole numbers
        return value
    if kind is float:
        return None if value != value or value in (math.inf, -math.inf) else value
    names = _FIELDS.get(kind)
    if names is None and dataclasses.is_dataclass(value) and not isinstance(value, type):
        names = _FIELDS[kind] = tuple(f.name for f in dataclasses.fields(value))
    if names is not None:
        return {name: to_jsonable(getattr(value, name)) for name in names}
    if isinstance(value, dict):
        return {str(k): to_jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [to_jsonable(v) for v in value]
    if isinstance(value, (dt.date, dt.datetime)):
        return value.isoformat()
    if hasattr(value, "item") and callable(value.item):  # numpy scalar
        value = value.item()
    if isinstance(value, float) and (math.isnan(value) or math.isinf(value)):
        return None
    return value


def print_json(value: Any) -> None:
    sys.stdout.write(json.dumps(to_jsonable(value), indent=2, ensure_ascii=False) + "\n")


def err(message: str) -> None:
    sys.stderr.write(message.rstrip("\n") + "\n")
