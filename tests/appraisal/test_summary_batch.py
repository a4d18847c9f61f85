"""The catalogue table's figures (summarise / summarise_all) are the figures the ranking uses.

summarise takes a shorter path than components.validity_detail (no rule text, no meta-analysis
of a single study); these checks hold it to the ranking's own validity synthesis and
reliability choice over a seeded synthetic catalogue, with and without a job's policy.
"""

from __future__ import annotations

import datetime as dt

import pytest

from vetting.appraisal import components as comp
from vetting.appraisal.gates import choose_reliability
from vetting.appraisal.summary import summarise, summarise_all
from vetting.records.domain import Policy
from vetting.records.synthetic import generate_catalogue

AS_OF = dt.date(2026, 11, 1)


@pytest.fixture(scope="module")
def catalogue():
    return generate_catalogue(300, seed=7)


def _policies(cat):
    yield Policy()
    for job in cat.jobs[:3]:
        policy = getattr(job, "policy", None)
        if policy is not None:
            yield policy


def test_summarise_all_is_summarise_for_each(catalogue):
    for policy in _policies(catalogue):
        assert summarise_all(catalogue.instruments, AS_OF, policy) == [
            summarise(i, AS_OF, policy) for i in catalogue.instruments
        ]


def test_figures_are_the_rankings(catalogue):
    seen_validity = 0
    for policy in _policies(catalogue):
        for inst, row in zip(catalogue.instruments, summarise_all(catalogue.instruments, AS_OF, policy)):
            detail = comp.validity_detail(inst, policy)
            assert row.conservative_validity == detail.conservative
            assert (row.validity_k, row.validity_n) == (detail.k, detail.total_n)
            rel = choose_reliability(inst)
            assert (row.best_reliability, row.best_reliability_type) == (rel.value, rel.type)
            seen_validity += row.conservative_validity is not None
    assert seen_validity > 50  # the catalogue exercises the synthesis, not only empty rows


def test_empty_list():
    assert summarise_all([], AS_OF) == []
