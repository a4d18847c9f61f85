"""Markdown rendering of the memo document. Charts become their number tables."""

from __future__ import annotations

import json
import re

from vetting.memo.document import (
    BulletList,
    Callout,
    Document,
    Facts,
    Figure,
    Paragraph,
    Section,
    Table,
)

#: The last line of every Markdown memo: the machine-readable stamp `vetting verify` reads.
STAMP_PREFIX = "<!-- vetting-memo-stamp: "
STAMP_SUFFIX = " -->"

_SPECIAL = re.compile(r"([\\`*_\[\]<>|#~])")
_LEADING_LIST = re.compile(r"^(\s*)([-+]|\d+[.)])(\s)")


def inline(text: str) -> str:
    """Make text literal inside a line (after a marker such as '# ', '- ' or '| ')."""
    text = " ".join(str(text).split())
    # most cells hold no special character: a search is much cheaper than a substitution
    return _SPECIAL.sub(r"\\\1", text) if _SPECIAL.search(text) else text


def escape(text: str) -> str:
    """Make user text literal in Markdown at the start of a line: no markup, no raw HTML, one line."""
    text = inline(text)
    if _LEADING_LIST.match(text) is None:
        return text
    return _LEADING_LIST.sub(lambda m: m.group(1) + "\\" + m.group(2) + m.group(3), text)


def _table(table: Table) -> list[str]:
    out: list[str] = []
    if table.caption:
        out += [f"*{escape(table.caption)}*", ""]
    out.append("| " + " | ".join(escape(c) for c in table.columns) + " |")
    out.append(
        "|" + "|".join("---:" if i in table.numeric else "---" for i in range(len(table.columns))) + "|"
    )
    for row in table.rows:
        try:
            joined = "\x00".join(row)
        except TypeError:  # not all text: escape() below says what it makes of it
            joined = None
        if joined is not None and all(row) and joined.count("\x00") == len(row) - 1 and _as_is(joined):
            out.append("| " + " | ".join(row) + " |")  # escape() would give back every cell as it is
            continue
        cells = [escape(c) if c != "" else " " for c in row]
        out.append("| " + " | ".join(cells) + " |")
    return out + [""]


#: A character inline() escapes, or white space it would change (all but the plain space).
_TOUCHED = re.compile(r"[\\`*_\[\]<>|#~\t\n\r\x0b\x0c\x1c-\x1f\x85\xa0\u1680\u2000-\u200a\u2028\u2029\u202f\u205f\u3000]")
_LIST_AFTER_NUL = re.compile(r"\x00\d+[.)] ")
_LIST_AT_START = re.compile(r"\d+[.)] ")


def _as_is(joined: str) -> bool:
    """Whether escape() leaves each of the texts joined by NUL as it is (none holding NUL):
    no character it escapes, no white space but single plain spaces between words, and no
    list marker ('-', '+', '1.' or '1)' and a space) at the start of a text."""
    if _TOUCHED.search(joined) is not None:
        return False
    if "  " in joined or " \x00" in joined or "\x00 " in joined or joined[:1] == " " or joined[-1:] == " ":
        return False
    if joined[:2] in ("- ", "+ ") or "\x00- " in joined or "\x00+ " in joined:
        return False
    if (". " in joined or ") " in joined) and (
        _LIST_AT_START.match(joined) is not None or _LIST_AFTER_NUL.search(joined) is not None
    ):
        return False
    return True


def _block(block) -> list[str]:
    if isinstance(block, Paragraph):
        text = escape(block.text)
        if block.style == "lead":
            text = f"**{text}**"
        elif block.style == "small":
            text = f"*{text}*"
        return [text, ""]
    if isinstance(block, BulletList):
        return [f"- {escape(item)}" for item in block.items] + [""]
    if isinstance(block, Facts):
        return [f"- **{escape(label)}:** {escape(value)}" for label, value in block.rows] + [""]
    if isinstance(block, Table):
        return _table(block)
    if isinstance(block, Callout):
        out = [f"> **{escape(block.title)}**", ">"]
        for line in block.lines:
            out += [f"> {escape(line)}", ">"]
        return out[:-1] + [""]
    if isinstance(block, Figure):
        return [f"**Figure:** {escape(block.caption)}", ""] + _table(block.table)
    raise TypeError(f"unknown block {type(block).__name__}")


def _section(section: Section, level: int) -> list[str]:
    out = ["#" * level + " " + inline(section.title), ""]
    for block in section.blocks:
        out += _block(block)
    for sub in section.subsections:
        out += _section(sub, level + 1)
    return out


def render(doc: Document) -> str:
    lines = [f"# {inline(doc.title)}", "", f"*{inline(doc.subtitle)}*", ""]
    for section in doc.sections:
        lines += _section(section, 2)
    stamp = json.dumps(doc.stamp, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    # '<', '>', '&' and '--' can only occur inside JSON strings (the author's name): write them
    # as JSON escapes so that nothing in the stamp can end the comment or look like markup
    for ch, esc in (("&", "\\u0026"), ("<", "\\u003c"), (">", "\\u003e"), ("--", "-\\u002d")):
        stamp = stamp.replace(ch, esc)
    lines.append(STAMP_PREFIX + stamp + STAMP_SUFFIX)
    return "\n".join(lines) + "\n"


def read_stamp(text: str) -> dict | None:
    for line in reversed(text.splitlines()):
        line = line.strip()
        if line.startswith(STAMP_PREFIX) and line.endswith(STAMP_SUFFIX):
            return json.loads(line[len(STAMP_PREFIX) : -len(STAMP_SUFFIX)])
    return None
