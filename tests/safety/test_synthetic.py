"""The synthetic catalogue generator obeys catalogue format 1 (the binding schema in issue 2 /
docs/catalogue-format.md) and is reproducible, so benchmarks and scale tests built on it
measure valid data."""

from __future__ import annotations

import dataclasses
import re

import pytest

from vetting.records import domain
from vetting.records.synthetic import generate_catalogue

KEY = re.compile(r"^[a-z0-9-]+$")  # format 1: keys are [a-z0-9-]+


@pytest.fixture(scope="module")
def cat():
    return generate_catalogue(300, seed=7)


def test_same_seed_same_catalogue_other_seed_other_catalogue():
    a = generate_catalogue(50, seed=3)
    b = generate_catalogue(50, seed=3)
    c = generate_catalogue(50, seed=4)
    assert dataclasses.asdict(a) == dataclasses.asdict(b)
    assert dataclasses.asdict(a) != dataclasses.asdict(c)


def test_sizes_are_as_asked():
    c = generate_catalogue(1234, n_jobs=17, n_attributes=45, seed=1)
    assert (len(c.instruments), len(c.jobs), len(c.attributes)) == (1234, 17, 45)
    assert generate_catalogue(0, n_jobs=0).instruments == []


def test_keys_unique_and_well_formed(cat):
    for records in (cat.attributes, cat.instruments, cat.jobs):
        keys = [r.key for r in records]
        assert len(set(keys)) == len(keys)
        assert all(KEY.match(k) for k in keys)
    for inst in cat.instruments:
        norm_keys = [n.key for n in inst.norms]
        assert len(set(norm_keys)) == len(norm_keys)


def test_references_point_to_declared_attributes(cat):
    declared = {a.key for a in cat.attributes}
    for inst in cat.instruments:
        assert inst.measures and {m.attribute for m in inst.measures} <= declared
        assert len({m.attribute for m in inst.measures}) == len(inst.measures)
    for job in cat.jobs:
        assert 5 <= len(job.requirements) <= 40  # issue 8: jobs with 5-40 requirements
        assert {r.attribute for r in job.requirements} <= declared
        assert len({r.attribute for r in job.requirements}) == len(job.requirements)


def test_values_inside_format_1_ranges(cat):
    assert {a.kind for a in cat.attributes} <= set(domain.ATTRIBUTE_KINDS)
    for inst in cat.instruments:
        assert inst.minutes > 0
        assert set(inst.mode) <= set(domain.MODES)
        assert 0 <= inst.reading_grade <= 20
        assert inst.user_qualification in domain.QUALIFICATIONS
        assert inst.reliability, "full evidence: every instrument reports reliability"
        for rel in inst.reliability:
            assert rel.type in domain.RELIABILITY_TYPES
            assert 0 < rel.value < 1 and rel.n >= 2
            assert (rel.interval_days is not None) == (rel.type == "retest")
        for v in inst.validity:
            assert v.criterion in domain.CRITERIA and v.design in domain.DESIGNS
            assert v.corrected in domain.CORRECTIONS
            assert -1 < v.r < 1 and v.n >= 2
        for norm in inst.norms:
            assert norm.scope in domain.SCOPES and norm.sd > 0 and norm.n >= 2
            pct = [p.percentile for p in norm.table]
            raw = [p.raw for p in norm.table]
            assert pct == sorted(set(pct)) and raw == sorted(set(raw))
        for review in inst.reviews:
            assert review.stance in domain.STANCES
        if inst.sample_copy and inst.sample_copy.received:
            assert inst.sample_copy.received >= inst.sample_copy.requested
            assert all(c.result in domain.CHECK_RESULTS for c in inst.sample_copy.checks)
    for job in cat.jobs:
        assert all(1 <= r.importance <= 5 for r in job.requirements)
        assert job.hires_per_year <= job.applicants_per_year
        assert 0 < job.base_rate < 1


def test_evidence_is_varied_enough_to_rank(cat):
    # A benchmark on identical records would measure nothing useful: spread is required.
    reliabilities = {r.value for i in cat.instruments for r in i.reliability}
    assert len(reliabilities) > 20
    assert any(not i.validity for i in cat.instruments)  # some lack validity evidence
    assert sum(len(i.validity) for i in cat.instruments) > len(cat.instruments)


def test_passes_the_catalogue_validator_and_round_trips():
    catalogue = pytest.importorskip("vetting.records.catalogue")
    cat = generate_catalogue(120, seed=11)
    text = catalogue.dump_catalogue(cat)
    again = catalogue.parse_catalogue(text, "synthetic.yaml")
    assert dataclasses.asdict(again) == dataclasses.asdict(cat)
