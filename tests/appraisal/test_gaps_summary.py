"""Evidence gaps, the request letter, and the catalogue summary row."""

from __future__ import annotations

import datetime as dt

from vetting.appraisal.gaps import gap_report
from vetting.appraisal.summary import summarise
from vetting.records.domain import NormGroup, Policy, Reliability, SampleCheck, SampleCopy, ValidityStudy

from tests.appraisal.factories import AS_OF, instrument, job


def test_complete_record_has_no_gaps_and_no_letter():
    rep = gap_report(instrument(), job=job(), as_of=AS_OF)
    assert rep.gaps == [] and rep.letter == ""


def test_each_gap_kind():
    ins = instrument(
        reliability=[Reliability("internal", 0.9, 300)],
        validity=[ValidityStudy("job-performance", 0.3, 80), ValidityStudy("job-performance", 0.2, 50)],
        norms=[NormGroup("old", "Adults", 900, 2001, "national", 50, 10)],
        subgroup_differences=[],
        sample_copy=SampleCopy(received=dt.date(2026, 1, 1), checked_by="me", checks=[
            SampleCheck("answer key matches", "fail", "item 12 keyed wrongly"),
            SampleCheck("timing stated", "unclear"),
            SampleCheck("instructions clear", "pass"),
        ]),
        reading_grade=None,
    )
    rep = gap_report(ins, job=job(), as_of=AS_OF)
    assert rep.codes == [
        "no_retest_reliability", "validity_small_samples", "norms_too_old", "no_subgroup_data",
        "sample_copy_failed", "sample_copy_unclear", "no_reading_grade",
    ]
    assert "item 12 keyed wrongly" in rep.gaps[4].text
    # the letter uses the record's own publisher and title, and numbers each request
    assert rep.letter.startswith("Dear Nowhere Testing Co-op team,")
    assert "Invented test alpha" in rep.letter and "Records clerk" in rep.letter
    assert "\n7. " in rep.letter and "\n8. " not in rep.letter


def test_unrelated_validity_and_missing_sample_copy():
    ins = instrument(validity=[ValidityStudy("training", 0.4, 500, job_family="sales")], sample_copy=None,
                     publisher=None)
    j = job(policy=Policy(relevant_job_families=["clerical"]))
    rep = gap_report(ins, job=j, as_of=AS_OF)
    assert "validity_unrelated_only" in rep.codes and "no_sample_copy_checked" in rep.codes
    assert rep.letter.startswith("Dear Sir or Madam,")
    none = gap_report(instrument(validity=[], reliability=[], norms=[]), as_of=AS_OF)
    assert {"no_validity", "no_reliability", "no_norms"} <= set(none.codes)


def test_summary_row():
    s = summarise(instrument(), AS_OF)
    assert (s.best_reliability, s.best_reliability_type) == (0.85, "retest")
    assert s.norm_age_years == 5 and s.norm_groups == 1
    assert s.validity_k == 2 and s.validity_n == 500 and 0 < s.conservative_validity < 0.32
    assert s.has_subgroup_data and s.sample_copy_checked
    empty = summarise(instrument(validity=[], norms=[], reliability=[], sample_copy=None), AS_OF)
    assert empty.conservative_validity is None and empty.norm_age_years is None and empty.best_reliability is None
