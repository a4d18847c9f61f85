"""The streaming catalogue writer gives exactly the bytes the old whole-document writer gave.

`vetting export` used to build the whole document as a PyYAML node graph and serialize it in
one call; it now streams one record at a time as PyYAML events into the emitter. Catalogue
format 1 is binding (docs/catalogue-format.md), so the new writer is compared byte for byte
with the old one, kept unchanged in tests/records/_reference_dump.py, on the demo catalogue,
on seeded synthetic catalogues of several sizes, on generated catalogues (hypothesis) and on
hand-made edge cases: texts that YAML 1.1 would read as numbers, booleans, nulls or dates if
written plain (yaml.org/spec/1.1, "Language-Independent Types": int, float, bool, null,
timestamp), multi-line and non-ASCII text, empty lists, absent fields, and mapping keys that
need quotes.
"""

from __future__ import annotations

import datetime as dt
import io
import os
from pathlib import Path

import pytest
import yaml
from hypothesis import given, settings

from tests.records._reference_dump import reference_dump
from tests.records.test_fuzz_catalogue import COMMON, catalogues
from tests.records._measure import peak_kib
from vetting.records import catalogue as cio
from vetting.records import domain as d
from vetting.records.synthetic import generate_catalogue

REPO = Path(__file__).resolve().parents[2]


def _same(cat: d.Catalogue) -> str:
    expected = reference_dump(cat)
    assert cio.dump_catalogue(cat) == expected
    buffer = io.StringIO()
    cio.emit_catalogue(cat, buffer)
    assert buffer.getvalue() == expected
    return expected


def test_demo_catalogue_is_written_byte_for_byte_as_before(tmp_path):
    demo = cio.load_catalogue(REPO / "catalogues" / "demo.yaml")
    expected = _same(demo)
    target = tmp_path / "demo-export.yaml"
    cio.write_catalogue(demo, target)
    assert target.read_bytes() == expected.encode("utf-8")


@pytest.mark.parametrize(("size", "seed"), [(0, 1), (1, 2), (7, 3), (60, 11), (250, 2026)])
def test_synthetic_catalogues_are_written_byte_for_byte_as_before(tmp_path, size, seed):
    cat = generate_catalogue(size, seed=seed)
    expected = _same(cat)
    target = tmp_path / "out.yaml"
    cio.write_catalogue(cat, target)
    assert target.read_bytes() == expected.encode("utf-8")
    assert cio.load_catalogue(target) == cat


@settings(max_examples=60, **COMMON)
@given(catalogues())
def test_generated_catalogues_are_written_byte_for_byte_as_before(cat):
    _same(cat)


# Texts that a YAML 1.1 reader would take for another type if they were written plain, plus
# texts the emitter must quote or write as blocks (yaml.org/spec/1.1: bool yes/no/on/off,
# null ~, int 0x/0o/sexagesimal 1:30, float .5/1e3/.inf/.nan, timestamps).
TRICKY = [
    "", " ", "yes", "No", "ON", "off", "y", "n", "true", "False", "null", "Null", "~", "0", "-1", "+1", "007",
    "0x1F", "0o17", "0b101", "1_000", "1:30", "1:30:00", ".5", "1e3", "1.0e+3", "-.inf", ".NaN", "3.",
    "2026-01-01", "2026-1-1", "2026-01-01 10:00:00", "2026-01-01T10:00:00Z", "=", "<<", "- item", "? x",
    ": x", "a: b", "a #b", "#x", "&a", "*a", "!tag", "%x", "@x", "`x", "'x'", '"x"', "[a]", "{a: b}", "a,b",
    "line one\nline two\n", "trailing newline\n", "\n leading", "tab\tinside", "  two leading spaces",
    "trailing space ", "Ümlaut – dash, 日本語, emoji 🙂", "x" * 150, "word " * 40, "|", ">", "---", "...",
]


def _edge_catalogue() -> d.Catalogue:
    attrs = [d.Attribute(key=f"a{i}", name=text or "blank", kind="other") for i, text in enumerate(TRICKY)]
    insts = []
    for i, text in enumerate(TRICKY):
        insts.append(
            d.Instrument(
                key=f"i-{i}",
                title=text,
                measures=[d.Measure(attribute=f"a{i}")],
                minutes=[1, 1.5, 1e-7, 1e20, 10**15, 1e15, 2.5e-300, 12345.678, 0.1][i % 9],
                publisher=text if i % 2 else None,
                edition=text if i % 3 else None,
                year=1990 + i % 30 if i % 4 else None,
                mode=[] if i % 2 else ["paper", "group"],
                reading_grade=None if i % 2 else 8,
                cost_per_applicant=[0, 0.0, 3.25, -0.0][i % 4],
                currency=text if i % 5 == 0 else None,
                accommodations=[] if i % 3 else [text, f"{text}!", "yes"],
                languages=[] if i % 2 else ["en", "fr-CA"],
                reliability=[d.Reliability(type="retest", value=0.8, n=i + 2, interval_days=30, sample=text,
                                           source=None)],
                validity=[] if i % 2 else [d.ValidityStudy(criterion="training", r=-0.25, n=100, source=text)],
                norms=[d.NormGroup(key="n1", group=text or "x", n=50, year=2000, scope="local", mean=-3, sd=1e-3,
                                   table=[d.PercentilePoint(10, -5), d.PercentilePoint(50.5, 0.0)])],
                subgroup_differences=[d.SubgroupDifference(groups=text, d=0.0)],
                reviews=[d.Review(date=dt.date(2001, 2, 3), by=text, note=text, stance="favourable")],
                sample_copy=None if i % 2 else d.SampleCopy(
                    requested=dt.datetime(2020, 1, 2, 3, 4, 5), received=dt.date(2020, 1, 9), checked_by=text,
                    checks=[d.SampleCheck(item=text, result="pass", note=None)],
                ),
            )
        )
    jobs = [
        d.Job(
            key="j", title="yes", requirements=[d.Requirement("a0", 5, True), d.Requirement("a1", 1, False)],
            analysis_source="2026-02-02", applicants_per_year=10, hires_per_year=1, base_rate=0.5,
            criterion_sd=1e6, tenure_years=2.0,
            # weight names are fixed in format 1; these keys are not, but the writer must
            # still give the old bytes for any mapping key, quoted or not
            policy=d.Policy(weights={"yes": 1, "123": 2.5, "a: b": 0, "": 3, "null": 1e-9, "validity": 1e6},
                            relevant_criteria=["training"], relevant_job_families=list(TRICKY[:5])),
        ),
        d.Job(key="k", title="k", requirements=[d.Requirement("a2")], policy=d.Policy(weights={})),
    ]
    return d.Catalogue(attributes=attrs, instruments=insts, jobs=jobs)


def test_edge_cases_are_written_byte_for_byte_as_before():
    text = _same(_edge_catalogue())
    # the tricky texts really were quoted or block-written where YAML needed it
    assert yaml.safe_load(text)["instruments"][2]["title"] == "yes"


def test_a_catalogue_with_nothing_but_the_format_line():
    assert _same(d.Catalogue()).endswith("format: 1\n")


def test_a_value_that_cannot_be_written_fails_and_leaves_the_old_file(tmp_path):
    cat = generate_catalogue(30, seed=5)
    cat.instruments[20].minutes = float("nan")  # late in the file: some text was already streamed
    with pytest.raises(ValueError):
        reference_dump(cat)
    with pytest.raises(ValueError):
        cio.dump_catalogue(cat)
    folder = tmp_path / "out"
    folder.mkdir()
    target = folder / "out.yaml"
    target.write_text("old\n")
    with pytest.raises(ValueError):
        cio.write_catalogue(cat, target)
    assert target.read_text() == "old\n"
    assert os.listdir(folder) == ["out.yaml"]




def test_writing_a_file_holds_about_one_record_not_the_whole_document(tmp_path):
    small, big = generate_catalogue(60, seed=9), generate_catalogue(300, seed=9)
    target = tmp_path / "big.yaml"
    cio.write_catalogue(big, target)  # warm up imports
    big_kib = target.stat().st_size // 1024
    streamed_big = peak_kib(lambda: cio.write_catalogue(big, target))
    streamed_small = peak_kib(lambda: cio.write_catalogue(small, target))
    small_kib = target.stat().st_size // 1024
    whole = peak_kib(lambda: reference_dump(big))
    # the old writer held the node graph and the text: many times the file, growing with it
    assert whole > 10 * big_kib
    # the stream holds one record's data and events, the file buffer and a bounded cache of
    # short scalar events: the same whatever the number of records
    assert streamed_big < whole / 20, (streamed_big, whole)
    assert streamed_big - streamed_small < (big_kib - small_kib) / 4, (streamed_big, streamed_small, big_kib)
