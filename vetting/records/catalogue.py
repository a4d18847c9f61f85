"""Catalogue format 1: read, validate and write YAML catalogue files.

Reading happens in three bounded steps, so a hostile file is refused quickly:

1. bytes: size cap (checked before anything is parsed) and strict UTF-8;
2. events: the file is streamed through PyYAML's safe parser (the C one when present) and a
   light tree is built without recursion, refusing anchors and aliases (so no alias bomb can
   expand), documents nested deeper than a catalogue can be, over-long values, unknown tags
   and more than one document; every node keeps its line number;
3. rules: the tree is checked field by field against vetting.records.rules (the same rules the
   editing forms use), collecting every problem (capped) before anything is returned. Each
   instrument and job is checked as soon as it has been read and its nodes are let go, so
   memory holds one record's nodes plus the checked values, not the whole file's tree.

Nothing here writes to a database; `parse_catalogue` returns plain domain objects or raises
`CatalogueError` listing `FILE:LINE: path.to.field: what is wrong and what is allowed`.

Writing streams: `emit_catalogue` turns one record at a time into PyYAML events for PyYAML's
emitter, writing to any text stream; `write_catalogue` does so into a temporary file that
replaces the target only when complete; `dump_catalogue` returns the text.
"""

from __future__ import annotations

import datetime as dt
import io
import math
import os
import re
import sys
import tempfile
from pathlib import Path
from typing import Any

import yaml

from vetting.records import domain as d
from vetting.records import rules
from vetting.records.errors import CatalogueError, Problem
from vetting.records.gcpause import gc_pause

__all__ = [
    "FORMAT_VERSION",
    "MAX_BYTES",
    "MAX_DEPTH",
    "MAX_NODES",
    "MAX_PROBLEMS",
    "MAX_SCALAR_CHARS",
    "dump_catalogue",
    "emit_catalogue",
    "load_catalogue",
    "load_catalogues",
    "merge_catalogues",
    "parse_catalogue",
    "parse_catalogues",
    "read_catalogue_file",
    "write_catalogue",
]

FORMAT_VERSION = 1
#: Largest file accepted (bytes), checked before parsing. A catalogue of 10,000 fully
#: documented instruments is about 30 MB.
MAX_BYTES = 64 * 1024 * 1024
#: Deepest nesting accepted; format 1 itself needs 7 levels.
MAX_DEPTH = 20
#: Longest single value accepted (characters).
MAX_SCALAR_CHARS = 100_000
#: Most values (scalars, lists and mappings) accepted in one file: bounds the reader's memory
#: (about 110 bytes a value) whatever the file holds. 10,000 documented instruments need ~2.5 million.
MAX_NODES = 4_000_000
#: Problems reported before giving up on a file.
MAX_PROBLEMS = 50

_Loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
_Dumper = getattr(yaml, "CSafeDumper", yaml.SafeDumper)

_T = "tag:yaml.org,2002:"
_ALLOWED_SCALAR_TAGS = {_T + t for t in ("str", "int", "float", "bool", "null", "timestamp")}
_DATE_RE = re.compile(r"^\d{4}-\d{2}-\d{2}$")


# ---------------------------------------------------------------------------
# Step 1 + 2: bytes -> a small tree of nodes with line numbers
# ---------------------------------------------------------------------------


class _Node:
    """A YAML mapping ('map') or sequence ('seq'). A sequence holds nodes; a mapping holds
    (field name, line of the name, value node) triples, in file order, duplicates included."""

    __slots__ = ("kind", "line", "items", "pending")
    tag = None

    def __init__(self, kind: str, line: int) -> None:
        self.kind = kind
        self.line = line
        self.items: list[Any] = []
        self.pending: tuple[str, int] | None = None  # a mapping's key waiting for its value


class _Scalar:
    """A YAML scalar: its resolved tag, its text as written, and its line."""

    __slots__ = ("tag", "value", "line")
    kind = "scalar"

    def __init__(self, tag: str, value: str, line: int) -> None:
        self.tag = tag
        self.value = value
        self.line = line


class _Checked:
    """An instrument or job already checked while the file was being read (see `_read_tree`'s
    `on_record`): its values and problems, kept in place of its nodes, which are let go."""

    __slots__ = ("line", "entity", "path", "values", "problems", "truncated")
    kind = "map"
    tag = None
    items = ()

    def __init__(self, line: int, entity: str, path: str, values: Any, problems: list, truncated: bool) -> None:
        self.line = line
        self.entity = entity
        self.path = path
        self.values = values
        self.problems = problems
        self.truncated = truncated


class _Stop(Exception):
    """Raised inside the reader to abandon a file after a fatal problem."""

    def __init__(self, line: int | None, message: str) -> None:
        super().__init__(message)
        self.line = line
        self.message = message


def _decode(data: bytes | str, filename: str) -> str:
    if isinstance(data, str):
        if len(data) > MAX_BYTES:
            raise CatalogueError([Problem(filename, None, "", _too_large(len(data)))])
        return data
    if len(data) > MAX_BYTES:
        raise CatalogueError([Problem(filename, None, "", _too_large(len(data)))])
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise CatalogueError(
            [
                Problem(
                    filename,
                    line,
                    "",
                    f"the file is not UTF-8 text (byte 0x{data[exc.start]:02x} at position {exc.start}); "
                    "save it as UTF-8",
                )
            ]
        ) from None


def _too_large(size: int) -> str:
    return (
        f"the file is too large to be a catalogue ({size:,} bytes; at most {MAX_BYTES:,}); "
        "split it into several files"
    )


def _mark_line(exc: yaml.YAMLError) -> int | None:
    mark = getattr(exc, "problem_mark", None) or getattr(exc, "context_mark", None)
    if mark is not None:
        return mark.line + 1
    return None


def _read_tree(text: str, filename: str, on_record: Any = None) -> _Node | None:
    """Stream the YAML events into a tree, refusing anything a catalogue never needs.

    This loop runs once per YAML event (about 250 per instrument), so it is written for speed:
    scalars, by far the most common event, are handled first, and a mapping's field names are
    kept as (text, line) without a node of their own. Every check happens in the same order
    as events arrive, so the first problem in the file is the one reported.

    `on_record(section, index, node)`, when given, is called as each item of a top-level list
    (e.g. `instruments:`) ends, and what it returns replaces the item in the tree: the reader
    checks each record as soon as it is read, so the nodes of the whole file never exist at
    once."""
    resolve = yaml.resolver.Resolver().resolve
    root: _Node | None = None
    stack: list[_Node] = []
    documents = 0
    scalar_event, seq_start, map_start = yaml.ScalarEvent, yaml.SequenceStartEvent, yaml.MappingStartEvent
    seq_end, map_end, alias_event = yaml.SequenceEndEvent, yaml.MappingEndEvent, yaml.AliasEvent
    document_start = yaml.DocumentStartEvent
    scalar_node = yaml.ScalarNode
    plain = (True, False)
    allowed = _ALLOWED_SCALAR_TAGS
    str_tag = _T + "str"
    null_tag = _T + "null"
    intern = sys.intern
    max_chars = MAX_SCALAR_CHARS
    resolved: dict[str, str] = {}  # plain scalar -> its implicit tag (same text, same tag)
    budget = MAX_NODES
    parent: _Node | None = None  # the innermost open collection (stack[-1])
    loader = None
    try:
        loader = _Loader(text)
        for event in iter(loader.get_event, None):
            cls = type(event)
            if cls is scalar_event:
                mark = event.start_mark
                line = mark.line + 1 if mark is not None else None
                if event.anchor is not None:
                    raise _Stop(line, "YAML anchors (&name) are not allowed in a catalogue; write each value out in full")
                value = event.value
                if len(value) > max_chars:
                    raise _Stop(line, f"a value is too long ({len(value):,} characters; at most {max_chars:,})")
                tag = event.tag
                if tag is None or tag == "!":
                    if event.implicit[0]:
                        tag = resolved.get(value)
                        if tag is None:
                            tag = resolve(scalar_node, value, plain)
                            if len(resolved) < 10_000:
                                resolved[value] = tag
                    else:
                        tag = str_tag  # quoted or block text: always a string
                if tag not in allowed:
                    if tag == _T + "merge":
                        raise _Stop(line, "YAML merge keys (<<) are not allowed in a catalogue; write each field out")
                    raise _Stop(line, f"the YAML tag {tag!r} is not allowed in a catalogue; remove it")
                if len(value) <= 40:
                    value = intern(value)  # field names and short values repeat a lot
                budget -= 1
                if budget < 0:
                    raise _Stop(
                        line, f"the file holds too many values to be a catalogue (more than {MAX_NODES:,}); split it"
                    )
                if parent is None:
                    root = _Scalar(tag, value, line or 0)
                elif parent.kind == "seq":
                    parent.items.append(_Scalar(tag, value, line or 0))
                elif parent.pending is None:  # this scalar is a field name
                    if tag == null_tag:
                        raise _Stop(line, "field names must be plain words (found a list, mapping or empty name)")
                    parent.pending = (value, line or 0)
                else:
                    parent.items.append((parent.pending[0], parent.pending[1], _Scalar(tag, value, line or 0)))
                    parent.pending = None
                continue
            if cls is seq_end or cls is map_end:
                done = stack.pop()
                parent = stack[-1] if stack else None
                if on_record is not None and len(stack) == 2 and done.kind == "map":
                    top, section = stack
                    if top.kind == "map" and section.kind == "seq" and section.items[-1] is done:
                        name = top.items[-1][0]  # the list still open is the last field so far
                        section.items[-1] = on_record(name, len(section.items) - 1, done)
                continue
            mark = event.start_mark
            line = mark.line + 1 if mark is not None else None
            if cls is alias_event:
                raise _Stop(line, "YAML aliases (*name) are not allowed in a catalogue; write the value out in full")
            if getattr(event, "anchor", None) is not None:
                raise _Stop(line, "YAML anchors (&name) are not allowed in a catalogue; write each value out in full")
            if cls is document_start:
                documents += 1
                if documents > 1:
                    raise _Stop(line, "only one YAML document is allowed in a catalogue file (found a second '---')")
                continue
            if cls is not seq_start and cls is not map_start:
                continue  # stream start/end, document end
            kind = "seq" if cls is seq_start else "map"
            tag = event.tag
            if tag not in (None, "!", _T + kind):
                raise _Stop(line, f"the YAML tag {tag!r} is not allowed in a catalogue; remove it")
            node = _Node(kind, line or 0)
            budget -= 1
            if budget < 0:
                raise _Stop(
                    line, f"the file holds too many values to be a catalogue (more than {MAX_NODES:,}); split it"
                )
            if parent is None:
                root = node
            elif parent.kind == "seq":
                parent.items.append(node)
            elif parent.pending is None:  # a list or mapping where a field name belongs
                raise _Stop(line, "field names must be plain words (found a list, mapping or empty name)")
            else:
                parent.items.append((parent.pending[0], parent.pending[1], node))
                parent.pending = None
            stack.append(node)
            parent = node
            if len(stack) > MAX_DEPTH:
                raise _Stop(line, f"the document is nested too deeply (more than {MAX_DEPTH} levels); not a catalogue")
    except _Stop as stop:
        raise CatalogueError([Problem(filename, stop.line, "", stop.message)]) from None
    except yaml.reader.ReaderError as exc:
        position = max(0, min(int(getattr(exc, "position", 0) or 0), len(text)))
        line = text.count("\n", 0, position) + 1
        char = exc.character
        shown = f"U+{char:04X}" if isinstance(char, int) else repr(char)
        raise CatalogueError(
            [Problem(filename, line, "", f"the file contains the character {shown}, which YAML does not allow; remove it")]
        ) from None
    except yaml.MarkedYAMLError as exc:
        what = exc.problem or "not valid YAML"
        if exc.context:
            what = f"{exc.context}: {what}"
        what = " ".join(str(what).split())
        raise CatalogueError([Problem(filename, _mark_line(exc), "", f"YAML syntax error: {what}")]) from None
    except yaml.YAMLError as exc:
        raise CatalogueError(
            [Problem(filename, _mark_line(exc), "", f"YAML syntax error: {' '.join(str(exc).split())}")]
        ) from None
    except (UnicodeError, ValueError) as exc:
        raise CatalogueError([Problem(filename, None, "", f"cannot read the file as YAML text: {exc}")]) from None
    finally:
        if loader is not None:
            loader.dispose()
    return root


# ---------------------------------------------------------------------------
# Step 3: the tree -> checked values -> domain objects
# ---------------------------------------------------------------------------

_CONSTRUCTOR = yaml.constructor.SafeConstructor()
_BAD = object()  # a value whose problem has already been reported

_CLASSES: dict[str, type] = {
    "attribute": d.Attribute,
    "instrument": d.Instrument,
    "measure": d.Measure,
    "reliability": d.Reliability,
    "validity": d.ValidityStudy,
    "norm": d.NormGroup,
    "percentile": d.PercentilePoint,
    "subgroup_difference": d.SubgroupDifference,
    "review": d.Review,
    "sample_copy": d.SampleCopy,
    "sample_check": d.SampleCheck,
    "job": d.Job,
    "requirement": d.Requirement,
    "policy": d.Policy,
}

_TEXTUAL_KINDS = {rules.TEXT, "key", "enum", "currency"}
#: The largest whole number a float can hold; beyond it float(x) raises OverflowError.
_LARGEST_FLOAT = int(sys.float_info.max)


#: The common case of `_Checker.field_value` inlined (`_fast_value`); False runs every field
#: through the general path (the tests compare the two).
_FAST_PATH = True
_FAST_KINDS = frozenset({rules.TEXT, "key", "enum", "currency", "int", "year", "number"})
_PLAIN_INT_RE = re.compile(r"[-+]?(?:0|[1-9][0-9]*)\Z")
_PLAIN_FLOAT_RE = re.compile(r"[-+]?[0-9]+\.[0-9]*(?:[eE][-+]?[0-9]+)?\Z")


def _fast_value(node: _Scalar, rule: rules.Rule) -> Any:
    """The value `_Checker.field_value` gives a non-null scalar of a text or number field when
    the value passes its rule; `_BAD` for anything else (a problem, or a number written in a
    form the plain decimal patterns do not cover), which then goes the general way and is
    reported there exactly as before. Decimal integers and decimals read with int()/float()
    give what PyYAML's constructors give for them (they only strip '_', a sign, and handle
    0x/0o/leading-zero/sexagesimal forms, none of which these patterns match)."""
    kind = rule.kind
    if kind in _TEXTUAL_KINDS:
        value = node.value
        if rules.check_value(rule, value) is None:
            return value
        return _BAD
    text = node.value
    if len(text) > 30:
        return _BAD  # huge numbers: the general path reports them
    tag = node.tag
    if tag == _T + "int" and _PLAIN_INT_RE.match(text):
        value = int(text)
    elif tag == _T + "float" and _PLAIN_FLOAT_RE.match(text):
        value = float(text)
    else:
        return _BAD
    if rules.check_value(rule, value) is not None:
        return _BAD
    return float(value) if kind == "number" else int(value)


def _natural(node: _Node) -> Any:
    """The value PyYAML's safe loader would give a scalar (raises ValueError when unreadable)."""
    tag = node.tag
    if tag == _T + "str":
        return node.value
    ynode = yaml.ScalarNode(tag, node.value)
    return _CONSTRUCTOR.yaml_constructors[tag](_CONSTRUCTOR, ynode)


class _Checker:
    def __init__(self, filename: str, known_attributes: set[str] | frozenset[str]) -> None:
        self.filename = filename
        self.known = set(known_attributes)
        self.problems: list[Problem] = []
        self.truncated = False

    # -- reporting ---------------------------------------------------------
    def add(self, line: int | None, path: str, message: str) -> None:
        if len(self.problems) >= MAX_PROBLEMS:
            self.truncated = True
            return
        self.problems.append(Problem(self.filename, line, path, message))

    # -- scalars -----------------------------------------------------------
    def scalar(self, node: _Node, rule: rules.Rule, path: str, *, text: bool) -> Any:
        """A scalar node as a Python value: raw text for textual fields, else as YAML reads it."""
        if node.kind != "scalar":
            self.add(node.line, path, f"must be {rules.describe(rule)}; got a {'list' if node.kind == 'seq' else 'mapping'}")
            return _BAD
        if node.tag == _T + "null":
            return None
        if text:
            return node.value
        try:
            value = _natural(node)
        except Exception:  # noqa: BLE001 - any unreadable scalar is reported, never raised
            if node.tag == _T + "timestamp":
                self.add(node.line, path, f"{node.value!r} is not a valid date (use YYYY-MM-DD)")
            else:
                self.add(node.line, path, f"cannot read {node.value[:40]!r} as a number")
            return _BAD
        if type(value) is int and not -_LARGEST_FLOAT <= value <= _LARGEST_FLOAT:
            # a whole number too large for any float (over 300 digits): no field takes one, and
            # the range checks and messages work in floats
            self.add(node.line, path, f"cannot read {node.value[:40]!r} as a number")
            return _BAD
        if rule.kind == "date" and isinstance(value, str) and _DATE_RE.match(value):
            try:
                value = dt.date.fromisoformat(value)
            except ValueError:
                self.add(node.line, path, f"{node.value!r} is not a valid date (use YYYY-MM-DD)")
                return _BAD
        return value

    def field_value(self, node: _Node, rule: rules.Rule, path: str) -> Any:
        kind = rule.kind
        if kind in ("list-text", "list-enum", "list-language"):
            if node.kind == "scalar" and node.tag == _T + "null":
                return None
            if node.kind != "seq":
                got = "a mapping" if node.kind == "map" else rules.what_is(self.scalar(node, rule, path, text=False))
                self.add(node.line, path, f"must be {rules.describe(rule)}, e.g. [a, b]; got {got}")
                return _BAD
            values, seen = [], {}
            for i, item in enumerate(node.items):
                ipath = f"{path}[{i}]"
                value = self.scalar(item, rule, ipath, text=item.kind == "scalar" and item.tag != _T + "null")
                if value is _BAD:
                    continue
                problem = rules.check_item(rule, value)
                if problem:
                    self.add(item.line, ipath, problem)
                    continue
                if value in seen:
                    self.add(item.line, ipath, f"{value!r} is listed twice (first on line {seen[value]})")
                    continue
                seen[value] = item.line
                values.append(value)
            return values
        if kind == "weights":
            return self.weights(node, rule, path)
        value = self.scalar(node, rule, path, text=kind in _TEXTUAL_KINDS)
        if value is _BAD:
            return _BAD
        problem = rules.check_value(rule, value)
        if problem:
            self.add(node.line, path, problem)
            return _BAD
        if value is None:  # `field: ~`, `field: null` or `field:` on an optional field: not given
            return None
        if kind in ("int", "year"):
            return int(value)
        if kind == "number":
            return float(value)
        return value

    def weights(self, node: _Node, rule: rules.Rule, path: str) -> Any:
        if node.kind != "map":
            got = "a list" if node.kind == "seq" else rules.what_is(self.scalar(node, rule, path, text=False))
            self.add(node.line, path, f"must be {rules.describe(rule)}; got {got}")
            return _BAD
        raw: dict[str, Any] = {}
        lines: dict[str, int] = {}
        for name, _line, value_node in self.pairs(node, path):
            value = self.scalar(value_node, rule, f"{path}.{name}", text=False)
            if value is _BAD:
                raw[name] = 0.0  # keep the name so the sum check does not misfire
                lines[name] = value_node.line
                continue
            raw[name] = value
            lines[name] = value_node.line
        bad = False
        for name, message in rules.check_weights(raw):
            line = lines.get(name, node.line) if name else node.line
            self.add(line, f"{path}.{name}" if name else path, message)
            bad = True
        if bad:
            return _BAD
        return {name: float(raw.get(name, 0.0)) for name in d.WEIGHT_NAMES}

    # -- mappings ----------------------------------------------------------
    def pairs(self, node: _Node, path: str) -> list[tuple[str, int, Any]]:
        """(name, line, value node) of a mapping, reporting names given twice."""
        out = []
        first: dict[str, int] = {}
        for name, line, value_node in node.items:
            where = f"{path}.{name}" if path else name
            if name in first:
                self.add(line, where, f"is given twice in the same place (first on line {first[name]})")
                continue
            first[name] = line
            out.append((name, line, value_node))
        return out

    def record(self, node: _Node, entity: str, path: str) -> dict[str, Any] | None:
        """Check one mapping against its entity's rules; returns the values that passed (or None
        when the node is not a mapping). Problems go to self.problems."""
        if type(node) is _Checked:  # checked as it was read: report its problems here, in order
            if node.entity != entity or node.path != path:  # pragma: no cover - cannot happen
                raise AssertionError(f"record {node.path} checked as {node.entity}, wanted {path} as {entity}")
            for problem in node.problems:
                self.add(problem.line, problem.path, problem.message)
            if node.truncated:
                self.truncated = True
            return node.values
        table = rules.ENTITIES[entity]
        if node.kind != "map":
            got = "a list" if node.kind == "seq" else rules.what_is(self.scalar(node, rules.Rule("text"), path, text=False))
            self.add(node.line, path or "(top)", f"must be a mapping of fields ({', '.join(table)}); got {got}")
            return None
        values: dict[str, Any] = {}
        lines: dict[str, int] = {}
        bad: set[str] = set()
        fast = _FAST_PATH
        for name, key_line, value_node in self.pairs(node, path):
            rule = table.get(name)
            if (
                fast and rule is not None and rule.kind in _FAST_KINDS
                and value_node.kind == "scalar" and value_node.tag != _T + "null"
            ):
                value = _fast_value(value_node, rule)
                if value is not _BAD:
                    lines[name] = value_node.line
                    values[name] = value
                    continue
            fpath = f"{path}.{name}" if path else name
            if rule is None:
                hint = rules.suggest(name, list(table))
                if hint:
                    self.add(key_line, fpath, f"unknown field {name[:60]!r}; did you mean {hint!r}?")
                else:
                    self.add(key_line, fpath, f"unknown field {name[:60]!r} (allowed here: {', '.join(table)})")
                continue
            lines[name] = value_node.line
            is_null = value_node.kind == "scalar" and value_node.tag == _T + "null"
            if rule.kind == "entity":
                if is_null:
                    continue
                sub = self.record(value_node, rule.entity, fpath)
                if sub is None:
                    bad.add(name)
                else:
                    values[name] = sub
                continue
            if rule.kind == "list-entity":
                if is_null:
                    continue
                if value_node.kind != "seq":
                    got = "a mapping" if value_node.kind == "map" else rules.what_is(
                        self.scalar(value_node, rule, fpath, text=False)
                    )
                    self.add(value_node.line, fpath, f"must be a list (each item starts with '- '); got {got}")
                    bad.add(name)
                    continue
                items = []
                for i, item in enumerate(value_node.items):
                    sub = self.record(item, rule.entity, f"{fpath}[{i}]")
                    value_node.items[i] = None  # checked: free its nodes (keeps memory flat at scale)
                    if sub is not None:
                        sub["__line__"] = item.line
                        sub["__index__"] = i
                        items.append(sub)
                if len(value_node.items) < rule.min_items:
                    self.add(value_node.line, fpath, f"must list at least {rule.min_items}")
                    bad.add(name)
                values[name] = items
                continue
            value = self.field_value(value_node, rule, fpath)  # anything unusual, and every problem
            if value is _BAD:
                bad.add(name)
            elif value is not None:
                values[name] = value
        for name, rule in table.items():
            if rule.required and name not in values and name not in bad:
                fpath = f"{path}.{name}" if path else name
                if name in lines:
                    self.add(lines[name], fpath, f"is required ({rules.describe(rule)}) but empty")
                else:
                    self.add(node.line, fpath, f"is required ({rules.describe(rule)}) but missing")
        for rel, message in rules.check_record(entity, values):
            top = rel.split(".")[0].split("[")[0]
            line = lines.get(top, node.line)
            if rel.startswith("table[") and "table" in values:
                idx = int(rel[len("table[") : rel.index("]")])
                point = values["table"][idx]
                line = point["__lines__"].get(rel.rsplit(".", 1)[-1], point["__line__"])
                rel = f"table[{point['__index__']}]{rel[rel.index(']') + 1:]}"
            self.add(line, f"{path}.{rel}" if path else rel, message)
        values["__lines__"] = lines
        return values

    # -- whole file ----------------------------------------------------------
    def catalogue(self, root: _Node | None) -> dict[str, Any] | None:
        if root is None:
            self.add(1, "", "the file is empty; a catalogue starts with the line 'format: 1'")
            return None
        if root.kind != "map":
            self.add(root.line, "", "a catalogue must be a mapping that starts with 'format: 1'")
            return None
        fmt = next((v for k, _line, v in root.items if k == "format"), None)
        if fmt is None:
            self.add(root.line, "format", "is missing: the first line of a catalogue must be 'format: 1'")
            return None
        value = self.scalar(fmt, rules.ENTITIES["catalogue"]["format"], "format", text=False) if fmt else None
        if value is _BAD:
            return None
        if isinstance(value, str) and value.strip() == str(FORMAT_VERSION):
            self.add(fmt.line, "format", f"must be the number {FORMAT_VERSION}, not text: write 'format: {FORMAT_VERSION}'")
            return None
        if isinstance(value, bool) or value != FORMAT_VERSION:
            shown = fmt.value if fmt.kind == "scalar" else "a list or mapping"
            self.add(
                fmt.line, "format",
                f"unsupported catalogue format {shown!r}; this version of vetting reads format {FORMAT_VERSION}",
            )
            return None
        values = self.record(root, "catalogue", "")
        if values is None:
            return None
        self.cross_checks(values)
        return values

    def cross_checks(self, values: dict[str, Any]) -> None:
        def unique(items: list[dict], path: str, what: str) -> None:
            first: dict[str, int] = {}
            for item in items:
                i = item["__index__"]
                key = item.get("key")
                line = item["__lines__"].get("key", item["__line__"])
                if key is None:
                    continue
                if key in first:
                    self.add(line, f"{path}[{i}].key", f"duplicate {what} key {key!r} (first on line {first[key]})")
                else:
                    first[key] = line

        attributes = values.get("attributes", [])
        unique(attributes, "attributes", "attribute")
        unique(values.get("instruments", []), "instruments", "instrument")
        unique(values.get("jobs", []), "jobs", "job")
        declared = {a["key"] for a in attributes if "key" in a} | self.known

        def references(items: list[dict], path: str) -> None:
            seen: dict[str, int] = {}
            for item in items:
                i = item["__index__"]
                key = item.get("attribute")
                if key is None:
                    continue
                line = item["__lines__"].get("attribute", item["__line__"])
                ipath = f"{path}[{i}].attribute"
                if key in seen:
                    self.add(line, ipath, f"attribute {key!r} is listed twice (first on line {seen[key]})")
                    continue
                seen[key] = line
                if key not in declared:
                    hint = rules.suggest(key, sorted(declared))
                    hint_text = f"; did you mean {hint!r}?" if hint else ""
                    self.add(
                        line, ipath,
                        f"attribute {key!r} is not declared{hint_text} "
                        "(declare it under 'attributes:' in this file, or import it first)",
                    )

        for inst in values.get("instruments", []):
            i = inst["__index__"]
            references(inst.get("measures", []), f"instruments[{i}].measures")
            unique(inst.get("norms", []), f"instruments[{i}].norms", "norm")
        for job in values.get("jobs", []):
            i = job["__index__"]
            references(job.get("requirements", []), f"jobs[{i}].requirements")


#: entity -> its fields holding records: (field, entity of the record, True for a list)
_NESTED: dict[str, tuple[tuple[str, str, bool], ...]] = {
    entity: tuple(
        (name, rule.entity, rule.kind == "list-entity")
        for name, rule in table.items()
        if rule.kind in ("entity", "list-entity")
    )
    for entity, table in rules.ENTITIES.items()
}


def _build(entity: str, values: dict[str, Any]) -> Any:
    kwargs = {name: value for name, value in values.items() if not name.startswith("__")}
    for name, sub, many in _NESTED[entity]:
        if name in kwargs:
            value = kwargs[name]
            kwargs[name] = [_build(sub, v) for v in value] if many else _build(sub, value)
    return _CLASSES[entity](**kwargs)


def parse_catalogue(
    data: bytes | str,
    filename: str,
    *,
    known_attributes: set[str] | frozenset[str] = frozenset(),
) -> d.Catalogue:
    """Check a whole catalogue file and return its records; raise CatalogueError listing every
    problem (`FILE:LINE: path.to.field: message`, at most MAX_PROBLEMS).

    `known_attributes` are attribute keys that already exist (e.g. in the database), so the
    file may refer to them without declaring them.
    """
    return parse_catalogues([(data, filename)], known_attributes=known_attributes)[0]


def _declared_attribute_keys(root: _Node | None) -> set[str]:
    """Attribute keys a file declares (looked up before the full check, so files may refer to
    attributes declared in another file of the same import)."""
    out: set[str] = set()
    if root is None or root.kind != "map":
        return out
    for name, _line, value_node in root.items:
        if name == "attributes" and value_node.kind == "seq":
            for item in value_node.items:
                if item.kind != "map":
                    continue
                for k, _kline, v in item.items:
                    if k == "key" and v.kind == "scalar":
                        out.add(v.value)
    return out


# Reading builds millions of small objects with no cycles; repeated collections over the
# growing heap would more than double the time (measured: 10,000 instruments 17.7 s -> 8.0 s
# CPU). The shared, counted pause keeps the collector off while any thread still needs it.
_gc_paused = gc_pause


def parse_catalogues(
    files: list[tuple[bytes | str, str]],
    *,
    known_attributes: set[str] | frozenset[str] = frozenset(),
) -> list[d.Catalogue]:
    """Check several catalogue files as one import: `files` is [(data, filename)].

    Attributes declared in any of the files count as declared in all of them. An instrument or
    job key given in two files, or one attribute key declared differently in two files, is a
    problem. Raises CatalogueError with the problems of every file (capped), else returns one
    Catalogue per file.
    """
    with _gc_paused():
        return _parse_catalogues(files, known_attributes)


#: Instruments and jobs are checked as each is read (`_record_checker`), so the reader holds
#: one record's nodes at a time rather than the whole file's (about 25 KB an instrument).
#: False checks the whole tree after reading it (the tests compare the two).
_CHECK_WHILE_READING = True
_RECORD_SECTIONS = {"instruments": "instrument", "jobs": "job"}


def _record_checker(filename: str) -> Any:
    """`_read_tree`'s on_record: check an instrument or job with the same rules, path and
    problem list the whole-tree check would use, and keep only the outcome. Attributes are left
    as nodes (they are few, and every file's attribute keys are gathered from the tree before
    anything is checked); the problems are added to the file's list in document order when
    the whole-tree check reaches the record, so the list, its order and its cut-off are the
    same."""
    scratch = _Checker(filename, frozenset())

    def on_record(section: str, index: int, node: Any) -> Any:
        entity = _RECORD_SECTIONS.get(section)
        if entity is None:
            return node
        scratch.problems = []
        scratch.truncated = False
        path = f"{section}[{index}]"
        values = scratch.record(node, entity, path)
        return _Checked(node.line, entity, path, values, scratch.problems, scratch.truncated)

    return on_record


def _parse_catalogues(
    files: list[tuple[bytes | str, str]],
    known_attributes: set[str] | frozenset[str],
) -> list[d.Catalogue]:
    problems: list[Problem] = []
    trees: list[tuple[str, _Node | None] | None] = []
    for data, name in files:
        try:
            on_record = _record_checker(name) if _CHECK_WHILE_READING else None
            trees.append((name, _read_tree(_decode(data, name), name, on_record)))
        except CatalogueError as exc:
            problems.extend(exc.problems)
            trees.append(None)
    declared = set(known_attributes)
    for tree in trees:
        if tree is not None:
            declared |= _declared_attribute_keys(tree[1])
    checked: list[tuple[str, dict[str, Any]]] = []
    truncated = False
    for index in range(len(trees)):
        if trees[index] is None:
            continue
        name, root = trees[index]
        trees[index] = None  # let the node tree go as soon as it is checked (memory at scale)
        checker = _Checker(name, declared)
        values = checker.catalogue(root)
        del root
        if not checker.problems and values is None:  # pragma: no cover - defensive
            checker.add(None, "", "the catalogue could not be read")
        problems.extend(sorted(checker.problems, key=lambda p: p.line if p.line is not None else 0))
        truncated = truncated or checker.truncated
        if values is not None:
            checked.append((name, values))
    if not problems and len(checked) > 1:
        problems.extend(_across_files(checked))
    if problems:
        raise CatalogueError(problems[:MAX_PROBLEMS], truncated=truncated or len(problems) > MAX_PROBLEMS)
    return [
        d.Catalogue(
            attributes=[_build("attribute", v) for v in values.get("attributes", [])],
            instruments=[_build("instrument", v) for v in values.get("instruments", [])],
            jobs=[_build("job", v) for v in values.get("jobs", [])],
        )
        for _, values in checked
    ]


def _across_files(checked: list[tuple[str, dict[str, Any]]]) -> list[Problem]:
    problems: list[Problem] = []
    for section, what in (("instruments", "instrument"), ("jobs", "job")):
        first: dict[str, tuple[str, int]] = {}
        for name, values in checked:
            for item in values.get(section, []):
                line = item["__lines__"].get("key", item["__line__"])
                where = (name, line)
                if item["key"] in first:
                    other = first[item["key"]]
                    problems.append(
                        Problem(name, line, f"{section}[{item['__index__']}].key",
                                f"{what} key {item['key']!r} is also in {other[0]}:{other[1]}; give it in one file only")
                    )
                else:
                    first[item["key"]] = where
    seen: dict[str, tuple[str, int, Any]] = {}
    for name, values in checked:
        for item in values.get("attributes", []):
            built = _build("attribute", item)
            line = item["__lines__"].get("key", item["__line__"])
            if built.key in seen and seen[built.key][2] != built:
                other = seen[built.key]
                problems.append(
                    Problem(name, line, f"attributes[{item['__index__']}]",
                            f"attribute {built.key!r} is declared differently in {other[0]}:{other[1]}; "
                            "declare it the same way, or in one file only")
                )
            seen.setdefault(built.key, (name, line, built))
    return problems


def merge_catalogues(cats: list[d.Catalogue]) -> d.Catalogue:
    """One catalogue holding every record of `cats` (attributes declared twice alike kept once)."""
    out = d.Catalogue()
    keys: set[str] = set()
    for cat in cats:
        for attr in cat.attributes:
            if attr.key not in keys:
                keys.add(attr.key)
                out.attributes.append(attr)
        out.instruments.extend(cat.instruments)
        out.jobs.extend(cat.jobs)
    return out


def read_catalogue_file(path: str | os.PathLike[str]) -> bytes:
    """The bytes of a catalogue file, refusing one that is too large before reading it."""
    name = str(path)
    try:
        size = os.stat(path).st_size
        if size > MAX_BYTES:
            raise CatalogueError([Problem(name, None, "", _too_large(size))])
        with open(path, "rb") as fh:
            data = fh.read(MAX_BYTES + 1)
    except CatalogueError:
        raise
    except IsADirectoryError:
        raise CatalogueError([Problem(name, None, "", "is a directory, not a catalogue file")]) from None
    except FileNotFoundError:
        raise CatalogueError([Problem(name, None, "", "no such file")]) from None
    except OSError as exc:
        raise CatalogueError([Problem(name, None, "", f"cannot read the file: {exc.strerror or exc}")]) from None
    return data


def load_catalogue(
    path: str | os.PathLike[str],
    *,
    known_attributes: set[str] | frozenset[str] = frozenset(),
) -> d.Catalogue:
    """Read and check a catalogue file (size checked before reading it)."""
    return parse_catalogue(read_catalogue_file(path), str(path), known_attributes=known_attributes)


def load_catalogues(
    paths: list[str | os.PathLike[str]],
    *,
    known_attributes: set[str] | frozenset[str] = frozenset(),
) -> list[d.Catalogue]:
    """Read and check several files as one import (see parse_catalogues)."""
    files: list[tuple[bytes | str, str]] = []
    problems: list[Problem] = []
    for path in paths:
        try:
            files.append((read_catalogue_file(path), str(path)))
        except CatalogueError as exc:
            problems.extend(exc.problems)
    try:
        cats = parse_catalogues(files, known_attributes=known_attributes)
    except CatalogueError as exc:
        problems.extend(exc.problems)
    if problems:
        raise CatalogueError(problems[:MAX_PROBLEMS], truncated=len(problems) > MAX_PROBLEMS)
    return cats


# ---------------------------------------------------------------------------
# Writing
# ---------------------------------------------------------------------------


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
        return int(number)  # reads back as the same float; easier on the eye
    return number


_HEADER = "# vetting catalogue, format 1 (see docs/catalogue-format.md)\n"

# The writer streams: each record is turned into plain data, then into PyYAML events, which go
# straight to PyYAML's emitter (the C one when present) and from there to the output stream.
# Only one record's data and events are held at a time, and no node graph is built. The events
# carry the tags and "implicit" flags that PyYAML's serializer would have given the same node
# graph (the serializer asks the resolver, for every scalar, whether its text would read back
# as the same type when written plain); here that answer is computed once per distinct text
# through the same implicit-resolver table, so the output is byte for byte what serializing
# the whole document gave (pinned by tests/records/test_catalogue_stream.py).

_STR, _INT, _FLOAT, _BOOL, _DATE = (_T + t for t in ("str", "int", "float", "bool", "timestamp"))
_MAP_START = yaml.MappingStartEvent(None, _T + "map", True, flow_style=False)
_MAP_END = yaml.MappingEndEvent()
_SEQ_START = yaml.SequenceStartEvent(None, _T + "seq", True, flow_style=False)
_SEQ_END = yaml.SequenceEndEvent()
_ScalarEvent = yaml.ScalarEvent
#: Scalar events of short texts seen before (field names, vocabulary words, keys...); events
#: are never changed by the emitter, so one object serves every occurrence.
_EVENT_CACHE_MAX = 2_000
_EVENT_CACHE_TEXT = 40


def _plain_tag(text: str) -> str:
    """The tag PyYAML's resolver gives `text` written as a plain scalar (what
    `Resolver.resolve(ScalarNode, text, (True, False))` returns for the dumper's resolver)."""
    table = _Dumper.yaml_implicit_resolvers
    candidates = table.get(text[0] if text else "", ())
    wildcard = table.get(None, ())
    for tag, regexp in (*candidates, *wildcard):
        if regexp.match(text):
            return tag
    return _STR


class _EventMaker:
    """Plain data (as `_plain` gives it) -> the PyYAML events of its block-style node."""

    def __init__(self) -> None:
        self.cache: dict[tuple[str, str], yaml.ScalarEvent] = {}

    def scalar(self, tag: str, text: str) -> yaml.ScalarEvent:
        key = (tag, text)
        event = self.cache.get(key)
        if event is not None:
            return event
        event = _ScalarEvent(None, tag, (_plain_tag(text) == tag, tag == _STR), text)
        if len(text) <= _EVENT_CACHE_TEXT and len(self.cache) < _EVENT_CACHE_MAX:
            self.cache[key] = event
        return event

    def events(self, value: Any, out: list) -> None:
        if isinstance(value, dict):
            out.append(_MAP_START)
            scalar = self.scalar
            for k, v in value.items():
                out.append(scalar(_STR, k))
                self.events(v, out)
            out.append(_MAP_END)
        elif isinstance(value, list):
            out.append(_SEQ_START)
            for v in value:
                self.events(v, out)
            out.append(_SEQ_END)
        elif isinstance(value, str):
            out.append(self.scalar(_STR, value))
        elif isinstance(value, bool):
            out.append(self.scalar(_BOOL, "true" if value else "false"))
        elif isinstance(value, int):
            out.append(self.scalar(_INT, str(value)))
        elif isinstance(value, float):
            text = repr(value).lower()  # as PyYAML's own representer writes floats
            if "." not in text and "e" in text:
                text = text.replace("e", ".0e", 1)
            out.append(self.scalar(_FLOAT, text))
        elif isinstance(value, dt.date):
            out.append(self.scalar(_DATE, value.isoformat()))
        else:
            raise TypeError(f"cannot write {type(value).__name__} to a catalogue")


def emit_catalogue(cat: d.Catalogue, stream: Any) -> None:
    """Write the catalogue as format-1 YAML text to `stream` (anything with `write(str)`),
    record by record: memory stays at about one record's worth beyond the catalogue itself.
    Raises ValueError (e.g. a non-finite number) part-way through, after some text may have
    been written; `write_catalogue` then leaves the target file untouched."""
    maker = _EventMaker()
    stream.write(_HEADER)
    emitter = _Dumper(stream, allow_unicode=True, width=100, indent=2)
    emit = emitter.emit
    try:
        with _gc_paused():
            emit(yaml.StreamStartEvent())
            emit(yaml.DocumentStartEvent(explicit=False))
            emit(_MAP_START)
            emit(maker.scalar(_STR, "format"))
            emit(maker.scalar(_INT, str(FORMAT_VERSION)))
            for section, entity, records in (
                ("attributes", "attribute", cat.attributes),
                ("instruments", "instrument", cat.instruments),
                ("jobs", "job", cat.jobs),
            ):
                if not records:
                    continue
                emit(maker.scalar(_STR, section))
                emit(_SEQ_START)
                for record in records:
                    events: list = []
                    maker.events(_plain(entity, record), events)
                    for event in events:
                        emit(event)
                emit(_SEQ_END)
            emit(_MAP_END)
            emit(yaml.DocumentEndEvent(explicit=False))
            emit(yaml.StreamEndEvent())
    finally:
        dispose = getattr(emitter, "dispose", None)
        if dispose is not None:
            dispose()


def dump_catalogue(cat: d.Catalogue) -> str:
    """The catalogue as format-1 YAML text: stable field order, absent/empty optional fields
    left out, dates as YYYY-MM-DD. `parse_catalogue(dump_catalogue(c))` equals `c` for every
    catalogue that passes the rules (database bookkeeping such as row_version is not written).
    For large catalogues prefer `write_catalogue` or `emit_catalogue`, which do not hold the
    whole text."""
    buffer = io.StringIO()
    emit_catalogue(cat, buffer)
    return buffer.getvalue()


def write_catalogue(cat: d.Catalogue, path: str | os.PathLike[str]) -> None:
    """Write the catalogue atomically: streamed into a temporary file beside `path`, then
    os.replace. On any failure the temporary file is removed and `path` is left as it was."""
    target = Path(path)
    directory = target.parent if str(target.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=directory)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            emit_catalogue(cat, fh)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
