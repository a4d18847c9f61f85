"""The memo's fast paths write exactly what the plain library calls (and plain definitions) write.

Word: `render_docx.render(doc)` takes shortcuts around python-docx (table rows and list items
after the first written as XML text spliced into the serialized part, copied rows where a
text needs python-docx's own handling, run text set without python-docx's character walk,
drawing ids and the text width kept instead of searched for, the footer defined directly); `render(doc, reference=True)` builds the same
document through python-docx's public calls only (`add_paragraph(text, style=)`, `add_table`,
`add_row` + `cell.text`, `add_picture`, `section.footer.paragraphs`). The reference is the
library itself, so the two files must hold the same parts with the same bytes.

Fingerprint: each record's digest must be SHA-256 (hashlib) of the canonical JSON that the
standard library writes from `dataclasses.asdict` (keys sorted, no whitespace, ASCII, ISO dates,
whole-number floats as integers): the definition in docs/memo.md, computed here the slow, plain
way on a seeded synthetic catalogue.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import hashlib
import io
import json
import re
import zipfile

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from vetting.memo import fingerprint as fpm
from vetting.memo import render_docx, render_html, render_md
from vetting.memo.build import gather, layout
from vetting.memo.document import BulletList, Document, Facts, Figure, Paragraph, Table
from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue

from tests.memo.test_render import _doc

AS_OF = dt.date(2026, 11, 1)
NOW = dt.datetime(2026, 11, 1, 12, 0, tzinfo=dt.timezone.utc)


def _parts(data: bytes) -> dict[str, bytes]:
    with zipfile.ZipFile(io.BytesIO(data)) as z:
        return {name: z.read(name) for name in z.namelist()}


def _same_docx(doc: Document) -> None:
    fast = _parts(render_docx.render(doc))
    plain = _parts(render_docx.render(doc, reference=True))
    assert sorted(fast) == sorted(plain)
    for name in plain:
        assert fast[name] == plain[name], name


@pytest.fixture(scope="module")
def synthetic_store(tmp_path_factory):
    url = f"sqlite:///{tmp_path_factory.mktemp('eq') / 'eq.db'}"
    with Store.open(url, user="eq-tester") as store:
        store.import_catalogue(generate_catalogue(60, seed=11), source="synthetic")
        yield store


def _spliced_texts(monkeypatch) -> list[int]:
    """Counts the rows and paragraphs the fast path writes as XML text (render_docx._Splice)."""
    added = []
    add = render_docx._Splice.add

    def counting(self, values):
        ok = add(self, values)
        added.append(ok)
        return ok

    monkeypatch.setattr(render_docx._Splice, "add", counting)
    return added


@pytest.mark.parametrize("job", [0, 1])
def test_word_fast_path_matches_python_docx_on_a_synthetic_memo(synthetic_store, monkeypatch, job):
    key = sorted(synthetic_store.job_keys())[job]
    doc = layout(gather(synthetic_store, key, as_of=AS_OF, now=NOW, by="Eq Tester", draws=200))
    if job == 0:
        assert any(isinstance(b, Figure) for s in doc.sections for b in s.blocks)  # pictures included
    added = _spliced_texts(monkeypatch)
    _same_docx(doc)
    assert added.count(True) > 100  # most rows and list items took the XML-text path


def test_word_fast_path_matches_python_docx_on_awkward_cells(monkeypatch):
    doc = _doc()
    s = doc.section("awkward", "Awkward cells")
    rows = [
        ["", " leading space", "trailing space ", "x"],  # the first full row (copied) has an empty cell
        [" now text", "", "tab\there", "line\nbreak"],  # text where the copied cell had none
        ["carriage\rreturn", "plain", "  ", " y"],  # space kept / dropped against the copied cell
        ["short"],  # a short row: filled by python-docx itself
        ["a", "b", "c", "bell\x07nul\x00"],
        ["Zoë & <b>bold</b>", "\"quoted\" 'too'", "]]> &amp;", "\u2028 \x85 \U0001F600"],
        ["p", "q", "r", "s"],
        ["t", "u\tv", "w", "x"],
    ]
    s.add(Table(["One", "Two", "Three", "Four"], rows, caption="Odd text", numeric={3}))
    s.add(Paragraph(" leading and\ttab"))
    s.add(BulletList([" spaced item ", "plain item", "", "tab\titem"]))
    s.add(Facts([("Plain", "value"), (" Spaced label", "value "), ("", ""), ("Tab\tlabel", "line\nbreak"), ("<b>", "&")]))
    s.add(Facts([("First\twith a tab", "the row copied for the next"), ("Second", "value")]))
    s.add(BulletList(["first plain item", " spaced ", "", "a & b <c>", "tab\tin the middle", "last"]))
    added = _spliced_texts(monkeypatch)
    _same_docx(doc)
    assert True in added and False in added  # both the XML-text path and the slow one taken


def _reference_digest(record) -> str:
    text = json.dumps(_fix_all(record), sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def test_fingerprint_digests_match_the_plain_definition():
    cat = generate_catalogue(120, seed=5)
    job = cat.jobs[0]
    fp = fpm.compute(job, job.policy, cat.instruments)
    for inst in cat.instruments:
        rec = dataclasses.asdict(inst)
        rec.pop("row_version")
        assert fp.records[f"instrument:{inst.key}"] == _reference_digest(rec)
    rec = dataclasses.asdict(job)
    for skipped in ("row_version", "first_ranked_at", "policy"):
        rec.pop(skipped)
    assert fp.records[f"job:{job.key}"] == _reference_digest(rec)
    assert fp.records[f"policy:{job.key}"] == _reference_digest(dataclasses.asdict(job.policy))
    # the whole fingerprint: SHA-256 of {"format": 1, "records": {name: record}}
    records = {f"instrument:{i.key}": {k: v for k, v in dataclasses.asdict(i).items() if k != "row_version"}
               for i in cat.instruments}
    records[f"job:{job.key}"] = rec
    records[f"policy:{job.key}"] = dataclasses.asdict(job.policy)
    whole = json.dumps({"format": 1, "records": _fix_all(records)}, sort_keys=True, separators=(",", ":"),
                       ensure_ascii=True)
    assert fp.value == hashlib.sha256(whole.encode("utf-8")).hexdigest()


def _fix_all(v):
    if isinstance(v, float) and v.is_integer():
        return int(v)
    if isinstance(v, (dt.date, dt.datetime)):
        return v.isoformat()
    if isinstance(v, dict):
        return {k: _fix_all(x) for k, x in v.items()}
    if isinstance(v, list):
        return [_fix_all(x) for x in v]
    return v


# Markdown: render_md.escape skips the substitutions when a search finds nothing to escape. The
# plain definition, written out here: CommonMark 0.31 section 2.4 (a backslash before ASCII
# punctuation makes it literal) applied to the characters that start markup in a table cell or
# a line, and a list marker at the start of a line (section 5.2) escaped the same way.
_SPECIAL = re.compile(r"([\\`*_\[\]<>|#~])")
_LEADING_LIST = re.compile(r"^(\s*)([-+]|\d+[.)])(\s)")


def _plain_escape(text: str) -> str:
    line = _SPECIAL.sub(r"\\\1", " ".join(str(text).split()))
    return _LEADING_LIST.sub(lambda m: m.group(1) + "\\" + m.group(2) + m.group(3), line)


@settings(max_examples=400, deadline=None)
@given(st.text(alphabet=st.sampled_from(list("ab1 9.)-+\\`*_[]<>|#~\t\n\u00a0\u2028٣") + ["x"]), max_size=30)
       | st.text(max_size=30))
def test_markdown_escape_matches_the_plain_definition(text):
    assert render_md.escape(text) == _plain_escape(text)
    assert render_md.inline(text) == _SPECIAL.sub(r"\\\1", " ".join(text.split()))


_FRESH_PROCESS = """
import datetime as dt, gc, sys, weakref
from vetting.memo.api import make_memo
from vetting.records.store import Store
with Store.open(sys.argv[1], user="eq-tester") as store:
    key = sorted(store.job_keys())[0]
    gc.collect()
    gc.disable()  # no collection at all from here: only reference counting frees anything
    result = make_memo(store, key, fmt=sys.argv[3], out=sys.argv[2], as_of=dt.date(2026, 11, 1), draws=100,
                       keep=True)
    data, document = weakref.ref(result.data), weakref.ref(result.document)
    del result
    print(data() is None, document() is None)
    plain = make_memo(store, key, fmt=sys.argv[3], out=sys.argv[2], as_of=dt.date(2026, 11, 1), draws=100)
    print(plain.data is None, plain.document is None)
    gc.enable()
    result = make_memo(store, key, fmt=sys.argv[3], out=sys.argv[2], as_of=dt.date(2026, 11, 1), draws=100)
    print(gc.isenabled())
"""


@pytest.mark.parametrize("fmt", ["docx", "html"])
def test_a_memo_leaves_the_collector_on_and_its_data_free_of_cycles(synthetic_store, tmp_path, fmt):
    # The memo pauses the cyclic garbage collector (Python documentation, module gc) while it
    # runs, and drops what it made before the pause ends, so that the collector never scans it:
    # that only works if nothing holds the memo's data in a reference cycle. matplotlib,
    # imported on first use inside the memo, keeps exception tracebacks whose frames reach
    # their callers' frames; imported from the memo's own call stack, they held the memo's
    # data (90 MB at 1,000 instruments) until a collection. Checked with the collector off, in
    # a fresh interpreter, so that the libraries are imported inside the memo as `vetting memo`
    # imports them. Afterwards the collector must be on again.
    import subprocess
    import sys

    done = subprocess.run(
        [sys.executable, "-c", _FRESH_PROCESS, synthetic_store.url, str(tmp_path / f"m.{fmt}"), fmt],
        capture_output=True, text=True, timeout=300,
    )
    assert done.returncode == 0, done.stderr
    assert done.stdout.split() == ["True", "True", "True", "True", "True"]


@pytest.mark.parametrize("fmt", ["svg", "png"])
def test_charts_are_the_same_without_savefigs_extra_layout_pass(monkeypatch, fmt):
    # matplotlib's savefig lays a figure out once more when it has a layout engine, which is
    # what Figure.tight_layout() leaves behind (a placeholder); the charts drop it after their
    # one tight layout. The file must be exactly what savefig writes with the extra pass.
    from matplotlib.layout_engine import PlaceHolderLayoutEngine

    from vetting.memo import charts

    doc = _doc()
    figures = [b.chart for s in doc.sections for b in s.blocks if isinstance(b, Figure)]
    write = charts.to_svg if fmt == "svg" else charts.to_png
    ours = [write(c) for c in figures]
    draw = charts._draw

    def as_tight_layout_leaves_it(chart):
        fig = draw(chart)
        assert fig.get_layout_engine() is None
        fig.set_layout_engine(PlaceHolderLayoutEngine(True, True))
        return fig

    monkeypatch.setattr(charts, "_draw", as_tight_layout_leaves_it)
    assert [write(c) for c in figures] == ours


_CELL_TEXT = st.text(alphabet=st.sampled_from(list("ab é{}0 \u00a0\u2028\x85&<>\"'\t\n\r\x00\x0b\x1f\ufffe")), max_size=6)


@settings(max_examples=25, deadline=None)
@given(rows=st.lists(st.lists(_CELL_TEXT, min_size=3, max_size=3), min_size=2, max_size=8),
       items=st.lists(_CELL_TEXT, min_size=2, max_size=6))
def test_word_rows_written_as_xml_text_match_python_docx(rows, items):
    # rows and list items after the first are written as XML text (render_docx._Splice), with
    # a shortcut for texts with no markup character, break or edge space: whatever the text,
    # the part must be what python-docx's own calls write
    doc = Document(title="T", subtitle="S")
    s = doc.section("s", "S")
    s.add(Table(["A", "B", "C"], [["first", "full", "row"]] + rows, numeric={2}))
    s.add(BulletList(["first item"] + items))
    _same_docx(doc)


# Markdown and HTML tables: a row whose cells need no escaping is written in one go. The plain
# definition is each cell through the escaping (CommonMark 0.31 section 2.4 as above; for HTML
# the standard library's html.escape, WHATWG HTML "escaping a string").
_MD_CELL = st.lists(
    st.sampled_from(list("ab 1٣.)-+*|#<&\"'\t\n\u00a0\u2028\x85\x00") + ["x", "- ", "1. ", "2) ", "word"]), max_size=6
).map("".join)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.lists(_MD_CELL, min_size=1, max_size=4), min_size=1, max_size=5))
def test_markdown_and_html_tables_match_the_plain_definition(rows):
    import html

    width = max(map(len, rows))
    table = Table([f"C{i}" for i in range(width)], rows, numeric={1})
    lines = render_md._table(table)
    plain_rows = ["| " + " | ".join(_plain_escape(c) if c != "" else " " for c in row) + " |" for row in rows]
    assert lines[2:-1] == plain_rows
    opens = ['<td class="num">' if i == 1 else "<td>" for i in range(width)]
    plain_html = "".join("<tr>" + "".join(f"{o}{html.escape(c)}</td>" for o, c in zip(opens, row)) + "</tr>"
                         for row in rows)
    assert render_html._table(table).split("<tbody>", 1)[1] == plain_html + "</tbody></table>"


# The charts of the first HTML or Word memo in a process may be drawn by a helper process
# (charts.ChartHelper, forked as the memo starts: it imports matplotlib while the records are
# read). The helper runs the same library with the same settings, so the files must be the
# same bytes as with every chart drawn in the memo's own process (VETTING_MEMO_CHART_HELPER=0),
# whatever happens to the helper. Run in fresh interpreters, as `vetting memo` runs.
_HELPER_PROCESS = """
import datetime as dt, io, os, sys, zipfile
from vetting.memo import charts
from vetting.memo.api import make_memo
from vetting.records.store import Store
fmt, out, trouble = sys.argv[3], sys.argv[2], sys.argv[4]
if trouble == "dies":  # the helper ends before drawing anything
    charts._helper_main = lambda *args: os._exit(3)
elif trouble == "fails":  # every chart fails in the helper (drawn again here)
    def failing(kind, chart, dpi):
        raise RuntimeError("no drawing in the helper")
    charts._draw_one = failing
elif trouble == "thread":  # another thread runs: a fork would copy only this one, so no helper
    import threading
    done = threading.Event()
    threading.Thread(target=done.wait, daemon=True).start()
started = []
start = charts.ChartHelper.start.__func__
charts.ChartHelper.start = classmethod(lambda cls: started.append(start(cls)) or started[-1])
with Store.open(sys.argv[1], user="eq-tester") as store:
    key = sorted(store.job_keys())[0]
    make_memo(store, key, fmt=fmt, out=out, as_of=dt.date(2026, 11, 1), draws=100,
              now=dt.datetime(2026, 11, 1, 12, 0, tzinfo=dt.timezone.utc))
print(started[0] is not None, "matplotlib" in sys.modules)
"""


@pytest.fixture(scope="module")
def unranked_db(tmp_path_factory):
    """A database file no memo has been made from (a memo records the job's first ranking,
    which the next memo prints): each memo below is made from a copy of it."""
    path = tmp_path_factory.mktemp("helper") / "unranked.db"
    with Store.open(f"sqlite:///{path}", user="eq-tester") as store:
        store.import_catalogue(generate_catalogue(60, seed=11), source="synthetic")
    return path


def _memo_in_fresh_process(db, out, fmt, helper: str, trouble: str = "none") -> list[str]:
    import os
    import shutil
    import subprocess
    import sys

    copy = out.with_suffix(".db")
    shutil.copy(db, copy)
    env = dict(os.environ, VETTING_MEMO_CHART_HELPER=helper)
    done = subprocess.run([sys.executable, "-c", _HELPER_PROCESS, f"sqlite:///{copy}", str(out), fmt, trouble],
                          capture_output=True, text=True, timeout=300, env=env)
    assert done.returncode == 0, done.stderr
    return done.stdout.split()


def _memo_parts(path, fmt) -> dict[str, bytes]:
    data = path.read_bytes()
    return _parts(data) if fmt == "docx" else {"memo": data}


@pytest.mark.parametrize("fmt", ["html", "docx"])
def test_charts_drawn_by_the_helper_process_are_the_same_bytes(unranked_db, tmp_path, fmt):
    here, there = tmp_path / f"here.{fmt}", tmp_path / f"there.{fmt}"
    # no helper: matplotlib is loaded in the memo's process to draw the charts
    assert _memo_in_fresh_process(unranked_db, here, fmt, "0") == ["False", "True"]
    # a helper drew every chart: the memo's process never loaded matplotlib at all
    assert _memo_in_fresh_process(unranked_db, there, fmt, "1") == ["True", "False"]
    plain, helped = _memo_parts(here, fmt), _memo_parts(there, fmt)
    assert sorted(plain) == sorted(helped)
    if fmt == "docx":
        assert {"word/media/image1.png", "word/media/image2.png"} <= set(plain)  # both charts
    else:
        assert plain["memo"].count(b"<svg") == 2
    for name in plain:
        assert helped[name] == plain[name], name


@pytest.mark.parametrize("trouble", ["dies", "fails"])
def test_a_helper_that_dies_or_fails_leaves_the_charts_to_the_memo(unranked_db, tmp_path, trouble):
    here, there = tmp_path / "here.docx", tmp_path / "there.docx"
    _memo_in_fresh_process(unranked_db, here, "docx", "0")
    # the helper was started, and the memo drew the charts itself after all
    assert _memo_in_fresh_process(unranked_db, there, "docx", "1", trouble) == ["True", "True"]
    assert _memo_parts(there, "docx") == _memo_parts(here, "docx")


def test_no_helper_is_forked_while_another_thread_runs(unranked_db, tmp_path):
    # a fork copies only the calling thread (POSIX fork(); Python documentation, os.fork): a
    # process running other threads (the terminal interface) draws its charts itself
    here, there = tmp_path / "here.docx", tmp_path / "there.docx"
    _memo_in_fresh_process(unranked_db, here, "docx", "0")
    assert _memo_in_fresh_process(unranked_db, there, "docx", "1", "thread") == ["False", "True"]
    assert _memo_parts(there, "docx") == _memo_parts(here, "docx")
