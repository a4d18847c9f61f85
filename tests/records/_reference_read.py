"""The catalogue reader's first two steps (bytes -> node tree) as they were before the reader
was sped up (commit d20cb75), frozen here as the reference the faster reader must match: the
same tree for every file it accepts, the same single problem for every file it refuses."""

from __future__ import annotations

import sys
from typing import Any

import yaml

from vetting.records.catalogue import (
    _ALLOWED_SCALAR_TAGS,
    _T,
    MAX_DEPTH,
    MAX_NODES,
    MAX_SCALAR_CHARS,
    _Loader,
    _mark_line,
    _Node,
    _Scalar,
    _Stop,
)
from vetting.records.errors import CatalogueError, Problem

def _read_tree(text: str, filename: str) -> _Node | None:
    """Stream the YAML events into a tree, refusing anything a catalogue never needs."""
    resolver = yaml.resolver.Resolver()
    root: _Node | None = None
    stack: list[_Node] = []
    documents = 0
    scalar_event, seq_start, map_start = yaml.ScalarEvent, yaml.SequenceStartEvent, yaml.MappingStartEvent
    collection_end = (yaml.SequenceEndEvent, yaml.MappingEndEvent)
    str_tag = _T + "str"
    null_tag = _T + "null"
    resolved: dict[str, str] = {}  # plain scalar -> its implicit tag (same text, same tag)
    budget = MAX_NODES
    try:
        for event in yaml.parse(text, Loader=_Loader):
            cls = type(event)
            if cls in collection_end:
                stack.pop()
                continue
            line = event.start_mark.line + 1 if event.start_mark is not None else None
            if cls is yaml.AliasEvent:
                raise _Stop(line, "YAML aliases (*name) are not allowed in a catalogue; write the value out in full")
            if getattr(event, "anchor", None) is not None:
                raise _Stop(line, "YAML anchors (&name) are not allowed in a catalogue; write each value out in full")
            if cls is yaml.DocumentStartEvent:
                documents += 1
                if documents > 1:
                    raise _Stop(line, "only one YAML document is allowed in a catalogue file (found a second '---')")
                continue
            if cls is scalar_event:
                value = event.value
                if len(value) > MAX_SCALAR_CHARS:
                    raise _Stop(line, f"a value is too long ({len(value):,} characters; at most {MAX_SCALAR_CHARS:,})")
                tag = event.tag
                if tag is None or tag == "!":
                    if event.implicit[0]:
                        tag = resolved.get(value)
                        if tag is None:
                            tag = resolver.resolve(yaml.ScalarNode, value, (True, False))
                            if len(resolved) < 10_000:
                                resolved[value] = tag
                    else:
                        tag = str_tag  # quoted or block text: always a string
                if tag not in _ALLOWED_SCALAR_TAGS:
                    if tag == _T + "merge":
                        raise _Stop(line, "YAML merge keys (<<) are not allowed in a catalogue; write each field out")
                    raise _Stop(line, f"the YAML tag {tag!r} is not allowed in a catalogue; remove it")
                if len(value) <= 40:
                    value = sys.intern(value)  # field names and short values repeat a lot
                node = _Scalar(tag, value, line or 0)
            elif cls is seq_start or cls is map_start:
                kind = "seq" if cls is seq_start else "map"
                tag = event.tag
                if tag not in (None, "!", _T + kind):
                    raise _Stop(line, f"the YAML tag {tag!r} is not allowed in a catalogue; remove it")
                node = _Node(kind, line or 0)
            else:
                continue
            budget -= 1
            if budget < 0:
                raise _Stop(
                    line, f"the file holds too many values to be a catalogue (more than {MAX_NODES:,}); split it"
                )
            if stack:
                parent = stack[-1]
                if parent.kind == "seq":
                    parent.items.append(node)
                elif parent.pending is None:  # this node is a field name
                    if node.kind != "scalar" or node.tag == null_tag:
                        raise _Stop(line, "field names must be plain words (found a list, mapping or empty name)")
                    parent.pending = (node.value, node.line)
                    continue
                else:
                    parent.items.append((parent.pending[0], parent.pending[1], node))
                    parent.pending = None
            else:
                root = node
            if node.kind != "scalar":
                stack.append(node)
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
    return root
