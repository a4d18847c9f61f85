"""The catalogue writer as it was before export was made to stream (commit b4b9ad7), frozen
here as the reference the streaming writer must match byte for byte.

It builds the whole document as plain data, then a PyYAML node graph, and serializes it in
one call (PyYAML's resolver decides which scalars need quotes). Kept only for tests: it holds
the whole catalogue, the node graph and the text in memory at once.
"""

from __future__ import annotations

import datetime as dt
import math
from typing import Any

import yaml

from vetting.records import domain as d
from vetting.records import rules

_T = "tag:yaml.org,2002:"
_Dumper = getattr(yaml, "CSafeDumper", yaml.SafeDumper)
_HEADER = "# vetting catalogue, format 1 (see docs/catalogue-format.md)\n"


def _plain(entity: str, obj: Any) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for name, rule in rules.ENTITIES[entity].items():
        value = getattr(obj, name, None)
        if value is None:
            continue
        kind = rule.kind
        if kind == "entity":
            out[name] = _plain(rule.entity, value)
        elif kind == "list-entity":
            if value:
                out[name] = [_plain(rule.entity, v) for v in value]
        elif kind in ("list-text", "list-enum", "list-language"):
            if value:
                out[name] = [str(v) for v in value]
        elif kind == "weights":
            out[name] = {k: _number(v) for k, v in value.items()}
        elif kind in ("int", "year"):
            out[name] = int(value)
        elif kind == "number":
            out[name] = _number(value)
        elif kind == "bool":
            out[name] = bool(value)
        elif kind == "date":
            out[name] = value.date() if isinstance(value, dt.datetime) else value
        else:
            out[name] = str(value)
    return out


def _number(value: Any) -> float | int:
    number = float(value)
    if not math.isfinite(number):
        raise ValueError(f"cannot write the non-finite number {number!r} to a catalogue")
    if number.is_integer() and abs(number) < 1e15:
        return int(number)
    return number


def _node(value: Any) -> yaml.Node:
    if isinstance(value, dict):
        return yaml.MappingNode(
            _T + "map", [(yaml.ScalarNode(_T + "str", k), _node(v)) for k, v in value.items()], flow_style=False
        )
    if isinstance(value, list):
        return yaml.SequenceNode(_T + "seq", [_node(v) for v in value], flow_style=False)
    if isinstance(value, str):
        return yaml.ScalarNode(_T + "str", value)
    if isinstance(value, bool):
        return yaml.ScalarNode(_T + "bool", "true" if value else "false")
    if isinstance(value, int):
        return yaml.ScalarNode(_T + "int", str(value))
    if isinstance(value, float):
        text = repr(value).lower()
        if "." not in text and "e" in text:
            text = text.replace("e", ".0e", 1)
        return yaml.ScalarNode(_T + "float", text)
    if isinstance(value, dt.date):
        return yaml.ScalarNode(_T + "timestamp", value.isoformat())
    raise TypeError(f"cannot write {type(value).__name__} to a catalogue")


def reference_dump(cat: d.Catalogue) -> str:
    """The old `dump_catalogue`, unchanged."""
    doc: dict[str, Any] = {"format": 1}
    if cat.attributes:
        doc["attributes"] = [_plain("attribute", a) for a in cat.attributes]
    if cat.instruments:
        doc["instruments"] = [_plain("instrument", i) for i in cat.instruments]
    if cat.jobs:
        doc["jobs"] = [_plain("job", j) for j in cat.jobs]
    body = yaml.serialize(_node(doc), Dumper=_Dumper, allow_unicode=True, width=100, indent=2)
    return _HEADER + body
