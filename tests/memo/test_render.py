"""The three renderers, on a hand-made document (no database, no appraisal engine).

Checks are against the formats' own rules: the HTML is read back with the standard library's
html.parser (WHATWG HTML parsing of text vs. tags), the Word file with python-docx, and the
Markdown against CommonMark's rule that a backslash makes any ASCII punctuation literal
(CommonMark spec 0.31, section 2.4 "Backslash escapes").
"""

from __future__ import annotations

import io
from html.parser import HTMLParser

import docx
import pytest

from vetting.memo import render_docx, render_html, render_md
from vetting.memo.document import (
    BulletList,
    Callout,
    DistributionChart,
    Document,
    Facts,
    Figure,
    Paragraph,
    SweepChart,
    Table,
)

HOSTILE = '<script>alert("x")</script> & <img src=x onerror=alert(1)> | *bold* $5'


def _doc() -> Document:
    doc = Document(title="Decision memo: Night dispatcher", subtitle="Draft, 2026-12-01", author="A. Tester")
    s = doc.section("header", "Decision")
    s.add(Callout("decision", "Decision", ["Chosen: Tally Forty"]))
    s.add(Facts([("Job", "Night dispatcher"), ("Status", "draft")]))
    ev = doc.section("evidence", "Evidence")
    sub = ev.sub("reviews", "Review notes")
    sub.add(Table(["Date", "Note"], [["2024-01-02", HOSTILE]], caption="Reviews", numeric=set()))
    sub.add(Paragraph(HOSTILE))
    sub.add(BulletList([HOSTILE, "- not a list"]))
    fig = doc.section("plan", "Planned use")
    fig.add(
        Figure(
            SweepChart([0.1, 0.5, 0.9], [0.9, 0.7, 0.55], [0.6, 0.8, None], 0.5, 0.3, 0.8, HOSTILE),
            "Expected success rate and impact ratio",
            Table(["Selection ratio", "Success"], [["0.10", "0.90"]], numeric={0, 1}),
        )
    )
    fig.add(
        Figure(
            DistributionChart(50.0, 10.0, 58.0, 55.0, 61.0, "Applicants 2020", "Tally Forty"),
            "Score distribution with the cut",
            Table(["Cut", "Band"], [["58.0", "55.0 to 61.0"]], numeric={0}),
        )
    )
    doc.stamp = {"vetting_memo": 1, "fingerprint": "a" * 64, "job": "night-dispatch", "records": {}}
    return doc


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)


def test_html_escapes_user_text_and_has_no_scripts_or_outside_links():
    out = render_html.render(_doc())
    p = _Collect()
    p.feed(out)
    names = [t for t, _ in p.tags]
    assert "script" not in names and "img" not in names and "link" not in names
    # the hostile text comes back as text, unchanged
    assert HOSTILE in "".join(p.text)
    for tag, attrs in p.tags:
        for key in ("href", "src", "xlink:href"):
            value = attrs.get(key)
            assert value is None or value.startswith("#"), (tag, key, value)
    assert "style" in names and "svg" in names
    assert render_html.read_stamp(out)["fingerprint"] == "a" * 64


def test_html_sections_are_real_headings():
    p = _Collect()
    p.feed(render_html.render(_doc()))
    heads = [t for t, _ in p.tags if t in ("h1", "h2", "h3")]
    assert heads == ["h1", "h2", "h2", "h3", "h2"]


def test_markdown_keeps_user_text_literal_and_numbers_of_charts():
    out = render_md.render(_doc())
    assert "<script>" not in out and "\\<script\\>" in out
    assert "\\| \\*bold\\*" in out
    assert "\\- not a list" in out
    assert "| 0.10 | 0.90 |" in out  # the chart's numbers, as a table
    assert "|---:|---:|" in out
    assert render_md.read_stamp(out)["job"] == "night-dispatch"


def test_markdown_escape_round_trip_by_unescaping():
    # CommonMark 2.4: "\\" followed by ASCII punctuation stands for that character
    import re

    text = r"a_b *c* [d](e) <f> | g \ h"
    escaped = render_md.escape(text)
    assert re.sub(r"\\([!-/:-@\[-`{-~])", r"\1", escaped) == text


def test_docx_has_headings_tables_pictures_and_stamp():
    data = render_docx.render(_doc())
    d = docx.Document(io.BytesIO(data))
    headings = [(p.style.name, p.text) for p in d.paragraphs if p.style.name.startswith(("Heading", "Title"))]
    assert ("Title", "Decision memo: Night dispatcher") in headings
    assert ("Heading 1", "Evidence") in headings and ("Heading 2", "Review notes") in headings
    cells = [c.text for t in d.tables for row in t.rows for c in row.cells]
    assert HOSTILE in cells  # stored as text, Word never interprets it
    assert len(d.inline_shapes) == 2
    assert d.core_properties.identifier == "a" * 64
    assert d.core_properties.content_status == "draft"
    assert render_docx.read_stamp(data)["job"] == "night-dispatch"


def test_docx_survives_control_characters():
    doc = _doc()
    doc.sections[0].add(Paragraph("bell\x07 and nul\x00 here"))
    d = docx.Document(io.BytesIO(render_docx.render(doc)))
    assert any("bell" in p.text and "here" in p.text for p in d.paragraphs)


@pytest.mark.parametrize("fmt", ["svg", "png"])
def test_charts_render(fmt):
    from vetting.memo import charts

    chart = _doc().sections[2].blocks[0].chart
    out = charts.to_svg(chart) if fmt == "svg" else charts.to_png(chart)
    if fmt == "svg":
        assert out.startswith("<svg") and "<metadata>" not in out
    else:
        assert out[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, W3C 2003, section 5.2)


def test_html_ids_are_unique_and_every_reference_resolves():
    # HTML requires ids to be unique in a document (WHATWG HTML, section 3.2.6 "The id attribute")
    import re

    out = render_html.render(_doc())
    ids = re.findall(r' id="([^"]+)"', out)
    assert len(ids) == len(set(ids))
    refs = set(re.findall(r'href="#([^"]+)"', out)) | set(re.findall(r"url\(#([^)]+)\)", out))
    assert refs and refs <= set(ids)
    assert "http" not in out  # not even namespace addresses
