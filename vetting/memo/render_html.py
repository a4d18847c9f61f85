"""HTML rendering: one self-contained, printable file.

Embedded CSS, charts as inline SVG, no scripts, no outside links or resources. Every piece of
text from the document model passes through html.escape, so markup a user typed into a review
note shows as text and never runs.
"""

from __future__ import annotations

import json
import re
from html import escape
from html.parser import HTMLParser

from vetting.memo import charts
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

STAMP_META = "vetting-memo-stamp"

CSS = """
@page { size: A4; margin: 18mm 16mm; }
:root { --ink: #1f2933; --muted: #52606d; --line: #cbd2d9; --accent: #1c5d99; --warn: #b5542d; }
* { box-sizing: border-box; }
body { font-family: "Segoe UI", "Helvetica Neue", Arial, sans-serif; color: var(--ink);
       font-size: 10.5pt; line-height: 1.45; max-width: 60rem; margin: 2rem auto; padding: 0 1.5rem; }
h1 { font-size: 1.7rem; margin: 0 0 .2rem; color: var(--accent); }
h2 { font-size: 1.25rem; border-bottom: 2px solid var(--accent); padding-bottom: .15rem;
     margin: 1.8rem 0 .6rem; break-after: avoid; }
h3 { font-size: 1.05rem; margin: 1.2rem 0 .4rem; break-after: avoid; }
h4 { font-size: .95rem; margin: 1rem 0 .3rem; break-after: avoid; }
p.subtitle { color: var(--muted); margin: 0 0 1rem; }
p.lead { font-weight: 600; }
p.small { color: var(--muted); font-size: .9em; }
table { border-collapse: collapse; width: 100%; margin: .4rem 0 1rem; font-size: .92em; }
caption { text-align: left; font-weight: 600; padding-bottom: .25rem; caption-side: top; }
th, td { border: 1px solid var(--line); padding: .25rem .45rem; vertical-align: top; text-align: left; }
th { background: #eef2f7; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
tr { break-inside: avoid; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: .15rem 1rem; margin: .4rem 0 1rem; }
dl.facts dt { font-weight: 600; }
dl.facts dd { margin: 0; }
.callout { border-left: 5px solid var(--accent); background: #f3f7fb; padding: .5rem .9rem; margin: .6rem 0 1rem;
           break-inside: avoid; }
.callout.warning { border-color: var(--warn); background: #fbf3ef; }
.callout.decision { border-color: #2f8f5b; background: #f0f8f3; }
.callout p { margin: .25rem 0; }
.callout p.title { font-weight: 700; }
figure { margin: .6rem 0 1.2rem; break-inside: avoid; }
figure svg { width: 100%; height: auto; max-width: 40rem; }
figcaption { color: var(--muted); font-size: .9em; }
.stamp { font-family: "DejaVu Sans Mono", Consolas, monospace; font-size: .85em; word-break: break-all; }
@media print { body { margin: 0; max-width: none; padding: 0; } a { color: inherit; text-decoration: none; } }
"""


#: The characters html.escape() replaces (quote=True).
_NEEDS_ESCAPE = re.compile("[&<>\"']")


def _table(table: Table) -> str:
    parts = ["<table>"]
    if table.caption:
        parts.append(f"<caption>{escape(table.caption)}</caption>")
    head = "".join(
        f'<th class="num" scope="col">{escape(c)}</th>' if i in table.numeric else f'<th scope="col">{escape(c)}</th>'
        for i, c in enumerate(table.columns)
    )
    parts.append(f"<thead><tr>{head}</tr></thead><tbody>")
    # each column's opening tag, worked out once per table rather than once per cell
    width = max(map(len, table.rows), default=0)
    opens = ['<td class="num">' if i in table.numeric else "<td>" for i in range(width)]
    # a full row with nothing to escape in any cell (most rows) is one str.format
    whole = "<tr>" + "".join(f"{o}{{}}</td>" for o in opens) + "</tr>"
    for row in table.rows:
        if len(row) == width:
            try:
                joined = "\x00".join(row)
            except TypeError:  # not all text: escape() below says what it makes of it
                joined = None
            if joined is not None and _NEEDS_ESCAPE.search(joined) is None:
                parts.append(whole.format(*row))
                continue
        cells = "".join([f"{o}{escape(c)}</td>" for o, c in zip(opens, row)])
        parts.append(f"<tr>{cells}</tr>")
    parts.append("</tbody></table>")
    return "".join(parts)


def _block(block, ids: list[int] | None = None) -> str:
    if isinstance(block, Paragraph):
        cls = f' class="{block.style}"' if block.style != "normal" else ""
        return f"<p{cls}>{escape(block.text)}</p>"
    if isinstance(block, BulletList):
        return "<ul>" + "".join(f"<li>{escape(i)}</li>" for i in block.items) + "</ul>"
    if isinstance(block, Facts):
        rows = "".join(f"<dt>{escape(k)}</dt><dd>{escape(v)}</dd>" for k, v in block.rows)
        return f'<dl class="facts">{rows}</dl>'
    if isinstance(block, Table):
        return _table(block)
    if isinstance(block, Callout):
        kind = block.kind if block.kind in ("warning", "decision", "note") else "note"
        lines = "".join(f"<p>{escape(line)}</p>" for line in block.lines)
        return f'<div class="callout {kind}"><p class="title">{escape(block.title)}</p>{lines}</div>'
    if isinstance(block, Figure):
        n = len(ids) + 1 if ids is not None else 1
        if ids is not None:
            ids.append(n)
        svg = charts.to_svg(block.chart, id_prefix=f"chart{n}-")
        return (
            f'<figure role="img" aria-label="{escape(block.caption)}">{svg}'
            f"<figcaption>{escape(block.caption)}</figcaption></figure>"
        )
    raise TypeError(f"unknown block {type(block).__name__}")


def _section(section: Section, level: int, ids: list[int]) -> str:
    tag = f"h{min(level, 6)}"
    parts = [f'<section id="{escape(section.key)}"><{tag}>{escape(section.title)}</{tag}>']
    parts += [_block(b, ids) for b in section.blocks]
    parts += [_section(s, level + 1, ids) for s in section.subsections]
    parts.append("</section>")
    return "\n".join(parts)


def render(doc: Document) -> str:
    stamp = json.dumps(doc.stamp, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    head = [
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{escape(doc.title)}</title>",
        f'<meta name="author" content="{escape(doc.author)}">',
        f'<meta name="{STAMP_META}" content="{escape(stamp)}">',
        f"<style>{CSS}</style>",
        "</head>",
        "<body>",
        "<header>",
        f"<h1>{escape(doc.title)}</h1>",
        f'<p class="subtitle">{escape(doc.subtitle)}</p>',
        "</header>",
        "<main>",
    ]
    ids: list[int] = []
    body = [_section(s, 2, ids) for s in doc.sections]
    tail = ["</main>", "</body>", "</html>", ""]
    return "\n".join(head + body + tail)


class _StampFinder(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stamp: str | None = None

    def handle_starttag(self, tag, attrs):
        if tag == "meta":
            d = dict(attrs)
            if d.get("name") == STAMP_META:
                self.stamp = d.get("content")


def read_stamp(text: str) -> dict | None:
    finder = _StampFinder()
    finder.feed(text)
    finder.close()
    return json.loads(finder.stamp) if finder.stamp else None
