"""Evidence gaps: what a careful reviewer would still ask the publisher for.

Each gap has a short code, a line for the list, and a polite request sentence for the letter.
The letter uses only the record's own title, edition, year and publisher; the sender's name and
organisation are left as bracketed placeholders for the user to fill in.

Codes: no_reliability, no_retest_reliability, no_validity, validity_not_criterion_related,
validity_unrelated_only, validity_small_samples (every relevant study has N < 100), no_norms,
norms_too_old, no_subgroup_data,
no_sample_copy_checked, sample_copy_not_received, sample_copy_failed, sample_copy_unclear,
no_reading_grade, no_user_qualification, no_cost.
"""

from __future__ import annotations

import datetime as dt

from vetting.appraisal import components as comp
from vetting.appraisal.gates import choose_reliability
from vetting.appraisal.types import Gap, GapReport
from vetting.records.domain import Instrument, Job, Policy


def find_gaps(instrument: Instrument, *, job: Job | None = None, policy: Policy | None = None,
              as_of: dt.date | None = None) -> list[Gap]:
    """The evidence gaps of one instrument (for a job's policy when given, else the defaults)."""
    policy = policy or (job.policy if job is not None else Policy())
    as_of = as_of or dt.date.today()
    gaps: list[Gap] = []

    def add(code: str, text: str, request: str) -> None:
        gaps.append(Gap(code, text, request))

    used = choose_reliability(instrument)
    if used.value is None:
        add("no_reliability", "no reliability figure is recorded",
            "reliability coefficients for the current edition, stating the type (test-retest, "
            "alternate-form or internal consistency), the sample size and the sample")
    elif used.type not in ("retest", "alternate"):
        add("no_retest_reliability", "no test-retest or alternate-form reliability is recorded",
            "test-retest (or alternate-form) reliability, with the interval between the two "
            "administrations, the sample size and a description of the sample")

    if not instrument.validity:
        add("no_validity", "no validity study is recorded",
            "criterion-related validity studies (predictive or concurrent), with the criterion, "
            "the correlation, the sample size and the job family of each")
    else:
        used_s, excluded = comp.select_studies(instrument, policy)
        criterion_related = [s for s in instrument.validity if s.design in comp.CRITERION_DESIGNS]
        if not criterion_related:
            add("validity_not_criterion_related", "the validity evidence holds no criterion-related study",
                "criterion-related validity studies (predictive or concurrent) relating scores to job outcomes")
        elif not used_s:
            wanted = []
            if policy.relevant_criteria:
                wanted.append("criteria: " + ", ".join(policy.relevant_criteria))
            if policy.relevant_job_families:
                wanted.append("job families: " + ", ".join(policy.relevant_job_families))
            detail = f" ({'; '.join(wanted)})" if wanted else ""
            add("validity_unrelated_only",
                f"validity studies exist only for unrelated criteria or job families{detail}",
                f"validity evidence for work and outcomes like ours{detail}, if any is available")
        elif all(u.n < comp.SMALL_STUDY_N for u in used_s):
            total = sum(u.n for u in used_s)
            add("validity_small_samples",
                f"every relevant validity study has fewer than {comp.SMALL_STUDY_N} people (total N = {total})",
                "any further or larger validity studies, or a summary across studies, for comparable jobs")

    if not instrument.norms:
        add("no_norms", "no norm group is recorded",
            "norm tables for the current edition, with the year, size, scope and composition of each norm group")
    else:
        newest = max(n.year for n in instrument.norms)
        if as_of.year - newest > policy.max_norm_age_years:
            add("norms_too_old",
                f"the newest norm group ({newest}) is older than the {policy.max_norm_age_years} years the policy allows",
                f"norms collected more recently than {newest}, or a statement on whether a renorming is planned")

    if not instrument.subgroup_differences:
        add("no_subgroup_data", "no subgroup differences (d) are recorded",
            "standardised mean score differences between demographic subgroups (e.g. by sex, "
            "age group and ethnic group), with the sample sizes")

    sc = instrument.sample_copy
    if sc is None or (sc.received is None and not sc.checks):
        if sc is not None and sc.requested is not None:
            add("sample_copy_not_received", f"a sample copy was requested on {sc.requested.isoformat()} but not received",
                "the inspection (sample) copy we requested, including the administration and scoring instructions")
        else:
            add("no_sample_copy_checked", "no sample copy has been checked",
                "an inspection (sample) copy, including the administration and scoring instructions")
    elif not sc.checks:
        add("no_sample_copy_checked", "the sample copy has not been checked yet", "")
    else:
        failed = [c for c in sc.checks if c.result == "fail"]
        unclear = [c for c in sc.checks if c.result == "unclear"]
        if failed:
            items = "; ".join(c.item + (f" ({c.note})" if c.note else "") for c in failed)
            add("sample_copy_failed", f"sample-copy checks failed: {items}",
                f"your comments on points our check of the sample copy found wanting: {items}")
        if unclear:
            items = "; ".join(c.item + (f" ({c.note})" if c.note else "") for c in unclear)
            add("sample_copy_unclear", f"sample-copy checks unclear: {items}",
                f"clarification of points our check of the sample copy could not settle: {items}")

    if instrument.reading_grade is None:
        add("no_reading_grade", "the reading level of the material is not recorded",
            "the reading level (grade) of the instructions and items")
    if instrument.user_qualification is None:
        add("no_user_qualification", "the required user qualification is not recorded",
            "the qualification required to buy, administer and interpret the instrument")
    if instrument.cost_per_applicant is None:
        add("no_cost", "the cost per applicant is not recorded", "current prices per applicant, including any licence fees")
    return gaps


def request_letter(instrument: Instrument, gaps: list[Gap], job: Job | None = None) -> str:
    """A ready-to-send request letter for the gaps ('' when there is nothing to ask for)."""
    requests = [g.request for g in gaps if g.request]
    if not requests:
        return ""
    name = instrument.title
    if instrument.edition:
        name += f", {instrument.edition}"
    if instrument.year:
        name += f" ({instrument.year})"
    greeting = f"Dear {instrument.publisher} team," if instrument.publisher else "Dear Sir or Madam,"
    purpose = f" for the position of {job.title}" if job is not None else ""
    lines = [
        greeting,
        "",
        f"We are reviewing {name} as a possible selection instrument{purpose}. To complete a careful "
        "review of the evidence before any decision about its use, we would be grateful if you could "
        "send us the following:",
        "",
    ]
    lines += [f"{i}. {text[0].upper()}{text[1:]}." for i, text in enumerate(requests, start=1)]
    lines += [
        "",
        "Where this information is in a technical manual or a published study, a reference to the "
        "document and page is enough. Please tell us if any of it is not available.",
        "",
        "Thank you for your help.",
        "",
        "Kind regards,",
        "",
        "[your name]",
        "[your organisation]",
    ]
    return "\n".join(lines) + "\n"


def gap_report(instrument: Instrument, *, job: Job | None = None, policy: Policy | None = None,
               as_of: dt.date | None = None) -> GapReport:
    gaps = find_gaps(instrument, job=job, policy=policy, as_of=as_of)
    return GapReport(
        instrument=instrument.key,
        title=instrument.title,
        publisher=instrument.publisher,
        gaps=gaps,
        letter=request_letter(instrument, gaps, job),
    )
